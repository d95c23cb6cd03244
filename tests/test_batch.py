"""uvfit batch on a local Dask cluster of two worker processes (loopback).

The reference for every batch result is the same job run directly with `uvfit fit` and the same
seed: the batch must be a way of running the fit, not a different fit.
"""

import json
import os
import subprocess
import sys

import numpy as np
import pytest

pytest.importorskip("dask.distributed")

import uvfit
from tests.helpers.invented import component, model_toml
from uvfit.data.visset import VisibilitySet
from uvfit.sky.model import SkyModel

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))

_FWHM = "{ value = 0.3, min = 0.0, max = 3.0 }"
DOUBLE = model_toml(component("a", 1.0, fwhm=_FWHM), component("b", 0.5, east=0.6, north=-0.4, fwhm=_FWHM), unit="mas")


def _simulated(seed, sep_east):
    rng = np.random.default_rng(seed)
    n = 400
    q = rng.uniform(2e7, 4e8, n)
    ang = rng.uniform(0, np.pi, n)
    u, v = q * np.sin(ang), q * np.cos(ang)
    truth = SkyModel.build(
        [
            {"name": "a", "shape": "gaussian", "flux": 1.0, "fwhm": 0.3},
            {"name": "b", "shape": "gaussian", "flux": 0.4, "east": sep_east, "north": -0.3, "fwhm": 0.2},
        ],
        angular_unit="mas",
    )
    vis = truth.visibilities(u, v)
    sigma = np.full(n, 0.02)
    vis = vis + sigma * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    stations = np.array(["S1", "S2", "S3", "S4"])
    i = rng.integers(0, 4, n)
    j = (i + rng.integers(1, 4, n)) % 4
    lo, hi = np.minimum(i, j), np.maximum(i, j)
    return VisibilitySet(
        u=u,
        v=v,
        w=None,
        time=57000 + np.arange(n) / 86400.0,
        frequency=86e9,
        station1=stations[lo],
        station2=stations[hi],
        vis=vis,
        sigma=sigma,
        source="invented",
    )


def _run(args, cwd):
    return subprocess.run(
        [sys.executable, "-m", "uvfit", *args],
        cwd=cwd,
        capture_output=True,
        text=True,
        env={**os.environ, "PYTHONPATH": ROOT},
    )


@pytest.fixture(scope="module")
def batch_dir(tmp_path_factory):
    d = tmp_path_factory.mktemp("batch")
    (d / "double.toml").write_text(DOUBLE)
    jobs = []
    for k, east in enumerate((0.5, 0.6, 0.7)):
        uvfit.write(_simulated(k, east), str(d / f"epoch{k}.uvfits"))
        jobs.append(f'[[job]]\ndata = "epoch{k}.uvfits"\nmodel = "double.toml"\n')
    jobs.append('[[job]]\nname = "broken"\ndata = "no-such-file.uvfits"\nmodel = "double.toml"\n')
    (d / "manifest.toml").write_text(
        '[defaults]\ncommand = "fit"\nstarts = 2\nseed = 7\noutput_dir = "out"\n\n' + "\n".join(jobs)
    )
    return d


def test_batch_equals_direct_fits_and_isolates_failure(batch_dir):
    first = _run(["batch", "manifest.toml", "--workers", "2", "-o", "results.ecsv"], batch_dir)
    assert "Traceback" not in first.stderr
    assert first.returncode == 1, first.stderr  # one job failed, the batch says so
    assert "4 jobs: 4 run" in first.stdout
    from astropy.table import Table

    table = Table.read(batch_dir / "results.ecsv", format="ascii.ecsv")
    status = dict(zip(table["name"], table["status"]))
    assert status == {"epoch0": "done", "epoch1": "done", "epoch2": "done", "broken": "failed"}
    broken = table[table["name"] == "broken"][0]
    assert "no-such-file" in broken["error"]
    for k in range(3):
        direct = _run(
            ["fit", f"epoch{k}.uvfits", "double.toml", "--starts", "2", "--seed", "7", "--json", f"direct{k}.json"],
            batch_dir,
        )
        assert direct.returncode == 0, direct.stderr
        want = json.loads((batch_dir / f"direct{k}.json").read_text())
        got = json.loads((batch_dir / "out" / f"epoch{k}.json").read_text())
        for section in ("parameters", "derived"):
            for key, entry in want[section].items():
                for field in ("value", "error"):
                    a, b = entry.get(field), got[section][key].get(field)
                    if isinstance(a, float):
                        assert b == pytest.approx(a, rel=1e-9, abs=1e-12), (key, field)
        assert got["statistics"]["chi2"] == pytest.approx(want["statistics"]["chi2"], rel=1e-12)
        row = table[table["name"] == f"epoch{k}"][0]
        assert row["b.east"] == pytest.approx(want["parameters"]["b.east"]["value"], rel=1e-9)


def test_second_run_does_no_work(batch_dir):
    # (runs after the test above, module order)
    stamps = {p: os.path.getmtime(p) for p in (batch_dir / "out").glob("*.json")}
    again = _run(["batch", "manifest.toml", "--workers", "2", "-o", "results.ecsv"], batch_dir)
    assert "Traceback" not in again.stderr
    assert "3 up to date (skipped)" in again.stdout
    assert "1 run" in again.stdout  # only the broken job is tried again
    assert {p: os.path.getmtime(p) for p in stamps} == stamps


def test_bad_manifest_is_a_clear_error(tmp_path):
    (tmp_path / "m.toml").write_text("[[job]]\ndata = 'x.uvfits'\n")
    out = _run(["batch", "m.toml"], tmp_path)
    assert out.returncode == 2 and "Traceback" not in out.stderr
    assert "has no 'model'" in out.stderr
