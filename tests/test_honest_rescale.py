"""--rescale-errors in compare and sample (issue 15, item 4): sigmas times sqrt(chi2/dof)."""

import numpy as np
import pytest
from helpers.sample_data import simulate

import uvfit
from uvfit.sky.model import SkyModel


def _one():
    return SkyModel.build(
        [
            {
                "name": "a",
                "shape": "gaussian",
                "flux": 1.0,
                "fwhm": 0.3,
                "east": {"value": 0.0, "fixed": True},
                "north": {"value": 0.0, "fixed": True},
            }
        ],
        angular_unit="mas",
    )


def _two():
    return SkyModel.build(
        [
            {
                "name": "a",
                "shape": "gaussian",
                "flux": 1.0,
                "fwhm": 0.3,
                "east": {"value": 0.0, "fixed": True},
                "north": {"value": 0.0, "fixed": True},
            },
            {"name": "b", "shape": "point", "flux": 0.05, "east": 0.4, "north": 0.1},
        ],
        angular_unit="mas",
    )


@pytest.fixture(scope="module")
def data():
    vs = simulate(_one(), n=80, sigma=0.04, seed=7)
    return vs.with_vis(vs.vis, sigma=vs.sigma / 2)  # sigmas stated 2x too small


def test_sample_rescaled_records_the_scale(data):
    rep = uvfit.sample(data, _one(), max_steps=30, walkers=8, rescale_errors=True)
    post = rep.posterior
    assert any("sqrt(chi2/dof)" in n for n in post.notes)
    fit = uvfit.fit(data, _one(), resolved_test=False).to_dict()["statistics"]
    assert rep.to_dict()["error_scale"] == pytest.approx(np.sqrt(fit["chi2"] / fit["dof"]), rel=1e-6)
