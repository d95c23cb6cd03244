"""`uvfit info DATA`: what a visibility file holds, at a glance (and as JSON with --json)."""

import click

from ._common import as_options, check_outputs, echo_notes, force_option, pop_selection, selection_options, worded


@click.command("info")
@click.argument("data", type=click.Path())
@click.option(
    "--json",
    "json_out",
    default=None,
    metavar="OUT",
    help="Also write the summary as JSON to OUT ('-' writes the JSON to stdout instead of the table).",
)
@click.option(
    "--scan-gap",
    type=float,
    default=None,
    metavar="SECONDS",
    help="A gap in time longer than this starts a new scan (default 4 median integrations).",
)
@selection_options
@force_option
def command(data, json_out, scan_gap, force, **kwargs):
    """Describe a visibility file: source, frequencies, stations, times, uv coverage, resolution.

    The resolution and largest scale are nominal (lambda over the longest and shortest projected
    baseline); what a fit can resolve also depends on the signal-to-noise ratio.
    """
    from .. import tasks
    from ..outputs import to_json, write_json

    check_outputs({"--json": json_out}, {"the data": data}, force, stdout_ok=("--json",))
    selection = pop_selection(kwargs)
    with as_options():
        report = tasks.info(data, selection, scan_gap=scan_gap, site_distance=selection.get("site_distance"))
    echo_notes(report.notes)
    s = report.to_dict()
    if json_out == "-":
        click.echo(to_json(s), nl=False)
        return
    click.echo(worded(report.text()))
    if json_out:
        write_json(json_out, s, force=force)
        click.echo(f"wrote {json_out}", err=True)
