"""The fitted model as a picture: its rendered image, each component's outline and the resolution.

Outlines: the FWHM ellipse of a Gaussian, the edge of a disk or sphere, the ring itself, the outer
edge of a shell, a cross for a point. The field of view covers every component with a margin, and
at least a few times the nominal resolution lambda / B_max = 1 / max(uv distance) (common practice).
"""
import numpy as np

from . import plots


def _outline(member, unit_label):
    shape, p = member["shape"], member["parameters"]
    o = {"label": f"{member['name']} ({member['flux']:.3g} Jy)", "x": float(member["east"]),
         "y": float(member["north"]), "kind": "point", "major": 0.0, "minor": 0.0, "pa_deg": 0.0,
         "shape": shape}
    if shape == "gaussian":
        o.update(kind="ellipse", major=abs(p["fwhm"]), minor=abs(p["fwhm"]))
    elif shape == "elliptical_gaussian":
        o.update(kind="ellipse", major=abs(p["fwhm"]), minor=abs(p["fwhm"] * p["axis_ratio"]),
                 pa_deg=float(p["position_angle"]))
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
    unit = getattr(model, "angular_unit_text", "")
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


def _deposit(shape, p, l0, m0, flux, l_edges, m_edges):
    """Flux per pixel of a shape whose brightness is singular (a thin ring), from its nodes."""
    l, m, w = shape.sample_points(p)
    img, _, _ = np.histogram2d(np.asarray(m) + m0, np.asarray(l) + l0, bins=(m_edges, l_edges),
                               weights=flux * np.asarray(w))
    return img


def render(model, npix, width, frequency=None, centre=(0.0, 0.0)):
    """(image Jy per pixel, l axis, m axis) on the grid of ``model.render``, component by component.

    A shape whose brightness is singular (all its flux on a curve, e.g. a thin ring) says so with
    ``singular(p)``; its flux goes into the pixels under its ``sample_points`` nodes. Every other
    component is sampled with its ``brightness`` and scaled so that its pixels hold its flux (a
    sharp edge sampled on a grid, or a brightness given per steradian, then still shows the right
    total: the picture is for the eye, the numbers come from the visibilities).
    """
    step = float(width) / npix
    axis = (np.arange(npix) - npix // 2) * step
    l_axis, m_axis = axis + float(centre[0]), axis + float(centre[1])
    rad = float(model.rad_per_unit)
    ll, mm = np.meshgrid(l_axis * rad, m_axis * rad)
    l_edges = (np.append(l_axis, l_axis[-1] + step) - step / 2) * rad
    m_edges = (np.append(m_axis, m_axis[-1] + step) - step / 2) * rad
    values = model.values()
    img = np.zeros(ll.shape)
    for c in model.components:
        local = {ln: values[f"{c.name}.{ln}"] for ln in c.parameter_names()}
        p = c.shape_values(local, rad)
        flux = c.flux_at(frequency, local)
        singular = getattr(c.shape, "singular", None)
        if callable(singular) and singular(p) and hasattr(c.shape, "sample_points"):
            img += _deposit(c.shape, p, float(local["east"]) * rad, float(local["north"]) * rad,
                            flux, l_edges, m_edges)
            continue
        part = np.real(c.brightness(ll, mm, local, rad, frequency))
        total = float(part.sum())
        if total != 0.0 and np.isfinite(total):
            part = part * (flux / total)
        img += part
    return img, l_axis, m_axis


def sky_figure(view, npix=256, title=None):
    """The sky plot of a FitView's model: (fig, numbers) as :func:`uvfit.show.plots.sky_plot`."""
    model, vset = view.model, view.vset
    frequency = float(np.median(vset.frequency)) if vset.n else None
    unit = getattr(model, "angular_unit_text", view.angular_unit)
    resolution = plots.nominal_resolution(vset) / float(model.rad_per_unit)
    outlines = component_outlines(model, frequency)
    centre, width = field(outlines, resolution)
    image, l_axis, m_axis = render(model, npix, width, frequency=frequency, centre=centre)
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
            masked[max(j - 2, 0):j + 3, max(i - 2, 0):i + 3] = 0.0
        if masked.max() > 0:
            vmax = float(masked.max()) / step ** 2
    note = ("Compact components (+) saturate the colour scale." if vmax is not None else None)
    fig, numbers = plots.sky_plot(image, extent, outlines, resolution=resolution, unit=unit,
                                  title=title or f"{vset.source}: fitted model on the sky",
                                  note=note, vmax=vmax)
    numbers["centre"] = centre
    return fig, numbers
