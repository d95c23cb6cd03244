"""uvfit compare DATA MODEL_A MODEL_B [...]: which model do the data require?"""
import os

import click

from ..stats.modes import MODES
from ._common import (
    force_option, load_data, pop_read_options, pop_selection, read_options, seed_option,
    selection_options)


def print_compare(out, echo=click.echo):
    echo(f"mode {out['mode']}, systematic floor {out['systematic']:g}, seed {out['seed']}, "
         f"{out['n_bootstrap']} bootstrap simulations")
    echo("")
    echo(f"{'model':<24} {'n_free':>6} {'chi2':>12} {'dof':>6} {'AIC':>12} {'BIC':>12} "
         f"{'2 ln LR':>10} {'FAP':>8}")
    for r in out["models"]:
        fap = r["false_alarm_probability"]
        fap_text = "-" if fap is None else f"{fap:.3g}"
        echo(f"{r['name']:<24} {r['n_free']:>6} {r['chi2']:>12.6g} {r['dof']:>6} {r['aic']:>12.6g} "
             f"{r['bic']:>12.6g} {r['likelihood_ratio']:>10.4g} {fap_text:>8}")
    echo("")
    echo(f"2 ln LR: chi2 of the simplest model ('{out['simplest']}') minus the model's chi2.")
    for r in out["models"]:
        for note in r.get("notices", []):
            echo(f"notice ({r['name']}): {note}")
    if out.get("n_failed_refits"):
        echo(f"notice: {out['n_failed_refits']} bootstrap refits failed and were left out")
    echo(f"verdict: {out['verdict']}")


@click.command("compare")
@click.argument("data", type=click.Path())
@click.argument("models", nargs=-1, required=True, type=click.Path(dir_okay=False))
@click.option("--mode", type=click.Choice(list(MODES)), default="complex", show_default=True,
              help="What is fitted (as for uvfit fit).")
@click.option("--systematic", type=float, default=0.0, show_default=True,
              help="Fraction of |V| added in quadrature to every sigma.")
@click.option("--starts", type=int, default=1, show_default=True, help="Starts of each model's fit to the data.")
@click.option("--bootstrap", type=int, default=0, show_default=True,
              help="Simulated data sets for the false-alarm probability of each richer model.")
@click.option("--json", "json_out", type=click.Path(dir_okay=False), default=None,
              help="Write the comparison as JSON here.")
@seed_option
@force_option
@selection_options
@read_options
def command(data, models, mode, systematic, starts, bootstrap, json_out, seed, force, **kwargs):
    """Fit two or more MODELS to DATA and say whether the richer ones are required.

    Reports chi2, AIC and BIC of each model and, against the model with the fewest free
    parameters, the likelihood ratio; with --bootstrap N, its false-alarm probability calibrated
    on N simulations of the simpler best fit on the same (u, v) coverage and errors.
    """
    from .. import load_model
    from ..errors import UvfitError
    from ..infer.compare import compare
    from ..outputs import check_writable, write_json

    if len(models) < 2:
        raise UvfitError("compare needs at least two model files", "give MODEL_A MODEL_B [...]")
    selection = pop_selection(kwargs)
    reading = pop_read_options(kwargs)
    if json_out:
        check_writable(json_out, force)
    skies = [load_model(m) for m in models]
    names = [os.path.splitext(os.path.basename(m))[0] for m in models]
    vset = load_data(data, selection, read_options=reading)
    if bootstrap > 0:
        with click.progressbar(length=bootstrap, label="bootstrap",
                               file=click.get_text_stream("stderr")) as bar:
            out = compare(vset, skies, mode=mode, systematic=systematic, bootstrap=bootstrap,
                          seed=seed, progress=bar.update, starts=starts, names=names)
    else:
        out = compare(vset, skies, mode=mode, systematic=systematic, bootstrap=0, seed=seed,
                      starts=starts, names=names)
    out["data"] = str(data)
    out["selection"] = selection
    out["model_files"] = list(models)
    print_compare(out)
    if json_out:
        write_json(json_out, out, force=force)
        click.echo(f"wrote {json_out}", err=True)
