"""The project's own error type.

Every problem with the user's input (a file, a model, an option) is raised as :class:`UvfitError`
with a message that names the problem and, where there is one, the fix. The command line prints the
message on one line and exits with a non-zero status; it never shows a traceback for these.
"""


class UvfitError(Exception):
    """A problem with the input that the user can fix; the message says what and how."""

    exit_code = 2

    def __init__(self, message, hint=None):
        self.message = str(message)
        self.hint = hint
        super().__init__(self.message if not hint else f"{self.message} ({hint})")

    def __str__(self):
        if self.hint:
            return f"{self.message}. Fix: {self.hint}"
        return self.message


class DataError(UvfitError):
    """The data file or the selection leaves nothing usable, or is not what it claims to be."""


class ModelError(UvfitError):
    """A model file or a model specification is invalid."""


class FitError(UvfitError):
    """A fit cannot be done or did not converge."""
