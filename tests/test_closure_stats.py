"""Closure statistics on the project's sky model: derivatives, symmetry, degeneracies, recovery."""

import numpy as np
import pytest

from tests.helpers.closure_tools import make_vset
from uvfit.infer.lsq import fit
from uvfit.sky.model import SkyModel
from uvfit.stats.closures import check_closures
from uvfit.stats.modes import make_statistic


def double(f1=1.0, e1=0.0, n1=0.0, w1=20.0, f2=0.4, e2=-15.0, n2=-20.0, w2=15.0, fixed=()):
    def p(name, value):
        return {"value": value, "fixed": True} if name in fixed else value

    return SkyModel.build(
        [
            {
                "name": "a",
                "shape": "gaussian",
                "flux": p("a.flux", f1),
                "east": p("a.east", e1),
                "north": p("a.north", n1),
                "fwhm": {"value": w1, "min": 0.0, "max": 200.0},
            },
            {
                "name": "b",
                "shape": "gaussian",
                "flux": p("b.flux", f2),
                "east": p("b.east", e2),
                "north": p("b.north", n2),
                "fwhm": {"value": w2, "min": 0.0, "max": 200.0},
            },
        ],
        angular_unit="uas",
    )


TRUTH = dict(f1=1.0, e1=0.0, n1=0.0, w1=20.0, f2=0.4, e2=-15.0, n2=-20.0, w2=15.0)


@pytest.fixture(scope="module")
def corrupted():
    # station gains up to 30% in amplitude and any phase, per station and time (invented array)
    return make_vset(double(**TRUTH), n_stations=7, n_times=20, sigma=0.01, seed=0, gain_amp=0.3, gain_phase=True)


@pytest.mark.parametrize("mode", ["closure_phase", "closure_amplitude", "closure", "hybrid"])
@pytest.mark.parametrize("covariance", ["snapshot", "diagonal"])
def test_jacobian_matches_finite_differences(corrupted, mode, covariance):
    # Outside check: central finite differences of the residuals (numerical derivative).
    model = double(**TRUTH)
    stat = make_statistic(mode, corrupted, model, systematic=0.01, covariance=covariance)
    theta = model.get_free() * 1.05 + 0.3
    jac = stat.jacobian(theta)
    num = np.zeros_like(jac)
    for k in range(len(theta)):
        h = np.zeros(len(theta))
        h[k] = 1e-5 * max(1.0, abs(theta[k]))
        num[:, k] = (stat.residuals(theta + h) - stat.residuals(theta - h)) / (2 * h[k])
    assert np.allclose(jac, num, rtol=1e-4, atol=1e-6 * np.abs(jac).max())


def test_point_symmetric_model_has_closure_phases_0_or_180(corrupted):
    # Outside source: a real, point-symmetric image has a real visibility (Hermitian symmetry,
    # REFERENCES.md), so every closure phase is 0 or 180 degrees; an offset double is not symmetric.
    sym = SkyModel.build(
        [
            {"name": "c", "shape": "gaussian", "flux": 1.0, "east": 0.0, "north": 0.0, "fwhm": 20.0},
            {"name": "p", "shape": "point", "flux": 0.3, "east": 12.0, "north": 7.0},
            {"name": "q", "shape": "point", "flux": 0.3, "east": -12.0, "north": -7.0},
        ],
        angular_unit="uas",
    )
    vs = corrupted.with_vis(sym.visibilities(corrupted.u, corrupted.v, corrupted.frequency))
    stat = make_statistic("closure_phase", vs, sym, snr_cut=0)
    psi = np.degrees(stat.data)
    assert np.all(np.minimum(np.abs(psi), 180 - np.abs(psi)) < 1e-6)
    off = double(**TRUTH)
    vs2 = corrupted.with_vis(off.visibilities(corrupted.u, corrupted.v, corrupted.frequency))
    psi2 = np.degrees(make_statistic("closure_phase", vs2, off, snr_cut=0).data)
    assert np.max(np.minimum(np.abs(psi2), 180 - np.abs(psi2))) > 10.0


def test_degeneracies_name_position_and_flux(corrupted):
    model = double(**TRUTH)
    for mode in ("closure_phase", "closure_amplitude", "closure"):
        deg = dict(make_statistic(mode, corrupted, model).degeneracies())
        assert set(deg) == {"a.east", "a.north", "a.flux"}
        assert "absolute position" in deg["a.east"] and "total flux" in deg["a.flux"]
    deg = dict(make_statistic("hybrid", corrupted, model).degeneracies())
    assert set(deg) == {"a.east", "a.north"}  # amplitudes fix the flux scale
    anchored = double(**TRUTH, fixed=("b.east", "b.north", "b.flux"))
    assert make_statistic("closure", corrupted, anchored).degeneracies() == []


def test_closure_fit_recovers_double_where_complex_fit_fails(corrupted):
    # The injected double (TRUTH) is the outside reference; the gains are station-based, to which
    # closure quantities are immune (TMS 2017 ch. 10, REFERENCES.md).
    start = dict(TRUTH, w1=25.0, f2=0.3, e2=-10.0, n2=-12.0, w2=10.0)
    res = fit(make_statistic("closure", corrupted, double(**start)), starts=3, seed=1)
    assert set(res.fixed_by_fitter) == {"a.east", "a.north", "a.flux"}
    truth = {"a.fwhm": 20.0, "b.flux": 0.4, "b.east": -15.0, "b.north": -20.0, "b.fwhm": 15.0}
    pulls = {n: (res.value(n) - truth[n]) / res.error(n) for n in truth}
    assert all(abs(p) < 3 for p in pulls.values()), pulls
    assert res.reduced_chi2 < 1.3

    cres = fit(make_statistic("complex", corrupted, double(**start)), starts=3, seed=1, strict=False)
    cpulls = [abs(cres.value(n) - truth[n]) / cres.error(n) for n in truth]
    assert cres.reduced_chi2 > 5 or max(cpulls) > 3


def test_check_closures_verdicts(corrupted):
    truth = double(**TRUTH)
    good = check_closures(corrupted, truth)
    assert good["supported"], good["verdict"]
    assert good["n_closure_phases"] == 20 * 15 and good["n_closure_amplitudes"] == 20 * 14
    assert good["n_stations"] == 7 and len(good["per_station"]) == 7
    single = SkyModel.build(
        [{"name": "a", "shape": "gaussian", "flux": 1.4, "east": 0.0, "north": 0.0, "fwhm": 25.0}], angular_unit="uas"
    )
    bad = check_closures(corrupted, single)
    assert not bad["supported"]
    assert "do NOT support" in bad["verdict"]
    assert bad["closure_phase_reduced_chi2"] > 5
    assert bad["worst_triangles"][0]["reduced_chi2"] >= bad["worst_triangles"][-1]["reduced_chi2"]


def test_scaled_statistic_keeps_its_class(corrupted):
    model = double(**TRUTH)
    stat = make_statistic("closure", corrupted, model)
    half = stat.scaled(2.0)
    assert type(half) is type(stat)
    th = model.get_free()
    assert np.isclose(half.chi2(th), stat.chi2(th) / 4.0)


def test_full_set_is_flagged_redundant_and_diagonal(corrupted):
    from uvfit.errors import UvfitError

    res = check_closures(corrupted, double(**TRUTH), full=True)
    assert res["set"].startswith("full") and res["covariance_mode"] == "diagonal"
    assert "redundant" in res["verdict"]
    with pytest.raises(UvfitError, match="singular"):
        make_statistic("closure", corrupted, double(**TRUTH), full=True, covariance="snapshot")


def test_closure_mode_through_the_fit_orchestration(corrupted):
    # the fitter's result dictionary carries the per-station breakdown from row_index
    from uvfit.infer.run import run_fit

    start = double(**dict(TRUTH, w1=25.0, f2=0.3, e2=-10.0, n2=-12.0, w2=10.0))
    out = run_fit(corrupted, start, mode="closure", systematic=0.0, starts=2, seed=3)
    assert out["mode"] == "closure" and out["seed"] == 3
    assert set(out["fixed_by_fitter"]) == {"a.east", "a.north", "a.flux"}
    assert len(out["per_station"]) == 7
    assert abs(out["parameters"]["b.east"]["value"] + 15.0) < 3 * out["parameters"]["b.east"]["error"]


@pytest.mark.parametrize("mode", ["closure", "hybrid"])
def test_rebuilt_joined_statistic_equals_a_fresh_one(corrupted, mode):
    # A joined statistic rebuilt with another floor is the statistic built with that floor from
    # scratch; its log-likelihood is the Gaussian one of its members (outside source:
    # scipy.stats.norm.logpdf of the wrapped differences, diagonal covariance; the hybrid's
    # amplitudes keep their Rice likelihood, checked in tests/test_fit_*).
    from scipy import stats

    model = double(**TRUTH)
    theta = model.get_free() * 1.02
    stat = make_statistic(mode, corrupted, model, systematic=0.01, covariance="diagonal")
    again = stat.rebuilt(systematic=0.03)
    fresh = make_statistic(mode, corrupted, model, systematic=0.03, covariance="diagonal")
    assert type(again) is type(fresh) and again.options == fresh.options
    assert np.allclose(again.residuals(theta), fresh.residuals(theta), rtol=1e-12, atol=0)
    assert np.array_equal(again.row_index, fresh.row_index)
    if mode == "closure":
        diff = np.angle(np.exp(1j * (stat.data - stat.predict(theta))))
        diff = np.where(stat.wrapped, diff, stat.data - stat.predict(theta))
        expected = float(np.sum(stats.norm.logpdf(diff, 0.0, stat.sigma)))
        assert stat.log_likelihood(theta) == pytest.approx(expected, rel=1e-10)
