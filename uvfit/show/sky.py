"""The fitted model as a picture: its rendered image, each component's outline and the resolution.

Outlines: the FWHM ellipse of a Gaussian, the edge of a disk or sphere, the ring itself, the outer
edge of a shell, a marker for a point. The field of view follows the fitted structure: it holds
every component (its outline and its position error) with a margin, however small that is against
the nominal resolution lambda / B_max = 1 / max(uv distance) (common practice); a resolution larger
than the field is stated, not drawn. When every component is compact the figure shows markers
only, without an image or a colour bar.

Position errors: the 1-sigma ellipse of each member's (east, north) from the fit's covariance,
propagated to the member's position by central differences (first-order propagation, e.g.
Bevington & Robinson, "Data Reduction and Error Analysis", 3rd ed. 2003, ch. 3); the ellipse of a
2-D Gaussian at Mahalanobis distance 1 holds 1 - exp(-1/2) = 39 % of the probability.
Fluxes are written beside a component only where the fit measured them.
"""

import numpy as np

from . import plots

#: the field is this many times the extent of the fitted structure
FIELD_MARGIN = 1.5


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
    kind, major, minor, pa_deg = member["member"].outline(p)
    o.update(kind=kind, major=float(major), minor=float(minor), pa_deg=float(pa_deg))
    return o


def _measured(fit, model, component):
    """(measured, fixed) of a component's flux as the fit records them."""
    fs = (fit or {}).get("flux_scale") or {}
    if fs.get("measured_by_mode") is False:
        return False, False
    entry = ((fit or {}).get("parameters") or {}).get(model.flux_names().get(component, ""), {})
    if not isinstance(entry, dict):
        return True, False
    if entry.get("measured") is False:
        return False, False
    fixed = entry.get("free") is False and entry.get("tie") is None and "free" in entry
    return True, bool(fixed)


def position_covariances(model, fit, frequency=None):
    """{member name: 2x2 covariance of its (east, north)} from the fit's covariance matrix.

    The fit records the covariance of its free parameters (``covariance``: names and matrix,
    model units); each member's position is differentiated with respect to them by central
    differences. Members whose position no free parameter moves are left out; so is everything
    when the fit has no usable covariance.
    """
    cov = (fit or {}).get("covariance") or {}
    names = cov.get("names") if isinstance(cov, dict) else None
    matrix = cov.get("matrix") if isinstance(cov, dict) else None
    if not names or matrix is None:
        return {}
    c = np.asarray(matrix, float)
    names = [n for n in names if n in model.parameters]
    if c.shape != (len(names), len(names)) or not np.all(np.isfinite(c)):
        return {}
    base = model.members(frequency=frequency)
    keys = [m["name"] for m in base]
    grad = np.zeros((len(keys), 2, len(names)))
    for k, name in enumerate(names):
        p = model.parameters[name]
        sd = float(np.sqrt(max(c[k, k], 0.0)))
        step = 1e-3 * sd if sd > 0 else 1e-6 * max(abs(float(p.value)), 1.0)
        moved = []
        for sign in (1.0, -1.0):
            m = model.copy()
            m.parameters[name].value = float(p.value) + sign * step
            moved.append({x["name"]: (x["east"], x["north"]) for x in m.members(frequency=frequency)})
        for i, key in enumerate(keys):
            (e1, n1), (e2, n2) = moved[0][key], moved[1][key]
            grad[i, :, k] = [(e1 - e2) / (2 * step), (n1 - n2) / (2 * step)]
    out = {}
    for i, key in enumerate(keys):
        if np.any(grad[i] != 0.0):
            out[key] = grad[i] @ c @ grad[i].T
    return out


def error_ellipse(cov):
    """The 1-sigma ellipse of a 2x2 (east, north) covariance: {major, minor (full axes),
    pa_deg (the major axis, north through east, in [0, 180))}."""
    values, vectors = np.linalg.eigh(np.asarray(cov, float))
    values = np.clip(values, 0.0, None)
    east, north = vectors[:, 1]
    return {
        "major": 2.0 * float(np.sqrt(values[1])),
        "minor": 2.0 * float(np.sqrt(values[0])),
        "pa_deg": float(np.degrees(np.arctan2(east, north)) % 180.0),
    }


def component_outlines(model, frequency=None, fit=None):
    """Outline dicts (see :func:`uvfit.show.plots.sky_plot`) of every member of the model.

    With the fit's record ``fit``: a member's label gives its flux only where the fit measured it
    ("fixed" where the model held it), and ``position_error`` holds its 1-sigma position ellipse
    (:func:`error_ellipse`) where the fit's covariance moves it.
    """
    unit = model.angular_unit_text
    covs = position_covariances(model, fit, frequency) if fit is not None else {}
    out = []
    for m in model.members(frequency=frequency):
        o = _outline(m, unit)
        measured, fixed = _measured(fit, model, m["component"]) if fit is not None else (True, False)
        o["flux_measured"] = measured
        if not measured:
            o["label"] = str(m["name"])
        elif fixed:
            o["label"] = f"{m['name']} ({m['flux']:.3g} Jy, fixed)"
        if m["name"] in covs:
            o["position_error"] = error_ellipse(covs[m["name"]])
        out.append(o)
    return out


def field(outlines, resolution):
    """(centre, full width) of a square field holding every outline and position ellipse, in the
    model's unit: :data:`FIELD_MARGIN` times the structure's extent. Only a structure without
    extent (one point) takes its width from the resolution (four times lambda / B_max)."""
    xs = np.array([o["x"] for o in outlines], float)
    ys = np.array([o["y"] for o in outlines], float)
    size = np.array([max(o["major"], (o.get("position_error") or {}).get("major", 0.0)) for o in outlines], float)
    lo_x, hi_x = np.min(xs - size), np.max(xs + size)
    lo_y, hi_y = np.min(ys - size), np.max(ys + size)
    centre = (0.5 * (lo_x + hi_x), 0.5 * (lo_y + hi_y))
    width = FIELD_MARGIN * max(hi_x - lo_x, hi_y - lo_y)
    if not np.isfinite(width) or width <= 0:
        width = 4.0 * resolution if np.isfinite(resolution) and resolution > 0 else 1.0
    return centre, float(width)


def sky_figure(view, npix=256, title=None):
    """The sky plot of a FitView's model: (fig, numbers) as :func:`uvfit.show.plots.sky_plot`."""
    model, vset = view.model, view.vset
    frequency = float(np.median(vset.frequency)) if vset.n else None
    unit = model.angular_unit_text
    resolution = plots.nominal_resolution(vset) / float(model.rad_per_unit)
    outlines = component_outlines(model, frequency, fit=view.fit)
    centre, width = field(outlines, resolution)
    image, l_axis, m_axis = model.render(npix, width, frequency=frequency, centre=centre)
    step = width / npix
    extent = (l_axis[0] - step / 2, l_axis[-1] + step / 2, m_axis[0] - step / 2, m_axis[-1] + step / 2)
    # compact members put their flux in a pixel or two and would saturate the scale: set the scale
    # by the extended emission and mark the compact members with their outlines
    compact = [o for o in outlines if o["kind"] == "point" or o["major"] < 2 * step]
    everything_compact = len(compact) == len(outlines)
    vmax = None
    if compact and not everything_compact:
        masked = image.copy()
        for o in compact:
            i = int(np.clip(np.round((o["x"] - l_axis[0]) / step), 0, npix - 1))
            j = int(np.clip(np.round((o["y"] - m_axis[0]) / step), 0, npix - 1))
            masked[max(j - 2, 0) : j + 3, max(i - 2, 0) : i + 3] = 0.0
        if masked.max() > 0:
            vmax = float(masked.max()) / step**2
    notes = []
    if everything_compact:
        notes.append("Every component is compact: markers at their positions, no brightness scale.")
    elif vmax is not None:
        notes.append("Compact components (+) saturate the colour scale.")
    if any("position_error" in o for o in outlines):
        notes.append("Dotted: 1σ position errors from the fit's covariance.")
    if view.flux_note:
        notes.append(view.flux_note)
    fig, numbers = plots.sky_plot(
        image,
        extent,
        outlines,
        resolution=resolution,
        unit=unit,
        title=title or f"{vset.source}: fitted model on the sky",
        note=" ".join(notes) or None,
        vmax=vmax,
        draw_image=not everything_compact,
    )
    numbers["centre"] = centre
    return fig, numbers
