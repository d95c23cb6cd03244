"""Small invented data sets for the sampler tests (an invented 6-station array, random uv points)."""
import numpy as np

from uvfit.data.visset import VisibilitySet
from uvfit.sky.model import SkyModel

STATIONS = ["KESTREL", "HERON", "OSPREY", "PLOVER", "SWIFT", "TERN"]


def uv_points(n, q_max, seed):
    """n (u, v) points, uniform in a disc of radius q_max wavelengths, with station labels."""
    rng = np.random.default_rng(seed)
    r = q_max * np.sqrt(rng.uniform(0.02, 1.0, n))
    phi = rng.uniform(0, 2 * np.pi, n)
    pairs = [(a, b) for i, a in enumerate(STATIONS) for b in STATIONS[i + 1:]]
    k = np.arange(n) % len(pairs)
    s1 = [pairs[j][0] for j in k]
    s2 = [pairs[j][1] for j in k]
    return r * np.sin(phi), r * np.cos(phi), s1, s2


def simulate(model, n=150, q_max=4e8, sigma=0.02, seed=0, noise_seed=None, frequency=86e9):
    """A VisibilitySet of ``model`` on random uv points with Gaussian noise ``sigma`` per part."""
    u, v, s1, s2 = uv_points(n, q_max, seed)
    vis = model.visibilities(u, v)
    rng = np.random.default_rng(seed + 1000 if noise_seed is None else noise_seed)
    noise = sigma * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    return VisibilitySet(u=u, v=v, w=None, time=60000.0 + np.arange(n) / 1440.0, frequency=frequency,
                         station1=s1, station2=s2, vis=vis + noise, sigma=np.full(n, sigma),
                         source="INVENTED-1")


def two_points(flux_a=1.0, flux_b=0.3, east=0.3, north=0.2, free_position=True):
    """Point 'a' fixed at the phase centre, point 'b' offset (mas)."""
    pos = (lambda x: x) if free_position else (lambda x: {"value": x, "fixed": True})
    return SkyModel.build([
        {"name": "a", "shape": "point", "flux": flux_a, "east": {"value": 0.0, "fixed": True},
         "north": {"value": 0.0, "fixed": True}},
        {"name": "b", "shape": "point", "flux": flux_b, "east": pos(east), "north": pos(north)},
    ], angular_unit="mas")
