"""The figures by which a fit is judged; one function per figure.

Every function takes arrays or in-memory objects (a VisibilitySet, model visibilities, closure
series, an image), never file names, and returns ``(figure, numbers)``: the matplotlib Figure and a
dict of the numbers drawn, so that tests can check what a figure shows without reading pixels.
The caller writes the figure with :func:`uvfit.show.style.save_png` and closes it.

Orientation (see README, "Conventions"): l (relative right ascension) increases to the east and m
(relative declination) to the north. Sky images and (u, v) coverage are drawn with east to the
LEFT, as the sky is seen, so the u axis increases to the left too (common practice).
"""

import numpy as np
from matplotlib.patches import Circle, Ellipse

from ..errors import UvfitError
from . import style
from .style import DATA_COLOUR, MODEL_COLOUR, OKABE_ITO

# --------------------------------------------------------------------------- helpers


def _hours(time_mjd):
    """Hours since 0 h UTC of the first day in ``time_mjd``, and that day's MJD."""
    time_mjd = np.asarray(time_mjd, float)
    day0 = float(np.floor(np.nanmin(time_mjd))) if time_mjd.size else 0.0
    return (time_mjd - day0) * 24.0, day0


def _wrap_deg(x):
    return (np.asarray(x) + 180.0) % 360.0 - 180.0


def _break_gaps(x, *ys, factor=5.0):
    """Insert NaN where the step in sorted ``x`` exceeds ``factor`` times the median step."""
    x = np.asarray(x, float)
    if x.size < 3:
        return (x, *ys)
    dx = np.diff(x)
    positive = dx[dx > 0]
    if positive.size == 0:
        return (x, *ys)
    cut = np.nonzero(dx > factor * np.median(positive))[0] + 1
    out_x = np.insert(x, cut, np.nan)
    return (out_x, *[np.insert(np.asarray(y, float), cut, np.nan) for y in ys])


def _check_lengths(vset, model_vis):
    model_vis = np.asarray(model_vis, dtype=complex).ravel()
    if model_vis.shape[0] != vset.n:
        raise UvfitError(
            f"model visibilities have {model_vis.shape[0]} rows but the data {vset.n}",
            "evaluate the model at the data's own (u, v)",
        )
    return model_vis


# --------------------------------------------------------------------------- colouring by group

#: the ways the rows of a figure can be coloured
COLOURINGS = ("baseline", "station", "time")


def station_colours(names):
    """{station: colour}: the Okabe-Ito cycle first, then the lighter tab20 colours for more."""
    import matplotlib

    extra = [matplotlib.colors.to_hex(c) for c in matplotlib.colormaps["tab20"].colors[1::2]]
    palette = list(style.CYCLE) + extra
    return {str(n): palette[k % len(palette)] for k, n in enumerate(names)}


def row_groups(station1, station2, colour_by):
    """How the rows of a figure are grouped and drawn when coloured by baseline or by station.

    Returns (groups, key, legend): ``groups`` a list of (label, row mask, marker keywords for
    ``Axes.plot``), ``key`` the group index of every row, ``legend`` a list of (label, colour,
    marker) entries. By baseline: one colour and marker per baseline. By station: each marker is
    split, its left half in the colour of the row's first station and its right half in the second
    station's, and the legend lists the stations (fewer entries than baselines).
    """
    station1 = np.asarray(station1).astype(str)
    station2 = np.asarray(station2).astype(str)
    labels = np.char.add(np.char.add(station1, "-"), station2)
    baselines, index = np.unique(labels, return_inverse=True)
    groups, legend = [], []
    if colour_by == "baseline":
        for i, name in enumerate(baselines):
            marker = style.MARKERS[(i // len(style.CYCLE)) % len(style.MARKERS)]
            colour = style.CYCLE[i % len(style.CYCLE)]
            groups.append((str(name), index == i, {"marker": marker, "color": colour}))
            legend.append((str(name), colour, marker))
        return groups, index, legend
    stations = list(dict.fromkeys(sorted(set(station1.tolist()) | set(station2.tolist()))))
    colours = station_colours(stations)
    for i, name in enumerate(baselines):
        sel = index == i
        a, b = station1[sel][0], station2[sel][0]
        groups.append(
            (
                str(name),
                sel,
                {
                    "marker": "o",
                    "color": colours[a],
                    "markerfacecolor": colours[a],
                    "markerfacecoloralt": colours[b],
                    "fillstyle": "left",
                    "markeredgecolor": "0.25",
                    "markeredgewidth": 0.3,
                },
            )
        )
    legend = [(n, colours[n], "o") for n in stations]
    return groups, index, legend


def _group_legend(fig, legend, title):
    """A legend of (label, colour, marker) entries outside the axes, on the figure's right edge."""
    from matplotlib.lines import Line2D

    handles = [
        Line2D([], [], linestyle="none", marker=m, ms=5, color=c, markeredgecolor="0.25", markeredgewidth=0.3)
        for _, c, m in legend
    ]
    ncol = max(1, int(np.ceil(len(legend) / LEGEND_ROWS)))
    fig.legend(
        handles,
        [lab for lab, _, _ in legend],
        loc="upper right",
        bbox_to_anchor=(0.995, 0.98),
        ncol=ncol,
        fontsize=7,
        title=title,
        title_fontsize=8,
        frameon=False,
        columnspacing=0.8,
        handletextpad=0.3,
    )


#: the legend titles of the groupings
LEGEND_TITLES = {
    "baseline": "baseline",
    "station": "station\n(marker halves: the\nbaseline's two stations)",
}


# --------------------------------------------------------------------------- radial plot


def radial_plot(vset, model_vis, title=None, log_amplitude=False, note=None, colour_by=None):
    """Amplitude and phase against uv distance, data with errors and the model, residuals below.

    ``model_vis`` is the model evaluated at the data's own (u, v) (one complex value per row, Jy).
    The model is drawn as points at the data's uv distances (a 2-D model is not a function of uv
    distance alone). The residual panel shows (|V| - |M|) / sigma and the wrapped phase
    difference divided by its error sigma / |V| (high-SNR error, Chael et al. 2018, ApJ 857, 23).

    ``colour_by`` None draws the data in one colour; "baseline", "station" (split markers, see
    :func:`row_groups`) or "time" (hours of UTC on a sequential map) colour the data points of
    every panel, the model then drawn in black.

    Returns (fig, numbers); numbers holds every plotted array in uv-distance order: ``uv``
    (wavelengths), ``uv_scale`` and ``uv_unit`` of the axis, ``amplitude``, ``sigma``,
    ``model_amplitude`` (Jy), ``phase_deg``, ``phase_sigma_deg``, ``model_phase_deg``,
    ``residual_amplitude``, ``residual_phase`` (both in units of their error), ``order``,
    ``colour_by``, ``colour_key`` (per row: group index or hours; None without colouring) and
    ``groups`` (the legend's labels: baselines or stations).
    """
    if colour_by is not None and colour_by not in COLOURINGS:
        raise UvfitError(f"unknown colouring '{colour_by}'", f"use one of {', '.join(COLOURINGS)}")
    model_vis = _check_lengths(vset, model_vis)
    q = vset.uv_distance
    order = np.argsort(q, kind="stable")
    q = q[order]
    vis = vset.vis[order]
    mod = model_vis[order]
    sigma = vset.sigma[order]
    scale, unit = style.uv_unit(q.max() if q.size else 0.0)
    amp, mamp = np.abs(vis), np.abs(mod)
    with np.errstate(divide="ignore", invalid="ignore"):
        phase_sigma = np.degrees(np.clip(sigma / amp, 0.0, np.pi))
    phase, mphase = np.degrees(np.angle(vis)), np.degrees(np.angle(mod))
    dphase = _wrap_deg(phase - mphase)
    with np.errstate(divide="ignore", invalid="ignore"):
        res_amp = (amp - mamp) / sigma
        res_phase = np.where(phase_sigma > 0, dphase / phase_sigma, np.nan)
    x = q / scale

    hours, day0 = _hours(vset.time[order])
    groups, key, legend = (None, None, [])
    if colour_by in ("baseline", "station"):
        groups, key, legend = row_groups(vset.station1[order], vset.station2[order], colour_by)
    elif colour_by == "time":
        key = hours
    model_colour = MODEL_COLOUR if colour_by is None else "black"

    fig, axes = style.new_figure(3, 1, sharex=True, figsize=(8.0, 8.5), gridspec_kw={"height_ratios": [3, 2, 1.6]})
    with style.style():
        ax_a, ax_p, ax_r = axes
        series = (
            (ax_a, amp, sigma, "o"),
            (ax_p, phase, phase_sigma, "o"),
            (ax_r, res_amp, None, "o"),
            (ax_r, res_phase, None, "^"),
        )
        if groups is not None:
            for g, (_, sel, kw) in enumerate(groups):
                for ax, y, err, marker in series:
                    if err is not None:
                        bar = "data ±1σ" if (g == 0 and ax is ax_a) else None
                        ax.errorbar(
                            x[sel], y[sel], yerr=err[sel], fmt="none", lw=0.5, ecolor="0.6", zorder=1, label=bar
                        )
                    ax.plot(x[sel], y[sel], linestyle="none", ms=3.5, alpha=0.9, zorder=2, **{**kw, "marker": marker})
            _group_legend(fig, legend, LEGEND_TITLES[str(colour_by)])
        elif colour_by == "time":
            for ax, y, err, marker in series:
                if err is not None:
                    bar = "data ±1σ" if ax is ax_a else None
                    ax.errorbar(x, y, yerr=err, fmt="none", lw=0.5, ecolor="0.6", zorder=1, label=bar)
                sc = ax.scatter(x, y, c=key, s=8, marker=marker, cmap=style.SEQUENTIAL_CMAP, linewidths=0, zorder=2)
        else:
            ax_a.errorbar(
                x, amp, yerr=sigma, fmt="o", ms=2.5, lw=0.6, color=DATA_COLOUR, alpha=0.6, label="data ±1σ", zorder=2
            )
            ax_p.errorbar(x, phase, yerr=phase_sigma, fmt="o", ms=2.5, lw=0.6, color=DATA_COLOUR, alpha=0.6, zorder=2)
            ax_r.plot(x, res_amp, "o", ms=2.5, color=DATA_COLOUR, alpha=0.7, label="(|V| − |M|) / σ")
            ax_r.plot(x, res_phase, "^", ms=2.5, color=OKABE_ITO["orange"], alpha=0.7, label="(φ − φ_M) / σ_φ")
        ax_a.plot(x, mamp, ".", ms=2.5, color=model_colour, label="model at the data's (u, v)", zorder=3)
        ax_a.set_ylabel("amplitude (Jy)")
        if log_amplitude:
            ax_a.set_yscale("log")
        else:
            ax_a.set_ylim(bottom=0.0)
        ax_a.legend(loc="upper right", markerscale=2.5)
        ax_p.plot(x, mphase, ".", ms=2.5, color=model_colour, zorder=3)
        ax_p.set_ylabel("phase (deg)")
        ax_p.set_ylim(-190, 190)
        ax_p.set_yticks([-180, -90, 0, 90, 180])
        ax_r.axhline(0.0, color="0.3", lw=0.8)
        finite = np.concatenate([res_amp[np.isfinite(res_amp)], res_phase[np.isfinite(res_phase)]])
        lim = max(5.0, float(np.max(np.abs(finite))) * 1.1) if finite.size else 5.0
        if lim > 30.0:
            # a poor fit: linear within +-3 sigma, logarithmic beyond, so both stay readable
            ax_r.set_yscale("symlog", linthresh=3.0)
            ticks = [10.0**k for k in range(1, int(np.log10(lim)) + 1)]
            ticks = [-t for t in ticks[::-1]] + [0.0] + ticks
            ax_r.set_yticks(ticks)
            ax_r.set_yticklabels([f"{t:g}" for t in ticks])
        ax_r.set_ylim(-lim, lim)
        ax_r.set_ylabel("normalised\nresidual (σ)")
        if colour_by is None:
            ax_r.legend(loc="upper right", ncol=2, markerscale=2.5)
        else:
            ax_r.set_title("residuals: ○ amplitude (|V| − |M|) / σ,  △ phase (φ − φ_M) / σ_φ", fontsize=9)
        ax_r.set_xlabel(f"uv distance ({unit})")
        ax_r.set_xlim(left=0.0)
        head = title or f"{vset.source}: visibilities against uv distance"
        ax_a.set_title(head)
        if note:
            fig.text(0.01, 0.005, note, fontsize=8, color="0.25", ha="left", va="bottom", wrap=True)
        if groups is not None:
            _fit_legend(fig, bottom=0.04 if note else 0.0)
        else:
            fig.tight_layout(rect=(0.0, 0.04 if note else 0.0, 1.0, 1.0))
        if colour_by == "time":
            cb = fig.colorbar(sc, ax=list(axes), shrink=0.6, pad=0.02)
            cb.set_label(f"time (h UTC from MJD {day0:.0f})")
    numbers = {
        "uv": q,
        "uv_scale": scale,
        "uv_unit": unit,
        "order": order,
        "amplitude": amp,
        "sigma": sigma,
        "model_amplitude": mamp,
        "phase_deg": phase,
        "phase_sigma_deg": phase_sigma,
        "model_phase_deg": mphase,
        "residual_amplitude": res_amp,
        "residual_phase": res_phase,
        "colour_by": colour_by,
        "colour_key": key,
        "groups": [lab for lab, _, _ in legend],
    }
    return fig, numbers


# --------------------------------------------------------------------------- (u, v) coverage


def uv_coverage_plot(vset, colour_by="baseline", title=None):
    """The (u, v) coverage, each row and its Hermitian conjugate (-u, -v).

    ``colour_by`` is "baseline" (one colour and marker per baseline), "station" (markers split
    between the colours of the baseline's two stations, a legend by station: readable when there
    are many baselines) or "time" (a sequential map of the hours of UTC). u increases to the LEFT
    (east on the sky), v upward (north).

    Returns (fig, numbers): ``u``, ``v`` (wavelengths, the rows followed by their conjugates),
    ``scale``, ``unit``, ``baselines`` (the baseline labels), ``groups`` (the legend's labels:
    baselines or stations; empty for time), ``colour_key`` (per point: baseline index or hours).
    """
    if colour_by not in COLOURINGS:
        raise UvfitError(f"unknown colouring '{colour_by}'", f"use one of {', '.join(COLOURINGS)}")
    u = np.concatenate([vset.u, -vset.u])
    v = np.concatenate([vset.v, -vset.v])
    scale, unit = style.uv_unit(np.hypot(u, v).max() if u.size else 0.0)
    baselines = np.unique(vset.baseline_labels)
    hours, day0 = _hours(vset.time)
    legend = []
    fig, ax = style.new_figure(figsize=(8.6, 7.0))
    with style.style():
        if colour_by in ("baseline", "station"):
            groups, index, legend = row_groups(vset.station1, vset.station2, colour_by)
            key = np.concatenate([index, index])
            for name, sel, kw in groups:
                both = np.concatenate([sel, sel])
                ms = 2.5 if colour_by == "baseline" else 4.5
                ax.plot(u[both] / scale, v[both] / scale, linestyle="none", ms=ms, label=name, **kw)
            # outside the axes, in as many columns as the height needs (about 22 rows fit)
            _group_legend(fig, legend, LEGEND_TITLES[colour_by])
        else:
            key = np.concatenate([hours, hours])
            sc = ax.scatter(u / scale, v / scale, c=key, s=4, cmap=style.SEQUENTIAL_CMAP, linewidths=0)
            cb = fig.colorbar(sc, ax=ax, shrink=0.85)
            cb.set_label(f"time (h UTC from MJD {day0:.0f})")
        lim = (np.abs(np.concatenate([u, v])).max() / scale * 1.05) if u.size else 1.0
        ax.set_xlim(lim, -lim)  # u increases to the left: east on the sky
        ax.set_ylim(-lim, lim)
        ax.set_aspect("equal")
        ax.set_xlabel(f"u ({unit}), increasing to the left (east)")
        ax.set_ylabel(f"v ({unit}), north up")
        ax.set_title(title or f"{vset.source}: (u, v) coverage with conjugates")
        if colour_by != "time":
            _fit_legend(fig)
        else:
            fig.tight_layout()
    numbers = {
        "u": u,
        "v": v,
        "scale": scale,
        "unit": unit,
        "baselines": baselines.tolist(),
        "groups": [lab for lab, _, _ in legend],
        "colour_key": key,
        "colour_by": colour_by,
    }
    return fig, numbers


#: rows of the baseline legend per column in the (u, v) figure
LEGEND_ROWS = 22


def _fit_legend(fig, bottom=0.0):
    """Make room for the figure's legend (anchored to the figure's right edge, so never cut off):
    the figure is widened by the legend's width and the axes laid out to its left (above
    ``bottom``, a fraction of the height kept for a footnote)."""
    legend = fig.legends[0]
    renderer = fig.canvas.get_renderer()
    box = legend.get_window_extent(renderer)
    legend_w = box.width / fig.dpi + 0.15
    width, height = fig.get_size_inches()
    fig.set_size_inches(width + legend_w - 1.6, max(height, box.height / fig.dpi + 0.4))
    width = fig.get_size_inches()[0]
    fig.tight_layout(rect=(0.0, bottom, 1.0 - legend_w / width, 1.0))


# --------------------------------------------------------------------------- closure phases


def closure_phase_series(vset, model_vis, systematic=0.0, snr_cut=None):
    """Closure phases of every triangle at every time (and channel), data and model.

    Built by the closure layer (:func:`uvfit.stats.closures.build_closures`) with its full
    (redundant) set, so that every triangle can be drawn; the statistics use the non-redundant set.
    Closure phase on stations (a, b, c): arg(V_ab V_bc V_ca), unchanged by any station-based phase
    error; its error sqrt(sum_k (sigma_k / |V_k|)^2) radians at high SNR (Chael et al. 2018,
    ApJ 857, 23), with ``systematic`` (a fraction of |V|) added to each sigma in quadrature and
    rows below ``snr_cut`` (default: the closure layer's) left out.

    Returns a dict of 1-D arrays over the closure phases: ``triangle`` (labels "A-B-C"),
    ``time`` (MJD), ``channel``, ``phase``, ``sigma``, ``model`` (radians) and ``shortest_uv``
    (the shortest of the three baselines, wavelengths); and ``longest_uv``, the longest baseline
    of the set (a number).
    """
    from ..stats.closures import DEFAULT_SNR_CUT, build_closures

    model_vis = _check_lengths(vset, model_vis)
    cut = DEFAULT_SNR_CUT if snr_cut is None else float(snr_cut)
    cp = build_closures(vset, snr_cut=cut, systematic=systematic, full=True, kinds=("phase",))["phase"]
    q = vset.uv_distance
    longest = float(q.max()) if q.size else 0.0
    if cp.n == 0:
        return {
            "triangle": np.zeros(0, str),
            "time": np.zeros(0),
            "channel": np.zeros(0, int),
            "phase": np.zeros(0),
            "sigma": np.zeros(0),
            "model": np.zeros(0),
            "shortest_uv": np.zeros(0),
            "longest_uv": longest,
        }
    return {
        "triangle": cp.labels,
        "time": np.asarray(cp.time, float),
        "channel": np.asarray(cp.channel, int),
        "phase": np.asarray(cp.value, float),
        "sigma": np.asarray(cp.sigma, float),
        "model": cp.evaluate(model_vis),
        "shortest_uv": q[cp.rows].min(axis=1),
        "longest_uv": longest,
    }


#: a triangle whose shortest baseline is below this fraction of the longest is "trivial"
TRIVIAL_FRACTION = 0.01


def rank_triangles(series, max_panels=6):
    """Triangles by information, sum over their closure phases of 1 / sigma^2 (highest first).

    Triangles with a very short baseline (median shortest baseline below ``TRIVIAL_FRACTION`` of
    the longest in the series, e.g. two stations on one site) close to zero whatever the source
    looks like, so they come after every other triangle.
    """
    tri = np.asarray(series["triangle"])
    if tri.size == 0:
        return []
    names, inv = np.unique(tri, return_inverse=True)
    info = np.bincount(inv, weights=1.0 / np.asarray(series["sigma"], float) ** 2, minlength=len(names))
    trivial = np.zeros(len(names), bool)
    shortest = series.get("shortest_uv")
    longest = float(series.get("longest_uv") or 0.0)
    if shortest is not None and len(shortest) == tri.size and longest > 0:
        shortest = np.asarray(shortest, float)
        for i in range(len(names)):
            trivial[i] = np.median(shortest[inv == i]) < TRIVIAL_FRACTION * longest
    order = np.lexsort((names, -info, trivial))  # ties broken by name: a reproducible choice
    return [str(names[i]) for i in order[:max_panels]]


def closure_phase_plot(series, max_panels=6, title=None, triangles=None):
    """Closure phases against time (see :func:`closure_plot`)."""
    return closure_plot(series, max_panels=max_panels, title=title, triangles=triangles)


def closure_amplitude_series(vset, model_vis, systematic=0.0, snr_cut=None):
    """Log closure amplitudes of every quadrangle at every time, data and model: the dict of
    :func:`closure_phase_series` with ``triangle`` holding the quadrangle labels "A-B-C-D"
    (|V_AB| |V_CD| / (|V_AC| |V_BD|)) and ``phase`` / ``model`` the natural logs."""
    from ..stats.closures import DEFAULT_SNR_CUT, build_closures

    model_vis = _check_lengths(vset, model_vis)
    cut = DEFAULT_SNR_CUT if snr_cut is None else float(snr_cut)
    ca = build_closures(vset, snr_cut=cut, systematic=systematic, full=True, kinds=("amplitude",))["amplitude"]
    q = vset.uv_distance
    return {
        "triangle": ca.labels,
        "time": np.asarray(ca.time, float),
        "channel": np.asarray(ca.channel, int),
        "phase": np.asarray(ca.value, float),
        "sigma": np.asarray(ca.sigma, float),
        "model": ca.evaluate(model_vis) if ca.n else np.zeros(0),
        "shortest_uv": q[ca.rows].min(axis=1) if ca.n else np.zeros(0),
        "longest_uv": float(q.max()) if q.size else 0.0,
        "kind": "amplitude",
    }


def choose_loops(series, how="worst", max_panels=6, sites=None):
    """The triangles (or quadrangles) to draw, one panel each: ``how`` "worst" (largest reduced
    chi2 of data against model first), "best" (most informative first, :func:`rank_triangles`),
    or a list of labels such as ["A-B-C", ...] (any station order). Loops that are the same
    through a site (``sites``: lists of station names on one site; A-B-C and A'-B-C with A, A' on
    one site) are drawn once, and loops holding two stations of one site (trivial) are left out,
    except where asked for by name."""
    tri = np.asarray(series["triangle"])
    if tri.size == 0:
        return []
    names = np.unique(tri)
    if not isinstance(how, str):
        wanted = []
        for label in how:
            parts = [p.strip() for p in str(label).split("-") if p.strip()]
            key = "-".join(sorted(parts))
            match = [n for n in names if "-".join(sorted(n.split("-"))) == key]
            if not match:
                raise UvfitError(
                    f"no closure on the stations {label} in the data",
                    "give loops of stations that observe at the same time, e.g. " + ", ".join(names[:3]),
                )
            wanted.append(str(match[0]))
        return wanted
    site_of = {}
    for k, g in enumerate(sites or []):
        for st in g:
            site_of[st] = f"site{k}"
    if how == "best":
        order = rank_triangles(series, max_panels=len(names))
    elif how == "worst":
        _, inv = np.unique(tri, return_inverse=True)
        d = np.asarray(series["phase"], float) - np.asarray(series["model"], float)
        if series.get("kind") != "amplitude":
            d = np.angle(np.exp(1j * d))
        chi = np.bincount(inv, weights=(d / np.asarray(series["sigma"], float)) ** 2, minlength=len(names))
        red = chi / np.bincount(inv, minlength=len(names))
        order = [str(names[i]) for i in np.lexsort((names, -red))]
    else:
        raise UvfitError(f"unknown choice of loops '{how}'", "use worst, best, or a list such as A-B-C,A-B-D")
    out, seen = [], set()
    for label in order:
        mapped = [site_of.get(st, st) for st in label.split("-")]
        if len(set(mapped)) < len(mapped):
            continue  # two stations of one site: trivial
        key = "-".join(sorted(mapped))
        if key in seen:
            continue
        seen.add(key)
        out.append(label)
        if len(out) >= max_panels:
            break
    return out


def closure_plot(series, max_panels=6, title=None, triangles=None):
    """Closure phases against time for the most informative triangles (up to ``max_panels``).

    ``series`` is a dict as returned by :func:`closure_phase_series` (phases in radians, time in
    MJD). Data are drawn with their errors, the model as a line through its values at the same
    times (broken across gaps in the data).

    Returns (fig, numbers): ``triangles`` (chosen, in panel order) and per triangle ``panels``
    {label: {hours, phase_deg, sigma_deg, model_deg}}, and ``day0`` (MJD of 0 h on the axis).
    A series of log closure amplitudes (``kind`` "amplitude", :func:`closure_amplitude_series`)
    is drawn the same way, in natural-log units (the keys keep their names).
    """
    amplitude = series.get("kind") == "amplitude"
    if triangles is None:
        triangles = rank_triangles(series, max_panels)
    if not triangles:
        raise UvfitError(
            "no closed triangle of baselines in the data, so there is no closure phase to plot",
            "closure phases need three stations observing at the same time",
        )
    hours_all, day0 = _hours(series["time"])
    n = len(triangles)
    ncol = 1 if n == 1 else 2
    nrow = int(np.ceil(n / ncol))
    fig, axes = style.new_figure(nrow, ncol, sharex=True, figsize=(10.0, 2.6 * nrow + 1.0), squeeze=False)
    panels = {}
    with style.style():
        for k, tri in enumerate(triangles):
            ax = axes[k // ncol][k % ncol]
            sel = np.asarray(series["triangle"]) == tri
            order = np.argsort(hours_all[sel], kind="stable")
            h = hours_all[sel][order]
            if amplitude:
                ph = np.asarray(series["phase"])[sel][order]
                sg = np.asarray(series["sigma"])[sel][order]
                md = np.asarray(series["model"])[sel][order]
            else:
                ph = np.degrees(np.asarray(series["phase"])[sel][order])
                sg = np.degrees(np.clip(np.asarray(series["sigma"])[sel][order], 0, np.pi))
                md = np.degrees(np.asarray(series["model"])[sel][order])
            ax.errorbar(h, ph, yerr=sg, fmt="o", ms=3, lw=0.7, color=DATA_COLOUR, alpha=0.7, label="data ±1σ")
            hx, mx = _break_gaps(h, md)
            ax.plot(hx, mx, "-", lw=1.4, color=MODEL_COLOUR, label="model", zorder=5)  # model above the points
            if amplitude:
                ax.set_title(f"{tri}   (N = {sel.sum()}, median σ = {np.median(sg):.3g})", fontsize=10)
                ax.set_ylabel("log closure amplitude")
            else:
                ax.set_title(f"{tri}   (N = {sel.sum()}, median σ = {np.median(sg):.1f}°)", fontsize=10)
                ax.set_ylabel("closure phase (deg)")
                ax.set_ylim(-190, 190)
                ax.set_yticks([-180, -90, 0, 90, 180])
            if k == 0:
                ax.legend(loc="upper right", fontsize=8)
            panels[tri] = {"hours": h, "phase_deg": ph, "sigma_deg": sg, "model_deg": md}
        for k in range(n, nrow * ncol):
            axes[k // ncol][k % ncol].set_visible(False)
        for c in range(ncol):
            last = max(r for r in range(nrow) if r * ncol + c < n) if n > c else 0
            axes[last][c].set_xlabel(f"time (h UTC from MJD {day0:.0f})")
            axes[last][c].xaxis.set_tick_params(labelbottom=True)
        fig.suptitle(
            title or ("log closure amplitudes" if amplitude else "closure phases of the most informative triangles")
        )
        fig.tight_layout()
    return fig, {"triangles": list(triangles), "panels": panels, "day0": day0}


# --------------------------------------------------------------------------- the model on the sky


def sky_plot(
    image, extent, outlines=(), resolution=None, unit="mas", title=None, note=None, vmax=None, draw_image=True
):
    """The fitted model on the sky, east to the LEFT, with component outlines and the resolution.

    ``image``: 2-D brightness, Jy per pixel, ``image[j, i]`` at relative declination y_j and
    relative right ascension x_i (x increasing east); ``extent`` = (x_min, x_max, y_min, y_max),
    the outer pixel edges in ``unit``. ``outlines``: dicts with ``label``, ``kind`` ("ellipse" for
    a Gaussian's FWHM, "circle" for a disk or sphere edge, "ring", "point"), ``x``, ``y`` (centre,
    ``unit``), ``major``, ``minor`` (full axes, ``unit``) and ``pa_deg`` (major axis, north through
    east). ``resolution``: the nominal resolution lambda / B_max in ``unit``, drawn as a circle of
    that diameter in the lower left corner. ``vmax``: top of the colour scale (Jy per square
    ``unit``; default the brightest pixel). An outline's ``position_error`` ({major, minor,
    pa_deg}, the 1-sigma ellipse) is drawn dotted around its centre. ``draw_image`` False (every
    component compact) draws the components as markers with no image and no colour bar. A
    resolution larger than a third of the field is written, not drawn.

    Returns (fig, numbers): ``image`` (Jy per square ``unit``), ``extent``, ``peak_xy`` (position of
    the brightest pixel), ``outlines``, ``resolution``, ``unit``, ``image_drawn``,
    ``resolution_drawn``.
    """
    image = np.asarray(image, float)
    if image.ndim != 2 or image.size == 0:
        raise UvfitError("the sky image must be a 2-D array")
    x0, x1, y0, y1 = (float(e) for e in extent)
    ny, nx = image.shape
    pixel_area = abs((x1 - x0) / nx * (y1 - y0) / ny)
    brightness = image / pixel_area
    label = style.angle_label(unit)
    j, i = np.unravel_index(np.argmax(brightness), brightness.shape)
    peak = (x0 + (i + 0.5) * (x1 - x0) / nx, y0 + (j + 0.5) * (y1 - y0) / ny)
    fig, ax = style.new_figure(figsize=(7.6, 6.6))
    with style.style():
        if draw_image:
            if vmax is None:
                top = float(np.max(brightness))
                vmax = top if np.isfinite(top) and top > 0 else 1.0
            im = ax.imshow(
                brightness,
                origin="lower",
                extent=(x0, x1, y0, y1),
                cmap=style.IMAGE_CMAP,
                vmin=0.0,
                vmax=vmax,
                interpolation="nearest",
                aspect="equal",
            )
            cb = fig.colorbar(im, ax=ax, shrink=0.85)
            cb.set_label(f"brightness (Jy / {label}²)")
        else:
            ax.set_aspect("equal")
        halo = {"facecolor": "white", "alpha": 0.8, "edgecolor": "none", "pad": 1.5}
        for k, o in enumerate(outlines):
            colour = style.CYCLE[(k + 1) % len(style.CYCLE)]
            if colour == OKABE_ITO["black"] or colour == OKABE_ITO["blue"]:
                colour = OKABE_ITO["orange"] if k % 2 else OKABE_ITO["sky_blue"]
            kind = o.get("kind", "point")
            x, y = float(o["x"]), float(o["y"])
            if colour == OKABE_ITO["yellow"] and not draw_image:
                colour = OKABE_ITO["reddish_purple"]
            if kind == "point" or not o.get("major"):
                if draw_image:
                    ax.plot([x], [y], marker="+", ms=12, mew=2, color=colour)
                else:
                    ax.plot([x], [y], marker="o", ms=8, color=colour, markeredgecolor="black", mew=0.8)
            else:
                major = float(o["major"])
                minor = float(o.get("minor", major) or major)
                pa = float(o.get("pa_deg", 0.0) or 0.0)
                # data axes: x east, y north; the major axis points to (sin pa, cos pa), whose
                # angle from +x is 90 deg - pa (the inverted x axis then shows it as on the sky)
                ax.add_patch(
                    Ellipse(
                        (x, y),
                        width=major,
                        height=minor,
                        angle=90.0 - pa,
                        fill=False,
                        lw=1.8,
                        color=colour,
                        linestyle="--" if kind == "ring" else "-",
                    )
                )
            err = o.get("position_error")
            if err and err.get("major", 0) > 0:
                ax.add_patch(
                    Ellipse(
                        (x, y),
                        width=float(err["major"]),
                        height=float(err["minor"]),
                        angle=90.0 - float(err["pa_deg"]),
                        fill=False,
                        lw=1.2,
                        linestyle=":",
                        color="white" if draw_image else colour,
                        gid="position_error",
                    )
                )
            # labels alternate above and below their centre, so neighbours do not overwrite
            ax.annotate(
                o.get("label", f"c{k}"),
                (x, y),
                xytext=(6, 6 if k % 2 == 0 else -16),
                textcoords="offset points",
                fontsize=9,
                color="black",
                bbox=halo,
            )
        width = abs(x1 - x0)
        resolution_drawn = False
        if resolution and np.isfinite(resolution) and resolution > width / 3.0:
            ax.annotate(
                f"λ/B_max = {resolution:.3g} {label}, larger than this field: the structure drawn is finer "
                "than the nominal resolution",
                (0.02, 0.02),
                xycoords="axes fraction",
                ha="left",
                va="bottom",
                fontsize=8,
                wrap=True,
                bbox=halo,
            )
        elif resolution and np.isfinite(resolution) and resolution > 0:
            resolution_drawn = True
            # lower left on the sky = large x (east) and small y, since x increases to the left
            r = 0.5 * float(resolution)
            cx = max(x0, x1) - 0.06 * width - r
            cy = min(y0, y1) + 0.06 * abs(y1 - y0) + r
            ax.add_patch(
                Circle((cx, cy), r, fill=True, facecolor="white", alpha=0.5, edgecolor="white", lw=1.2, hatch="///")
            )
            small = 2 * r < 0.01 * width
            ax.annotate(
                f"λ/B_max = {resolution:.3g} {label}" + (" (too small to draw)" if small else ""),
                (cx + r, cy + r),
                xytext=(0, 4),
                textcoords="offset points",
                ha="left",
                fontsize=8,
                bbox=halo,
            )
        ax.grid(False)
        ax.set_xlim(max(x0, x1), min(x0, x1))  # east to the left
        ax.set_ylim(min(y0, y1), max(y0, y1))
        ax.set_xlabel(f"relative right ascension ({label}), east to the left")
        ax.set_ylabel(f"relative declination ({label}), north up")
        ax.set_title(title or "fitted model on the sky")
        if note:
            fig.text(0.01, 0.005, note, fontsize=8, color="0.25", ha="left", va="bottom")
        fig.tight_layout()
    numbers = {
        "image": brightness,
        "extent": (x0, x1, y0, y1),
        "peak_xy": peak,
        "outlines": list(outlines),
        "resolution": resolution,
        "unit": unit,
        "image_drawn": bool(draw_image),
        "resolution_drawn": resolution_drawn,
    }
    return fig, numbers


def nominal_resolution(vset):
    """Nominal resolution lambda / B_max in radians: 1 / (longest projected baseline in wavelengths).

    (common practice; u, v are already in wavelengths.)
    """
    q = vset.uv_distance
    if q.size == 0 or q.max() <= 0:
        return float("nan")
    return 1.0 / float(q.max())
