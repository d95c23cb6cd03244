"""The figure of station gains solved in a fit: amplitude and phase against time, per station.

Input: the ``gains`` record of a fit (:meth:`uvfit.stats.gains.GainStatistic.gain_record`, the
``gains`` key of the fit's JSON). Each gain is drawn at the middle of its interval, with the
interval's span as the horizontal bar and its 1-sigma error as the vertical one. Returns
``(figure, numbers)`` as every figure function (uvfit/show/plots.py).
"""

import numpy as np

from . import style


def gain_plot(record: dict, title: str | None = None):
    """(Figure, numbers): gain amplitude (top) and phase (bottom, deg) against hours UTC.

    ``numbers``: {station: {"hours", "amplitude", "amplitude_error", "phase_deg",
    "phase_error_deg"}} (lists), and ``day0`` (the MJD the hours count from).
    """
    table = record.get("table") or []
    stations = sorted({row["station"] for row in table})
    start = np.array([row["time_start_mjd"] for row in table], float)
    day0 = float(np.floor(start.min())) if start.size else 0.0
    show_phase = record.get("solved") != "amplitude"
    show_amp = record.get("solved") != "phase"
    panels = int(show_amp) + int(show_phase)
    fig, axes = style.new_figure(panels, 1, figsize=(8.6, 3.2 * panels + 0.6), sharex=True, squeeze=False)
    axes = axes[:, 0]
    numbers: dict = {"day0": day0, "stations": {}}
    with style.style():
        for k, name in enumerate(stations):
            rows = [r for r in table if r["station"] == name]
            t0 = (np.array([r["time_start_mjd"] for r in rows]) - day0) * 24.0
            t1 = (np.array([r["time_end_mjd"] for r in rows]) - day0) * 24.0
            mid, half = 0.5 * (t0 + t1), 0.5 * (t1 - t0)
            amp = np.array([r["amplitude"] for r in rows])
            amp_err = np.array([r["amplitude_error"] for r in rows])
            phase = np.array([r["phase_deg"] for r in rows])
            phase_err = np.array([r["phase_error_deg"] for r in rows])
            colour = style.CYCLE[k % len(style.CYCLE)]
            marker = style.MARKERS[(k // len(style.CYCLE)) % len(style.MARKERS)]
            opts = dict(linestyle="none", marker=marker, ms=3.5, color=colour, elinewidth=0.8, capsize=0)
            i = 0
            if show_amp:
                axes[0].errorbar(mid, amp, yerr=amp_err, xerr=half, label=name, **opts)
                i = 1
            if show_phase:
                axes[i].errorbar(mid, phase, yerr=phase_err, xerr=half, label=None if show_amp else name, **opts)
            numbers["stations"][name] = {
                "hours": mid.tolist(),
                "amplitude": amp.tolist(),
                "amplitude_error": amp_err.tolist(),
                "phase_deg": phase.tolist(),
                "phase_error_deg": phase_err.tolist(),
            }
        if show_amp:
            axes[0].axhline(1.0, color="0.5", lw=0.8)
            axes[0].set_ylabel("gain amplitude")
        if show_phase:
            axes[-1].set_ylabel("gain phase (deg)")
            axes[-1].set_ylim(-185, 185)
        axes[-1].set_xlabel(f"time (h UTC from MJD {day0:.0f})")
        interval = record.get("interval")
        per = "scan" if interval == "scan" else f"{interval:g} s"
        axes[0].set_title(title or f"station gains ({record.get('solved')}, one per station per {per})")
        fig.legend(loc="upper right", fontsize=7, ncol=max(1, int(np.ceil(len(stations) / 12))), frameon=False)
        fig.tight_layout(rect=(0, 0, 0.86, 1))
    return fig, numbers
