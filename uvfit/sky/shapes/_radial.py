"""Radial visibility functions shared by the disk, ring and shell shapes, with their derivatives.

Each function takes the dimensionless argument ``x`` (an array) and is accurate to a few units of
machine precision for every x >= 0, including x -> 0 where the textbook closed forms lose digits
to cancellation: below a threshold they switch to their Taylor series (terms written out below).

    airy(x)    = 2 J1(x) / x                         (uniform disk)
    sinc(x)    = sin(x) / x                          (zero-thickness spherical shell)
    ball(x)    = 3 (sin x - x cos x) / x^3           (uniform optically thin sphere)
"""

import math

import numpy as np
from scipy import special

from uvfit.sky.shape import Shape

#: below these |x| the series are used: there the closed forms lose more than ~1e-16 to
#: cancellation, while the truncated series (14 terms) are accurate to < 1e-17
AIRY_SERIES_BELOW = 1.5
BALL_SERIES_BELOW = 1.5

# 2 J1(x)/x = sum_k (-1)^k (x/2)^(2k) / (k! (k+1)!)    (Abramowitz & Stegun 9.1.10)
_AIRY = [(-1) ** k / (math.factorial(k) * math.factorial(k + 1) * 4.0**k) for k in range(14)]
# 3 (sin x - x cos x)/x^3 = sum_n (-1)^(n+1) 6 n x^(2n-2) / (2n+1)!   (from the sine/cosine series)
_BALL = [(-1) ** (n + 1) * 6.0 * n / math.factorial(2 * n + 1) for n in range(1, 15)]


def _poly_x2(coeffs, x):
    """sum_k coeffs[k] x^(2k) by Horner's rule in x^2."""
    x2 = x * x
    out = np.zeros_like(x2) + coeffs[-1]
    for c in coeffs[-2::-1]:
        out = out * x2 + c
    return out


def _poly_x2_derivative(coeffs, x):
    """d/dx of sum_k coeffs[k] x^(2k) = sum_k 2k coeffs[k] x^(2k-1)."""
    d = [2 * k * c for k, c in enumerate(coeffs)][1:]
    return x * _poly_x2(d, x)


def _split(x, below):
    x = np.asarray(x, dtype=float)
    small = np.abs(x) < below
    safe = np.where(small, 1.0, x)  # keeps the closed form away from 0/0 where the series is used
    return x, small, safe


def airy(x):
    """2 J1(x)/x, equal to 1 at x = 0."""
    x, small, safe = _split(x, AIRY_SERIES_BELOW)
    return np.where(small, _poly_x2(_AIRY, x), 2.0 * special.j1(safe) / safe)


def airy_derivative(x):
    """d/dx [2 J1(x)/x] = -2 J2(x)/x = 2 (x J0(x) - 2 J1(x)) / x^2 (J1' = J0 - J1/x)."""
    x, small, safe = _split(x, AIRY_SERIES_BELOW)
    closed = 2.0 * (safe * special.j0(safe) - 2.0 * special.j1(safe)) / safe**2
    return np.where(small, _poly_x2_derivative(_AIRY, x), closed)


def sinc(x):
    """sin(x)/x (unnormalised), equal to 1 at x = 0."""
    return np.sinc(np.asarray(x, dtype=float) / np.pi)


def sinc_derivative(x):
    """d/dx [sin x / x] = (x cos x - sin x)/x^2 = -x ball(x)/3 (stable at every x)."""
    x = np.asarray(x, dtype=float)
    return -x * ball(x) / 3.0


def ball(x):
    """3 (sin x - x cos x)/x^3, equal to 1 at x = 0."""
    x, small, safe = _split(x, BALL_SERIES_BELOW)
    closed = 3.0 * (np.sin(safe) - safe * np.cos(safe)) / safe**3
    return np.where(small, _poly_x2(_BALL, x), closed)


def ball_derivative(x):
    """d/dx ball(x) = 3 (sinc(x) - ball(x)) / x (from d/dx (sin x - x cos x) = x sin x)."""
    x, small, safe = _split(x, BALL_SERIES_BELOW)
    closed = 3.0 * (sinc(safe) - ball(safe)) / safe
    return np.where(small, _poly_x2_derivative(_BALL, x), closed)


def radius(u, v):
    """q = sqrt(u^2 + v^2), broadcast, as float array."""
    return np.hypot(np.asarray(u, dtype=float), np.asarray(v, dtype=float))


class OneSizeRadial(Shape):
    """A circularly symmetric shape with one size parameter s and V(q) = f(c s q), f(0) = 1.

    Subclasses set ``key``, ``size`` (the parameter's name, a length >= 0), ``scale`` (c) and
    ``profile`` / ``profile_derivative`` (f and df/dx, as staticmethods); ``gradient_k_first``
    picks the order of the product c q s in the gradient (see there)."""

    size = ""
    scale = np.pi
    gradient_k_first = False
    settings = {}
    real_when_centred = True

    def __init_subclass__(cls, **kwargs):
        super().__init_subclass__(**kwargs)
        if cls.size:
            cls.parameters = (cls.size,)
            cls.kinds = {cls.size: "length"}
            cls.bounds = {cls.size: (0.0, np.inf)}

    @staticmethod
    def profile(x):
        raise NotImplementedError

    @staticmethod
    def profile_derivative(x):
        raise NotImplementedError

    def structure(self, u, v, p):
        return self.profile(self.scale * p[self.size] * radius(u, v))

    def structure_gradient(self, u, v, p):
        q = radius(u, v)
        k = self.scale * q
        # the order of the product decides the last bit of x, which matters at large x: the
        # shells form it as the thick Shell does, the others as in ``structure``
        x = k * p[self.size] if self.gradient_k_first else self.scale * p[self.size] * q
        return self.profile(x), {self.size: k * self.profile_derivative(x)}
