"""The catalogue of distinct least-squares solutions found by several starts.

Each start's end point is first put in canonical form (swappable components and the members of a
double relabelled by the rule of :func:`uvfit.infer.posterior.order_samples`, brighter first), so
that a label swap is not counted as another solution. Two end points are the same solution when
they differ by less than ``TOLERANCE`` formal errors (of the best fit) in every free parameter,
angles compared on their circle. Solutions are sorted by chi2.

Rule for the reliability of the curvature errors: when another distinct solution lies within
delta chi2 < the 99% point of the chi-square distribution with k degrees of freedom (k free
parameters; scipy.stats.chi2.ppf), the chi2 surface is not one quadratic bowl at the level that a
99% joint confidence region sees (Press et al., Numerical Recipes, 3rd ed. 2007, sec. 15.6), and
the quoted errors do not describe the uncertainty (``errors_reliable`` False).
"""

import numpy as np
from scipy.stats import chi2 as chi2_dist

#: same solution when within this many formal errors in every free parameter
TOLERANCE = 3.0
#: joint confidence level of the reliability rule
LEVEL = 0.99


def delta_chi2_limit(k):
    """The delta chi2 within which another solution makes the errors unreliable (99% point, k dof)."""
    return float(chi2_dist.ppf(LEVEL, max(int(k), 1)))


def canonical(model, points, movable=()):
    """Start end points (n, k) relabelled to canonical order (brighter component / member first)."""
    from .posterior import order_samples

    points = np.atleast_2d(np.asarray(points, float))
    if points.size == 0:
        return points
    with np.errstate(all="ignore"):
        out, _ = order_samples(model, points, order_by="flux", movable=movable)
    return out


def _scale(values, errors):
    """Per-parameter distance unit: the formal error, or a small fraction of the value when the
    error is not finite or zero."""
    errors = np.asarray(errors, float)
    fallback = 1e-3 * np.maximum(np.abs(values), 1e-6)
    ok = np.isfinite(errors) & (errors > 0)
    return np.where(ok, errors, fallback)


def catalogue(model, names, ends, chi2s, best_values, best_errors, movable=()):
    """The list of distinct solutions, best first.

    ``ends`` (n, k) start end points, ``chi2s`` their chi2 (non-finite ones are dropped).
    Returns [{"chi2", "delta_chi2", "parameters": {name: value}, "n_starts"}].
    """
    ends = np.atleast_2d(np.asarray(ends, float))
    chi2s = np.asarray(chi2s, float)
    keep = np.isfinite(chi2s) & np.all(np.isfinite(ends), axis=1)
    if not keep.any():
        return []
    ends, chi2s = canonical(model, ends[keep], movable), chi2s[keep]
    best = canonical(model, np.asarray(best_values, float)[None, :], movable)[0]
    scale = _scale(best, best_errors)
    periods = model.periods()
    period = np.array([periods.get(n, 0.0) for n in names], float)
    order = np.argsort(chi2s, kind="stable")
    groups = []  # [representative vector, chi2, count]
    for i in order:
        x = ends[i]
        for g in groups:
            d = x - g[0]
            circ = period > 0
            d[circ] = (d[circ] + period[circ] / 2) % period[circ] - period[circ] / 2
            if np.all(np.abs(d) < TOLERANCE * scale):
                g[2] += 1
                break
        else:
            groups.append([x.copy(), float(chi2s[i]), 1])
    c0 = groups[0][1]
    return [
        {"chi2": c, "delta_chi2": c - c0, "parameters": {n: float(v) for n, v in zip(names, x)}, "n_starts": int(m)}
        for x, c, m in groups
    ]


def errors_reliable(solutions, k):
    """False when a second distinct solution lies within :func:`delta_chi2_limit` (k) of the best."""
    limit = delta_chi2_limit(k)
    return not any(s["delta_chi2"] < limit for s in solutions[1:])


def ambiguity_text(solutions, k):
    """One line saying which other solutions lie within the rule (empty when none)."""
    limit = delta_chi2_limit(k)
    close = [s for s in solutions[1:] if s["delta_chi2"] < limit]
    if not close:
        return ""
    return (
        f"{len(close)} other distinct solution(s) lie within delta chi2 < {limit:.3g} (99% point "
        f"of chi2 with {k} degrees of freedom) of the best (delta chi2 "
        + ", ".join(f"{s['delta_chi2']:.3g}" for s in close)
        + "): the curvature errors do not describe the uncertainty; see 'solutions' "
        "(or run uvfit sample / profile)"
    )
