"""uvfit simulate / uvfit forecast on the command line: normal runs and bad input."""

import json
import os
import subprocess
import sys

import numpy as np
import pytest
from click.testing import CliRunner

import uvfit
from tests.helpers.invented import component, model_toml
from uvfit.cli import cli

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))

ARRAY = """name = "invented three"
[defaults]
min_elevation = 10.0
[[station]]
name = "A1"
lat = 40.0
lon = -105.0
height = 1600.0
sefd = 500.0
[[station]]
name = "A2"
lat = 32.0
lon = -110.0
height = 700.0
sefd = 800.0
[[station]]
name = "A3"
lat = 45.0
lon = -80.0
height = 300.0
sefd = 300.0
diameter = 20.0
"""

SINGLE = model_toml(component("core", 1.0, fwhm=60.0))

DOUBLE = model_toml(component("core", 1.0, fwhm=40.0), component("knot", 0.4, east=-60.0, north=-80.0, fwhm=50.0))

OBS = [
    "--ra",
    "12h30m49s",
    "--dec",
    "+12d23m",
    "--start",
    "2027-03-01T02:00",
    "--duration",
    "4h",
    "--integration",
    "5min",
    "--frequency",
    "86GHz",
]


@pytest.fixture
def files(tmp_path):
    (tmp_path / "array.toml").write_text(ARRAY)
    (tmp_path / "single.toml").write_text(SINGLE)
    (tmp_path / "double.toml").write_text(DOUBLE)
    return tmp_path


def run(args):
    return subprocess.run([sys.executable, "-m", "uvfit", *args], capture_output=True, text=True, cwd=ROOT)


def test_simulate_writes_file_and_prints_summary(files):
    out = files / "sim.uvfits"
    res = CliRunner().invoke(
        cli,
        [
            "simulate",
            str(files / "array.toml"),
            str(files / "double.toml"),
            *OBS,
            "--channels",
            "2",
            "--bandwidth",
            "512MHz",
            "--seed",
            "42",
            "--gain-error",
            "0.1",
            "--phase-error",
            "20",
            "-o",
            str(out),
            "--json",
            str(files / "sim.json"),
        ],
    )
    assert res.exit_code == 0, res.output
    assert "seed 42" in res.output and "resolution" in res.output and "A3" in res.output
    vs = uvfit.read(out)
    assert set(vs.station_names) == {"A1", "A2", "A3"} and len(np.unique(vs.frequency)) == 2
    summary = json.loads((files / "sim.json").read_text())
    assert summary["seed"] == 42 and summary["rows"] == vs.n
    # refuses to overwrite without --force
    again = run(["simulate", str(files / "array.toml"), str(files / "double.toml"), *OBS, "-o", str(out)])
    assert again.returncode == 2 and "exists" in again.stderr and "Traceback" not in again.stderr


@pytest.mark.parametrize(
    "change, words",
    [
        (
            {"array": 'name = "one"\n[[station]]\nname = "A1"\nlat = 40.0\nlon = -105.0\nheight = 0.0\nsefd = 5.0\n'},
            ["at least two"],
        ),
        ({"--dec": "-85d"}, ["never above the elevation limit"]),
        ({"--duration": "4parsec"}, ["duration", "not a time"]),
        ({"--frequency": "86GHzz"}, ["frequency", "unknown number or unit"]),
        ({"--integration": "10"}, ["integration", "no unit"]),
        ({"--dec": "12x"}, ["declination"]),
        ({"--start": "next tuesday"}, ["time"]),
    ],
)
def test_simulate_bad_input_clear_message(files, change, words):
    if "array" in change:
        (files / "array.toml").write_text(change["array"])
    args = list(OBS)
    for key, value in change.items():
        if key.startswith("--"):
            args[args.index(key) + 1] = value
    res = run(["simulate", str(files / "array.toml"), str(files / "single.toml"), *args, "-o", str(files / "x.uvfits")])
    assert res.returncode == 2, res.stderr
    assert "Traceback" not in res.stderr
    assert res.stderr.count("\n") <= 2
    for word in words:
        assert word in res.stderr
    assert not (files / "x.uvfits").exists()


def test_forecast_small_run_json_keys(files):
    # a tiny forecast: 2 trials, ~100 rows each; checks that the run completes and what it reports
    js = files / "f.json"
    res = run(
        [
            "forecast",
            str(files / "array.toml"),
            str(files / "double.toml"),
            str(files / "single.toml"),
            *OBS,
            "--trials",
            "2",
            "--seed",
            "7",
            "--json",
            str(js),
        ]
    )
    assert res.returncode == 0, res.stderr
    assert "recovered" in res.stdout and "Traceback" not in res.stderr
    out = json.loads(js.read_text())
    for key in (
        "seed",
        "trial_seeds",
        "trials",
        "recovered_fraction",
        "preferred_bic_fraction",
        "preferred_lr_fraction",
        "alternatives",
        "structure",
        "per_trial",
        "cautions",
    ):
        assert key in out
    assert out["seed"] == 7 and out["trial_seeds"] == [7, 8]
    assert "core-knot.separation" in out["structure"]
    sep = out["structure"]["core-knot.separation"]
    assert sep["n"] == 2 and abs(sep["true"] - 100.0) < 1e-9  # hypot(60, 80) = 100
    # a strong, well-sampled double: the fits find it (2 of 2 is the expected outcome, not luck)
    assert out["recovered_fraction"] >= 0.5 and out["preferred_bic_fraction"] == 1.0


def test_future_date_one_notice_line_no_warnings(files):
    # a date past the Earth-orientation tables astropy ships: one notice line, no warning stack
    args = list(OBS)
    args[args.index("--start") + 1] = "2034-03-01T02:00"
    res = run(
        ["simulate", str(files / "array.toml"), str(files / "single.toml"), *args, "-o", str(files / "future.ecsv")]
    )
    assert res.returncode == 0, res.stderr
    lines = [ln for ln in res.stderr.splitlines() if ln.strip()]
    assert len(lines) == 1 and "extrapolated" in lines[0], res.stderr
    assert "Warning" not in res.stderr
    assert uvfit.read(files / "future.ecsv").meta["seed"] == 0
