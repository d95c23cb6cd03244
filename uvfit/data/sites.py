"""Sites: stations so close together that their baselines are much shorter than the others.

Two stations closer than ``distance`` (m; default DEFAULT_SITE_DISTANCE) are on one site; sites
are the connected groups of that relation (single linkage: A near B and B near C put A, B and C
on one site). Distances come from the station table's geocentric positions; for a pair where
either position is unknown (NaN, or all zeros as some files write it) the longest projected
baseline of the pair over the observation, |(u, v)| c / f, stands in for it (a projection is
never longer than the baseline, so such a pair may be put on one site when it is not: the
report says which pairs were decided that way).

A baseline within a site sees nearly the total flux and any extended emission the long
baselines resolve out; closures through it are nearly trivial (see
:mod:`uvfit.stats.closures.build`). Common practice; no formula involved.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import DataError

#: stations closer than this (m) are on one site
DEFAULT_SITE_DISTANCE = 5000.0

#: speed of light (m/s)
_C = 299792458.0


@dataclass
class Sites:
    """The sites found in a VisibilitySet.

    ``groups``: the sites with two or more stations (lists of names, each sorted, the list sorted
    by its first name); ``pairs``: (station, station, distance m, "position" | "uv distance") for
    every pair closer than ``distance``; ``distance``: the threshold (m).
    """

    groups: list = field(default_factory=list)
    pairs: list = field(default_factory=list)
    distance: float = DEFAULT_SITE_DISTANCE
    n_stations: int = 0

    @property
    def one_site(self) -> bool:
        """Every station on one site (a connected-element array at this threshold)."""
        return len(self.groups) == 1 and len(self.groups[0]) == self.n_stations and self.n_stations > 1

    def site_of(self, names) -> np.ndarray:
        """Site number of every name (-1: a station alone on its site)."""
        lookup = {n: k for k, g in enumerate(self.groups) for n in g}
        return np.array([lookup.get(str(n), -1) for n in names], dtype=int)

    def to_dict(self) -> dict:
        return {
            "distance_m": float(self.distance),
            "sites": [list(g) for g in self.groups],
            "pairs": [{"stations": [a, b], "distance_m": float(d), "from": how} for a, b, d, how in self.pairs],
            "all_one_site": bool(self.one_site),
        }


def check_site_distance(distance) -> float:
    """The site distance as a float (m), or a DataError naming the parameter."""
    value = DEFAULT_SITE_DISTANCE if distance is None else float(distance)
    if not np.isfinite(value) or value < 0:
        raise DataError(
            f"site_distance must be a finite distance >= 0 in metres, not {distance}",
            f"give e.g. site_distance {DEFAULT_SITE_DISTANCE:g}",
        )
    return value


def find_sites(vset, distance=None) -> Sites:
    """The sites of ``vset``'s stations (see the module docstring)."""
    distance = check_site_distance(distance)
    names = list(vset.stations.names)
    n = len(names)
    a1, a2 = vset.ant1, vset.ant2
    used = np.zeros(n, bool)
    used[a1] = True
    used[a2] = True
    xyz = np.asarray(vset.stations.xyz, float)
    known = np.all(np.isfinite(xyz), axis=1) & (np.linalg.norm(np.nan_to_num(xyz), axis=1) > 0)
    dist = np.linalg.norm(xyz[:, None, :] - xyz[None, :, :], axis=-1)
    how = np.full((n, n), "position", dtype=object)
    need = ~(known[:, None] & known[None, :])
    if np.any(need):
        # the longest projected baseline of each pair (m), where a position is unknown
        longest = np.full((n, n), np.nan)
        ok = (a1 != a2) & ~vset.flag
        if np.any(ok):
            metres = vset.uv_distance[ok] * _C / vset.frequency[ok]
            a, b = a1[ok], a2[ok]
            flat = np.full(n * n, -np.inf)
            np.maximum.at(flat, a * n + b, metres)
            np.maximum.at(flat, b * n + a, metres)
            flat[~np.isfinite(flat)] = np.nan
            longest = flat.reshape(n, n)
        dist = np.where(need, longest, dist)
        how[need] = "uv distance"
    close = np.isfinite(dist) & (dist < distance) & used[:, None] & used[None, :]
    np.fill_diagonal(close, False)
    # connected groups of the relation (n is tens at most)
    label = np.arange(n)
    changed = True
    while changed:
        changed = False
        for i, j in zip(*np.nonzero(close)):
            lo = min(label[i], label[j])
            if label[i] != lo or label[j] != lo:
                label[label == label[i]] = lo
                label[label == label[j]] = lo
                changed = True
    groups = []
    for lab in np.unique(label):
        members = sorted(names[i] for i in np.flatnonzero(label == lab))
        if len(members) > 1:
            groups.append(members)
    groups.sort(key=lambda g: g[0])
    pairs = [(names[i], names[j], float(dist[i, j]), str(how[i, j])) for i, j in zip(*np.nonzero(np.triu(close, 1)))]
    return Sites(groups=groups, pairs=pairs, distance=distance, n_stations=int(np.count_nonzero(used)))


def same_site_rows(vset, sites: Sites) -> np.ndarray:
    """True for every row whose two stations are on one site."""
    site = sites.site_of(vset.stations.names)
    a1, a2 = vset.ant1, vset.ant2
    s1, s2 = site[a1], site[a2]
    return (s1 >= 0) & (s1 == s2) & (a1 != a2)
