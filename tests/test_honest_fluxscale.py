"""Absolute quantities in closure modes (issue 15, item 5): marked not measured, and a stated
flux-scale estimate from the short-baseline amplitudes."""

import numpy as np
import pytest
from helpers.closure_tools import make_vset

import uvfit
from uvfit.show.readback import fit_view
from uvfit.sky.model import SkyModel


def _model(flux):
    return SkyModel.build(
        [
            {
                "name": "core",
                "shape": "gaussian",
                "flux": {"value": flux, "min": 0.0},
                "fwhm": {"value": 20.0, "min": 0.5, "max": 200.0},
                "east": 0.0,
                "north": 0.0,
            },
            {
                "name": "knot",
                "shape": "gaussian",
                "flux": {"value": 0.4 * flux, "min": 0.0},
                "fwhm": {"value": 30.0, "min": 0.5, "max": 200.0},
                "east": -40.0,
                "north": -30.0,
            },
        ],
        angular_unit="uas",
    )


@pytest.fixture(scope="module")
def data():
    return make_vset(_model(2.0), n_stations=6, n_times=10, sigma=0.01, seed=5)


def test_closure_fit_marks_fluxes_and_estimates_the_scale(data):
    reps = [uvfit.fit(data, _model(f), mode="closure", resolved_test=False) for f in (5.0, 10.0)]
    for rep in reps:
        out = rep.to_dict()
        fs = out["flux_scale"]
        assert fs["measured_by_mode"] is False and fs["baselines"]
        # the true total flux is 2 + 0.8 = 2.8 Jy (the invented source): the estimate holds it
        assert abs(fs["total_flux_jy"] - 2.8) < 3 * fs["total_flux_error_jy"] + 0.02
        assert out["parameters"]["core.flux"]["measured"] is False
        tb = out["derived"]["core.brightness_temperature"]
        assert tb["measured"] is False
        assert out["notices"][0].startswith("the closure mode does not measure the total flux")
        assert "not measured" in rep.text()
    # the raw values follow the start (x 2); the flux-scale ones do not (same chi2)
    t5, t10 = (r.to_dict()["derived"]["core.brightness_temperature"] for r in reps)
    assert t10["value"] == pytest.approx(2 * t5["value"], rel=1e-3)
    assert t10["from_flux_scale"] == pytest.approx(t5["from_flux_scale"], rel=1e-3)


def test_figures_use_the_estimate(data):
    out = uvfit.fit(data, _model(10.0), mode="closure", resolved_test=False).to_dict()
    view = fit_view(data, out)
    total = abs(view.model.visibilities(np.zeros(1), np.zeros(1), np.full(1, 230e9))[0])
    assert total == pytest.approx(out["flux_scale"]["total_flux_jy"], rel=1e-6)
    assert "amplitude estimate" in view.phase_note


def test_complex_mode_measures_the_flux(data):
    out = uvfit.fit(data, _model(2.0), resolved_test=False).to_dict()
    assert out["flux_scale"] == {"measured_by_mode": True}
    assert "measured" not in out["parameters"]["core.flux"]
