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


def uv_position_angle(u, v):
    """Position angle of the (u, v) vector, north (v) through east (u), radians."""
    return np.arctan2(u, v)
