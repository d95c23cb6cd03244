"""uvfit plot: one figure of a fit (radial, uv, closure, sky) written as a PNG."""

import click

from ..show.figures import KINDS, MANY_BASELINES
from ..show.plots import COLOURINGS
from ._common import as_options, check_outputs, echo_notes, force_option, pop_selection, selection_options


@click.command("plot")
@click.argument("data", type=click.Path())
@click.option(
    "--fit",
    "fit_path",
    required=True,
    type=click.Path(dir_okay=False),
    help="Fit output written by 'uvfit fit --json'; its model is drawn.",
)
@click.option(
    "--kind", required=True, type=click.Choice(list(KINDS)), help="; ".join(f"{k}: {v}" for k, v in KINDS.items()) + "."
)
@click.option(
    "--colour-by",
    type=click.Choice(list(COLOURINGS)),
    default=None,
    help="Colour the (u, v) coverage and the radial figure's data by baseline, by station (each marker split "
    "between its two stations; a legend of stations) or by time. Default: the radial data in one colour; "
    f"the coverage by baseline, by station above {MANY_BASELINES} baselines.",
)
@click.option(
    "--panels",
    type=click.IntRange(1, 12),
    default=6,
    show_default=True,
    help="Number of closure-phase triangles shown (the most informative first).",
)
@click.option(
    "--triangles",
    "loops",
    default="worst",
    show_default=True,
    metavar="worst|best|A-B-C,...",
    help="Closure panels: the worst-fitting loops, the most informative, or these loops "
    "(triangles for --kind closure, quadrangles A-B-C-D for closure_amplitude).",
)
@click.option("-o", "--out", "out", required=True, type=click.Path(dir_okay=False), help="PNG file to write.")
@click.option(
    "--numbers",
    "numbers_path",
    default=None,
    type=click.Path(dir_okay=False),
    help="Also write the numbers behind the figure as JSON.",
)
@force_option
@selection_options
def command(data, fit_path, kind, colour_by, panels, loops, out, numbers_path, force, **kwargs):
    """Draw one figure of the fit in FIT.json on the visibilities in DATA.

    The model is rebuilt from the fit's own model text, and the data are selected as the fit
    recorded; selection options given here override the recorded ones. Figures show east to the
    left, as on the sky.
    """
    from ..outputs import write_json
    from ..show import style
    from ..show.figures import make_figure
    from ..show.readback import open_fit_view

    selection = pop_selection(kwargs)
    check_outputs({"-o": out, "--numbers": numbers_path}, {"the data": data, "the fit": fit_path}, force)
    view, notes = open_fit_view(data, fit_path, selection)
    echo_notes(notes)
    choice = loops if loops in ("worst", "best") else [t for t in loops.split(",") if t.strip()]
    with as_options(how="--triangles"):
        fig, numbers = make_figure(kind, view, colour_by=colour_by, panels=panels, loops=choice)
    try:
        style.save_png(fig, out, force=force)
    finally:
        style.close(fig)
    click.echo(f"wrote {out}")
    if numbers_path:
        write_json(
            numbers_path,
            {"kind": kind, "data": str(data), "fit": str(fit_path), "selection": view.selection, **numbers},
            force=force,
        )
        click.echo(f"wrote {numbers_path}")
