"""The package imports and the command line answers (no traceback, clear exit codes)."""

import subprocess
import sys

import numpy as np
import pytest

import uvfit
from uvfit.data.visset import VisibilitySet
from uvfit.errors import UvfitError
from uvfit.outputs import atomic_write


def test_version_command():
    out = subprocess.run([sys.executable, "-m", "uvfit", "--version"], capture_output=True, text=True)
    assert out.returncode == 0
    assert uvfit.__version__ in out.stdout


def test_visibility_set_flags_bad_weights():
    # rows with NaN or non-positive sigma are flagged, never used (common practice)
    vs = VisibilitySet(
        u=[1, 2, 3],
        v=[0, 0, 0],
        w=None,
        time=[0, 0, 0],
        frequency=1e9,
        station1=["A", "A", "B"],
        station2=["B", "C", "C"],
        vis=[1, 1, 1],
        sigma=[1.0, np.nan, -1.0],
    )
    assert vs.flag.tolist() == [False, True, True]
    assert vs.good().n == 1
    with pytest.raises(UvfitError):
        vs.subset(vs.flag).good()


def test_atomic_write_refuses_overwrite(tmp_path):
    p = tmp_path / "x.txt"
    atomic_write(p, "one")
    with pytest.raises(UvfitError):
        atomic_write(p, "two")
    atomic_write(p, "two", force=True)
    assert p.read_text() == "two"


def test_written_files_get_ordinary_permissions(tmp_path):
    # a written file is readable like any other new file (mode 0666 less the umask; POSIX practice)
    import os

    p = tmp_path / "y.txt"
    atomic_write(p, "x")
    mask = os.umask(0)
    os.umask(mask)
    assert (os.stat(p).st_mode & 0o777) == (0o666 & ~mask)
