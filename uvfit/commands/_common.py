"""Options and helpers shared by the commands: data selection, output files, printing."""
import functools

import click

from ..errors import UvfitError


def selection_options(func):
    """The data-selection options every command that reads data takes."""
    options = [
        click.option("--min-uv", type=float, default=None, help="Drop baselines shorter than this (wavelengths)."),
        click.option("--max-uv", type=float, default=None, help="Drop baselines longer than this (wavelengths)."),
        click.option("--stations", default=None, help="Keep only baselines between these stations (comma-separated names)."),
        click.option("--exclude-stations", default=None, help="Drop every baseline to these stations (comma-separated names)."),
        click.option("--time-range", nargs=2, default=None, metavar="START END",
                     help="Keep rows between two times (ISO UTC, e.g. 2017-04-05T03:00, or MJD)."),
        click.option("--channels", default=None, help="Keep these flattened channel indices, e.g. '0,2-5'."),
        click.option("--average", type=float, default=None, metavar="SECONDS",
                     help="Average coherently in time bins of this length (s)."),
    ]
    for opt in reversed(options):
        func = opt(func)
    return func


_SELECTION_KEYS = ("min_uv", "max_uv", "stations", "exclude_stations", "time_range", "channels", "average")


def pop_selection(kwargs):
    """Remove the selection options from a command's kwargs and return them as a dict."""
    return {k: kwargs.pop(k, None) for k in _SELECTION_KEYS}


# Reader options (Measurement Sets): passed to the reader, not to the row selection.
_READ_KEYS = ("column", "field", "spw")


def read_options(func):
    """The options that choose what a reader reads from a Measurement Set."""
    options = [
        click.option("--column", default=None, metavar="NAME",
                     help="Measurement Set data column: DATA, CORRECTED_DATA or MODEL_DATA "
                          "(default CORRECTED_DATA when present, else DATA)."),
        click.option("--field", default=None, metavar="NAME|ID",
                     help="Measurement Set field to read (needed when it holds several)."),
        click.option("--spw", default=None, metavar="LIST",
                     help="Measurement Set spectral windows to read, names or ids, e.g. '0,2' (default all)."),
    ]
    for opt in reversed(options):
        func = opt(func)
    return func


def pop_read_options(kwargs):
    """Remove the reader options from a command's kwargs; returns those that were given."""
    return {k: v for k, v in ((k, kwargs.pop(k, None)) for k in _READ_KEYS) if v not in (None, "")}


def read_data(path, options=None, echo=True):
    """Read a data file with the reader options; says which Measurement Set column was read."""
    from .. import read

    vset = read(path, **(options or {}))
    if echo and vset.meta.get("format") == "ms":
        click.echo(f"Measurement Set: column {vset.meta['ms_column_note']}, field "
                   f"{vset.meta['ms_field']} ({vset.source}), spectral windows "
                   + ", ".join(str(s) for s in vset.meta["ms_spws_read"]), err=True)
    return vset


def load_data(path, selection=None, echo=True, read_options=None):
    """Read a data file and apply the selection options; returns the VisibilitySet of good rows."""
    from ..data.select import apply_selection

    vset = read_data(path, read_options, echo=echo)
    selection = {k: v for k, v in (selection or {}).items() if v not in (None, (), "")}
    if selection:
        vset, notes = apply_selection(vset, **selection)
        if echo:
            for note in notes:
                click.echo(note, err=True)
    return vset.good()


def force_option(func):
    return click.option("--force", is_flag=True, help="Overwrite output files that exist already.")(func)


def seed_option(func):
    return click.option("--seed", type=int, default=0, show_default=True,
                        help="Seed of every random step; recorded in the outputs.")(func)


def fail(message, hint=None):
    raise UvfitError(message, hint)
