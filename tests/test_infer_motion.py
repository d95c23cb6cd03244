"""Component motions across epochs: an invented jet observed five times over four years.

Sources beside each check: the invented truth the epochs were simulated from (uvfit's simulate
task), astropy.cosmology and astropy.constants for the apparent speed (the relation
beta_app = mu D_L / (c (1 + z)), Lister et al. 2009, AJ 138, 1874), and numpy's least squares
for the weighted straight-line fit.
"""

import copy
import json
import os

import numpy as np
import pytest
from astropy import constants
from astropy.cosmology import Planck18
from astropy.time import Time

from uvfit import tasks
from uvfit.cli import main
from uvfit.errors import UvfitError
from uvfit.infer.motion import BY_NAME, BY_POSITION, linear_motion
from uvfit.sim.array import parse_array
from uvfit.sky.modelfile import loads

#: an invented array of six stations
ARRAY = parse_array(
    {
        "name": "invented six-station array",
        "station": [
            {"name": "A1", "lat": 48.0, "lon": 10.0, "height": 300.0, "sefd": 3000.0},
            {"name": "A2", "lat": 40.0, "lon": -4.0, "height": 600.0, "sefd": 3000.0},
            {"name": "A3", "lat": 60.0, "lon": 25.0, "height": 100.0, "sefd": 3000.0},
            {"name": "A4", "lat": 35.0, "lon": 33.0, "height": 200.0, "sefd": 3000.0},
            {"name": "A5", "lat": 45.0, "lon": -70.0, "height": 100.0, "sefd": 3000.0},
            {"name": "A6", "lat": 30.0, "lon": -95.0, "height": 400.0, "sefd": 3000.0},
        ],
    }
)
MU, PA_DEG, EJECTION = 0.3, 240.0, 2017.5  # mas/yr, deg, Julian epoch: the invented knot
EPOCHS = ["2020-02-01", "2021-02-01", "2022-02-01", "2023-02-01", "2024-02-01"]

TRUE = """angular_unit = "mas"
[[component]]
name = "core"
shape = "point"
flux = 1.0
east = 0.0
north = 0.0
[[component]]
name = "knot"
shape = "gaussian"
flux = 0.4
east = {east}
north = {north}
fwhm = 0.3
"""
START = """angular_unit = "mas"
[[component]]
name = "core"
shape = "point"
flux = 0.9
east = {{ value = 0.0, min = -1.0, max = 1.0 }}
north = {{ value = 0.0, min = -1.0, max = 1.0 }}
[[component]]
name = "{knot}"
shape = "gaussian"
flux = 0.3
east = {{ value = {east}, min = -4.0, max = 4.0 }}
north = {{ value = {north}, min = -4.0, max = 4.0 }}
fwhm = {{ value = 0.25, min = 0.0, max = 2.0 }}
"""


def knot_position(year):
    r = MU * (year - EJECTION)
    return r * np.sin(np.radians(PA_DEG)), r * np.cos(np.radians(PA_DEG))


@pytest.fixture(scope="module")
def epoch_fits():
    """Five fits, one per simulated epoch (6 h at 15 GHz, 20-min integrations)."""
    out = []
    for k, day in enumerate(EPOCHS):
        obs = tasks.observation("13h", "+41d", f"{day}T00:00", "6h", "15GHz", integration="1200s")
        year = Time(f"{day}T03:00", scale="utc").jyear
        e, n = knot_position(year)
        sim = tasks.simulate(ARRAY, loads(TRUE.format(east=e, north=n)), obs, seed=10 + k)
        start = loads(START.format(knot="knot", east=round(e, 1), north=round(n, 1)))
        out.append(tasks.fit(sim.vset, start, seed=0, resolved_test=False).to_dict())
    return out


def test_fit_records_the_observation_time(epoch_fits):
    # the simulated observation: 6 h from 00:00 UTC of each day (uvfit's simulate task)
    for day, fit in zip(EPOCHS, epoch_fits):
        obs = fit["observation"]
        assert (
            Time(day).mjd <= obs["time_start_mjd"] < obs["time_mean_mjd"] < obs["time_end_mjd"] <= Time(day).mjd + 0.25
        )


def test_motion_recovers_the_invented_knot(epoch_fits):
    # the invented truth: 0.3 mas/yr at PA 240 deg, ejected 2017.5
    rec = tasks.motion(epoch_fits, reference="core", redshift=0.5).to_dict()
    assert rec["matched"] == BY_NAME
    knot = rec["components"]["knot"]
    pm, pa, ej = knot["proper_motion"], knot["position_angle"], knot["ejection_epoch"]
    assert abs(pm["value"] - MU) < 3 * pm["error"] and pm["error"] < 0.05
    assert abs(pa["value"] - PA_DEG) < 3 * pa["error"]
    assert abs(ej["year"] - EJECTION) < 3 * ej["error_years"]
    # astropy.cosmology (Planck18) and astropy.constants: beta = mu D_L / (c (1 + z))
    mu_rad_s = pm["value"] * np.pi / 180 / 3.6e6 / (365.25 * 86400)
    d_l = Planck18.luminosity_distance(0.5).to_value("m")
    beta = mu_rad_s * d_l / (constants.c.to_value("m/s") * 1.5)
    assert knot["beta_app"]["value"] == pytest.approx(beta, rel=1e-6)


def test_weighted_line_matches_numpy_least_squares():
    # numpy.linalg.lstsq on the whitened system (independent east and north errors)
    rng = np.random.default_rng(2)
    t = np.linspace(-2, 2, 5)
    se, sn = rng.uniform(0.01, 0.03, 5), rng.uniform(0.01, 0.03, 5)
    r = np.column_stack([0.1 + 0.2 * t + rng.normal(0, se), -0.3 - 0.1 * t + rng.normal(0, sn)])
    cov = np.array([np.diag([a * a, b * b]) for a, b in zip(se, sn)])
    got = linear_motion(t, r, cov)
    ref_e = np.linalg.lstsq(np.column_stack([np.ones(5), t]) / se[:, None], r[:, 0] / se, rcond=None)[0]
    ref_n = np.linalg.lstsq(np.column_stack([np.ones(5), t]) / sn[:, None], r[:, 1] / sn, rcond=None)[0]
    assert np.allclose(got["theta"], [ref_e[0], ref_n[0], ref_e[1], ref_n[1]], rtol=1e-10)


def test_renamed_knot_is_matched_by_position(epoch_fits):
    # the same fits with the knot renamed in one epoch give the same motion (the name-matched run)
    fits = copy.deepcopy(epoch_fits)
    fits[2]["model_toml"] = fits[2]["model_toml"].replace('"knot"', '"jet"')
    fits[2]["parameters"] = {k.replace("knot.", "jet."): v for k, v in fits[2]["parameters"].items()}
    fits[2]["covariance"]["names"] = [n.replace("knot.", "jet.") for n in fits[2]["covariance"]["names"]]
    by_pos = tasks.motion(fits, reference="core").to_dict()
    by_name = tasks.motion(epoch_fits, reference="core").to_dict()
    assert by_pos["matched"] == BY_POSITION
    assert by_pos["components"]["knot"]["components"][2] == "jet"
    a, b = by_pos["components"]["knot"]["proper_motion"], by_name["components"]["knot"]["proper_motion"]
    assert a["value"] == pytest.approx(b["value"], rel=1e-12)


def test_cli_motion_and_epochs_without_time(epoch_fits, tmp_path, capsys):
    paths = []
    for k, fit in enumerate(epoch_fits):
        p = tmp_path / f"e{k}.json"
        p.write_text(json.dumps(fit))
        paths.append(str(p))
    out, png = str(tmp_path / "m.json"), str(tmp_path / "m.png")
    with pytest.raises(SystemExit) as exc:
        main(["motion", *paths, "--reference", "core", "--redshift", "0.5", "--json", out, "--plot", png])
    assert exc.value.code == 0
    with open(out) as handle:
        assert handle.read() == json.dumps(json.load(open(out)), indent=2) + "\n"
    assert (
        tasks.motion(paths, reference="core", redshift=0.5).to_dict()["components"]["knot"]["proper_motion"]
        == (json.load(open(out))["components"]["knot"]["proper_motion"])
    )
    assert os.path.getsize(png) > 1000
    capsys.readouterr()
    stale = dict(epoch_fits[0])
    stale.pop("observation")
    bad = tmp_path / "old.json"
    bad.write_text(json.dumps(stale))
    for args, words in [
        (["motion", str(bad), *paths[1:]], "observation time"),
        (["motion", paths[0]], "two epochs"),
        (["motion", *paths, "--reference", "nothing"], "--reference"),
        (["motion", *paths, "--redshift", "0.5", "--cosmology", "Nope"], "--cosmology"),
    ]:
        with pytest.raises(SystemExit) as exc:
            main(args)
        err = capsys.readouterr().err.strip()
        assert exc.value.code == 2 and len(err.splitlines()) == 1 and words in err, err
    with pytest.raises(UvfitError, match="observation time"):
        tasks.motion([stale, epoch_fits[1]])
