"""The corner plot of posterior samples (one histogram per parameter, one scatter per pair).

Drawn with the corner package (Foreman-Mackey 2016, JOSS 1, 24) under the house style; the 16,
50 and 84 % quantiles are marked.
"""

import matplotlib
import numpy as np

from ..errors import UvfitError
from . import style
from .style import DATA_COLOUR, MODEL_COLOUR


def corner_plot(samples, names, units=None, truths=None, title=None):
    """Corner plot of posterior samples (n_samples, n_parameters), with 16/50/84 % quantiles.

    Returns (fig, numbers): ``names``, ``n_samples``, ``median``, ``lower``, ``upper`` (16th and
    84th percentiles) per parameter.
    """
    import corner

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
            titles=list(names),
            fig=fig,
            quantiles=[0.16, 0.5, 0.84],
            show_titles=True,
            title_fmt=".3g",
            range=ranges,
            color=DATA_COLOUR,
            hist_kwargs={"color": DATA_COLOUR},
            truths=truths,
            truth_color=MODEL_COLOUR,
            label_kwargs={"fontsize": 9},
            title_kwargs={"fontsize": 9},
        )
        if title:
            fig.subplots_adjust(top=0.92)
            fig.suptitle(title)
    q = np.percentile(samples, [16, 50, 84], axis=0)
    return fig, {"names": list(names), "n_samples": int(samples.shape[0]), "lower": q[0], "median": q[1], "upper": q[2]}


def write_corner_plot(post, path, force=False):
    """Write the corner plot of a posterior summary (:class:`uvfit.infer.sampling.Posterior`:
    its ordered samples, parameter names and units) as a PNG, atomically; returns the path."""
    units = [post.parameters[n]["unit"] for n in post.names]
    fig, _ = corner_plot(post.samples, post.names, units)
    try:
        return style.save_png(fig, path, force=force)
    finally:
        style.close(fig)
