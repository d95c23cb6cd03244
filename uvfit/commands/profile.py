"""uvfit profile DATA MODEL --parameter NAME: chi2 of one parameter with every other refitted."""

import click

from ..stats.modes import MODES
from ._common import (
    as_options,
    closure_options,
    echo_notes,
    force_option,
    joint_data,
    pop_closure_options,
    pop_selection,
    procs_option,
    progressbar,
    seed_option,
    selection_options,
    worded,
)


@click.command("profile")
@click.argument("data", nargs=-1, required=True, type=click.Path(dir_okay=False))
@click.argument("model", type=click.Path(dir_okay=False))
@click.option(
    "--parameter",
    required=True,
    metavar="NAME",
    help="The free parameter profiled, as component.parameter (e.g. ring.diameter).",
)
@click.option(
    "--range",
    "value_range",
    type=float,
    nargs=2,
    default=None,
    metavar="LO HI",
    help="Values of the parameter (its model unit; default best fit +/- 5 errors).",
)
@click.option("--points", type=int, default=21, show_default=True, help="Grid values in the range.")
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
@click.option(
    "--starts",
    type=int,
    default=3,
    show_default=True,
    help="Starts of the fit, and per grid value besides the neighbour's solution.",
)
@click.option(
    "--json", "json_out", type=click.Path(dir_okay=False), default=None, help="Write the profile as JSON here."
)
@click.option(
    "--plot",
    "plot_out",
    type=click.Path(dir_okay=False),
    default=None,
    metavar="OUT.png",
    help="Write the figure of the profile here.",
)
@closure_options
@seed_option
@procs_option("Refit the grid values on either side of the best fit, and the starts, in N processes.")
@force_option
@selection_options
def command(
    data,
    model,
    parameter,
    value_range,
    points,
    mode,
    systematic,
    starts,
    json_out,
    plot_out,
    seed,
    procs,
    force,
    **kwargs,
):
    """Profile the chi2 of one parameter of MODEL on DATA: at each value every other free
    parameter is refitted. Prints delta chi2 on the grid and the 68% and 95% intervals
    (delta chi2 = 1 and 3.84), several when the profile has several dips."""
    from .. import tasks
    from ..outputs import check_writable, write_json
    from ..show.profile_plot import write_profile_plot

    data, _ = joint_data(data)
    closure = pop_closure_options(kwargs)
    with as_options():  # refused before any work, naming the option
        tasks.closure_options(mode, **closure)
    selection = pop_selection(kwargs)
    for path in (json_out, plot_out):
        if path:
            check_writable(path, force)
    # 'parameter' stays a word: the library's messages say "parameter X is not free"
    with as_options(points="--points", starts="--starts"):
        with progressbar(points + 1, "profiling") as bar:
            report = tasks.profile(
                data,
                model,
                parameter,
                value_range=value_range,
                points=points,
                mode=mode,
                systematic=systematic,
                starts=starts,
                seed=seed,
                selection=selection,
                progress=bar.update,
                procs=procs,
                **tasks.closure_options(mode, **closure),
            )
    echo_notes(report.notes)
    click.echo(worded(report.text()))
    if json_out:
        write_json(json_out, report.to_dict(), force=force)
        click.echo(f"wrote {json_out}", err=True)
    if plot_out:
        write_profile_plot(report.to_dict(), plot_out, force=force)
        click.echo(f"wrote {plot_out}", err=True)
