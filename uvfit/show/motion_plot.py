"""The figure of component motions: separation from the reference against time, with the fitted
linear motions (:mod:`uvfit.infer.motion`)."""

import numpy as np

from . import style


def motion_plot(out, title=None):
    """(Figure, numbers) of a motion record; numbers: {component: (times in years, separations)}."""
    from astropy.time import Time

    fig, ax = style.new_figure(figsize=(6.5, 4.2))
    unit = out.get("angular_unit") or ""
    t_ref = float(out["reference_epoch_mjd"])
    numbers = {}
    for k, (name, c) in enumerate(out["components"].items()):
        colour = f"C{k % 10}"
        e, n = np.asarray(c["east"]), np.asarray(c["north"])
        se, sn = np.asarray(c["east_error"]), np.asarray(c["north_error"])
        r = np.hypot(e, n)
        sr = np.sqrt((e * se) ** 2 + (n * sn) ** 2) / np.where(r > 0, r, 1.0)
        years = Time(np.asarray(c["epochs_mjd"]), format="mjd").jyear
        ax.errorbar(
            years, r, yerr=sr, fmt="o", color=colour, ms=4, label=f"{name}: {c['proper_motion']['value']:.3g} mas/yr"
        )
        mjd = np.linspace(min(c["epochs_mjd"]), max(c["epochs_mjd"]), 100)
        p0, v = c["position_at_reference_epoch"], c["velocity"]
        dt = (mjd - t_ref) / 365.25
        line = np.hypot(p0["east"] + v["east"] * dt, p0["north"] + v["north"] * dt)
        ax.plot(Time(mjd, format="mjd").jyear, line, "-", color=colour, lw=1)
        numbers[name] = (years, r)
    ax.set_xlabel("epoch (Julian year)")
    ax.set_ylabel(f"separation from {out['reference']} ({unit})")
    ax.set_title(title or "component separations and fitted linear motions")
    if out["components"]:
        ax.legend(fontsize="small")
    return fig, numbers


def write_motion_plot(out, path, force=False):
    """Write :func:`motion_plot` as PNG through :mod:`uvfit.outputs`."""
    fig, _ = motion_plot(out)
    try:
        style.save_png(fig, path, force=force)
    finally:
        style.close(fig)
