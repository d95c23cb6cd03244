"""The sky model: components, their parameters, and the visibilities and Jacobian they predict.

Conventions (TMS 2017, ch. 3): V(u, v) = integral I(l, m) exp[-2 pi i (u l + v m)] dl dm with l
toward east (increasing right ascension), m toward north, u and v in wavelengths; position angles
north through east. Parameter values are in the model's units (Jy, ``angular_unit``, degrees);
shapes see radians. See DEVELOPERS.md, "SkyModel", for the contract.
"""

from __future__ import annotations

import copy as _copy
import math

import astropy.units as un
import numpy as np
from numpy.typing import ArrayLike

from ..errors import ModelError
from . import engine as _engine
from .parameters import Parameter, ParameterSet, Uniform

#: the mark between a parameter and its file number in the name of a per-file copy ("core.flux@2")
FILE_MARK = "@"


def per_file_name(name: str, k: int) -> str:
    """Name of the copy of parameter ``name`` for file ``k`` (counted from 0; named from 1)."""
    return f"{name}{FILE_MARK}{k + 1}"


def angular_unit_of(text):
    """(astropy unit, its text) for an angular unit given as text or as a unit; ModelError if bad."""
    if isinstance(text, un.UnitBase):
        unit = text
        text = unit.to_string()
    else:
        try:
            unit = un.Unit(str(text))
        except ValueError:
            raise ModelError(
                f"angular_unit '{text}' is not a unit astropy knows", 'use e.g. "uas", "mas", "arcsec", "deg"'
            ) from None
    if not unit.is_equivalent(un.rad):
        raise ModelError(f"angular_unit '{text}' is not an angle", 'use e.g. "uas", "mas", "arcsec"')
    return unit, str(text)


class SkyModel:
    """A list of components and an ordered set of parameters ("component.parameter")."""

    def __init__(self, components, parameters, angular_unit="mas", description=None):
        self.components = list(components)
        self.parameters = parameters if isinstance(parameters, ParameterSet) else ParameterSet(parameters)
        self.angular_unit, self.angular_unit_text = angular_unit_of(angular_unit)
        self.rad_per_unit = float((1.0 * self.angular_unit).to_value(un.rad))
        self.description = description
        self._plan = None
        self._variants = None
        self.file_labels: list[str] | None = None
        self.file_times: list[float] | None = None
        self.check()

    # Construction from specifications (``SkyModel.build``) and the model-file text (``to_toml``,
    # ``save``) are provided by ``uvfit.sky.modelfile``, the only module that knows files; the
    # package ``uvfit.sky`` attaches them to this class, so that this module does not import it.

    def check(self) -> None:
        """Validate names, ties (targets exist, no cycles, same kind). Raises ModelError."""
        names = [c.name for c in self.components]
        dup = sorted({n for n in names if names.count(n) > 1})
        if dup:
            raise ModelError(f"duplicate component name(s) {dup}", "give every component its own name")
        for c in self.components:
            missing = [ln for ln in c.parameter_names() if f"{c.name}.{ln}" not in self.parameters]
            if missing:
                raise ModelError(
                    f"component '{c.name}' has no parameter(s) {missing}", "give every parameter of the shape a value"
                )
        for full, p in self.parameters.items():
            if p.tie is None:
                continue
            if p.tie not in self.parameters:
                raise ModelError(
                    f"parameter {full} is tied to {p.tie}, which does not exist",
                    "tie to an existing 'component.parameter'",
                )
            seen = [full]
            target = p.tie
            while target is not None:
                if target in seen:
                    raise ModelError(
                        f"the ties of {full} form a loop ({' -> '.join(seen + [target])})",
                        "tie every parameter to one that is not tied back",
                    )
                seen.append(target)
                target = self.parameters[target].tie
            root = self.parameters[seen[-1]]
            if root.kind != p.kind:
                raise ModelError(
                    f"parameter {full} ({p.kind}) is tied to {root.name} ({root.kind})",
                    "tie only parameters of the same kind (a size to a size, ...)",
                )

    # -- parameters ---------------------------------------------------------------------------
    @property
    def free_names(self) -> list[str]:
        return self.parameters.free_names

    @property
    def n_free(self) -> int:
        return len(self.free_names)

    def root(self, full: str) -> str:
        """The parameter that ``full`` finally equals through its ties (itself when untied)."""
        p = self.parameters[full]
        while p.tie is not None:
            p = self.parameters[p.tie]
        return p.name

    def get_free(self) -> np.ndarray:
        return np.array([self.parameters[n].value for n in self.free_names], dtype=float)

    def set_free(self, theta: ArrayLike) -> None:
        names = self.free_names
        theta = np.asarray(theta, dtype=float).ravel()
        if theta.size != len(names):
            raise ModelError(f"got {theta.size} free-parameter values for {len(names)} free parameters")
        for n, x in zip(names, theta):
            self.parameters[n].value = float(x)
        for p in self.parameters.values():
            if p.tie is not None:
                p.value = self.parameters[self.root(p.name)].value

    def free_bounds(self) -> tuple[np.ndarray, np.ndarray]:
        """(lo, hi) arrays over the free parameters, -inf / +inf where unbounded."""
        ps = [self.parameters[n] for n in self.free_names]
        return (np.array([p.min for p in ps], dtype=float), np.array([p.max for p in ps], dtype=float))

    def values(self, theta: ArrayLike | None = None) -> dict[str, float]:
        """{full name: value in model units} with ``theta`` (or the current free values), ties applied."""
        vals = {n: p.value for n, p in self.parameters.items()}
        if theta is not None:
            names = self.free_names
            theta = np.asarray(theta, dtype=float).ravel()
            if theta.size != len(names):
                raise ModelError(f"got {theta.size} free-parameter values for {len(names)} free parameters")
            vals.update(zip(names, (float(x) for x in theta)))
        for n, p in self.parameters.items():
            if p.tie is not None:
                vals[n] = vals[self.root(n)]
        return vals

    def component_values(self, name, theta=None, values=None):
        """{local name: value} of one component."""
        vals = self.values(theta) if values is None else values
        comp = self.component(name)
        return {ln: vals[f"{comp.name}.{ln}"] for ln in comp.parameter_names()}

    def log_prior(self, theta: ArrayLike) -> float:
        """Sum of the free parameters' log priors: -inf outside [min, max]; the given prior, or a
        flat one (normalised where both bounds are finite). Tied parameters must lie within their
        own bounds too."""
        theta = np.asarray(theta, dtype=float).ravel()
        names = self.free_names
        if theta.size != len(names):
            raise ModelError(f"got {theta.size} free-parameter values for {len(names)} free parameters")
        total = 0.0
        for n, x in zip(names, theta):
            lp = self.parameters[n].log_prior(x)
            if lp == -math.inf:
                return -math.inf
            total += lp
        if any(p.tie is not None for p in self.parameters.values()):
            vals = self.values(theta)
            for n, p in self.parameters.items():
                if p.tie is not None and not (p.min <= vals[n] <= p.max):
                    return -math.inf
        return float(total)

    def sample_prior(self, n: int, seed: int) -> np.ndarray:
        """(n, n_free) draws from the priors (a flat prior needs finite bounds). Seeded."""
        rng = np.random.default_rng(seed)
        out = np.empty((int(n), self.n_free))
        for j, name in enumerate(self.free_names):
            p = self.parameters[name]
            prior = p.prior
            if prior is None:
                if not (math.isfinite(p.min) and math.isfinite(p.max)):
                    raise ModelError(
                        f"cannot draw {name} from its prior: it has no prior and no finite bounds",
                        "give it min and max, or a prior",
                    )
                prior = Uniform(p.min, p.max)
            x = prior.sample(rng, int(n))
            # a prior wider than the bounds: redraw outside values (few rounds; then clip)
            for _ in range(100):
                bad = (x < p.min) | (x > p.max)
                if not bad.any():
                    break
                x[bad] = prior.sample(rng, int(bad.sum()))
            out[:, j] = np.clip(x, p.min, p.max)
        return out

    def fix(self, name: str, reason: str | None = None) -> None:
        """Fix a parameter at its current value (a tied one: at the value of its tie, untied)."""
        if name not in self.parameters:
            raise ModelError(f"no parameter {name}", "known: " + ", ".join(self.parameters))
        p = self.parameters[name]
        if p.tie is not None:
            p.value = self.parameters[self.root(name)].value
            p.tie = None
        p.fixed = True
        if reason:
            p.note = str(reason)

    def release(self, name: str) -> None:
        """Make a fixed parameter free again."""
        if name not in self.parameters:
            raise ModelError(f"no parameter {name}", "known: " + ", ".join(self.parameters))
        self.parameters[name].fixed = False
        self.parameters[name].note = None

    def component(self, name):
        for c in self.components:
            if c.name == name:
                return c
        raise ModelError(f"no component named '{name}'", "known: " + ", ".join(c.name for c in self.components))

    def copy(self) -> SkyModel:
        return _copy.deepcopy(self)

    # -- parameters separate per data file --------------------------------------------------------
    def per_file_names(self) -> dict[str, list[str]]:
        """{parameter: [its copy per file, in file order]} of the parameters declared per file
        (``per = "file"``) once :meth:`for_files` has made the copies; {} before, or when none."""
        if not self.file_labels:
            return {}
        n = len(self.file_labels)
        return {
            name: [per_file_name(name, k) for k in range(n)] for name, p in self.parameters.items() if p.per == "file"
        }

    def rate_names(self) -> dict[str, str]:
        """{position parameter: its rate parameter} of the positions that move (``rate`` and
        ``epoch`` in the model file; the position's value is at its ``epoch``)."""
        return {p.rate_of: name for name, p in self.parameters.items() if p.rate_of is not None}

    def needs_files(self) -> bool:
        """True when an evaluation needs each row's data file (per-file parameters or rates)."""
        return bool(self.file_labels) and bool(self.per_file_names() or self.rate_names())

    def for_files(self, labels: list[str], times: list[float] | None = None) -> SkyModel:
        """A copy of the model for a joint fit of the files ``labels`` (in stacking order): each
        parameter declared per file gets one copy per file (``core.flux@1``, ``core.flux@2``,
        ...; bounds, prior, fixed as declared), and the parameter itself follows its copy for the
        rows of each file (on rows of no known file, the first file's copy). Everything else is
        shared. ``times`` (MJD, one per file): where a position moves, each file's rows see it at
        value + rate (time - epoch) (Julian years). A model without per-file parameters or rates
        is returned as a plain copy."""
        out = self.copy()
        labels = [str(x) for x in labels]
        declared = [name for name, p in out.parameters.items() if p.per == "file"]
        if out.rate_names():
            if times is None or len(times) != len(labels) or not np.all(np.isfinite(times)):
                raise ModelError(
                    "the model has positions that move (rate, epoch), but not every data file has an observation time",
                    "give files that record their times, or remove the rates",
                )
            out.file_times = [float(t) for t in times]
            out._variants = None
            if not declared:
                out.file_labels = labels
                return out
        if not declared:
            return out
        if out.file_labels is not None:
            if len(out.file_labels) != len(labels):
                raise ModelError(
                    f"the model has per-file parameters for {len(out.file_labels)} files, the data has {len(labels)}",
                    "fit the model as read from its file, or with as many data files as it was made for",
                )
            out.file_labels = labels
            return out
        params = ParameterSet()
        for name, p in out.parameters.items():
            params[name] = p
            if p.per != "file":
                continue
            for k in range(len(labels)):
                copy_name = per_file_name(name, k)
                if copy_name in out.parameters:
                    raise ModelError(f"parameter {copy_name} exists already", "rename the component")
                params[copy_name] = Parameter(
                    name=copy_name,
                    value=p.value,
                    min=p.min,
                    max=p.max,
                    fixed=p.fixed,
                    prior=p.prior,
                    unit=p.unit,
                    kind=p.kind,
                    note=f"{name} for {labels[k]}",
                )
            p.tie, p.fixed, p.prior = per_file_name(name, 0), False, None
            p.note = f"one value per file: {', '.join(per_file_name(name, k) for k in range(len(labels)))}"
        out.parameters = params
        out.file_labels = labels
        out._plan = None
        out._variants = None
        out.check()
        return out

    def _file_variants(self):
        """[model for file k]: models sharing this model's Parameter objects, except that each
        per-file parameter is tied to its copy for file k (kept while the structure stays)."""
        if not self.needs_files():
            return None
        names = self.per_file_names()
        key = (self.structure_key(), tuple(self.file_times or ()))
        kept = self._variants
        if kept is not None and kept[0] == key:
            return kept[1]
        variants = []
        for k in range(len(self.file_labels or [])):
            if not names:
                variants.append(self)
                continue
            params = ParameterSet()
            for name, p in self.parameters.items():
                if name in names and p.tie is not None:
                    q = _copy.copy(p)
                    q.tie = names[name][k]
                    params[name] = q
                else:
                    params[name] = p
            variant = SkyModel.__new__(SkyModel)
            variant.components = self.components
            variant.parameters = params
            variant.angular_unit, variant.angular_unit_text = self.angular_unit, self.angular_unit_text
            variant.rad_per_unit = self.rad_per_unit
            variant.description = self.description
            variant._plan = None
            variant._variants = None
            variant.file_labels = None
            variant.file_times = None
            variants.append(variant)
        self._variants = (key, variants)
        return variants

    # -- prediction ---------------------------------------------------------------------------
    def _evaluate(self, u, v, frequency, theta, gradient, files=None):
        """(vis, jac or None) by the current visibility engine (``uvfit.sky.engine``: a compiled
        kernel, or the numpy reference path; both give the same numbers). ``files``: the data
        file (index in ``file_labels``) of each row, for a model with per-file parameters."""
        variants = self._file_variants() if files is not None else None
        if not variants:
            return _engine.evaluate(self, u, v, frequency, theta, gradient)
        u = np.asarray(u, dtype=float).ravel()
        v = np.asarray(v, dtype=float).ravel()
        files = np.asarray(files, dtype=int).ravel()
        if files.size != u.size:
            raise ModelError(f"got {files.size} file indices for {u.size} rows")
        if files.size and (files.min() < 0 or files.max() >= len(variants)):
            raise ModelError(f"file index outside 0..{len(variants) - 1}", "give each row the index of its data file")
        freq = None if frequency is None else np.asarray(frequency, dtype=float)
        per_row = freq is not None and freq.ndim > 0 and freq.size == u.size
        vis = np.zeros(u.size, dtype=complex)
        jac = np.zeros((u.size, self.n_free), dtype=complex) if gradient else None
        moves = self._moves()
        full = self.get_free() if theta is None else np.asarray(theta, dtype=float).ravel()
        for k in np.unique(files):
            rows = files == k
            f = freq.ravel()[rows] if per_row else freq
            th = full
            if moves:
                th = full.copy()
                for jp, jr, rate_name, epoch in moves:
                    years = (self.file_times[k] - epoch) / 365.25
                    th[jp] += (full[jr] if jr is not None else self.parameters[rate_name].value) * years
            vk, jk = _engine.evaluate(variants[k], u[rows], v[rows], f, th, gradient)
            vis[rows] = np.asarray(vk).ravel()
            if gradient:
                jk = np.asarray(jk).reshape(int(rows.sum()), -1)
                for jp, jr, _, epoch in moves:
                    if jr is not None:
                        jk[:, jr] += jk[:, jp] * (self.file_times[k] - epoch) / 365.25
                jac[rows] = jk
        return vis, jac

    def _moves(self):
        """[(free index of a moving position, free index of its rate or None, rate name, epoch)]."""
        rates = self.rate_names()
        if not rates or not self.file_times:
            return []
        index = {n: j for j, n in enumerate(self.free_names)}
        out = []
        for pos, rate in rates.items():
            if pos not in index:
                raise ModelError(f"{pos} has a rate, so it must be free", f"free {pos}, or remove its rate")
            out.append((index[pos], index.get(rate), rate, float(self.parameters[pos].epoch)))
        return out

    def visibilities(
        self,
        u: ArrayLike,
        v: ArrayLike,
        frequency: ArrayLike | None = None,
        theta: ArrayLike | None = None,
        files: ArrayLike | None = None,
    ) -> np.ndarray:
        """Model visibilities (complex Jy) at (u, v) in wavelengths; ``frequency`` (Hz, scalar or
        per row) matters only for components with a spectral index (None: reference frequency);
        ``files`` (each row's data file, see :meth:`for_files`) only for per-file parameters."""
        return self._evaluate(u, v, frequency, theta, gradient=False, files=files)[0]

    def jacobian(
        self,
        u: ArrayLike,
        v: ArrayLike,
        frequency: ArrayLike | None = None,
        theta: ArrayLike | None = None,
        files: ArrayLike | None = None,
    ) -> np.ndarray:
        """d V / d theta, complex, shape (n, n_free), per model unit of each free parameter."""
        return self._evaluate(u, v, frequency, theta, gradient=True, files=files)[1]

    def visibilities_and_jacobian(
        self,
        u: ArrayLike,
        v: ArrayLike,
        frequency: ArrayLike | None = None,
        theta: ArrayLike | None = None,
        files: ArrayLike | None = None,
    ) -> tuple[np.ndarray, np.ndarray]:
        """(visibilities, jacobian) computed together."""
        return self._evaluate(u, v, frequency, theta, gradient=True, files=files)

    def misfit(self, u, v, data, weight, frequency=None, theta=None, files=None):
        """sum_i weight_i |data_i - V_i|^2 (float) over the rows, e.g. chi^2 of complex
        visibilities with weight = 1 / sigma^2 (sigma per real and imaginary part). The compiled
        engine forms no array of model visibilities for it (used by likelihoods in samplers)."""
        if files is not None and self.needs_files():
            model = self.visibilities(u, v, frequency=frequency, theta=theta, files=files)
            resid = np.asarray(data, dtype=complex).ravel() - model
            return float(np.sum(np.asarray(weight, dtype=float).ravel() * (resid.real**2 + resid.imag**2)))
        return _engine.misfit(self, u, v, data, weight, frequency=frequency, theta=theta)

    def total_flux(self, frequency: ArrayLike | None = None, theta: ArrayLike | None = None) -> float:
        """Sum of the component fluxes (Jy): the visibility at zero spacing."""
        vals = self.values(theta)
        return float(
            sum(
                np.sum(c.flux_at(frequency, {ln: vals[f"{c.name}.{ln}"] for ln in c.parameter_names()}))
                for c in self.components
            )
        )

    # -- geometry helpers for fits and reports ---------------------------------------------------
    def component_centres(self, theta=None):
        """{component name: (east, north)} in the model's angular unit."""
        vals = self.values(theta)
        return {c.name: (vals[f"{c.name}.east"], vals[f"{c.name}.north"]) for c in self.components}

    def members(self, theta=None, frequency=None):
        """Every component as a list of dicts, each expanded into its members (``Shape.members``:
        a double gives two, any other shape itself).

        Each dict: ``name`` ("jet", or "pair.1" / "pair.2" for the members of double "pair"),
        ``component``, ``shape`` (the member's shape key), ``flux`` (Jy, at ``frequency``),
        ``east``, ``north`` (model angular unit), ``parameters`` (the member shape's parameters,
        model units, without the member suffix), ``member`` (the member's Shape) and ``names``
        ({member parameter: full parameter name}).
        """
        vals = self.values(theta)
        out = []
        for c in self.components:
            local = {ln: vals[f"{c.name}.{ln}"] for ln in c.parameter_names()}
            flux = c.flux_at(frequency, local)
            for mb in c.shape.members(c.geometry_values(local), flux):
                east, north = local["east"], local["north"]
                if mb.offset is not None:
                    east, north = east + mb.offset[0], north + mb.offset[1]
                out.append(
                    {
                        "name": f"{c.name}.{mb.suffix}" if mb.suffix else c.name,
                        "component": c.name,
                        "shape": mb.shape.key,
                        "flux": mb.flux,
                        "east": east,
                        "north": north,
                        "parameters": {pn: local[ln] for pn, ln in mb.names.items()},
                        "member": mb.shape,
                        "names": {pn: f"{c.name}.{ln}" for pn, ln in mb.names.items()},
                    }
                )
        return out

    # -- structure: what consumers ask instead of parsing parameter names -------------------------
    def component_parameter_names(self, name):
        """Full parameter names of one component, in its local order."""
        comp = self.component(name)
        return [f"{comp.name}.{ln}" for ln in comp.parameter_names()]

    def position_names(self) -> dict[str, tuple[str, str]]:
        """{component name: (full name of its east, of its north)}, in component order."""
        return {c.name: (f"{c.name}.east", f"{c.name}.north") for c in self.components}

    def flux_names(self) -> dict[str, str]:
        """{component name: full name of its flux}, in component order."""
        return {c.name: f"{c.name}.flux" for c in self.components}

    def size_names(self) -> list[str]:
        """Full names of the members' size parameters (``Shape.size_parameter``), model order."""
        out = []
        for c in self.components:
            local = {ln: 0.0 for ln in c.parameter_names()}
            for mb in c.shape.members(c.geometry_values(local)):
                size = mb.shape.size_parameter()
                if size is not None:
                    out.append(f"{c.name}.{mb.names[size]}")
        return out

    def periods(self) -> dict[str, float]:
        """{full name: period in degrees} of the parameters that live on a circle (``Shape.periods``)."""
        return {f"{c.name}.{ln}": period for c in self.components for ln, period in c.shape.periods().items()}

    def structure_key(self):
        """A value equal for two states of the model exactly when their structure is the same:
        parameter names and order, which are free, fixed or tied (and to what), the components'
        shapes, settings and reference frequencies, and the angular unit. Values do not enter."""
        return (
            self.rad_per_unit,
            tuple(self.parameters),
            tuple([p.tie if p.tie is not None else bool(p.fixed) for p in self.parameters.values()]),
            tuple(
                [(c.name, c.key, c.reference_frequency, tuple(sorted(c.shape.config.items()))) for c in self.components]
            ),
        )

    def plan(self, build):
        """The evaluation plan of this model's structure: ``build(model)`` when the structure has
        changed since the plan was last built (``structure_key``), else the plan kept by the model.
        The plan must hold no reference to the model's objects (copies and pickles keep it)."""
        key = self.structure_key()
        kept = getattr(self, "_plan", None)
        if kept is None or kept[0] != key:
            kept = (key, build(self))
            self._plan = kept
        return kept[1]

    # -- images ---------------------------------------------------------------------------------
    def image(self, l, m, frequency=None, theta=None):
        """Model brightness (Jy per pixel) on a regular 2-D grid of pixel centres ``l`` (east),
        ``m`` (north), in the model's angular unit."""
        l = np.asarray(l, dtype=float) * self.rad_per_unit
        m = np.asarray(m, dtype=float) * self.rad_per_unit
        vals = self.values(theta)
        img = np.zeros(l.shape)
        for c in self.components:
            local = {ln: vals[f"{c.name}.{ln}"] for ln in c.parameter_names()}
            try:
                img += c.brightness(l, m, local, self.rad_per_unit, frequency)
            except NotImplementedError:
                raise ModelError(f"component '{c.name}': shape '{c.key}' cannot be drawn as an image yet") from None
        return img

    def pixel_flux(self, l, m, frequency=None, theta=None) -> tuple[np.ndarray, dict[str, str]]:
        """(image, rules): the flux (Jy) integrated over each pixel of a regular 2-D grid of pixel
        centres ``l`` (east), ``m`` (north) in the model's angular unit, and {component: how its
        pixels were computed} (``Shape.pixel_flux``). Flux outside the grid is left out."""
        l = np.asarray(l, dtype=float) * self.rad_per_unit
        m = np.asarray(m, dtype=float) * self.rad_per_unit
        vals = self.values(theta)
        img = np.zeros(l.shape)
        rules = {}
        for c in self.components:
            local = {ln: vals[f"{c.name}.{ln}"] for ln in c.parameter_names()}
            try:
                flux, rules[c.name] = c.pixel_flux(l, m, local, self.rad_per_unit, frequency)
            except NotImplementedError:
                raise ModelError(f"component '{c.name}': shape '{c.key}' cannot be drawn as an image yet") from None
            img += flux
        return img, rules

    def render(self, npix, fov, frequency=None, theta=None, centre=(0.0, 0.0)):
        """(image, l, m): the model on an npix x npix grid spanning ``fov`` (model angular unit).

        ``image[i, j]`` is the flux (Jy) in the pixel at north ``m[i]``, east ``l[j]``; ``l`` and
        ``m`` increase with the index and the pixel npix // 2 is at ``centre``. East increases to
        the LEFT on the sky: a plot should show l decreasing to the right.
        """
        npix = int(npix)
        step = float(fov) / npix
        axis = (np.arange(npix) - npix // 2) * step
        l_axis = axis + float(centre[0])
        m_axis = axis + float(centre[1])
        ll, mm = np.meshgrid(l_axis, m_axis)
        return self.image(ll, mm, frequency=frequency, theta=theta), l_axis, m_axis

    # -- files ----------------------------------------------------------------------------------
    def to_dict(self) -> dict:
        """A plain description for JSON outputs (``uvfit.outputs.to_json`` turns infinities into null)."""
        comps = []
        for c in self.components:
            params = {}
            for ln in c.parameter_names():
                p = self.parameters[f"{c.name}.{ln}"]
                params[ln] = {
                    "value": p.value,
                    "min": p.min,
                    "max": p.max,
                    "fixed": bool(p.fixed),
                    "tie": p.tie,
                    "free": p.free,
                    "kind": p.kind,
                    "unit": p.unit.to_string() if p.unit is not None else "",
                    "prior": None if p.prior is None else {p.prior.key: list(p.prior.args())},
                }
                if p.note:
                    params[ln]["note"] = p.note
            comps.append(
                {
                    "name": c.name,
                    "shape": c.key,
                    "settings": dict(c.shape.config),
                    "reference_frequency_hz": c.reference_frequency,
                    "parameters": params,
                }
            )
        out = {
            "angular_unit": self.angular_unit_text,
            "description": self.description,
            "free_names": self.free_names,
            "components": comps,
        }
        per_file = self.per_file_names()
        if per_file:
            out["per_file"] = {
                "files": list(self.file_labels or []),
                "parameters": {
                    name: {c: self.parameters[c].value for c in copies} for name, copies in per_file.items()
                },
            }
        return out

    def __eq__(self, other):
        if not isinstance(other, SkyModel):
            return NotImplemented
        return (
            self.angular_unit == other.angular_unit
            and len(self.components) == len(other.components)
            and all(a.same_as(b) for a, b in zip(self.components, other.components))
            and list(self.parameters) == list(other.parameters)
            and all(a.same_as(b) for a, b in zip(self.parameters.values(), other.parameters.values()))
        )

    __hash__ = None  # type: ignore[assignment]  # equal models are mutable: not hashable

    def __repr__(self):
        comps = ", ".join(f"{c.name}:{c.key}" for c in self.components)
        return f"SkyModel([{comps}], {self.n_free} free, unit={self.angular_unit_text})"
