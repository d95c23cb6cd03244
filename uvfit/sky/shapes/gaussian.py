"""Gaussian brightness distributions, circular and elliptical.

Visibilities (Pearson 1995, "Non-imaging data analysis", Synthesis Imaging in Radio Astronomy;
TMS 2017): a circular Gaussian of full width at half maximum theta has
V(q) = exp[-(pi theta q)^2 / (4 ln 2)], q = sqrt(u^2 + v^2). An elliptical one with major-axis
FWHM a, minor-axis FWHM b = rho a and major axis at position angle phi (north through east) has
V = exp[-pi^2/(4 ln 2) (a^2 q_par^2 + b^2 q_perp^2)], with q_par = u sin phi + v cos phi (along
the major axis) and q_perp = u cos phi - v sin phi.
"""
import numpy as np

from ..shape import Shape, grid_steps, nearest_pixel

#: pi^2 / (4 ln 2): the constant in the exponent of a Gaussian's visibility in terms of its FWHM
C_VIS = np.pi ** 2 / (4.0 * np.log(2.0))
#: 4 ln 2: the constant in the exponent of a Gaussian's brightness in terms of its FWHM
C_IMG = 4.0 * np.log(2.0)


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
    e_maj = np.array([np.sin(phi), np.cos(phi)])   # (east, north) along the major axis
    e_min = np.array([np.cos(phi), -np.sin(phi)])
    cov = s_maj ** 2 * np.outer(e_maj, e_maj) + s_min ** 2 * np.outer(e_min, e_min)
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


def _uv(u, v):
    u = np.asarray(u, dtype=float)
    v = np.asarray(v, dtype=float)
    return np.broadcast_arrays(u, v)


class CircularGaussian(Shape):
    """Circular Gaussian; parameter ``fwhm`` (full width at half maximum)."""

    key = "gaussian"
    parameters = ("fwhm",)
    kinds = {"fwhm": "length"}
    settings = {}
    real_when_centred = True

    def structure(self, u, v, p):
        u, v = _uv(u, v)
        theta = float(p["fwhm"])
        return np.exp(-C_VIS * theta * theta * (u * u + v * v))

    def structure_gradient(self, u, v, p):
        u, v = _uv(u, v)
        theta = float(p["fwhm"])
        q2 = u * u + v * v
        val = np.exp(-C_VIS * theta * theta * q2)
        # d/dtheta exp(-c theta^2 q^2) = -2 c theta q^2 V
        return val, {"fwhm": -2.0 * C_VIS * theta * q2 * val}

    def brightness(self, l, m, p):
        theta = abs(float(p["fwhm"]))
        return gaussian_pixels(l, m, theta, theta, 0.0)


class EllipticalGaussian(Shape):
    """Elliptical Gaussian; ``fwhm`` (major axis), ``axis_ratio`` (minor/major), ``position_angle``.

    The position angle is that of the major axis, north through east. At axis ratio 1 the
    derivative with respect to the position angle is exactly zero (no singularity).
    """

    key = "elliptical_gaussian"
    parameters = ("fwhm", "axis_ratio", "position_angle")
    kinds = {"fwhm": "length", "axis_ratio": "ratio", "position_angle": "angle"}
    settings = {}
    real_when_centred = True

    @staticmethod
    def _parts(u, v, p):
        u, v = _uv(u, v)
        a = float(p["fwhm"])
        rho = float(p["axis_ratio"])
        phi = float(p["position_angle"])
        s, c = np.sin(phi), np.cos(phi)
        q_par = u * s + v * c
        q_perp = u * c - v * s
        return a, rho, q_par, q_perp

    def structure(self, u, v, p):
        a, rho, q_par, q_perp = self._parts(u, v, p)
        return np.exp(-C_VIS * a * a * (q_par * q_par + rho * rho * q_perp * q_perp))

    def structure_gradient(self, u, v, p):
        a, rho, q_par, q_perp = self._parts(u, v, p)
        qp2 = q_par * q_par
        qn2 = q_perp * q_perp
        val = np.exp(-C_VIS * a * a * (qp2 + rho * rho * qn2))
        # exponent E = a^2 (q_par^2 + rho^2 q_perp^2); V = exp(-c E); dV = -c V dE
        # d q_par / d phi = q_perp, d q_perp / d phi = -q_par
        # => dE/dphi = 2 a^2 q_par q_perp (1 - rho^2), zero at rho = 1
        cv = -C_VIS * val
        grads = {
            "fwhm": cv * 2.0 * a * (qp2 + rho * rho * qn2),
            "axis_ratio": cv * 2.0 * a * a * rho * qn2,
            "position_angle": cv * 2.0 * a * a * (1.0 - rho * rho) * q_par * q_perp,
        }
        return val, grads

    def brightness(self, l, m, p):
        a = abs(float(p["fwhm"]))
        return gaussian_pixels(l, m, a, abs(float(p["axis_ratio"])) * a, float(p["position_angle"]))
