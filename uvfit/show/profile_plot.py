"""The figure of a profile likelihood: delta chi2 against the parameter, with the 68% and 95%
levels (delta chi2 = 1 and 3.84, Wilks 1938) and the intervals they give."""

import numpy as np

from . import style
from .style import DATA_COLOUR, MODEL_COLOUR


def profile_plot(prof, title=None):
    """(Figure, numbers) of a profile dict (:func:`uvfit.infer.profile.profile`).

    numbers: ``grid``, ``delta_chi2``, ``levels`` {name: delta chi2}, ``interval_68``,
    ``interval_95``.
    """
    g = np.asarray(prof["grid"], float)
    d = np.asarray(prof["chi2"], float) - float(prof["chi2_min"])
    fig, ax = style.new_figure(figsize=(6.0, 4.0))
    ax.plot(g, d, "-o", color=DATA_COLOUR, ms=3, label="profile")
    levels = {"68%": 1.0, "95%": 3.841458820694124}
    for (label, level), ls in zip(levels.items(), ("--", ":")):
        ax.axhline(level, color=MODEL_COLOUR, ls=ls, lw=1, label=f"delta chi2 = {level:.3g} ({label})")
    for lo, hi in prof["interval_68"]:
        ax.axvspan(lo, hi, color=MODEL_COLOUR, alpha=0.12)
    ax.axvline(prof["best"], color="k", lw=0.8)
    unit = prof.get("unit") or ""
    ax.set_xlabel(f"{prof['parameter']}" + (f" ({unit})" if unit else ""))
    ax.set_ylabel("delta chi2 (others refitted)")
    finite = d[np.isfinite(d)]
    top = min(float(finite.max()) if finite.size else 10.0, 25.0)
    ax.set_ylim(-0.3, max(top, 5.0))
    note = "unconstrained over this range" if prof.get("unconstrained") else None
    ax.set_title(title or (f"profile of {prof['parameter']}" + (f": {note}" if note else "")))
    ax.legend(fontsize="small", loc="upper center")
    numbers = {
        "grid": g,
        "delta_chi2": d,
        "levels": levels,
        "interval_68": prof["interval_68"],
        "interval_95": prof["interval_95"],
    }
    return fig, numbers


def write_profile_plot(prof, path, force=False):
    """Write :func:`profile_plot` as PNG through :mod:`uvfit.outputs`."""
    fig, _ = profile_plot(prof)
    try:
        style.save_png(fig, path, force=force)
    finally:
        style.close(fig)
