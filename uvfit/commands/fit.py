"""uvfit fit DATA MODEL: least-squares fit of a sky model, with errors and derived quantities."""
import click

from ..stats.modes import MODES
from ._common import (force_option, load_data, pop_read_options, pop_selection, read_options,
                      seed_option, selection_options)


def _fmt(value, error=None):
    if value is None:
        return "-"
    if error is None:
        return f"{value:.6g}"
    if error != error or error == float("inf"):
        return f"{value:.6g} ± unconstrained"
    return f"{value:.6g} ± {error:.2g}"


def print_fit(out, echo=click.echo):
    """The human table of a fit result dictionary (as returned by uvfit.infer.run.run_fit)."""
    st = out["statistics"]
    echo(f"mode {out['mode']}, {st['n_data']} data, {st['n_free']} free parameters, "
         f"systematic floor {out['systematic']:g}, seed {out['seed']}")
    echo("")
    echo(f"{'parameter':<28} {'value ± error':<30} {'unit':<6} status")
    for name, p in out["parameters"].items():
        status = "free" if p["free"] else (f"tied to {p['tie']}" if p.get("tie") else "fixed")
        echo(f"{name:<28} {_fmt(p['value'], p['error'] if p['free'] or p.get('tie') else None):<30} "
             f"{p['unit']:<6} {status}")
    if out["derived"]:
        echo("")
        echo(f"{'derived quantity':<36} {'value ± error':<30} unit")
        for key, d in out["derived"].items():
            if d.get("alias_of"):
                continue
            if key.endswith(".resolved"):
                verdict = "yes" if d.get("resolved") else ("no" if d.get("resolved") is False else "?")
                echo(f"{key:<36} {verdict} (delta chi2 {d['delta_chi2']:.3g}, p = {d['value']:.3g})")
                continue
            text = _fmt(d["value"], d["error"])
            if "upper_limit" in d:
                text += f"  (< {d['upper_limit']:.3g})"
            if "lower_limit" in d:
                text += f"  (> {d['lower_limit']:.3g})"
            echo(f"{key:<36} {text:<30} {d['unit']}")
    echo("")
    echo(f"chi2 {st['chi2']:.6g} for {st['dof']} degrees of freedom (reduced {st['reduced_chi2']:.4g}); "
         f"AIC {st['aic']:.6g}, BIC {st['bic']:.6g}")
    if out["rescale_errors"]:
        echo(f"errors scaled by {out['error_scale']:.4g} (reduced chi2 set to 1)")
    for label, key in (("stations", "per_station"), ("baselines", "per_baseline")):
        table = out.get(key) or {}
        if not table:
            continue
        worst = sorted(table.items(), key=lambda kv: -(kv[1]["chi2"] / max(kv[1]["n"], 1)))[:5]
        echo(f"worst {label} (chi2 / n): " + ", ".join(
            f"{k} {v['chi2'] / max(v['n'], 1):.3g} ({v['n']})" for k, v in worst))
    for note in out["notices"]:
        echo(f"notice: {note}")
    for caution in out["cautions"]:
        echo(f"caution: {caution}")


@click.command("fit")
@click.argument("data", type=click.Path())
@click.argument("model", type=click.Path(dir_okay=False))
@click.option("--mode", type=click.Choice(list(MODES)), default="complex", show_default=True,
              help="What is fitted: " + "; ".join(f"{k}: {v[2]}" for k, v in MODES.items()) + ".")
@click.option("--systematic", type=float, default=0.0, show_default=True,
              help="Fraction of |V| added in quadrature to every sigma (e.g. 0.02).")
@click.option("--rescale-errors", is_flag=True,
              help="Scale the errors by sqrt(chi2/dof), as if the sigmas gave a reduced chi2 of 1.")
@click.option("--starts", type=int, default=1, show_default=True,
              help="Number of starts: the model's values, then random ones inside the bounds.")
@click.option("--global-search", is_flag=True,
              help="Search chi2 globally inside the bounds first (needs a finite min and max everywhere).")
@click.option("--redshift", type=float, default=0.0, show_default=True,
              help="Source redshift, for rest-frame brightness temperatures.")
@click.option("--max-evaluations", type=int, default=None,
              help="Most model evaluations per start (default 200 x (free parameters + 1)).")
@click.option("--no-resolved-test", is_flag=True, help="Skip the refits that test whether each component is resolved.")
@click.option("--json", "json_out", type=click.Path(dir_okay=False), default=None,
              help="Write the full result as JSON here.")
@click.option("--save-model", type=click.Path(dir_okay=False), default=None,
              help="Write the best-fit model (TOML) here.")
@click.option("--write-model-column", is_flag=True,
              help="Write the best-fit model visibilities into the Measurement Set's MODEL_DATA column "
                   "(created if absent; DATA is never touched).")
@seed_option
@force_option
@selection_options
@read_options
def command(data, model, mode, systematic, rescale_errors, starts, global_search, redshift,
            max_evaluations, no_resolved_test, json_out, save_model, seed, force,
            write_model_column=False, **kwargs):
    """Fit MODEL (a TOML model file) to the visibilities in DATA by least squares.

    Prints every parameter with its error, the derived quantities (separations, position angles,
    flux ratios, sizes, brightness temperatures, whether each component is resolved), the
    goodness of fit and the stations and baselines that fit worst.
    """
    from .. import load_model
    from ..infer.run import run_fit
    from ..outputs import check_writable, write_json

    selection = pop_selection(kwargs)
    reading = pop_read_options(kwargs)
    for path in (json_out, save_model):
        if path:
            check_writable(path, force)
    if write_model_column:
        from ..data.ms import check_model_column_writable
        check_model_column_writable(data)
    sky = load_model(model)
    vset = load_data(data, selection, read_options=reading)
    if max_evaluations is not None and max_evaluations < 1:
        from ..errors import UvfitError
        raise UvfitError(f"--max-evaluations must be at least 1 (got {max_evaluations})")
    common = dict(mode=mode, systematic=systematic, rescale_errors=rescale_errors, starts=starts,
                  seed=seed, global_search=global_search, redshift=redshift, data_path=data,
                  selection=selection, resolved_test=not no_resolved_test,
                  max_evaluations=max_evaluations)
    total = starts + (1 if global_search else 0)
    if total > 1:
        with click.progressbar(length=total, label="fitting", file=click.get_text_stream("stderr")) as bar:
            out = run_fit(vset, sky, progress=bar.update, **common)
    else:
        out = run_fit(vset, sky, **common)
    out["model_file"] = str(model)
    if vset.meta.get("format") == "ms":      # what was read from a Measurement Set (only then)
        out["read_options"] = dict(reading, column=vset.meta["ms_column"], field=vset.meta["ms_field"],
                                   spw=list(vset.meta["ms_spws_read"]))
    print_fit(out)
    if json_out:
        write_json(json_out, out, force=force)
        click.echo(f"wrote {json_out}", err=True)
    if save_model:
        from ..outputs import atomic_write
        atomic_write(save_model, out["model_toml"], force=force)
        click.echo(f"wrote {save_model}", err=True)
    if write_model_column:
        from ..data.ms import write_model_column as write_column
        from ..sky.modelfile import loads
        done = write_column(data, loads(out["model_toml"]), field=reading.get("field"),
                            spw=reading.get("spw"))
        click.echo(f"wrote the best-fit model into {done['column']} of {data} ({done['rows_written']} of "
                   f"{done['rows_total']} rows{'; column created' if done['created'] else ''})", err=True)
