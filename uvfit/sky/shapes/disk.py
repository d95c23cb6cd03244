"""Uniform circular disk.

Visibility of a disk of diameter theta with unit flux (Pearson 1995, "Non-imaging data analysis",
Synthesis Imaging in Radio Astronomy; Thompson, Moran & Swenson 2017, ch. 2):

    V(q) = 2 J1(x) / x,   x = pi theta q,   q = sqrt(u^2 + v^2)

the Hankel transform of a brightness 4 / (pi theta^2) inside radius theta/2. First null at
x = 3.8317 (the first zero of J1), i.e. q = 1.2197 / theta.
"""

import numpy as np

from uvfit.sky.shapes import _pixels, _radial
from uvfit.sky.shapes._quadrature import disk_points
from uvfit.sky.temperature import brightness_temperature_disk


class UniformDisk(_radial.OneSizeRadial):
    """Uniformly bright circular disk, parameter ``diameter`` (radians inside the shape)."""

    key = "disk"
    size = "diameter"
    scale = np.pi
    profile = staticmethod(_radial.airy)
    profile_derivative = staticmethod(_radial.airy_derivative)

    def brightness_temperature(self, flux, frequency, p, redshift=0.0):
        """Tb (K) of the mean brightness (``uvfit.sky.temperature.brightness_temperature_disk``);
        inf at zero diameter."""
        d = p["diameter"]
        if d <= 0:
            return float("inf")
        return brightness_temperature_disk(flux, frequency, d, redshift)

    # image domain -------------------------------------------------------------------------------
    def singular(self, p):
        """False: the brightness is a bounded function and can be sampled on a grid."""
        return False

    def brightness(self, l, m, p):
        """Brightness per steradian (integrates to 1): 4/(pi theta^2) inside r = theta/2, else 0."""
        radius = 0.5 * abs(p["diameter"])
        r = np.hypot(np.asarray(l, dtype=float), np.asarray(m, dtype=float))
        return np.where(r <= radius, 1.0 / (np.pi * radius**2), 0.0)

    def pixel_fractions(self, l, m, p):
        """Flux fraction per pixel: brightness averaged over 4 x 4 sub-pixel points (the rim
        resolved to a quarter pixel); a disk under two pixels across is drawn as a pixel-wide
        Gaussian of the same second moment (R^2/4 per axis), keeping its flux."""
        radius = 0.5 * abs(p["diameter"])
        return _pixels.compact_or_oversampled(lambda a, b: self.brightness(a, b, p), l, m, 2 * radius, radius**2 / 4.0)

    def sample_points(self, p, n=64):
        """Quadrature nodes (l, m, weight) of the disk: Gauss-Legendre in radius, uniform in angle."""
        return disk_points(0.5 * abs(p["diameter"]), n)
