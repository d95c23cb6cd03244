"""`uvfit closures DATA [--model FIT.json | MODEL.toml]`: closure phases and closure amplitudes of
the data, and how well a model reproduces them (per triangle, quadrangle and station)."""

import click

from ._common import (
    as_options,
    at_least_zero,
    check_outputs,
    closure_options,
    echo_notes,
    force_option,
    joint_data,
    pop_closure_options,
    pop_selection,
    selection_options,
    worded,
)


@click.command("closures")
@click.argument("data", nargs=-1, required=True, type=click.Path())
@click.option(
    "--model",
    "model_path",
    default=None,
    metavar="FIT.json|MODEL.toml",
    help="Compare the closures of this model (a fit result or a model file) with the data.",
)
@click.option(
    "--systematic",
    type=float,
    callback=at_least_zero,
    default=None,
    metavar="F",
    help="Systematic floor: fraction of |V| added in quadrature to each visibility's sigma "
    "(default 0, or the fit's value when --model is a fit result).",
)
@click.option(
    "--full",
    is_flag=True,
    help="Every triangle and quadrangle (redundant) instead of a non-redundant set per snapshot.",
)
@click.option(
    "--covariance",
    type=click.Choice(["snapshot", "diagonal"]),
    default=None,
    help="Errors of the chi2 totals: full covariance within each snapshot (default for the "
    "non-redundant set) or diagonal (always for --full).",
)
@click.option("--json", "json_out", default=None, metavar="OUT", help="Also write the results as JSON.")
@click.option(
    "--table",
    "table_out",
    default=None,
    metavar="OUT.ecsv",
    help="Write every closure quantity (time, stations, value, sigma, model) as ECSV.",
)
@closure_options
@selection_options
@force_option
def command(data, model_path, systematic, full, covariance, json_out, table_out, force, **kwargs):
    """Closure phases and log closure amplitudes of DATA; with --model, whether they support it.

    Closure quantities do not change with station-based gain errors, so a model that fits the
    visibilities but not the closures owes its structure to calibration. They are not immune to
    baseline-based errors, and cannot fix the absolute position or the total flux.
    """
    from .. import tasks
    from ..outputs import atomic_write_with, write_json

    data, data_inputs = joint_data(data)
    check_outputs({"--json": json_out, "--table": table_out}, {**data_inputs, "the model": model_path}, force)
    closure = pop_closure_options(kwargs)
    selection = pop_selection(kwargs)
    if selection.get("average"):
        click.echo(
            "note: averaging gives every row of a time bin the bin's common time; closures "
            "are formed among rows with exactly the same time",
            err=True,
        )
    with as_options():
        report = tasks.closures(
            data, model_path, systematic=systematic, full=full, covariance=covariance, selection=selection, **closure
        )
    echo_notes(report.notes)
    click.echo(worded(report.text()))
    if json_out:
        write_json(json_out, report.to_dict(), force=force)
        click.echo(f"wrote {json_out}", err=True)
    if table_out:
        table = report.table()
        atomic_write_with(table_out, lambda p: table.write(p, format="ascii.ecsv"), force=force)
        click.echo(f"wrote {table_out}", err=True)
