"""uvfit forecast: repeated simulations and fits, to see whether an array can tell models apart."""
import os

import click

from ._common import force_option, seed_option
from ._observation import observation_options, pop_observation

MODES = ["complex", "amplitude", "closure_phase", "closure_amplitude", "closure", "hybrid"]


@click.command("forecast")
@click.argument("array_file", metavar="ARRAY", type=click.Path(dir_okay=False))
@click.argument("true_file", metavar="MODEL_TRUE", type=click.Path(dir_okay=False))
@click.argument("alt_files", metavar="MODEL_ALT...", nargs=-1, required=True, type=click.Path(dir_okay=False))
@observation_options
@click.option("--trials", type=int, default=20, show_default=True, help="Number of simulated data sets.")
@click.option("--mode", type=click.Choice(MODES), default="complex", show_default=True,
              help="Statistic the fits use (a closure mode when there are gain errors).")
@click.option("--starts", type=int, default=1, show_default=True, help="Fit starts per model and trial.")
@click.option("--json", "json_path", default=None, type=click.Path(dir_okay=False),
              help="Write the forecast (all numbers, per trial, seeds) as JSON here.")
@seed_option
@force_option
def command(array_file, true_file, alt_files, trials, mode, starts, json_path, seed, force, **kwargs):
    """Simulate MODEL_TRUE --trials times with ARRAY, fit MODEL_TRUE and every MODEL_ALT to each,
    and report how often the true structure is recovered and preferred.

    Trial k uses seed SEED + k. The answer holds for the assumed array performance and model
    families only; real data carry calibration errors the simulation may not.
    """
    from .. import load_model
    from ..outputs import check_writable, write_json
    from ..sim.array import load_array
    from ..sim.forecast import forecast

    observation, corruption = pop_observation(kwargs)
    if json_path:
        check_writable(json_path, force)
    array = load_array(array_file)
    true_model = load_model(true_file)
    alts = [load_model(p) for p in alt_files]
    names = [os.path.splitext(os.path.basename(p))[0] for p in alt_files]
    with click.progressbar(length=trials, label="forecast trials", file=click.get_text_stream("stderr")) as bar:
        out = forecast(array, true_model, alts, observation, trials, mode=mode, seed=seed,
                       starts=starts, true_name=os.path.splitext(os.path.basename(true_file))[0],
                       alt_names=names, progress=bar.update, **corruption)
    if out["notice"]:
        click.echo(out["notice"], err=True)
    click.echo(format_forecast(out))
    if json_path:
        write_json(json_path, out, force=force)


def format_forecast(out):
    lines = [
        f"forecast: {out['trials']} trials of '{out['true_model']}' ({out['true_free_parameters']} free) "
        f"with array '{out['array']}', "
        f"mode {out['mode']}, seed {out['seed']} (trial k uses seed {out['seed']} + k)",
        f"rows per trial: {out['rows_per_trial']}; nominal resolution "
        f"{out['nominal_resolution_uas']:.1f} microarcsec",
        f"true structure recovered (all free parameters within 3 sigma): "
        f"{out['recovered_fraction']:.0%}" + (f" ({out['true_fit_failures']} fits failed)"
                                               if out["true_fit_failures"] else ""),
        f"true model preferred over every alternative: by BIC {out['preferred_bic_fraction']:.0%}, "
        f"by likelihood ratio {out['preferred_lr_fraction']:.0%}",
    ]
    for a in out["alternatives"]:
        d = a["delta_chi2"]
        med = "-" if d["median"] is None else f"{d['median']:.1f} [{d['p16']:.1f}, {d['p84']:.1f}]"
        rule = (f"threshold delta chi2 {a['lr_threshold_delta_chi2']:.2f}"
                if a["free_parameters"] != out["true_free_parameters"]
                else "same number of free parameters: higher likelihood")
        lines.append(f"  vs {a['name']} ({a['free_parameters']} free): BIC {a['true_preferred_bic_fraction']:.0%}, "
                     f"LR {a['true_preferred_lr_fraction']:.0%} ({rule}); "
                     f"delta chi2 = chi2_alt - chi2_true, median [16%, 84%] {med}")
    if out["structure"]:
        lines.append("recovered structure, median [16%, 84%] (true value):")
        for key, s in out["structure"].items():
            if s["median"] is None:
                lines.append(f"  {key:<28s} -")
            else:
                lines.append(f"  {key:<28s} {s['median']:.4g} [{s['p16']:.4g}, {s['p84']:.4g}]  ({s['true']:.4g})")
    lines.append("caution: " + out["cautions"][0])
    return "\n".join(lines)
