"""Posterior summaries: intervals, circular angles, upper limits, and the ordering of components.

Every summary is computed from the posterior samples themselves (percentiles of the samples, or of
a quantity evaluated on every sample), so it carries whatever asymmetry, boundary pile-up or
correlation the posterior has; nothing here assumes a Gaussian.

Rules, stated once (README "sample" and DEVELOPERS "Sampling" repeat them):
- median and the 16th / 84th percentiles ("lower", "upper": the central 68% credible interval),
  the 2.5th / 97.5th percentiles ("lower_95", "upper_95"), and the value at the highest-posterior
  sample ("max_posterior").
- Angles with a full period (position angles, 360 degrees) are summarised with circular
  statistics: the samples are unwrapped about their circular mean before taking percentiles, so an
  interval across 0/360 stays one interval; the median is then brought into [0, 360) and the
  interval moved with it (its ends may lie below 0 or above 360).
- A size (any length other than a position, bounded below by L, 0 when unbounded) is "consistent
  with L" when (p2.5 - L) < 0.05 (p97.5 - L) — the 95% interval reaches down to the bound — or
  when the sample histogram (20 bins from L to the 99.5th percentile) peaks in its lowest bin. It is
  then reported as a one-sided 95% upper limit, ``upper_limit_95`` = the 95th percentile, and the
  two-sided interval must not be read as a detection of a size. The same rule is tried against
  every finite bound of every other parameter (e.g. a companion's flux with min = 0, an axis ratio
  pressed against 1, mirrored: ``lower_limit_95`` = the 5th percentile), except angles on the
  circle. A brightness temperature whose size is an upper limit gets a 95% lower limit.
"""

import math

import numpy as np

PERCENTILES = (2.5, 16.0, 50.0, 84.0, 97.5)
#: fraction of the 95% range above the bound within which the 2.5th percentile counts as "at the bound"
BOUND_FRACTION = 0.05
HISTOGRAM_BINS = 20


def circular_unwrap(x, period=360.0):
    """Samples moved by whole periods to lie within half a period of their circular mean."""
    x = np.asarray(x, dtype=float)
    phase = 2 * np.pi * x / period
    centre = period * math.atan2(np.mean(np.sin(phase)), np.mean(np.cos(phase))) / (2 * np.pi)
    return centre + (x - centre + period / 2) % period - period / 2


def consistent_with_bound(x, bound, side="lower"):
    """True when a posterior reaches its bound (see the module docstring for the rule).

    ``side`` "lower" (a size reaching zero) or "upper" (the same rule mirrored).
    """
    x = np.asarray(x, dtype=float)
    x = x[np.isfinite(x)]
    if side == "upper":
        x, bound = -x, -bound
    if x.size < 2:
        return False
    p025, p975, p995 = np.percentile(x, [2.5, 97.5, 99.5])
    if p975 <= bound:
        return True
    if (p025 - bound) < BOUND_FRACTION * (p975 - bound):
        return True
    top = max(p995, bound + 1e-300)
    counts, _ = np.histogram(x, bins=HISTOGRAM_BINS, range=(bound, top))
    return bool(np.argmax(counts) == 0)


def summarize(x, i_max=None, unit="", period=None, lower_bound=None, upper_bound=None):
    """Summary dict of one quantity's samples ``x``.

    ``i_max``: index of the max-posterior sample in ``x``; ``period``: circular statistics with this
    period (e.g. 360 for degrees); ``lower_bound`` / ``upper_bound``: bounds against which the limit
    rule is tried (a size's 0, a parameter's finite min or max). Keys: median, lower, upper,
    lower_95, upper_95, mean, std, max_posterior, unit, and ``upper_limit_95`` (95th percentile)
    when the posterior reaches its lower bound, ``lower_limit_95`` (5th percentile) when it reaches
    its upper bound.
    """
    x = np.asarray(x, dtype=float)
    good = np.isfinite(x)
    out = {
        "median": float("nan"),
        "lower": float("nan"),
        "upper": float("nan"),
        "lower_95": float("nan"),
        "upper_95": float("nan"),
        "mean": float("nan"),
        "std": float("nan"),
        "max_posterior": float("nan"),
        "unit": unit,
    }
    if i_max is not None and np.isfinite(x[i_max]):
        out["max_posterior"] = float(x[i_max])
    if not good.any():
        return out
    xs = x[good]
    if period:
        xs = circular_unwrap(xs, period)
    p025, p16, p50, p84, p975 = np.percentile(xs, PERCENTILES, method="nearest" if np.isinf(xs).any() else "linear")
    shift = 0.0
    if period:
        shift = -period * math.floor(p50 / period)
        if i_max is not None and np.isfinite(x[i_max]):
            out["max_posterior"] = float(x[i_max] % period)
    out.update(
        median=float(p50 + shift),
        lower=float(p16 + shift),
        upper=float(p84 + shift),
        lower_95=float(p025 + shift),
        upper_95=float(p975 + shift),
        mean=float(np.mean(xs)) + shift,
        std=float(np.std(xs, ddof=1)) if xs.size > 1 else float("nan"),
    )
    if period:
        out["circular"] = True
    method = "nearest" if np.isinf(xs).any() else "linear"
    if lower_bound is not None and np.isfinite(lower_bound) and consistent_with_bound(xs, lower_bound):
        out["upper_limit_95"] = float(np.percentile(xs, 95.0, method=method))
    if upper_bound is not None and np.isfinite(upper_bound) and consistent_with_bound(xs, upper_bound, side="upper"):
        out["lower_limit_95"] = float(np.percentile(xs, 5.0, method=method))
    if good.sum() < x.size:
        out["n_undefined"] = int(x.size - good.sum())
    return out


# --------------------------------------------------------------------------- label switching
def swap_groups(model):
    """Groups of components that can swap labels: same shape, same parameters, all of them free.

    Returns a list of groups; each group a list of (component name, [free indices]) with the
    indices in the same local-parameter order for every member of the group.
    """
    names = list(model.free_names)
    index = {n: j for j, n in enumerate(names)}
    signature = {}
    for comp in model.components:
        if comp.shape.compound:
            continue  # a double: its two members are not separate blocks of parameters
        items = model.component_parameter_names(comp.name)
        if not all(full in index for full in items):
            continue  # a fixed or tied parameter breaks the symmetry
        key = (comp.key, tuple(comp.parameter_names()))
        signature.setdefault(key, []).append((comp.name, [index[full] for full in items]))
    return [g for g in signature.values() if len(g) > 1]


def double_members(model, movable=()):
    """Components whose two members can trade places (``Shape.symmetric_members``):
    [(component, {role: free index}, [(i1, i2)], {role: full name})], roles "flux_ratio",
    "separation", "position_angle", "east", "north".

    Swapping the members of a double maps (east, north, flux_ratio r, separation s, position angle
    psi) to (east + s sin psi, north + s cos psi, 1 / r, s, psi + 180 deg) and exchanges the
    member parameters of each pair (``x_1`` with ``x_2``): the same sky. It needs flux_ratio, separation and
    position_angle free, the member parameters free in pairs, and east / north free or fixed only
    because the mode cannot see the absolute position (``movable``; then they stay as they are).
    """
    names = list(model.free_names)
    index = {n: j for j, n in enumerate(names)}
    movable = set(movable)
    positions = model.position_names()
    out = []
    for comp in model.components:
        swap = comp.shape.symmetric_members()
        if swap is None:
            continue
        full = {
            r: f"{comp.name}.{local}"
            for r, local in (
                ("flux_ratio", swap.ratio),
                ("separation", swap.separation),
                ("position_angle", swap.angle),
            )
        }
        full["east"], full["north"] = positions[comp.name]
        own = {r: index.get(n) for r, n in full.items()}
        if any(own[r] is None for r in ("flux_ratio", "separation", "position_angle")):
            continue
        if any(own[r] is None and full[r] not in movable for r in ("east", "north")):
            continue
        pairs, ok = [], True
        for one, two in swap.pairs:
            a, b = index.get(f"{comp.name}.{one}"), index.get(f"{comp.name}.{two}")
            if (a is None) != (b is None):
                ok = False
            elif a is not None:
                pairs.append((a, b))
        if ok:
            out.append((comp.name, own, pairs, full))
    return out


def _swap_double_members(model, samples, order_by, doubles):
    """Apply the member swap of :func:`double_members` where the rule asks for it; (texts, swapped)."""
    texts = []
    swapped = np.zeros(samples.shape[0], dtype=bool)
    for comp, own, pairs, full in doubles:
        r = samples[:, own["flux_ratio"]]
        sep = samples[:, own["separation"]]
        psi = np.radians(samples[:, own["position_angle"]])
        de, dn = sep * np.sin(psi), sep * np.cos(psi)
        if order_by == "flux":
            swap = r > 1.0
            rule = "brighter member first (flux_ratio <= 1)"
        else:
            e = samples[:, own["east"]] if own["east"] is not None else model.parameters[full["east"]].value
            n = samples[:, own["north"]] if own["north"] is not None else model.parameters[full["north"]].value
            swap = np.hypot(e + de, n + dn) < np.hypot(e, n)
            rule = "member nearer the phase centre first"
        if not swap.any():
            texts.append(f"the members of double {comp} are labelled {rule}")
            continue
        rows = np.flatnonzero(swap)
        if own["east"] is not None:
            samples[rows, own["east"]] += de[rows]
        if own["north"] is not None:
            samples[rows, own["north"]] += dn[rows]
        with np.errstate(divide="ignore"):
            samples[rows, own["flux_ratio"]] = 1.0 / r[rows]
        pa = (samples[rows, own["position_angle"]] + 180.0) % 360.0
        p = model.parameters[full["position_angle"]]
        pa = np.where(pa > p.max, pa - 360.0, pa)
        pa = np.where(pa < p.min, pa + 360.0, pa)
        samples[rows, own["position_angle"]] = pa
        for a, b in pairs:
            samples[rows, a], samples[rows, b] = samples[rows, b].copy(), samples[rows, a].copy()
        swapped |= swap
        texts.append(f"the members of double {comp} are labelled {rule} in every sample")
    return texts, swapped


def anchored_groups(model, movable=()):
    """Components that can swap labels with the one that holds a position fixed by the fitter.

    In a mode blind to the absolute position (closures, amplitudes) the fitter fixes the position
    of one component, the anchor (and, when the mode is blind to the flux scale, its flux). A
    component of the same shape whose parameters are all free can then take the anchor's place:
    the sky shifted by (anchor - other) and, with a fixed flux, scaled by (anchor flux / other
    flux) is the same sky with the two labels exchanged, and such a mode cannot tell a shift or a
    scale apart. Returns [(anchor, {role: full name}, [(other, {role: free index})])], roles
    "east", "north", "flux" and "shape" (a list of (anchor index, other index) of the remaining
    parameters, which trade places). Every position must be free or ``movable`` (a position the
    user fixed or tied anchors the sky), likewise every flux when the anchor's flux is movable.
    """
    movable = set(movable)
    if not movable:
        return []
    names = list(model.free_names)
    index = {n: j for j, n in enumerate(names)}
    positions = model.position_names()
    fluxes = model.flux_names()

    def loose(name):
        return name in index or name in movable

    if not all(loose(e) and loose(n) for e, n in positions.values()):
        return []
    out = []
    for comp in model.components:
        if comp.shape.compound:
            continue
        east, north = positions[comp.name]
        if not (east in movable and north in movable):
            continue
        flux = fluxes[comp.name]
        if flux not in index and flux not in movable:
            continue
        if flux in movable and not all(loose(f) for f in fluxes.values()):
            continue
        own = model.component_parameter_names(comp.name)
        rest = [n for n in own if n not in (east, north, flux)]
        if not all(n in index for n in rest):
            continue
        others = []
        for other in model.components:
            if other is comp or other.shape.compound or other.key != comp.key:
                continue
            if tuple(other.parameter_names()) != tuple(comp.parameter_names()):
                continue
            theirs = model.component_parameter_names(other.name)
            if not all(n in index for n in theirs):
                continue
            local = dict(zip(own, theirs))
            others.append(
                (
                    other.name,
                    {
                        "east": index[local[east]],
                        "north": index[local[north]],
                        "flux": index[local[flux]],
                        "shape": [(index[n], index[local[n]]) for n in rest],
                    },
                )
            )
        if others:
            out.append((comp.name, {"east": east, "north": north, "flux": flux}, others))
    return out


def _swap_anchored(model, samples, anchored, movable):
    """Give the anchor of each :func:`anchored_groups` group the largest flux (texts, swapped)."""
    texts = []
    swapped = np.zeros(samples.shape[0], dtype=bool)
    names = list(model.free_names)
    index = {n: j for j, n in enumerate(names)}
    positions = model.position_names()
    fluxes = model.flux_names()
    for anchor, full, others in anchored:
        fixed_flux = full["flux"] in movable
        value = model.parameters
        a_e, a_n = value[full["east"]].value, value[full["north"]].value
        a_f = value[full["flux"]].value if fixed_flux else samples[:, index[full["flux"]]]
        f_other = np.stack([samples[:, o["flux"]] for _, o in others], axis=1)  # (n, m)
        a_f = np.broadcast_to(np.asarray(a_f, float), (samples.shape[0],))
        j = np.argmax(f_other, axis=1)
        rows_all = np.flatnonzero(np.take_along_axis(f_other, j[:, None], 1)[:, 0] > a_f)
        for jj, (_, o) in enumerate(others):
            rows = rows_all[j[rows_all] == jj]
            if rows.size == 0:
                continue
            x = samples[rows]
            de, dn = a_e - x[:, o["east"]], a_n - x[:, o["north"]]
            f_o = x[:, o["flux"]].copy()
            f_a = a_f[rows]
            shape_a = [x[:, ia].copy() for ia, _ in o["shape"]]
            shape_o = [x[:, io].copy() for _, io in o["shape"]]
            # every free position moves with the shift; the other takes the anchor's old offset
            for e, n in positions.values():
                if e in index:
                    x[:, index[e]] += de
                if n in index:
                    x[:, index[n]] += dn
            x[:, o["east"]] = a_e + de
            x[:, o["north"]] = a_n + dn
            if fixed_flux:
                g = f_a / f_o
                for f in fluxes.values():
                    if f in index:
                        x[:, index[f]] *= g
                x[:, o["flux"]] = f_a * g
            else:
                x[:, index[full["flux"]]] = f_o
                x[:, o["flux"]] = f_a
            for (ia, io), va, vo in zip(o["shape"], shape_a, shape_o):
                x[:, ia], x[:, io] = vo, va
            samples[rows] = x
            swapped[rows] = True
        members = ", ".join([anchor] + [o for o, _ in others])
        texts.append(
            f"components {members} (same shape) can swap labels in this mode (it cannot see the "
            f"position of {anchor}" + (" or the flux scale" if fixed_flux else "") + f"): {anchor}, which holds the "
            "fixed position, is made the brightest in every sample"
        )
    return texts, swapped


def order_samples(model, samples, order_by="flux", groups=None, movable=()):
    """Relabel swappable components in every sample so that they follow the ordering rule.

    ``order_by``: "flux" (brightest first) or "distance" (nearest the phase centre first). Each
    sample's parameter blocks are permuted so that the first-named component of a group has the
    largest flux (or smallest distance) in that sample; the two members of a double are swapped
    likewise (see :func:`double_members`; ``movable`` names positions fixed only because the mode
    cannot see them); and a component of the same shape as the one holding such a fixed position
    trades places with it when brighter (:func:`anchored_groups`), whatever ``order_by``, so that the
    anchor is the brightest. Returns (ordered samples, description dict).
    """
    samples = np.array(samples, dtype=float, copy=True)
    if order_by not in ("flux", "distance"):
        raise ValueError(f"unknown ordering {order_by!r}")
    if groups is None:
        groups = swap_groups(model)
    doubles = double_members(model, movable)
    anchored = anchored_groups(model, movable)
    if not groups and not doubles and not anchored:
        return samples, {
            "rule": order_by,
            "groups": [],
            "description": "no two components can swap labels; no ordering applied",
        }
    names = list(model.free_names)
    texts, swapped = _swap_double_members(model, samples, order_by, doubles)
    if anchored:
        more, moved = _swap_anchored(model, samples, anchored, set(movable))
        texts += more
        swapped |= moved
    for group in groups:
        comps = [c for c, _ in group]
        blocks = np.array([idx for _, idx in group])  # (m, p)
        first = [names[j] for j in group[0][1]]
        if order_by == "flux":
            k = first.index(model.flux_names()[comps[0]])
            key = -samples[:, blocks[:, k]]  # brightest first
        else:
            ke, kn = (first.index(n) for n in model.position_names()[comps[0]])
            key = np.hypot(samples[:, blocks[:, ke]], samples[:, blocks[:, kn]])
        order = np.argsort(key, axis=1, kind="stable")  # (n, m)
        rows = np.arange(samples.shape[0])[:, None, None]
        new = samples[rows, blocks[order]]  # (n, m, p)
        for j in range(len(comps)):
            samples[:, blocks[j]] = new[:, j, :]
        swapped |= np.any(order != np.arange(len(comps)), axis=1)
        rule = "largest flux first" if order_by == "flux" else "nearest the phase centre first"
        texts.append(f"components {', '.join(comps)} (same shape) are labelled in every sample by {order_by}, {rule}")
    return samples, {
        "rule": order_by,
        "groups": [[c for c, _ in g] for g in groups],
        "doubles": [d[0] for d in doubles],
        "anchored": [[a] + [o for o, _ in others] for a, _, others in anchored],
        "movable": sorted(set(movable)),
        "description": "; ".join(texts) if texts else "no ordering applied",
        "fraction_relabelled": float(np.mean(swapped)) if samples.shape[0] else 0.0,
    }
