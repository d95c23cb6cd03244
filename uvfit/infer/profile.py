"""Profile likelihood of one parameter: chi2 minimised over all the others on a grid of its values.

At each grid value the parameter is held fixed and every other free parameter is refitted by least
squares; the fits are warm-started along the grid (outward from the best fit, each from its
neighbour's solution), and at every point also from the best fit itself and from seeded random
starts, keeping the lowest chi2. Confidence intervals are the sets where
chi2_profile - chi2_min <= 1 (68.3%) and <= 3.84 (95%), the profile-likelihood interval of
Venzon & Moolgavkar (1988, Appl. Stat. 37, 87), calibrated by Wilks' theorem (Wilks 1938,
Ann. Math. Stat. 9, 60: the profile delta chi2 follows chi2 with one degree of freedom). A profile
with several dips gives several [lo, hi] pairs; edges are found by a parabola through the three
grid points around each crossing (exact for a quadratic profile).
"""

from __future__ import annotations

import numpy as np

from ..errors import FitError, UvfitError
from .lsq import _run_start, fit, free_bounds, random_starts
from .parallel import run_pieces

#: delta chi2 of the 68.3% and 95% profile intervals (chi2 with 1 degree of freedom)
LEVELS = {"interval_68": 1.0, "interval_95": 3.841458820694124}


#: most grid values of one profile (each is a refit)
MAX_POINTS = 10_000


def _crossing(g, d, i, level):
    """Where the profile ``d`` crosses ``level`` between grid points i and i + 1."""
    lo_x, hi_x = g[i], g[i + 1]
    j = min(max(i - 1, 0), len(g) - 3)
    if j >= 0:
        xs, ys = g[j : j + 3], d[j : j + 3]
        try:
            c = np.polyfit(xs, ys - level, 2)
            roots = np.roots(c)
            roots = roots[np.isreal(roots)].real
            inside = roots[(roots >= lo_x - 1e-12 * abs(hi_x - lo_x)) & (roots <= hi_x + 1e-12 * abs(hi_x - lo_x))]
            if inside.size == 1:
                return float(inside[0])
        except (np.linalg.LinAlgError, ValueError):
            pass
    # linear interpolation
    y0, y1 = d[i] - level, d[i + 1] - level
    if y1 == y0:
        return float(0.5 * (lo_x + hi_x))
    return float(lo_x + (hi_x - lo_x) * y0 / (y0 - y1))


def intervals(grid, delta, level):
    """[[lo, hi], ...] where ``delta`` <= ``level`` on the grid, edges interpolated; a run that
    reaches an end of the grid ends there. Also returns whether any run reaches an end."""
    g = np.asarray(grid, float)
    d = np.asarray(delta, float)
    inside = np.isfinite(d) & (d <= level)
    out, open_end = [], False
    i, n = 0, len(g)
    while i < n:
        if not inside[i]:
            i += 1
            continue
        j = i
        while j + 1 < n and inside[j + 1]:
            j += 1
        if i == 0:
            lo, open_end = float(g[0]), True
        else:
            lo = _crossing(g, d, i - 1, level)
        if j == n - 1:
            hi, open_end = float(g[-1]), True
        else:
            hi = _crossing(g, d, j, level)
        out.append([lo, hi])
        i = j + 1
    return out, open_end


def default_range(value, error, lo, hi, width=5.0):
    """Best fit +/- ``width`` formal errors inside the bounds; the bounds when the error is not
    finite; else +/- half the value (or 1)."""
    if np.isfinite(error) and error > 0:
        a, b = value - width * error, value + width * error
    elif np.isfinite(lo) and np.isfinite(hi):
        a, b = lo, hi
    else:
        half = max(0.5 * abs(value), 1.0)
        a, b = value - half, value + half
    return float(max(a, lo)), float(min(b, hi))


def _grid_chain(shared, piece, progress=None):
    """Refits along a chain of grid indices, each warm-started from the one before (the first
    from ``warm``, when given), and from the best fit and the extra starts: [(index, chi2, x)]."""
    fixed_stat, name, grid, x_best, extra, lo, hi, max_nfev = shared
    indices, warm = piece
    model = fixed_stat.model
    others = list(model.free_names)
    out = []
    for i in indices:
        model.parameters[name].value = float(grid[i])
        best_c, best_x = np.inf, None
        if not others:
            with np.errstate(all="ignore"):
                best_c = float(fixed_stat.chi2(np.zeros(0)))
        else:
            candidates = ([warm] if warm is not None else []) + [x_best] + list(extra)
            for x0 in candidates:
                try:
                    res = _run_start(fixed_stat, x0, lo, hi, max_nfev)
                except ValueError:
                    continue
                c = float(2.0 * res.cost)
                if np.isfinite(c) and c < best_c:
                    best_c, best_x = c, np.asarray(res.x, float)
            warm = best_x
        out.append((i, best_c, best_x))
        if progress:
            progress(1)
    return out


def profile(
    statistic,
    name,
    value_range=None,
    points=21,
    starts=3,
    seed=0,
    best=None,
    max_nfev=None,
    progress=None,
    procs=1,
):
    """The profile of parameter ``name`` of the statistic's model; a JSON-ready dict.

    ``best``: a FitResult of the same statistic (default: a fit with ``starts`` starts).
    ``value_range``: (lo, hi) in the parameter's unit (default: best +/- 5 formal errors inside the
    bounds). ``points``: grid values (the best-fit value is added). ``starts``: starts per grid
    point besides the warm start (the first is the best fit's values, the others random, seeded
    by ``seed``). ``progress``: called with 1 after each grid point. ``procs``: processes for the
    two chains of grid points on either side of the best fit (the numbers do not change).
    Keys: parameter, unit, grid, chi2, best, chi2_min, interval_68, interval_95 (lists of
    [lo, hi]), unconstrained, reaches_range_end, seed, starts, method.
    """
    points = int(points)
    if points < 3:
        raise UvfitError(f"points must be at least 3 (got {points})")
    if points > MAX_POINTS:
        raise UvfitError(
            f"points must be at most {MAX_POINTS} (got {points})",
            "a profile needs a few tens of grid values; narrow the range for detail",
        )
    if best is None:
        best = fit(statistic, starts=max(int(starts), 1), seed=seed, max_nfev=max_nfev)
    stat = best.statistic
    names = list(best.names)
    if name not in names:
        known = ", ".join(names)
        raise UvfitError(
            f"parameter {name} is not free in this fit (free: {known})", "name a free parameter as component.parameter"
        )
    k = names.index(name)
    value, error = best.value(name), best.error(name)
    model = best.model.copy()
    lo_all, hi_all = free_bounds(model)
    p_lo, p_hi = float(lo_all[k]), float(hi_all[k])
    if value_range is None:
        a, b = default_range(value, error, p_lo, p_hi)
    else:
        a, b = map(float, value_range)
        if not a < b:
            raise UvfitError(f"the range of {name} must have lo below hi (got {a:g}, {b:g})")
        if a < p_lo or b > p_hi:
            raise UvfitError(
                f"the range {a:g}..{b:g} of {name} leaves its bounds [{p_lo:g}, {p_hi:g}]",
                "choose a range inside the bounds",
            )
    grid = np.linspace(a, b, points)
    if a < value < b and not np.any(np.isclose(grid, value, rtol=0, atol=1e-12 * (b - a))):
        grid = np.sort(np.append(grid, value))
    # the model with the parameter fixed; its value is set per grid point
    model.parameters[name].fixed = True
    fixed_stat = stat.rebuilt(model)
    others = list(model.free_names)
    lo, hi = free_bounds(model)
    x_best = np.asarray([best.value(n) for n in others], float)
    rng = np.random.default_rng(seed)
    extra = random_starts(model, fixed_stat, max(int(starts) - 1, 0), rng) if others else []
    chi2 = np.full(len(grid), np.nan)
    solutions = [None] * len(grid)
    centre = int(np.argmin(np.abs(grid - value)))
    shared = (fixed_stat, name, grid, x_best, extra, lo, hi, max_nfev or 200 * (len(others) + 1))
    # the centre first, then the two warm-started chains outward from it, which are independent
    done = _grid_chain(shared, ([centre], None))
    if progress:
        progress(1)
    warm = done[0][2]
    chains = [c for c in (list(range(centre + 1, len(grid))), list(range(centre - 1, -1, -1))) if c]
    pieces = [(c, warm) for c in chains]
    if int(procs) > 1:
        parts = run_pieces(_grid_chain, pieces, shared, procs=procs, progress=progress, sizes=[len(c) for c in chains])
    else:
        parts = [_grid_chain(shared, piece, progress) for piece in pieces]
    for i, c, x in done + [row for part in parts for row in part]:
        chi2[i] = c
        solutions[i] = x
    if not np.any(np.isfinite(chi2)):
        raise FitError(
            f"the profile of {name} failed at every grid value", "check the range and the model's start values"
        )
    i_min = int(np.nanargmin(chi2))
    chi2_min = float(min(best.chi2, chi2[i_min]))
    best_value = float(value if best.chi2 <= chi2[i_min] else grid[i_min])
    delta = chi2 - chi2_min
    from ..labels import unit_text

    out = {
        "parameter": name,
        "unit": unit_text(model.parameters[name]),
        "grid": [float(x) for x in grid],
        "chi2": [float(c) for c in chi2],
        "best": best_value,
        "chi2_min": chi2_min,
        "formal_error": float(error),
    }
    reaches = False
    for key, level in LEVELS.items():
        iv, open_end = intervals(grid, delta, level)
        out[key] = iv
        if key == "interval_68":
            reaches = open_end
    flat = bool(np.nanmax(delta) < 1.0)
    out["unconstrained"] = bool(flat or reaches)
    out["reaches_range_end"] = bool(reaches)
    out["lower_than_fit"] = bool(chi2[i_min] < best.chi2 - 1e-6 * max(1.0, best.chi2))
    out["seed"] = int(seed)
    out["starts"] = int(starts)
    out["method"] = "profile likelihood (Venzon & Moolgavkar 1988), delta chi2 1 and 3.84 (Wilks 1938)"
    out["other_parameters"] = {n: [None if s is None else float(s[j]) for s in solutions] for j, n in enumerate(others)}
    return out


def profile_note(prof):
    """One line on a profile, for the text output."""
    name = prof["parameter"]
    iv = "; ".join(f"{a:.6g} .. {b:.6g}" for a, b in prof["interval_68"]) or "none"
    line = f"profile of {name}: best {prof['best']:.6g}, 68% interval {iv}"
    if prof["unconstrained"]:
        line += (
            " (unconstrained: delta chi2 stays below 1 up to an end of the range "
            f"{prof['grid'][0]:.6g} .. {prof['grid'][-1]:.6g})"
        )
    if len(prof["interval_68"]) > 1:
        line += f" ({len(prof['interval_68'])} separate dips)"
    if prof.get("lower_than_fit"):
        line += "; the profile found a lower chi2 than the fit: the fit is a local minimum"
    return line
