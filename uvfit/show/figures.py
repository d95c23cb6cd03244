"""The figures of a fit, in one list: what ``uvfit plot --kind`` offers, the demo draws and the
report embeds.

``make_figure(kind, view, ...)`` -> ``(Figure, numbers)``; the caller saves and closes it.
"""

from . import plots
from .sky import sky_figure

#: the figures of a fit: kind -> one-line description
KINDS = {
    "radial": "amplitude and phase against uv distance with residuals",
    "uv": "the (u, v) coverage",
    "closure": "closure phases against time, one panel per distinct triangle",
    "closure_amplitude": "log closure amplitudes against time, one panel per distinct quadrangle",
    "sky": "the model on the sky",
}


#: the (u, v) coverage is coloured by baseline unless another colouring is asked for
UV_DEFAULT_COLOURING = "baseline"
#: with more baselines than this, the (u, v) coverage's default legend is by station
MANY_BASELINES = 21


def make_figure(kind, view, colour_by=None, panels=6, loops="worst"):
    """The figure ``kind`` (a key of :data:`KINDS`) of a :class:`uvfit.show.readback.FitView`.

    ``colour_by`` ("baseline", "station" or "time"; :data:`uvfit.show.plots.COLOURINGS`) colours
    the (u, v) coverage and the data of the radial figure. Without it the radial figure draws the
    data in one colour and the coverage is coloured by baseline, or by station when there are more
    than :data:`MANY_BASELINES` baselines (a legend of stations stays readable). ``panels`` is the
    number of closure panels shown; ``loops`` which: "worst" (largest reduced chi2 first), "best"
    (most informative first) or a list of labels (:func:`uvfit.show.plots.choose_loops`; loops
    through one site are drawn once).
    """
    if kind == "radial":
        return plots.radial_plot(view.vset, view.model_vis, note=view.phase_note, colour_by=colour_by)
    if kind == "uv":
        if colour_by is None:
            many = len(set(view.vset.baseline_labels.tolist())) > MANY_BASELINES
            colour_by = "station" if many else UV_DEFAULT_COLOURING
        return plots.uv_coverage_plot(view.vset, colour_by=colour_by)
    if kind in ("closure", "closure_amplitude"):
        from ..data.sites import find_sites

        make = plots.closure_phase_series if kind == "closure" else plots.closure_amplitude_series
        series = make(view.vset, view.model_vis, systematic=view.systematic)
        sites = find_sites(view.vset)
        groups = [] if sites.one_site else sites.groups
        chosen = plots.choose_loops(series, how=loops, max_panels=panels, sites=groups)
        title = None
        if isinstance(loops, str):
            what = "triangles" if kind == "closure" else "quadrangles"
            quantity = "closure phases" if kind == "closure" else "log closure amplitudes"
            title = f"{quantity} of the {loops} {what} (" + (
                "largest reduced chi2 first)" if loops == "worst" else "most informative first)"
            )
        return plots.closure_plot(series, max_panels=panels, triangles=chosen, title=title)
    if kind == "sky":
        return sky_figure(view)
    raise ValueError(f"unknown figure kind {kind!r}; known: {', '.join(KINDS)}")
