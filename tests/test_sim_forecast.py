"""Forecast orchestration in the library: the simpler true model against a richer alternative."""

import os

import numpy as np
from scipy.stats import chi2

import uvfit
from tests.helpers.invented import component, model_toml
from uvfit.data.select import parse_time
from uvfit.sim.array import load_array
from uvfit.sim.forecast import forecast
from uvfit.sim.observe import Observation

HERE = os.path.join(os.path.dirname(__file__), "..", "examples", "planning")

SINGLE = model_toml(component("core", 1.0, fwhm=40.0))

DOUBLE = model_toml(component("core", 1.0, fwhm=40.0), component("knot", 0.4, east=-60.0, north=-80.0, fwhm=50.0))


def test_forecast_simpler_true_model(tmp_path):
    (tmp_path / "s.toml").write_text(SINGLE)
    (tmp_path / "d.toml").write_text(DOUBLE)
    single, double = uvfit.load_model(tmp_path / "s.toml"), uvfit.load_model(tmp_path / "d.toml")
    arr = load_array(os.path.join(HERE, "array.toml"))
    obs = Observation(
        ra_deg=210.547,
        dec_deg=38.753,
        start=parse_time("2027-04-10T03:00"),
        duration_s=3600.0,
        integration_s=600.0,
        frequency_hz=86e9,
    )
    calls = []
    out = forecast(arr, single, [double], obs, trials=3, seed=3, alt_names=["double"], progress=calls.append)
    assert calls == [1, 1, 1] and out["trial_seeds"] == [3, 4, 5]
    alt = out["alternatives"][0]
    # threshold: 99% point of chi-square with 6 - 2 = 4 degrees of freedom (scipy.stats)
    assert np.isclose(alt["lr_threshold_delta_chi2"], chi2.ppf(0.99, 4))
    # the richer alternative can only lower chi2 (it contains the truth), by a few units here
    assert alt["delta_chi2"]["n"] == 3 and alt["delta_chi2"]["median"] <= 1e-6
    assert "core.size" in out["structure"] and np.isclose(out["structure"]["core.size"]["true"], 40.0)
    assert out["preferred_lr_fraction"] == alt["true_preferred_lr_fraction"]
    # the same seed gives the same forecast (every random draw is seeded)
    again = forecast(arr, single, [double], obs, trials=3, seed=3, alt_names=["double"])
    assert again["per_trial"][0]["chi2_true"] == out["per_trial"][0]["chi2_true"]
