"""Shape visibilities against numerical Fourier transforms of their images.

Two outside references (REFERENCES.md, "Independent references"):
  * a 2-D FFT (numpy.fft) of the component rendered on a fine grid, with and without a centre
    offset (shift theorem applied here in the test), over a square of (u, v) cells including the
    off-axis ones, for every registered shape;
  * the Hankel transform V(q) = 2 pi int I(r) J0(2 pi q r) r dr by scipy.integrate.quad of the
    radial profile written here from the geometry of each circularly symmetric shape, and the
    direct ring integral (scipy.integrate.quad) for the thin and modulated rings.

Rendering. A shape with a bounded brightness is rendered by averaging ``brightness`` over s x s
sub-pixel samples; that average is a box filter on the fine grid whose transform is the Dirichlet
kernel sin(pi u dx) / (s sin(pi u dx / s)), divided out exactly. A shape whose brightness is
singular (point, thin ring, unblurred modulated ring, thin shell), and every shape whose point set
is known to resolve the frequencies compared (POINT_RESOLUTION), is rendered by splatting its
quadrature nodes with a sampled Gaussian kernel of one pixel
standard deviation, whose transform exp(-2 pi^2 sigma^2 q^2) is divided out (the Gaussian sampled
at one pixel aliases by < 1e-7 at the frequencies compared). The FFT convention of numpy.fft.fft2,
A_k = sum_n a_n exp(-2 pi i k n / N) (numpy documentation), is the sign of the kernel in
REFERENCES.md; test_fft_kernel_sign pins it.
"""

import numpy as np
import pytest
from scipy import integrate, special

from tests.helpers.sky_cases import case_params, importable, scaled
from uvfit.sky.shapes import shape_class

MAS = np.pi / (180.0 * 3600.0 * 1000.0)
N = 512  # grid size (pixels per side)
DX = 0.01 * MAS  # pixel, radians
S = 80  # length scale of the cases, pixels (a diameter of 80 pixels)
M = 44  # compare the (2M+1)^2 lowest (u, v) cells: |u| dx, |v| dx <= 0.086
OFFSET = (37.3, -21.6)  # centre offset in pixels: east and south, not on the grid
KERNEL_SIGMA = 1.0  # pixels
KERNEL_HALF = 6  # kernel taps either side
TOLERANCE = 1e-3  # of the total flux (the task's requirement)

AXIS = (np.arange(N) - N // 2) * DX  # pixel centres; index N//2 is l = 0


# --- rendering --------------------------------------------------------------------------------
def render_brightness(brightness, l0, m0, oversample):
    """Mean of brightness over oversample^2 sub-pixel points, times the pixel area."""
    s = int(oversample)
    sub = ((np.arange(s) + 0.5) / s - 0.5) * DX
    m_fine = (AXIS[:, None] + sub[None, :]).ravel() - m0
    image = np.empty((N, N))
    rows = 32
    for start in range(0, N, rows):
        l_fine = (AXIS[start : start + rows, None] + sub[None, :]).ravel() - l0
        b = brightness(l_fine[:, None], m_fine[None, :])
        image[start : start + rows] = b.reshape(rows, s, N, s).mean(axis=(1, 3))
    return image * DX**2


def render_points(l, m, w, l0, m0):
    """Splat weighted nodes with a sampled Gaussian kernel (sigma = KERNEL_SIGMA pixels)."""
    image = np.zeros(N * N)
    taps = np.arange(-KERNEL_HALF, KERNEL_HALF + 1)
    norm = 1.0 / (np.sqrt(2.0 * np.pi) * KERNEL_SIGMA)
    # nodes whose kernel would leave the field must carry no flux to speak of (the field is
    # padded); they are dropped (e.g. the far Gauss-Hermite nodes of a Gaussian)
    pl = (l + l0) / DX + N // 2
    pm = (m + m0) / DX + N // 2
    inside = (pl > KERNEL_HALF + 1) & (pl < N - KERNEL_HALF - 2) & (pm > KERNEL_HALF + 1) & (pm < N - KERNEL_HALF - 2)
    assert np.sum(np.abs(w[~inside])) < 1e-9, "the field is too small for this shape"
    l, m, w = l[inside], m[inside], w[inside]
    chunk = 20000
    for start in range(0, l.size, chunk):
        lc = (l[start : start + chunk] + l0) / DX + N // 2  # position in pixel index units
        mc = (m[start : start + chunk] + m0) / DX + N // 2
        wc = w[start : start + chunk]
        il = np.rint(lc).astype(int)[:, None] + taps[None, :]
        im = np.rint(mc).astype(int)[:, None] + taps[None, :]
        gl = norm * np.exp(-0.5 * ((il - lc[:, None]) / KERNEL_SIGMA) ** 2)
        gm = norm * np.exp(-0.5 * ((im - mc[:, None]) / KERNEL_SIGMA) ** 2)
        weights = wc[:, None, None] * gl[:, :, None] * gm[:, None, :]
        index = il[:, :, None] * N + im[:, None, :]
        image += np.bincount(index.ravel(), weights=weights.ravel(), minlength=N * N)
    return image.reshape(N, N)


def low_cells():
    k = np.arange(-M, M + 1)
    a, b = np.meshgrid(k, k, indexing="ij")
    return a, b, a / (N * DX), b / (N * DX)


def fft_cells(image):
    """Visibility of the image at the low (u, v) cells: axis 0 of the image is l, axis 1 is m."""
    spectrum = np.fft.fft2(np.fft.ifftshift(image))
    a, b, u, v = low_cells()
    return spectrum[a % N, b % N], u, v


def dirichlet(f, s):
    x = np.pi * f * DX
    with np.errstate(invalid="ignore", divide="ignore"):
        out = np.sin(x) / (s * np.sin(x / s))
    return np.where(x == 0, 1.0, out)


# --- test-side references for shapes that offer neither brightness nor points ------------------
def _gaussian_image(fwhm_major, fwhm_minor, pa):
    """Elliptical Gaussian brightness, major axis at position angle pa (north through east)."""
    k = 4.0 * np.log(2.0)

    def brightness(l, m):
        along = l * np.sin(pa) + m * np.cos(pa)
        across = l * np.cos(pa) - m * np.sin(pa)
        return (
            k
            / (np.pi * fwhm_major * fwhm_minor)
            * np.exp(-k * ((along / fwhm_major) ** 2 + (across / fwhm_minor) ** 2))
        )

    return brightness


def fallback_rendering(key, p):
    """(method, object) from the textbook definitions, for shapes without image methods."""
    if key == "point":
        return "points", (np.zeros(1), np.zeros(1), np.ones(1))
    if key == "gaussian":
        return "brightness", _gaussian_image(p["fwhm"], p["fwhm"], 0.0)
    return None, None


OVERSAMPLE = {"disk": 8, "shell": 8, "sphere": 8, "ring_modulated": 2, "double": 8}
POINT_RESOLUTION = {
    "ring": 256,
    "ring_modulated": 256,
    "disk": 96,
    "shell": 40,
    "thin_shell": 48,
    "sphere": 40,
    "gaussian": 64,
    "elliptical_gaussian": 64,
}


def _offers(shape, method, *args):
    """The result of an optional image method, or None when the shape does not offer it."""
    fn = getattr(shape, method, None)
    if fn is None:
        return None
    try:
        return fn(*args)
    except NotImplementedError:
        return None


def renderings(key, settings, p):
    """[(label, payload)]: every image the shape can give for these parameters."""
    shape = shape_class(key)(**settings)
    out = []
    singular = bool(_offers(shape, "singular", p))
    probe = np.zeros((1, 1))
    if not singular and _offers(shape, "brightness", probe, probe, p) is not None:
        out.append(("brightness", lambda l, m: shape.brightness(l, m, p)))
    # the point set is compared when the shape is singular, or when the resolution needed for
    # these frequencies is known (a quadrature meant for smooth integrands, e.g. Gauss-Hermite
    # nodes of a wide Gaussian, does not resolve the highest frequencies compared here)
    n = POINT_RESOLUTION.get(key)
    pts = None
    if n:
        pts = _offers(shape, "sample_points", p, n)
    elif singular or not out:
        pts = _offers(shape, "sample_points", p)
    if pts is not None:
        out.append(("points", tuple(np.asarray(x, dtype=float) for x in pts)))
    if not out:
        method, payload = fallback_rendering(key, p)
        if method is None:
            pytest.fail(
                f"shape '{key}' has no brightness() or sample_points() and the test has "
                "no reference image for it; add one"
            )
        out.append((method, payload))
    return shape, out


@pytest.mark.parametrize("key,settings,p", case_params())
@pytest.mark.parametrize("offset", [False, True], ids=["centred", "offset"])
def test_fft_of_rendered_image(key, settings, p, offset):
    shape = shape_class(key)(**settings)
    pr = scaled(shape, p, S * DX)
    l0, m0 = (OFFSET[0] * DX, OFFSET[1] * DX) if offset else (0.0, 0.0)
    _, images = renderings(key, settings, pr)
    a, b, u, v = low_cells()
    # shift theorem (REFERENCES.md): a centre at (l0, m0) multiplies by exp[-2 pi i (u l0 + v m0)]
    expected = shape.structure(u, v, pr) * np.exp(-2j * np.pi * (u * l0 + v * m0))
    for label, payload in images:
        if label == "brightness":
            s = OVERSAMPLE.get(key, 4)
            image = render_brightness(payload, l0, m0, s)
            measured, _, _ = fft_cells(image)
            measured = measured / (dirichlet(u, s) * dirichlet(v, s))
        else:
            image = render_points(*payload, l0, m0)
            measured, _, _ = fft_cells(image)
            sigma = KERNEL_SIGMA * DX
            measured = measured / np.exp(-2.0 * np.pi**2 * sigma**2 * (u**2 + v**2))
        # numerical 2-D FFT of the rendered image (numpy.fft); tolerance 1e-3 of the total flux
        err = np.max(np.abs(measured - expected))
        assert err < TOLERANCE, f"{key} ({label} rendering): max |FFT - model| = {err:.2e}"
        assert abs(image.sum() - 1.0) < TOLERANCE  # the rendered image carries unit flux


def test_fft_kernel_sign():
    # numpy.fft.fft2 uses exp(-2 pi i k n / N) (numpy documentation): a point east (l0 > 0) and
    # north (m0 > 0) of the centre has visibility phase -2 pi (u l0 + v m0) (REFERENCES.md kernel)
    image = np.zeros((N, N))
    image[N // 2 + 5, N // 2 + 3] = 1.0
    measured, u, v = fft_cells(image)
    expected = np.exp(-2j * np.pi * (u * 5 * DX + v * 3 * DX))
    assert np.max(np.abs(measured - expected)) < 1e-12


# --- Hankel transforms and direct ring integrals -----------------------------------------------
R = 0.4 * MAS
Q = np.array([0.0, 0.05, 0.3, 0.77, 1.0, 1.9, 3.3, 6.1, 9.7]) / R


def _quad(f, top):
    return integrate.quad(f, 0.0, top, limit=400, epsabs=1e-13, epsrel=1e-12)[0]


def _pieces(key, p):
    """[(sign, integrand(t, q), upper limit)] of 2 pi int I(r) J0(2 pi q r) r dr for each shape,
    from geometry: a uniform disk (r = a t); a uniform ball seen in projection has path length
    2 sqrt(a^2 - r^2); a spherical surface seen in projection has surface density proportional to
    a / sqrt(a^2 - r^2); a thick shell is a ball minus a ball. For the projected 3-D shapes the
    substitution r = a sin t removes the square-root edge: sqrt(a^2 - r^2) r dr = a^3 cos^2 t sin t dt
    and r dr / sqrt(a^2 - r^2) = a sin t dt."""
    two_pi = 2.0 * np.pi

    def ball(a):
        return lambda t, q: two_pi * a**3 * np.cos(t) ** 2 * np.sin(t) * special.j0(two_pi * q * a * np.sin(t))

    def surface(a):
        return lambda t, q: two_pi * a * np.sin(t) * special.j0(two_pi * q * a * np.sin(t))

    if key == "disk":
        a = p["diameter"] / 2
        return [(1.0, lambda t, q: two_pi * a**2 * t * special.j0(two_pi * q * a * t), 1.0)]
    if key == "sphere":
        return [(1.0, ball(p["radius"]), np.pi / 2)]
    if key == "thin_shell":
        return [(1.0, surface(p["radius"]), np.pi / 2)]
    if key == "shell":
        return [(1.0, ball(p["outer_radius"]), np.pi / 2), (-1.0, ball(p["inner_radius"]), np.pi / 2)]
    if key == "gaussian":
        w = p["fwhm"]
        k = 4.0 * np.log(2.0)
        return [(1.0, lambda t, q: two_pi * w**2 * t * np.exp(-k * t**2) * special.j0(two_pi * q * w * t), 12.0)]
    raise KeyError(key)


HANKEL_CASES = [
    ("disk", {"diameter": 2 * R}),
    ("sphere", {"radius": R}),
    ("thin_shell", {"radius": R}),
    ("shell", {"inner_radius": 0.6 * R, "outer_radius": R}),
    ("shell", {"inner_radius": 0.97 * R, "outer_radius": R}),
    ("gaussian", {"fwhm": R}),
]


@pytest.mark.parametrize(
    "key,p",
    [
        pytest.param(k, p, id=f"{k}-{i}", marks=[] if importable(k)[0] else [pytest.mark.skip(reason=importable(k)[1])])
        for i, (k, p) in enumerate(HANKEL_CASES)
    ],
)
def test_hankel_transform_of_radial_profile(key, p):
    shape = shape_class(key)()
    pieces = _pieces(key, {n: x / R for n, x in p.items()})  # the integrals in units of R
    norm = sum(sign * _quad(lambda t: f(t, 0.0), top) for sign, f, top in pieces)
    for q in Q:
        ref = sum(sign * _quad(lambda t: f(t, q * R), top) for sign, f, top in pieces) / norm
        got = shape.structure(np.array([q * 0.6]), np.array([q * 0.8]), p)[0]
        # Hankel transform by scipy.integrate.quad (REFERENCES.md, independent references)
        assert got == pytest.approx(ref, abs=1e-11), f"{key} at q R = {q * R:.2f}"


def _ring_integral(weight, radius, u, v):
    """(1/2 pi) int_0^2pi weight(psi) exp[-2 pi i (u l + v m)] dpsi on l = R sin psi, m = R cos psi,
    by scipy.integrate.quad (real and imaginary parts)."""

    def phase(psi):
        return -2.0 * np.pi * radius * (u * np.sin(psi) + v * np.cos(psi))

    re = integrate.quad(lambda s: weight(s) * np.cos(phase(s)), 0, 2 * np.pi, limit=400, epsabs=1e-13)[0]
    im = integrate.quad(lambda s: weight(s) * np.sin(phase(s)), 0, 2 * np.pi, limit=400, epsabs=1e-13)[0]
    return (re + 1j * im) / (2.0 * np.pi)


UV_SPREAD = [(0.0, 0.0), (0.3, 0.0), (0.0, -0.7), (1.1, 0.9), (-2.3, 1.7), (3.9, -4.4), (-6.0, -5.5)]


def test_thin_ring_against_direct_ring_integral():
    shape = shape_class("ring")()
    d = 2 * R
    for uu, vv in UV_SPREAD:
        u, v = uu / d, vv / d
        ref = _ring_integral(lambda s: 1.0, R, u, v)
        # direct evaluation of the ring's Fourier integral, scipy.integrate.quad
        assert shape.structure(u, v, {"diameter": d}) == pytest.approx(ref, abs=1e-10)


@pytest.mark.parametrize("order", [1, 2, 3])
def test_modulated_ring_against_direct_ring_integral(order):
    shape = shape_class("ring_modulated")(order=order)
    d = 2 * R
    p = {"diameter": d, "blur": 0.0}
    amps = [0.3, 0.12, 0.05][:order]
    angs = [np.radians(60.0), np.radians(-110.0), np.radians(200.0)][:order]
    for k in range(1, order + 1):
        p[f"amplitude_{k}"], p[f"angle_{k}"] = amps[k - 1], angs[k - 1]

    def weight(psi):  # the brightness on the ring as defined in the module docstring
        return 1.0 + sum(2 * a * np.cos(k * (psi - t)) for k, (a, t) in enumerate(zip(amps, angs), start=1))

    for uu, vv in UV_SPREAD:
        u, v = uu / d, vv / d
        ref = _ring_integral(weight, R, u, v)
        # direct evaluation of the ring's Fourier integral, scipy.integrate.quad: pins the sign
        # and the pi/2 phase of the Jacobi-Anger expansion independently of the FFT
        assert shape.structure(u, v, p) == pytest.approx(ref, abs=1e-10)


# --- pixel images for display (pixel_fractions) -------------------------------------------------
PIXEL_CASES = [
    ("disk", {}, {"diameter": 30.0}),
    ("disk", {}, {"diameter": 1.5}),
    ("disk", {}, {"diameter": 0.3}),
    ("sphere", {}, {"radius": 12.0}),
    ("sphere", {}, {"radius": 0.4}),
    ("ring", {}, {"diameter": 40.0}),
    ("ring_modulated", {}, {"diameter": 40.0, "blur": 0.0, "amplitude_1": 0.4, "angle_1": 1.0}),
    (
        "ring_modulated",
        {"order": 2},
        {"diameter": 30.0, "blur": 0.8, "amplitude_1": 0.2, "angle_1": 1.0, "amplitude_2": 0.2, "angle_2": -0.3},
    ),
    ("ring_modulated", {}, {"diameter": 30.0, "blur": 6.0, "amplitude_1": 0.3, "angle_1": 2.0}),
]


@pytest.mark.parametrize("key,settings,p", PIXEL_CASES)
def test_pixel_images_keep_flux_and_low_frequencies(key, settings, p):
    shape = shape_class(key)(**settings)
    n, dx = 128, 0.02 * MAS
    pr = {k: (x * dx if shape.parameter_kind(k) == "length" else x) for k, x in p.items()}
    axis = (np.arange(n) - n // 2) * dx
    l, m = np.meshgrid(axis, axis)  # image[m index, l index]
    image = shape.pixel_fractions(l, m, pr)
    assert image.shape == (n, n)
    assert image.sum() == pytest.approx(1.0, abs=1e-3)  # the flux is kept
    # low spatial frequencies (q < 0.045 / pixel), where the drawing's widening (at most a
    # Gaussian of 0.7 pixel, or the pixel itself) changes V by < 2.5%: numpy.fft of the image
    spectrum = np.fft.fft2(np.fft.ifftshift(image))  # axis 0 is m (v), axis 1 is l (u)
    k = np.arange(-4, 5)
    b, a = np.meshgrid(k, k, indexing="ij")
    measured = spectrum[b % n, a % n]
    expected = shape.structure(a / (n * dx), b / (n * dx), pr)
    assert np.max(np.abs(measured - expected)) < 0.025
