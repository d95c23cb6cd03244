"""Small invented data sets for the sampler tests (an invented 6-station array, random uv points)."""

import numpy as np

from uvfit.sky.model import SkyModel

from .arrays import every_baseline, observe, turning_array

STATIONS = ["KESTREL", "HERON", "OSPREY", "PLOVER", "SWIFT", "TERN"]


def uv_points(n, q_max, seed):
    """n (u, v) points, uniform in a disc of radius q_max wavelengths, with station labels."""
    rng = np.random.default_rng(seed)
    r = q_max * np.sqrt(rng.uniform(0.02, 1.0, n))
    phi = rng.uniform(0, 2 * np.pi, n)
    pairs = [(a, b) for i, a in enumerate(STATIONS) for b in STATIONS[i + 1 :]]
    k = np.arange(n) % len(pairs)
    s1 = [pairs[j][0] for j in k]
    s2 = [pairs[j][1] for j in k]
    return r * np.sin(phi), r * np.cos(phi), s1, s2


def simulate(model, n=150, q_max=4e8, sigma=0.02, seed=0, noise_seed=None, frequency=86e9):
    """A VisibilitySet of ``model`` on random uv points with Gaussian noise ``sigma`` per part."""
    u, v, s1, s2 = uv_points(n, q_max, seed)
    rng = np.random.default_rng(seed + 1000 if noise_seed is None else noise_seed)
    return observe(
        u,
        v,
        s1,
        s2,
        60000.0 + np.arange(n) / 1440.0,
        frequency=frequency,
        sigma=sigma,
        model=model,
        noise=sigma,
        rng=rng,
        source="INVENTED-1",
    )


def two_points(flux_a=1.0, flux_b=0.3, east=0.3, north=0.2, free_position=True):
    """Point 'a' fixed at the phase centre, point 'b' offset (mas)."""
    pos = (lambda x: x) if free_position else (lambda x: {"value": x, "fixed": True})
    return SkyModel.build(
        [
            {
                "name": "a",
                "shape": "point",
                "flux": flux_a,
                "east": {"value": 0.0, "fixed": True},
                "north": {"value": 0.0, "fixed": True},
            },
            {"name": "b", "shape": "point", "flux": flux_b, "east": pos(east), "north": pos(north)},
        ],
        angular_unit="mas",
    )


def snapshots(model, n_times=12, sigma=0.02, seed=0, scale=4e8):
    """Every baseline of the invented 6-station array at ``n_times`` snapshots, the array turning
    on the sky between snapshots (enough triangles and quadrangles for the closure modes)."""
    rng = np.random.default_rng(seed)
    xy = rng.uniform(-0.5, 0.5, (len(STATIONS), 2)) * scale
    t, i, j = every_baseline(len(STATIONS), n_times)
    angles = np.linspace(0, np.pi, n_times, endpoint=False)
    u, v = turning_array(xy, angles, j, i, t)  # the baselines xy[i] - xy[j]
    names = np.array(STATIONS)
    return observe(
        u,
        v,
        names[i],
        names[j],
        60000.0 + t / 144.0,
        frequency=86e9,
        sigma=sigma,
        model=model,
        noise=sigma,
        rng=rng,
        source="INVENTED-2",
    )
