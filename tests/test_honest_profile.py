"""Profile likelihood (issue 15, item 2): intervals from delta chi2 = 1 and 3.84 (Wilks 1938;
Venzon & Moolgavkar 1988)."""

import numpy as np
import pytest
from helpers.sample_data import simulate

from uvfit.errors import UvfitError
from uvfit.infer.lsq import fit
from uvfit.infer.profile import intervals, profile
from uvfit.sky.model import SkyModel
from uvfit.stats.modes import make_statistic


def _point(flux=1.0):
    return SkyModel.build(
        [
            {
                "name": "p",
                "shape": "point",
                "flux": flux,
                "east": {"value": 0.0, "fixed": True},
                "north": {"value": 0.0, "fixed": True},
            }
        ],
        angular_unit="mas",
    )


def test_linear_one_parameter_matches_analytic():
    # A point of flux F at the phase centre: Re V = F + noise, so the weighted mean and its error
    # 1 / sqrt(sum 1/sigma^2) are exact (weighted least squares, common practice); the profile
    # interval at delta chi2 = L is mean +/- sqrt(L) * error.
    rng = np.random.default_rng(4)
    vs = simulate(_point(1.3), n=40, sigma=0.05, seed=4)
    vs = vs.with_vis(vs.vis, sigma=rng.uniform(0.03, 0.08, vs.n))
    stat = make_statistic("complex", vs, _point(1.0))
    prof = profile(stat, "p.flux", points=9, starts=1)
    w = 1.0 / vs.sigma**2
    mean = float(np.sum(w * vs.vis.real) / np.sum(w))
    err = float(1.0 / np.sqrt(np.sum(w)))
    assert prof["best"] == pytest.approx(mean, abs=1e-6)
    ((lo, hi),) = prof["interval_68"]
    assert lo == pytest.approx(mean - err, abs=1e-6)
    assert hi == pytest.approx(mean + err, abs=1e-6)
    ((lo, hi),) = prof["interval_95"]
    assert hi - lo == pytest.approx(2 * np.sqrt(3.841458820694124) * err, abs=1e-6)
    assert prof["unconstrained"] is False


def test_intervals_of_a_double_dip_and_a_flat_profile():
    # two parabolas (arithmetic): two separate intervals; a flat profile reaches both ends
    g = np.linspace(0, 10, 101)
    d = np.minimum((g - 2.0) ** 2, (g - 8.0) ** 2 + 0.5)
    iv, open_end = intervals(g, d, 1.0)
    assert len(iv) == 2 and not open_end
    assert iv[0] == pytest.approx([1.0, 3.0], abs=1e-9)
    assert iv[1] == pytest.approx([8.0 - np.sqrt(0.5), 8.0 + np.sqrt(0.5)], abs=1e-9)
    iv, open_end = intervals(g, 0.1 * np.ones_like(g), 1.0)
    assert iv == [[0.0, 10.0]] and open_end


def test_parameter_not_free_is_named():
    vs = simulate(_point(1.0), n=20, sigma=0.05, seed=1)
    stat = make_statistic("complex", vs, _point(1.0))
    with pytest.raises(UvfitError, match="p.east"):
        profile(stat, "p.east", points=5)


def _gauss(flux, fwhm):
    return SkyModel.build(
        [
            {
                "name": "g",
                "shape": "gaussian",
                "flux": {"value": flux, "min": 0.0},
                "fwhm": {"value": fwhm, "min": 0.001, "max": 2.0},
                "east": {"value": 0.0, "fixed": True},
                "north": {"value": 0.0, "fixed": True},
            }
        ],
        angular_unit="mas",
    )


def test_profile_coverage_nonlinear_gaussian():
    # A Gaussian's FWHM from few noisy points (nonlinear in the size): the 68% profile interval
    # covers the truth in 0.68 +/- 0.05 of 200 simulations (Wilks 1938; 200 simulations, 7 grid
    # points each, so the binomial spread is 0.033).
    truth = _gauss(1.0, 0.25)
    hits, n = 0, 200
    for k in range(n):
        vs = simulate(truth, n=12, q_max=4e8, sigma=0.1, seed=k)
        stat = make_statistic("complex", vs, _gauss(1.0, 0.25))
        best = fit(stat, seed=k, starts=1)  # one start at the truth: coverage, not the search
        prof = profile(
            stat,
            "g.fwhm",
            points=7,
            starts=1,
            best=best,
            value_range=(
                max(0.001, best.value("g.fwhm") - 4 * best.error("g.fwhm")),
                min(2.0, best.value("g.fwhm") + 4 * best.error("g.fwhm")),
            ),
        )
        hits += any(lo <= 0.25 <= hi for lo, hi in prof["interval_68"])
    assert abs(hits / n - 0.683) <= 0.05, hits


def test_thin_ring_one_triangle_profile_is_wide_and_holds_truth():
    # A modulated thin ring seen by one triangle of an invented three-station array (thermal
    # noise only, seeded): closure phases alone leave the diameter poorly fixed. The profile's 68%
    # set must hold the true 45 uas and be several uas wide (the check).
    from helpers.closure_tools import make_vset

    def ring(d, a, t):
        return SkyModel.build(
            [
                {
                    "name": "ring",
                    "shape": "ring_modulated",
                    "flux": {"value": 1.0, "min": 0.0},
                    "diameter": {"value": d, "min": 10.0, "max": 90.0},
                    "blur": {"value": 5.0, "fixed": True},
                    "amplitude_1": {"value": a, "min": 0.0, "max": 0.5},
                    "angle_1": {"value": t},
                    "east": 0.0,
                    "north": 0.0,
                }
            ],
            angular_unit="uas",
        )

    vs = make_vset(ring(45.0, 0.3, 150.0), n_stations=3, n_times=8, sigma=0.1, seed=3)
    stat = make_statistic("closure_phase", vs, ring(40.0, 0.2, 100.0), snr_cut=1.0)
    best = fit(stat, starts=5, seed=0)
    prof = profile(stat, "ring.diameter", value_range=(15, 85), points=11, starts=3, best=best)
    width = sum(hi - lo for lo, hi in prof["interval_68"])
    assert width >= 5.0, prof["interval_68"]
    assert any(lo <= 45.0 <= hi for lo, hi in prof["interval_68"]), prof["interval_68"]
