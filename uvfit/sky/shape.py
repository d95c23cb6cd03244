"""The contract every component shape fulfils.

A shape knows only its normalised, centred visibility (unit flux at zero spacing, centred on its
reference point) and the analytic derivatives of that visibility with respect to its own size
parameters. Flux, centre offset and spectral index are applied by the component that holds the
shape (``uvfit.sky.component``), so no shape repeats them.

Units inside a shape: u, v in wavelengths; every length (size, separation) in radians; every
angle (position angle, modulation angle) in radians, position angles measured north through east.
The component converts from the model file's units (mas, deg) and chains the derivatives.
"""

from typing import ClassVar, NamedTuple

import numpy as np

from .parameters import default_bounds

#: sub-pixel points per axis of the default super-sampled pixel flux (``Shape.pixel_flux``)
SUPER_SAMPLING = 8
#: a bounded shape under this many pixels across is rendered from its quadrature nodes instead
COMPACT_PIXELS = 4.0


class Member(NamedTuple):
    """One member of a shape as seen on the sky (see ``Shape.members``).

    ``suffix``: "" for a shape that is its own single member, "1", "2" for the members of a double;
    ``shape``: the member's Shape; ``names``: {member parameter: the owner's local name};
    ``flux``: the member's share of the flux given to ``members``; ``offset``: (east, north) of
    the member from the owner's reference point in the length unit of ``p`` (None: no offset)."""

    suffix: str
    shape: "Shape"
    names: dict
    flux: object
    offset: object


class MemberSwap(NamedTuple):
    """How two members of one shape trade labels without changing the sky (``symmetric_members``).

    The second member sits at offset ``separation`` (a length) in direction ``angle`` (a position
    angle, degrees in model units) from the first, the component's reference point, and has
    ``ratio`` times its flux. Swapping moves the reference point by that offset, maps the ratio r
    to 1 / r and the angle to angle + 180 deg, and exchanges the parameters of each pair in
    ``pairs`` ((local name of member 1, local name of member 2), ...)."""

    ratio: str
    separation: str
    angle: str
    pairs: tuple


class PixelFlux(NamedTuple):
    """What ``Shape.pixel_flux`` gives: ``fraction`` (the unit flux integrated over each pixel,
    an array like the grid) and ``rule`` (one line saying how it was computed)."""

    fraction: np.ndarray
    rule: str


#: the rules of the default ``Shape.pixel_flux``
RULE_SUPER = f"super-sampled: brightness averaged over {SUPER_SAMPLING} x {SUPER_SAMPLING} points per pixel"
RULE_NODES = "quadrature nodes added to their nearest pixel: flux kept, detail below a pixel approximate"
RULE_EXACT_POINT = "exact: all the flux in the pixel holding the position"


class Shape:
    """Base class. Subclasses set ``key``, ``parameters`` and ``kinds`` and implement two methods.

    What the rest of the package asks a shape (each with a default here, overridden per shape):
    ``members(p, flux)`` (what is on the sky: the shape itself, or a double's two members),
    ``size_parameter()`` / ``main_size(p)`` (the parameter reported as "the size"),
    ``brightness_temperature(flux, frequency, p, redshift)`` (None when the shape has no formula),
    ``reported_parameters()`` (parameters reported among the derived quantities besides the size),
    ``default_value(name)`` (for a parameter a model file leaves out), ``periods()`` (angles on
    the circle) and ``symmetric_members()`` (a label swap of two equal members, or None).
    ``kernel`` names the compiled engine's built-in evaluation of the shape (None: the engine
    takes the shape's own ``structure`` / ``structure_gradient``, see ``uvfit.sky.engine``).
    """

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
    #: True when the shape is made of several members with parameters of their own (a double)
    compound: ClassVar[bool] = False
    #: built-in kernel of the compiled engine ("point", "gaussian", "elliptical_gaussian"), or None
    kernel: ClassVar[str | None] = None

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

    def parameter_bounds(self, name):
        """(min, max) a parameter gets when the model file gives none.

        A shape may list them in a class attribute ``bounds`` ({name: (min, max)}); otherwise the
        rule of ``uvfit.sky.parameters.default_bounds`` applies (a length >= 0, anything else
        unbounded)."""
        bounds = getattr(self, "bounds", None) or {}
        if name in bounds:
            lo, hi = bounds[name]
            return float(lo), float(hi)
        return default_bounds(self.parameter_kind(name))

    # what the rest of the package asks -----------------------------------------------------------
    def members(self, p, flux=1.0):
        """[Member, ...]: what is on the sky. ``p``: {name: value}, angles in radians, lengths in
        any one unit (the offsets come back in it). Default: the shape itself, all the flux."""
        return [Member("", self, {n: n for n in self.parameter_names()}, flux, None)]

    def size_parameter(self):
        """Local name of the parameter reported as the shape's size (derived quantity ``.size``,
        the resolved test, upper limits), or None. Default: the first length parameter."""
        return next((n for n in self.parameter_names() if self.parameter_kind(n) == "length"), None)

    def main_size(self, p):
        """The value of ``size_parameter()`` in ``p`` (same units), or None without one."""
        name = self.size_parameter()
        return None if name is None else float(p[name])

    def brightness_temperature(self, flux, frequency, p, redshift=0.0):
        """Brightness temperature (K) of the shape with ``flux`` (Jy) at ``frequency`` (Hz),
        rest frame at ``redshift``; ``p`` in radians. None: the shape gives none (default)."""
        return None

    def outline(self, p):
        """How the sky figure draws the shape: ``(kind, major, minor, position_angle_deg)`` with
        kind "point", "ellipse", "circle" (filled) or "ring" (an edge), major and minor the full
        widths in the units of ``p``. Default: a circle as wide as ``main_size`` (read as a
        diameter), or a point for a shape without a size."""
        size = self.main_size(p)
        if size is None:
            return ("point", 0.0, 0.0, 0.0)
        return ("circle", abs(size), abs(size), 0.0)

    def reported_parameters(self):
        """Local names reported among the derived quantities besides the size (an angle reduced
        to ``periods()``), and held at their best values when the size is tested against zero.
        Default: none."""
        return ()

    def invalid_values(self, p):
        """[(parameter, reason)] for values that describe no physical brightness (checked when a
        model is loaded, beyond the per-parameter bounds). ``p`` in model units. Default: none."""
        return []

    def default_value(self, name):
        """(value, fixed) for a parameter that a model file may leave out, or None when required.
        Default: every parameter is required."""
        return None

    def periods(self):
        """{local name: period in degrees} of the parameters that live on a circle.
        Default: 360 for every angle parameter (a position angle)."""
        return {n: 360.0 for n in self.parameter_names() if self.parameter_kind(n) == "angle"}

    def symmetric_members(self):
        """A MemberSwap when two members of the shape can trade labels, else None (default)."""
        return None

    # image domain ---------------------------------------------------------------------------------
    def singular(self, p):
        """True when the flux sits on points or curves (no finite brightness to sample)."""
        return False

    def brightness(self, l, m, p):
        """Brightness per steradian of the unit-flux shape at offsets (l east, m north; radians)
        from its centre; it integrates to 1. Only for ``singular(p)`` False (else ValueError)."""
        raise NotImplementedError(f"shape '{self.key}' has no brightness function")

    def sample_points(self, p, n=64):
        """Quadrature nodes ``(l, m, weight)`` (flat arrays, radians, weights summing to 1) such
        that sum(weight * f(l, m)) approximates the integral of I f for smooth f."""
        raise NotImplementedError(f"shape '{self.key}' has no point-set description")

    def pixel_flux(self, l, m, p):
        """PixelFlux: the fraction of the unit flux inside each pixel, and how it was computed.

        ``l``, ``m``: 2-D arrays of pixel-centre offsets from the shape's centre (radians, a
        regular grid, steps of either sign). Unlike ``pixel_fractions`` (for display) nothing is
        widened: the values integrate the brightness over the pixel. Default: a singular shape,
        or one under COMPACT_PIXELS pixels across (``main_size``), puts the weights of its
        ``sample_points`` into their nearest pixels (flux kept exactly); any other one averages
        its ``brightness`` over SUPER_SAMPLING x SUPER_SAMPLING points per pixel. A shape with an
        analytic pixel integral overrides this."""
        from .shapes._pixels import oversampled

        dl, dm = grid_steps(l, m)
        size = self.main_size(p)
        compact = size is not None and abs(size) < COMPACT_PIXELS * float(np.sqrt(dl * dm))
        if self.singular(p) or compact:
            lp, mp, w = self.sample_points(p)
            return PixelFlux(splat(l, m, lp, mp, w), RULE_NODES)
        frac = oversampled(lambda a, b: self.brightness(a, b, p), l, m, s=SUPER_SAMPLING)
        return PixelFlux(np.asarray(frac, dtype=float), RULE_SUPER)


def render_fractions(shape, l, m, p):
    """Fraction of the shape's unit flux in each pixel of a regular grid of pixel centres.

    ``l``, ``m``: 2-D arrays (e.g. from numpy.meshgrid) of offsets from the shape's centre, in
    radians. A shape may provide its own ``pixel_fractions(l, m, p)``; a singular one is rendered
    by putting the weights of its ``sample_points`` into the nearest pixels; any other one is its
    brightness at the pixel centres times the pixel area.
    """
    own = getattr(shape, "pixel_fractions", None)
    if own is not None:
        return own(l, m, p)
    if shape.singular(p):
        lp, mp, w = shape.sample_points(p)
        return splat(l, m, lp, mp, w)
    dl, dm = grid_steps(l, m)
    return np.asarray(shape.brightness(l, m, p), dtype=float) * (dl * dm)


def _grid_axes(l, m):
    """For a regular 2-D grid: (axis of l, l origin, signed l step, axis of m, m origin, m step)."""
    l = np.asarray(l, dtype=float)
    m = np.asarray(m, dtype=float)
    if l.ndim != 2 or l.shape != m.shape:
        raise ValueError("l and m must be 2-D arrays of the same shape")

    def axis_of(a):
        for k in (1, 0):
            if a.shape[k] > 1:
                idx = [0, 0]
                idx[k] = 1
                step = a[tuple(idx)] - a[0, 0]
                if step != 0:
                    return k, float(step)
        return None, 1.0

    al, sl = axis_of(l)
    am, sm = axis_of(m)
    if al is None and am is None:
        al, am = 1, 0
    elif al is None:
        al = 1 - am
    elif am is None:
        am = 1 - al
    return al, float(l[0, 0]), sl, am, float(m[0, 0]), sm


def grid_steps(l, m):
    """(dl, dm): the pixel spacings of a regular 2-D grid of (l, m) pixel centres (radians)."""
    _, _, sl, _, _, sm = _grid_axes(l, m)
    return abs(sl), abs(sm)


def splat(l, m, lp, mp, w):
    """A grid like ``l`` with each weight ``w`` added to the pixel nearest to its point (lp, mp);
    points more than half a pixel off the grid are dropped."""
    l = np.asarray(l, dtype=float)
    al, l00, sl, am, m00, sm = _grid_axes(l, m)
    il = np.rint((np.ravel(lp) - l00) / sl).astype(np.int64)
    im = np.rint((np.ravel(mp) - m00) / sm).astype(np.int64)
    w = np.broadcast_to(np.asarray(w, dtype=float), il.shape)
    ok = (il >= 0) & (il < l.shape[al]) & (im >= 0) & (im < l.shape[am])
    index = [None, None]
    index[al], index[am] = il[ok], im[ok]
    flat = np.ravel_multi_index(tuple(index), l.shape)
    return np.bincount(flat, weights=w[ok], minlength=l.size).reshape(l.shape)


def nearest_pixel(l, m, l0=0.0, m0=0.0):
    """A grid of zeros with 1 in the pixel nearest to (l0, m0); all zeros if it lies off the grid."""
    return splat(l, m, [l0], [m0], [1.0])


def uv_position_angle(u, v):
    """Position angle of the (u, v) vector, north (v) through east (u), radians."""
    return np.arctan2(u, v)
