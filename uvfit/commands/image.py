"""uvfit image FIT.json -o OUT.fits: the fitted model as a FITS image on a celestial grid."""

import click

from ._common import as_options, check_outputs, force_option


@click.command("image")
@click.argument("fit", type=click.Path(dir_okay=False))
@click.option(
    "-o", "--output", "output", type=click.Path(dir_okay=False), required=True, help="The FITS image to write."
)
@click.option(
    "--pixel", type=float, default=None, help="Pixel size in the fit's angular unit (default: resolution / 10)."
)
@click.option("--size", type=int, default=256, show_default=True, help="Pixels per side.")
@click.option(
    "--restore",
    default=None,
    metavar="MAJOR,MINOR,PA|auto",
    help="Convolve with a Gaussian beam (FWHM in the angular unit, PA in degrees) and write JY/BEAM; "
    "'auto' takes the beam from the data's uv coverage.",
)
@click.option(
    "--data",
    type=click.Path(dir_okay=False),
    default=None,
    help="The data file, for --restore auto or a fit without a phase centre (default: the fit's own).",
)
@click.option(
    "--json", "json_out", type=click.Path(dir_okay=False), default=None, help="Write the summary as JSON here."
)
@force_option
def command(fit, output, pixel, size, restore, data, json_out, force):
    """Render the model of FIT (a uvfit fit --json result) as a FITS image: RA---SIN / DEC--SIN at
    the phase centre, east to the left, flux per pixel (JY/PIXEL) or restored (JY/BEAM), the
    fit's provenance in HISTORY cards."""
    from .. import tasks
    from ..outputs import write_json

    check_outputs({"--output": output, "--json": json_out}, {"the fit": fit, "the data": data}, force)
    with as_options(pixel="--pixel", size="--size", restore="--restore", data="--data"):
        report = tasks.image(fit, pixel=pixel, size=size, restore=restore, data=data)
    click.echo(report.text())
    report.write(output, force=force)
    click.echo(f"wrote {output}", err=True)
    if json_out:
        rec = dict(report.to_dict(), output=output)
        write_json(json_out, rec, force=force)
        click.echo(f"wrote {json_out}", err=True)
