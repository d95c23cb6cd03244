"""Posterior summaries on real models: upper limits for unresolved sizes, angles across north,
derived quantities sample by sample, and the ordering of components that can swap labels."""

import math

import numpy as np
import pytest
from scipy import integrate, interpolate

from tests.helpers.sample_data import simulate, two_points
from uvfit.infer.posterior import order_samples, swap_groups
from uvfit.infer.sampling import sample
from uvfit.sky.model import SkyModel

MAS = math.pi / 180 / 3600e3
FIXED0 = {"value": 0.0, "fixed": True}


def test_unresolved_size_gives_an_upper_limit():
    truth = SkyModel.build(
        [{"name": "src", "shape": "point", "flux": 1.0, "east": FIXED0, "north": FIXED0}], angular_unit="mas"
    )
    vs = simulate(truth, n=150, q_max=4e8, sigma=0.02, seed=21)
    model = SkyModel.build(
        [
            {
                "name": "src",
                "shape": "gaussian",
                "flux": 1.0,
                "east": FIXED0,
                "north": FIXED0,
                "fwhm": {"value": 0.02, "min": 0.0, "max": 1.0},
            }
        ],
        angular_unit="mas",
    )
    post = sample(vs, model, n_walkers=16, max_steps=1500, seed=3)
    fwhm = post.parameters["src.fwhm"]
    assert "upper_limit_95" in fwhm, fwhm
    assert "upper_limit_95" in post.derived["src.size"]
    assert "lower_limit_95" in post.derived["src.brightness_temperature"]
    assert "< " in post.table()

    # reference: the exact posterior on a grid, written independently of the model code
    # (circular Gaussian S exp[-(pi theta q)^2 / (4 ln 2)], Pearson 1995; at the phase centre the
    # imaginary parts carry nothing), flat priors, flux marginalised with scipy.integrate
    q = np.hypot(vs.u, vs.v)
    s_hat = np.mean(vs.vis.real)
    s_grid = np.linspace(s_hat - 0.02, s_hat + 0.02, 201)
    t_grid = np.linspace(0.0, 0.3, 601)
    env = np.exp(-((np.pi * t_grid[:, None] * MAS * q[None, :]) ** 2) / (4 * np.log(2)))  # (t, n)
    re = vs.vis.real
    chi2 = (
        np.sum(re**2)
        - 2 * s_grid[None, :] * (env @ re)[:, None]
        + s_grid[None, :] ** 2 * np.sum(env**2, axis=1)[:, None]
    ) / 0.02**2
    like = np.exp(-0.5 * (chi2 - chi2.min()))
    marg = integrate.trapezoid(like, s_grid, axis=1)
    cdf = integrate.cumulative_trapezoid(marg, t_grid, initial=0.0)
    cdf /= cdf[-1]
    limit = float(interpolate.interp1d(cdf, t_grid)(0.95))
    assert fwhm["upper_limit_95"] == pytest.approx(limit, rel=0.15)
    # and the limit is well below the nominal resolution 1/q_max (common practice)
    assert fwhm["upper_limit_95"] < 0.5 / (4e8 * MAS)


def test_resolved_size_is_two_sided():
    model = SkyModel.build(
        [
            {
                "name": "src",
                "shape": "gaussian",
                "flux": 1.0,
                "east": FIXED0,
                "north": FIXED0,
                "fwhm": {"value": 0.2, "min": 0.0},
            }
        ],
        angular_unit="mas",
    )
    vs = simulate(model, n=100, sigma=0.02, seed=5)
    post = sample(vs, model, n_walkers=12, max_steps=400, seed=1)
    s = post.parameters["src.fwhm"]
    assert "upper_limit_95" not in s
    # the truth (0.2 mas, the simulated value) within the 95% interval
    assert s["lower_95"] < 0.2 < s["upper_95"]


def test_position_angle_across_north_and_derived_per_sample():
    # companion almost due north (truth PA = atan2(0.01, 0.5) = 1.15 deg): samples cross 0/360
    truth = two_points(1.0, 0.1, east=0.01, north=0.5)
    vs = simulate(truth, n=100, sigma=0.05, seed=8)
    post = sample(vs, two_points(1.0, 0.1, east=0.01, north=0.5), n_walkers=12, max_steps=500, seed=2)
    pa = post.derived["a-b.position_angle"]
    true_pa = math.degrees(math.atan2(0.01, 0.5))
    assert pa["unit"] == "deg" and 0.0 <= pa["median"] < 360.0
    assert pa["upper_95"] - pa["lower_95"] < 90
    # the truth lies in the 95% interval, allowing for the wrap at 360
    assert any(pa["lower_95"] <= true_pa + k * 360 <= pa["upper_95"] for k in (-1, 0, 1))
    # flux ratio evaluated sample by sample: its median is the median of b.flux / a.flux
    j = {n: i for i, n in enumerate(post.names)}
    ratio = post.samples[:, j["b.flux"]] / post.samples[:, j["a.flux"]]
    assert post.derived["a-b.flux_ratio"]["median"] == pytest.approx(np.median(ratio))
    sep = np.hypot(post.samples[:, j["b.east"]], post.samples[:, j["b.north"]])
    assert post.derived["a-b.separation"]["median"] == pytest.approx(np.median(sep))


def _pair(free_a=True):
    pos = (lambda x: x) if free_a else (lambda x: {"value": x, "fixed": True})
    return SkyModel.build(
        [
            {"name": "p", "shape": "point", "flux": 0.5, "east": pos(0.0), "north": pos(0.0)},
            {"name": "q", "shape": "point", "flux": 1.0, "east": 0.3, "north": 0.1},
        ],
        angular_unit="mas",
    )


def test_label_switching_order_by_flux_and_distance():
    model = _pair()
    names = model.free_names
    assert names == ["p.flux", "p.east", "p.north", "q.flux", "q.east", "q.north"]
    groups = swap_groups(model)
    assert [[c for c, _ in g] for g in groups] == [["p", "q"]]
    rng = np.random.default_rng(0)
    bright = np.column_stack([1.0 + 0.01 * rng.standard_normal(400), 0.02 * rng.standard_normal((400, 2))])
    faint = np.column_stack(
        [
            0.4 + 0.01 * rng.standard_normal(400),
            0.6 + 0.02 * rng.standard_normal(400),
            0.2 + 0.02 * rng.standard_normal(400),
        ]
    )
    swapped = rng.random(400) < 0.5
    samples = np.where(swapped[:, None], np.hstack([faint, bright]), np.hstack([bright, faint]))
    by_flux, info = order_samples(model, samples, "flux")
    # every sample: brightest first, and each component's position travels with its flux
    assert np.array_equal(by_flux, np.hstack([bright, faint]))
    assert info["rule"] == "flux" and "largest flux first" in info["description"]
    assert info["fraction_relabelled"] == pytest.approx(np.mean(swapped))
    by_distance, info = order_samples(model, samples, "distance")
    assert np.array_equal(by_distance, np.hstack([bright, faint]))  # the bright one is at the centre
    assert "nearest the phase centre" in info["description"]
    # a component whose position is fixed cannot swap with a free one; nor can two shapes
    assert swap_groups(_pair(free_a=False)) == []
    mixed = SkyModel.build(
        [
            {"name": "p", "shape": "point", "flux": 1.0, "east": 0.0, "north": 0.0},
            {"name": "g", "shape": "gaussian", "flux": 1.0, "east": 0.3, "north": 0.0, "fwhm": 0.1},
        ],
        angular_unit="mas",
    )
    assert swap_groups(mixed) == []


def test_closure_mode_samples_the_structure():
    from tests.helpers.sample_data import snapshots

    truth = SkyModel.build(
        [
            {"name": "a", "shape": "gaussian", "flux": 1.0, "east": 0.0, "north": 0.0, "fwhm": 0.2},
            {"name": "b", "shape": "gaussian", "flux": 0.4, "east": -0.3, "north": -0.4, "fwhm": 0.2},
        ],
        angular_unit="mas",
    )
    vs = snapshots(truth, n_times=8, sigma=0.02, seed=3)
    post = sample(vs, truth, mode="closure", n_walkers=16, max_steps=400, seed=1)
    # closures cannot fix the absolute position nor the total flux: those are fixed, not sampled
    assert "a.east" not in post.names and "a.north" not in post.names
    assert post.to_dict()["fixed_for_mode"]
    # the simulated values within 4 posterior standard deviations (a 4-sigma check of one
    # realisation; half the 68% interval stands for the standard deviation)
    true_pa = math.degrees(math.atan2(-0.3, -0.4)) % 360  # south-west, 216.87 deg
    for key, true in (("a-b.separation", 0.5), ("a-b.position_angle", true_pa), ("a-b.flux_ratio", 0.4)):
        s = post.derived[key]
        assert abs(s["median"] - true) < 4 * 0.5 * (s["upper"] - s["lower"]), (key, s)


def test_double_members_swap_to_the_same_sky():
    model = SkyModel.build(
        [
            {
                "name": "pair",
                "shape": "double",
                "member": "gaussian",
                "flux": 1.0,
                "east": 0.1,
                "north": -0.1,
                "flux_ratio": 0.5,
                "separation": 0.3,
                "position_angle": 40.0,
                "fwhm_1": 0.1,
                "fwhm_2": 0.2,
            }
        ],
        angular_unit="mas",
    )
    theta = model.get_free()
    names = model.free_names
    # the same sky written the other way round: second member first, ratio 2, angle + 180
    j = {n: i for i, n in enumerate(names)}
    other = theta.copy()
    psi = math.radians(40.0)
    other[j["pair.east"]] += 0.3 * math.sin(psi)
    other[j["pair.north"]] += 0.3 * math.cos(psi)
    other[j["pair.flux_ratio"]] = 2.0
    other[j["pair.position_angle"]] = 220.0
    other[j["pair.fwhm_1"]], other[j["pair.fwhm_2"]] = 0.2, 0.1
    u = np.linspace(-4e8, 4e8, 7)
    # check of the construction itself: both vectors give the same visibilities
    assert np.allclose(model.visibilities(u, u[::-1], theta=theta), model.visibilities(u, u[::-1], theta=other))
    out, info = order_samples(model, np.vstack([theta, other]), "flux")
    assert np.allclose(out[0], theta) and np.allclose(out[1], theta)
    assert info["doubles"] == ["pair"] and "brighter member first" in info["description"]


def test_faint_companion_flux_at_its_bound_gives_an_upper_limit():
    from scipy import stats as st

    truth = two_points(1.0, 0.0, east=0.3, north=0.2, free_position=False)
    vs = simulate(truth, n=120, sigma=0.05, seed=12)
    model = SkyModel.build(
        [
            {"name": "a", "shape": "point", "flux": 1.0, "east": FIXED0, "north": FIXED0},
            {
                "name": "b",
                "shape": "point",
                "flux": {"value": 0.02, "min": 0.0},
                "east": {"value": 0.3, "fixed": True},
                "north": {"value": 0.2, "fixed": True},
            },
        ],
        angular_unit="mas",
    )
    post = sample(vs, model, n_walkers=12, max_steps=1500, seed=4, derived=False)
    s = post.parameters["b.flux"]
    # reference: linear model in the two fluxes (shift theorem, TMS 2017 ch. 3), flat priors: the
    # posterior of b.flux is the weighted least-squares Gaussian truncated at 0 (scipy.stats.truncnorm)
    ph = np.exp(-2j * np.pi * (vs.u * 0.3 + vs.v * 0.2) * MAS)
    a = np.vstack([np.column_stack([np.ones(vs.n), ph.real]), np.column_stack([np.zeros(vs.n), ph.imag])])
    y = np.concatenate([vs.vis.real, vs.vis.imag])
    cov = np.linalg.inv(a.T @ a) * 0.05**2
    mean = cov @ a.T @ y / 0.05**2
    m, sd = mean[1], math.sqrt(cov[1, 1])
    ref = st.truncnorm((0 - m) / sd, np.inf, loc=m, scale=sd)
    assert ref.ppf(0.025) < 0.05 * ref.ppf(0.975)  # the exact posterior meets the rule
    assert "upper_limit_95" in s
    assert s["upper_limit_95"] == pytest.approx(ref.ppf(0.95), rel=0.15)
    assert s["median"] == pytest.approx(ref.median(), rel=0.3)
