"""Simulation study: bias and spread of closure-only fits of the demo's double at low SNR.

    PYTHONPATH=. python3 examples/studies/closure_bias.py [--trials 60] [--snr-scale 1 3]
        [--modes closure closure_phase closure_amplitude hybrid complex]
        [--reference neighbours measured] [--seed 1] [--json out.json]

The demo's layout (examples/demo/make_demo_data.py: the invented nine-station array, 10 h at
22.2 GHz, 600 s rows) with the true double of examples/demo/truth.toml; every trial draws fresh
thermal noise (sigma divided by ``snr-scale``) with its own seed, fits from the truth and records
(fitted - true) / error of the flux ratio and the separation. The outside reference is the truth
of the simulation. Prints mean and standard deviation of the normalised errors per mode.
"""

import argparse
import json
import os
import sys

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
sys.path.insert(0, ROOT)
sys.path.insert(0, os.path.join(ROOT, "examples", "demo"))


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--trials", type=int, default=60)
    ap.add_argument("--snr-scale", type=float, nargs="+", default=[1.0, 3.0])
    ap.add_argument(
        "--modes", nargs="+", default=["closure", "closure_phase", "closure_amplitude", "hybrid", "complex"]
    )
    ap.add_argument("--reference", nargs="+", default=["neighbours", "measured"])
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--json", default=None)
    a = ap.parse_args(argv)

    import make_demo_data

    from uvfit import load_model
    from uvfit._blas import single_threaded
    from uvfit.infer.lsq import fit
    from uvfit.stats.modes import make_statistic

    base, _ = make_demo_data.make(seed=917)
    base = base.good()
    truth = load_model(make_demo_data.TRUTH)
    true_vis = np.asarray(truth.visibilities(base.u, base.v, base.frequency))
    names = ["pair.flux_ratio", "pair.separation"]
    true = {n: truth.parameters[n].value for n in names}
    start = load_model(os.path.join(ROOT, "uvfit", "demo_data", "two.toml"))
    for n, p in truth.parameters.items():
        start.parameters[n].value = p.value
    out = {}
    with single_threaded():
        for scale in a.snr_scale:
            sigma = base.sigma / scale
            for mode in a.modes:
                refs = a.reference if mode not in ("complex",) else ["-"]
                for ref in refs:
                    pulls = {n: [] for n in names}
                    for t in range(a.trials):
                        rng = np.random.default_rng([a.seed, t])
                        noise = sigma * (rng.normal(size=base.n) + 1j * rng.normal(size=base.n))
                        vs = base.with_vis(true_vis + noise, sigma=sigma)
                        opts = {} if ref == "-" else {"amplitude_reference": ref}
                        stat = make_statistic(mode, vs, start.copy(), **opts)
                        try:
                            res = fit(stat)
                        except Exception as exc:  # noqa: BLE001 - a study: count and go on
                            print("fit failed", mode, ref, t, exc, file=sys.stderr)
                            continue
                        for n in names:
                            pulls[n].append((res.value(n) - true[n]) / res.error(n))
                    key = f"snr x{scale:g} {mode} {ref}"
                    out[key] = {
                        n: {"mean": float(np.mean(v)), "std": float(np.std(v, ddof=1)), "n": len(v)}
                        for n, v in pulls.items()
                    }
                    print(
                        key.ljust(40),
                        "  ".join(
                            f"{n.split('.')[1]}: mean {out[key][n]['mean']:+.2f} sd {out[key][n]['std']:.2f}"
                            for n in names
                        ),
                        flush=True,
                    )
    if a.json:
        with open(a.json, "w") as fh:
            json.dump({"seed": a.seed, "trials": a.trials, "results": out}, fh, indent=1)


if __name__ == "__main__":
    main()
