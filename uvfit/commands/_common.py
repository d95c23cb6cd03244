"""Options and helpers shared by the commands: data selection, output files, library errors."""

import contextlib
import re

import click

from ..data.select import READ_OPTIONS, SELECTION_OPTIONS
from ..errors import UvfitError


def selection_options(func):
    """The data-selection options every command that reads data takes."""
    options = [
        click.option("--min-uv", type=float, default=None, help="Drop baselines shorter than this (wavelengths)."),
        click.option("--max-uv", type=float, default=None, help="Drop baselines longer than this (wavelengths)."),
        click.option(
            "--stations", default=None, help="Keep only baselines between these stations (comma-separated names)."
        ),
        click.option(
            "--exclude-stations", default=None, help="Drop every baseline to these stations (comma-separated names)."
        ),
        click.option(
            "--time-range",
            nargs=2,
            default=None,
            metavar="START END",
            help="Keep rows between two times (ISO UTC, e.g. 2017-04-05T03:00, or MJD).",
        ),
        click.option("--channels", default=None, help="Keep these flattened channel indices, e.g. '0,2-5'."),
        click.option(
            "--average",
            type=float,
            default=None,
            metavar="SECONDS",
            help="Average coherently in time bins of this length (s).",
        ),
        click.option(
            "--column",
            default=None,
            metavar="NAME",
            help="Measurement Set data column: DATA, CORRECTED_DATA or MODEL_DATA "
            "(default CORRECTED_DATA when present, else DATA).",
        ),
        click.option(
            "--field",
            default=None,
            metavar="NAME|ID",
            help="Measurement Set field to read (needed when it holds several).",
        ),
        click.option(
            "--spw",
            default=None,
            metavar="LIST",
            help="Measurement Set spectral windows to read, names or ids, e.g. '0,2' (default all).",
        ),
    ]
    for opt in reversed(options):
        func = opt(func)
    return func


def pop_selection(kwargs):
    """Remove the selection options from a command's kwargs and return them as a dict."""
    selection = {k: kwargs.pop(k, None) for k in SELECTION_OPTIONS}
    # reader options (Measurement Sets) are recorded only when given
    for k in READ_OPTIONS:
        value = kwargs.pop(k, None)
        if value not in (None, ""):
            selection[k] = value
    return selection


def echo_notes(notes, prefix=""):
    """Print a task's notes (selection messages) to stderr."""
    for note in notes:
        click.echo(f"{prefix}{note}", err=True)


@contextlib.contextmanager
def as_options(**names):
    """Re-word the library's errors for the command line: each parameter name given (a keyword)
    becomes its option (the value), e.g. ``as_options(max_evaluations="--max-evaluations")``."""
    try:
        yield
    except UvfitError as exc:
        message, hint = exc.message, exc.hint
        for name, option in names.items():
            pattern = re.compile(rf"(?<![\w-]){re.escape(name)}(?!\w)")
            message = pattern.sub(option, message)
            hint = None if hint is None else pattern.sub(option, hint)
        if message == exc.message and hint == exc.hint:
            raise
        raise type(exc)(message, hint) from None


def force_option(func):
    return click.option("--force", is_flag=True, help="Overwrite output files that exist already.")(func)


def seed_option(func):
    return click.option(
        "--seed", type=int, default=0, show_default=True, help="Seed of every random step; recorded in the outputs."
    )(func)


def progressbar(length, label, **options):
    """A click progress bar on stderr."""
    return click.progressbar(length=length, label=label, file=click.get_text_stream("stderr"), **options)
