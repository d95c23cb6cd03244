"""Speed of the visibility engine, as ratios measured in one run on one machine.

    python3 benchmarks/run.py [--quick] [-o benchmarks/results/latest.json] [--force]
                              [--engine numba|numpy]

Prints a table and writes the same numbers as JSON (never over an existing file without --force).
OpenBLAS runs with one thread, as the uvfit commands do (--threaded-blas: its default).
Every time is the minimum over repeats (``timeit``), each measured quantity and its reference
interleaved repeat by repeat so that both see the same load; compiled code is warmed up first.
Invented data: random (u, v) within 1e9 wavelengths, models of a few milliarcseconds.

1. trig_bound: time of one evaluation of a two-component model (two offset circular Gaussians)
   divided by the time of the bare trigonometric work over the same arrays: numpy sin and cos of
   the phase, once per component, into preallocated arrays (the phase itself precomputed, so not
   counted). Also given against the engine's own sine-cosine kernel over the same phases.
2. jacobian_fit: least squares (scipy.optimize.least_squares, trust-region reflective, the
   options of uvfit.infer.lsq) of a three-component model to 1e5 visibilities through the complex
   statistic, with the analytic Jacobian and with two-point finite differences; time ratio,
   evaluations, and the difference of the optima in units of the parameters' errors. Beside it:
   the cost of one Jacobian each way, of the solver's SVD of the Jacobian, and both fits again
   with scipy's iterative trust-region solver (tr_solver="lsmr").
3. scaling: one evaluation of the two-component model at 1e3 ... 1e7 rows (--quick: to 1e6):
   time per visibility, and the peak of memory allocated during the call (tracemalloc, which
   numpy reports its allocations to) divided by the size of the data arrays, defined as the
   bytes of the input u and v (float64) plus the output visibilities (complex128): 32 bytes per
   row. No frequency is passed (the model has no spectral index). The engine's scratch space is
   allocated by numpy and so counted.
4. sampler_overhead: wall time per step of the project's ensemble sampler (uvfit.infer.sampling,
   emcee) on the complex-mode log-posterior of the two-component model, divided by (walkers x one
   model evaluation on the same rows), at 1e4 and 1e5 visibilities (--quick: 1e4); medians of
   step-by-step times (the machine may be shared), the ratio of minima beside it.
5. parallel_speedup: wall time with one process divided by the time with two (``procs``), for
   the pieces of work spread over processes: the bootstrap simulations of a comparison, the
   starts of a fit, the leave-one-station-out refits, a profile grid and forecast trials (two
   Gaussians against one on invented data; each workload one to a few seconds in one process).
   The numbers of both runs are compared (they must be identical); the ratio of the summed
   times is reported, each workload's beside it. Meaningful only on an otherwise idle machine
   with at least two cores (the machine's load average is recorded).
"""

import argparse
import contextlib
import datetime
import math
import os
import platform
import sys
import time
import timeit
import tracemalloc

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))

from uvfit.data.visset import VisibilitySet  # noqa: E402
from uvfit.errors import UvfitError  # noqa: E402
from uvfit.outputs import check_writable, write_json  # noqa: E402
from uvfit.sky import engine  # noqa: E402
from uvfit.sky.model import SkyModel  # noqa: E402

GOALS = {
    "trig_bound": ("<=", 1.3),
    "jacobian_fit": (">=", 5.0),
    "scaling_flatness": ("<=", 1.3),
    "scaling_memory": ("<=", 4.0),
    "sampler_overhead": ("<=", 1.2),
    "parallel_speedup": (">=", 1.7),
}


def two_gaussians():
    return SkyModel.build(
        [
            {"name": "core", "shape": "gaussian", "flux": 1.0, "east": 0.12, "north": -0.25, "fwhm": 0.3},
            {"name": "jet", "shape": "gaussian", "flux": 0.5, "east": -0.4, "north": 0.33, "fwhm": 0.5},
        ],
        angular_unit="mas",
    )


def three_components():
    return SkyModel.build(
        [
            {
                "name": "core",
                "shape": "elliptical_gaussian",
                "flux": 1.0,
                "east": {"value": 0.0, "fixed": True},
                "north": {"value": 0.0, "fixed": True},
                "fwhm": 0.25,
                "axis_ratio": 0.6,
                "position_angle": 30.0,
            },
            {"name": "knot", "shape": "gaussian", "flux": 0.4, "east": 0.6, "north": 0.45, "fwhm": 0.35},
            {"name": "hotspot", "shape": "gaussian", "flux": 0.2, "east": -0.9, "north": -0.3, "fwhm": 0.2},
        ],
        angular_unit="mas",
    )


def uv_rows(n, seed):
    rng = np.random.default_rng(seed)
    r = 1e9 * np.sqrt(rng.uniform(0.001, 1.0, n))
    phi = rng.uniform(0.0, 2.0 * np.pi, n)
    return r * np.sin(phi), r * np.cos(phi)


def simulate(model, n, sigma, seed):
    u, v = uv_rows(n, seed)
    rng = np.random.default_rng(seed + 1)
    vis = model.visibilities(u, v) + sigma * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    return VisibilitySet(
        u=u,
        v=v,
        w=None,
        time=np.zeros(n),
        frequency=230e9,
        station1=["AA"] * n,
        station2=["BB"] * n,
        vis=vis,
        sigma=np.full(n, sigma),
    )


def best_of(funcs, repeat, number=1):
    """Minimum time (s) of each function over ``repeat`` rounds, the functions interleaved."""
    best = [math.inf] * len(funcs)
    for _ in range(repeat):
        for k, f in enumerate(funcs):
            t = timeit.timeit(f, number=number) / number
            best[k] = min(best[k], t)
    return best


def repeats_for(n, quick):
    base = 2e6 if quick else 1e7
    return int(min(200, max(5 if not quick else 3, base / max(n, 1))))


# ------------------------------------------------------------------------------------------ 1
def trig_bound(quick):
    model = two_gaussians()
    theta = model.get_free()
    rpu = model.rad_per_unit
    out = {}
    for n in [10**5] if quick else [10**5, 10**6]:
        u, v = uv_rows(n, 1)
        turns = [u * (c["east"] * rpu) + v * (c["north"] * rpu) for c in model.members()]
        phases = [2.0 * np.pi * t for t in turns]
        s = np.empty(n)
        c = np.empty(n)

        def numpy_trig():
            for ph in phases:
                np.sin(ph, out=s)
                np.cos(ph, out=c)

        funcs = [lambda: model.visibilities(u, v, theta=theta), numpy_trig]
        if engine.current() == "numba":
            k = engine.kernels()
            k.sincos_array(turns[0], s, c)

            def own_trig():
                for t in turns:
                    k.sincos_array(t, s, c)

            funcs.append(own_trig)
        for f in funcs:
            f()
        times = best_of(funcs, repeats_for(n, quick) * 2)
        row = {
            "rows": n,
            "model_ns_per_row": times[0] / n * 1e9,
            "numpy_sin_cos_ns_per_row": times[1] / n * 1e9,
            "ratio": times[0] / times[1],
        }
        if len(times) > 2:
            row["engine_sincos_ns_per_row"] = times[2] / n * 1e9
            row["ratio_to_engine_sincos"] = times[0] / times[2]
        out[str(n)] = row
    worst = max(r["ratio"] for r in out.values())
    return {
        "by_rows": out,
        "ratio": worst,
        "definition": "t(model.visibilities, 2 offset Gaussians) / t(numpy sin + cos of each "
        "component's precomputed phase into preallocated arrays); worst size",
    }


# ------------------------------------------------------------------------------------------ 2
def jacobian_fit(quick):
    from scipy.optimize import least_squares

    from uvfit.stats.modes import make_statistic

    truth = three_components()
    n = 10**5
    vs = simulate(truth, n, 0.05, 3)
    start = truth.copy()
    x_true = truth.get_free()
    rng = np.random.default_rng(5)
    x0 = x_true + np.where(
        [nm.endswith(("flux", "fwhm")) for nm in start.free_names], 0.1 * np.abs(x_true), 0.03
    ) * rng.standard_normal(x_true.size)
    start.set_free(x0)
    stat = make_statistic("complex", vs, start)
    lo, hi = start.free_bounds()

    def run(jac, solver="exact"):
        t0 = time.perf_counter()
        with np.errstate(all="ignore"):
            res = least_squares(
                stat.residuals,
                x0,
                jac=jac,
                bounds=(lo, hi),
                method="trf",
                x_scale="jac",
                max_nfev=200 * (x0.size + 1),
                tr_solver=solver,
            )
        return time.perf_counter() - t0, res

    run(stat.jacobian)  # warm-up
    rounds = 1 if quick else 3
    ta, tf = math.inf, math.inf
    for _ in range(rounds):
        t, ra = run(stat.jacobian)
        ta = min(ta, t)
        t, rf = run("2-point")
        tf = min(tf, t)
    # where the time goes: one Jacobian of the statistic, analytic against k residual vectors
    # (what the 2-point rule costs), and one SVD of the Jacobian (done by the solver each iteration)
    # the same with scipy's iterative trust-region solver (no SVD of the Jacobian per iteration)
    tla, tlf = math.inf, math.inf
    for _ in range(rounds):
        t, rla = run(stat.jacobian, "lsmr")
        tla = min(tla, t)
        t, rlf = run("2-point", "lsmr")
        tlf = min(tlf, t)
    jac = stat.jacobian(ra.x)
    t_res, t_jac, t_svd = best_of(
        [lambda: stat.residuals(ra.x), lambda: stat.jacobian(ra.x), lambda: np.linalg.svd(jac, full_matrices=False)],
        3 if quick else 7,
    )
    cov = np.linalg.inv(jac.T @ jac)
    err = np.sqrt(np.diag(cov))
    shift = float(np.max(np.abs(ra.x - rf.x) / err))
    shift_lsmr = float(np.max(np.abs(rla.x - ra.x) / err))
    chi2a, chi2f = 2 * ra.cost, 2 * rf.cost
    # the project's fitter, for the record (analytic Jacobian, one start)
    from uvfit.infer.lsq import fit

    m2 = start.copy()
    t0 = time.perf_counter()
    fit(make_statistic("complex", vs, m2), seed=0)
    t_fit = time.perf_counter() - t0
    return {
        "rows": n,
        "free_parameters": int(x0.size),
        "analytic_s": ta,
        "finite_difference_s": tf,
        "ratio": tf / ta,
        "analytic_evaluations": {"residuals": int(ra.nfev), "jacobian": int(ra.njev)},
        "finite_difference_evaluations": {"residuals": int(rf.nfev), "jacobian": int(rf.njev)},
        "chi2_analytic": chi2a,
        "chi2_finite_difference": chi2f,
        "max_shift_in_errors": shift,
        "uvfit_fit_s": t_fit,
        "iteration_costs_ms": {
            "residuals": t_res * 1e3,
            "analytic_jacobian": t_jac * 1e3,
            "finite_difference_jacobian": x0.size * t_res * 1e3,
            "svd_of_jacobian": t_svd * 1e3,
        },
        "jacobian_stage_ratio": x0.size * t_res / t_jac,
        "iterative_solver": {
            "analytic_s": tla,
            "finite_difference_s": tlf,
            "ratio": tlf / tla,
            "max_shift_in_errors_from_exact": shift_lsmr,
        },
        "definition": "t(least_squares, 2-point FD Jacobian) / t(same, analytic Jacobian); "
        "min of rounds; same start, bounds and options",
    }


# ------------------------------------------------------------------------------------------ 3
def scaling(quick):
    model = two_gaussians()
    theta = model.get_free()
    sizes = [10**k for k in range(3, 7 if quick else 8)]
    rows = {}
    for n in sizes:
        u, v = uv_rows(n, 2)
        f = lambda: model.visibilities(u, v, theta=theta)  # noqa: E731
        f()
        t = best_of([f], repeats_for(n, quick))[0]
        tracemalloc.start()
        try:
            base = tracemalloc.get_traced_memory()[0]
            tracemalloc.reset_peak()
            vis = model.visibilities(u, v, theta=theta)
            peak = tracemalloc.get_traced_memory()[1] - base
        finally:
            tracemalloc.stop()
        data_bytes = u.nbytes + v.nbytes + vis.nbytes
        rows[str(n)] = {
            "ns_per_row": t / n * 1e9,
            "call_us": t * 1e6,
            "peak_bytes": int(peak),
            "data_bytes": int(data_bytes),
            "memory_ratio": peak / data_bytes,
        }
        del vis
    per = [r["ns_per_row"] for r in rows.values()]
    big = [r["ns_per_row"] for k, r in rows.items() if int(k) >= 10**4]
    # fixed cost per call: intercept of t = a + b n through the two smallest sizes
    t1, t2 = rows[str(sizes[0])]["call_us"], rows[str(sizes[1])]["call_us"]
    fixed = (t1 * sizes[1] - t2 * sizes[0]) / (sizes[1] - sizes[0])
    return {
        "by_rows": rows,
        "flatness": max(per) / min(per),
        "flatness_from_1e4": max(big) / min(big),
        "fixed_cost_per_call_us": fixed,
        "memory_ratio": max(r["memory_ratio"] for r in rows.values()),
        "data_arrays": "u and v (8 bytes per row each) + output visibilities (16 bytes per row)",
        "definition": "flatness = max / min of the time per row over the sizes; memory ratio = "
        "tracemalloc peak during the call / data bytes",
    }


# ------------------------------------------------------------------------------------------ 4
def sampler_overhead(quick):
    from uvfit.infer.sampling import LogPosterior, run_chain
    from uvfit.stats.modes import make_statistic

    out = {}
    for n in [10**4] if quick else [10**4, 10**5]:
        model = two_gaussians()
        vs = simulate(model, n, 0.05, 4)
        stat = make_statistic("complex", vs, model)
        lp = LogPosterior(stat, model)
        theta = model.get_free()
        names = model.free_names
        lo, hi = model.free_bounds()
        walkers = max(32, 4 * len(names))
        steps = 20 if quick else (60 if n > 10**4 else 150)
        cov = np.diag((1e-3 * np.maximum(np.abs(theta), 0.01)) ** 2)
        rows = stat.rows
        one = lambda: model.visibilities(rows.u, rows.v, frequency=rows.frequency, theta=theta)  # noqa: E731
        run_chain(lp, theta, cov, (lo, hi), names, n_walkers=walkers, max_steps=5, seed=1)  # warm-up
        evals = []
        stamps = []
        for _ in range(1 if quick else 2):
            evals += [timeit.timeit(one, number=1) for _ in range(30)]
            marks = [time.perf_counter()]
            chain = run_chain(
                lp,
                theta,
                cov,
                (lo, hi),
                names,
                n_walkers=walkers,
                max_steps=steps,
                seed=2,
                progress=lambda k: marks.append(time.perf_counter()),
            )
            stamps += list(np.diff(marks[1:]))  # step k -> k+1 (the first interval holds setup)
            evals += [timeit.timeit(one, number=1) for _ in range(30)]
        step_med, step_min = float(np.median(stamps)), float(np.min(stamps))
        eval_med, eval_min = float(np.median(evals)), float(np.min(evals))
        out[str(n)] = {
            "rows": n,
            "walkers": walkers,
            "steps": len(stamps),
            "step_s_median": step_med,
            "step_s_min": step_min,
            "step_s_mean": float(np.mean(stamps)),
            "model_evaluation_s_median": eval_med,
            "model_evaluation_s_min": eval_min,
            "ratio": step_med / (walkers * eval_med),
            "ratio_of_minima": step_min / (walkers * eval_min),
            "acceptance": float(np.mean(chain.acceptance_fraction)),
        }
    return {
        "by_rows": out,
        "ratio": out[max(out, key=int)]["ratio"],
        "definition": "median wall time per ensemble step (timed step by step) / (walkers x "
        "median of one model.visibilities on the statistic's rows, timed before "
        "and after the chain); reported at the largest size",
    }


# ------------------------------------------------------------------------------------------ 5
def _stations_set(model, n, sigma, seed):
    """Invented rows on the baselines of six stations (so that leaving one out is possible)."""
    u, v = uv_rows(n, seed)
    rng = np.random.default_rng(seed + 1)
    vis = model.visibilities(u, v) + sigma * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    names = ["AA", "BB", "CC", "DD", "EE", "FF"]
    pairs = [(a, b) for i, a in enumerate(names) for b in names[i + 1 :]]
    k = np.arange(n) % len(pairs)
    return VisibilitySet(
        u=u,
        v=v,
        w=None,
        time=60000.0 + np.arange(n) * 1e-5,
        frequency=230e9,
        station1=[pairs[j][0] for j in k],
        station2=[pairs[j][1] for j in k],
        vis=vis,
        sigma=np.full(n, sigma),
    )


def parallel_speedup(quick):
    import json

    from uvfit.data.select import parse_time
    from uvfit.infer.compare import compare
    from uvfit.infer.jackknife import jackknife
    from uvfit.infer.lsq import fit
    from uvfit.infer.profile import profile
    from uvfit.sim.array import load_array
    from uvfit.sim.forecast import forecast
    from uvfit.sim.observe import Observation
    from uvfit.stats.modes import make_statistic

    two = two_gaussians()
    one = SkyModel.build(
        [{"name": "core", "shape": "gaussian", "flux": 1.4, "east": 0.0, "north": 0.0, "fwhm": 0.4}], angular_unit="mas"
    )
    n = 10000 if quick else 20000
    vs = _stations_set(two, n, 0.05, 7)
    stat = make_statistic("complex", vs, two.copy())
    best = fit(stat, starts=1, seed=0)
    array = load_array(
        os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "examples", "planning", "array.toml")
    )
    obs = Observation(
        ra_deg=210.547,
        dec_deg=38.753,
        start=parse_time("2027-04-10T03:00"),
        duration_s=3600.0,
        integration_s=120.0,
        frequency_hz=86e9,
    )
    work = {
        "bootstrap": lambda p: compare(vs, [one, two], bootstrap=12 if quick else 32, seed=1, starts=1, procs=p),
        "starts": lambda p: fit(make_statistic("complex", vs, two.copy()), starts=16 if quick else 32, seed=2, procs=p),
        "jackknife": lambda p: jackknife(stat, best, by="station", seed=3, starts=2 if quick else 4, procs=p),
        "profile": lambda p: profile(
            stat, "jet.flux", points=12 if quick else 30, starts=2, seed=4, best=best, procs=p
        ),
        "forecast": lambda p: forecast(array, two, [one], obs, trials=8 if quick else 24, seed=5, procs=p),
    }

    def numbers(out):
        if not isinstance(out, dict):  # a fit result
            out = {"values": list(map(float, out.values)), "chi2": out.chi2, "starts": out.starts}
        return json.dumps(out, sort_keys=True, default=str)

    rows = {}
    for key, job in work.items():
        t = {}
        got = {}
        job(1)  # warm-up: first-use costs (caches, compiled kernels) out of the timing
        for p in (1, 2, 2, 1) if not quick else (1, 2):  # interleaved: both see the same load
            t0 = time.perf_counter()
            got[p] = numbers(job(p))
            t[p] = min(t.get(p, math.inf), time.perf_counter() - t0)
        rows[key] = {
            "one_process_s": t[1],
            "two_processes_s": t[2],
            "ratio": t[1] / t[2],
            "same_numbers": got[1] == got[2],
        }
    total1 = sum(r["one_process_s"] for r in rows.values())
    total2 = sum(r["two_processes_s"] for r in rows.values())
    return {
        "by_work": rows,
        "ratio": total1 / total2,
        "rows": n,
        "same_numbers": all(r["same_numbers"] for r in rows.values()),
        "definition": "sum over the workloads of the best wall time with procs 1 / the same with procs 2",
    }


def machine():
    cpu = platform.processor()
    try:
        with open("/proc/cpuinfo") as fh:
            for line in fh:
                if line.startswith("model name"):
                    cpu = line.split(":", 1)[1].strip()
                    break
    except OSError:
        pass
    info = {
        "cpu": cpu,
        "cores": os.cpu_count(),
        "python": platform.python_version(),
        "numpy": np.__version__,
        "platform": platform.platform(),
        "load_average": list(os.getloadavg()) if hasattr(os, "getloadavg") else None,
        "OPENBLAS_CORETYPE": os.environ.get("OPENBLAS_CORETYPE"),
    }
    try:
        import numba

        info["numba"] = numba.__version__
    except Exception:
        info["numba"] = None
    return info


def verdict(key, value):
    op, goal = GOALS[key]
    ok = value <= goal if op == "<=" else value >= goal
    return f"{value:8.3f}  (goal {op} {goal}: {'met' if ok else 'NOT met'})"


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true", help="smaller sizes and fewer repeats")
    ap.add_argument("-o", "--output", default=None, help="JSON file for the results")
    ap.add_argument("--force", action="store_true", help="overwrite the JSON file")
    ap.add_argument(
        "--engine",
        choices=engine.ENGINES,
        default=None,
        help="visibility engine (default: UVFIT_ENGINE, else numba when available)",
    )
    ap.add_argument("--only", default=None, help="comma-separated subset: trig,fit,scaling,sampler,parallel")
    ap.add_argument(
        "--threaded-blas",
        action="store_true",
        help="leave OpenBLAS its threads (default: one thread, as the commands run)",
    )
    args = ap.parse_args(argv)
    if args.engine:
        engine.set_engine(args.engine)
    if args.output:
        os.makedirs(os.path.dirname(os.path.abspath(args.output)), exist_ok=True)
        try:  # refuse before minutes of measuring, not after
            check_writable(args.output, force=args.force)
        except UvfitError as exc:
            print(f"error: {exc}", file=sys.stderr)
            return 2
    only = set((args.only or "trig,fit,scaling,sampler,parallel").split(","))
    from uvfit._blas import single_threaded

    with contextlib.nullcontext() if args.threaded_blas else single_threaded():
        return measure(args, only)


def measure(args, only):
    started = datetime.datetime.now(datetime.timezone.utc)
    res = {
        "date_utc": started.isoformat(timespec="seconds"),
        "quick": bool(args.quick),
        "blas_threads": "default" if args.threaded_blas else 1,
        "engine": engine.current(),
        "machine": machine(),
        "goals": GOALS,
    }
    t0 = time.perf_counter()
    two_gaussians().visibilities(*uv_rows(10, 0))  # compile / load the kernels
    res["first_use_s"] = time.perf_counter() - t0
    print(
        f"engine {res['engine']}, first use (import, compile or cache load) {res['first_use_s']:.2f} s", file=sys.stderr
    )
    if "trig" in only:
        res["trig_bound"] = trig_bound(args.quick)
        print("1. model / numpy trig       " + verdict("trig_bound", res["trig_bound"]["ratio"]))
        for n, r in res["trig_bound"]["by_rows"].items():
            extra = (
                (
                    f", engine sincos {r['engine_sincos_ns_per_row']:.2f} ns/row "
                    f"(model / it {r['ratio_to_engine_sincos']:.2f})"
                )
                if "engine_sincos_ns_per_row" in r
                else ""
            )
            print(
                f"     {n:>9} rows: model {r['model_ns_per_row']:.2f} ns/row, numpy sin+cos "
                f"{r['numpy_sin_cos_ns_per_row']:.2f} ns/row{extra}"
            )
    if "fit" in only:
        res["jacobian_fit"] = jacobian_fit(args.quick)
        r = res["jacobian_fit"]
        print("2. fit FD / analytic        " + verdict("jacobian_fit", r["ratio"]))
        c = r["iteration_costs_ms"]
        print(
            f"     per iteration: analytic Jacobian {c['analytic_jacobian']:.1f} ms, finite-difference "
            f"Jacobian {c['finite_difference_jacobian']:.1f} ms (ratio {r['jacobian_stage_ratio']:.2f}), "
            f"SVD of the Jacobian in the solver {c['svd_of_jacobian']:.1f} ms"
        )
        it = r["iterative_solver"]
        print(
            f"     with tr_solver='lsmr': analytic {it['analytic_s']:.2f} s, finite differences "
            f"{it['finite_difference_s']:.2f} s, ratio {it['ratio']:.2f}"
        )
        print(
            f"     {r['rows']} rows, {r['free_parameters']} free: analytic {r['analytic_s']:.2f} s, "
            f"finite differences {r['finite_difference_s']:.2f} s; optima differ by "
            f"{r['max_shift_in_errors']:.2g} errors, chi2 {r['chi2_analytic']:.2f} / "
            f"{r['chi2_finite_difference']:.2f}; uvfit fit() {r['uvfit_fit_s']:.2f} s"
        )
    if "scaling" in only:
        res["scaling"] = r = scaling(args.quick)
        print("3. scaling: time per row    " + verdict("scaling_flatness", r["flatness"]))
        print("            peak memory     " + verdict("scaling_memory", r["memory_ratio"]))
        print(
            f"     from 1e4 rows on: max/min {r['flatness_from_1e4']:.3f}; fixed cost per call "
            f"{r['fixed_cost_per_call_us']:.1f} us"
        )
        for n, x in r["by_rows"].items():
            print(
                f"     {n:>9} rows: {x['ns_per_row']:.2f} ns/row, peak {x['peak_bytes'] / 1e6:.3f} MB "
                f"= {x['memory_ratio']:.3f} x data"
            )
    if "sampler" in only:
        res["sampler_overhead"] = r = sampler_overhead(args.quick)
        print("4. sampler step / evals     " + verdict("sampler_overhead", r["ratio"]))
        for n, x in r["by_rows"].items():
            print(
                f"     {n:>9} rows: {x['walkers']} walkers, step {x['step_s_median'] * 1e3:.2f} ms "
                f"(median), model {x['model_evaluation_s_median'] * 1e6:.1f} us (median), ratio "
                f"{x['ratio']:.3f}; of the minima {x['ratio_of_minima']:.3f}"
            )
    if "parallel" in only:
        res["parallel_speedup"] = r = parallel_speedup(args.quick)
        print("5. parallel: 1 / 2 procs    " + verdict("parallel_speedup", r["ratio"]))
        for key, x in r["by_work"].items():
            print(
                f"     {key:>9}: {x['one_process_s']:.2f} s in one process, {x['two_processes_s']:.2f} s in two, "
                f"ratio {x['ratio']:.2f}; same numbers: {x['same_numbers']}"
            )
    res["elapsed_s"] = time.perf_counter() - t0
    res["machine"]["load_average_end"] = list(os.getloadavg()) if hasattr(os, "getloadavg") else None
    if args.output:
        write_json(args.output, res, force=args.force)
        print(f"wrote {args.output}", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
