"""Scans and averaging intervals of a VisibilitySet.

A scan is a stretch of observing without a long gap. When the file gives scan numbers
(``vset.scan``, e.g. a Measurement Set's SCAN_NUMBER) they are used, and a scan is further cut
where a gap appears inside it; otherwise scans are found from gaps in time alone: a new scan
starts wherever consecutive distinct times (all rows, all baselines) are further apart than
``scan_gap`` seconds. Default gap: GAP_FACTOR times the median step between consecutive distinct
times (the integration), so a missing integration or two does not split a scan (common practice).

Intervals (for averaging closures): ``"scan"`` gives one interval per scan; a number of seconds
gives bins of that length counted from the start of each scan, never spanning two scans.
"""

from __future__ import annotations

import numpy as np

from ..errors import DataError

#: a gap longer than this many median integrations starts a new scan
GAP_FACTOR = 4.0


def check_scan_gap(scan_gap) -> float | None:
    """``scan_gap`` as seconds (None: the default rule), or a DataError naming the parameter."""
    if scan_gap is None:
        return None
    value = float(scan_gap)
    if not np.isfinite(value) or value <= 0:
        raise DataError(f"scan_gap must be a positive number of seconds, not {scan_gap}", "give e.g. scan_gap 60")
    return value


def check_interval(average):
    """``average`` as "scan", a positive number of seconds, or None; else a DataError."""
    if average is None or average == "":
        return None
    if isinstance(average, str):
        text = average.strip().lower()
        if text == "scan":
            return "scan"
        try:
            average = float(text.rstrip("s"))
        except ValueError:
            raise DataError(
                f"closure_average must be 'scan' or a number of seconds, not {average!r}",
                "give closure_average scan, or e.g. closure_average 300",
            ) from None
    value = float(average)
    if not np.isfinite(value) or value <= 0:
        raise DataError(
            f"closure_average must be 'scan' or a positive number of seconds, not {average}",
            "give closure_average scan, or e.g. closure_average 300",
        )
    return value


def default_gap(vset) -> float:
    """GAP_FACTOR times the median step (s) between consecutive distinct times (60 s for a
    single time)."""
    t = np.unique(vset.time)
    if t.size < 2:
        return 60.0
    return float(GAP_FACTOR * np.median(np.diff(t)) * 86400.0)


def scan_index(vset, scan_gap=None):
    """(scan number per row 0..n-1 in time order, gap in s, how): see the module docstring."""
    gap = check_scan_gap(scan_gap)
    gap = default_gap(vset) if gap is None else gap
    t = np.unique(vset.time)
    if t.size == 0:
        return np.zeros(0, int), gap, "no rows"
    breaks = np.concatenate([[False], np.diff(t) * 86400.0 > gap])
    by_time = np.cumsum(breaks)[np.searchsorted(t, vset.time)]
    has_file = np.any(vset.scan >= 0)
    if has_file:
        key = np.stack([vset.scan, by_time], 1)
        # number scans in order of their first time
        _, first, inv = np.unique(key, axis=0, return_index=True, return_inverse=True)
        order = np.argsort(vset.time[first], kind="stable")
        rank = np.empty_like(order)
        rank[order] = np.arange(order.size)
        how = f"the file's scan numbers, cut at gaps longer than {gap:.3g} s"
        return rank[np.ravel(inv)], gap, how
    return by_time.astype(int), gap, f"gaps in time longer than {gap:.3g} s"


def interval_index(vset, average, scan_gap=None):
    """(interval number per row, description) for ``average`` "scan" or seconds."""
    average = check_interval(average)
    if average is None:
        raise DataError("no averaging interval given", "give closure_average scan or a number of seconds")
    scan, gap, how = scan_index(vset, scan_gap)
    if average == "scan":
        return scan, f"one interval per scan (scans from {how})"
    start = np.full(scan.max() + 1 if scan.size else 0, np.inf)
    np.minimum.at(start, scan, vset.time)
    k = np.floor((vset.time - start[scan]) * 86400.0 / average + 1e-9).astype(int)
    key = np.stack([scan, k], 1)
    _, inv = np.unique(key, axis=0, return_inverse=True)
    return np.ravel(inv), f"bins of {average:g} s within scans (scans from {how})"


def scan_structure(vset, scan_gap=None) -> dict:
    """Number of scans, their median length (s), median rows per baseline per scan, how found."""
    good = vset.subset(~vset.flag) if np.any(vset.flag) else vset
    if good.n == 0:
        return {"n_scans": 0}
    scan, gap, how = scan_index(good, scan_gap)
    n = int(scan.max()) + 1
    t0 = np.full(n, np.inf)
    t1 = np.full(n, -np.inf)
    np.minimum.at(t0, scan, good.time)
    np.maximum.at(t1, scan, good.time)
    step = np.median(np.diff(np.unique(good.time))) * 86400.0 if np.unique(good.time).size > 1 else 0.0
    lengths = (t1 - t0) * 86400.0 + step
    a1, a2 = good.ant1, good.ant2
    lo, hi = np.minimum(a1, a2), np.maximum(a1, a2)
    key = np.stack([scan, lo, hi, good.channel], 1)
    _, counts = np.unique(key, axis=0, return_counts=True)
    return {
        "n_scans": n,
        "median_scan_length_s": float(np.median(lengths)),
        "median_rows_per_baseline_per_scan": float(np.median(counts)),
        "scan_gap_s": float(gap),
        "scans_from": how,
    }
