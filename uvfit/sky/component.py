"""A component: one shape with a flux, a position and optionally a spectral index.

The component applies, once for every shape (Fourier kernel and shift theorem: TMS 2017, ch. 3):

    V(u, v, nu) = S(nu) * D(u, v) * exp[-2 pi i (u l0 + v m0)],   S(nu) = S0 (nu / nu0)^alpha

where D is the shape's normalised centred visibility, l0 = ``east`` (toward increasing right
ascension) and m0 = ``north``. Positions and sizes come in the model's angular unit, angles in
degrees; the component converts them to radians for the shape and chains the derivatives back, so
every derivative it returns is per model-file unit.
"""

import numpy as np

from .parameters import COMPONENT_KINDS
from .shape import render_fractions

DEG = np.pi / 180.0


def shift_factor(u, v, l0, m0):
    """exp[-2 pi i (u l0 + v m0)] (shift theorem), one sine and one cosine per row.

    The phase is reduced in turns first (t - round(t) is exact), so that a phase of many turns
    loses no accuracy to the rounding of 2 pi t."""
    t = u * l0
    t += v * m0
    t -= np.rint(t)
    t *= 2.0 * np.pi
    out = np.empty(t.shape, dtype=complex)
    np.cos(t, out=out.real)
    np.sin(t, out=out.imag)
    np.negative(out.imag, out=out.imag)
    return out


class Component:
    """``name``, ``shape`` (a Shape instance), and an optional spectral index.

    ``reference_frequency`` (Hz): when given, the component has a parameter ``spectral_index`` and
    its flux is the flux at that frequency.
    """

    def __init__(self, name, shape, reference_frequency=None):
        self.name = str(name)
        self.shape = shape
        self.reference_frequency = None if reference_frequency is None else float(reference_frequency)

    @property
    def spectral(self):
        return self.reference_frequency is not None

    @property
    def key(self):
        return self.shape.key

    def parameter_names(self):
        """Local parameter names in order: flux, east, north, the shape's, [spectral_index]."""
        names = ["flux", "east", "north"] + list(self.shape.parameter_names())
        if self.spectral:
            names.append("spectral_index")
        return names

    def parameter_kind(self, local):
        if local in COMPONENT_KINDS:
            return COMPONENT_KINDS[local]
        return self.shape.parameter_kind(local)

    def default_bounds(self, local):
        """(min, max) of a parameter the model file gives no bounds for: flux, position and
        spectral index unbounded; the shape's own parameters as the shape says
        (``Shape.parameter_bounds``: sizes >= 0, an axis ratio in [0, 1], ...)."""
        if local in COMPONENT_KINDS:
            return -np.inf, np.inf
        return self.shape.parameter_bounds(local)

    def default_value(self, local):
        """(value, fixed) of a parameter the model file may leave out, or None when required: a
        position defaults to 0 (free); the shape's own parameters as the shape says."""
        if local in ("east", "north"):
            return 0.0, False
        if local in COMPONENT_KINDS:
            return None
        return self.shape.default_value(local)

    def geometry_values(self, values):
        """The shape's parameters for ``Shape.members``: angles in radians, lengths as given."""
        return {
            n: float(values[n]) * (DEG if self.shape.parameter_kind(n) == "angle" else 1.0)
            for n in self.shape.parameter_names()
        }

    def _factor(self, kind, rad_per_unit):
        return {"length": rad_per_unit, "angle": DEG}.get(kind, 1.0)

    def shape_values(self, values, rad_per_unit):
        """The shape's parameters in radians, from model-unit ``values`` (local name -> value)."""
        return {
            n: float(values[n]) * self._factor(self.shape.parameter_kind(n), rad_per_unit)
            for n in self.shape.parameter_names()
        }

    def spectral_factor(self, frequency, values):
        """(nu/nu0)^alpha and ln(nu/nu0), or (1, None) without a spectral index or a frequency."""
        if not self.spectral or frequency is None:
            return 1.0, None
        logr = np.log(np.asarray(frequency, dtype=float) / self.reference_frequency)
        return np.exp(float(values["spectral_index"]) * logr), logr

    def flux_at(self, frequency, values):
        """Flux density (Jy) at ``frequency`` (Hz; None: the reference frequency)."""
        out = float(values["flux"]) * self.spectral_factor(frequency, values)[0]
        return float(out) if np.ndim(out) == 0 else out

    def evaluate(self, u, v, frequency, values, rad_per_unit, gradient=False):
        """Visibility (complex Jy) and, with ``gradient``, {local name: dV / d parameter}.

        ``values``: local name -> value in model units; ``rad_per_unit``: radians per model
        angular unit. Derivatives are per model unit (Jy, angular unit, degree, 1).
        """
        u = np.asarray(u, dtype=float)
        v = np.asarray(v, dtype=float)
        p = self.shape_values(values, rad_per_unit)
        if gradient:
            struct, sgrad = self.shape.structure_gradient(u, v, p)
        else:
            struct, sgrad = self.shape.structure(u, v, p), None
        l0 = float(values["east"]) * rad_per_unit
        m0 = float(values["north"]) * rad_per_unit
        if l0 == 0.0 and m0 == 0.0:
            phase = None
            shaped = np.asarray(struct)
        else:
            phase = shift_factor(u, v, l0, m0)
            shaped = struct * phase
        spec, logr = self.spectral_factor(frequency, values)
        flux = float(values["flux"])
        base = shaped * spec if self.spectral and logr is not None else shaped
        vis = flux * base
        vis = np.asarray(vis, dtype=complex)
        if not gradient:
            return vis, None
        grads = {"flux": np.asarray(base, dtype=complex)}
        grads["east"] = vis * (-2j * np.pi * rad_per_unit) * u
        grads["north"] = vis * (-2j * np.pi * rad_per_unit) * v
        scale = flux * spec
        for n, d in sgrad.items():
            f = self._factor(self.shape.parameter_kind(n), rad_per_unit)
            g = d * phase if phase is not None else np.asarray(d)
            grads[n] = np.asarray(g * (scale * f), dtype=complex)
        if self.spectral:
            grads["spectral_index"] = vis * logr if logr is not None else np.zeros(vis.shape, complex)
        return vis, grads

    def brightness(self, l, m, values, rad_per_unit, frequency=None):
        """Flux per pixel (Jy) on a regular grid of pixel centres (l east, m north, radians)."""
        l0 = float(values["east"]) * rad_per_unit
        m0 = float(values["north"]) * rad_per_unit
        p = self.shape_values(values, rad_per_unit)
        frac = render_fractions(self.shape, np.asarray(l, dtype=float) - l0, np.asarray(m, dtype=float) - m0, p)
        return self.flux_at(frequency, values) * np.real(frac)

    def pixel_flux(self, l, m, values, rad_per_unit, frequency=None):
        """(flux per pixel in Jy integrated over each pixel, the rule used: ``Shape.pixel_flux``)
        on a regular grid of pixel centres (l east, m north, radians)."""
        l0 = float(values["east"]) * rad_per_unit
        m0 = float(values["north"]) * rad_per_unit
        p = self.shape_values(values, rad_per_unit)
        got = self.shape.pixel_flux(np.asarray(l, dtype=float) - l0, np.asarray(m, dtype=float) - m0, p)
        return self.flux_at(frequency, values) * np.real(got.fraction), got.rule

    def same_as(self, other):
        return (
            self.name == other.name
            and self.key == other.key
            and self.shape.config == other.shape.config
            and self.reference_frequency == other.reference_frequency
        )
