"""Cost of solving station gains inside a fit, as ratios measured in one run on one machine.

    python3 benchmarks/gains.py [-o benchmarks/results/gains.json] [--force]

Invented data: the eight-station double of tests/helpers/gain_sky.py (6 h, 120-s integrations,
30% amplitude gains and random phases per 10-minute scan). For gain intervals of 600 s and 120 s
(every integration) it times a least-squares fit with ``gains="complex"`` and a prior of 0.3, and
divides by the time of a plain complex fit and of a closure fit of the same rows (each the
minimum of 3 repeats, interleaved). Also the time of one profiled residual evaluation against one
model evaluation. Never run by the tests.
"""

import argparse
import json
import os
import sys
import time

sys.path.insert(0, os.path.join(os.path.dirname(__file__), ".."))

from tests.helpers.gain_sky import observe_double, start_model  # noqa: E402
from uvfit._blas import single_threaded  # noqa: E402
from uvfit.infer.lsq import fit  # noqa: E402
from uvfit.outputs import write_json  # noqa: E402
from uvfit.stats.modes import make_statistic  # noqa: E402


def _best(func, repeats=3):
    times = []
    for _ in range(repeats):
        t = time.perf_counter()
        func()
        times.append(time.perf_counter() - t)
    return min(times)


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("-o", "--output", default=None)
    parser.add_argument("--force", action="store_true")
    args = parser.parse_args(argv)
    vs = observe_double(1)
    out = {"rows": int(vs.n), "load_average": list(os.getloadavg()), "intervals": {}}
    fit(make_statistic("complex", vs, start_model()))  # compile and warm up
    for interval in (600.0, 120.0):
        opts = dict(gains="complex", gain_prior="*=0.3", gain_interval=interval)
        stat = make_statistic("complex", vs, start_model(), **opts)
        t_gain = _best(lambda: fit(make_statistic("complex", vs, start_model(), **opts)))
        t_plain = _best(lambda: fit(make_statistic("complex", vs, start_model())))
        t_closure = _best(lambda: fit(make_statistic("closure", vs, start_model())), repeats=1)
        theta = stat.model.get_free()
        model = stat.model
        r = stat.rows

        def fresh_residuals():
            stat._cache = None  # solve the gains again, as at a new structure vector
            return stat.residuals(theta)

        t_res = _best(fresh_residuals, 5)
        t_model = _best(lambda: model.visibilities(r.u, r.v, frequency=r.frequency, theta=theta), 5)
        out["intervals"][f"{interval:g} s"] = {
            "n_gains": int(stat.solver.n_gains),
            "n_intervals": int(stat.solver.n_intervals),
            "fit_time_ratio_to_plain_complex": t_gain / t_plain,
            "fit_time_ratio_to_closure": t_gain / t_closure,
            "residual_time_ratio_to_one_model_evaluation": t_res / t_model,
        }
    print(json.dumps(out, indent=2))
    if args.output:
        write_json(args.output, out, force=args.force)


if __name__ == "__main__":
    with single_threaded():
        main()
