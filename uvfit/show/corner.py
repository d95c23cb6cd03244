"""The corner plot of posterior samples (one histogram per parameter, one scatter per pair).

Drawn with the corner package (Foreman-Mackey 2016, JOSS 1, 24) under the house style; the 16,
50 and 84 % quantiles are marked. Derived quantities (separation, position angle and flux ratio
of a pair of members, sizes...; :mod:`uvfit.infer.derived`) can be drawn beside the free
parameters, evaluated on every sample. Axis labels are placed below (beside) their tick labels,
measured with the renderer, so that they never overlap.
"""

import math

import matplotlib
import numpy as np

from ..errors import UvfitError
from . import style
from .style import DATA_COLOUR, MODEL_COLOUR

#: space between tick labels and an axis label (points)
LABEL_GAP = 4.0


def _value_text(med, lo, hi):
    """ "median (+upper -lower)" with the median to the precision of its errors (two figures)."""
    spread = [x for x in (med - lo, hi - med) if np.isfinite(x) and x > 0]
    if not np.isfinite(med) or not spread:
        return f"{med:.4g}"
    decimals = 1 - math.floor(math.log10(min(spread)))
    if decimals > 8 or abs(med) >= 1e7:
        return f"{med:.4g} (+{hi - med:.2g} -{med - lo:.2g})"
    d = max(decimals, 0)
    return f"{med:.{d}f} (+{hi - med:.{d}f} -{med - lo:.{d}f})"


def _ticks_box(fig, axis, renderer):
    """The window extent of an axis's visible tick labels and offset text, or None."""
    from matplotlib.transforms import Bbox

    boxes = [t.get_window_extent(renderer) for t in axis.get_ticklabels() if t.get_visible() and t.get_text()]
    offset = axis.get_offset_text()
    if offset.get_visible() and offset.get_text():
        boxes.append(offset.get_window_extent(renderer))
    return Bbox.union(boxes) if boxes else None


def place_labels(fig, grid):
    """Put the x labels of the bottom row below their tick labels and the y labels of the left
    column to their left (measured with the renderer); widen the margins when a label would leave
    the figure. ``grid`` is the (n, n) array of the corner plot's axes."""
    n = grid.shape[0]
    gap = LABEL_GAP * fig.dpi / 72.0
    for _ in range(3):
        fig.canvas.draw()
        renderer = fig.canvas.get_renderer()
        for ax in grid[n - 1, :]:
            box = _ticks_box(fig, ax.xaxis, renderer)
            if box is not None and ax.xaxis.label.get_text():
                y = ax.transAxes.inverted().transform((0.0, box.y0 - gap))[1]
                ax.xaxis.set_label_coords(0.5, y)
        for ax in grid[1:, 0]:
            box = _ticks_box(fig, ax.yaxis, renderer)
            if box is not None and ax.yaxis.label.get_text():
                x = ax.transAxes.inverted().transform((box.x0 - gap, 0.0))[0]
                ax.yaxis.set_label_coords(x, 0.5)
        fig.canvas.draw()
        labels = [ax.xaxis.label for ax in grid[n - 1, :]] + [ax.yaxis.label for ax in grid[1:, 0]]
        boxes = [lab.get_window_extent(renderer) for lab in labels if lab.get_text()]
        if not boxes:
            return
        low = min(b.y0 for b in boxes) / fig.bbox.height
        left = min(b.x0 for b in boxes) / fig.bbox.width
        sp = fig.subplotpars
        if low >= 0.005 and left >= 0.005:
            return
        fig.subplots_adjust(
            bottom=min(sp.bottom + max(0.0, 0.01 - low), 0.45), left=min(sp.left + max(0.0, 0.01 - left), 0.45)
        )


def select_derived(available, wanted):
    """The derived keys asked for: each item of ``wanted`` is a full key ("core-knot.separation")
    or a quantity's name ("separation", "position_angle", "flux_ratio", "size"...), which selects
    every key ending in it. Keys keep the order of ``available``; an unknown item is an error
    naming what exists."""
    available = list(available)
    out = []
    for item in wanted:
        item = str(item)
        hits = [k for k in available if k == item or k.endswith("." + item)]
        if not hits:
            kinds = sorted({k.rsplit(".", 1)[-1] for k in available})
            raise UvfitError(
                f"derived names '{item}', which is not among this model's: "
                + (", ".join(available) if available else "it has none"),
                ("give a key as listed, or a quantity name: " + ", ".join(kinds)) if kinds else None,
            )
        out.extend(h for h in hits if h not in out)
    return [k for k in available if k in out]


def derived_keys(model):
    """The keys of ``model``'s derived quantities (:func:`uvfit.infer.derived.quantities_at`)
    that a corner plot can show beside the free parameters."""
    from ..infer.derived import quantities_at

    # any frequency gives the same keys (it only enables the brightness temperatures)
    values, _, _ = quantities_at(model, model.get_free(), 1e9)
    return list(values)


def derived_columns(post, keys):
    """(samples (n, len(keys)), units, summaries) of the derived quantities ``keys`` of a
    :class:`uvfit.infer.sampling.Posterior`, evaluated on its ordered samples. A quantity on a
    circle (a position angle) is unwrapped about its circular mean and its summary moved by whole
    periods to match, so its histogram is not split at 0/360 degrees."""
    from ..infer.derived import derived_periods
    from ..infer.posterior import circular_unwrap
    from ..infer.sampling.summary import derived_samples

    values, units = derived_samples(
        post.model, post.samples, getattr(post, "frequency", None), getattr(post, "redshift", 0.0)
    )
    periods = derived_periods(post.model)
    columns, summaries = [], []
    for key in keys:
        x = np.asarray(values[key], float)
        sm = {k: float(post.derived[key][k]) for k in ("median", "lower", "upper")}
        period = periods.get(key)
        if period:
            x = circular_unwrap(x, period)
            centre = float(np.nanmedian(x))
            sm = {k: v + period * round((centre - v) / period) for k, v in sm.items()}
        columns.append(x)
        summaries.append(sm)
    samples = np.column_stack(columns) if columns else np.zeros((post.samples.shape[0], 0))
    return samples, [units.get(k, "") for k in keys], summaries


def corner_plot(samples, names, units=None, truths=None, title=None, summaries=None):
    """Corner plot of posterior samples (n_samples, n_parameters), with 16/50/84 % quantiles.

    The marked quantiles and the titles are those of ``summaries`` (one dict per parameter with
    ``median``, ``lower``, ``upper``, as the posterior JSON records them), or, when not given, of
    :func:`uvfit.infer.posterior.summarize` of each column: one computation of the 68 % interval,
    the same as the posterior's.

    Returns (fig, numbers): ``names``, ``n_samples``, ``median``, ``lower``, ``upper`` (16th and
    84th percentiles) per parameter.
    """
    import corner

    from ..infer.posterior import summarize

    samples = np.asarray(samples, float)
    if samples.ndim != 2 or samples.shape[0] < 2:
        raise UvfitError("the chain has too few samples for a corner plot", "sample longer, or discard fewer steps")
    if samples.shape[1] != len(names):
        raise UvfitError(f"the chain has {samples.shape[1]} parameters but {len(names)} names")
    units = [style.angle_label(u) if u else "" for u in (units or [""] * len(names))]
    # a parameter with no spread cannot be histogrammed: widen its range by hand
    ranges = []
    for j in range(samples.shape[1]):
        lo, hi = float(np.min(samples[:, j])), float(np.max(samples[:, j]))
        ranges.append((lo, hi) if hi > lo else (lo - 0.5 * (abs(lo) or 1.0), hi + 0.5 * (abs(hi) or 1.0)))
    labels = [f"{n}\n({u})" if u else n for n, u in zip(names, units)]
    size = max(6.0, 1.9 * len(names))
    fig, _ = style.new_figure(len(names), len(names), figsize=(size, size), grid=False)
    with style.style(), matplotlib.rc_context({"axes.grid": False}):
        corner.corner(
            samples,
            labels=labels,
            fig=fig,
            show_titles=False,
            range=ranges,
            color=DATA_COLOUR,
            hist_kwargs={"color": DATA_COLOUR},
            truths=truths,
            truth_color=MODEL_COLOUR,
            label_kwargs={"fontsize": 9},
            title_kwargs={"fontsize": 9},
        )
        if summaries is None:
            summaries = [summarize(samples[:, j]) for j in range(samples.shape[1])]
        q = np.array([[float(sm[k]) for sm in summaries] for k in ("lower", "median", "upper")])
        n = len(names)
        axes = np.asarray(fig.axes).reshape(n, n)
        for j, name in enumerate(names):
            ax = axes[j, j]
            for x in q[:, j]:
                if np.isfinite(x):
                    ax.axvline(x, color=DATA_COLOUR, linestyle="dashed", linewidth=1.0)
            lo, med, hi = q[0, j], q[1, j], q[2, j]
            # the name and the value on two lines: a long name does not run into its neighbour
            ax.set_title(f"{name}\n{_value_text(med, lo, hi)}", fontsize=8)
        fig.subplots_adjust(top=0.92 if title else 0.95, hspace=0.12, wspace=0.12)
        if title:
            fig.suptitle(title)
        place_labels(fig, axes)
    return fig, {"names": list(names), "n_samples": int(samples.shape[0]), "lower": q[0], "median": q[1], "upper": q[2]}


def write_corner_plot(post, path, force=False, derived=()):
    """Write the corner plot of a posterior summary (:class:`uvfit.infer.sampling.Posterior`:
    its ordered samples, parameter names and units) as a PNG, atomically; returns the path.
    ``derived``: derived quantities drawn beside the free parameters (see :func:`select_derived`)."""
    samples = np.asarray(post.samples, float)
    names = list(post.names)
    units = [post.parameters[n]["unit"] for n in names]
    summaries = [post.parameters[n] for n in names]
    if derived:
        keys = select_derived(post.derived, derived)
        extra, extra_units, extra_summaries = derived_columns(post, keys)
        samples = np.column_stack([samples, extra])
        names, units, summaries = names + keys, units + extra_units, summaries + extra_summaries
    fig, _ = corner_plot(samples, names, units, summaries=summaries)
    try:
        return style.save_png(fig, path, force=force)
    finally:
        style.close(fig)
