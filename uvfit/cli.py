"""The command line: it parses options, calls the library and prints. Nothing else lives here.

Each command is a module in ``uvfit/commands/`` that defines a click command named ``command``;
the group below finds them all, so adding a command touches no other file.
"""

import importlib
import os
import pkgutil
import sys
import warnings

import click

from . import __version__
from .errors import UvfitError


class _Group(click.Group):
    def _load(self):
        if getattr(self, "_loaded", False):
            return
        from . import commands

        for info in sorted(pkgutil.iter_modules(commands.__path__), key=lambda m: m.name):
            if info.name.startswith("_"):
                continue
            module = importlib.import_module(f"{commands.__name__}.{info.name}")
            cmd = getattr(module, "command", None)
            if isinstance(cmd, click.Command):
                self.add_command(cmd)
        self._loaded = True

    def list_commands(self, ctx):
        self._load()
        return super().list_commands(ctx)

    def get_command(self, ctx, name):
        self._load()
        return super().get_command(ctx, name)

    def invoke(self, ctx):
        try:
            return super().invoke(ctx)
        except UvfitError as exc:
            command = self.get_command(ctx, ctx.invoked_subcommand) if ctx.invoked_subcommand else None
            if command is None:
                raise
            from .commands._common import reword

            worded = reword(exc, command)
            if worded is exc:
                raise
            raise worded from None


@click.group(cls=_Group, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="uvfit")
def cli():
    """Fit parametric sky models to interferometric visibilities, with honest errors.

    Results hold for the model family fitted: a good fit of a few components is no substitute for
    an image of complex structure. Check every fit against the closure quantities (uvfit closures).
    """


def _exit_on_term():
    """SIGTERM ends uvfit as Ctrl-C does: an exception unwinds the writes in progress, so their
    temporary files are removed (uvfit.outputs) before the exit (code 143)."""
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread():
        return

    def terminated(signum, frame):
        click.echo("terminated", err=True)
        raise SystemExit(128 + signum)

    signal.signal(signal.SIGTERM, terminated)


class _NumericalWarnings:
    """Catch numpy's RuntimeWarnings (overflow, division by zero, invalid values) instead of
    printing them raw with a source line: the results already show the non-finite numbers, and a
    successful run ends with one note counting them."""

    def __init__(self):
        self.seen = {}

    def __enter__(self):
        self._context = warnings.catch_warnings()
        self._context.__enter__()
        self._show = warnings.showwarning
        warnings.simplefilter("always", RuntimeWarning)

        def show(message, category, filename, lineno, file=None, line=None):
            if issubclass(category, RuntimeWarning):
                text = str(message)
                self.seen[text] = self.seen.get(text, 0) + 1
                return
            self._show(message, category, filename, lineno, file, line)

        warnings.showwarning = show
        return self

    def __exit__(self, *exc):
        self._context.__exit__(*exc)
        return False

    def note(self):
        if not self.seen:
            return None
        total = sum(self.seen.values())
        kinds = "; ".join(sorted(self.seen)[:3])
        return (
            f"uvfit: note: {total} numerical warning(s) during the computation ({kinds}); "
            "a non-finite number in the results is shown as nan and never judged"
        )


def main(argv=None):
    """Entry point: run the group, turning known problems into one line and an exit code."""
    debug = bool(os.environ.get("UVFIT_DEBUG"))
    from ._blas import single_threaded

    _exit_on_term()
    numerical = _NumericalWarnings()

    try:
        # many small least-squares steps: one BLAS thread is faster and gives the same numbers
        with single_threaded(), numerical:
            cli.main(args=argv, prog_name="uvfit", standalone_mode=False)
    except click.exceptions.Abort:
        click.echo("aborted", err=True)
        sys.exit(130)
    except click.ClickException as exc:
        exc.show()
        sys.exit(exc.exit_code)
    except click.exceptions.Exit as exc:
        sys.exit(exc.exit_code)
    except UvfitError as exc:
        if debug:
            raise
        click.echo(f"uvfit: error: {exc}", err=True)
        sys.exit(exc.exit_code)
    except MemoryError as exc:
        if debug:
            raise
        click.echo(
            f"uvfit: error: not enough memory for this run ({exc or 'MemoryError'}). Fix: select fewer "
            "rows or channels, or lower the sizes asked for (walkers, steps, starts)",
            err=True,
        )
        sys.exit(2)
    except OSError as exc:
        if debug:
            raise
        click.echo(f"uvfit: error: {exc}", err=True)
        sys.exit(2)
    except KeyboardInterrupt:
        click.echo("interrupted", err=True)
        sys.exit(130)
    except Exception as exc:  # a bug, not the user's fault: say so plainly
        if debug:
            raise
        click.echo(
            f"uvfit: internal error ({type(exc).__name__}: {exc}). Run again with "
            "UVFIT_DEBUG=1 for the traceback and report it.",
            err=True,
        )
        sys.exit(3)
    note = numerical.note()
    if note:
        click.echo(note, err=True)
    sys.exit(0)


if __name__ == "__main__":
    main()
