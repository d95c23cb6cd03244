"""A point source: all its flux at one position, the same visibility on every baseline."""

import numpy as np

from ..shape import RULE_EXACT_POINT, PixelFlux, Shape, nearest_pixel


class Point(Shape):
    """Unresolved component. Normalised centred visibility: 1 (Pearson 1995; TMS 2017)."""

    key = "point"
    parameters = ()
    kinds = {}
    settings = {}
    real_when_centred = True
    kernel = "point"

    def structure(self, u, v, p):
        return np.ones(np.broadcast(np.asarray(u), np.asarray(v)).shape)

    def structure_gradient(self, u, v, p):
        return self.structure(u, v, p), {}

    def singular(self, p):
        """True: all the flux at one point; rendered into the nearest pixel."""
        return True

    def brightness(self, l, m, p):
        raise ValueError("a point has no finite brightness; render it from sample_points()")

    def sample_points(self, p, n=1):
        """One node at the centre with all the weight."""
        return np.zeros(1), np.zeros(1), np.ones(1)

    def pixel_flux(self, l, m, p):
        """Exact: all the flux in the pixel holding the position."""
        return PixelFlux(nearest_pixel(l, m), RULE_EXACT_POINT)
