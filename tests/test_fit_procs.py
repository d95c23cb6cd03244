"""Work spread over several processes gives the same numbers as one process.

The reference is the same computation run in this process (procs 1): every random step draws from
a seed fixed by the piece of work, so the JSON numbers must be identical (common practice for
reproducible parallel Monte Carlo: per-task seeds, results gathered in task order).
"""

import json

import numpy as np

from tests.helpers.fit_sim import double, simulate
from uvfit.infer.compare import compare
from uvfit.infer.parallel import run_pieces
from uvfit.sky.model import SkyModel


def _fixed(v):
    return {"value": v, "fixed": True}


ONE = [{"name": "core", "shape": "point", "flux": 1.0, "east": _fixed(0.0), "north": _fixed(0.0)}]
KNOT = {"name": "knot", "shape": "point", "flux": 0.05, "east": _fixed(0.3), "north": _fixed(-0.2)}


def _square(shared, item):
    return shared * item * item


def _same(a, b):
    # identical JSON text: the numbers are bit-for-bit the same
    assert json.dumps(a, sort_keys=True, default=str) == json.dumps(b, sort_keys=True, default=str)


def test_pieces_come_back_in_order_with_progress():
    # plain arithmetic is the reference (common practice)
    ticks = []
    out = run_pieces(_square, range(7), 3, procs=2, progress=ticks.append)
    assert out == [3 * k * k for k in range(7)] and len(ticks) == 7


def test_bootstrap_numbers_do_not_depend_on_procs():
    one = SkyModel.build(ONE, angular_unit="mas")
    two = SkyModel.build(ONE + [KNOT], angular_unit="mas")
    vs = simulate(two, n=60, sigma=0.2, seed=11, qmax=3e9)
    a = compare(vs, [one, two], bootstrap=6, seed=2, starts=2, procs=1)
    b = compare(vs, [one, two], bootstrap=6, seed=2, starts=2, procs=2)
    _same(a, b)
    assert np.isfinite(a["models"][1]["false_alarm_probability"])


def _double_fit_record(procs, **extra):
    from uvfit import tasks

    model = double()
    vs = simulate(model, n=200, sigma=0.02, seed=5)
    return tasks.fit(vs, model, starts="auto", seed=3, procs=procs, **extra).to_dict()


def test_starts_jackknife_and_profile_do_not_depend_on_procs():
    extra = dict(jackknife="station", profile="knot.flux")
    a = _double_fit_record(1, **extra)
    b = _double_fit_record(2, **extra)
    _same(a, b)
    assert a["starts"] >= 8 and len(a["jackknife"]["groups"]) == 5 and len(a["profile"]["knot.flux"]["grid"]) >= 21
