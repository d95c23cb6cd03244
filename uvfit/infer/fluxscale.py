"""The flux scale when the fitting mode cannot measure it (closure phases, closure amplitudes).

Closure quantities are unchanged when every flux is multiplied by one factor, so a closure fit
keeps the total flux at its start value: fluxes in Jy and brightness temperatures would then be
the user's guess. This module says so, and gives a separate, stated estimate: the factor s that
best matches the fitted model's amplitudes to the measured ones on the shortest baselines,

    s = sum w |V| |M| / sum w |M|^2,  w = 1 / sigma^2,

(weighted least squares of |V| = s |M|, common practice), its error the formal one
1 / sqrt(sum w |M|^2) times sqrt(chi2 / (n - 1)) when the scatter exceeds the noise (station gain
errors do). Absolute quantities are then given twice: as fitted (marked "not measured") and
times s (``from_flux_scale``).
"""

from __future__ import annotations

import numpy as np

#: the fraction of rows, shortest uv distance first, used for the flux scale
SHORTEST_FRACTION = 0.25
NOT_MEASURED = "not measured"


def mode_measures_flux(result):
    """False when the fitter fixed a flux because the mode cannot see the flux scale."""
    fluxes = set(result.model.flux_names().values())
    return not any(name in fluxes for name in result.fixed_by_fitter)


def flux_scale(vset, model, fraction=SHORTEST_FRACTION):
    """The flux-scale estimate (a dict) of ``model`` from the amplitudes of ``vset``'s shortest
    rows (the ``fraction`` of rows of smallest uv distance, at least 3)."""
    vs = vset.good()
    q = vs.uv_distance
    n = max(3, int(np.ceil(fraction * vs.n)))
    order = np.argsort(q, kind="stable")[:n]
    sub = vs.subset(np.isin(np.arange(vs.n), order))
    m = np.abs(np.asarray(model.visibilities(sub.u, sub.v, sub.frequency)))
    a = np.abs(sub.vis)
    w = 1.0 / sub.sigma**2
    den = float(np.sum(w * m * m))
    s = float(np.sum(w * a * m) / den) if den > 0 else float("nan")
    formal = 1.0 / np.sqrt(den) if den > 0 else float("nan")
    chi2 = float(np.sum(w * (a - s * m) ** 2))
    inflate = max(1.0, np.sqrt(chi2 / (sub.n - 1))) if sub.n > 1 else 1.0
    total = float(np.abs(model.visibilities(np.zeros(1), np.zeros(1), np.full(1, float(np.mean(sub.frequency))))[0]))
    err = float(formal * inflate)
    return {
        "scale": s,
        "scale_error": err,
        "model_total_flux_jy": total,
        "total_flux_jy": s * total,
        "total_flux_error_jy": err * total,
        "n_rows": int(sub.n),
        "max_uv_wavelengths": float(q[order].max()),
        "baselines": sorted(set(map(str, sub.baseline_labels))),
        "reduced_chi2": chi2 / (sub.n - 1) if sub.n > 1 else float("nan"),
        "method": f"|V| = s |M| by weighted least squares on the {100 * fraction:g}% shortest rows",
    }


def annotate(out, result):
    """Mark the absolute quantities of a fit record ``out`` when the mode did not measure the
    flux: key ``flux_scale``, ``measured`` false and ``from_flux_scale`` on every flux parameter
    and derived quantity in Jy or K, and a notice first. Returns the flux-scale dict or None."""
    if mode_measures_flux(result):
        out["flux_scale"] = {"measured_by_mode": True}
        return None
    est = flux_scale(result.statistic.vset, result.model)
    est["measured_by_mode"] = False
    out["flux_scale"] = est
    s, e = est["scale"], est["scale_error"]
    fluxes = set(result.model.flux_names().values())
    for name, p in out["parameters"].items():
        if name in fluxes or (p.get("unit") == "Jy"):
            _mark(p, s, e)
    for d in out.get("derived", {}).values():
        if isinstance(d, dict) and d.get("unit") in ("Jy", "K"):
            _mark(d, s, e)
    names = ", ".join(est["baselines"][:6]) + (" ..." if len(est["baselines"]) > 6 else "")
    out["notices"].insert(
        0,
        (
            f"the {out.get('mode')} mode does not measure the total flux: fluxes (Jy) and brightness "
            f"temperatures are {NOT_MEASURED} (they follow the start value); the amplitudes of the "
            f"{est['n_rows']} shortest rows (up to {est['max_uv_wavelengths']:.3g} wavelengths; "
            f"{names}) give a flux scale {s:.4g} +/- {e:.2g}, a total flux of "
            f"{est['total_flux_jy']:.4g} +/- {est['total_flux_error_jy']:.2g} Jy (key flux_scale)"
        ),
    )
    return est


def _mark(entry, s, e):
    entry["measured"] = False
    value = entry.get("value")
    if isinstance(value, (int, float)) and np.isfinite(value):
        entry["from_flux_scale"] = float(value * s)
        err = entry.get("error")
        rel = (err / value) if isinstance(err, (int, float)) and value else 0.0
        entry["from_flux_scale_error"] = float(
            abs(value * s) * np.hypot(rel if np.isfinite(rel) else 0.0, e / s if s else 0.0)
        )
    for key in ("upper_limit", "lower_limit"):
        if isinstance(entry.get(key), (int, float)):
            entry[f"{key}_from_flux_scale"] = float(entry[key] * s)


def scaled_model(model, fit):
    """A copy of ``model`` with every free or fixed (untied) flux times the fit's flux scale, when
    the fit says its mode did not measure the flux; else ``model`` itself. (For the figures.)"""
    fs = fit.get("flux_scale") or {}
    if fs.get("measured_by_mode", True) or not np.isfinite(fs.get("scale", np.nan)):
        return model
    out = model.copy()
    for name in out.flux_names().values():
        p = out.parameters[name]
        if p.tie is None:
            p.value = float(p.value) * float(fs["scale"])
    return out


def figure_note(fit):
    """A sentence for figures of a fit whose mode did not measure the flux, or None."""
    fs = fit.get("flux_scale") or {}
    if fs.get("measured_by_mode", True):
        return None
    return (
        f"Fluxes scaled to the amplitude estimate {fs['total_flux_jy']:.3g} +/- "
        f"{fs['total_flux_error_jy']:.2g} Jy (the {fs['n_rows']} shortest rows); the "
        f"{fit.get('mode')} fit itself does not measure the flux."
    )
