"""Gaussian brightness distributions, circular and elliptical.

Visibilities (Pearson 1995, "Non-imaging data analysis", Synthesis Imaging in Radio Astronomy;
TMS 2017): a circular Gaussian of full width at half maximum theta has
V(q) = exp[-(pi theta q)^2 / (4 ln 2)], q = sqrt(u^2 + v^2). An elliptical one with major-axis
FWHM a, minor-axis FWHM b = rho a and major axis at position angle phi (north through east) has
V = exp[-pi^2/(4 ln 2) (a^2 q_par^2 + b^2 q_perp^2)], with q_par = u sin phi + v cos phi (along
the major axis) and q_perp = u cos phi - v sin phi.
"""

import math

import numpy as np
from scipy import special

from ..shape import RULE_EXACT_POINT, PixelFlux, Shape, _grid_axes, grid_steps, nearest_pixel
from ..temperature import brightness_temperature_gaussian

#: pi^2 / (4 ln 2): the constant in the exponent of a Gaussian's visibility in terms of its FWHM
C_VIS = math.pi**2 / (4.0 * math.log(2.0))
#: 4 ln 2: the constant in the exponent of a Gaussian's brightness in terms of its FWHM
C_IMG = 4.0 * np.log(2.0)


# The visibility formulas, as plain arithmetic on scalars or arrays: the shapes below evaluate
# them with numpy, and the compiled engine (uvfit.sky._kernels) compiles the same functions.
def circular_exponent(fwhm, q2):
    """ln V of a circular Gaussian: -C_VIS fwhm^2 q^2 (q2 = u^2 + v^2)."""
    return -C_VIS * fwhm * fwhm * q2


def circular_log_derivative(fwhm, q2):
    """(dV/d fwhm) / V = -2 C_VIS fwhm q^2."""
    return -2.0 * C_VIS * fwhm * q2


def elliptical_axes(u, v, sin_pa, cos_pa):
    """(q_par, q_perp): the (u, v) components along and across the major axis."""
    return u * sin_pa + v * cos_pa, u * cos_pa - v * sin_pa


def elliptical_exponent(fwhm, ratio, q_par, q_perp):
    """ln V of an elliptical Gaussian: -C_VIS a^2 (q_par^2 + rho^2 q_perp^2)."""
    return -C_VIS * fwhm * fwhm * (q_par * q_par + ratio * ratio * (q_perp * q_perp))


def elliptical_log_derivatives(fwhm, ratio, q_par, q_perp):
    """(dV/da, dV/drho, dV/dphi) / V. With E = a^2 (q_par^2 + rho^2 q_perp^2), V = exp(-c E),
    d q_par / d phi = q_perp and d q_perp / d phi = -q_par: dE/dphi = 2 a^2 q_par q_perp (1 - rho^2),
    zero at rho = 1."""
    qn2 = q_perp * q_perp
    e = q_par * q_par + ratio * ratio * qn2
    return (
        -C_VIS * 2.0 * fwhm * e,
        -C_VIS * 2.0 * fwhm * fwhm * ratio * qn2,
        -C_VIS * 2.0 * fwhm * fwhm * (1.0 - ratio * ratio) * q_par * q_perp,
    )


def gaussian_density(l, m, fwhm_major, fwhm_minor, phi):
    """Brightness per steradian of a unit-flux Gaussian (major axis at position angle phi)."""
    if fwhm_major * fwhm_minor == 0.0:
        raise ValueError("a Gaussian of zero width has no finite brightness; render it from sample_points()")
    l = np.asarray(l, dtype=float)
    m = np.asarray(m, dtype=float)
    x_maj = l * np.sin(phi) + m * np.cos(phi)
    x_min = l * np.cos(phi) - m * np.sin(phi)
    return (
        C_IMG
        / (np.pi * fwhm_major * fwhm_minor)
        * np.exp(-C_IMG * (x_maj**2 / fwhm_major**2 + x_min**2 / fwhm_minor**2))
    )


#: the point sets of a Gaussian stop at this many standard deviations (flux beyond: exp(-18) = 1.5e-8)
POINTS_REACH = 6.0


def gaussian_points(fwhm_major, fwhm_minor, phi, n=64):
    """Quadrature nodes (l, m, weight) of a unit-flux Gaussian, out to POINTS_REACH sigma.

    In coordinates scaled by the two standard deviations the Gaussian is circular: n Gauss-Legendre
    radii on [0, POINTS_REACH] with weight rho exp(-rho^2/2), times 2n azimuths (midpoint rule),
    weights renormalised to sum to 1 (the flux beyond the reach, 1.5e-8, is dropped). Compact, so
    that a grid a dozen standard deviations wide holds every node.
    """
    t, w = np.polynomial.legendre.leggauss(int(n))
    rho = 0.5 * POINTS_REACH * (t + 1.0)
    w_r = w * rho * np.exp(-0.5 * rho * rho)
    w_r = w_r / w_r.sum()
    n_az = 2 * int(n)
    psi = 2.0 * np.pi * (np.arange(n_az) + 0.5) / n_az
    to_sigma = 1.0 / np.sqrt(8.0 * np.log(2.0))
    x_maj = (rho[:, None] * np.cos(psi)[None, :]).ravel() * (fwhm_major * to_sigma)
    x_min = (rho[:, None] * np.sin(psi)[None, :]).ravel() * (fwhm_minor * to_sigma)
    weight = np.repeat(w_r / n_az, n_az)
    # (east, north) = x_maj (sin phi, cos phi) + x_min (cos phi, -sin phi)
    return (x_maj * np.sin(phi) + x_min * np.cos(phi), x_maj * np.cos(phi) - x_min * np.sin(phi), weight)


def gaussian_pixels(l, m, fwhm_major, fwhm_minor, phi):
    """Fraction of a unit-flux Gaussian in each pixel of a regular grid (see Shape.brightness).

    Sampled at the pixel centres, which is exact for the Fourier transform of a resolved Gaussian.
    A Gaussian narrower than about a pixel is first widened by the pixel's own variance (step^2/12
    per axis) and its pixels rescaled to sum to 1 when it lies well inside the grid: a sub-pixel
    component appears about one pixel wide, with its flux kept.
    """
    l = np.asarray(l, dtype=float)
    m = np.asarray(m, dtype=float)
    dl, dm = grid_steps(l, m)
    if fwhm_major <= 0.0:
        return nearest_pixel(l, m)
    to_sigma = 1.0 / np.sqrt(8.0 * np.log(2.0))
    s_maj, s_min = fwhm_major * to_sigma, fwhm_minor * to_sigma
    e_maj = np.array([np.sin(phi), np.cos(phi)])  # (east, north) along the major axis
    e_min = np.array([np.cos(phi), -np.sin(phi)])
    cov = s_maj**2 * np.outer(e_maj, e_maj) + s_min**2 * np.outer(e_min, e_min)
    narrow = fwhm_minor < 1.5 * max(dl, dm)
    if narrow:
        cov = cov + np.diag([dl * dl / 12.0, dm * dm / 12.0])
    det = cov[0, 0] * cov[1, 1] - cov[0, 1] ** 2
    inv = np.array([[cov[1, 1], -cov[0, 1]], [-cov[0, 1], cov[0, 0]]]) / det
    quad = inv[0, 0] * l * l + 2.0 * inv[0, 1] * l * m + inv[1, 1] * m * m
    img = np.exp(-0.5 * quad) / (2.0 * np.pi * np.sqrt(det)) * dl * dm
    if narrow:
        reach = 4.0 * np.sqrt(np.diag(cov))
        inside = (l.min() + reach[0] <= 0.0 <= l.max() - reach[0]) and (m.min() + reach[1] <= 0.0 <= m.max() - reach[1])
        total = img.sum()
        if inside and total > 0:
            img = img / total
    return img


#: how a Gaussian's flux per pixel is computed (``Shape.pixel_flux``)
RULE_GAUSSIAN = "exact: the bivariate normal integral over each pixel (erf products, Owen's T when tilted)"


def bivariate_normal_cdf(h, k, rho):
    """P(X <= h, Y <= k) for standard normal X, Y of correlation ``rho`` (|rho| < 1), vectorised.

    Owen (1956, Ann. Math. Statist. 27, 1075), with T Owen's function (scipy.special.owens_t):
    Phi2 = [Phi(h) + Phi(k)] / 2 - T(h, a_h) - T(k, a_k) - beta, a_h = (k - rho h) / (h s),
    a_k = (h - rho k) / (k s), s = sqrt(1 - rho^2), beta = 1/2 when h k < 0 or (h k = 0 and
    h + k < 0), else 0. An exact zero of h or k is taken as 1e-300 (the limit of T).
    """
    h, k = np.broadcast_arrays(np.asarray(h, dtype=float), np.asarray(k, dtype=float))
    beta = np.where((h * k < 0) | ((h * k == 0) & (h + k < 0)), 0.5, 0.0)
    hh = np.where(h == 0, 1e-300, h)
    kk = np.where(k == 0, 1e-300, k)
    s = np.sqrt(1.0 - rho * rho)
    with np.errstate(over="ignore"):
        a_h = (kk - rho * hh) / (hh * s)
        a_k = (hh - rho * kk) / (kk * s)
    return 0.5 * (special.ndtr(h) + special.ndtr(k)) - special.owens_t(hh, a_h) - special.owens_t(kk, a_k) - beta


def gaussian_pixel_integrals(l, m, fwhm_major, fwhm_minor, phi):
    """Fraction of a unit-flux Gaussian inside each pixel of a regular grid of pixel centres,
    integrated exactly: the normal distribution function at every pixel corner (erf along each
    axis when the ellipse is aligned with them, ``bivariate_normal_cdf`` when it is tilted),
    differenced over each pixel; the pixels of the whole grid sum to the flux inside it."""
    al, l00, sl, am, m00, sm = _grid_axes(l, m)
    shape = np.shape(l)
    nl, nm = shape[al], shape[am]
    to_sigma = 1.0 / np.sqrt(8.0 * np.log(2.0))
    s_maj, s_min = fwhm_major * to_sigma, fwhm_minor * to_sigma
    e_maj = np.array([np.sin(phi), np.cos(phi)])
    e_min = np.array([np.cos(phi), -np.sin(phi)])
    cov = s_maj**2 * np.outer(e_maj, e_maj) + s_min**2 * np.outer(e_min, e_min)
    sig_l, sig_m = np.sqrt(cov[0, 0]), np.sqrt(cov[1, 1])
    rho = float(np.clip(cov[0, 1] / (sig_l * sig_m), -1.0, 1.0))
    h = (l00 + sl * (np.arange(nl + 1) - 0.5)) / sig_l  # pixel edges, in standard deviations
    k = (m00 + sm * (np.arange(nm + 1) - 0.5)) / sig_m
    if abs(rho) < 1e-12:
        frac = np.outer(np.diff(special.ndtr(h)), np.diff(special.ndtr(k)))
    else:
        corners = bivariate_normal_cdf(h[:, None], k[None, :], rho)
        frac = np.diff(np.diff(corners, axis=0), axis=1)
    frac = frac * (np.sign(sl) * np.sign(sm))  # a decreasing axis differences the other way
    return frac if (al, am) == (0, 1) else frac.T


def _uv(u, v):
    u = np.asarray(u, dtype=float)
    v = np.asarray(v, dtype=float)
    return np.broadcast_arrays(u, v)


class CircularGaussian(Shape):
    """Circular Gaussian; parameter ``fwhm`` (full width at half maximum)."""

    key = "gaussian"
    parameters = ("fwhm",)
    kinds = {"fwhm": "length"}
    bounds = {"fwhm": (0.0, np.inf)}
    settings = {}
    real_when_centred = True

    kernel = "gaussian"

    def structure(self, u, v, p):
        u, v = _uv(u, v)
        theta = float(p["fwhm"])
        return np.exp(circular_exponent(theta, u * u + v * v))

    def structure_gradient(self, u, v, p):
        u, v = _uv(u, v)
        theta = float(p["fwhm"])
        q2 = u * u + v * v
        val = np.exp(circular_exponent(theta, q2))
        return val, {"fwhm": circular_log_derivative(theta, q2) * val}

    def size_parameter(self):
        return "fwhm"

    def outline(self, p):
        """An ellipse of the FWHM (a circle)."""
        return ("ellipse", abs(p["fwhm"]), abs(p["fwhm"]), 0.0)

    def brightness_temperature(self, flux, frequency, p, redshift=0.0):
        """Tb (K) from ``uvfit.sky.temperature.brightness_temperature_gaussian``; inf at zero size."""
        major = p["fwhm"]
        if major <= 0:
            return float("inf")
        return brightness_temperature_gaussian(flux, frequency, major, major, redshift)

    def singular(self, p):
        return float(p["fwhm"]) == 0.0

    def brightness(self, l, m, p):
        """Brightness per steradian: 4 ln2 / (pi theta^2) exp(-4 ln2 r^2 / theta^2)."""
        theta = abs(float(p["fwhm"]))
        return gaussian_density(l, m, theta, theta, 0.0)

    def pixel_fractions(self, l, m, p):
        theta = abs(float(p["fwhm"]))
        return gaussian_pixels(l, m, theta, theta, 0.0)

    def pixel_flux(self, l, m, p):
        """Exact per pixel (``gaussian_pixel_integrals``); zero width: the nearest pixel, exact."""
        theta = abs(float(p["fwhm"]))
        if theta == 0.0:
            return PixelFlux(nearest_pixel(l, m), RULE_EXACT_POINT)
        return PixelFlux(gaussian_pixel_integrals(l, m, theta, theta, 0.0), RULE_GAUSSIAN)

    def sample_points(self, p, n=64):
        theta = abs(float(p["fwhm"]))
        return gaussian_points(theta, theta, 0.0, n)


class EllipticalGaussian(Shape):
    """Elliptical Gaussian; ``fwhm`` (major axis), ``axis_ratio`` (minor/major), ``position_angle``.

    The position angle is that of the major axis, north through east. At axis ratio 1 the
    derivative with respect to the position angle is exactly zero (no singularity).
    """

    key = "elliptical_gaussian"
    parameters = ("fwhm", "axis_ratio", "position_angle")
    kinds = {"fwhm": "length", "axis_ratio": "ratio", "position_angle": "angle"}
    bounds = {"fwhm": (0.0, np.inf), "axis_ratio": (0.0, 1.0), "position_angle": (-np.inf, np.inf)}
    settings = {}
    real_when_centred = True

    kernel = "elliptical_gaussian"

    @staticmethod
    def _parts(u, v, p):
        u, v = _uv(u, v)
        a = float(p["fwhm"])
        rho = float(p["axis_ratio"])
        phi = float(p["position_angle"])
        q_par, q_perp = elliptical_axes(u, v, math.sin(phi), math.cos(phi))
        return a, rho, q_par, q_perp

    def structure(self, u, v, p):
        a, rho, q_par, q_perp = self._parts(u, v, p)
        return np.exp(elliptical_exponent(a, rho, q_par, q_perp))

    def structure_gradient(self, u, v, p):
        a, rho, q_par, q_perp = self._parts(u, v, p)
        val = np.exp(elliptical_exponent(a, rho, q_par, q_perp))
        h_a, h_rho, h_phi = elliptical_log_derivatives(a, rho, q_par, q_perp)
        return val, {"fwhm": h_a * val, "axis_ratio": h_rho * val, "position_angle": h_phi * val}

    def size_parameter(self):
        return "fwhm"

    def outline(self, p):
        """The FWHM ellipse: major axis ``fwhm``, minor ``fwhm * axis_ratio``, at ``position_angle``."""
        return ("ellipse", abs(p["fwhm"]), abs(p["fwhm"] * p["axis_ratio"]), float(p["position_angle"]))

    def reported_parameters(self):
        return ("axis_ratio", "position_angle")

    def periods(self):
        """The major axis is the same after half a turn: its position angle has period 180."""
        return {"position_angle": 180.0}

    def brightness_temperature(self, flux, frequency, p, redshift=0.0):
        """Tb (K) from ``uvfit.sky.temperature.brightness_temperature_gaussian`` with the major and
        minor FWHM; inf at zero size."""
        major = p["fwhm"]
        minor = major * float(p["axis_ratio"])
        if major <= 0 or minor <= 0:
            return float("inf")
        return brightness_temperature_gaussian(flux, frequency, major, minor, redshift)

    def singular(self, p):
        return float(p["fwhm"]) * float(p["axis_ratio"]) == 0.0

    def brightness(self, l, m, p):
        """Brightness per steradian: 4 ln2 / (pi a b) exp(-4 ln2 (x_maj^2/a^2 + x_min^2/b^2))."""
        a = abs(float(p["fwhm"]))
        return gaussian_density(l, m, a, abs(float(p["axis_ratio"])) * a, float(p["position_angle"]))

    def pixel_fractions(self, l, m, p):
        a = abs(float(p["fwhm"]))
        return gaussian_pixels(l, m, a, abs(float(p["axis_ratio"])) * a, float(p["position_angle"]))

    def pixel_flux(self, l, m, p):
        """Exact per pixel (``gaussian_pixel_integrals``); zero width: the nearest pixel, exact; a
        line (axis ratio 0): the default (quadrature nodes)."""
        a = abs(float(p["fwhm"]))
        b = abs(float(p["axis_ratio"])) * a
        if a == 0.0:
            return PixelFlux(nearest_pixel(l, m), RULE_EXACT_POINT)
        if b == 0.0:
            return super().pixel_flux(l, m, p)
        return PixelFlux(gaussian_pixel_integrals(l, m, a, b, float(p["position_angle"])), RULE_GAUSSIAN)

    def sample_points(self, p, n=64):
        a = abs(float(p["fwhm"]))
        return gaussian_points(a, abs(float(p["axis_ratio"])) * a, float(p["position_angle"]), n)
