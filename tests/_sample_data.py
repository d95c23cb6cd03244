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


def snapshots(model, n_times=12, sigma=0.02, seed=0, scale=4e8):
    """Every baseline of the invented 6-station array at ``n_times`` snapshots, the array turning
    on the sky between snapshots (enough triangles and quadrangles for the closure modes)."""
    rng = np.random.default_rng(seed)
    xy = rng.uniform(-0.5, 0.5, (len(STATIONS), 2)) * scale
    rows = []
    for t, ang in enumerate(np.linspace(0, np.pi, n_times, endpoint=False)):
        c, s = np.cos(ang), np.sin(ang)
        for i in range(len(STATIONS)):
            for j in range(i + 1, len(STATIONS)):
                d = xy[i] - xy[j]
                rows.append((c * d[0] - s * d[1], s * d[0] + c * d[1], t, STATIONS[i], STATIONS[j]))
    u = np.array([r[0] for r in rows])
    v = np.array([r[1] for r in rows])
    n = u.size
    vis = model.visibilities(u, v) + sigma * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    return VisibilitySet(u=u, v=v, w=None, time=60000.0 + np.array([r[2] for r in rows]) / 144.0,
                         frequency=86e9, station1=[r[3] for r in rows], station2=[r[4] for r in rows],
                         vis=vis, sigma=np.full(n, sigma), source="INVENTED-2")
