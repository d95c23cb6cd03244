"""uvfit motion FIT.json...: linear motions of the components across epochs."""

import click

from ._common import as_options, check_outputs, force_option


@click.command("motion")
@click.argument("fits", nargs=-1, required=True, type=click.Path(dir_okay=False))
@click.option(
    "--reference",
    default=None,
    metavar="COMPONENT",
    help="Reference component (default: the brightest in every epoch).",
)
@click.option("--redshift", type=float, default=None, help="Source redshift: adds the apparent speed beta_app.")
@click.option("--cosmology", default="Planck18", show_default=True, help="astropy.cosmology realisation for D_L.")
@click.option(
    "--json", "json_out", type=click.Path(dir_okay=False), default=None, help="Write the motions as JSON here."
)
@click.option(
    "--plot",
    "plot_out",
    type=click.Path(dir_okay=False),
    default=None,
    metavar="OUT.png",
    help="Write the figure of separations against time here.",
)
@force_option
def command(fits, reference, redshift, cosmology, json_out, plot_out, force):
    """Fit a linear motion of every component relative to a reference across FITS (uvfit fit
    --json results of several epochs, each recording its observation time): proper motion, its
    position angle, the ejection epoch and, with --redshift, the apparent speed."""
    from .. import tasks
    from ..outputs import write_json
    from ..show.motion_plot import write_motion_plot

    check_outputs({"--json": json_out, "--plot": plot_out}, {f"fit {k + 1}": f for k, f in enumerate(fits)}, force)
    with as_options(reference="--reference", redshift="--redshift", cosmology="--cosmology"):
        report = tasks.motion(list(fits), reference=reference, redshift=redshift, cosmology=cosmology)
    click.echo(report.text())
    if json_out:
        write_json(json_out, report.to_dict(), force=force)
        click.echo(f"wrote {json_out}", err=True)
    if plot_out:
        write_motion_plot(report.to_dict(), plot_out, force=force)
        click.echo(f"wrote {plot_out}", err=True)
