"""uvfit jackknife DATA MODEL --by station|scan|channel: the spread from the data kept."""

import click

from ..stats.modes import MODES
from ._common import (
    GAIN_OPTION_NAMES,
    as_options,
    closure_options,
    echo_notes,
    force_option,
    gain_options,
    joint_data,
    pop_closure_options,
    pop_gains,
    pop_selection,
    procs_option,
    seed_option,
    selection_options,
    worded,
)


@click.command("jackknife")
@click.argument("data", nargs=-1, required=True, type=click.Path(dir_okay=False))
@click.argument("model", type=click.Path(dir_okay=False))
@click.option(
    "--by",
    type=click.Choice(["station", "scan", "channel"]),
    default="station",
    show_default=True,
    help="The group left out of each refit.",
)
@click.option(
    "--mode",
    type=click.Choice(list(MODES)),
    default="complex",
    show_default=True,
    help="What is fitted (as for uvfit fit).",
)
@click.option(
    "--systematic",
    type=float,
    default=0.0,
    show_default=True,
    help="Fraction of |V| added in quadrature to every sigma.",
)
@click.option("--starts", type=int, default=1, show_default=True, help="Starts of each fit.")
@click.option(
    "--redshift",
    type=float,
    default=0.0,
    show_default=True,
    help="Source redshift, for rest-frame brightness temperatures.",
)
@click.option(
    "--json",
    "json_out",
    type=click.Path(dir_okay=False),
    default=None,
    help="Write the per-group results and errors as JSON here.",
)
@closure_options
@seed_option
@procs_option("Run the refits, and the starts, in N processes.")
@gain_options
@force_option
@selection_options
def command(data, model, by, mode, systematic, starts, redshift, json_out, seed, procs, force, **kwargs):
    """Refit MODEL to DATA with each station, scan or channel left out, and compare the jackknife
    error of every parameter and derived quantity with the formal error of the full fit. Scans
    come from the data's scan numbers when present, else from gaps in time."""
    from .. import tasks
    from ..outputs import check_writable, write_json

    data, _ = joint_data(data)
    closure = pop_closure_options(kwargs)
    with as_options():  # refused before any work, naming the option
        tasks.closure_options(mode, **closure)
    selection = pop_selection(kwargs)
    gains = pop_gains(kwargs)
    if json_out:
        check_writable(json_out, force)
    with as_options(by="--by", starts="--starts", **GAIN_OPTION_NAMES):
        report = tasks.jackknife(
            data,
            model,
            by=by,
            mode=mode,
            systematic=systematic,
            starts=starts,
            seed=seed,
            redshift=redshift,
            selection=selection,
            procs=procs,
            **gains,
            **tasks.closure_options(mode, **closure),
        )
    echo_notes(report.notes)
    click.echo(worded(report.text()))
    if json_out:
        write_json(json_out, report.to_dict(), force=force)
        click.echo(f"wrote {json_out}", err=True)
