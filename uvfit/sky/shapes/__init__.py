"""Registry of component shapes: model-file name -> where its class is. One file per family.

A value is either (module, class name), imported on first use, or a Shape subclass itself: a
shape defined elsewhere (e.g. in a test) is registered with ``SHAPES["crescent"] = Crescent``.
"""

import importlib

SHAPES = {
    "point": ("uvfit.sky.shapes.point", "Point"),
    "gaussian": ("uvfit.sky.shapes.gaussian", "CircularGaussian"),
    "elliptical_gaussian": ("uvfit.sky.shapes.gaussian", "EllipticalGaussian"),
    "disk": ("uvfit.sky.shapes.disk", "UniformDisk"),
    "ring": ("uvfit.sky.shapes.ring", "ThinRing"),
    "ring_modulated": ("uvfit.sky.shapes.ring", "ModulatedRing"),
    "shell": ("uvfit.sky.shapes.shell", "Shell"),
    "thin_shell": ("uvfit.sky.shapes.shell", "ThinShell"),
    "sphere": ("uvfit.sky.shapes.shell", "Sphere"),
    "double": ("uvfit.sky.shapes.double", "Double"),
}


def shape_class(key):
    """The Shape subclass for a model-file shape name (KeyError if unknown)."""
    entry = SHAPES[key]
    if isinstance(entry, type):
        return entry
    module, name = entry
    return getattr(importlib.import_module(module), name)
