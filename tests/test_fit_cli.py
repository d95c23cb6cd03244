"""uvfit fit / uvfit compare on files: normal runs, JSON keys, and bad input (clear message, exit 2)."""

import json
import subprocess
import sys
from pathlib import Path

import pytest

import uvfit
from tests.helpers.fit_sim import double, simulate
from uvfit.sky.model import SkyModel

ROOT = Path(__file__).resolve().parents[1]

try:  # the data layer's writer and selection
    from uvfit.data import io as _io  # noqa: F401
    from uvfit.data import select as _select  # noqa: F401

    HAVE_DATA = True
except ImportError:  # pragma: no cover - only before the data layer is merged
    HAVE_DATA = False

pytestmark = pytest.mark.skipif(not HAVE_DATA, reason="needs the data layer (uvfit.write, selection)")


def run(*args):
    out = subprocess.run([sys.executable, "-m", "uvfit", *map(str, args)], capture_output=True, text=True, cwd=ROOT)
    assert "Traceback" not in out.stderr, out.stderr
    return out


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    d = tmp_path_factory.mktemp("fitcli")
    truth = double()
    vs = simulate(truth, n=400, sigma=0.02, seed=3)
    uvfit.write(vs, d / "data.uvfits")
    start = truth.copy()
    start.set_free(truth.get_free() * 1.05 + 0.01)
    start.save(d / "model.toml")
    one = SkyModel.build(
        [{"name": "core", "shape": "gaussian", "flux": 1.2, "east": 0.0, "north": 0.0, "fwhm": 0.4}], angular_unit="mas"
    )
    one.save(d / "one.toml")
    flagged = vs.copy()
    flagged.flag[:] = True
    uvfit.write(flagged, d / "flagged.uvfits")
    return d


def test_fit_writes_json_and_model(files):
    out = run(
        "fit",
        files / "data.uvfits",
        files / "model.toml",
        "--json",
        files / "fit.json",
        "--save-model",
        files / "best.toml",
        "--seed",
        7,
        "--starts",
        2,
    )
    assert out.returncode == 0, out.stderr
    assert "core-knot.separation" in out.stdout and "caution:" in out.stdout
    res = json.loads((files / "fit.json").read_text())
    for key in (
        "parameters",
        "derived",
        "statistics",
        "mode",
        "seed",
        "version",
        "data",
        "selection",
        "systematic",
        "rescale_errors",
        "covariance",
        "correlation",
        "per_station",
        "per_baseline",
        "notices",
        "model_toml",
        "angular_unit",
        "frequency_hz",
    ):
        assert key in res, key
    assert res["seed"] == 7 and res["mode"] == "complex"
    p = res["parameters"]["core.flux"]
    assert set(p) >= {"value", "error", "unit", "free"} and p["unit"] == "Jy" and p["free"] is True
    for key in ("core-knot.separation", "core-knot.position_angle", "core-knot.flux_ratio"):
        assert set(res["derived"][key]) >= {"value", "error", "unit"}
    assert res["derived"]["core-knot.position_angle"]["unit"] == "deg"
    assert res["derived"]["core-knot.separation"]["unit"] == "mas"
    assert set(res["statistics"]) >= {"chi2", "dof", "reduced_chi2", "n_data", "aic", "bic"}
    assert len(res["covariance"]["matrix"]) == len(res["covariance"]["names"]) == 8
    # the saved model reloads and carries the best fit
    best = uvfit.load_model(files / "best.toml")
    assert best.values()["knot.flux"] == pytest.approx(res["parameters"]["knot.flux"]["value"])
    # never overwrite without --force
    again = run("fit", files / "data.uvfits", files / "model.toml", "--json", files / "fit.json")
    assert again.returncode == 2 and "exists already" in again.stderr


def test_compare_command_with_bootstrap(files):
    out = run(
        "compare",
        files / "data.uvfits",
        files / "one.toml",
        files / "model.toml",
        "--bootstrap",
        5,
        "--json",
        files / "cmp.json",
    )
    assert out.returncode == 0, out.stderr
    assert "verdict:" in out.stdout
    res = json.loads((files / "cmp.json").read_text())
    assert res["n_bootstrap"] == 5 and res["seed"] == 0
    assert set(res) >= {"models", "verdict", "preferred", "seed", "n_bootstrap"}
    for row in res["models"]:
        assert set(row) >= {"chi2", "dof", "aic", "bic", "n_free", "likelihood_ratio", "false_alarm_probability"}


def _model_file(path, text):
    path.write_text(text)
    return path


def test_unconstrained_model_is_refused(files):
    m = _model_file(
        files / "ghost.toml",
        'angular_unit = "mas"\n[[component]]\nname = "ghost"\n'
        'shape = "point"\nflux = { value = 0.0, fixed = true }\neast = 0.1\nnorth = 0.2\n',
    )
    out = run("fit", files / "data.uvfits", m)
    assert out.returncode == 2
    assert "cannot constrain any free parameter" in out.stderr and "ghost.east" in out.stderr


def test_inconsistent_bounds_are_refused(files):
    m = _model_file(
        files / "bounds.toml",
        'angular_unit = "mas"\n[[component]]\nname = "core"\n'
        'shape = "gaussian"\nflux = 1.0\neast = 0.0\nnorth = 0.0\n'
        "fwhm = { value = 0.3, min = 0.5, max = 0.2 }\n",
    )
    out = run("fit", files / "data.uvfits", m)
    assert out.returncode == 2
    assert "fwhm" in out.stderr and ("above its maximum" in out.stderr or "inconsistent bounds" in out.stderr)


def test_data_without_unflagged_rows_is_refused(files):
    out = run("fit", files / "flagged.uvfits", files / "model.toml")
    assert out.returncode == 2
    assert "no unflagged visibilities" in out.stderr or "flagged" in out.stderr


def test_non_converging_fit_is_reported(files):
    out = run("fit", files / "data.uvfits", files / "model.toml", "--max-evaluations", 2)
    assert out.returncode == 2
    assert "did not converge after 2 evaluations" in out.stderr and "--starts" in out.stderr


def test_poor_fit_is_told_plainly():
    # a chi2 beyond the 99.9% point of chi2(dof) (scipy.stats) earns a notice that errors are too small
    from scipy.stats import chi2

    from uvfit.infer.lsq import _poor_fit_chi2

    assert _poor_fit_chi2(100) == pytest.approx(chi2.ppf(0.999, 100))
