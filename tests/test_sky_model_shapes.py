"""Visibilities and analytic derivatives of the model layer and of the point, Gaussian and double shapes.

Outside references: central finite differences for every derivative; the closed forms of
REFERENCES.md (Pearson 1995; TMS 2017, from memory) for the Gaussian; the shift theorem and
Hermitian symmetry of the Fourier kernel (TMS 2017 ch. 3, from memory).
"""

import math

import numpy as np
import pytest

from uvfit.sky.model import SkyModel
from uvfit.sky.shapes import shape_class

MAS = math.pi / 180 / 3600e3  # radians per milliarcsecond (definition of the unit)

RNG = np.random.default_rng(20261201)
U = RNG.normal(0, 3e9, 60)
V = RNG.normal(0, 3e9, 60)
F = RNG.uniform(200e9, 260e9, 60)


def fd_check(model, u=U, v=V, freq=F, rel=1e-6, tol=1e-6):
    """Compare the analytic Jacobian with central finite differences (outside reference: the
    definition of the derivative), column by column, relative to the column's size."""
    theta = model.get_free()
    vis, jac = model.visibilities_and_jacobian(u, v, freq)
    np.testing.assert_allclose(vis, model.visibilities(u, v, freq), rtol=0, atol=1e-14)
    np.testing.assert_allclose(jac, model.jacobian(u, v, freq), rtol=0, atol=1e-14)
    assert jac.shape == (len(u), model.n_free)
    for j, name in enumerate(model.free_names):
        h = rel * max(1.0, abs(theta[j]))
        tp, tm = theta.copy(), theta.copy()
        tp[j] += h
        tm[j] -= h
        num = (model.visibilities(u, v, freq, theta=tp) - model.visibilities(u, v, freq, theta=tm)) / (2 * h)
        # relative to the column, with a floor (a column that is exactly zero, e.g. the position
        # angle of a round Gaussian, leaves only rounding noise in the difference quotient)
        scale = max(np.max(np.abs(num)), np.max(np.abs(jac[:, j])), 1e-3 * np.max(np.abs(vis)))
        assert np.max(np.abs(num - jac[:, j])) / scale < tol, name
    # theta= did not change the model
    np.testing.assert_array_equal(model.get_free(), theta)


SPECS = {
    "point": {"name": "a", "shape": "point", "flux": 0.7, "east": 0.12, "north": -0.05},
    "gaussian": {"name": "a", "shape": "gaussian", "flux": 1.3, "east": -0.08, "north": 0.02, "fwhm": 0.05},
    "elliptical_gaussian": {
        "name": "a",
        "shape": "elliptical_gaussian",
        "flux": 0.9,
        "east": 0.03,
        "north": 0.07,
        "fwhm": 0.09,
        "axis_ratio": 0.45,
        "position_angle": 37.0,
    },
    "elliptical_round": {
        "name": "a",
        "shape": "elliptical_gaussian",
        "flux": 0.9,
        "fwhm": 0.06,
        "axis_ratio": 1.0,
        "position_angle": 20.0,
    },
    "double_point": {
        "name": "a",
        "shape": "double",
        "flux": 1.1,
        "east": 0.01,
        "north": 0.02,
        "flux_ratio": 0.4,
        "separation": 0.15,
        "position_angle": 230.0,
    },
    "double_gaussian": {
        "name": "a",
        "shape": "double",
        "member": "gaussian",
        "flux": 1.1,
        "east": 0.01,
        "flux_ratio": 0.6,
        "separation": 0.12,
        "position_angle": -40.0,
        "fwhm_1": 0.03,
        "fwhm_2": 0.06,
    },
    "double_elliptical": {
        "name": "a",
        "shape": "double",
        "member": "elliptical_gaussian",
        "flux": 0.8,
        "north": -0.03,
        "flux_ratio": 1.7,
        "separation": 0.2,
        "position_angle": 75.0,
        "fwhm_1": 0.04,
        "axis_ratio_1": 0.6,
        "position_angle_1": 15.0,
        "fwhm_2": 0.07,
        "axis_ratio_2": 0.3,
        "position_angle_2": 120.0,
    },
    "spectral": {
        "name": "a",
        "shape": "gaussian",
        "flux": 1.0,
        "east": 0.02,
        "fwhm": 0.04,
        "spectral_index": -0.8,
        "reference_frequency": "230 GHz",
    },
}


@pytest.mark.parametrize("case", list(SPECS))
@pytest.mark.parametrize("unit", ["mas", "uas"])
def test_jacobian_matches_finite_differences(case, unit):
    spec = dict(SPECS[case])
    if unit == "uas":  # same source, positions and sizes in microarcseconds
        spec = {
            k: (v * 1e3 if k in ("east", "north", "separation") or k.startswith("fwhm") else v) for k, v in spec.items()
        }
    fd_check(SkyModel.build([spec], angular_unit=unit))


def test_jacobian_several_components_and_ties():
    specs = [
        SPECS["gaussian"] | {"name": "core"},
        SPECS["double_elliptical"] | {"name": "pair"},
        SPECS["spectral"] | {"name": "knot", "fwhm": {"tie": "core.fwhm"}, "north": {"tie": "pair.north"}},
    ]
    tied = SkyModel.build(specs)
    fd_check(tied)
    # the column of a parameter others are tied to is the sum of the untied columns
    # (chain rule; the untied model is the outside reference)
    untied_specs = [dict(s) for s in specs]
    untied_specs[2] = untied_specs[2] | {"fwhm": 0.05, "north": -0.03}
    untied = SkyModel.build(untied_specs)
    jt = tied.jacobian(U, V, F)
    ju = untied.jacobian(U, V, F)
    ft, fu = tied.free_names, untied.free_names
    np.testing.assert_allclose(
        jt[:, ft.index("core.fwhm")], ju[:, fu.index("core.fwhm")] + ju[:, fu.index("knot.fwhm")], atol=1e-12
    )
    np.testing.assert_allclose(
        jt[:, ft.index("pair.north")], ju[:, fu.index("pair.north")] + ju[:, fu.index("knot.north")], atol=1e-12
    )
    assert "knot.fwhm" not in ft and tied.values()["knot.fwhm"] == tied.values()["core.fwhm"]


@pytest.mark.parametrize(
    "key,params",
    [
        ("gaussian", {"fwhm": 0.05 * MAS}),
        ("elliptical_gaussian", {"fwhm": 0.05 * MAS, "axis_ratio": 0.3, "position_angle": 0.4}),
        ("double", {"flux_ratio": 0.5, "separation": 0.1 * MAS, "position_angle": 1.0}),
    ],
)
def test_shape_gradient_matches_finite_differences(key, params):
    # the Shape contract directly, in radians (definition of the derivative)
    shape = shape_class(key)()
    val, grads = shape.structure_gradient(U, V, params)
    np.testing.assert_allclose(val, shape.structure(U, V, params), atol=1e-15)
    assert set(grads) == set(shape.parameter_names())
    for n, g in grads.items():
        h = 1e-6 * abs(params[n])
        pp, pm = dict(params), dict(params)
        pp[n] += h
        pm[n] -= h
        num = (shape.structure(U, V, pp) - shape.structure(U, V, pm)) / (2 * h)
        assert np.max(np.abs(num - g)) <= 1e-6 * max(np.max(np.abs(g)), 1e-12), n


def test_gaussian_half_amplitude_point():
    # REFERENCES.md: half amplitude at q = 2 ln2 / (pi theta) = 0.4413 / theta (Pearson 1995)
    theta = 0.05
    m = SkyModel.build([{"name": "g", "shape": "gaussian", "flux": 2.0, "fwhm": theta}])
    q = 0.4413 / (theta * MAS)
    for ang in np.radians([0, 33, 90, 200]):
        vis = m.visibilities(np.array([q * np.sin(ang)]), np.array([q * np.cos(ang)]))
        assert abs(vis[0] / 2.0 - 0.5) < 1e-3
    q_exact = 2 * math.log(2) / (math.pi * theta * MAS)
    assert abs(m.visibilities([q_exact], [0.0])[0].real - 1.0) < 1e-12


def test_elliptical_gaussian_axes_and_orientation():
    # REFERENCES.md: along the major axis (PA phi) the visibility falls as a circular Gaussian of
    # FWHM a, across it as one of FWHM b (Pearson 1995)
    a, ratio, pa = 0.1, 0.4, 30.0
    m = SkyModel.build(
        [
            {
                "name": "e",
                "shape": "elliptical_gaussian",
                "flux": 1.0,
                "fwhm": a,
                "axis_ratio": ratio,
                "position_angle": pa,
            }
        ]
    )
    phi = math.radians(pa)
    q_maj = 0.4413 / (a * MAS)
    q_min = 0.4413 / (a * ratio * MAS)
    along = m.visibilities([q_maj * math.sin(phi)], [q_maj * math.cos(phi)])[0]
    across = m.visibilities([q_min * math.cos(phi)], [-q_min * math.sin(phi)])[0]
    assert abs(along.real - 0.5) < 1e-3 and abs(across.real - 0.5) < 1e-3


def test_elliptical_reduces_to_circular_at_ratio_one():
    # REFERENCES.md: reduces to the circular case for a = b; PA derivative exactly zero there
    e = SkyModel.build(
        [
            {
                "name": "e",
                "shape": "elliptical_gaussian",
                "flux": 1.0,
                "fwhm": 0.07,
                "axis_ratio": 1.0,
                "position_angle": 63.0,
            }
        ]
    )
    c = SkyModel.build([{"name": "e", "shape": "gaussian", "flux": 1.0, "fwhm": 0.07}])
    np.testing.assert_allclose(e.visibilities(U, V), c.visibilities(U, V), rtol=1e-12, atol=1e-15)
    jac = e.jacobian(U, V)
    assert np.all(np.isfinite(jac))
    assert np.all(jac[:, e.free_names.index("e.position_angle")] == 0)
    np.testing.assert_allclose(
        jac[:, e.free_names.index("e.fwhm")], c.jacobian(U, V)[:, c.free_names.index("e.fwhm")], rtol=1e-12, atol=1e-15
    )


@pytest.mark.parametrize("case", list(SPECS))
def test_hermitian_symmetry_and_zero_spacing_flux(case):
    # TMS 2017 ch. 3 (from memory): V(-u,-v) = conj V(u,v) for a real image; V(0,0) = total flux
    m = SkyModel.build([SPECS[case]])
    np.testing.assert_allclose(m.visibilities(-U, -V), np.conj(m.visibilities(U, V)), atol=1e-14)
    flux = m.parameters["a.flux"].value
    assert abs(m.visibilities([0.0], [0.0])[0] - flux) < 1e-13
    assert abs(m.total_flux() - flux) < 1e-13


def test_spectral_index_scales_flux():
    # S(nu) = S0 (nu/nu0)^alpha (definition of the spectral index)
    m = SkyModel.build([SPECS["spectral"]])
    nu = np.array([115e9, 230e9, 345e9])
    vis0 = m.visibilities(np.zeros(3), np.zeros(3), frequency=nu)
    np.testing.assert_allclose(vis0.real, (nu / 230e9) ** -0.8, rtol=1e-12)
    # without a frequency, the flux at the reference frequency
    assert m.visibilities([0.0], [0.0])[0] == pytest.approx(1.0)
    assert m.total_flux(frequency=460e9) == pytest.approx(2**-0.8)


def test_centred_symmetric_shapes_are_real():
    # an image symmetric under (l, m) -> (-l, -m) has a real transform (TMS 2017, from memory)
    for case in ("gaussian", "elliptical_gaussian", "point"):
        spec = dict(SPECS[case], east=0.0, north=0.0)
        m = SkyModel.build([spec])
        assert np.all(m.visibilities(U, V).imag == 0), case
        assert shape_class(spec["shape"]).real_when_centred
    assert not shape_class("double").real_when_centred


@pytest.mark.parametrize("member", ["point", "gaussian", "elliptical_gaussian"])
def test_double_equals_two_separate_components(member):
    # the shift theorem (TMS 2017 ch. 3): a double is the sum of two components placed apart
    size = {
        "point": [{}, {}],
        "gaussian": [{"fwhm": 0.03}, {"fwhm": 0.05}],
        "elliptical_gaussian": [
            {"fwhm": 0.04, "axis_ratio": 0.5, "position_angle": 20.0},
            {"fwhm": 0.06, "axis_ratio": 0.8, "position_angle": -70.0},
        ],
    }[member]
    flux, r, sep, pa, e0, n0 = 1.5, 0.35, 0.22, 250.0, 0.05, -0.1
    spec = {
        "name": "d",
        "shape": "double",
        "member": member,
        "flux": flux,
        "east": e0,
        "north": n0,
        "flux_ratio": r,
        "separation": sep,
        "position_angle": pa,
    }
    for k in (1, 2):
        spec.update({f"{n}_{k}": v for n, v in size[k - 1].items()})
    double = SkyModel.build([spec])
    dx, dy = sep * math.sin(math.radians(pa)), sep * math.cos(math.radians(pa))
    pair = SkyModel.build(
        [
            {"name": "one", "shape": member, "flux": flux / (1 + r), "east": e0, "north": n0, **size[0]},
            {"name": "two", "shape": member, "flux": flux * r / (1 + r), "east": e0 + dx, "north": n0 + dy, **size[1]},
        ]
    )
    np.testing.assert_allclose(double.visibilities(U, V), pair.visibilities(U, V), atol=1e-12)
    # the members helper gives the same two components
    mem = double.members()
    assert [x["name"] for x in mem] == ["d.1", "d.2"]
    for x, c in zip(mem, pair.members()):
        assert x["shape"] == member
        assert x["flux"] == pytest.approx(c["flux"]) and x["east"] == pytest.approx(c["east"])
        assert x["north"] == pytest.approx(c["north"])
        assert x["parameters"] == pytest.approx(c["parameters"])
    assert double.component_centres() == {"d": (e0, n0)}


def test_double_parameter_names_follow_member():
    d = shape_class("double")(member="elliptical_gaussian")
    assert d.parameter_names() == [
        "flux_ratio",
        "separation",
        "position_angle",
        "fwhm_1",
        "axis_ratio_1",
        "position_angle_1",
        "fwhm_2",
        "axis_ratio_2",
        "position_angle_2",
    ]
    assert d.parameter_kind("fwhm_2") == "length" and d.parameter_kind("position_angle_1") == "angle"
    assert shape_class("double")().parameter_names() == ["flux_ratio", "separation", "position_angle"]
    with pytest.raises(ValueError):
        shape_class("double")(member="double")


def test_offset_follows_shift_theorem_sign():
    # a point 1 mas east: V = S exp(-2 pi i u l0) (TMS 2017 ch. 3, REFERENCES.md kernel)
    m = SkyModel.build([{"name": "p", "shape": "point", "flux": 1.0, "east": 1.0, "north": 0.0}])
    u = np.array([0.25 / MAS])  # a quarter turn
    assert m.visibilities(u, [0.0])[0] == pytest.approx(-1j, abs=1e-12)
    m = SkyModel.build([{"name": "p", "shape": "point", "flux": 1.0, "north": 1.0}])
    assert m.visibilities([0.0], u)[0] == pytest.approx(-1j, abs=1e-12)


def test_free_parameters_bounds_and_prior():
    m = SkyModel.build(
        [
            {
                "name": "core",
                "shape": "elliptical_gaussian",
                "flux": 1.0,
                "east": {"value": 0.0, "fixed": True},
                "north": {"value": 0.0, "fixed": True},
                "fwhm": {"value": 0.1, "max": 2.0, "prior": {"normal": [0.1, 0.05]}},
                "axis_ratio": 0.5,
                "position_angle": 10.0,
            }
        ]
    )
    assert m.free_names == ["core.flux", "core.fwhm", "core.axis_ratio", "core.position_angle"]
    lo, hi = m.free_bounds()
    np.testing.assert_array_equal(lo, [-np.inf, 0.0, 0.0, -np.inf])
    np.testing.assert_array_equal(hi, [np.inf, 2.0, 1.0, np.inf])
    theta = m.get_free()
    from scipy.stats import norm  # outside reference for the normal density

    assert m.log_prior(theta) == pytest.approx(norm.logpdf(0.1, 0.1, 0.05))
    bad = theta.copy()
    bad[2] = 1.2
    assert m.log_prior(bad) == -np.inf
    m.set_free(theta * 1.1)
    np.testing.assert_allclose(m.get_free(), theta * 1.1)
    c = m.copy()
    c.fix("core.axis_ratio", reason="not constrained")
    assert "core.axis_ratio" not in c.free_names and "core.axis_ratio" in m.free_names
    assert c.n_free == 3 and m.n_free == 4


from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402 (the property tests below start here)


@settings(max_examples=25, deadline=None)
@given(
    fwhm=st.floats(0.005, 0.3),
    ratio=st.floats(0.05, 1.0),
    pa=st.floats(-360.0, 360.0),
    fr=st.floats(0.0, 5.0),
    sep=st.floats(0.0, 0.5),
    spa=st.floats(-180.0, 540.0),
    east=st.floats(-1.0, 1.0),
    north=st.floats(-1.0, 1.0),
)
def test_jacobian_at_random_parameters(fwhm, ratio, pa, fr, sep, spa, east, north):
    # central finite differences at arbitrary parameter values (definition of the derivative)
    m = SkyModel.build(
        [
            {
                "name": "e",
                "shape": "elliptical_gaussian",
                "flux": 0.7,
                "east": east,
                "north": north,
                "fwhm": fwhm,
                "axis_ratio": ratio,
                "position_angle": pa,
            },
            {
                "name": "d",
                "shape": "double",
                "member": "gaussian",
                "flux": 0.4,
                "east": -north,
                "north": east,
                "flux_ratio": fr,
                "separation": sep,
                "position_angle": spa,
                "fwhm_1": fwhm,
                "fwhm_2": 0.5 * fwhm,
            },
        ]
    )
    fd_check(m, u=U[:20], v=V[:20], freq=None, tol=1e-5)
