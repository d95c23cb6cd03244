"""Shape visibilities: closed forms and nulls, symmetries, limits, derivatives, vectorisation.

Outside references named beside each check: REFERENCES.md's table of component visibilities
(Pearson 1995; Thompson, Moran & Swenson 2017), scipy.special (Bessel zeros), scipy.optimize.brentq
(the nulls of our functions), central finite differences (the derivatives), scipy.integrate.
"""

import numpy as np
import pytest
from scipy import integrate, optimize, special

from tests.helpers.sky_cases import case_params, scaled
from uvfit.errors import ModelError
from uvfit.sky.shapes import SHAPES, shape_class

MAS = np.pi / (180.0 * 3600.0 * 1000.0)
SCALE = 0.25 * MAS  # the cases' length unit, radians
RNG_SEED = 20260


def _uv(n=200, seed=RNG_SEED, qmax=12.0):
    """(u, v) scattered in all directions, |q| SCALE up to qmax."""
    rng = np.random.default_rng(seed)
    q = qmax * rng.random(n) / SCALE
    phi = 2 * np.pi * rng.random(n)
    return q * np.sin(phi), q * np.cos(phi)


def _null(shape, p, lo, hi):
    """First null of the structure along the u axis in [lo, hi] (scipy.optimize.brentq)."""
    return optimize.brentq(lambda q: float(np.real(shape.structure(q, 0.0, p))), lo, hi, xtol=1e-14 / SCALE, rtol=1e-14)


# --- closed forms and check values (REFERENCES.md, "Visibilities of simple components") ---------
def test_disk_first_null():
    theta = 0.8 * MAS
    q0 = _null(shape_class("disk")(), {"diameter": theta}, 0.5 / theta, 1.5 / theta)
    # REFERENCES.md (Pearson 1995): first null at x = 3.8317, q = 1.2197 / theta
    assert np.pi * theta * q0 == pytest.approx(3.8317, abs=1e-4)
    assert q0 * theta == pytest.approx(1.2197, abs=1e-4)
    # scipy.special.jn_zeros: the first zero of J1
    assert np.pi * theta * q0 == pytest.approx(special.jn_zeros(1, 1)[0], rel=1e-12)


def test_disk_value_against_bessel():
    theta = 0.8 * MAS
    u, v = _uv()
    x = np.pi * theta * np.hypot(u, v)
    # REFERENCES.md: 2 J1(x)/x with scipy.special.jv as the outside Bessel function
    expected = 2 * special.jv(1, x) / x
    assert np.allclose(shape_class("disk")().structure(u, v, {"diameter": theta}), expected, rtol=0, atol=1e-14)


def test_ring_first_null():
    d = 0.8 * MAS
    q0 = _null(shape_class("ring")(), {"diameter": d}, 0.3 / d, 1.0 / d)
    # REFERENCES.md: first null q = 2.4048 / (pi d) = 0.7655 / d
    assert q0 * d == pytest.approx(0.7655, abs=1e-4)
    assert np.pi * d * q0 == pytest.approx(2.4048, abs=1e-4)
    assert np.pi * d * q0 == pytest.approx(special.jn_zeros(0, 1)[0], rel=1e-12)  # scipy.special


def test_sphere_first_null():
    r = 0.4 * MAS
    q0 = _null(shape_class("sphere")(), {"radius": r}, 0.5 / r, 0.9 / r)
    x0 = 2 * np.pi * r * q0
    # REFERENCES.md: first null where tan x = x, x = 4.4934
    assert x0 == pytest.approx(4.4934, abs=1e-4)
    assert np.tan(x0) == pytest.approx(x0, rel=1e-9)
    # and the root of tan x = x by brentq on sin x - x cos x (the same equation, no poles)
    assert x0 == pytest.approx(optimize.brentq(lambda x: np.sin(x) - x * np.cos(x), 4.0, 4.7), rel=1e-12)


def test_thin_shell_first_null():
    r = 0.4 * MAS
    q0 = _null(shape_class("thin_shell")(), {"radius": r}, 0.3 / r, 0.7 / r)
    # REFERENCES.md: first null q = 1 / (2R)
    assert q0 * 2 * r == pytest.approx(1.0, rel=1e-12)


def test_shell_formula_from_references():
    ri, ro = 0.25 * MAS, 0.4 * MAS
    u, v = _uv()
    q = np.hypot(u, v)

    def big_l(x):
        return 3 * (np.sin(x) - x * np.cos(x)) / x**3

    # REFERENCES.md: [Ro^3 L(2 pi Ro q) - Ri^3 L(2 pi Ri q)] / (Ro^3 - Ri^3)
    expected = (ro**3 * big_l(2 * np.pi * ro * q) - ri**3 * big_l(2 * np.pi * ri * q)) / (ro**3 - ri**3)
    got = shape_class("shell")().structure(u, v, {"inner_radius": ri, "outer_radius": ro})
    assert np.allclose(got, expected, rtol=0, atol=1e-12)


def test_shell_is_mean_of_thin_shells():
    # the shell is the r^2-weighted mean of thin shells (scipy.integrate.quad of sin x / x)
    ri, ro = 0.1 * MAS, 0.4 * MAS
    shell = shape_class("shell")()
    for qr in [0.0, 0.2, 1.3, 4.0, 11.0]:
        q = qr / ro
        num = integrate.quad(lambda r: 3 * r**2 * np.sinc(2 * q * r), ri, ro, limit=200, epsabs=0, epsrel=1e-12)[0]
        ref = num / (ro**3 - ri**3)
        got = shell.structure(q, 0.0, {"inner_radius": ri, "outer_radius": ro})
        assert got == pytest.approx(ref, abs=1e-12)


# --- symmetries (REFERENCES.md conventions) ------------------------------------------------------
@pytest.mark.parametrize("key,settings,p", case_params())
def test_unit_flux_at_zero_spacing(key, settings, p):
    shape = shape_class(key)(**settings)
    value = shape.structure(np.zeros(3), np.zeros(3), scaled(shape, p, SCALE))
    # normalised structure: unit flux at zero spacing (the Shape contract)
    assert np.allclose(value, 1.0, rtol=0, atol=1e-14)


@pytest.mark.parametrize("key,settings,p", case_params())
def test_hermitian_symmetry(key, settings, p):
    shape = shape_class(key)(**settings)
    pr = scaled(shape, p, SCALE)
    u, v = _uv()
    # REFERENCES.md: V(-u, -v) = conj V(u, v) for any real image
    assert np.allclose(shape.structure(-u, -v, pr), np.conj(shape.structure(u, v, pr)), rtol=0, atol=1e-13)


@pytest.mark.parametrize("key,settings,p", case_params())
def test_real_when_centred(key, settings, p):
    shape = shape_class(key)(**settings)
    u, v = _uv()
    value = shape.structure(u, v, scaled(shape, p, SCALE))
    if not shape.real_when_centred:
        assert np.iscomplexobj(value)  # it can carry the phase it declares
        return
    # a centred point-symmetric brightness has a real visibility (REFERENCES.md, Hermitian
    # symmetry plus V(-u,-v) = V(u,v))
    assert np.all(np.imag(value) == 0)


def test_modulated_ring_is_complex_for_odd_harmonics():
    shape = shape_class("ring_modulated")()
    u, v = _uv()
    value = shape.structure(u, v, {"diameter": 4 * SCALE, "blur": 0.0, "amplitude_1": 0.3, "angle_1": 0.4})
    assert not shape.real_when_centred
    assert np.max(np.abs(np.imag(value))) > 0.05  # odd harmonics break point symmetry


# --- limits ----------------------------------------------------------------------------------------
def test_shell_tends_to_thin_shell():
    ro = 0.4 * MAS
    u, v = _uv(qmax=30.0)
    shell, thin = shape_class("shell")(), shape_class("thin_shell")()
    target = thin.structure(u, v, {"radius": ro})
    # zero thickness is exactly the thin shell (REFERENCES.md: "tends to the zero-thickness shell")
    exact = shell.structure(u, v, {"inner_radius": ro, "outer_radius": ro})
    assert np.allclose(exact, target, rtol=0, atol=1e-15)
    errors = []
    for eps in [1e-2, 1e-4, 1e-6, 1e-9, 1e-12]:
        got = shell.structure(u, v, {"inner_radius": ro * (1 - eps), "outer_radius": ro})
        errors.append(np.max(np.abs(got - target)))
        assert np.all(np.isfinite(got))
    # the difference shrinks in proportion to the thickness: no cancellation as Ri -> Ro
    for eps, err in zip([1e-2, 1e-4, 1e-6, 1e-9, 1e-12], errors):
        assert err < 40 * eps + 1e-14


def test_shell_with_no_hole_is_the_sphere():
    r = 0.4 * MAS
    u, v = _uv(qmax=30.0)
    a = shape_class("shell")().structure(u, v, {"inner_radius": 0.0, "outer_radius": r})
    b = shape_class("sphere")().structure(u, v, {"radius": r})
    # REFERENCES.md: the shell formula with Ri = 0 is the sphere
    assert np.allclose(a, b, rtol=0, atol=1e-14)


def test_shell_branches_agree(monkeypatch):
    # the quadrature branch (2 pi q (Ro - Ri) <= 1) and the closed form agree where both are
    # accurate: evaluate the same points with each branch forced
    from uvfit.sky.shapes import shell as shell_module

    ri, ro = 0.3 * MAS, 0.35 * MAS
    q = np.linspace(0.3, 3.0, 40) / (2 * np.pi * (ro - ri))
    shell = shape_class("shell")()
    p = {"inner_radius": ri, "outer_radius": ro}
    monkeypatch.setattr(shell_module, "_THIN_BELOW", np.inf)
    quad_val, quad_grad = shell.structure_gradient(q, 0.0 * q, p)
    monkeypatch.setattr(shell_module, "_THIN_BELOW", -1.0)
    closed_val, closed_grad = shell.structure_gradient(q, 0.0 * q, p)
    assert np.allclose(quad_val, closed_val, rtol=0, atol=1e-13)
    for name in quad_grad:
        assert np.allclose(quad_grad[name] * SCALE, closed_grad[name] * SCALE, rtol=0, atol=1e-12)


@pytest.mark.parametrize("order", [1, 3])
def test_modulated_ring_with_no_modulation_is_the_ring(order):
    d = 3 * SCALE
    u, v = _uv()
    p = {"diameter": d, "blur": 0.0}
    for k in range(1, order + 1):
        p[f"amplitude_{k}"], p[f"angle_{k}"] = 0.0, 0.3 * k
    got = shape_class("ring_modulated")(order=order).structure(u, v, p)
    ring = shape_class("ring")().structure(u, v, {"diameter": d})
    assert np.allclose(got, ring, rtol=0, atol=1e-15)
    # with blur, the product with the Gaussian of REFERENCES.md (circular Gaussian row)
    p["blur"] = 0.7 * SCALE
    q = np.hypot(u, v)
    taper = np.exp(-((np.pi * p["blur"] * q) ** 2) / (4 * np.log(2)))
    got = shape_class("ring_modulated")(order=order).structure(u, v, p)
    assert np.allclose(got, ring * taper, rtol=0, atol=1e-15)


def test_modulated_ring_blur_is_continuous_at_zero():
    shape = shape_class("ring_modulated")(order=2)
    u, v = _uv()
    p = {"diameter": 3 * SCALE, "blur": 0.0, "amplitude_1": 0.3, "angle_1": 1.0, "amplitude_2": 0.1, "angle_2": -0.5}
    v0 = shape.structure(u, v, p)
    for b in [1e-2, 1e-4, 1e-6]:
        vb = shape.structure(u, v, {**p, "blur": b * SCALE})
        # the change is second order in the blur: |dV| <= (pi b q)^2 / (4 ln 2)
        bound = (np.pi * b * SCALE * np.hypot(u, v)) ** 2 / (4 * np.log(2))
        assert np.all(np.abs(vb - v0) <= bound * 1.0001 + 1e-16)


def test_modulated_ring_zero_order_setting_and_errors():
    shape = shape_class("ring_modulated")(order=0)
    assert shape.parameter_names() == ["diameter", "blur"]
    three = shape_class("ring_modulated")(order=3)
    assert three.parameter_names()[-2:] == ["amplitude_3", "angle_3"]
    assert three.parameter_kind("amplitude_3") == "ratio"
    assert three.parameter_kind("angle_2") == "angle"
    assert three.parameter_kind("blur") == "length"
    for bad in [-1, 1.5, "two", True]:
        with pytest.raises(ModelError, match="order"):
            shape_class("ring_modulated")(order=bad)


# --- image-domain conventions -------------------------------------------------------------------
def test_modulated_ring_brightest_at_its_position_angle():
    # position angles north through east, l east, m north (REFERENCES.md conventions)
    shape = shape_class("ring_modulated")()
    pa = np.radians(60.0)
    p = {"diameter": 2 * SCALE, "blur": 0.2 * SCALE, "amplitude_1": 0.4, "angle_1": pa}
    psi = np.linspace(0, 2 * np.pi, 3601)
    l, m = SCALE * np.sin(psi), SCALE * np.cos(psi)
    b = shape.brightness(l, m, p)
    assert np.degrees(psi[np.argmax(b)]) == pytest.approx(60.0, abs=0.11)
    # the brightest point is north-east: l > 0 (east) and m > 0 (north)
    assert l[np.argmax(b)] > 0 and m[np.argmax(b)] > 0
    lp, mp, wp = shape.sample_points({**p, "blur": 0.0}, 360)
    assert np.degrees(np.arctan2(lp[np.argmax(wp)], mp[np.argmax(wp)])) == pytest.approx(60.0, abs=0.6)
    assert wp.sum() == pytest.approx(1.0, abs=1e-14)
    assert np.all(wp >= 0)  # amplitude 0.4 <= 0.5: non-negative everywhere


def test_modulated_ring_brightness_integrates_to_one():
    shape = shape_class("ring_modulated")(order=2)
    p = {
        "diameter": 2 * SCALE,
        "blur": 0.5 * SCALE,
        "amplitude_1": 0.3,
        "angle_1": 0.2,
        "amplitude_2": 0.2,
        "angle_2": 1.2,
    }
    # scipy.integrate.dblquad in polar coordinates (dimensionless r in units of SCALE)
    total = integrate.dblquad(
        lambda r, psi: r * SCALE**2 * shape.brightness(r * SCALE * np.sin(psi), r * SCALE * np.cos(psi), p),
        0,
        2 * np.pi,
        0,
        6.0,
        epsabs=1e-11,
    )[0]
    assert total == pytest.approx(1.0, abs=1e-8)


@pytest.mark.parametrize(
    "key,p",
    [
        ("disk", {"diameter": 2.0}),
        ("sphere", {"radius": 1.0}),
        ("shell", {"inner_radius": 0.5, "outer_radius": 1.0}),
        ("thin_shell", {"radius": 1.0}),
    ],
)
def test_projected_brightness_integrates_to_one(key, p):
    shape = shape_class(key)()
    pr = {n: x * SCALE for n, x in p.items()}

    def ring_flux(t):  # r = SCALE sin t removes the square-root edges
        r = SCALE * np.sin(t)
        return 2 * np.pi * r * SCALE * np.cos(t) * shape.brightness(r, 0.0, pr)

    # scipy.integrate.quad of 2 pi r I(r) dr (inner radius as a break point)
    total = integrate.quad(ring_flux, 0, np.pi / 2, points=[np.pi / 6], limit=200, epsabs=1e-12)[0]
    assert total == pytest.approx(1.0, abs=1e-8)
    l, m, w = shape.sample_points(pr)
    assert w.sum() == pytest.approx(1.0, abs=1e-12)
    assert np.max(np.hypot(l, m)) <= max(pr.values()) * (1 + 1e-12)


# --- derivatives against central finite differences --------------------------------------------
def _fd_gradient(shape, u, v, p, name):
    kind = shape.parameter_kind(name)
    h = 1e-6 * abs(p[name]) if (kind == "length" and p[name] != 0) else (1e-6 * SCALE if kind == "length" else 1e-6)
    up = shape.structure(u, v, {**p, name: p[name] + h})
    dn = shape.structure(u, v, {**p, name: p[name] - h})
    return (up - dn) / (2 * h)


def _uv_regimes(p_scale):
    """(u, v) from x ~ 1e-4 (series) through the series threshold to x ~ 300, all directions."""
    x = np.concatenate([np.geomspace(1e-4, 1.0, 25), np.linspace(1.0, 40.0, 60), np.array([120.0, 300.0])])
    q = x / (np.pi * p_scale)
    phi = np.linspace(0.1, 2 * np.pi, x.size)
    return q * np.sin(phi), q * np.cos(phi)


@pytest.mark.parametrize("key,settings,p", case_params())
def test_derivatives_against_finite_differences(key, settings, p):
    shape = shape_class(key)(**settings)
    pr = scaled(shape, p, SCALE)
    u, v = _uv_regimes(SCALE)
    value, grad = shape.structure_gradient(u, v, pr)
    assert np.allclose(value, shape.structure(u, v, pr), rtol=0, atol=1e-15)
    assert sorted(grad) == sorted(shape.parameter_names())
    for name in shape.parameter_names():
        fd = _fd_gradient(shape, u, v, pr, name)
        unit = SCALE if shape.parameter_kind(name) == "length" else 1.0
        err = np.abs(grad[name] - fd) * unit
        # central finite differences; sensitivities per unit of SCALE
        assert np.all(err <= 1e-9 + 1e-6 * np.max(np.abs(fd)) * unit), name


SHELL_GRADIENT_CASES = [
    (0.3, 0.5),
    (0.0, 0.5),
    (0.5, 0.5),
    (0.5 * (1 - 1e-9), 0.5),
    (0.499, 0.5),
    (0.45, 0.5),
    (0.05, 0.5),
    (0.5, 0.3),
]


@pytest.mark.parametrize("ri,ro", SHELL_GRADIENT_CASES)
def test_shell_derivatives_across_thickness(ri, ro):
    shape = shape_class("shell")()
    p = {"inner_radius": ri * SCALE, "outer_radius": ro * SCALE}
    u, v = _uv_regimes(SCALE)
    value, grad = shape.structure_gradient(u, v, p)
    for name in grad:
        h = 1e-6 * SCALE
        up = shape.structure(u, v, {**p, name: p[name] + h})
        dn = shape.structure(u, v, {**p, name: p[name] - h})
        fd = (up - dn) / (2 * h)
        if p[name] == 0:  # Ri = 0: the shape depends on |Ri|, one-sided difference instead
            fd = (up - value) / h
            assert np.allclose(grad[name], 0.0)
        err = np.abs(grad[name] - fd) * SCALE
        # central finite differences (one-sided at Ri = 0, where the derivative is 0)
        assert np.all(err <= 1e-8 + 1e-6 * np.max(np.abs(fd)) * SCALE), name
    if ri == ro:
        # at zero thickness each radius carries half the thin shell's derivative (its limit)
        thin = shape_class("thin_shell")().structure_gradient(u, v, {"radius": ro * SCALE})[1]
        assert np.allclose(grad["outer_radius"], 0.5 * thin["radius"], rtol=1e-12, atol=0)
        assert np.allclose(grad["inner_radius"], 0.5 * thin["radius"], rtol=1e-12, atol=0)


def test_series_threshold_is_seamless(monkeypatch):
    # the series and the closed forms agree around each switch (same points, each one forced)
    from uvfit.sky.shapes import _radial

    groups = [
        ("AIRY_SERIES_BELOW", [_radial.airy, _radial.airy_derivative]),
        ("BALL_SERIES_BELOW", [_radial.ball, _radial.ball_derivative, _radial.sinc_derivative]),
    ]
    for threshold, functions in groups:
        x = getattr(_radial, threshold) * np.linspace(0.8, 1.25, 19)
        monkeypatch.setattr(_radial, threshold, np.inf)
        series = [f(x) for f in functions]
        monkeypatch.setattr(_radial, threshold, 0.0)
        closed = [f(x) for f in functions]
        monkeypatch.undo()
        for f, a, b in zip(functions, series, closed):
            assert np.allclose(a, b, rtol=0, atol=1e-15), f.__name__
    # and the series agree with scipy's Bessel functions at small x (scipy.special.jv)
    xs = np.geomspace(1e-6, 1.49, 50)
    assert np.allclose(_radial.airy(xs), 2 * special.jv(1, xs) / xs, rtol=1e-15, atol=0)
    assert np.allclose(_radial.airy_derivative(xs), -2 * special.jv(2, xs) / xs, rtol=1e-13, atol=0)
    # spherical Bessel functions: ball = 3 j1(x)/x, sinc = j0(x) (scipy.special.spherical_jn)
    assert np.allclose(_radial.ball(xs), 3 * special.spherical_jn(1, xs) / xs, rtol=1e-14, atol=0)
    assert np.allclose(_radial.sinc_derivative(xs), special.spherical_jn(0, xs, derivative=True), rtol=1e-14, atol=0)


# --- vectorised ---------------------------------------------------------------------------------
@pytest.mark.parametrize("key,settings,p", case_params())
def test_vectorised_shapes(key, settings, p):
    shape = shape_class(key)(**settings)
    pr = scaled(shape, p, SCALE)
    rng = np.random.default_rng(RNG_SEED)
    u, v = rng.normal(size=(2, 100_000)) / SCALE
    value = shape.structure(u, v, pr)
    assert value.shape == (100_000,)
    val, grad = shape.structure_gradient(u, v, pr)
    assert val.shape == (100_000,)
    assert all(g.shape == (100_000,) for g in grad.values())
    # the per-point loop result (a few points) equals the vectorised one
    for i in range(3):
        assert shape.structure(u[i : i + 1], v[i : i + 1], pr)[0] == pytest.approx(value[i], abs=1e-15)
    grid = shape.structure(u[:1200].reshape(30, 40), v[:1200].reshape(30, 40), pr)
    assert grid.shape == (30, 40)
    assert np.all(np.isfinite(value))


def test_registry_lists_every_shape_module():
    assert {"disk", "ring", "ring_modulated", "shell", "thin_shell", "sphere"} <= set(SHAPES)
    for key in ["disk", "ring", "ring_modulated", "shell", "thin_shell", "sphere"]:
        cls = shape_class(key)
        assert cls.key == key
        assert set(cls.kinds) >= set(cls.parameters)
        assert set(cls.settings) == ({"order"} if key == "ring_modulated" else set())
