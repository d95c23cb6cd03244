"""Simulated data for the fitting tests: (u, v) coverage built in code, seeded Gaussian noise."""

import numpy as np

from uvfit.sky.model import SkyModel

from .arrays import every_baseline, observe, turning_array

STATIONS = np.array(["KA", "LO", "MU", "NE", "OR"])


def coverage(n, seed=0, qmin=2e7, qmax=1e9):
    """Random (u, v) points, uniform in log uv distance and in position angle."""
    rng = np.random.default_rng(seed)
    q = np.exp(rng.uniform(np.log(qmin), np.log(qmax), n))
    ang = rng.uniform(0.0, np.pi, n)
    return q * np.sin(ang), q * np.cos(ang)


def simulate(model, n=300, sigma=0.01, seed=0, uv_seed=0, frequency=86e9, flag=None, qmax=1e9):
    """A VisibilitySet of ``model`` on random coverage with complex Gaussian noise of ``sigma``
    per part (seeded); stations cycle over a small invented array."""
    u, v = coverage(n, uv_seed, qmax=qmax)
    rng = np.random.default_rng(seed)
    i = np.arange(n) % (len(STATIONS) - 1)
    j = i + 1 + (np.arange(n) // (len(STATIONS) - 1)) % (len(STATIONS) - 1 - i)
    return observe(
        u,
        v,
        STATIONS[i],
        STATIONS[j],
        60000.0 + np.arange(n) * 1e-4,
        frequency=frequency,
        sigma=sigma,
        model=model,
        noise=sigma,
        rng=rng,
        flag=flag,
    )


def double(flux1=1.0, flux2=0.4, east2=-0.5, north2=-0.8, fwhm1=0.3, fwhm2=0.5, fix_first=False):
    first = {"name": "core", "shape": "gaussian", "flux": flux1, "east": 0.0, "north": 0.0, "fwhm": fwhm1}
    if fix_first:
        first["east"] = {"value": 0.0, "fixed": True}
        first["north"] = {"value": 0.0, "fixed": True}
    return SkyModel.build(
        [first, {"name": "knot", "shape": "gaussian", "flux": flux2, "east": east2, "north": north2, "fwhm": fwhm2}],
        angular_unit="mas",
    )


def snapshots(model, n_times=40, sigma=0.01, seed=0, frequency=86e9, scale=1.2e8):
    """Every baseline of five invented stations at each of ``n_times`` times (so that closure
    quantities can be formed), the array rotating slowly; complex Gaussian noise, seeded."""
    rng = np.random.default_rng(seed)
    pos = rng.normal(0.0, scale, (len(STATIONS), 2))
    t, i, j = every_baseline(len(STATIONS), n_times)
    u, v = turning_array(pos, 0.05 * np.arange(n_times), i, j, t)
    return observe(
        u,
        v,
        STATIONS[i],
        STATIONS[j],
        60000.0 + t / 1440.0,
        frequency=frequency,
        sigma=sigma,
        model=model,
        noise=sigma,
        rng=rng,
    )
