"""The contract every component shape fulfils.

A shape knows only its normalised, centred visibility (unit flux at zero spacing, centred on its
reference point) and the analytic derivatives of that visibility with respect to its own size
parameters. Flux, centre offset and spectral index are applied by the component that holds the
shape (``uvfit.sky.component``), so no shape repeats them.

Units inside a shape: u, v in wavelengths; every length (size, separation) in radians; every
angle (position angle, modulation angle) in radians, position angles measured north through east.
The component converts from the model file's units (mas, deg) and chains the derivatives.
"""
from typing import ClassVar

import numpy as np


class Shape:
    """Base class. Subclasses set ``key``, ``parameters`` and ``kinds`` and implement two methods."""

    #: the shape's name in model files, e.g. "gaussian"
    key: ClassVar[str] = ""
    #: names of the size parameters, in order, e.g. ("fwhm",)
    parameters: ClassVar[tuple] = ()
    #: kind of each parameter: "length" (angle on the sky, in the model's angular unit),
    #: "angle" (degrees), "ratio" (dimensionless), "flux" (Jy)
    kinds: ClassVar[dict] = {}
    #: settings (not fitted), name -> default, e.g. {"order": 1}
    settings: ClassVar[dict] = {}
    #: True when the centred visibility is real for every parameter value
    real_when_centred: ClassVar[bool] = True

    def __init__(self, **settings):
        unknown = set(settings) - set(self.settings)
        if unknown:
            raise ValueError(f"unknown setting(s) {sorted(unknown)} for shape '{self.key}'")
        self.config = {**self.settings, **settings}

    @classmethod
    def accepted_settings(cls, table):
        """Names of the settings a model-file component table of this shape may carry.

        ``table`` is the raw component table (a double reads its ``member`` from it)."""
        return list(cls.settings)

    def parameter_names(self):
        """Names of this instance's size parameters (may depend on settings)."""
        return list(self.parameters)

    def parameter_kind(self, name):
        return self.kinds[name]

    def structure(self, u, v, p):
        """Normalised centred visibility at (u, v); ``p`` maps parameter name -> value (radians)."""
        raise NotImplementedError

    def structure_gradient(self, u, v, p):
        """(value, {name: d value / d parameter}) at (u, v), derivatives per radian."""
        raise NotImplementedError

    def brightness(self, l, m, p):
        """Fraction of the (unit) flux in each pixel of a regular grid, centred on the shape.

        ``l`` (east) and ``m`` (north) are 2-D arrays of pixel-centre offsets from the shape's
        centre, in radians, on a regular grid (e.g. from ``numpy.meshgrid``). Returns an array of
        their shape: intensity times pixel area (so it sums to about 1 on a grid that covers and
        resolves the shape). Unresolved features (a point, a ring thinner than a pixel) put their
        flux into the nearest pixels; see :func:`grid_steps` and :func:`nearest_pixel`.
        """
        raise NotImplementedError(f"shape '{self.key}' cannot render a brightness image")


def grid_steps(l, m):
    """(dl, dm): the pixel spacings of a regular 2-D grid of (l, m) pixel centres (radians)."""
    l = np.asarray(l, dtype=float)
    m = np.asarray(m, dtype=float)
    if l.ndim != 2 or l.shape != m.shape:
        raise ValueError("l and m must be 2-D arrays of the same shape")

    def step(a):
        d = [np.max(np.abs(np.diff(a, axis=k))) for k in (0, 1) if a.shape[k] > 1]
        return max(d) if d else 1.0

    return step(l), step(m)


def nearest_pixel(l, m, l0=0.0, m0=0.0):
    """A grid of zeros with 1 in the pixel nearest to (l0, m0); all zeros if it lies off the grid."""
    l = np.asarray(l, dtype=float)
    m = np.asarray(m, dtype=float)
    out = np.zeros(l.shape)
    dl, dm = grid_steps(l, m)
    k = np.argmin((l - l0) ** 2 / dl ** 2 + (m - m0) ** 2 / dm ** 2)
    idx = np.unravel_index(k, l.shape)
    if abs(l[idx] - l0) <= 0.5 * dl * (1 + 1e-9) and abs(m[idx] - m0) <= 0.5 * dm * (1 + 1e-9):
        out[idx] = 1.0
    return out


def uv_position_angle(u, v):
    """Position angle of the (u, v) vector, north (v) through east (u), radians."""
    return np.arctan2(u, v)
