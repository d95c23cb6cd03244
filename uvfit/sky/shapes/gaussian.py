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
        dl, dm = grid_steps(l, m)
        if theta < 1e-3 * min(dl, dm):
            return nearest_pixel(l, m)
        r2 = np.asarray(l) ** 2 + np.asarray(m) ** 2
        # unit integral: I = 4 ln2 / (pi theta^2) exp(-4 ln2 r^2 / theta^2)
        return C_IMG / (np.pi * theta * theta) * np.exp(-C_IMG * r2 / (theta * theta)) * dl * dm


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
        b = abs(float(p["axis_ratio"])) * a
        phi = float(p["position_angle"])
        dl, dm = grid_steps(l, m)
        if a < 1e-3 * min(dl, dm):
            return nearest_pixel(l, m)
        b = max(b, 1e-3 * min(dl, dm))
        l = np.asarray(l, dtype=float)
        m = np.asarray(m, dtype=float)
        x_maj = l * np.sin(phi) + m * np.cos(phi)
        x_min = l * np.cos(phi) - m * np.sin(phi)
        img = C_IMG / (np.pi * a * b) * np.exp(-C_IMG * (x_maj ** 2 / a ** 2 + x_min ** 2 / b ** 2))
        return img * dl * dm
