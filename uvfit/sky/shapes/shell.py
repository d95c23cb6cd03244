"""Optically thin spheres and spherical shells, seen in projection.

With x = 2 pi R q (Pearson 1995, "Non-imaging data analysis", Synthesis Imaging in Radio
Astronomy; Thompson, Moran & Swenson 2017):

    thin shell (zero thickness, radius R)   V = sin(x) / x                          null at q = 1/(2R)
    uniform sphere (radius R)               V = L(x) = 3 (sin x - x cos x) / x^3   null at tan x = x, x = 4.4934
    shell between Ri and Ro                 V = [Ro^3 L(xo) - Ri^3 L(xi)] / (Ro^3 - Ri^3)

The shell is the emissivity-weighted mean of thin shells: since d/dx (sin x - x cos x) = x sin x,
V = integral_Ri^Ro 3 r^2 sinc(2 pi q r) dr / (Ro^3 - Ri^3). Where 2 pi q (Ro - Ri) <= 1 that
integral is evaluated by Gauss-Legendre quadrature in r (no cancellation as Ri -> Ro, and exactly
the thin shell at Ri = Ro); elsewhere by the closed form. Ri = 0 is the sphere.

Projected brightness (unit flux): sphere 3 sqrt(R^2 - r^2) / (2 pi R^3); thin shell
1 / (2 pi R sqrt(R^2 - r^2)); shell 3 [sqrt(Ro^2 - r^2) - sqrt(Ri^2 - r^2)] / (2 pi (Ro^3 - Ri^3)),
each square root taken as 0 where its argument is negative.
"""

import numpy as np

from uvfit.sky.shape import Shape
from uvfit.sky.shapes import _pixels, _radial
from uvfit.sky.shapes._quadrature import shell_points

#: Gauss-Legendre nodes on [0, 1] for the thin-shell branch; with 2 pi q (Ro - Ri) <= 1 the
#: truncation error of 12 nodes is far below 1e-15
_TAU, _TAU_W = np.polynomial.legendre.leggauss(12)
_TAU = 0.5 * (_TAU + 1.0)
_TAU_W = 0.5 * _TAU_W
#: switch between quadrature and closed form at this phase thickness 2 pi q |Ro - Ri|
_THIN_BELOW = 1.0


def _projected_root(radius, r):
    return np.sqrt(np.clip(radius**2 - r**2, 0.0, None))


class Shell(Shape):
    """Optically thin uniform shell between ``inner_radius`` and ``outer_radius``."""

    key = "shell"
    parameters = ("inner_radius", "outer_radius")
    kinds = {"inner_radius": "length", "outer_radius": "length"}
    settings = {}
    real_when_centred = True
    bounds = {"inner_radius": (0.0, np.inf), "outer_radius": (0.0, np.inf)}

    def outline(self, p):
        """A filled circle of the outer diameter."""
        return ("circle", 2 * abs(p["outer_radius"]), 2 * abs(p["outer_radius"]), 0.0)

    def invalid_values(self, p):
        """An inner radius above the outer one describes no shell."""
        if p["inner_radius"] > p["outer_radius"]:
            return [
                (
                    "inner_radius",
                    f"the inner radius {p['inner_radius']!r} is larger than the outer radius {p['outer_radius']!r}",
                )
            ]
        return []

    def size_parameter(self):
        """The outer radius is the shell's size."""
        return "outer_radius"

    def _evaluate(self, u, v, p, derivatives):
        ri = float(abs(p["inner_radius"]))
        ro = float(abs(p["outer_radius"]))
        q = _radial.radius(u, v)
        k = 2.0 * np.pi * q
        value = np.ones_like(q)
        d_ri = np.zeros_like(q)
        d_ro = np.zeros_like(q)
        spread = ro**2 + ro * ri + ri**2  # (Ro^3 - Ri^3) / (Ro - Ri)
        if spread == 0.0:  # both radii zero: a point
            return value, {"inner_radius": d_ri, "outer_radius": d_ro}
        delta = ro - ri
        thin = k * abs(delta) <= _THIN_BELOW

        # quadrature branch: s = Ri + (Ro - Ri) tau, tau in [0, 1]
        kt = k[thin][None, :]
        s = (ri + delta * _TAU)[:, None]
        w = _TAU_W[:, None]
        g = _radial.sinc(kt * s)
        value[thin] = np.sum(w * s**2 * g, axis=0) / np.sum(w * s**2, axis=0)
        if derivatives:
            dg = kt * _radial.sinc_derivative(kt * s)  # d sinc(k s) / ds
            tau = _TAU[:, None]
            d_ro[thin] = 3 * ro**2 / spread**2 * np.sum(w * dg * tau * (s**2 + s * ri + ri**2), axis=0)
            d_ri[thin] = 3 * ri**2 / spread**2 * np.sum(w * dg * (1 - tau) * (ro**2 + ro * s + s**2), axis=0)

        # closed-form branch (here 2 pi q |Ro - Ri| > 1, so Ro^3 - Ri^3 is not small)
        thick = ~thin
        xo = k[thick] * ro
        xi = k[thick] * ri
        cube = ro**3 - ri**3
        val = (ro**3 * _radial.ball(xo) - ri**3 * _radial.ball(xi)) / cube
        value[thick] = val
        if derivatives:
            d_ro[thick] = 3 * ro**2 * (_radial.sinc(xo) - val) / cube
            d_ri[thick] = -3 * ri**2 * (_radial.sinc(xi) - val) / cube
        # chain through the absolute values taken above
        return value, {
            "inner_radius": d_ri * np.sign(p["inner_radius"] or 1.0),
            "outer_radius": d_ro * np.sign(p["outer_radius"] or 1.0),
        }

    def structure(self, u, v, p):
        return self._evaluate(u, v, p, derivatives=False)[0]

    def structure_gradient(self, u, v, p):
        return self._evaluate(u, v, p, derivatives=True)

    def singular(self, p):
        """True for zero thickness (the projected brightness diverges at the rim)."""
        return p["inner_radius"] == p["outer_radius"]

    def brightness(self, l, m, p):
        """Projected brightness per steradian (integrates to 1); see the module docstring."""
        ri, ro = sorted((abs(p["inner_radius"]), abs(p["outer_radius"])))
        if ri == ro:
            return ThinShell().brightness(l, m, {"radius": ro})
        r = np.hypot(np.asarray(l, dtype=float), np.asarray(m, dtype=float))
        return 3.0 * (_projected_root(ro, r) - _projected_root(ri, r)) / (2.0 * np.pi * (ro**3 - ri**3))

    def sample_points(self, p, n=64):
        """Quadrature nodes (l, m, weight) of the 3-D shell projected on the sky."""
        ri, ro = sorted((abs(p["inner_radius"]), abs(p["outer_radius"])))
        return shell_points(ri, ro, n)


class ThinShell(_radial.OneSizeRadial):
    """Optically thin spherical shell of zero thickness, parameter ``radius``."""

    key = "thin_shell"
    size = "radius"
    scale = 2.0 * np.pi
    gradient_k_first = True
    profile = staticmethod(_radial.sinc)
    profile_derivative = staticmethod(_radial.sinc_derivative)

    def outline(self, p):
        """A ring (an edge, the limb-brightened rim) of the diameter."""
        return ("ring", 2 * abs(p["radius"]), 2 * abs(p["radius"]), 0.0)

    def singular(self, p):
        """True: the projected brightness diverges at the rim; render from ``sample_points``."""
        return True

    def brightness(self, l, m, p):
        """Projected brightness per steradian, 1 / (2 pi R sqrt(R^2 - r^2)) inside the rim."""
        radius = abs(p["radius"])
        r = np.hypot(np.asarray(l, dtype=float), np.asarray(m, dtype=float))
        root = _projected_root(radius, r)
        with np.errstate(divide="ignore"):
            return np.where(r < radius, 1.0 / (2.0 * np.pi * radius * root), 0.0)

    def sample_points(self, p, n=64):
        """Quadrature nodes (l, m, weight) of the sphere surface projected on the sky."""
        return shell_points(abs(p["radius"]), abs(p["radius"]), n)


class Sphere(_radial.OneSizeRadial):
    """Optically thin uniform sphere, parameter ``radius``."""

    key = "sphere"
    size = "radius"
    scale = 2.0 * np.pi
    gradient_k_first = True
    profile = staticmethod(_radial.ball)
    profile_derivative = staticmethod(_radial.ball_derivative)

    def outline(self, p):
        """A filled circle of the diameter."""
        return ("circle", 2 * abs(p["radius"]), 2 * abs(p["radius"]), 0.0)

    def singular(self, p):
        """False: the projected brightness is bounded."""
        return False

    def brightness(self, l, m, p):
        """Projected brightness per steradian, 3 sqrt(R^2 - r^2) / (2 pi R^3)."""
        radius = abs(p["radius"])
        r = np.hypot(np.asarray(l, dtype=float), np.asarray(m, dtype=float))
        return 3.0 * _projected_root(radius, r) / (2.0 * np.pi * radius**3)

    def pixel_fractions(self, l, m, p):
        """Flux fraction per pixel: brightness averaged over 4 x 4 sub-pixel points; a sphere
        under two pixels across is drawn as a pixel-wide Gaussian of the same second moment
        (R^2/5 per axis), keeping its flux."""
        radius = abs(p["radius"])
        return _pixels.compact_or_oversampled(lambda a, b: self.brightness(a, b, p), l, m, 2 * radius, radius**2 / 5.0)

    def sample_points(self, p, n=64):
        """Quadrature nodes (l, m, weight) of the 3-D ball projected on the sky."""
        return shell_points(0.0, abs(p["radius"]), n)
