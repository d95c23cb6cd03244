"""Model files: the project's own TOML format (read with tomllib, written as plain text).

    angular_unit = "mas"            # unit of every position and size in the file
    [[component]]
    name = "core"
    shape = "gaussian"
    flux = 1.2                      # a plain number: a free parameter started there
    east = { value = 0.0, fixed = true }
    fwhm = { value = 0.05, min = 0.0, max = 1.0 }

A parameter is a number or a table with keys ``value``, ``min``, ``max``, ``fixed``, ``tie``,
``prior`` and ``per`` (``per = "file"``: one value per data file in a joint fit). See the README, "Model files", for every shape, the defaults and the priors. Every
problem in a file is reported as one ModelError naming the line, the component and the key.
"""

import json
import math
import os
import re

import astropy.units as un
import tomllib

from ..errors import ModelError, UvfitError
from ..outputs import atomic_write
from .component import Component
from .model import SkyModel, angular_unit_of
from .parameters import PRIORS, LogUniform, Parameter, ParameterSet, Uniform, _toml_float, kind_unit
from .shapes import SHAPES, shape_class

_TOP_KEYS = ("angular_unit", "description", "component")
_PARAM_KEYS = ("value", "min", "max", "fixed", "tie", "prior", "per", "rate", "epoch")
#: the parameters that may carry a rate (per Julian year) and its epoch
_MOVING = ("east", "north")
#: suffix of the name of a position's rate parameter ("knot.east" -> "knot.east_rate")
RATE_SUFFIX = "_rate"
#: values of a parameter's ``per`` key: one value of the parameter per data file of a joint fit
_PER_VALUES = ("file",)
_NAME_RE = re.compile(r"[A-Za-z_][A-Za-z0-9_\-]*")


# -- where things are in the source text ----------------------------------------------------------


class _Locator:
    """Finds the line of a key in the TOML text (a plain scan; good enough for messages)."""

    def __init__(self, source=None, path=None):
        self.path = path
        self.lines = source.splitlines() if source is not None else None
        self.headers = []
        if self.lines is not None:
            self.headers = [i for i, s in enumerate(self.lines) if re.match(r"\s*\[\[\s*component\s*\]\]", s)]

    def line(self, component=None, key=None):
        if self.lines is None:
            return None
        if component is None:
            start, stop = 0, (self.headers[0] if self.headers else len(self.lines))
        elif component < len(self.headers):
            start = self.headers[component]
            stop = self.headers[component + 1] if component + 1 < len(self.headers) else len(self.lines)
        else:
            return None
        if key is not None:
            pat = re.compile(r"\s*(?:" + re.escape(key) + r'|"' + re.escape(key) + r'")\s*=')
            for i in range(start, stop):
                if pat.match(self.lines[i]):
                    return i + 1
        return start + 1 if component is not None else None

    def error(self, message, hint=None, component=None, key=None, name=None):
        where = []
        if self.path:
            where.append(str(self.path))
        n = self.line(component, key)
        if n is not None:
            where.append(f"line {n}")
        if name is not None:
            where.append(f"component '{name}'")
        elif component is not None:
            where.append(f"component #{component + 1}")
        if key is not None:
            where.append(f"key '{key}'")
        prefix = ", ".join(where)
        return ModelError(f"{prefix}: {message}" if prefix else message, hint)


def _is_number(x):
    return isinstance(x, (int, float)) and not isinstance(x, bool)


# -- reading ------------------------------------------------------------------------------------


def load_model(path):
    """Read a model file into a SkyModel (ModelError naming the line and key on any problem)."""
    from ..inputs import read_input_bytes

    path = os.fspath(path)
    try:
        raw = read_input_bytes(path, "model file")
    except UvfitError as exc:
        raise ModelError(exc.message, exc.hint) from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise ModelError(f"model file {path} is not UTF-8 text", "save it as a plain UTF-8 TOML file") from None
    return loads(text, path=path)


def loads(text, path=None):
    """A SkyModel from the text of a model file."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        where = f"{path}: " if path else ""
        raise ModelError(f"{where}TOML syntax error: {exc}", "see the README, 'Model files', for the format") from None
    except RecursionError:
        where = f"{path}: " if path else ""
        raise ModelError(
            f"{where}the model file is nested too deeply to read",
            "a model file holds [[component]] tables of numbers and small tables",
        ) from None
    try:
        return model_from_dict(data, source=text, path=path)
    except RecursionError:
        where = f"{path}: " if path else ""
        raise ModelError(
            f"{where}the model file is nested too deeply to use",
            "a model file holds [[component]] tables of numbers and small tables",
        ) from None


def build_model(components, angular_unit="mas", description=None):
    """A model from component specifications written as in a model file, e.g.
    ``build_model([{"name": "core", "shape": "gaussian", "flux": 1.0, "fwhm": 0.05}])``.
    Each value is a number (a free parameter started there) or a table
    ``{"value": .., "min": .., "max": .., "fixed": .., "tie": .., "prior": ..}``. Also
    ``SkyModel.build`` (alias ``SkyModel.from_components``)."""
    data = {
        "angular_unit": angular_unit if isinstance(angular_unit, str) else angular_unit.to_string(),
        "component": list(components),
    }
    if description:
        data["description"] = description
    return model_from_dict(data)


def model_from_dict(data, source=None, path=None):
    """A SkyModel from the parsed TOML (a dict), or from the same structure built in code."""
    loc = _Locator(source, path)
    if not isinstance(data, dict):
        raise loc.error("a model must be a table with 'angular_unit' and [[component]] entries")
    for key in data:
        if key not in _TOP_KEYS:
            raise loc.error(f"unknown top-level key '{key}'", "allowed: " + ", ".join(_TOP_KEYS), key=key)
    if "angular_unit" not in data:
        raise loc.error("the model has no angular_unit", 'add a line like angular_unit = "mas" at the top')
    if not isinstance(data["angular_unit"], str):
        raise loc.error("angular_unit must be a string", 'e.g. angular_unit = "mas"', key="angular_unit")
    try:
        unit, unit_text = angular_unit_of(data["angular_unit"])
    except ModelError as exc:
        raise loc.error(exc.message, exc.hint, key="angular_unit") from None
    description = data.get("description")
    if description is not None and not isinstance(description, str):
        raise loc.error("description must be a string", key="description")
    comps = data.get("component")
    if not comps:
        raise loc.error("the model has no components", "add at least one [[component]] table")
    if not isinstance(comps, list) or not all(isinstance(c, dict) for c in comps):
        raise loc.error("'component' must be an array of tables, one [[component]] per component", key="component")

    components, params, names = [], ParameterSet(), {}
    for i, table in enumerate(comps):
        comp, cparams = _component(table, i, loc, unit, names)
        components.append(comp)
        params.update(cparams)
        names[comp.name] = i
    _resolve_ties(params, names, loc)
    return SkyModel(components, params, angular_unit=unit_text, description=description)


def _component(table, i, loc, unit, names):
    name = table.get("name")
    if name is None:
        raise loc.error("the component has no name", 'add name = "..."', component=i)
    if not isinstance(name, str) or not _NAME_RE.fullmatch(name):
        raise loc.error(
            f"component name {name!r} is not a plain name",
            "use letters, digits, '_' or '-', starting with a letter (no dots)",
            component=i,
            key="name",
        )
    if name in names:
        raise loc.error(
            f"duplicate component name '{name}' (also component #{names[name] + 1})",
            "give every component its own name",
            component=i,
            key="name",
            name=name,
        )

    def err(message, hint=None, key=None):
        return loc.error(message, hint, component=i, key=key, name=name)

    key = table.get("shape")
    if key is None:
        raise err("the component has no shape", 'add shape = "..."; known: ' + ", ".join(SHAPES))
    if not isinstance(key, str) or key not in SHAPES:
        raise err(f"unknown shape {key!r}", "known shapes: " + ", ".join(SHAPES), key="shape")
    try:
        cls = shape_class(key)
    except (ImportError, AttributeError):
        raise err(f"shape '{key}' is not available in this installation", key="shape") from None

    setting_names = cls.accepted_settings(table)
    settings = {}
    for s in setting_names:
        if s in table:
            settings[s] = _setting(table[s], s, cls, err)
    try:
        shape = cls(**settings)
    except (ValueError, TypeError, UvfitError) as exc:
        text = exc.message if isinstance(exc, UvfitError) else str(exc)
        hint = exc.hint if isinstance(exc, UvfitError) else None
        bad = next((s for s in settings if s in text), None)
        raise err(text, hint, key=bad or (setting_names[0] if setting_names else "shape")) from None

    ref = None
    if "spectral_index" in table:
        if "reference_frequency" not in table:
            raise err(
                "a spectral_index needs a reference_frequency",
                'add e.g. reference_frequency = "230 GHz"',
                key="spectral_index",
            )
        ref = _frequency(table["reference_frequency"], err)
    elif "reference_frequency" in table:
        raise err(
            "reference_frequency is given but no spectral_index",
            "add spectral_index = ..., or remove reference_frequency",
            key="reference_frequency",
        )
    comp = Component(name, shape, reference_frequency=ref)

    allowed = ["name", "shape"] + setting_names + comp.parameter_names()
    for extra in ("spectral_index", "reference_frequency"):
        if extra not in allowed:
            allowed.append(extra)
    for k in table:
        if k not in allowed:
            raise err(f"unknown key '{k}'", f"allowed for shape '{key}': " + ", ".join(allowed), key=k)

    params = {}
    for local in comp.parameter_names():
        kind = comp.parameter_kind(local)
        params[f"{name}.{local}"] = _parameter(
            table.get(local), name, local, kind, unit, err, comp.default_bounds(local), comp.default_value(local)
        )
    values = {local: params[f"{name}.{local}"].value for local in comp.parameter_names()}
    for local, reason in comp.shape.invalid_values(values):
        raise err(f"{reason}: not a physical brightness", "correct the start values", key=local)
    return comp, _rate_parameters(params, unit)


def _setting(value, s, cls, err):
    default = cls.settings.get(s)
    if s == "member":
        if not isinstance(value, str) or value not in SHAPES or value == "double":
            raise err(
                f"unknown member shape {value!r}", "known: " + ", ".join(k for k in SHAPES if k != "double"), key=s
            )
        return value
    if isinstance(default, bool):
        ok = isinstance(value, bool)
    elif isinstance(default, int):
        ok = isinstance(value, int) and not isinstance(value, bool)
    elif isinstance(default, float):
        ok = _is_number(value)
    elif isinstance(default, str):
        ok = isinstance(value, str)
    else:
        ok = True
    if not ok:
        raise err(f"setting '{s}' must be of type {type(default).__name__}, got {value!r}", key=s)
    return value


def _frequency(value, err):
    key = "reference_frequency"
    if _is_number(value):
        hz = float(value)
    elif isinstance(value, str):
        try:
            q = un.Quantity(value)
        except (ValueError, TypeError):
            raise err(
                f"reference_frequency {value!r} is not a frequency astropy understands",
                'write e.g. "230 GHz" or a number in Hz',
                key=key,
            ) from None
        if not q.unit.is_equivalent(un.Hz):
            raise err(f"reference_frequency {value!r} is not a frequency", 'write e.g. "230 GHz"', key=key)
        hz = float(q.to_value(un.Hz))
    else:
        raise err("reference_frequency must be a number (Hz) or a string with a unit", key=key)
    if not (hz > 0 and math.isfinite(hz)):
        raise err(f"reference_frequency must be positive, got {value!r}", key=key)
    return hz


def _parameter(spec, cname, local, kind, unit, err, bounds, default):
    """A Parameter from its model-file entry ``spec``; ``default`` = (value, fixed) when the file
    may leave it out (``Component.default_value``), else None."""
    full = f"{cname}.{local}"
    dmin, dmax = bounds
    p = Parameter(name=full, value=math.nan, min=dmin, max=dmax, unit=kind_unit(kind, unit), kind=kind)
    if spec is None:
        if default is None:
            raise err(f"parameter '{local}' is missing", f"add {local} = <value> to the component")
        p.value, p.fixed = default
        return p
    if _is_number(spec):
        p.value = float(spec)
    elif isinstance(spec, dict):
        for k in spec:
            if k not in _PARAM_KEYS:
                raise err(
                    f"unknown key '{k}' in the table of '{local}'", "allowed: " + ", ".join(_PARAM_KEYS), key=local
                )
        for b in ("min", "max"):
            if b in spec:
                if not _is_number(spec[b]):
                    raise err(f"'{b}' of '{local}' must be a number, got {spec[b]!r}", key=local)
                setattr(p, b, float(spec[b]))
        if "fixed" in spec:
            if not isinstance(spec["fixed"], bool):
                raise err(f"'fixed' of '{local}' must be true or false", key=local)
            p.fixed = spec["fixed"]
        if "tie" in spec:
            tie = spec["tie"]
            if not isinstance(tie, str) or not tie:
                raise err(f"'tie' of '{local}' must be a parameter name like \"core.fwhm\"", key=local)
            p.tie = tie if "." in tie else f"{cname}.{tie}"
            if p.fixed:
                raise err(f"'{local}' is both fixed and tied", "keep one of 'fixed' and 'tie'", key=local)
        if "per" in spec:
            if spec["per"] not in _PER_VALUES:
                raise err(
                    f"'per' of '{local}' must be one of {', '.join(_PER_VALUES)}, got {spec['per']!r}",
                    'write per = "file" for one value per data file',
                    key=local,
                )
            if p.tie is not None:
                raise err(f"'{local}' is both tied and per file", "keep one of 'tie' and 'per'", key=local)
            p.per = spec["per"]
        if "rate" in spec or "epoch" in spec:
            _motion(spec, p, local, err)
        if "value" in spec:
            if not _is_number(spec["value"]):
                raise err(f"'value' of '{local}' must be a number, got {spec['value']!r}", key=local)
            p.value = float(spec["value"])
        elif p.tie is None:
            raise err(f"'{local}' has no value", f"write {local} = {{ value = ..., ... }}", key=local)
        if "prior" in spec:
            if p.tie is not None:
                raise err(
                    f"'{local}' is tied, so it takes the prior of the parameter it is tied to",
                    "remove 'prior' here, or give it to the parameter it is tied to",
                    key=local,
                )
            p.prior = _prior(spec["prior"], p, local, err)
    else:
        raise err(f"'{local}' must be a number or a table like {{ value = 1.0, min = 0.0 }}, got {spec!r}", key=local)
    if math.isnan(p.min) or math.isnan(p.max) or p.min > p.max:
        raise err(
            f"the minimum of '{local}' ({p.min!r}) is above its maximum ({p.max!r})",
            "swap them or correct one",
            key=local,
        )
    if p.tie is None:
        if not math.isfinite(p.value):
            raise err(f"the start value of '{local}' must be finite, got {p.value!r}", key=local)
        if not p.min <= p.value <= p.max:
            raise err(
                f"the start value {p.value!r} of '{local}' is outside its bounds [{p.min!r}, {p.max!r}]",
                "move the start value inside, or widen min/max",
                key=local,
            )
    return p


#: start values of the rates read, by the id of their position's Parameter (while one file is read)
_RATE_STARTS: dict[int, float] = {}


def _motion(spec, p, local, err):
    """A position's ``rate`` (angular unit per Julian year) and ``epoch`` (ISO date or MJD)."""
    if local not in _MOVING:
        raise err(f"'{local}' cannot have a rate", "only east and north move (rate, epoch)", key=local)
    if "rate" not in spec or "epoch" not in spec:
        raise err(f"'{local}' needs both a rate and an epoch", 'write rate = 0.1, epoch = "2020-01-01"', key=local)
    if not _is_number(spec["rate"]) or not math.isfinite(float(spec["rate"])):
        raise err(f"'rate' of '{local}' must be a finite number (per year), got {spec['rate']!r}", key=local)
    if p.tie is not None or spec.get("fixed") is True or spec.get("per") is not None:
        raise err(f"'{local}' has a rate, so it must be free and shared", "remove fixed, tie or per", key=local)
    epoch = spec["epoch"]
    try:
        from astropy.time import Time

        mjd = float(epoch) if _is_number(epoch) else float(Time(str(epoch), scale="utc").mjd)
    except ValueError:
        raise err(
            f"'epoch' of '{local}' is not a date: {epoch!r}", 'write e.g. epoch = "2020-01-01"', key=local
        ) from None
    if not math.isfinite(mjd):
        raise err(f"'epoch' of '{local}' must be finite", key=local)
    p.epoch = mjd
    _RATE_STARTS[id(p)] = float(spec["rate"])  # the rate parameter is made by _rate_parameters


def _rate_parameters(params, unit):
    """The rate parameter of every moving position, placed after it: {name: Parameter}."""
    out = {}
    for name, p in params.items():
        out[name] = p
        if p.epoch is None:
            continue
        rate_name = name + RATE_SUFFIX
        start = _RATE_STARTS.pop(id(p))
        out[rate_name] = Parameter(
            name=rate_name, value=start, unit=p.unit / un.yr, kind="rate", rate_of=name, note=f"{name} per year"
        )
    return out


def _prior(spec, p, local, err):
    try:
        if isinstance(spec, str):
            if spec == "uniform":
                return Uniform(p.min, p.max)
            if spec == "log_uniform":
                return LogUniform(p.min, p.max)
            raise err(
                f"unknown prior {spec!r} for '{local}'",
                'use "uniform", "log_uniform" (on min..max) or a table like { normal = [mean, sd] }',
                key=local,
            )
        if isinstance(spec, dict) and len(spec) == 1:
            ((kind, args),) = spec.items()
            if kind not in PRIORS:
                raise err(f"unknown prior '{kind}' for '{local}'", "known: " + ", ".join(PRIORS), key=local)
            if not (isinstance(args, list) and len(args) == 2 and all(_is_number(a) for a in args)):
                raise err(f"prior '{kind}' of '{local}' needs two numbers, e.g. {{ {kind} = [a, b] }}", key=local)
            return PRIORS[kind](*args)
    except ValueError as exc:
        raise err(f"bad prior for '{local}': {exc}", key=local) from None
    raise err(
        f"bad prior for '{local}'",
        'use "uniform", "log_uniform", or a one-key table like { normal = [mean, sd] }',
        key=local,
    )


def _resolve_ties(params, names, loc):
    for full, p in params.items():
        if p.tie is None:
            continue
        cname, local = full.split(".", 1)
        i = names.get(cname)

        def err(message, hint=None):
            return loc.error(message, hint, component=i, key=local, name=cname)  # noqa: B023 (called in this iteration only)

        if p.tie == full:
            raise err(f"'{local}' is tied to itself", "remove the tie")
        if p.tie not in params:
            raise err(
                f"'{local}' is tied to '{p.tie}', which does not exist",
                "tie to an existing 'component.parameter', e.g. " + ", ".join(list(params)[:4]),
            )
        seen, target = [full], p.tie
        while target is not None:
            if target in seen:
                raise err(
                    "the ties form a loop: " + " -> ".join(seen + [target]),
                    "tie every parameter to one that is not tied back",
                )
            seen.append(target)
            target = params[target].tie
        root = params[seen[-1]]
        if root.kind != p.kind:
            raise err(
                f"'{local}' ({p.kind}) is tied to '{root.name}' ({root.kind})",
                "tie only parameters of the same kind (a size to a size, ...)",
            )
        p.value = root.value
        if not p.min <= p.value <= p.max:
            raise err(
                f"'{local}' is tied to '{root.name}' = {root.value!r}, outside its own bounds [{p.min!r}, {p.max!r}]",
                "widen its bounds or change the start value",
            )


# -- writing ------------------------------------------------------------------------------------


def _toml_value(x):
    if isinstance(x, bool):
        return "true" if x else "false"
    if isinstance(x, int):
        return str(x)
    if isinstance(x, float):
        return _toml_float(x)
    return json.dumps(str(x))


def _parameter_text(p, bounds, rate=None):
    local = p.local
    dmin, dmax = bounds
    if p.free and p.prior is None and p.per is None and p.epoch is None and p.min == dmin and p.max == dmax:
        text = f"{local} = {_toml_float(p.value)}"
    else:
        items = [f"value = {_toml_float(p.value)}"]
        if p.min != dmin:
            items.append(f"min = {_toml_float(p.min)}")
        if p.max != dmax:
            items.append(f"max = {_toml_float(p.max)}")
        if p.fixed:
            items.append("fixed = true")
        if p.tie is not None and p.per is None:
            items.append(f"tie = {json.dumps(p.tie)}")
        if p.prior is not None:
            items.append(f"prior = {p.prior.to_toml()}")
        if p.per is not None:
            items.append(f"per = {json.dumps(p.per)}")
        if p.epoch is not None and rate is not None:
            items.append(f"rate = {_toml_float(rate)}")
            items.append(f"epoch = {_toml_float(p.epoch)}")
        text = f"{local} = {{ " + ", ".join(items) + " }"
    if p.note:
        text += "  # " + " ".join(str(p.note).split())
    return text


def model_to_toml(model):
    """The model as model-file text; loading it gives back an equal model."""
    out = [
        "# uvfit sky model",
        "# positions and sizes in the angular unit below; angles in degrees, north through east; fluxes in Jy",
    ]
    if model.description:
        out.append(f"description = {json.dumps(model.description)}")
    out.append(f"angular_unit = {json.dumps(model.angular_unit_text)}")
    for comp in model.components:
        out += ["", "[[component]]", f"name = {json.dumps(comp.name)}", f"shape = {json.dumps(comp.key)}"]
        for s, val in comp.shape.config.items():
            out.append(f"{s} = {_toml_value(val)}")
        if comp.reference_frequency is not None:
            out.append(f"reference_frequency = {_toml_float(comp.reference_frequency)}  # Hz")
        for local in comp.parameter_names():
            full = f"{comp.name}.{local}"
            rate = model.parameters.get(full + RATE_SUFFIX)
            out.append(
                _parameter_text(
                    model.parameters[full], comp.default_bounds(local), None if rate is None else rate.value
                )
            )
    return "\n".join(out) + "\n"


def save_model(model, path, force=False):
    """Write ``model_to_toml(model)`` to ``path`` atomically (refuses to overwrite unless
    ``force``). Also ``model.save(path, force)``."""
    return atomic_write(path, model_to_toml(model), force=force)


def _build(cls, components, angular_unit="mas", description=None):
    return build_model(components, angular_unit=angular_unit, description=description)


# the model's conveniences for files, provided here so that uvfit.sky.model needs no file code
SkyModel.build = classmethod(_build)  # type: ignore[attr-defined]  # attached here: sky.model has no file code
SkyModel.from_components = SkyModel.build  # type: ignore[attr-defined]  # same
SkyModel.to_toml = model_to_toml  # type: ignore[attr-defined]  # same
SkyModel.save = save_model  # type: ignore[attr-defined]  # same
