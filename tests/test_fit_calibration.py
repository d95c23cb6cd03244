"""Calibration of the least-squares errors over many seeded noise realisations.

Reference: the normal distribution (68.27% of draws within 1 sigma) and scipy.stats.chi2 for the
best-fit chi2 of a correct model with correct errors.
"""

import math

import numpy as np
import pytest
from scipy import stats

from tests.helpers.fit_sim import coverage, double
from uvfit.data.visset import VisibilitySet
from uvfit.infer.derived import derived_quantities
from uvfit.infer.lsq import fit
from uvfit.stats.modes import make_statistic

N_REAL = 1000
KEYS = ("core-knot.separation", "core-knot.position_angle", "core-knot.flux_ratio")


@pytest.mark.slow
def test_error_bars_cover_68_percent_and_chi2_follows_dof():
    truth = double(flux1=1.0, flux2=0.4, east2=-0.5, north2=-0.8, fwhm1=0.3, fwhm2=0.5)
    n = 300
    sigma = 0.05
    u, v = coverage(n, seed=21)
    clean = truth.visibilities(u, v)
    st = np.array(["KA", "LO", "MU"])
    s1 = np.arange(n) % 2
    true = {
        "core-knot.separation": math.hypot(-0.5, -0.8),
        "core-knot.position_angle": math.degrees(math.atan2(-0.5, -0.8)) % 360,
        "core-knot.flux_ratio": 0.4,
    }
    inside = {k: 0 for k in KEYS}
    chi2, dof = [], None
    for seed in range(N_REAL):
        rng = np.random.default_rng(1000 + seed)
        vis = clean + rng.normal(0, sigma, n) + 1j * rng.normal(0, sigma, n)
        vs = VisibilitySet(
            u=u,
            v=v,
            w=None,
            time=np.zeros(n),
            frequency=86e9,
            station1=st[s1],
            station2=st[s1 + 1],
            vis=vis,
            sigma=np.full(n, sigma),
        )
        res = fit(make_statistic("complex", vs, truth.copy()), starts=1, seed=seed)
        d = derived_quantities(res, resolved_test=False, limits=False)
        for k in KEYS:
            diff = d[k]["value"] - true[k]
            if k.endswith("position_angle"):
                diff = (diff + 180) % 360 - 180
            inside[k] += abs(diff) < d[k]["error"]
        chi2.append(res.chi2)
        dof = res.dof
    for k in KEYS:
        frac = inside[k] / N_REAL
        # normal distribution: P(|z| < 1) = 0.6827; the tolerance is the one asked for (0.05),
        # about 3.4 binomial standard errors at N = 1000
        assert abs(frac - 0.6827) < 0.05, (k, frac)
    chi2 = np.asarray(chi2)
    # mean within 3 standard errors of dof (scipy.stats.chi2: variance 2 dof)
    assert abs(chi2.mean() - dof) < 3 * math.sqrt(2 * dof / N_REAL)
    assert stats.kstest(chi2, stats.chi2(dof).cdf).pvalue > 0.01
