"""The simulation needs Earth-orientation data but never downloads it, and importing it changes
no astropy setting for the rest of the process."""

import json
import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

# Run in a fresh interpreter: the settings are read before uvfit.sim is first imported. The
# network is refused and astropy's downloader records any call, so a download attempt shows.
SCRIPT = r"""
import json, socket
import astropy.utils.iers.iers as iers_module
from astropy.utils import iers

iers.conf.auto_download = True          # astropy's default: download when tables look stale
KEYS = ("auto_download", "auto_max_age", "iers_degraded_accuracy")
before = {k: getattr(iers.conf, k) for k in KEYS}

calls = []
def refuse(*args, **kwargs):
    calls.append(str(args[:1]))
    raise OSError("no network in this test")
iers_module.download_file = refuse
socket.socket.connect = refuse
socket.create_connection = refuse

import uvfit.sim, uvfit.sim.tracks, uvfit.sim.observe, uvfit.sim.forecast   # noqa: E401
after_import = {k: getattr(iers.conf, k) for k in KEYS}

import numpy as np
from uvfit.sim.array import parse_array
from uvfit.data.select import parse_time
from uvfit.sim.tracks import compute_tracks, time_grid
arr = parse_array({"name": "offline", "station": [
    {"name": "P1", "lat": 40.0, "lon": -105.0, "height": 1600.0, "sefd": 1000.0},
    {"name": "P2", "lat": 32.0, "lon": -110.0, "height": 700.0, "sefd": 1000.0},
    {"name": "P3", "lat": 45.0, "lon": -80.0, "height": 300.0, "sefd": 1000.0}]})
out = {}
for when in ("2017-04-05T00:00", "2045-03-01T02:00"):   # inside, then far past the tables
    tr = compute_tracks(arr, 187.7, 12.4, time_grid(parse_time(when), 3600.0, 600.0))
    out[when] = {"finite": bool(np.isfinite(tr.uvw_m).all()), "notice": tr.notice}
after_tracks = {k: getattr(iers.conf, k) for k in KEYS}
print(json.dumps({"before": before, "after_import": after_import, "after_tracks": after_tracks,
                  "calls": calls, "tracks": out}, default=str))
"""


def test_importing_sim_leaves_iers_settings_and_tracks_compute_offline():
    # Outside reference: astropy's own documented IERS settings (astropy.utils.iers.conf) and
    # its downloader astropy.utils.iers.iers.download_file, which a refresh would call.
    proc = subprocess.run(
        [sys.executable, "-c", SCRIPT],
        cwd=ROOT,
        capture_output=True,
        text=True,
        env={**os.environ, "PYTHONPATH": str(ROOT)},
    )
    assert proc.returncode == 0, proc.stderr
    res = json.loads(proc.stdout.strip().splitlines()[-1])
    assert res["after_import"] == res["before"]
    assert res["after_tracks"] == res["before"]
    assert res["before"]["auto_download"] is True
    assert res["calls"] == []
    assert all(t["finite"] for t in res["tracks"].values())
    assert res["tracks"]["2017-04-05T00:00"]["notice"] is None
    assert "Earth-orientation tables" in res["tracks"]["2045-03-01T02:00"]["notice"]
