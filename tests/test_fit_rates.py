"""Positions with a rate in a joint fit of several epochs, against the epoch-by-epoch motion.

Source of the truth: an invented jet (a knot moving at 0.3 mas/yr toward position angle 240 deg,
five epochs over four years) simulated with uvfit's simulate task on an invented array; the
motion of the per-epoch fits by ``uvfit.tasks.motion`` (weighted least squares, common practice).
"""

import math

import numpy as np
import pytest

from uvfit import tasks
from uvfit.sim.array import parse_array
from uvfit.sky.modelfile import loads

ARRAY = parse_array(
    {
        "name": "invented five-station array",
        "station": [
            {"name": "C1", "lat": 48.0, "lon": 10.0, "height": 300.0, "sefd": 1500.0},
            {"name": "C2", "lat": 40.0, "lon": -4.0, "height": 600.0, "sefd": 1500.0},
            {"name": "C3", "lat": 60.0, "lon": 25.0, "height": 100.0, "sefd": 1500.0},
            {"name": "C4", "lat": 35.0, "lon": 33.0, "height": 200.0, "sefd": 1500.0},
            {"name": "C5", "lat": 45.0, "lon": -70.0, "height": 100.0, "sefd": 1500.0},
        ],
    }
)
MODEL = """angular_unit = "mas"
[[component]]
name = "core"
shape = "point"
flux = 1.0
east = {{ value = 0.0, fixed = true }}
north = {{ value = 0.0, fixed = true }}
[[component]]
name = "knot"
shape = "gaussian"
flux = {{ value = 0.5, min = 0.0 }}
east = {east}
north = {north}
fwhm = {{ value = 0.3, min = 0.0, max = 3.0 }}
"""
MU, PA = 0.3, 240.0  # mas/yr, deg
RATE_E, RATE_N = MU * math.sin(math.radians(PA)), MU * math.cos(math.radians(PA))
DATES = ["2020-01-01", "2021-01-01", "2022-01-01", "2023-01-01", "2024-01-01"]


def _epochs():
    sets = []
    for k, date in enumerate(DATES):
        years = k * 1.0  # about one Julian year apart
        truth = loads(MODEL.format(east=-0.6 + RATE_E * years, north=-0.4 + RATE_N * years))
        obs = tasks.observation("13h", "+41d", f"{date}T00:00", "6h", "15GHz", integration="1800s")
        sets.append(tasks.simulate(ARRAY, truth, obs, seed=60 + k).vset)
    return sets


def test_rates_of_a_joint_fit_agree_with_the_motion_of_the_epochs():
    sets = _epochs()
    moving = MODEL.format(
        east='{ value = -0.5, rate = 0.0, epoch = "2020-01-01" }',
        north='{ value = -0.5, rate = 0.0, epoch = "2020-01-01" }',
    )
    joint = tasks.fit(sets, loads(moving), starts=2, resolved_test=False).to_dict()
    p = joint["parameters"]
    assert p["knot.east_rate"]["unit"] == "mas / yr"
    # the invented truth, within 3 errors
    assert abs(p["knot.east_rate"]["value"] - RATE_E) < 3 * p["knot.east_rate"]["error"]
    assert abs(p["knot.north_rate"]["value"] - RATE_N) < 3 * p["knot.north_rate"]["error"]
    # epoch by epoch, then the motion of the knot relative to the core
    # (each epoch started near its knot, as one follows a knot from epoch to epoch)
    fits = [
        tasks.fit(
            vs, loads(MODEL.format(east=-0.55 + RATE_E * k, north=-0.45 + RATE_N * k)), starts=2, resolved_test=False
        )
        for k, vs in enumerate(sets)
    ]
    motion = tasks.motion([f.to_dict() for f in fits], reference="core").to_dict()
    knot = motion["components"]["knot"]
    cov = np.asarray(knot["covariance"]["matrix"])
    for axis, j in (("east", 2), ("north", 3)):
        rate = p[f"knot.{axis}_rate"]
        assert abs(rate["value"] - knot["velocity"][axis]) < math.sqrt(cov[j, j]), (axis, rate, knot["velocity"])
    mu = math.hypot(p["knot.east_rate"]["value"], p["knot.north_rate"]["value"])
    assert mu == pytest.approx(knot["proper_motion"]["value"], abs=knot["proper_motion"]["error"])
    pa = math.degrees(math.atan2(p["knot.east_rate"]["value"], p["knot.north_rate"]["value"])) % 360.0
    assert pa == pytest.approx(knot["position_angle"]["value"], abs=knot["position_angle"]["error"])
    # and both recover the invented motion within 3 errors
    assert abs(knot["proper_motion"]["value"] - MU) < 3 * knot["proper_motion"]["error"]
    assert abs(knot["position_angle"]["value"] - PA) < 3 * knot["position_angle"]["error"]
    # a saved model keeps the rate and its epoch
    again = loads(loads(moving).to_toml())
    assert again.parameters["knot.east"].epoch == pytest.approx(58849.0)  # 2020-01-01 UTC (astropy.time)
    assert again.rate_names() == {"knot.east": "knot.east_rate", "knot.north": "knot.north_rate"}


def test_a_rate_needs_an_epoch_and_a_free_position():
    with pytest.raises(tasks.UvfitError, match="epoch"):
        loads(MODEL.format(east="{ value = 0.1, rate = 0.2 }", north=0.0))
    with pytest.raises(tasks.UvfitError, match="free"):
        loads(MODEL.format(east='{ value = 0.1, rate = 0.2, epoch = "2020-01-01", fixed = true }', north=0.0))
    with pytest.raises(tasks.UvfitError, match="cannot have a rate"):
        loads(MODEL.format(east=0.0, north=0.0).replace("fwhm = {", "fwhm = { rate = 0.1, epoch = 1.0, "))
