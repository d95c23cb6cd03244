"""Reading uvfit's small input files (model, manifest and array files, uvfit's own JSON) safely.

Rule: only a regular file is read (a device such as /dev/zero or a named pipe would never end or
never answer), and only up to a size far above any real file of its kind, so a hostile path
cannot make uvfit hang or fill the memory.
"""

import os

from .errors import UvfitError

#: largest TOML file read (model, manifest, array files), bytes
MAX_TOML_BYTES = 16 * 1024**2
#: largest JSON file read (uvfit's own fit, posterior and comparison outputs), bytes
MAX_JSON_BYTES = 256 * 1024**2


def read_input_bytes(path: "str | os.PathLike[str]", what: str, limit: int = MAX_TOML_BYTES) -> bytes:
    """The bytes of the regular file ``path``; ``what`` names the kind of file in the messages
    (e.g. "model file"). UvfitError when it is missing, not a regular file, or above ``limit``."""
    path = os.fspath(path)
    if not os.path.exists(path):
        raise UvfitError(f"{what} {path} does not exist", "check the path")
    if not os.path.isfile(path):
        kind = "a folder" if os.path.isdir(path) else "not a regular file (a device or a pipe)"
        raise UvfitError(f"{what} {path} is {kind}", f"give the path of a {what}")
    size = os.path.getsize(path)
    if size > limit:
        raise UvfitError(
            f"{what} {path} is {size} bytes, more than the {limit} bytes accepted",
            f"a {what} is far smaller; check the path",
        )
    try:
        with open(path, "rb") as handle:
            raw = handle.read(limit + 1)
    except OSError as exc:
        raise UvfitError(f"cannot read the {what} {path}: {exc.strerror}", "check the path") from None
    if len(raw) > limit:
        raise UvfitError(f"{what} {path} grew beyond {limit} bytes while being read", "check the path")
    return raw
