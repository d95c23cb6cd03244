"""Invented arrays and data for the closure tests (station names and source are made up)."""
from itertools import combinations

import numpy as np

from uvfit.data.visset import VisibilitySet

EARTH_RADIUS_M = 6.371e6


def invented_stations(n, seed=0):
    """n invented stations spread over one hemisphere (geocentric X, Y, Z in m)."""
    rng = np.random.default_rng(seed)
    lat = np.radians(rng.uniform(-40, 60, n))
    lon = np.radians(rng.uniform(-120, 30, n))
    xyz = EARTH_RADIUS_M * np.stack([np.cos(lat) * np.cos(lon), np.cos(lat) * np.sin(lon),
                                     np.sin(lat)], 1)
    return [f"ST{i:02d}" for i in range(n)], xyz


def tracks(xyz, names, n_times=20, dec_deg=-5.0, wavelength_m=1.3e-3, hours=8.0, seed=0,
           swap_fraction=0.3):
    """Rows for every baseline at every time: (u, v) by Earth rotation (TMS 2017 eq. 4.1, as
    quoted in REFERENCES.md); some baselines stored the other way round to test orientation."""
    rng = np.random.default_rng(seed)
    dec = np.radians(dec_deg)
    h = np.radians(np.linspace(-hours / 2, hours / 2, n_times) * 15.0)
    rows = []
    for t, hh in enumerate(h):
        for i, j in combinations(range(len(names)), 2):
            if rng.random() < swap_fraction:
                i, j = j, i
            lx, ly, lz = (xyz[j] - xyz[i]) / wavelength_m
            u = np.sin(hh) * lx + np.cos(hh) * ly
            v = -np.sin(dec) * np.cos(hh) * lx + np.sin(dec) * np.sin(hh) * ly + np.cos(dec) * lz
            rows.append((t, i, j, u, v))
    rows = np.array(rows)
    return rows


def make_vset(model, n_stations=6, n_times=20, sigma=0.01, seed=0, gain_amp=0.0, gain_phase=False,
              noise=True):
    """A VisibilitySet of ``model`` on an invented array, with thermal noise and, optionally,
    station gains per time (amplitudes within 1 +/- gain_amp, phases uniform if gain_phase)."""
    rng = np.random.default_rng(seed)
    names, xyz = invented_stations(n_stations, seed)
    rows = tracks(xyz, names, n_times, seed=seed)
    t = rows[:, 0].astype(int)
    a1, a2 = rows[:, 1].astype(int), rows[:, 2].astype(int)
    u, v = rows[:, 3], rows[:, 4]
    vis = np.asarray(model.visibilities(u, v, np.full(len(u), 230e9)))
    g = np.ones((n_times, n_stations), complex)
    if gain_amp:
        g = g * rng.uniform(1 - gain_amp, 1 + gain_amp, g.shape)
    if gain_phase:
        g = g * np.exp(1j * rng.uniform(-np.pi, np.pi, g.shape))
    vis = vis * g[t, a1] * np.conj(g[t, a2])
    if noise:
        vis = vis + sigma * (rng.normal(size=len(u)) + 1j * rng.normal(size=len(u)))
    from uvfit.data.visset import StationTable
    return VisibilitySet(u=u, v=v, w=None, time=60000.0 + t / 1440.0, frequency=230e9,
                         station1=np.array(names)[a1], station2=np.array(names)[a2], vis=vis,
                         sigma=np.full(len(u), sigma), stations=StationTable(names, xyz),
                         source="INVENTED-1")
