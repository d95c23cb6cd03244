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


def test_forecast_trials_do_not_depend_on_procs(tmp_path):
    import os

    import uvfit
    from tests.helpers.invented import component, model_toml
    from uvfit.data.select import parse_time
    from uvfit.sim.array import load_array
    from uvfit.sim.forecast import forecast
    from uvfit.sim.observe import Observation

    (tmp_path / "s.toml").write_text(model_toml(component("core", 1.0, fwhm=40.0)))
    (tmp_path / "d.toml").write_text(
        model_toml(component("core", 1.0, fwhm=40.0), component("knot", 0.4, east=-60.0, north=-80.0, fwhm=50.0))
    )
    single, pair = uvfit.load_model(tmp_path / "s.toml"), uvfit.load_model(tmp_path / "d.toml")
    arr = load_array(os.path.join(os.path.dirname(__file__), "..", "examples", "planning", "array.toml"))
    obs = Observation(
        ra_deg=210.547,
        dec_deg=38.753,
        start=parse_time("2027-04-10T03:00"),
        duration_s=3600.0,
        integration_s=600.0,
        frequency_hz=86e9,
    )
    ticks = []
    a = forecast(arr, pair, [single], obs, trials=4, seed=3, alt_names=["single"], procs=1)
    b = forecast(arr, pair, [single], obs, trials=4, seed=3, alt_names=["single"], procs=2, progress=ticks.append)
    _same(a, b)
    assert len(ticks) == 4 and len(a["per_trial"]) == 4


def test_commands_give_the_same_json_with_procs(tmp_path):
    # through the command line (click's runner): the JSON files of --procs 1 and 2 are equal bytes
    from click.testing import CliRunner

    import uvfit
    from uvfit.cli import cli

    truth = double()
    uvfit.write(simulate(truth, n=150, sigma=0.03, seed=8), tmp_path / "data.uvfits")
    truth.save(tmp_path / "two.toml")
    SkyModel.build(
        [{"name": "core", "shape": "gaussian", "flux": 1.2, "east": 0.0, "north": 0.0, "fwhm": 0.4}], angular_unit="mas"
    ).save(tmp_path / "one.toml")
    inputs = [str(tmp_path / n) for n in ("data.uvfits", "one.toml", "two.toml")]
    outs = []
    for procs in (1, 2):
        js = tmp_path / f"cmp{procs}.json"
        args = ["compare", *inputs, "--bootstrap", "3", "--starts", "2", "--procs", str(procs), "--json", str(js)]
        res = CliRunner().invoke(cli, args)
        assert res.exit_code == 0, res.output
        outs.append(js.read_bytes())
    assert outs[0] == outs[1]
    bad = CliRunner().invoke(cli, ["compare", *inputs, "--procs", "0"])
    assert bad.exit_code == 2 and "--procs" in bad.output
