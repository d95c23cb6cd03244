"""Do the visibility phases look calibrated? Two model-free tests, and the mode to use instead.

1. Short baselines. The visibility of any source tends to its total flux, a positive real
   number, as the baseline shrinks (V(0) = integral of the brightness), so on the shortest
   baselines a calibrated source near the phase centre has phases near zero. Taken: the rows on
   baselines within one site (:mod:`uvfit.data.sites`) when there are any, else the shortest
   SHORT_FRACTION of the rows by uv distance. Their mean resultant length R = |mean exp(i phi)|
   (1 for equal phases, about 1/sqrt(n) for random ones; Mardia & Jupp 2000, ch. 2) and the
   median |phi|: phases count as uncalibrated when R < R_LIMIT or the median |phi| exceeds
   PHASE_LIMIT_DEG.
2. Scatter in time. Within a scan, the phase difference of consecutive integrations on one
   baseline has the thermal spread sqrt(1/SNR_1^2 + 1/SNR_2^2) (rad, at SNR above a few; common
   practice). The robust spread (1.4826 median absolute value) of the differences in units of
   that expectation, over pairs with an expectation below 0.5 rad, is near 1 for stable phases;
   above SCATTER_LIMIT the phases wander faster than the noise (atmosphere, no phase
   calibration).

Either failing gives ``calibrated`` False and a hint naming the closure modes. Caution: a source
far from the phase centre, or with most of its flux in structure resolved on the shortest
baselines, can fail test 1 with calibrated phases; test 2 cannot see phase errors that stay
constant over a scan.
"""

from __future__ import annotations

import numpy as np

#: the fraction of rows, shortest first, taken as short baselines when there is no site
SHORT_FRACTION = 0.1
#: least mean resultant length of the short-baseline phases for calibrated phases
R_LIMIT = 0.5
#: largest median |phase| (deg) on the short baselines for calibrated phases
PHASE_LIMIT_DEG = 30.0
#: largest robust spread of consecutive phase differences, in thermal units
SCATTER_LIMIT = 3.0


def phase_calibration(vset) -> dict:
    """The two tests of the module docstring on the unflagged rows: a JSON-ready dict with
    ``calibrated`` (True, False, or None when neither test could be made), the numbers behind it,
    ``verdict`` (words) and ``hint`` (what to use instead, when not calibrated)."""
    from ..data.scans import scan_index
    from ..data.sites import find_sites, same_site_rows

    vs = vset.good() if np.any(vset.flag) else vset
    out: dict = {"calibrated": None}
    if vs.n < 3:
        out["verdict"] = "too few rows to test the phases"
        return out
    a1, a2 = vs.ant1, vs.ant2
    cross = a1 != a2
    lo, hi = np.minimum(a1, a2), np.maximum(a1, a2)
    phase = np.angle(np.where(a1 <= a2, vs.vis, np.conj(vs.vis)))
    snr = np.abs(vs.vis) / vs.sigma
    # 1. short baselines
    sites = find_sites(vs)
    within = same_site_rows(vs, sites) if (sites.groups and not sites.one_site) else np.zeros(vs.n, bool)
    if np.count_nonzero(within) >= 3:
        short, short_from = within, "baselines within one site"
    else:
        q = np.where(cross, vs.uv_distance, np.inf)
        short = cross & (q <= np.quantile(q[cross], SHORT_FRACTION))
        short_from = f"the shortest {SHORT_FRACTION:.0%} of the rows by uv distance"
    fails = []
    if np.count_nonzero(short) >= 3:
        r = float(np.abs(np.mean(np.exp(1j * phase[short]))))
        med = float(np.degrees(np.median(np.abs(phase[short]))))
        out["short_baselines"] = {"rows": int(np.count_nonzero(short)), "from": short_from}
        out["short_baseline_mean_resultant"] = r
        out["short_baseline_median_abs_phase_deg"] = med
        if r < R_LIMIT or med > PHASE_LIMIT_DEG:
            fails.append(
                f"on {short_from} the phases are not near 0 (median |phase| {med:.0f} deg, mean resultant "
                f"length {r:.2f}; calibrated data of a source near the phase centre give about 0 deg and 1)"
            )
    # 2. scatter in time
    scan, _, _ = scan_index(vs)
    order = np.lexsort((vs.time, scan, vs.channel, hi, lo))
    key = np.stack([lo, hi, vs.channel, scan], 1)[order]
    same = np.all(key[1:] == key[:-1], axis=1) & cross[order][1:]
    with np.errstate(divide="ignore", invalid="ignore"):
        d = np.angle(np.exp(1j * np.diff(phase[order])))[same]
        expect = np.sqrt(1.0 / snr[order][1:] ** 2 + 1.0 / snr[order][:-1] ** 2)[same]
    good = np.isfinite(expect) & (expect < 0.5)
    if np.count_nonzero(good) >= 10:
        spread = float(1.4826 * np.median(np.abs(d[good] / expect[good])))
        out["time_scatter_ratio"] = spread
        out["time_scatter_pairs"] = int(np.count_nonzero(good))
        if spread > SCATTER_LIMIT:
            fails.append(
                f"consecutive phases on a baseline differ by {spread:.3g} times their thermal spread "
                "(phases wander in time)"
            )
    tested = "short_baseline_mean_resultant" in out or "time_scatter_ratio" in out
    if not tested:
        out["verdict"] = "the phases could not be tested (too few short-baseline rows and consecutive pairs)"
        return out
    out["calibrated"] = not fails
    if fails:
        out["verdict"] = "the phases look uncalibrated: " + "; ".join(fails)
        out["hint"] = (
            out["verdict"] + ". A fit of the complex visibilities would fit these phase errors: use mode "
            "closure (closure phases and log closure amplitudes, immune to station gains), or mode hybrid "
            "when the amplitudes are calibrated"
        )
    else:
        out["verdict"] = "the phases look calibrated (near 0 on the short baselines, stable in time)"
    return out
