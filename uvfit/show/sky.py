"""The fitted model as a picture: its rendered image, each component's outline and the resolution.

Outlines: the FWHM ellipse of a Gaussian, the edge of a disk or sphere, the ring itself, the outer
edge of a shell, a cross for a point. The field of view covers every component with a margin, and
at least a few times the nominal resolution lambda / B_max = 1 / max(uv distance) (common practice).
"""

import numpy as np

from . import plots


def _outline(member, unit_label):
    shape, p = member["shape"], member["parameters"]
    o = {
        "label": f"{member['name']} ({member['flux']:.3g} Jy)",
        "x": float(member["east"]),
        "y": float(member["north"]),
        "kind": "point",
        "major": 0.0,
        "minor": 0.0,
        "pa_deg": 0.0,
        "shape": shape,
    }
    if shape == "gaussian":
        o.update(kind="ellipse", major=abs(p["fwhm"]), minor=abs(p["fwhm"]))
    elif shape == "elliptical_gaussian":
        o.update(
            kind="ellipse",
            major=abs(p["fwhm"]),
            minor=abs(p["fwhm"] * p["axis_ratio"]),
            pa_deg=float(p["position_angle"]),
        )
    elif shape == "disk":
        o.update(kind="circle", major=abs(p["diameter"]), minor=abs(p["diameter"]))
    elif shape in ("ring", "ring_modulated"):
        o.update(kind="ring", major=abs(p["diameter"]), minor=abs(p["diameter"]))
    elif shape == "sphere":
        o.update(kind="circle", major=2 * abs(p["radius"]), minor=2 * abs(p["radius"]))
    elif shape == "thin_shell":
        o.update(kind="ring", major=2 * abs(p["radius"]), minor=2 * abs(p["radius"]))
    elif shape == "shell":
        o.update(kind="circle", major=2 * abs(p["outer_radius"]), minor=2 * abs(p["outer_radius"]))
    return o


def component_outlines(model, frequency=None):
    """Outline dicts (see :func:`uvfit.show.plots.sky_plot`) of every member of the model."""
    unit = model.angular_unit_text
    return [_outline(m, unit) for m in model.members(frequency=frequency)]


def field(outlines, resolution):
    """(centre, full width) of a square field holding every outline, in the model's unit."""
    xs = np.array([o["x"] for o in outlines], float)
    ys = np.array([o["y"] for o in outlines], float)
    size = np.array([o["major"] for o in outlines], float)
    lo_x, hi_x = np.min(xs - size), np.max(xs + size)
    lo_y, hi_y = np.min(ys - size), np.max(ys + size)
    centre = (0.5 * (lo_x + hi_x), 0.5 * (lo_y + hi_y))
    width = 1.3 * max(hi_x - lo_x, hi_y - lo_y)
    if np.isfinite(resolution) and resolution > 0:
        width = max(width, 4.0 * resolution)
    if not np.isfinite(width) or width <= 0:
        width = 1.0
    return centre, width


def sky_figure(view, npix=256, title=None):
    """The sky plot of a FitView's model: (fig, numbers) as :func:`uvfit.show.plots.sky_plot`."""
    model, vset = view.model, view.vset
    frequency = float(np.median(vset.frequency)) if vset.n else None
    unit = model.angular_unit_text
    resolution = plots.nominal_resolution(vset) / float(model.rad_per_unit)
    outlines = component_outlines(model, frequency)
    centre, width = field(outlines, resolution)
    image, l_axis, m_axis = model.render(npix, width, frequency=frequency, centre=centre)
    step = width / npix
    extent = (l_axis[0] - step / 2, l_axis[-1] + step / 2, m_axis[0] - step / 2, m_axis[-1] + step / 2)
    # compact members put their flux in a pixel or two and would saturate the scale: set the scale
    # by the extended emission and mark the compact members with their outlines
    compact = [o for o in outlines if o["kind"] == "point" or o["major"] < 2 * step]
    vmax = None
    if compact and len(compact) < len(outlines):
        masked = image.copy()
        for o in compact:
            i = int(np.clip(np.round((o["x"] - l_axis[0]) / step), 0, npix - 1))
            j = int(np.clip(np.round((o["y"] - m_axis[0]) / step), 0, npix - 1))
            masked[max(j - 2, 0) : j + 3, max(i - 2, 0) : i + 3] = 0.0
        if masked.max() > 0:
            vmax = float(masked.max()) / step**2
    note = "Compact components (+) saturate the colour scale." if vmax is not None else None
    if view.flux_note:
        note = view.flux_note if note is None else f"{note} {view.flux_note}"
    fig, numbers = plots.sky_plot(
        image,
        extent,
        outlines,
        resolution=resolution,
        unit=unit,
        title=title or f"{vset.source}: fitted model on the sky",
        note=note,
        vmax=vmax,
    )
    numbers["centre"] = centre
    return fig, numbers
