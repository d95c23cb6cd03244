"""Station gains solved inside the fit on real data: 3C 279 at 230 GHz (tests/data/3c279/ABOUT.md)."""

import numpy as np
import pytest

import uvfit
from tests.helpers.real_data import real_file, two_gaussians
from uvfit.data.select import apply_selection
from uvfit.infer.lsq import fit
from uvfit.stats.modes import make_statistic


def _faint_from_bright(res):
    v = dict(zip(res.model.parameters, (p.value for p in res.model.parameters.values())))
    bright, faint = ("a", "b") if v["a.flux"] >= v["b.flux"] else ("b", "a")
    de, dn = v[f"{faint}.east"] - v[f"{bright}.east"], v[f"{faint}.north"] - v[f"{bright}.north"]
    return float(np.degrees(np.arctan2(de, dn)) % 360.0), float(np.hypot(de, dn))


@pytest.mark.parametrize("band", ["lo", "hi"])
def test_gains_fit_agrees_with_the_closure_fit_and_puts_the_jet_south_west(band):
    # Outside source: Kim et al. 2020, A&A 640, A69 and REFERENCES.md: two circular Gaussians put
    # the fainter component south-west of the brighter one (position angle 180-270 deg), some
    # 25-30 microarcseconds away; and the closure fit of the same rows (closure phases and log
    # closure amplitudes, 2% floor), which station gains cannot touch. Same-site baselines
    # (< 10 Mlambda) left out as in tests/test_closure_3c279.py (common practice).
    vs, _ = apply_selection(uvfit.read(real_file(band)).good(), min_uv=1e7)
    closure = fit(make_statistic("closure", vs, two_gaussians(), systematic=0.02), strict=False)
    res = fit(
        make_statistic("complex", vs, closure.model.copy(), systematic=0.02, gains="complex", gain_prior="*=0.1"),
        strict=False,
        starts=1,  # from the closure solution: the gains fit refines it
    )
    pa, sep = _faint_from_bright(res)
    pa_c, sep_c = _faint_from_bright(closure)
    assert 180.0 < pa < 270.0 and 25.0 < sep < 30.0, (pa, sep)
    # The two-Gaussian model leaves reduced chi2 of 8-12 in both fits, so their formal errors
    # (0.02 uas, 0.05 deg) are far too small to compare by. Measured here (gains fit / closure
    # fit): lo 28.3 uas 238.6 deg / 28.9 uas 237.3 deg; hi 27.9 uas 238.6 deg / 28.5 uas 237.7 deg;
    # reduced chi2 10.9 / 12.0 and 9.6 / 10.0; 161 gains in 19 scans found from time gaps.
    assert abs(sep - sep_c) < 0.05 * sep_c and abs(pa - pa_c) < 5.0, (sep, sep_c, pa, pa_c)
    assert res.statistic.solver.n_gains > 100
    # the two-Gaussian model does not hold the amplitudes: the gains take flux fudges far beyond
    # their 10% prior (median pull measured here about 8), which the record flags
    record = res.statistic.gain_record(res.values)
    assert record["prior_pull_median"] > 2 and record["notices"]
