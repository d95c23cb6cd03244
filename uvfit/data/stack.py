"""Several visibility sets of one source as one: the rows of a joint fit over files.

The sets must observe the same source at the same phase centre (a visibility's phase refers to
its phase centre; rows of two centres cannot share one model without a shift). Each set's
channel indices are moved past those of the sets before it, so the channels of different files
never share an index (``channel_offsets`` in ``meta``); scan numbers likewise. The station table
is the union of the sets' tables (the first known position of each name).
"""

from __future__ import annotations

import numpy as np

from ..errors import DataError
from .visset import _ROW_FIELDS, StationTable, VisibilitySet

#: phase centres closer than this (arcsec) are the same centre
CENTRE_TOLERANCE_ARCSEC = 1e-3


def _separation_arcsec(ra1, dec1, ra2, dec2):
    """Angular distance (arcsec) by the haversine formula (common practice)."""
    r1, d1, r2, d2 = np.radians([ra1, dec1, ra2, dec2])
    h = np.sin((d2 - d1) / 2) ** 2 + np.cos(d1) * np.cos(d2) * np.sin((r2 - r1) / 2) ** 2
    return float(np.degrees(2 * np.arcsin(np.sqrt(min(1.0, h)))) * 3600.0)


def stack_sets(sets: list[VisibilitySet], labels: list[str] | None = None) -> VisibilitySet:
    """One VisibilitySet holding the rows of ``sets`` in order (see the module docstring).

    ``labels`` name the sets in messages and in ``meta["stacked"]`` (default "set 1", ...).
    Raises DataError for sets of different sources or phase centres."""
    if not sets:
        raise DataError("no visibility sets to combine", "give at least one data file")
    labels = list(labels) if labels is not None else [f"set {k + 1}" for k in range(len(sets))]
    first = sets[0]
    for label, vs in zip(labels[1:], sets[1:]):
        if str(vs.source).strip().upper() != str(first.source).strip().upper():
            raise DataError(
                f"{label} observes {vs.source!r}, {labels[0]} observes {first.source!r}: one model cannot fit both",
                "fit files of one source together",
            )
        known = all(np.isfinite([vs.ra_deg, vs.dec_deg, first.ra_deg, first.dec_deg]))
        if known:
            sep = _separation_arcsec(first.ra_deg, first.dec_deg, vs.ra_deg, vs.dec_deg)
            if sep > CENTRE_TOLERANCE_ARCSEC:
                raise DataError(
                    f"{label} has its phase centre {sep:.4g} arcsec from that of {labels[0]} "
                    f"(RA {vs.ra_deg:.7f}, Dec {vs.dec_deg:+.7f} against RA {first.ra_deg:.7f}, "
                    f"Dec {first.dec_deg:+.7f} deg)",
                    "shift the files to one phase centre before fitting them together",
                )
    columns: dict[str, list] = {name: [] for name in _ROW_FIELDS}
    channel_offsets, scan_offsets, rows = [], [], []
    next_channel, next_scan = 0, 0
    for vs in sets:
        channel_offsets.append(next_channel)
        scan_offsets.append(next_scan)
        rows.append(int(vs.n))
        for name in _ROW_FIELDS:
            value = getattr(vs, name)
            if name == "channel":
                value = value + next_channel
            elif name == "scan":
                value = np.where(value >= 0, value + next_scan, -1)
            columns[name].append(value)
        next_channel += int(vs.channel.max()) + 1 if vs.n else 0
        next_scan += int(vs.scan.max()) + 1 if vs.n and vs.scan.max() >= 0 else 0
    names: list[str] = []
    xyz: list = []
    for vs in sets:
        known_xyz = vs.stations.xyz if vs.stations.xyz is not None else np.full((len(vs.stations), 3), np.nan)
        for name, pos in zip(vs.stations.names, known_xyz):
            if name not in names:
                names.append(name)
                xyz.append(pos)
            elif not np.all(np.isfinite(xyz[names.index(name)])) and np.all(np.isfinite(pos)):
                xyz[names.index(name)] = pos
    meta = {
        "format": "stacked",
        "stacked": labels,
        "rows": rows,
        "channel_offsets": channel_offsets,
        "scan_offsets": scan_offsets,
    }
    return VisibilitySet(
        **{name: np.concatenate(values) for name, values in columns.items()},
        stations=StationTable(names, np.array(xyz).reshape(len(names), 3)),
        source=first.source,
        ra_deg=first.ra_deg,
        dec_deg=first.dec_deg,
        meta=meta,
    )


def file_of_rows(vset: VisibilitySet) -> np.ndarray:
    """For a stacked set (or a subset of one): the index of each row's set, from its channel."""
    offsets = vset.meta.get("channel_offsets")
    if not offsets:
        return np.zeros(vset.n, dtype=int)
    return np.searchsorted(np.asarray(offsets), vset.channel, side="right") - 1
