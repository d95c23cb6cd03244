"""The one builder of invented observations, and the geometry helpers that feed it.

Every invented data set of the tests is made here: a helper computes (u, v), stations and times
(random points, a turning two-dimensional array, or Earth-rotation tracks), then calls
:func:`observe`, which evaluates the model, adds seeded complex Gaussian noise and builds the
``VisibilitySet``. Station names and sources are made up.
"""

import numpy as np

from uvfit.data.visset import VisibilitySet


def complex_noise(rng, n, sigma):
    """n complex Gaussian deviates of ``sigma`` per part: the real parts are drawn first, then the
    imaginary parts (the order fixes the numbers for a given seed)."""
    return sigma * (rng.standard_normal(n) + 1j * rng.standard_normal(n))


def observe(u, v, station1, station2, time, *, frequency, sigma, model=None, vis=None, noise=None, rng=None, **extra):
    """A VisibilitySet of invented rows.

    The visibilities are ``vis`` or, when it is None, ``model.visibilities(u, v)``; when ``noise``
    is set, :func:`complex_noise` of that size per part is drawn from ``rng`` and added. ``sigma``
    is a number (the same for every row) or one value per row. ``extra`` goes to VisibilitySet
    unchanged (source, stations, integration, flag, ...).
    """
    u = np.asarray(u, dtype=float)
    v = np.asarray(v, dtype=float)
    n = u.size
    if vis is None:
        vis = model.visibilities(u, v)
    if noise:
        vis = vis + complex_noise(rng, n, noise)
    sigma = np.full(n, float(sigma)) if np.ndim(sigma) == 0 else np.asarray(sigma, dtype=float)
    return VisibilitySet(
        u=u,
        v=v,
        w=None,
        time=np.asarray(time, dtype=float),
        frequency=frequency,
        station1=np.asarray(station1),
        station2=np.asarray(station2),
        vis=vis,
        sigma=sigma,
        **extra,
    )


def all_pairs(n_stations):
    """Station index pairs (i, j), i < j, in the usual order (0-1, 0-2, ..., 1-2, ...)."""
    return [(i, j) for i in range(n_stations) for j in range(i + 1, n_stations)]


def every_baseline(n_stations, n_times):
    """Row indices for every baseline at every time (time outer): (t, i, j) integer arrays."""
    pairs = all_pairs(n_stations)
    t = np.repeat(np.arange(n_times), len(pairs))
    i = np.tile([p[0] for p in pairs], n_times)
    j = np.tile([p[1] for p in pairs], n_times)
    return t, i, j


def turning_array(xy, angles, i, j, t):
    """(u, v) of the baselines xy[j] - xy[i] of a flat array turned by ``angles[t]`` (radians)."""
    d = xy[j] - xy[i]
    c, s = np.cos(angles)[t], np.sin(angles)[t]
    return c * d[:, 0] - s * d[:, 1], s * d[:, 0] + c * d[:, 1]


def earth_rotation_uv(xyz, i, j, hour_angle, dec, wavelength):
    """(u, v) in wavelengths of the baselines xyz[j] - xyz[i] (metres, Earth-fixed) at hour angle
    ``hour_angle`` and declination ``dec`` (radians), TMS 2017 eq. 4.1 as quoted in REFERENCES.md."""
    lx, ly, lz = ((xyz[j] - xyz[i]) / wavelength).T
    h = hour_angle
    u = np.sin(h) * lx + np.cos(h) * ly
    v = -np.sin(dec) * np.cos(h) * lx + np.sin(dec) * np.sin(h) * ly + np.cos(dec) * lz
    return u, v


def five_station_array():
    """An invented five-station array (positions across Europe, Asia Minor and the Americas made
    up; 2000 Jy SEFD each) for Earth-rotation simulations of joint and multi-epoch fits."""
    from uvfit.sim.array import parse_array

    stations = [(1, 48.0, 10.0, 300.0), (2, 40.0, -4.0, 600.0), (3, 60.0, 25.0, 100.0), (4, 35.0, 33.0, 200.0)]
    stations.append((5, 45.0, -70.0, 100.0))
    return parse_array(
        {
            "name": "invented five-station array",
            "station": [
                {"name": f"B{k}", "lat": lat, "lon": lon, "height": h, "sefd": 2000.0} for k, lat, lon, h in stations
            ],
        }
    )
