"""Writing output files safely.

Rule: an existing file is never overwritten unless ``force`` is true; every file is written to a
temporary file in the same folder and renamed into place, so a crash never leaves half a file.
"""

import json
import os
import tempfile

import numpy as np

from .errors import UvfitError


def _umask_mode():
    """The mode a plain new file gets (0666 less the umask): temporary files start at 0600."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def check_writable(path, force=False):
    """Raise a clear error if ``path`` exists and ``force`` is false, or its folder is missing."""
    path = os.fspath(path)
    if os.path.exists(path) and not force:
        raise UvfitError(f"output file {path} exists already", "choose another name, or pass `force` to overwrite it")
    folder = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(folder):
        raise UvfitError(f"the folder for output file {path} does not exist", "create it first")
    try:
        name_max = os.pathconf(folder, "PC_NAME_MAX")
    except (OSError, ValueError):
        name_max = 255
    name = os.fsencode(os.path.basename(path))
    # the temporary file is named '.tmp-' + 8 random characters + the name
    if len(name) + 13 > name_max:
        raise UvfitError(
            f"the output file name {os.path.basename(path)[:40]}... is {len(name)} bytes long "
            f"(its folder takes names of at most {name_max} bytes, less 13 for the temporary file)",
            "choose a shorter name",
        )
    return path


def _produce_and_rename(produce, tmp, path):
    """Call ``produce()`` to fill the temporary file ``tmp``, give it a plain file's mode and
    rename it to ``path``; on any failure remove ``tmp`` and re-raise."""
    try:
        produce()
        os.chmod(tmp, _umask_mode())
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return path


def atomic_write(path, data, force=False):
    """Write ``data`` (bytes or str) to ``path`` atomically; refuse to overwrite without ``force``."""
    path = check_writable(path, force)
    if isinstance(data, str):
        data = data.encode("utf-8")
    folder = os.path.dirname(os.path.abspath(path))
    fd, tmp = tempfile.mkstemp(prefix=".tmp-", suffix=os.path.basename(path), dir=folder)

    def produce():
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)

    return _produce_and_rename(produce, tmp, path)


def atomic_write_with(path, writer, force=False, suffix=None):
    """Call ``writer(tmp_path)`` to produce the file, then rename it to ``path``.

    For libraries that insist on writing to a path themselves (astropy, matplotlib). ``suffix``
    defaults to the extension of ``path`` so that format detection by suffix keeps working.
    """
    path = check_writable(path, force)
    folder = os.path.dirname(os.path.abspath(path))
    if suffix is None:
        suffix = os.path.splitext(path)[1]
    fd, tmp = tempfile.mkstemp(prefix=".tmp-", suffix=suffix, dir=folder)
    os.close(fd)
    os.unlink(tmp)
    return _produce_and_rename(lambda: writer(tmp), tmp, path)


def _to_builtin(obj):
    if isinstance(obj, dict):
        return {str(k): _to_builtin(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_to_builtin(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return [_to_builtin(v) for v in obj.tolist()]
    if isinstance(obj, (np.bool_,)):
        return bool(obj)
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.floating):
        obj = float(obj)
    if isinstance(obj, float) and not np.isfinite(obj):
        return None  # JSON has no NaN or infinity; null means "not defined"
    return obj


def to_json(obj):
    """JSON text of ``obj`` with numpy types converted and non-finite floats as null."""
    return json.dumps(_to_builtin(obj), indent=2, sort_keys=False) + "\n"


def write_json(path, obj, force=False):
    """Write ``obj`` as JSON atomically (see :func:`to_json`)."""
    return atomic_write(path, to_json(obj), force=force)
