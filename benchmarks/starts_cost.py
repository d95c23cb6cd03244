"""What the default starts cost: one start against ``starts="auto"``, as ratios of wall time.

    python3 benchmarks/starts_cost.py [--repeats 3]

Fits, interleaved and repeated (the minimum time of each is kept), the demo's two models to the
demo's data in complex mode, and an invented double in closure mode; prints, for each, the starts
the auto rule used, the chi2 of both and the time ratio auto / one start. The machine may be
shared: compare the ratios of one run, not times across runs.
"""

import argparse
import sys
import time

import numpy as np


def _cases():
    import uvfit
    from uvfit.demo import demo_file
    from uvfit.sky.model import SkyModel

    data = uvfit.read(demo_file("uvd0917.uvfits")).good()
    yield "demo one.toml (complex)", data, uvfit.load_model(demo_file("one.toml")), "complex"
    yield "demo two.toml (complex)", data, uvfit.load_model(demo_file("two.toml")), "complex"
    truth = SkyModel.build(
        [
            {"name": "core", "shape": "gaussian", "flux": 1.0, "east": 0.0, "north": 0.0, "fwhm": 0.3},
            {"name": "knot", "shape": "gaussian", "flux": 0.5, "east": -0.5, "north": -0.8, "fwhm": 0.5},
        ],
        angular_unit="mas",
    )
    rng = np.random.default_rng(2)
    names = np.array(["AA", "BB", "CC", "DD", "EE"])
    pos = rng.normal(0.0, 1.2e8, (5, 2))
    i, j = np.triu_indices(5, 1)
    t = np.repeat(np.arange(12), len(i))
    ang = 0.05 * t
    d = pos[np.tile(j, 12)] - pos[np.tile(i, 12)]
    u = d[:, 0] * np.cos(ang) - d[:, 1] * np.sin(ang)
    v = d[:, 0] * np.sin(ang) + d[:, 1] * np.cos(ang)
    from uvfit.data.visset import StationTable, VisibilitySet

    vis = truth.visibilities(u, v, np.full(u.size, 86e9))
    vis = vis + 0.01 * (rng.standard_normal(u.size) + 1j * rng.standard_normal(u.size))
    vset = VisibilitySet(
        u=u,
        v=v,
        w=np.zeros_like(u),
        time=60000.0 + t * 1e-3,
        frequency=np.full(u.size, 86e9),
        station1=names[np.tile(i, 12)],
        station2=names[np.tile(j, 12)],
        vis=vis,
        sigma=np.full(u.size, 0.01),
        stations=StationTable(list(names), np.zeros((5, 3))),
    )
    start = truth.copy()
    start.parameters["knot.east"].value, start.parameters["knot.north"].value = 0.3, 0.6
    yield "invented double (closure)", vset, start, "closure"


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args(argv)
    from uvfit._blas import single_threaded
    from uvfit.infer.run import run_fit

    with single_threaded():
        for label, vset, model, mode in _cases():
            best = {1: np.inf, "auto": np.inf}
            out = {}
            for _ in range(args.repeats):
                for starts in (1, "auto"):
                    t0 = time.perf_counter()
                    out[starts] = run_fit(vset, model, mode=mode, starts=starts, seed=0, resolved_test=False)
                    best[starts] = min(best[starts], time.perf_counter() - t0)
            print(
                f"{label}: auto used {out['auto']['starts']} starts; chi2 one start "
                f"{out[1]['statistics']['chi2']:.6g}, auto {out['auto']['statistics']['chi2']:.6g}; "
                f"time auto / one start = {best['auto'] / best[1]:.2f} ({best[1]:.3f} s vs {best['auto']:.3f} s)"
            )
    return 0


if __name__ == "__main__":
    sys.exit(main())
