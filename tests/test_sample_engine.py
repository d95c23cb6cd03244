"""The sampler engine: analytic posterior, seeds, resume, pools, start ball, log-posterior."""

import math

import numpy as np
import pytest
from scipy import stats as st

from tests.helpers.sample_data import simulate, two_points
from uvfit.infer.posterior import circular_unwrap, summarize
from uvfit.infer.sampling import LogPosterior, initial_ball, run_chain, sample
from uvfit.sky.model import SkyModel
from uvfit.stats.base import Statistic
from uvfit.stats.modes import make_statistic

MAS = math.pi / 180 / 3600e3


class LinearStatistic(Statistic):
    """data = A theta + noise: a statistic built from simple pieces for the engine's own checks."""

    mode = "linear"

    def __init__(self, a, y, sigma):
        self.a, self.data, self.sigma, self.wrapped = a, y, sigma, None

    def predict(self, theta):
        return self.a @ theta


class FlatModel:
    """The part of the SkyModel contract the engine uses: names, bounds, log prior."""

    def __init__(self, names, lo, hi):
        self.free_names = list(names)
        self.lo, self.hi = np.asarray(lo, float), np.asarray(hi, float)

    def free_bounds(self):
        return self.lo, self.hi

    def log_prior(self, theta):
        return 0.0 if np.all((theta >= self.lo) & (theta <= self.hi)) else -np.inf


def _linear_problem(seed=1, n=60):
    rng = np.random.default_rng(seed)
    a = rng.normal(size=(2 * n, 3))
    sigma = np.full(2 * n, 0.1)
    y = a @ np.array([1.0, 0.5, 0.2]) + sigma * rng.normal(size=2 * n)
    return LinearStatistic(a, y, sigma), FlatModel(["x.flux", "y.flux", "z.flux"], [-np.inf] * 3, [np.inf] * 3)


def _run(stat, model, **kw):
    lp = LogPosterior(stat, model)
    w = np.diag(1 / stat.sigma**2)
    cov = np.linalg.inv(stat.a.T @ w @ stat.a)
    mean = cov @ stat.a.T @ w @ stat.data
    kw.setdefault("n_walkers", 12)
    return run_chain(lp, mean, cov, model.free_bounds(), model.free_names, **kw)


def test_analytic_flux_posterior():
    """Fluxes of components at fixed positions and sizes, flat priors: the posterior is the
    Gaussian of weighted linear least squares, mean (A^T W A)^-1 A^T W y, covariance (A^T W A)^-1."""
    fixed = lambda x: {"value": x, "fixed": True}  # noqa: E731
    model = SkyModel.build(
        [
            {
                "name": "core",
                "shape": "gaussian",
                "flux": 1.0,
                "east": fixed(0.0),
                "north": fixed(0.0),
                "fwhm": fixed(0.15),
            },
            {
                "name": "knot",
                "shape": "gaussian",
                "flux": 0.4,
                "east": fixed(0.4),
                "north": fixed(-0.3),
                "fwhm": fixed(0.25),
            },
            {"name": "spot", "shape": "point", "flux": 0.1, "east": fixed(-0.5), "north": fixed(0.2)},
        ],
        angular_unit="mas",
    )
    vs = simulate(model, n=120, sigma=0.03, seed=4)
    # the design matrix from the published closed form (circular Gaussian S exp[-(pi theta q)^2 /
    # (4 ln 2)], Pearson 1995) and the shift theorem exp[-2 pi i (u l0 + v m0)] (TMS 2017 ch. 3),
    # written here independently of the model code
    q = np.hypot(vs.u, vs.v)
    cols = []
    for l0, m0, fwhm in ((0.0, 0.0, 0.15), (0.4, -0.3, 0.25), (-0.5, 0.2, 0.0)):
        env = np.exp(-((np.pi * fwhm * MAS * q) ** 2) / (4 * np.log(2)))
        cols.append(env * np.exp(-2j * np.pi * (vs.u * l0 + vs.v * m0) * MAS))
    c = np.array(cols).T
    a = np.vstack([c.real, c.imag])
    y = np.concatenate([vs.vis.real, vs.vis.imag])
    w = np.concatenate([vs.sigma, vs.sigma]) ** -2.0
    cov = np.linalg.inv(a.T @ (w[:, None] * a))
    mean = cov @ a.T @ (w * y)
    sd = np.sqrt(np.diag(cov))

    post = sample(vs, model, n_walkers=16, max_steps=2500, seed=11, derived=False)
    s = post.samples
    used = post.chain.n_steps - post.chain.burn_in
    n_eff = post.chain.n_walkers * used / np.max(post.chain.tau)
    # Monte Carlo errors from the effective sample size: sd / sqrt(n_eff) for a mean and
    # sd / sqrt(2 n_eff) for a standard deviation (common practice)
    assert np.all(np.abs(s.mean(axis=0) - mean) < 4 * sd / np.sqrt(n_eff))
    assert np.all(np.abs(s.std(axis=0, ddof=1) / sd - 1) < 4 / np.sqrt(2 * n_eff))
    # the medians reported are those of the samples
    for j, name in enumerate(post.names):
        assert post.parameters[name]["median"] == pytest.approx(np.median(s[:, j]))
        assert post.parameters[name]["unit"] == "Jy"


def test_stopping_rule_on_a_linear_problem():
    stat, model = _linear_problem()
    ch = _run(stat, model, max_steps=6000, seed=2)
    # the rule (emcee documentation): longer than 50 tau and tau settled; it stops early here
    assert ch.converged and ch.n_steps < 6000
    assert ch.n_steps > 50 * np.max(ch.tau)
    assert ch.burn_in >= 3 * np.max(ch.tau) and ch.thin >= 1


def test_same_seed_same_samples_and_pool():
    stat, model = _linear_problem()
    a = _run(stat, model, max_steps=150, seed=5)
    b = _run(stat, model, max_steps=150, seed=5)
    c = _run(stat, model, max_steps=150, seed=6)
    d = _run(stat, model, max_steps=150, seed=5, procs=2)
    assert np.array_equal(a.chain, b.chain)
    assert not np.array_equal(a.chain, c.chain)
    assert np.array_equal(a.chain, d.chain)
    assert not a.converged and any("NOT converged" in n for n in a.notes)


def test_resume_continues_the_same_chain(tmp_path):
    vs = simulate(two_points(), n=100, seed=3)
    model = two_points()
    one = sample(vs, model, n_walkers=10, max_steps=220, seed=9, chain_path=str(tmp_path / "one.h5"), derived=False)
    part = sample(vs, model, n_walkers=10, max_steps=130, seed=9, chain_path=str(tmp_path / "two.h5"), derived=False)
    assert part.chain.n_steps == 130
    rest = sample(vs, model, max_steps=220, seed=9, chain_path=str(tmp_path / "two.h5"), resume=True, derived=False)
    assert rest.chain.resumed_from == 130 and rest.chain.n_steps == 220
    assert np.array_equal(one.chain.chain, rest.chain.chain)
    assert np.array_equal(one.chain.log_prob, rest.chain.log_prob)
    # in memory, without a file, the same seed gives the same chain too
    mem = sample(vs, model, n_walkers=10, max_steps=220, seed=9, derived=False)
    assert np.array_equal(one.chain.chain, mem.chain.chain)


def test_initial_ball_inside_bounds_and_singular_covariance():
    rng = np.random.default_rng(0)
    lo, hi = np.array([0.0, -np.inf]), np.array([1.0, np.inf])
    pos, note = initial_ball([0.0, 2.0], np.diag([0.01, 0.04]), (lo, hi), 20, rng)
    assert np.all(pos[:, 0] >= 0) and np.all(pos[:, 0] <= 1)
    assert np.linalg.matrix_rank(pos - pos.mean(axis=0)) == 2 and note is None
    pos, note = initial_ball([0.5, 2.0], np.array([[1.0, 1.0], [1.0, 1.0]]), (lo, hi), 20, rng)
    assert note and "singular" in note
    assert np.linalg.matrix_rank(pos - pos.mean(axis=0)) == 2


def test_log_posterior_uses_the_model_priors():
    model = SkyModel.build(
        [
            {
                "name": "c",
                "shape": "point",
                "flux": {"value": 1.0, "prior": {"normal": [1.0, 0.2]}},
                "east": {"value": 0.0, "fixed": True},
                "north": {"value": 0.0, "fixed": True},
            }
        ],
        angular_unit="mas",
    )
    vs = simulate(model, n=30, seed=1)
    stat = make_statistic("complex", vs, model)
    lp = LogPosterior(stat, model)
    for x in (0.7, 1.0, 1.3):
        # log prior of a normal prior (scipy.stats.norm) plus the statistic's log-likelihood
        assert lp([x]) == pytest.approx(st.norm.logpdf(x, 1.0, 0.2) + stat.log_likelihood([x]))
    bounded = SkyModel.build(
        [
            {
                "name": "c",
                "shape": "point",
                "flux": {"value": 1.0, "min": 0.5, "max": 2.0},
                "east": {"value": 0.0, "fixed": True},
                "north": {"value": 0.0, "fixed": True},
            }
        ],
        angular_unit="mas",
    )
    lp = LogPosterior(make_statistic("complex", vs, bounded), bounded)
    assert lp([0.4]) == -np.inf and np.isfinite(lp([0.6]))


def test_circular_summary_across_north():
    # von Mises samples centred on 355 deg; reference: scipy.stats.circmean and the distribution's
    # own quantiles (scipy.stats.vonmises)
    kappa = 200.0
    x = np.degrees(st.vonmises.rvs(kappa, loc=np.radians(-5.0), size=20000, random_state=1)) % 360
    s = summarize(x, unit="deg", period=360.0)
    assert s["median"] == pytest.approx(np.degrees(st.circmean(np.radians(x))), abs=0.2)
    half = np.degrees(st.vonmises.ppf(0.84, kappa))
    assert s["upper"] - s["median"] == pytest.approx(half, rel=0.05)
    assert s["lower"] < s["median"] < s["upper"] and s["upper"] - s["lower"] < 20
    assert np.ptp(circular_unwrap(x)) < 180
