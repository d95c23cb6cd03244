"""Shared look of every figure: palette, fonts, units of the axes, and writing PNGs reproducibly.

The palette is the Okabe-Ito set of eight colours, distinguishable with the common forms of colour
blindness (Okabe & Ito 2008, "Color Universal Design"; the hex values are common practice). Figures
are drawn on the Agg canvas without pyplot, so nothing needs a display and no global figure state
is touched (importing this module changes no one's backend).
"""

import io

import matplotlib
import numpy as np
from cycler import cycler
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from ..outputs import atomic_write

#: Okabe-Ito colours, in their usual order
OKABE_ITO = {
    "black": "#000000",
    "orange": "#E69F00",
    "sky_blue": "#56B4E9",
    "bluish_green": "#009E73",
    "yellow": "#F0E442",
    "blue": "#0072B2",
    "vermillion": "#D55E00",
    "reddish_purple": "#CC79A7",
}
#: colours for categories (baselines, components), yellow last because it prints faintly
CYCLE = [
    OKABE_ITO[k]
    for k in ("blue", "vermillion", "bluish_green", "orange", "reddish_purple", "sky_blue", "black", "yellow")
]
#: markers cycled together with the colours so that more than eight categories stay distinct
MARKERS = ["o", "s", "^", "D", "v", "P", "X", "*"]
DATA_COLOUR = OKABE_ITO["blue"]
MODEL_COLOUR = OKABE_ITO["vermillion"]
#: a perceptually uniform map readable in grey and by colour-blind readers
SEQUENTIAL_CMAP = "cividis"
#: the map of sky images (brightness from dark to light; monotonic in lightness)
IMAGE_CMAP = "cividis"

DPI = 110

RC = {
    "font.size": 11,
    "axes.titlesize": 12,
    "axes.labelsize": 11,
    "xtick.labelsize": 10,
    "ytick.labelsize": 10,
    "legend.fontsize": 9,
    "axes.grid": True,
    "grid.alpha": 0.3,
    "grid.linewidth": 0.6,
    "axes.prop_cycle": cycler(color=CYCLE),
    "savefig.facecolor": "white",
    "figure.facecolor": "white",
    "svg.hashsalt": "uvfit",
    "path.simplify": False,
}


def new_figure(nrows=1, ncols=1, figsize=None, grid=True, **kwargs):
    """(Figure, axes) like ``subplots``, under the house style, on an Agg canvas."""
    with matplotlib.rc_context({**RC, "axes.grid": bool(grid)}):
        fig = Figure(figsize=figsize)
        FigureCanvasAgg(fig)
        axes = fig.subplots(nrows, ncols, **kwargs)
    return fig, axes


def style():
    """Context manager applying the house style while axes are drawn."""
    return matplotlib.rc_context(RC)


# --------------------------------------------------------------------------- units
_UV_UNITS = ((1e9, "Gλ"), (1e6, "Mλ"), (1e3, "kλ"), (1.0, "λ"))


def uv_unit(max_uv):
    """(scale, label) so that ``max_uv / scale`` lies between 1 and 1000 (wavelengths)."""
    max_uv = float(np.nanmax(np.abs(max_uv))) if np.size(max_uv) else 0.0
    for scale, label in _UV_UNITS:
        if max_uv >= scale:
            return scale, label
    return 1.0, "λ"


_ANGLE_LABELS = {"uas": "µas", "μas": "µas", "arcsec": "arcsec", "arcmin": "arcmin"}


def angle_label(unit):
    """How an angular unit's name is printed on an axis ("uas" as "µas")."""
    return _ANGLE_LABELS.get(str(unit), str(unit))


# --------------------------------------------------------------------------- writing
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
_PNG_METADATA = {"Software": None, "Creation Time": None}


def png_bytes(fig, dpi=DPI):
    """The figure as PNG bytes, with no software or time stamp (the same figure, the same bytes)."""
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=dpi, metadata=_PNG_METADATA)
    return buffer.getvalue()


def save_png(fig, path, force=False, dpi=DPI):
    """Write the figure as a PNG through the atomic, no-overwrite output rule; returns the path."""
    return atomic_write(path, png_bytes(fig, dpi=dpi), force=force)


def close(fig):
    """Release a figure's drawing (figures made here are not registered with pyplot)."""
    fig.clear()
