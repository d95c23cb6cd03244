"""Convergence of the sampler, measured (not run by the tests).

Two invented problems:
1. linear: the fluxes of three components at fixed positions and sizes, flat priors. The posterior
   is Gaussian with mean (A^T W A)^-1 A^T W y and covariance (A^T W A)^-1 (weighted linear least
   squares); the script reports how far the sampled means and standard deviations are from it,
   in units of their Monte Carlo errors, for several seeds.
2. double: a point at the phase centre and a fainter point 0.36 mas away, position and fluxes free.

For each, it reports the steps the stopping rule needed, the autocorrelation times, n_steps / tau,
the acceptance fraction and the wall time per step, and how tau evolves along one long chain.

    python3 benchmarks/sampler_convergence.py [--seeds 5] [--max-steps 20000] [--json OUT]

Output: a table on stdout and (with --json) the same numbers as JSON.
"""

import argparse
import math
import os
import sys
import time

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))

from uvfit.data.visset import VisibilitySet  # noqa: E402
from uvfit.infer.sampling import autocorrelation_time, sample  # noqa: E402
from uvfit.outputs import write_json  # noqa: E402
from uvfit.sky.model import SkyModel  # noqa: E402

MAS = math.pi / 180 / 3600e3
FIXED = lambda x: {"value": x, "fixed": True}  # noqa: E731


def simulate(model, n, sigma, seed):
    rng = np.random.default_rng(seed)
    r = 4e8 * np.sqrt(rng.uniform(0.02, 1.0, n))
    phi = rng.uniform(0, 2 * np.pi, n)
    u, v = r * np.sin(phi), r * np.cos(phi)
    vis = model.visibilities(u, v) + sigma * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    return VisibilitySet(
        u=u,
        v=v,
        w=None,
        time=np.zeros(n),
        frequency=86e9,
        station1=["A"] * n,
        station2=["B"] * n,
        vis=vis,
        sigma=np.full(n, sigma),
    )


def linear_problem():
    comps = [(0.0, 0.0, 0.15, 1.0), (0.4, -0.3, 0.25, 0.4), (-0.5, 0.2, 0.0, 0.1)]
    spec = []
    for k, (e, n, w, f) in enumerate(comps):
        c = {"name": f"c{k}", "shape": "gaussian" if w else "point", "flux": f, "east": FIXED(e), "north": FIXED(n)}
        if w:
            c["fwhm"] = FIXED(w)
        spec.append(c)
    model = SkyModel.build(spec, angular_unit="mas")
    vs = simulate(model, 200, 0.03, 1)
    q = np.hypot(vs.u, vs.v)
    cols = [
        np.exp(-((np.pi * w * MAS * q) ** 2) / (4 * np.log(2))) * np.exp(-2j * np.pi * (vs.u * e + vs.v * n) * MAS)
        for e, n, w, _ in comps
    ]
    c = np.array(cols).T
    a = np.vstack([c.real, c.imag])
    y = np.concatenate([vs.vis.real, vs.vis.imag])
    w = np.full(a.shape[0], 0.03**-2)
    cov = np.linalg.inv(a.T @ (w[:, None] * a))
    return model, vs, cov @ a.T @ (w * y), np.sqrt(np.diag(cov))


def double_problem():
    model = SkyModel.build(
        [
            {"name": "a", "shape": "point", "flux": 1.0, "east": FIXED(0.0), "north": FIXED(0.0)},
            {"name": "b", "shape": "point", "flux": 0.3, "east": 0.3, "north": 0.2},
        ],
        angular_unit="mas",
    )
    return model, simulate(model, 150, 0.05, 2)


def run(model, vs, seed, max_steps):
    t0 = time.perf_counter()
    post = sample(vs, model, max_steps=max_steps, seed=seed, derived=False)
    dt = time.perf_counter() - t0
    ch = post.chain
    return post, {
        "seed": seed,
        "n_steps": ch.n_steps,
        "converged": ch.converged,
        "tau_max": float(np.max(ch.tau)),
        "steps_per_tau": ch.n_steps / float(np.max(ch.tau)),
        "acceptance": ch.acceptance_fraction,
        "burn_in": ch.burn_in,
        "thin": ch.thin,
        "seconds": dt,
        "ms_per_step": 1e3 * dt / ch.n_steps,
    }


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seeds", type=int, default=5)
    ap.add_argument("--max-steps", type=int, default=20000)
    ap.add_argument("--json", default=None)
    args = ap.parse_args()
    out = {"linear": [], "double": [], "tau_track": []}

    model, vs, mean, sd = linear_problem()
    print("linear problem: sampled vs analytic Gaussian posterior")
    print(
        f"{'seed':>4s} {'steps':>6s} {'conv':>5s} {'tau':>6s} {'N/tau':>6s} {'acc':>5s} "
        f"{'max |z| mean':>13s} {'max |sd ratio-1|/err':>21s} {'ms/step':>8s}"
    )
    for seed in range(args.seeds):
        post, row = run(model, vs, seed, args.max_steps)
        ch = post.chain
        n_eff = ch.n_walkers * (ch.n_steps - ch.burn_in) / np.max(ch.tau)
        z = (post.samples.mean(axis=0) - mean) / (sd / np.sqrt(n_eff))
        zs = (post.samples.std(axis=0, ddof=1) / sd - 1) * np.sqrt(2 * n_eff)
        row.update(z_mean=z.tolist(), z_sd=zs.tolist())
        out["linear"].append(row)
        print(
            f"{seed:4d} {row['n_steps']:6d} {str(row['converged']):>5s} {row['tau_max']:6.1f} "
            f"{row['steps_per_tau']:6.0f} {row['acceptance']:5.2f} {np.max(np.abs(z)):13.2f} "
            f"{np.max(np.abs(zs)):21.2f} {row['ms_per_step']:8.2f}"
        )

    model, vs = double_problem()
    print("\ndouble problem (4 free parameters)")
    for seed in range(args.seeds):
        post, row = run(model, vs, seed, args.max_steps)
        out["double"].append(row)
        print(
            f"{seed:4d} {row['n_steps']:6d} {str(row['converged']):>5s} {row['tau_max']:6.1f} "
            f"{row['steps_per_tau']:6.0f} {row['acceptance']:5.2f} {row['ms_per_step']:8.2f} ms/step"
        )
        if seed == 0:
            chain = post.chain.chain
    print("\ntau along the first double chain (steps, max tau, largest relative change since 200 steps before)")
    prev = None
    for n in range(200, chain.shape[0] + 1, 200):
        tau = autocorrelation_time(chain[:n])
        change = float(np.max(np.abs(tau - prev) / tau)) if prev is not None else float("nan")
        prev = tau
        out["tau_track"].append({"n": n, "tau_max": float(np.max(tau)), "change": change})
        print(f"{n:6d} {np.max(tau):7.1f} {change:7.3f}")
    if args.json:
        write_json(args.json, out, force=True)


if __name__ == "__main__":
    main()
