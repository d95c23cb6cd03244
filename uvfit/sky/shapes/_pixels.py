"""Pixel rendering helpers for the shapes' optional ``pixel_fractions(l, m, p)``.

``l``, ``m`` are 2-D arrays of pixel-centre offsets (radians, l east, m north) on a regular grid;
the result is the fraction of the unit flux falling in each pixel.
"""

import numpy as np


def grid_steps(l, m):
    """(dl, dm): the pixel spacings of a regular 2-D grid of pixel centres."""

    def step(a):
        a = np.asarray(a, dtype=float)
        if a.ndim != 2:
            raise ValueError("pixel grids must be 2-D arrays (e.g. from numpy.meshgrid)")
        diffs = [np.abs(np.diff(a, axis=k)) for k in (0, 1) if a.shape[k] > 1]
        s = max((float(d.max()) for d in diffs), default=0.0)
        if s == 0.0:
            raise ValueError("cannot tell the pixel size of a grid with a single pixel")
        return s

    return step(l), step(m)


def oversampled(brightness, l, m, s=4):
    """Mean of ``brightness(l, m)`` over s x s sub-pixel points of every pixel, times its area.

    A sharp edge (a disk's rim) is then resolved to 1/s of a pixel; s^2 evaluations per pixel.
    """
    l = np.asarray(l, dtype=float)
    m = np.asarray(m, dtype=float)
    dl, dm = grid_steps(l, m)
    offsets = (np.arange(s) + 0.5) / s - 0.5
    total = np.zeros(np.broadcast(l, m).shape)
    for a in offsets:  # s^2 whole-grid evaluations (not a loop over pixels)
        for b in offsets:
            total += brightness(l + a * dl, m + b * dm)
    return total * (dl * dm) / (s * s)


#: a curve (ring) or a sub-pixel blob is drawn with at least this Gaussian width (standard
#: deviation, pixels), so that sampling it at the pixel centres keeps its flux to ~3e-4 (by Poisson
#: summation the error is about 4 exp(-2 pi^2 0.7^2) = 2.5e-4)
MIN_LINE_SIGMA = 0.7


def compact_or_oversampled(brightness, l, m, size, variance):
    """Pixel fractions of a compact bounded shape of diameter ``size`` whose brightness has the
    given second moment per axis ``variance`` (rad^2). Resolved (size >= 2 pixels): oversampled
    brightness. Smaller: a Gaussian of that variance widened by (MIN_LINE_SIGMA pixels)^2, sampled
    at the pixel centres: it keeps the flux, and appears about a pixel wide."""
    dl, dm = grid_steps(l, m)
    pixel = np.sqrt(dl * dm)
    if size >= 2.0 * pixel:
        return oversampled(brightness, l, m)
    s2 = variance + (MIN_LINE_SIGMA * pixel) ** 2
    r2 = np.asarray(l, dtype=float) ** 2 + np.asarray(m, dtype=float) ** 2
    return np.exp(-0.5 * r2 / s2) / (2.0 * np.pi * s2) * (dl * dm)
