"""Readers of uvfit's own output files: fit, posterior and comparison JSON, chains, models.

Each reader checks that the file is what it claims to be and raises :class:`UvfitError` naming the
file and the fix otherwise. The model is rebuilt from the fit's own ``model_toml`` text, so that a
figure shows exactly the model that was fitted, and the data are selected as the fit recorded.
"""

import json
import math
import os
from dataclasses import dataclass

import numpy as np

from ..data.select import SELECTION_OPTIONS, read_selected
from ..errors import ModelError, UvfitError

#: keys every fit output (``uvfit fit --json``) has
FIT_KEYS = ("parameters", "statistics", "model_toml")
#: selection options a fit records and a command may override
SELECTION_KEYS = SELECTION_OPTIONS


def read_json(path, what):
    """The JSON object in ``path``; ``what`` names the kind of file in the messages."""
    from ..inputs import MAX_JSON_BYTES, read_input_bytes

    path = os.fspath(path)
    if not os.path.exists(path):
        raise UvfitError(f"{what} file {path} does not exist", "check the path")
    raw = read_input_bytes(path, f"{what} file", MAX_JSON_BYTES)
    try:
        obj = json.loads(raw.decode("utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise UvfitError(
            f"{what} file {path} is not valid JSON ({exc})", f"give the JSON written by the command that makes a {what}"
        ) from None
    except RecursionError:
        raise UvfitError(
            f"{what} file {path} is nested too deeply to read",
            f"give the JSON written by the command that makes a {what}",
        ) from None
    if not isinstance(obj, dict):
        raise UvfitError(
            f"{what} file {path} does not hold a JSON object",
            f"give the JSON written by the command that makes a {what}",
        )
    return obj


def finite_number(value):
    """True for an int or float (not a bool) that is finite as a float."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return False
    try:
        return math.isfinite(float(value))
    except OverflowError:
        return False


def _check_selection(fit, path):
    """Refuse a recorded selection whose values could not come from a fit."""
    recorded = fit.get("selection")
    if recorded is None:
        return
    if not isinstance(recorded, dict):
        raise UvfitError(f"fit file {path}: its recorded selection is not a table", "give the unchanged fit JSON")
    for key in ("min_uv", "max_uv", "average"):
        value = recorded.get(key)
        if value is not None and not finite_number(value):
            raise UvfitError(
                f"fit file {path}: its recorded selection {key} = {value!r} is not a finite number",
                "give the unchanged fit JSON",
            )
    for key in ("stations", "exclude_stations", "channels"):
        value = recorded.get(key)
        if value is not None and not isinstance(value, (str, list)):
            raise UvfitError(
                f"fit file {path}: its recorded selection {key} = {value!r} is not text", "give the unchanged fit JSON"
            )
    times = recorded.get("time_range")
    if times is not None and (
        not isinstance(times, list) or len(times) != 2 or not all(isinstance(t, (str, int, float)) for t in times)
    ):
        raise UvfitError(
            f"fit file {path}: its recorded selection time_range = {times!r} is not two times",
            "give the unchanged fit JSON",
        )


def load_fit(path):
    """A fit output written by ``uvfit fit --json``, checked for the keys the figures need."""
    fit = read_json(path, "fit")
    missing = [k for k in FIT_KEYS if k not in fit]
    bad_params = not isinstance(fit.get("parameters"), dict) or not all(
        isinstance(p, dict) and "value" in p for p in fit.get("parameters", {}).values()
    )
    if missing or bad_params or not isinstance(fit.get("model_toml"), str):
        what = f"it lacks {', '.join(missing)}" if missing else "its parameters or model are malformed"
        raise UvfitError(
            f"{path} is not a fit output ({what})", "give the file written by 'uvfit fit ... --json FIT.json'"
        )
    _check_selection(fit, path)
    return fit


def load_posterior(path):
    """A posterior summary written by ``uvfit sample --json``."""
    post = read_json(path, "posterior")
    params = post.get("parameters")
    if (
        not isinstance(params, dict)
        or not params
        or not all(isinstance(p, dict) and "median" in p for p in params.values())
    ):
        raise UvfitError(
            f"{path} is not a posterior summary (no parameters with medians)",
            "give the JSON written by 'uvfit sample ... --json'",
        )
    for name, entry in params.items():
        for key, value in entry.items():
            if key in ("median", "mean", "std", "lower", "upper", "lower_95", "upper_95", "max_posterior") and not (
                value is None or finite_number(value)
            ):
                raise UvfitError(
                    f"posterior file {path}: {key} of {name} is {value!r}, not a finite number",
                    "give the unchanged JSON written by 'uvfit sample ... --json'",
                )
    if post.get("converged") not in (None, True, False):
        raise UvfitError(
            f"posterior file {path}: 'converged' is {post['converged']!r}, not true or false",
            "give the unchanged JSON written by 'uvfit sample ... --json'",
        )
    return post


def load_compare(path):
    """A model comparison written by ``uvfit compare --json``."""
    comp = read_json(path, "comparison")
    if "models" not in comp and "verdict" not in comp:
        raise UvfitError(
            f"{path} is not a model comparison (no models, no verdict)",
            "give the JSON written by 'uvfit compare ... --json'",
        )
    models = comp.get("models", [])
    if not isinstance(models, list) or not all(isinstance(m, dict) and isinstance(m.get("name"), str) for m in models):
        raise UvfitError(
            f"comparison file {path}: 'models' is not a list of named models",
            "give the unchanged JSON written by 'uvfit compare ... --json'",
        )
    if not isinstance(comp.get("verdict", ""), str) or not isinstance(comp.get("preferred", ""), (str, type(None))):
        raise UvfitError(
            f"comparison file {path}: 'verdict' or 'preferred' is not text",
            "give the unchanged JSON written by 'uvfit compare ... --json'",
        )
    return comp


def chain_settings(posterior):
    """(discard, thin) recorded in a posterior summary (0 and 1 where it records none)."""
    posterior = posterior or {}
    discard = posterior.get("discard", posterior.get("burn_in", 0)) or 0
    thin = posterior.get("thin", 1) or 1
    return int(discard), max(1, int(thin))


def read_chain(path, discard=0, thin=1):
    """Flat posterior samples (n, n_parameters) from a chain file (see
    :func:`uvfit.infer.sampling.chainfile.read_chain`)."""
    from ..infer.sampling.chainfile import read_chain as read_chain_file

    return read_chain_file(path, discard=discard, thin=thin)


# --------------------------------------------------------------------------- the model


def model_from_text(text, path=None):
    """A SkyModel from TOML text (the fit's ``model_toml``)."""
    from ..sky.modelfile import loads

    return loads(text, path=path)


def model_from_fit(fit, path=None):
    """The fitted model: the fit's ``model_toml`` with the fitted values of its free parameters.

    The one reader of a fit result's model (the figures, the report, the closure check).
    """
    try:
        model = model_from_text(fit["model_toml"], path=path)
    except UvfitError as exc:
        where = f"{path}: " if path else ""
        message = exc.message
        if path and message.startswith(f"{path}: "):
            message = message[len(path) + 2 :]
        raise UvfitError(f"{where}the model recorded in the fit cannot be rebuilt: {message}", exc.hint) from None
    files = fit.get("data")
    if isinstance(files, list) and files and any(p.per == "file" for p in model.parameters.values()):
        times = [f.get("time_mean_mjd") for f in fit.get("files") or [] if isinstance(f, dict)]
        known = model.rate_names() and len(times) == len(files) and all(finite_number(t) for t in times)
        # the copies per file the fit had (and each file's time, for moving positions)
        model = model.for_files([str(f) for f in files], times=[float(t) for t in times] if known else None)
    params = fit.get("parameters", {})
    names = list(model.free_names)
    if names and isinstance(params, dict) and all(n in params for n in names):
        values = []
        for n in names:
            entry = params[n]
            value = entry.get("value") if isinstance(entry, dict) else None
            if not finite_number(value):
                where = f"{path}: " if path else ""
                raise UvfitError(
                    f"{where}the fitted value of {n} is {value!r}, not a finite number",
                    "give the unchanged JSON written by 'uvfit fit --json'",
                )
            values.append(float(value))
        model.set_free(np.array(values))
    return model


def load_model_or_fit(path):
    """(model, info) from a model file (.toml) or a fit result (.json with ``model_toml``).

    ``info`` records where the model came from: ``{"model_from": "model file"}``, or for a fit
    result ``{"model_from": "fit result", "fit_mode", "fit_systematic"}``.
    """
    path = os.fspath(path)
    if not os.path.exists(path):
        raise UvfitError(
            f"model file {path} does not exist",
            "give a model file (.toml) or a fit result (.json written by uvfit fit --json)",
        )
    if path.lower().endswith(".json"):
        from ..inputs import MAX_JSON_BYTES, read_input_bytes

        raw = read_input_bytes(path, "fit file", MAX_JSON_BYTES)
        try:
            doc = json.loads(raw.decode("utf-8"))
        except RecursionError:
            raise ModelError(
                f"{path} is nested too deeply to read", "give the JSON written by uvfit fit --json"
            ) from None
        except (OSError, ValueError) as exc:
            raise ModelError(
                f"{path} is not a readable JSON file ({exc})",
                "give the JSON written by uvfit fit --json, or a model file (.toml)",
            ) from None
        text = doc.get("model_toml") if isinstance(doc, dict) else None
        if not text:
            raise ModelError(
                f"{path} holds no best-fit model (no 'model_toml' key)",
                "give the JSON written by uvfit fit --json, or a model file (.toml)",
            )
        return model_from_fit(doc, path=path), {
            "model_from": "fit result",
            "fit_mode": doc.get("mode"),
            "fit_systematic": doc.get("systematic"),
            "fit": doc,
        }
    from ..sky.modelfile import load_model

    return load_model(path), {"model_from": "model file"}


def merged_selection(fit, options):
    """The fit's recorded selection, each key overridden by a command option that was given."""
    recorded = fit.get("selection") or {}
    if not isinstance(recorded, dict):
        recorded = {}
    out = {k: recorded.get(k) for k in SELECTION_KEYS}
    for k, v in (options or {}).items():
        if v not in (None, (), ""):
            out[k] = v
    if out.get("time_range") is not None:
        out["time_range"] = tuple(out["time_range"])
    return {k: v for k, v in out.items() if v not in (None, (), "", [])}


@dataclass
class FitView:
    """The data as the fit saw them, the fitted model and its visibilities at the data's (u, v)."""

    vset: object
    model: object
    model_vis: np.ndarray
    fit: dict
    selection: dict

    @property
    def angular_unit(self):
        return self.fit.get("angular_unit") or getattr(self.model, "angular_unit", None) or "mas"

    @property
    def systematic(self):
        """The fit's systematic floor (fraction of |V| added to each sigma in quadrature)."""
        value = self.fit.get("systematic") or 0.0
        return float(value) if isinstance(value, (int, float)) else 0.0

    @property
    def mode(self):
        return self.fit.get("mode") or "unknown"

    @property
    def phase_note(self):
        """A sentence for the radial figure when the fit did not use the visibility phases."""
        if self.mode in ("closure", "closure_phase", "closure_amplitude", "amplitude", "hybrid"):
            note = (
                f"Fitted in {self.mode} mode: the visibility phases were not fitted (absolute "
                "position free, station phases uncalibrated), so phase residuals are expected."
            )
            flux = self.flux_note
            return note + (" " + flux if flux else "")
        return None

    @property
    def flux_note(self):
        """A sentence when the fit's mode did not measure the flux (figures use the estimate)."""
        from ..infer.fluxscale import figure_note

        return figure_note(self.fit)


def fit_view(vset, fit, selection=None):
    """Build a :class:`FitView` from the selected data and a fit output dict."""
    from ..infer.fluxscale import scaled_model

    model = scaled_model(model_from_fit(fit), fit)
    model_vis = np.asarray(model.visibilities(vset.u, vset.v, vset.frequency), dtype=complex)
    return FitView(vset=vset, model=model, model_vis=model_vis, fit=fit, selection=selection or {})


def open_fit_view(data_path, fit_path, options=None):
    """Read data and fit, apply the fit's selection (overridden by ``options``).

    Returns (FitView, notes), notes being the selection's messages for the user.
    """
    fit = load_fit(fit_path)
    fit_path = os.fspath(fit_path)
    model_from_fit(fit, path=fit_path)  # refuse a damaged fit (naming the file) before reading the data
    selection = merged_selection(fit, options)
    vset, notes = read_selected(data_path, selection, good=False)
    reasons = vset.meta.get("flagged_reasons") or {}
    if reasons:
        notes.append(
            f"note: {os.path.basename(os.fspath(data_path))}: rows flagged on reading and not shown: "
            + "; ".join(f"{k}: {n}" for k, n in reasons.items())
        )
    fitted = fit.get("data")
    if fitted and os.path.basename(str(fitted)) != os.path.basename(os.fspath(data_path)):
        notes.append(
            f"note: the fit was made on {os.path.basename(str(fitted))}, the figures show "
            f"{os.path.basename(os.fspath(data_path))}"
        )
    return fit_view(vset.good(), fit, selection), notes


def order_chain(samples, model, posterior):
    """Relabel swappable components in raw chain samples by the rule the posterior recorded.

    The sampler's summaries are of ordered samples (brightest first, or nearest first); the chain
    file holds them unordered, so the corner plot applies the same rule to match the table.
    """
    ordering = (posterior or {}).get("ordering")
    if not isinstance(ordering, dict) or not (ordering.get("groups") or ordering.get("anchored")):
        return samples
    if samples.shape[1] != len(model.free_names):
        return samples
    from ..infer.posterior import order_samples

    return order_samples(model, samples, ordering.get("rule", "flux"), movable=ordering.get("movable", ()))[0]
