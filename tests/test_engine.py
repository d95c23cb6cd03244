"""The visibility engine: the compiled path gives the numbers of the numpy reference path.

Outside references: numpy's own sin, cos and exp (the C library's) for the kernel's elementary
functions; the numpy path (each shape's numpy code and the shift theorem, TMS 2017 ch. 3, from
memory) for whole models, values and Jacobians, for every registered shape. No timing here.
"""

import os
import subprocess
import sys

import numpy as np
import pytest

from uvfit.errors import ModelError
from uvfit.sky import engine
from uvfit.sky.model import SkyModel
from uvfit.sky.shapes import SHAPES, shape_class

#: the compiled path is an optional extra; without numba only the reference path is tested
needs_numba = pytest.mark.skipif(not engine.numba_available(), reason="numba is not installed")
PATHS = ["numpy", "numba"] if engine.numba_available() else ["numpy"]

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
RNG = np.random.default_rng(7)
N = 300
U = RNG.normal(0, 3e9, N)
V = RNG.normal(0, 3e9, N)
F = RNG.uniform(200e9, 260e9, N)

#: a value (model units: mas, deg, 1) for every size parameter, by its name without member suffix
SIZE = {
    "fwhm": 0.05,
    "axis_ratio": 0.55,
    "position_angle": 35.0,
    "diameter": 0.06,
    "blur": 0.012,
    "amplitude": 0.3,
    "angle": 40.0,
    "inner_radius": 0.02,
    "outer_radius": 0.045,
    "radius": 0.03,
    "flux_ratio": 0.45,
    "separation": 0.11,
}


def size_value(name):
    base = name
    for suffix in ("_1", "_2", "_3"):
        if base.endswith(suffix):
            base = base[: -len(suffix)]
    base = base.rstrip("_0123456789") if base.startswith(("amplitude", "angle")) else base
    return SIZE[base] * (0.8 if name.endswith("_2") else 1.0)


def spec_for(key, name="a", east=0.07, north=-0.04, **settings):
    shape = shape_class(key)(**settings)
    spec = {"name": name, "shape": key, "flux": 1.2, "east": east, "north": north, **settings}
    for p in shape.parameter_names():
        spec[p] = size_value(p)
    return spec


CASES = {key: spec_for(key) for key in SHAPES if key != "double"}
CASES["ring_modulated_order_2"] = spec_for("ring_modulated", order=2)
for member in SHAPES:
    if member != "double":
        CASES[f"double_{member}"] = spec_for("double", member=member)
CASES["centred_gaussian"] = spec_for("gaussian", east=0.0, north=0.0)


def both(model, u=U, v=V, freq=F, theta=None):
    out = {}
    for name in ("numpy", "numba"):
        with engine.using(name):
            vis, jac = model.visibilities_and_jacobian(u, v, freq, theta=theta)
            out[name] = (vis, jac, model.visibilities(u, v, freq, theta=theta))
    return out["numpy"], out["numba"]


def assert_same(ref, fast, rtol=1e-12):
    """Values relative to the largest value; each Jacobian column relative to its largest entry
    (a column that is zero in the reference must be zero to rounding of the visibility)."""
    vr, jr, vr2 = ref
    vf, jf, vf2 = fast
    assert vf.shape == vr.shape and jf.shape == jr.shape
    scale = np.max(np.abs(vr))
    assert np.max(np.abs(vf - vr)) <= rtol * scale
    assert np.max(np.abs(vf2 - vr2)) <= rtol * scale
    for j in range(jr.shape[-1]):
        col_scale = max(np.max(np.abs(jr[..., j])), 1e-300)
        err = np.max(np.abs(jf[..., j] - jr[..., j]))
        assert err <= rtol * col_scale or err <= 1e-14 * scale, j


@needs_numba
@pytest.mark.parametrize("case", list(CASES))
def test_fast_path_equals_reference_for_every_shape(case):
    model = SkyModel.build([CASES[case]])
    assert_same(*both(model))


@needs_numba
@pytest.mark.parametrize("case", ["gaussian", "elliptical_gaussian", "disk", "double_point"])
def test_fast_path_with_spectral_index_and_frequencies(case):
    spec = dict(CASES[case], spectral_index=-0.7, reference_frequency="230 GHz")
    model = SkyModel.build([spec])
    for freq in (F, 245e9, None):
        assert_same(*both(model, freq=freq))


@needs_numba
def test_fast_path_several_components_ties_fixed_and_theta():
    specs = [
        spec_for("gaussian", "core", 0.0, 0.0),
        spec_for("elliptical_gaussian", "jet", 0.2, 0.1) | {"axis_ratio": {"value": 0.4, "fixed": True}},
        spec_for("point", "knot", -0.15, 0.3) | {"north": {"tie": "jet.north"}},
        spec_for("ring", "shell") | {"diameter": {"tie": "core.fwhm"}},
        spec_for("gaussian", "halo", 0.01, 0.02) | {"spectral_index": 0.5, "reference_frequency": "220 GHz"},
    ]
    model = SkyModel.build(specs)
    theta = model.get_free() * (1.0 + 0.05 * RNG.standard_normal(model.n_free))
    assert_same(*both(model, theta=theta))
    # theta= leaves the model unchanged, as on the reference path
    before = model.get_free()
    both(model, theta=theta)
    np.testing.assert_array_equal(model.get_free(), before)
    # a changed structure (a parameter fixed, another value set) is seen by the next call
    model.fix("core.fwhm")
    model.parameters["jet.axis_ratio"].value = 0.7
    assert_same(*both(model))
    model.release("core.fwhm")
    model.component("halo").reference_frequency = 240e9
    assert_same(*both(model))
    # a copy evaluates alike and keeps its own structure
    other = model.copy()
    other.fix("jet.flux")
    assert_same(*both(other))
    assert_same(*both(model))


@needs_numba
def test_fast_path_any_input_shape_and_many_rows():
    model = SkyModel.build([spec_for("gaussian", "g"), spec_for("disk", "d", -0.1, 0.05)])
    u2, v2 = U[:240].reshape(12, 20), V[:240].reshape(12, 20)
    ref, fast = both(model, u2, v2, None)
    assert fast[1].shape == (12, 20, model.n_free)
    assert_same(ref, fast)
    # more rows than one chunk and than one block of shape evaluations, not a multiple of either
    n = engine.BLOCK + 1234
    rng = np.random.default_rng(3)
    u, v = rng.normal(0, 2e9, n), rng.normal(0, 2e9, n)
    assert_same(*both(model, u, v, None))
    # broadcasting u against v, and empty input
    ref, fast = both(model, U[:5, None], V[None, :7], None)
    assert_same(ref, fast)
    for name in PATHS:
        with engine.using(name):
            vis, jac = model.visibilities_and_jacobian(np.zeros(0), np.zeros(0))
            assert vis.shape == (0,) and jac.shape == (0, model.n_free)


@needs_numba
def test_kernel_trigonometry_and_exponential_against_numpy():
    from uvfit.sky import _kernels as k

    rng = np.random.default_rng(11)
    # phases in turns: small, large (1e6 turns) and exact quarter turns
    t = np.concatenate(
        [rng.uniform(-2, 2, 4000), rng.uniform(-1e6, 1e6, 4000), np.arange(-8, 9) * 0.25, [0.0, 0.5, -0.5, 0.125]]
    )
    s, c = np.empty_like(t), np.empty_like(t)
    k.sincos_array(t, s, c)
    # reference: numpy (C library) sin/cos of 2 pi (t - round(t)), exact reduction in turns
    r = 2 * np.pi * (t - np.rint(t))
    assert np.max(np.abs(s - np.sin(r))) < 4e-16
    assert np.max(np.abs(c - np.cos(r))) < 4e-16
    assert np.max(np.abs(s * s + c * c - 1)) < 5e-16
    x = np.concatenate([-rng.uniform(0, 700, 4000), rng.uniform(-1, 1, 1000), [0.0, -1e-300, -708.0, -740.0]])
    e = np.empty_like(x)
    k.exp_array(x, e)
    ref = np.exp(x)
    normal = ref >= np.finfo(float).tiny
    assert np.max(np.abs(e[normal] / ref[normal] - 1)) < 5e-16
    # subnormal results: to a few units of the smallest subnormal
    assert np.max(np.abs(e[~normal] - ref[~normal])) <= 4 * 5e-324
    below = np.array([-746.0, -1e4, -1e300])
    k.exp_array(below, e[:3])
    assert np.all(e[:3] == 0.0)
    odd = np.array([np.nan, np.inf, -np.inf, 710.0])
    k.exp_array(odd, e[:4])
    assert np.isnan(e[0]) and e[1] == np.inf and e[2] == 0.0 and e[3] == np.inf
    k.sincos_array(np.array([np.nan, np.inf]), s[:2], c[:2])
    assert np.all(np.isnan(s[:2])) and np.all(np.isnan(c[:2]))


@needs_numba
def test_non_finite_parameters_give_non_finite_visibilities_on_both_paths():
    # the fitter relies on non-finite predictions to reject bad parameter values
    model = SkyModel.build([CASES["elliptical_gaussian"], CASES["point"] | {"name": "b"}])
    theta = model.get_free()
    theta[model.free_names.index("a.fwhm")] = np.nan
    for name in PATHS:
        with engine.using(name):
            vis = model.visibilities(U, V, theta=theta)
            assert np.all(np.isnan(vis)), name


@needs_numba
def test_engine_choice_and_messages(monkeypatch):
    default = engine.current()
    with pytest.raises(ModelError, match="unknown visibility engine"):
        engine.set_engine("fortran")
    with engine.using("numpy"):
        assert engine.current() == "numpy"
    monkeypatch.setenv(engine.ENGINE_VARIABLE, "numpy")
    engine.set_engine(None)  # read the variable again
    try:
        assert engine.current() == "numpy"
        monkeypatch.setenv(engine.ENGINE_VARIABLE, "nonsense")
        engine.set_engine(None)
        with pytest.raises(ModelError, match=engine.ENGINE_VARIABLE):
            engine.current()
    finally:
        monkeypatch.undo()
        engine.set_engine(None)
    assert engine.current() == default


def test_import_does_not_load_numba():
    code = "import sys, uvfit, uvfit.sky.model, uvfit.sky.engine; print('numba' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == "False"


@needs_numba
def test_environment_variable_selects_the_path():
    code = (
        "import numpy as np; from uvfit.sky import engine; from uvfit.sky.model import SkyModel; "
        "m = SkyModel.build([{'name': 'a', 'shape': 'gaussian', 'flux': 1.0, 'east': 0.1, 'fwhm': 0.05}]); "
        "m.visibilities(np.ones(3), np.ones(3)); print(engine.current())"
    )
    for name in ("numpy", "numba"):
        env = dict(os.environ, **{engine.ENGINE_VARIABLE: name})
        out = subprocess.run(
            [sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, env=env, timeout=300
        )
        assert out.returncode == 0, out.stderr
        assert out.stdout.strip() == name


@pytest.mark.parametrize("case", ["gaussian", "elliptical_gaussian", "double_disk", "shell"])
def test_misfit_equals_the_sum_over_model_visibilities(case):
    # reference: the definition sum w |d - V|^2 with V from the numpy path
    model = SkyModel.build([CASES[case]])
    rng = np.random.default_rng(5)
    with engine.using("numpy"):
        vis = model.visibilities(U, V, F)
    data = vis + 0.01 * (rng.standard_normal(N) + 1j * rng.standard_normal(N))
    weight = rng.uniform(0.5, 2.0, N)
    d = data - vis
    expected = float(np.sum(weight * (d.real**2 + d.imag**2)))
    theta = model.get_free()
    for name in PATHS:
        with engine.using(name):
            got = model.misfit(U, V, data, weight, F, theta=theta)
        assert got == pytest.approx(expected, rel=1e-10), name
    with pytest.raises(ModelError, match="one value per row"):
        model.misfit(U, V, data[:-1], weight, F)


def test_complex_statistic_fast_likelihood_and_jacobian_equal_the_generic_ones():
    # reference: the Statistic base class (residual vector, Gaussian likelihood with normalisation)
    from uvfit.data.visset import VisibilitySet
    from uvfit.stats.base import Statistic
    from uvfit.stats.modes import make_statistic

    model = SkyModel.build([spec_for("gaussian", "g"), spec_for("point", "p", -0.1, 0.2)])
    rng = np.random.default_rng(9)
    vis = model.visibilities(U, V) + 0.02 * (rng.standard_normal(N) + 1j * rng.standard_normal(N))
    vs = VisibilitySet(
        u=U,
        v=V,
        w=None,
        time=np.zeros(N),
        frequency=230e9,
        station1=["AA"] * N,
        station2=["BB"] * N,
        vis=vis,
        sigma=rng.uniform(0.01, 0.03, N),
    )
    stat = make_statistic("complex", vs, model, systematic=0.01)
    theta = model.get_free() * 1.01
    for s in (stat, stat.scaled(1.7)):
        assert s.log_likelihood(theta) == pytest.approx(Statistic.log_likelihood(s, theta), rel=1e-12)
        assert s.chi2(theta) == pytest.approx(Statistic.chi2(s, theta), rel=1e-12)
        np.testing.assert_allclose(s.jacobian(theta), Statistic.jacobian(s, theta), rtol=1e-13, atol=0)
    with engine.using("numpy"):
        np.testing.assert_allclose(stat.jacobian(theta), Statistic.jacobian(stat, theta), rtol=1e-13, atol=0)
