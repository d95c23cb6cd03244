"""The demo: its invented data are what the simulation code makes (value for value, byte for
byte), and the demo recovers the invented truth within its errors and detects the double."""

import json
import math
import os
import subprocess
import sys

try:
    import tomllib
except ModuleNotFoundError:  # Python 3.10
    import tomli as tomllib

import numpy as np
import pytest
from scipy import stats

import uvfit
from tests.helpers import demo_run as _demo_run

ROOT = _demo_run.ROOT
EXAMPLE = os.path.join(ROOT, "examples", "demo")
DATA = os.path.join(ROOT, "uvfit", "demo_data", "uvd0917.uvfits")
C_LIGHT = 299792458.0  # m/s, exact (SI)


def _make_module():
    import importlib.util

    spec = importlib.util.spec_from_file_location("make_demo_data", os.path.join(EXAMPLE, "make_demo_data.py"))
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def _truth():
    with open(os.path.join(EXAMPLE, "truth.toml"), "rb") as handle:
        return tomllib.load(handle)["component"][0]


@pytest.fixture(scope="module")
def demo():
    proc, out_dir, _ = _demo_run.demo_run()
    assert proc.returncode == 0, proc.stderr[-3000:]

    def load(name):
        with open(os.path.join(out_dir, name), encoding="utf-8") as handle:
            return json.load(handle)

    return proc, out_dir, load


# --------------------------------------------------------------------------- the shipped data


def test_shipped_data_are_small_and_reproduced_by_the_script(tmp_path):
    assert os.path.getsize(DATA) < 1_000_000
    mod = _make_module()
    made, _ = mod.make()
    shipped = uvfit.read(DATA)
    # value for value: the rows the simulation makes now are the rows in the shipped file
    assert made.n == shipped.n
    for key in ("u", "v", "w", "time"):
        np.testing.assert_allclose(getattr(shipped, key), getattr(made, key), rtol=1e-6, atol=1e-9)
    np.testing.assert_allclose(shipped.vis, made.vis, rtol=1e-6, atol=1e-9)
    np.testing.assert_allclose(shipped.sigma, made.sigma, rtol=1e-6)
    assert list(shipped.station1) == list(made.station1)
    assert list(shipped.station2) == list(made.station2)
    # and byte for byte, written by the script itself
    out = tmp_path / "again.uvfits"
    assert mod.main(["--out", str(out)]) == 0
    assert out.read_bytes() == open(DATA, "rb").read()


def test_shipped_sigma_is_the_radiometer_equation():
    # sigma = sqrt(SEFD_i SEFD_j) / (eta sqrt(2 dnu tau)) (TMS 2017 ch. 6; REFERENCES.md)
    with open(os.path.join(EXAMPLE, "array.toml"), "rb") as handle:
        arr = tomllib.load(handle)
    sefd = {s["name"]: s["sefd"] for s in arr["station"]}
    eta = arr["defaults"]["eta"]
    mod = _make_module()
    vs = uvfit.read(DATA)
    expect = np.sqrt([sefd[a] * sefd[b] for a, b in zip(vs.station1, vs.station2)]) / (
        eta * math.sqrt(2 * mod.BANDWIDTH_HZ * mod.INTEGRATION_S)
    )
    np.testing.assert_allclose(vs.sigma, expect, rtol=1e-6)


def test_the_double_is_closer_than_the_nominal_resolution():
    vs = uvfit.read(DATA)
    # nominal resolution lambda / B_max (common practice; REFERENCES.md), B_max the longest
    # projected baseline in wavelengths
    res_mas = math.degrees(1.0 / float(np.max(np.hypot(vs.u, vs.v)))) * 3.6e6
    ratio = _truth()["separation"] / res_mas
    assert 0.4 <= ratio <= 0.6, ratio


def test_demo_models_start_away_from_the_truth():
    truth = _truth()
    two = uvfit.load_model(os.path.join(ROOT, "uvfit", "demo_data", "two.toml"))
    for key in ("separation", "flux_ratio", "position_angle"):
        start = two.parameters[f"pair.{key}"].value
        assert abs(start - truth[key]) > 0.1 * abs(truth[key]), key


# --------------------------------------------------------------------------- the demo's answers


def test_recovers_the_truth_within_three_sigma(demo):
    _, _, load = demo
    fit = load("fit_two.json")
    truth = _truth()
    for key in ("separation", "flux_ratio", "position_angle", "flux"):
        p = fit["parameters"][f"pair.{key}"]
        # the invented truth the data were simulated from (examples/demo/truth.toml)
        diff = p["value"] - truth[key]
        if key == "position_angle":
            diff = (diff + 180.0) % 360.0 - 180.0
        assert abs(diff) < 3 * p["error"], (key, p, truth[key])
    # errors of the size the scenario promises (5-15% on separation and flux ratio)
    for key in ("separation", "flux_ratio"):
        p = fit["parameters"][f"pair.{key}"]
        assert 0.03 < p["error"] / p["value"] < 0.2, (key, p)


def test_posterior_contains_the_truth(demo):
    _, _, load = demo
    post = load("posterior.json")
    truth = _truth()
    for key in ("separation", "flux_ratio"):
        s = post["parameters"][f"pair.{key}"]
        assert (
            s["lower_95"] - 0.5 * (s["upper_95"] - s["lower_95"])
            < truth[key]
            < s["upper_95"] + 0.5 * (s["upper_95"] - s["lower_95"])
        ), (key, s)
    assert post["seed"] == 0


def test_double_detected_with_small_false_alarm_probability(demo):
    _, _, load = demo
    cmp = load("compare.json")
    assert cmp["preferred"] == "two"
    two = {r["name"]: r for r in cmp["models"]}["two"]
    assert two["false_alarm_probability"] < 0.01
    # the observed improvement far beyond the chi2 reference with 2 extra parameters (scipy.stats);
    # the bootstrap, not this, is the calibrated test
    assert stats.chi2.sf(two["likelihood_ratio"], 2) < 1e-6


def test_fits_are_statistically_acceptable(demo):
    _, _, load = demo
    fit = load("fit_two.json")
    st = fit["statistics"]
    # reduced chi2 of a correct model: 1 +/- sqrt(2/dof) (chi-square distribution, scipy.stats)
    assert stats.chi2.sf(st["chi2"], st["dof"]) > 1e-3
    assert stats.chi2.cdf(st["chi2"], st["dof"]) > 1e-3
    assert load("closures.json")["supported"] is True


def test_every_output_written_and_headline_consistent(demo):
    from uvfit.demo import OUTPUTS

    proc, out_dir, load = demo
    for name in OUTPUTS.values():
        assert os.path.getsize(os.path.join(out_dir, name)) > 0, name
    for name in ("fit_one.json", "fit_two.json", "compare.json", "posterior.json"):
        assert load(name)["seed"] == 0, name
    head = load("headline.json")
    assert proc.stdout.strip().splitlines()[-1] == "answer: " + head["text"]
    with open(os.path.join(out_dir, "report.html"), encoding="utf-8") as handle:
        page = handle.read()
    assert "UVD 0917+224" in page and "Closure check" in page and "Model comparison" in page
    # progress on stderr for the long steps
    for label in ("bootstrap", "sampling"):
        assert label in proc.stderr


def test_refuses_a_non_empty_folder(tmp_path):
    (tmp_path / "keep.txt").write_text("mine")
    proc = subprocess.run(
        [sys.executable, "-m", "uvfit", "demo", "--out", str(tmp_path)], cwd=ROOT, capture_output=True, text=True
    )
    assert proc.returncode == 2
    assert "not empty" in proc.stderr and "--force" in proc.stderr
    assert "Traceback" not in proc.stderr
    assert (tmp_path / "keep.txt").read_text() == "mine"
    assert sorted(os.listdir(tmp_path)) == ["keep.txt"]


def test_out_dir_checks(tmp_path):
    from uvfit.demo import check_out_dir
    from uvfit.errors import UvfitError

    new = tmp_path / "new"
    assert check_out_dir(new) == str(new) and new.is_dir()
    (new / "x").write_text("1")
    check_out_dir(new, force=True)  # allowed with force
    with pytest.raises(UvfitError):
        check_out_dir(new)
    (tmp_path / "file").write_text("1")
    with pytest.raises(UvfitError):
        check_out_dir(tmp_path / "file", force=True)
    with pytest.raises(UvfitError):
        check_out_dir(tmp_path / "missing" / "deeper")


def test_blas_helper_leaves_results_unchanged():
    # the same SVD with one thread and with the default (numpy.linalg as the reference)
    from uvfit._blas import single_threaded

    a = np.random.default_rng(1).normal(size=(500, 6))
    ref = np.linalg.svd(a, compute_uv=False)
    with single_threaded():
        one = np.linalg.svd(a, compute_uv=False)
    np.testing.assert_allclose(one, ref, rtol=1e-12)


def test_headline_keys_documented_in_readme(demo):
    _, _, load = demo
    with open(os.path.join(ROOT, "README.md"), encoding="utf-8") as handle:
        readme = handle.read()
    missing = [k for k in load("headline.json") if f"`{k}`" not in readme]
    assert not missing, missing
