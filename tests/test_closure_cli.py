"""`uvfit closures` on the command line: counts, model comparison, JSON and ECSV outputs, errors."""

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from astropy.table import Table
from click.testing import CliRunner

import uvfit
from tests.helpers.closure_tools import make_vset
from uvfit.cli import cli
from uvfit.data.visset import VisibilitySet
from uvfit.sky.model import SkyModel

ROOT = Path(__file__).resolve().parents[1]

MODEL_TOML = """angular_unit = "uas"
[[component]]
name = "a"
shape = "gaussian"
flux = 1.0
east = 0.0
north = 0.0
fwhm = 20.0
[[component]]
name = "b"
shape = "gaussian"
flux = 0.4
east = -15.0
north = -20.0
fwhm = 15.0
"""


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    d = tmp_path_factory.mktemp("closures")
    model = SkyModel.build(
        [
            {"name": "a", "shape": "gaussian", "flux": 1.0, "east": 0.0, "north": 0.0, "fwhm": 20.0},
            {"name": "b", "shape": "gaussian", "flux": 0.4, "east": -15.0, "north": -20.0, "fwhm": 15.0},
        ],
        angular_unit="uas",
    )
    vs = make_vset(model, n_stations=5, n_times=6, sigma=0.01, seed=2, gain_amp=0.3, gain_phase=True)
    data = d / "invented.uvfits"
    uvfit.write(vs, data)
    toml = d / "double.toml"
    toml.write_text(MODEL_TOML)
    fitjson = d / "fit.json"
    fitjson.write_text(json.dumps({"mode": "closure", "systematic": 0.01, "model_toml": MODEL_TOML}))
    names = np.array(["X1", "X2"])
    two = VisibilitySet(
        u=[1e8, 2e8],
        v=[0.0, 1e8],
        w=None,
        time=[60000.0, 60000.01],
        frequency=230e9,
        station1=names[[0, 0]],
        station2=names[[1, 1]],
        vis=[1.0, 0.9],
        sigma=[0.01, 0.01],
    )
    bad = d / "two.uvfits"
    uvfit.write(two, bad)
    return d, data, toml, fitjson, bad


def test_counts_without_model(files):
    d, data, *_ = files
    out = d / "counts.json"
    res = CliRunner().invoke(cli, ["closures", str(data), "--json", str(out)])
    assert res.exit_code == 0, res.output
    doc = json.loads(out.read_text())
    # 5 stations at 6 times: 6 (N-1)(N-2)/2 and 6 N(N-3)/2 (TMS 2017 ch. 10, REFERENCES.md)
    assert doc["n_closure_phases"] == 6 * 6 and doc["n_closure_amplitudes"] == 6 * 5
    assert doc["n_stations"] == 5 and doc["n_triangles"] >= 6
    assert "closure_phase_chi2" not in doc
    assert "diagonal" in doc["covariance"] or "covariance" in doc["covariance"]


@pytest.mark.parametrize("which", ["toml", "json"])
def test_model_comparison_outputs(files, which):
    d, data, toml, fitjson, _ = files
    model = toml if which == "toml" else fitjson
    out, table = d / f"cmp-{which}.json", d / f"cmp-{which}.ecsv"
    res = CliRunner().invoke(
        cli, ["closures", str(data), "--model", str(model), "--json", str(out), "--table", str(table)]
    )
    assert res.exit_code == 0, res.output
    assert "support the fitted structure" in res.output and "Caution" in res.output
    doc = json.loads(out.read_text())
    for key in (
        "n_closure_phases",
        "n_closure_amplitudes",
        "closure_phase_chi2",
        "closure_amplitude_chi2",
        "n_stations",
        "per_triangle",
        "per_quadrangle",
        "per_station",
        "verdict",
        "supported",
    ):
        assert key in doc
    assert doc["supported"] is True  # the model that made the data
    assert doc["systematic"] == (0.01 if which == "json" else 0.0)  # the fit's floor by default
    tab = Table.read(table, format="ascii.ecsv")
    assert len(tab) == doc["n_closure_phases"] + doc["n_closure_amplitudes"]
    assert {"time", "stations", "value", "sigma", "model", "kind"} <= set(tab.colnames)
    ph = tab[tab["kind"] == "closure_phase"]
    # the model closure phases equal the data's to within a few sigma (noise only)
    resid = np.angle(np.exp(1j * np.radians(ph["value"] - ph["model"])))
    assert np.all(np.abs(np.degrees(resid)) < 6 * ph["sigma"])
    # no overwrite without --force
    again = CliRunner().invoke(cli, ["closures", str(data), "--model", str(model), "--json", str(out)])
    assert again.exit_code != 0


def test_two_stations_is_a_clear_error_without_traceback(files):
    *_, bad = files
    out = subprocess.run(
        [sys.executable, "-m", "uvfit", "closures", str(bad)], cwd=ROOT, capture_output=True, text=True
    )
    assert out.returncode == 2
    assert "no closure phases can be formed" in out.stderr and "three" in out.stderr
    assert "Traceback" not in out.stderr


def test_missing_model_file_is_a_clear_error(files):
    d, data, *_ = files
    out = subprocess.run(
        [sys.executable, "-m", "uvfit", "closures", str(data), "--model", str(d / "nothing.json")],
        cwd=ROOT,
        capture_output=True,
        text=True,
    )
    assert out.returncode == 2 and "does not exist" in out.stderr and "Traceback" not in out.stderr
