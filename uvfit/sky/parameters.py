"""Model parameters, their bounds, ties and priors.

A parameter's full name is "component.parameter" (e.g. "core.fwhm"). Its value is in the model
file's units: Jy for a flux, the model's ``angular_unit`` for a position or size, degrees for an
angle, and no unit for a ratio or a spectral index. A parameter is free unless it is fixed or tied;
a tied parameter always equals the parameter it is tied to (its Jacobian column is added to that
parameter's column).
"""

import math
from dataclasses import dataclass

import astropy.units as un
import numpy as np

#: kind of each component-level parameter
COMPONENT_KINDS = {"flux": "flux", "east": "length", "north": "length", "spectral_index": "ratio"}


def default_bounds(kind):
    """(min, max) of a parameter by its kind alone, when neither the model file nor the shape
    (``Shape.bounds``) gives bounds: a length (a size, a separation) >= 0, anything else unbounded.
    Positions, fluxes and spectral indices are unbounded at the component (a negative component
    flux can be legitimate in a fit)."""
    if kind == "length":
        return 0.0, math.inf
    return -math.inf, math.inf


def kind_unit(kind, angular_unit):
    """The astropy unit of a parameter of this kind in a model with this angular unit."""
    return {
        "flux": un.Jy,
        "length": angular_unit,
        "angle": un.deg,
        "ratio": un.dimensionless_unscaled,
        "rate": angular_unit / un.yr,
    }[kind]


# -- priors ---------------------------------------------------------------------------------------


class Prior:
    """A prior density on one parameter, in the parameter's model-file units."""

    key = ""

    def log_prob(self, x):
        raise NotImplementedError

    def sample(self, rng, n):
        raise NotImplementedError

    def args(self):
        raise NotImplementedError

    def to_toml(self):
        return "{ " + self.key + " = [" + ", ".join(_toml_float(a) for a in self.args()) + "] }"

    def __repr__(self):
        return f"{type(self).__name__}({', '.join(repr(a) for a in self.args())})"

    def __eq__(self, other):
        return type(self) is type(other) and self.args() == other.args()

    def __hash__(self):
        return hash((type(self).__name__, self.args()))


class Uniform(Prior):
    """Flat density between ``min`` and ``max`` (both finite)."""

    key = "uniform"

    def __init__(self, min, max):
        self.min, self.max = float(min), float(max)
        if not (math.isfinite(self.min) and math.isfinite(self.max) and self.max > self.min):
            raise ValueError("a uniform prior needs finite bounds with min < max")

    def args(self):
        return (self.min, self.max)

    def log_prob(self, x):
        x = np.asarray(x, dtype=float)
        inside = (x >= self.min) & (x <= self.max)
        out = np.where(inside, -math.log(self.max - self.min), -np.inf)
        return out if out.ndim else float(out)

    def sample(self, rng, n):
        return rng.uniform(self.min, self.max, n)


class Normal(Prior):
    """Gaussian density of mean ``mean`` and standard deviation ``sd`` (> 0)."""

    key = "normal"

    def __init__(self, mean, sd):
        self.mean, self.sd = float(mean), float(sd)
        if not (math.isfinite(self.mean) and math.isfinite(self.sd) and self.sd > 0):
            raise ValueError("a normal prior needs a finite mean and a standard deviation > 0")

    def args(self):
        return (self.mean, self.sd)

    def log_prob(self, x):
        z = (np.asarray(x, dtype=float) - self.mean) / self.sd
        out = -0.5 * z * z - math.log(self.sd * math.sqrt(2.0 * math.pi))
        return out if np.ndim(out) else float(out)

    def sample(self, rng, n):
        return rng.normal(self.mean, self.sd, n)


class LogUniform(Prior):
    """Density proportional to 1/x between ``min`` and ``max`` (0 < min < max < inf)."""

    key = "log_uniform"

    def __init__(self, min, max):
        self.min, self.max = float(min), float(max)
        if not (self.min > 0 and math.isfinite(self.max) and self.max > self.min):
            raise ValueError("a log-uniform prior needs bounds 0 < min < max < inf")

    def args(self):
        return (self.min, self.max)

    def log_prob(self, x):
        x = np.asarray(x, dtype=float)
        inside = (x >= self.min) & (x <= self.max)
        with np.errstate(divide="ignore", invalid="ignore"):
            lp = -np.log(np.where(inside, x, 1.0)) - math.log(math.log(self.max / self.min))
        out = np.where(inside, lp, -np.inf)
        return out if out.ndim else float(out)

    def sample(self, rng, n):
        return np.exp(rng.uniform(math.log(self.min), math.log(self.max), n))


PRIORS = {"uniform": Uniform, "normal": Normal, "log_uniform": LogUniform}


# -- parameters -----------------------------------------------------------------------------------


@dataclass
class Parameter:
    """One model parameter (see the module docstring for units).

    ``tie`` is the full name of another parameter this one always equals, or None. ``note`` is a
    free-text reason (e.g. why the fitter fixed it); it is written as a comment in a saved model.
    ``per`` is "file" for a parameter that takes one value per data file in a joint fit
    (``SkyModel.for_files``), else None. A position that moves has ``epoch`` (MJD: the time of
    its value); its rate (model angular unit per Julian year) is the parameter ``rate_of`` it.
    """

    name: str
    value: float
    min: float = -math.inf
    max: float = math.inf
    fixed: bool = False
    tie: str | None = None
    prior: Prior | None = None
    unit: object = None
    kind: str = "ratio"
    note: str | None = None
    per: str | None = None
    epoch: float | None = None
    rate_of: str | None = None

    @property
    def component(self):
        return self.name.split(".", 1)[0]

    @property
    def local(self):
        return self.name.split(".", 1)[1]

    @property
    def free(self):
        return not self.fixed and self.tie is None

    def in_bounds(self, x=None):
        x = self.value if x is None else x
        return bool(self.min <= x <= self.max)

    def log_prior(self, x):
        """log prior density at x: -inf outside [min, max]; the prior if one is given; else a flat
        density (normalised, -log(max - min), where both bounds are finite; 0 where not)."""
        x = float(x)
        if not (self.min <= x <= self.max) or not math.isfinite(x):
            return -math.inf
        if self.prior is not None:
            return float(self.prior.log_prob(x))
        if math.isfinite(self.min) and math.isfinite(self.max) and self.max > self.min:
            return -math.log(self.max - self.min)
        return 0.0

    def same_as(self, other):
        """Equal in everything a model file records (the note aside)."""
        return (
            self.name == other.name
            and _feq(self.value, other.value)
            and _feq(self.min, other.min)
            and _feq(self.max, other.max)
            and bool(self.fixed) == bool(other.fixed)
            and self.tie == other.tie
            and self.prior == other.prior
            and self.kind == other.kind
            and self.per == other.per
            and _feq(self.epoch, other.epoch)
            and self.rate_of == other.rate_of
        )


def _feq(a, b):
    return a == b or (isinstance(a, float) and isinstance(b, float) and math.isnan(a) and math.isnan(b))


def _toml_float(x):
    x = float(x)
    if math.isnan(x):
        return "nan"
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    return repr(x)


class ParameterSet(dict):
    """Ordered mapping full name -> Parameter (component order, then each component's order)."""

    @property
    def names(self):
        return list(self.keys())

    @property
    def free_names(self):
        return [n for n, p in self.items() if p.free]

    def of_component(self, component):
        return [p for p in self.values() if p.component == component]

    def copy(self):
        import copy

        return ParameterSet((k, copy.copy(p)) for k, p in self.items())
