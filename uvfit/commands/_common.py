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
            "--exclude-same-site",
            is_flag=True,
            default=None,
            help="Drop baselines between two stations of one site (closer than --site-distance).",
        ),
        click.option(
            "--site-distance",
            type=float,
            default=None,
            metavar="METRES",
            help="Stations closer than this form one site (default 5000 m).",
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


#: how the library's names of selection and closure parameters read on the command line
SELECTION_WORDS = {
    "exclude_same_site": "--exclude-same-site",
    "site_distance": "--site-distance",
    "closure_average": "--closure-average",
    "scan_gap": "--scan-gap",
    "snr_cut": "--snr-cut",
}


def closure_options(func):
    """The options of every command that builds closures: the SNR cut, the averaging of closures
    over scans or intervals, and the gap that separates scans."""
    options = [
        click.option(
            "--snr-cut",
            type=float,
            default=None,
            help="Least SNR of the visibilities behind a closure on each baseline (default 3): of one "
            "integration, or with --closure-average of the interval's combined visibilities.",
        ),
        click.option(
            "--closure-average",
            default=None,
            metavar="scan|SECONDS",
            help="Average closures over each scan, or over intervals of this many seconds within scans: "
            "bispectra averaged, closure amplitudes from debiased incoherent amplitudes.",
        ),
        click.option(
            "--scan-gap",
            type=float,
            default=None,
            metavar="SECONDS",
            help="A gap in time longer than this starts a new scan (default 4 median integrations).",
        ),
    ]
    for opt in reversed(options):
        func = opt(func)
    return func


def pop_closure_options(kwargs):
    """Remove the closure options from a command's kwargs and return those given as a dict."""
    out = {}
    for k in ("snr_cut", "closure_average", "scan_gap"):
        value = kwargs.pop(k, None)
        if value is not None:
            out[k] = value
    return out


def pop_selection(kwargs):
    """Remove the selection options from a command's kwargs and return them as a dict."""
    selection = {k: kwargs.pop(k, None) for k in SELECTION_OPTIONS}
    if not selection.get("exclude_same_site"):
        selection["exclude_same_site"] = None
    # reader options (Measurement Sets) are recorded only when given
    for k in READ_OPTIONS:
        value = kwargs.pop(k, None)
        if value not in (None, ""):
            selection[k] = value
    return selection


def worded(text: str) -> str:
    """A library text with its quoted parameter names (`` `name` ``) as the running command's options."""
    ctx = click.get_current_context(silent=True)
    if ctx is None or "`" not in text:
        return text
    return reword(UvfitError(text), ctx.command).message


def echo_notes(notes, prefix=""):
    """Print a task's notes (selection messages) to stderr, parameter names as options."""
    for note in notes:
        click.echo(f"{prefix}{worded(note)}", err=True)


@contextlib.contextmanager
def as_options(**names):
    """Re-word the library's errors for the command line where a parameter is named in plain words
    (not quoted): each parameter name given (a keyword) becomes its option (the value), e.g.
    ``as_options(max_evaluations="--max-evaluations")``. Quoted names (`` `name` ``) are reworded for
    every command by the command group (:func:`reword`)."""
    names = {**SELECTION_WORDS, **names}
    try:
        yield
    except UvfitError as exc:
        worded = reword(exc, names)
        message, hint = worded.message, worded.hint
        for name, option in names.items():
            pattern = re.compile(rf"(?<![\w`-]){re.escape(name)}(?![\w`=])")
            message = pattern.sub(option, message)
            hint = None if hint is None else pattern.sub(option, hint)
        if message == exc.message and hint == exc.hint:
            raise
        raise type(exc)(message, hint) from None


_PARAMETER = re.compile(r"`([a-z][a-z0-9_]*)(?:=([^`]*))?`")


def option_names(command: click.Command) -> dict[str, str]:
    """Each parameter name of a command and its long option, e.g. ``{"snr_cut": "--snr-cut"}``."""
    names: dict[str, str] = {}
    for param in command.params:
        if isinstance(param, click.Option) and param.name:
            longs = [opt for opt in param.opts if opt.startswith("--")]
            for opt in longs:  # the option's own spelling too: `chain` for --chain (chain_path)
                names.setdefault(opt[2:].replace("-", "_"), opt)
            if longs:
                names[param.name] = max(longs, key=len)
    return names


def reword(exc: UvfitError, command: "click.Command | dict[str, str]") -> UvfitError:
    """The library names parameters as `` `name` `` or `` `name=value` `` (what a Python caller
    passes); on the command line they read as options: ``--name`` or ``--name value`` (a flag's
    ``=True`` is dropped). Names that are not options of ``command`` (a click command, or a mapping
    of parameter names to options) keep their quotes."""
    names = command if isinstance(command, dict) else option_names(command)

    def swap(match):
        name, value = match.group(1), match.group(2)
        option = names.get(name)
        if option is None:
            return match.group(0)
        if value is None or value == "True":
            return option
        return f"{option} {value}"

    message = _PARAMETER.sub(swap, exc.message)
    hint = None if exc.hint is None else _PARAMETER.sub(swap, exc.hint)
    if message == exc.message and hint == exc.hint:
        return exc
    worded = type(exc)(message, hint)
    worded.exit_code = exc.exit_code
    return worded


#: how the library's names of the gain options read on the command line
GAIN_OPTION_NAMES = {"gains": "--gains", "gain_interval": "--gain-interval", "gain_prior": "--gain-prior"}


def gain_options(func):
    """--gains, --gain-interval, --gain-prior: station gains solved inside the fit."""
    func = click.option(
        "--gain-prior",
        default=None,
        metavar="STATION=SPREAD,...",
        help="Fractional rms of the amplitude gains per station, '*' for the others "
        "(e.g. 'AA=0.05,LM=0.3,*=0.1'); flat where not given, flat on phases.",
    )(func)
    func = click.option(
        "--gain-interval",
        default="scan",
        show_default=True,
        metavar="scan|SECONDS",
        help="One gain per station per scan (from the file's scan numbers or gaps in time) or per SECONDS.",
    )(func)
    func = click.option(
        "--gains",
        type=click.Choice(["amplitude", "phase", "complex"]),
        default=None,
        help="Solve station gains V_ij = g_i conj(g_j) V_model with the structure (with --mode complex).",
    )(func)
    return func


def pop_gains(kwargs):
    """The gain options out of a command's keyword arguments, as the tasks take them."""
    return {key: kwargs.pop(key, None) for key in GAIN_OPTION_NAMES}


#: the help text of ``--starts auto``
STARTS_AUTO_HELP = (
    " auto: 8 seeded starts, then batches of 8 (up to 32) while fewer than 3 reach the lowest chi2"
    " and the last batch lowered it."
)


def starts_value(ctx, param, value):
    """Click callback of ``--starts``: "auto" or a whole number of at least 1, else a one-line UvfitError."""
    from ..infer.lsq import check_starts

    with as_options(starts="--starts"):
        return check_starts(value)


def starts_option(help_text):
    """The ``--starts`` option: ``auto`` (default: the fitter's rule) or a number of starts."""
    return click.option(
        "--starts",
        default="auto",
        show_default=True,
        metavar="auto|N",
        callback=starts_value,
        help=help_text,
    )


def force_option(func):
    return click.option("--force", is_flag=True, help="Overwrite output files that exist already.")(func)


def at_least_zero(ctx, param, value):
    """Click callback: a finite number not below zero (None passes), else a one-line UvfitError."""
    if value is None:
        return value
    import math

    option = max(param.opts, key=len)
    if isinstance(value, float) and not math.isfinite(value):
        raise UvfitError(f"{option} must be a finite number, not {value}", f"give {option} 0 or more")
    if value < 0:
        raise UvfitError(f"{option} must be 0 or more, not {value}", f"give {option} 0 or more")
    return value


#: largest seed numpy's generators take from one integer here (a 64-bit unsigned)
MAX_SEED = 2**64 - 1


def _seed(ctx, param, value):
    if value is None:
        return value
    if not 0 <= value <= MAX_SEED:
        raise UvfitError(
            f"--seed must be a whole number from 0 to {MAX_SEED}, not {value}",
            "give a non-negative seed, e.g. --seed 1",
        )
    return value


def procs_option(help_text):
    """The ``--procs`` option: processes for independent pieces of work (numbers unchanged)."""
    return click.option(
        "--procs",
        type=click.IntRange(min=1),
        default=1,
        show_default=True,
        metavar="N",
        help=help_text + " The numbers do not depend on N.",
    )


def seed_option(func):
    return click.option(
        "--seed",
        type=int,
        default=0,
        show_default=True,
        callback=_seed,
        help="Seed of every random step; recorded in the outputs.",
    )(func)


#: updates (and seconds) before the time estimate is shown: early steps include start-up costs
ETA_AFTER_UPDATES = 3
ETA_AFTER_SECONDS = 2.0


class _Progress:
    """A progress display for one stage, used as a context manager with ``update(n)``.

    On a terminal: click's bar, its time estimate hidden until ``ETA_AFTER_UPDATES`` updates and
    ``ETA_AFTER_SECONDS`` have passed (the first steps carry start-up costs and made the estimate
    wildly long). Elsewhere (a log file, a pipe): one short line when the stage's first step is
    done and one when it ends, with its count and duration; a stage refused before its first step
    (bad input found while reading) prints nothing, so the error stays the only line.
    """

    def __init__(self, length, label, stream=None, **options):
        import time

        self._clock = time.monotonic
        self.length, self.label = int(length), label
        self.stream = stream if stream is not None else click.get_text_stream("stderr")
        isatty = getattr(self.stream, "isatty", None)
        self.terminal = bool(isatty and isatty())
        self.done = self.updates = 0
        self._options = options
        self._bar = None
        self._announced = False

    def __enter__(self):
        self._start = self._clock()
        if self.terminal:
            self._bar = click.progressbar(length=self.length, label=self.label, file=self.stream, **self._options)
            self._bar.__enter__()
            self._bar.show_eta = False
        return self

    def _announce(self):
        if not self.terminal and not self._announced:
            self._announced = True
            click.echo(f"{self.label}: started ({self.length} steps)", file=self.stream)

    def update(self, n=1):
        self._announce()
        self.done += int(n)
        self.updates += 1
        if self._bar is not None:
            if (
                not self._bar.show_eta
                and self.updates >= ETA_AFTER_UPDATES
                and self._clock() - self._start >= ETA_AFTER_SECONDS
            ):
                self._bar.show_eta = self._options.get("show_eta", True)
            self._bar.update(n)

    def __exit__(self, *exc):
        if self._bar is not None:
            return self._bar.__exit__(*exc)
        seconds = self._clock() - self._start
        failed = bool(exc and exc[0] is not None)
        if failed and not self._announced:
            return False
        self._announce()
        state = "stopped" if failed else "done"
        click.echo(
            f"{self.label}: {state}, {min(self.done, self.length)} of {self.length} steps in {seconds:.1f} s",
            file=self.stream,
        )
        return False


def progressbar(length, label, **options):
    """A progress display on stderr for one stage (see :class:`_Progress`)."""
    return _Progress(length, label, **options)


#: what '-' means as an output path: the standard output where a command says so (as
#: ``info --json -``), refused everywhere else (never a file named '-')
STDOUT = "-"


def joint_data(data):
    """(what the task takes, the inputs for ``check_outputs``) of the DATA arguments: one path, or
    the list of several files fitted jointly."""
    paths = tuple(data)
    inputs = {"the data": paths[0]} if len(paths) == 1 else {f"data file {k + 1}": d for k, d in enumerate(paths)}
    return (paths[0] if len(paths) == 1 else list(paths)), inputs


def split_data_and_models(arguments):
    """(data paths, model paths) of arguments DATA... MODEL MODEL...: the data are the arguments
    before the first name ending in .toml; when none does, the first argument is the data."""
    arguments = tuple(arguments)
    first = next((k for k, a in enumerate(arguments) if str(a).lower().endswith(".toml")), None)
    if first is None or first == 0:
        first = 1
    return arguments[:first], arguments[first:]


def check_outputs(outputs, inputs=None, force=False, stdout_ok=()):
    """Check every output of a command before any work, against each other and the inputs.

    ``outputs`` maps an option (e.g. ``"--json"``) to its path (None: not asked for); ``inputs``
    maps a description (e.g. ``"the data"``) to an input path. Refused: '-' for an option not in
    ``stdout_ok``; two options naming one file; an output that is an input; an existing output
    without ``force`` (``outputs.check_writable``). Returns nothing; raises UvfitError.
    """
    import os

    from ..outputs import check_writable

    seen = {}
    real_inputs = {}
    for what, path in (inputs or {}).items():
        if path and path != STDOUT:
            real_inputs[os.path.normcase(os.path.realpath(os.fspath(path)))] = what
    for option, path in outputs.items():
        if path is None:
            continue
        path = os.fspath(path)
        if path == STDOUT:
            if option not in stdout_ok:
                raise UvfitError(
                    f"{option} -: this output is written to a file only",
                    "give a file name ('-' means the standard output only for uvfit info --json)",
                )
            continue
        if not path or os.path.isdir(path):
            raise UvfitError(f"{option} {path!r} is not a file name", "give the output file's name")
        key = os.path.normcase(os.path.realpath(path))
        if key in seen:
            raise UvfitError(
                f"{seen[key]} and {option} name the same file {path}", "give each output its own file name"
            )
        if key in real_inputs:
            raise UvfitError(
                f"{option} {path} is {real_inputs[key]}, an input of this command", "write the output to another file"
            )
        seen[key] = option
        check_writable(path, force)
