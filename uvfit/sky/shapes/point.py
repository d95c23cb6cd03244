"""A point source: all its flux at one position, the same visibility on every baseline."""
import numpy as np

from ..shape import Shape, nearest_pixel


class Point(Shape):
    """Unresolved component. Normalised centred visibility: 1 (Pearson 1995; TMS 2017)."""

    key = "point"
    parameters = ()
    kinds = {}
    settings = {}
    real_when_centred = True

    def structure(self, u, v, p):
        return np.ones(np.broadcast(np.asarray(u), np.asarray(v)).shape)

    def structure_gradient(self, u, v, p):
        return self.structure(u, v, p), {}

    def brightness(self, l, m, p):
        # all the flux in the pixel nearest the centre
        return nearest_pixel(l, m)
