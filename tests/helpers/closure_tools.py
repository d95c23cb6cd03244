"""Invented arrays and data for the closure tests (station names and source are made up)."""

import numpy as np

from uvfit.data.visset import StationTable

from .arrays import earth_rotation_uv, every_baseline, observe

EARTH_RADIUS_M = 6.371e6


def invented_stations(n, seed=0):
    """n invented stations spread over one hemisphere (geocentric X, Y, Z in m)."""
    rng = np.random.default_rng(seed)
    lat = np.radians(rng.uniform(-40, 60, n))
    lon = np.radians(rng.uniform(-120, 30, n))
    xyz = EARTH_RADIUS_M * np.stack([np.cos(lat) * np.cos(lon), np.cos(lat) * np.sin(lon), np.sin(lat)], 1)
    return [f"ST{i:02d}" for i in range(n)], xyz


def tracks(xyz, names, n_times=20, dec_deg=-5.0, wavelength_m=1.3e-3, hours=8.0, seed=0, swap_fraction=0.3):
    """Rows (t, i, j, u, v) for every baseline at every time: (u, v) by Earth rotation (TMS 2017
    eq. 4.1, as quoted in REFERENCES.md); some baselines stored the other way round to test
    orientation."""
    rng = np.random.default_rng(seed)
    dec = np.radians(dec_deg)
    h = np.radians(np.linspace(-hours / 2, hours / 2, n_times) * 15.0)
    t, i, j = every_baseline(len(names), n_times)
    swap = rng.random(t.size) < swap_fraction
    i, j = np.where(swap, j, i), np.where(swap, i, j)
    u, v = earth_rotation_uv(xyz, i, j, h[t], dec, wavelength_m)
    return np.column_stack([t, i, j, u, v])


def make_vset(model, n_stations=6, n_times=20, sigma=0.01, seed=0, gain_amp=0.0, gain_phase=False, noise=True):
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
    return observe(
        u,
        v,
        np.array(names)[a1],
        np.array(names)[a2],
        60000.0 + t / 1440.0,
        frequency=230e9,
        sigma=sigma,
        vis=vis,
        noise=sigma if noise else None,
        rng=rng,
        stations=StationTable(names, xyz),
        source="INVENTED-1",
    )


def scan_vset(model, n_stations=6, n_scans=8, per_scan=30, step_s=10.0, sigma=0.5, seed=0, phase_noise=True):
    """A VisibilitySet of ``model`` on an invented array observed in ``n_scans`` scans of
    ``per_scan`` integrations of ``step_s`` seconds, spread over 8 hours, with thermal noise
    ``sigma`` (Jy per part) and, with ``phase_noise``, a random station phase at every
    integration (an invented atmosphere that no coherent average survives)."""
    rng = np.random.default_rng(seed)
    names, xyz = invented_stations(n_stations, seed=1)
    starts = np.linspace(-4.0, 4.0 - per_scan * step_s / 3600.0, n_scans)  # hours
    hours = (starts[:, None] + np.arange(per_scan)[None, :] * step_s / 3600.0).ravel()
    n_times = hours.size
    t, i, j = every_baseline(n_stations, n_times)
    u, v = earth_rotation_uv(xyz, i, j, np.radians(hours[t] * 15.0), np.radians(-5.0), 1.3e-3)
    vis = np.asarray(model.visibilities(u, v, np.full(len(u), 230e9)))
    if phase_noise:
        g = np.exp(1j * rng.uniform(-np.pi, np.pi, (n_times, n_stations)))
        vis = vis * g[t, i] * np.conj(g[t, j])
    return observe(
        u,
        v,
        np.array(names)[i],
        np.array(names)[j],
        60000.0 + (hours[t] + 4.0) / 24.0,
        frequency=230e9,
        sigma=sigma,
        vis=vis,
        noise=sigma,
        rng=rng,
        stations=StationTable(names, xyz),
        source="INVENTED-2",
        integration=step_s,
    )


def point_double(ratio, sep):
    """An invented 1 Jy double of points at the phase centre, PA 115 deg: flux ratio ``ratio`` and
    separation ``sep`` microarcseconds free within bounds (a start or a truth, not a reference)."""
    from uvfit.sky.model import SkyModel

    return SkyModel.build(
        [
            {
                "name": "pair",
                "shape": "double",
                "member": "point",
                "flux": 1.0,
                "east": 0.0,
                "north": 0.0,
                "flux_ratio": {"value": ratio, "min": 0.0, "max": 1.0},
                "separation": {"value": sep, "min": 0.0, "max": 200.0},
                "position_angle": 115.0,
            }
        ],
        angular_unit="uas",
    )
