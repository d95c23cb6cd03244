"""`uvfit closures DATA [--model FIT.json | MODEL.toml]`: closure phases and closure amplitudes of
the data, and how well a model reproduces them (per triangle, quadrangle and station)."""
import json
import os

import click

from ..errors import ModelError, UvfitError
from ._common import (
    force_option, load_data, pop_read_options, pop_selection, read_options, selection_options)


def load_any_model(path):
    """(model, info) from a model file (.toml) or a fit result (.json with "model_toml")."""
    if not os.path.exists(path):
        raise UvfitError(f"model file {path} does not exist", "give a model file (.toml) or a fit "
                         "result (.json written by uvfit fit --json)")
    if str(path).lower().endswith(".json"):
        try:
            with open(path, encoding="utf-8") as handle:
                doc = json.load(handle)
        except (OSError, ValueError) as exc:
            raise ModelError(f"{path} is not a readable JSON file ({exc})",
                             "give the JSON written by uvfit fit --json, or a model file (.toml)")
        text = doc.get("model_toml") if isinstance(doc, dict) else None
        if not text:
            raise ModelError(f"{path} holds no best-fit model (no 'model_toml' key)",
                             "give the JSON written by uvfit fit --json, or a model file (.toml)")
        from ..sky.modelfile import loads
        return loads(text, path=path), {"model_from": "fit result", "fit_mode": doc.get("mode"),
                                        "fit_systematic": doc.get("systematic")}
    from .. import load_model
    return load_model(path), {"model_from": "model file"}


def _fmt(x, spec=".4g"):
    return "-" if x is None else format(x, spec)


def render(res):
    """The human table of a check_closures result."""
    lines = [
        f"stations              {res['n_stations']} ({res['n_stations_in_closures']} in closures)",
        f"snapshots             {res['n_snapshots']}",
        f"closure set           {res['set']}, SNR cut {res['snr_cut']:g} on each visibility, "
        f"systematic floor {100 * res['systematic']:g}% of |V|",
        f"closure phases        {res['n_closure_phases']} on {res['n_triangles']} triangles",
        f"closure amplitudes    {res['n_closure_amplitudes']} (log) on {res['n_quadrangles']} quadrangles",
        f"errors                {res['covariance']}",
    ]
    if "closure_phase_chi2" in res:
        lines += [
            "",
            f"closure phase chi2    {_fmt(res['closure_phase_chi2'])}  reduced "
            f"{_fmt(res['closure_phase_reduced_chi2'])}  (expected 1 +/- "
            f"{_fmt(res['closure_phase_expected_spread'], '.2g')})",
            f"log closure amp. chi2 {_fmt(res['closure_amplitude_chi2'])}  reduced "
            f"{_fmt(res['closure_amplitude_reduced_chi2'])}  (expected 1 +/- "
            f"{_fmt(res['closure_amplitude_expected_spread'], '.2g')})",
        ]
        for title, key, label in (("worst triangles", "worst_triangles", "label"),
                                  ("worst quadrangles", "worst_quadrangles", "label"),
                                  ("worst stations", "worst_stations", "station")):
            rows = res.get(key) or []
            if not rows:
                continue
            lines.append("")
            lines.append(f"{title} (reduced chi2 per closure, n, chi2; diagonal errors)")
            for r in rows:
                lines.append(f"  {r[label]:<16} {r['reduced_chi2']:>10.3g} {r['n']:>6d} {r['chi2']:>12.4g}")
        lines += ["", res["verdict"]]
    lines += ["", "Caution: " + res["caution"]]
    return "\n".join(lines)


@click.command("closures")
@click.argument("data", type=click.Path())
@click.option("--model", "model_path", default=None, metavar="FIT.json|MODEL.toml",
              help="Compare the closures of this model (a fit result or a model file) with the data.")
@click.option("--systematic", type=float, default=None, metavar="F",
              help="Systematic floor: fraction of |V| added in quadrature to each visibility's sigma "
                   "(default 0, or the fit's value when --model is a fit result).")
@click.option("--snr-cut", type=float, default=3.0, show_default=True, metavar="X",
              help="Use only visibilities with |V|/sigma of at least X.")
@click.option("--full", is_flag=True, help="Every triangle and quadrangle (redundant) instead of a "
                                           "non-redundant set per snapshot.")
@click.option("--covariance", type=click.Choice(["snapshot", "diagonal"]), default=None,
              help="Errors of the chi2 totals: full covariance within each snapshot (default for the "
                   "non-redundant set) or diagonal (always for --full).")
@click.option("--json", "json_out", default=None, metavar="OUT", help="Also write the results as JSON.")
@click.option("--table", "table_out", default=None, metavar="OUT.ecsv",
              help="Write every closure quantity (time, stations, value, sigma, model) as ECSV.")
@selection_options
@read_options
@force_option
def command(data, model_path, systematic, snr_cut, full, covariance, json_out, table_out, force, **kwargs):
    """Closure phases and log closure amplitudes of DATA; with --model, whether they support it.

    Closure quantities do not change with station-based gain errors, so a model that fits the
    visibilities but not the closures owes its structure to calibration. They are not immune to
    baseline-based errors, and cannot fix the absolute position or the total flux.
    """
    from ..outputs import atomic_write_with, check_writable, write_json
    from ..stats.closure import check_closures, closure_table, json_summary

    for out in (json_out, table_out):
        if out:
            check_writable(out, force)
    if json_out and table_out and os.path.abspath(json_out) == os.path.abspath(table_out):
        raise UvfitError("--json and --table name the same file", "give two different file names")
    selection = pop_selection(kwargs)
    reading = pop_read_options(kwargs)
    if selection.get("average"):
        click.echo("note: averaging gives every row of a time bin the bin's common time; closures "
                   "are formed among rows with exactly the same time", err=True)
    vset = load_data(data, selection, read_options=reading)
    model, info = (None, {})
    if model_path:
        model, info = load_any_model(model_path)
    if systematic is None:
        systematic = float(info.get("fit_systematic") or 0.0)
    res = check_closures(vset, model, systematic=systematic, snr_cut=snr_cut, full=full,
                         covariance=covariance)
    click.echo(render(res))
    summary = json_summary(res)
    summary.update({"data": str(data), "model": model_path, **info,
                    "selection": {k: v for k, v in selection.items() if v not in (None, (), "")}})
    if json_out:
        write_json(json_out, summary, force=force)
        click.echo(f"wrote {json_out}", err=True)
    if table_out:
        table = closure_table(res)
        atomic_write_with(table_out, lambda p: table.write(p, format="ascii.ecsv"), force=force)
        click.echo(f"wrote {table_out}", err=True)
