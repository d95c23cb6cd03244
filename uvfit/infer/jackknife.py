"""Delete-one-group jackknife: refit with each station, scan or channel left out.

The jackknife error of a quantity theta is sqrt((n - 1)/n * sum_i (theta_i - mean)^2) over the n
leave-one-group-out fits (Efron & Tibshirani 1993, An Introduction to the Bootstrap, ch. 11). It
measures the spread from which data are kept (a station with bad gains, a bad scan), which the
formal (curvature) errors do not see. Groups that share rows (each baseline belongs to two
stations) remove more than 1/n of the data each, so the factor (n - 1)/n becomes the delete-d one,
(1 - f)/(f n) with f the mean fraction of rows a group removes (Shao & Wu 1989, Ann. Stat. 17,
1176); for disjoint groups of equal size f = 1/n and it is (n - 1)/n again. Angles are differenced on their circle (the model's periods).
"""

from __future__ import annotations

import numpy as np

from ..errors import FitError, UvfitError
from .derived import derived_periods, quantities_at
from .lsq import fit
from .parallel import run_pieces

#: the jackknife error counts as larger than the formal one above this ratio
FLAG_RATIO = 1.5
GROUPINGS = ("station", "scan", "channel")


def scan_numbers(vset, gap_factor=5.0):
    """Scan number per row: ``vset.meta["scan"]`` when it has one per row, else new scans where
    the time between consecutive distinct times exceeds ``gap_factor`` times their median step."""
    scan = vset.meta.get("scan") if isinstance(vset.meta, dict) else None
    if scan is not None and np.size(scan) == vset.n:
        _, idx = np.unique(np.asarray(scan), return_inverse=True)
        return idx, "the data's scan numbers"
    times = np.unique(vset.time)
    if times.size < 2:
        return np.zeros(vset.n, int), "one time only"
    step = np.diff(times)
    gap = gap_factor * np.median(step)
    starts = np.concatenate([[0], np.cumsum(step > gap)])
    return starts[np.searchsorted(times, vset.time)], f"gaps in time longer than {gap_factor:g} x the median step"


def groups(vset, by):
    """[(label, mask of rows kept)] for leaving out each group, and how the groups were found."""
    if by not in GROUPINGS:
        raise UvfitError(f"unknown grouping by '{by}'", "use station, scan or channel")
    if by == "station":
        names = sorted(set(vset.station1) | set(vset.station2))
        s1, s2 = np.asarray(vset.station1), np.asarray(vset.station2)
        return [(str(n), (s1 != n) & (s2 != n)) for n in names], "stations"
    if by == "scan":
        scan, how = scan_numbers(vset)
        return [(f"scan {k}", scan != k) for k in np.unique(scan)], how
    ch = np.asarray(vset.channel)
    return [(f"channel {k}", ch != k) for k in np.unique(ch)], "channels"


def _wrapped(x, ref, period):
    if period:
        return ref + (x - ref + 0.5 * period) % period - 0.5 * period
    return x


def _leave_out(shared, group):
    """One refit without one group: (entry, values or None, derived quantities or None)."""
    best, names, frequency, redshift, seed, starts = shared
    label, keep = group
    entry = {"left_out": label, "n_rows": int(np.count_nonzero(keep))}
    try:
        sub = best.statistic.vset.subset(keep)
        stat = best.statistic.rebuilt(best.model.copy(), vset=sub)
        res = fit(stat, starts=starts, seed=seed, strict=False)
        if list(res.names) != names:
            raise FitError("the free parameters changed without this group")
    except (UvfitError, ValueError) as exc:
        entry["error"] = str(exc)
        return entry, None, None
    entry.update(
        {
            "chi2": float(res.chi2),
            "converged": bool(res.converged),
            "values": dict(zip(names, map(float, res.values))),
        }
    )
    d = quantities_at(res.model, np.asarray(res.values), frequency, redshift)[0]
    entry["derived"] = {k: float(v) for k, v in d.items() if np.isfinite(v)}
    return entry, np.asarray(res.values, float), d


def jackknife(statistic, best, by="station", frequency=None, redshift=0.0, seed=0, starts=1, progress=None, procs=1):
    """Leave-one-group-out refits of the fit ``best`` (a FitResult of ``statistic``); a dict.

    Keys: by, groups_from, groups (per group: left_out, n_rows, chi2, converged, values or error),
    parameters and derived ({name: {value, formal_error, jackknife_error, ratio, larger}}),
    flagged (names whose jackknife error exceeds the formal one by more than FLAG_RATIO), summary.
    ``procs``: processes for the refits (each refit is seeded by ``seed``: the numbers do not change).
    """
    vset = best.statistic.vset
    found, how = groups(vset, by)
    if len(found) < 2:
        raise UvfitError(
            f"only {len(found)} {by} group(s) in the data: a jackknife needs two or more", "choose another grouping"
        )
    if frequency is None:
        frequency = float(np.mean(vset.frequency))
    names = list(best.names)
    full_derived = quantities_at(best.model, np.asarray(best.values), frequency, redshift)[0]
    periods = dict(getattr(best.model, "periods", lambda: {})())
    periods.update(derived_periods(best.model) or {})
    rows, values, dvalues, fractions = [], [], [], []
    shared = (best, names, frequency, redshift, seed, starts)
    for entry, theta, d in run_pieces(_leave_out, found, shared, procs=procs, progress=progress):
        rows.append(entry)
        if theta is None:
            continue
        values.append(theta)
        fractions.append(1.0 - entry["n_rows"] / vset.n)
        dvalues.append(d)
    n = len(values)
    if n < 2:
        raise FitError(
            f"fewer than two of the {len(found)} leave-one-{by}-out fits succeeded", "check the data of each group"
        )

    f = float(np.mean(fractions))
    factor = (1.0 - f) / (f * n) if 0 < f < 1 else (n - 1) / n

    def spread(x, ref, period):
        x = _wrapped(np.asarray(x, float), ref, period)
        return float(np.sqrt(factor * np.sum((x - x.mean()) ** 2)))

    par = {}
    formal = dict(zip(names, map(float, best.errors)))
    for j, name in enumerate(names):
        par[name] = _entry(
            float(best.values[j]),
            formal[name],
            spread([v[j] for v in values], float(best.values[j]), periods.get(name)),
        )
    der = {}
    fit_derived = {}
    try:
        from .derived import derived_quantities

        fit_derived = derived_quantities(
            best, redshift=redshift, frequency=frequency, resolved_test=False, limits=False
        )
    except Exception:  # derived errors are optional here
        fit_derived = {}
    for key, ref in full_derived.items():
        xs = [d.get(key, np.nan) for d in dvalues]
        if not np.all(np.isfinite(xs)) or not np.isfinite(ref):
            continue
        err = fit_derived.get(key, {}).get("error") if isinstance(fit_derived.get(key), dict) else None
        der[key] = _entry(
            float(ref), float(err) if err is not None else float("nan"), spread(xs, float(ref), periods.get(key))
        )
    flagged = [k for k, e in {**par, **der}.items() if e["larger"] == "jackknife"]
    summary = []
    for k, e in par.items():
        summary.append(_line(k, e))
    return {
        "by": by,
        "groups_from": how,
        "n_groups": len(found),
        "n_fits": n,
        "seed": int(seed),
        "groups": rows,
        "parameters": par,
        "derived": der,
        "flagged": flagged,
        "flag_ratio": FLAG_RATIO,
        "summary": summary,
        "mean_fraction_left_out": f,
        "variance_factor": factor,
        "method": "delete-one-group jackknife (Efron & Tibshirani 1993, ch. 11)",
    }


def _entry(value, formal, jack):
    ratio = jack / formal if formal and np.isfinite(formal) and formal > 0 else float("nan")
    if not np.isfinite(ratio):
        larger = "unknown"
    elif ratio > FLAG_RATIO:
        larger = "jackknife"
    elif ratio < 1.0 / FLAG_RATIO:
        larger = "formal"
    else:
        larger = "similar"
    return {"value": value, "formal_error": formal, "jackknife_error": jack, "ratio": ratio, "larger": larger}


def _line(name, e):
    r = e["ratio"]
    if e["larger"] == "jackknife":
        return (
            f"{name}: jackknife error {e['jackknife_error']:.3g} is {r:.2g} x the formal "
            f"{e['formal_error']:.3g}: the data kept matter more than the noise (flagged)"
        )
    if e["larger"] == "formal":
        return f"{name}: formal error {e['formal_error']:.3g} is {1 / r:.2g} x the jackknife {e['jackknife_error']:.3g}"
    if e["larger"] == "similar":
        return (
            f"{name}: jackknife {e['jackknife_error']:.3g} and formal {e['formal_error']:.3g} "
            f"errors agree (ratio {r:.2g})"
        )
    return f"{name}: jackknife error {e['jackknife_error']:.3g}; formal error undefined"
