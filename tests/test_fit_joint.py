"""A joint fit of two invented bands: the spectral index of each component across the files.

Source of the truth: the invented model the two bands were simulated from (uvfit's simulate task,
an invented array), S(nu) = S0 (nu / nu0)^alpha as in the model files."""

import pytest

from tests.helpers.arrays import five_station_array
from uvfit import tasks
from uvfit.sky.modelfile import loads

ARRAY = five_station_array()
MODEL = """angular_unit = "mas"
[[component]]
name = "core"
shape = "point"
flux = {{ value = {core}, min = 0.0 }}
east = 0.0
north = 0.0
spectral_index = {{ value = {a_core} }}
reference_frequency = "15 GHz"
[[component]]
name = "knot"
shape = "gaussian"
flux = {{ value = {knot}, min = 0.0 }}
east = {{ value = {east}, min = -3.0, max = 3.0 }}
north = {{ value = {north}, min = -3.0, max = 3.0 }}
fwhm = {{ value = 0.4, min = 0.0, max = 3.0 }}
spectral_index = {{ value = {a_knot} }}
reference_frequency = "15 GHz"
"""


def test_joint_fit_of_two_bands_measures_the_spectral_indices():
    truth = loads(MODEL.format(core=1.0, a_core=0.3, knot=0.5, a_knot=-0.8, east=-0.9, north=-0.5))
    sets = []
    for k, freq in enumerate(("15GHz", "43GHz")):
        obs = tasks.observation("13h", "+41d", "2025-03-01T00:00", "6h", freq, integration="1200s")
        sets.append(tasks.simulate(ARRAY, truth, obs, seed=20 + k).vset)
    start = loads(MODEL.format(core=0.8, a_core=0.0, knot=0.4, a_knot=0.0, east=-0.8, north=-0.6))
    rec = tasks.fit(sets, start, resolved_test=False).to_dict()
    p = rec["parameters"]
    for name, true in (("core.spectral_index", 0.3), ("knot.spectral_index", -0.8), ("knot.east", -0.9)):
        assert abs(p[name]["value"] - true) < 3 * p[name]["error"], (name, p[name])
    assert [f["data"] for f in rec["files"]] == ["set 1", "set 2"]
    assert sum(f["chi2"] for f in rec["files"]) == pytest.approx(rec["statistics"]["chi2"], rel=1e-9)
    with pytest.raises(tasks.UvfitError, match="phase centre"):
        other = tasks.observation("13h", "+42d", "2025-03-01T00:00", "6h", "43GHz", integration="1200s")
        tasks.fit([sets[0], tasks.simulate(ARRAY, truth, other, seed=1).vset], start)
