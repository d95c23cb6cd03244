"""Choosing a reader or writer for a visibility file, by suffix and by content.

To add a format: write ``uvfit/data/<format>.py`` with a reader and a writer, add its suffixes to
``_SUFFIXES``, its content test to :func:`sniff`, and its two functions to :func:`_readers` /
:func:`_writers` (see DEVELOPERS.md, "Data layer").

A Measurement Set is a directory (a casacore table: ``table.dat`` inside), recognised by that
content or by the ``.ms`` suffix, and read by :mod:`uvfit.data.ms` (python-casacore, the optional
extra ``ms``); uvfit does not write Measurement Sets (only their MODEL_DATA column, see
:func:`uvfit.data.ms.write_model_column`).
"""

import os
from typing import TYPE_CHECKING, Any, Optional

from ..errors import DataError

if TYPE_CHECKING:
    from .visset import VisibilitySet

_SUFFIXES = {
    ".uvfits": "uvfits",
    ".uvf": "uvfits",
    ".fits": "uvfits",
    ".fit": "uvfits",
    ".fts": "uvfits",
    ".ecsv": "ecsv",
    ".ms": "ms",
}
_NAMES = {"uvfits": "UVFITS (FITS random groups)", "ecsv": "ECSV visibility table", "ms": "Measurement Set"}


def sniff(path):
    """The format the file's first bytes say it is: 'uvfits' (any FITS), 'ecsv', or None."""
    with open(path, "rb") as handle:
        start = handle.read(80)
    if start.startswith(b"SIMPLE  ="):
        return "uvfits"
    if start.lstrip().startswith(b"# %ECSV"):
        return "ecsv"
    return None


def _readers():
    from .ms import read_ms
    from .table import read_table
    from .uvfits import read_uvfits

    return {"uvfits": read_uvfits, "ecsv": read_table, "ms": read_ms}


def _writers():
    from .table import write_table
    from .uvfits import write_uvfits

    return {"uvfits": write_uvfits, "ecsv": write_table}


def read(path: "str | os.PathLike[str]", format: Optional[str] = None, **options: Any) -> "VisibilitySet":
    """Read a visibility file into a VisibilitySet.

    The suffix (.uvfits .uvf .fits .fit .fts or .ecsv) says what the file should be; its first
    bytes must agree. ``format`` ('uvfits', 'ecsv' or 'ms') overrides the suffix. A directory
    that is a casacore table (``table.dat`` inside) is read as a Measurement Set. Other options go
    to the reader (UVFITS: ``source=NAME`` for a multi-source file; Measurement Set: ``column``,
    ``field``, ``spw``, ``rows``, see :func:`uvfit.data.ms.read_ms`).
    """
    path = os.fspath(path)
    if not os.path.exists(path):
        raise DataError(f"{path}: no such file", "check the path")
    if format is not None and format not in _NAMES:
        raise DataError(f"unknown format '{format}'", "use 'uvfits', 'ecsv' or 'ms'")
    named_ms = format == "ms" or (
        format is None and _SUFFIXES.get(os.path.splitext(path.rstrip("/" + os.sep))[1].lower()) == "ms"
    )
    if os.path.isdir(path):
        from .ms import is_ms, read_ms

        if is_ms(path):
            if format not in (None, "ms"):
                raise DataError(f"{path}: is a Measurement Set (a table folder), not {_NAMES[format]}")
            return read_ms(path, **options)
        if named_ms:
            raise DataError(
                f"{path}: is named as a Measurement Set but is not a casacore table (no table.dat inside)",
                "give the Measurement Set's own folder",
            )
        raise DataError(
            f"{path}: is a folder, not a visibility file or a Measurement Set (no table.dat inside)",
            "give a .uvfits or .ecsv file, or a Measurement Set",
        )
    if not os.path.isfile(path):
        raise DataError(
            f"{path}: is not a regular file (a device or a pipe), so it cannot be read as visibilities",
            "give a .uvfits or .ecsv file, or a Measurement Set",
        )
    if named_ms:
        raise DataError(
            f"{path}: is a file, but a Measurement Set is a folder (a casacore table)",
            "give the Measurement Set's folder",
        )
    if not os.access(path, os.R_OK):
        raise DataError(f"{path}: cannot be read (permission denied)", "check the file's permissions")
    try:
        content = sniff(path)
    except OSError as exc:
        raise DataError(f"{path}: cannot be read ({exc.strerror or exc})") from None
    expected = format or _SUFFIXES.get(os.path.splitext(path)[1].lower())
    if expected is None:
        if content is None:
            raise DataError(
                f"{path}: unknown file type (neither FITS nor ECSV by content or suffix)",
                "give a .uvfits or .ecsv visibility file",
            )
        expected = content
    if content != expected:
        what = {"uvfits": "a FITS file", "ecsv": "an ECSV table"}.get(content, "neither FITS nor ECSV")
        if expected == "uvfits":
            raise DataError(
                f"{path}: is not a FITS file (by content it is {what})",
                "give a UVFITS visibility file, or an .ecsv visibility table",
            )
        raise DataError(
            f"{path}: is named as an {_NAMES[expected]} but by content it is {what}",
            "rename the file to match its content",
        )
    return _readers()[expected](path, **options)


def write(
    vset: "VisibilitySet",
    path: "str | os.PathLike[str]",
    force: bool = False,
    format: Optional[str] = None,
    **options: Any,
) -> str:
    """Write a VisibilitySet; the format follows ``format`` or the suffix (.uvfits or .ecsv).

    Returns the path written. The file appears whole or not at all (written to a temporary file,
    then renamed); an existing file is replaced only with ``force``.
    """
    path = os.fspath(path)
    kind = format or _SUFFIXES.get(os.path.splitext(path)[1].lower())
    if kind == "ms":
        raise DataError(
            f"{path}: uvfit does not write Measurement Sets",
            "write .uvfits or .ecsv (a fit with `write_model_column` fills a set's MODEL_DATA)",
        )
    if kind not in _NAMES:
        raise DataError(f"{path}: cannot tell which format to write from the name", "end the name in .uvfits or .ecsv")
    return _writers()[kind](vset, path, force=force, **options)
