"""Several data files in one run of sample, compare, profile, jackknife and closures --model.

Source of the truth: invented two-band data simulated from a known model (an invented 6-station
array, tests/helpers/sample_data.py); the statistic of a joint run is the sum over the files
(common practice), checked against the per-file runs."""

import json

import pytest
from click.testing import CliRunner

import uvfit
from tests.helpers.sample_data import simulate, snapshots, two_points
from uvfit.cli import cli
from uvfit.sky.modelfile import loads

PER_FILE = """angular_unit = "mas"
[[component]]
name = "a"
shape = "point"
flux = { value = 1.1, per = "file" }
east = { value = 0.0, fixed = true }
north = { value = 0.0, fixed = true }
[[component]]
name = "b"
shape = "point"
flux = 0.3
east = 0.3
north = 0.2
"""


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    d = tmp_path_factory.mktemp("joint")
    for k, (flux, freq) in enumerate(((1.0, 86e9), (1.3, 90e9))):
        uvfit.write(
            simulate(two_points(flux, 0.3), n=120, sigma=0.03, seed=5 + k, frequency=freq), str(d / f"b{k}.ecsv")
        )
        uvfit.write(snapshots(two_points(flux, 0.3), n_times=6, seed=9 + k), str(d / f"s{k}.ecsv"))
    (d / "per.toml").write_text(PER_FILE)
    two_points(1.1, 0.3).save(str(d / "shared.toml"))
    uvfit.SkyModel.build(
        [{"name": "a", "shape": "point", "flux": 1.1, "east": {"value": 0.0, "fixed": True}, "north": 0.0}],
        angular_unit="mas",
    ).save(str(d / "one.toml"))
    return d


def _run(args):
    r = CliRunner().invoke(cli, args)
    assert r.exit_code == 0, r.output
    return r


def test_sample_profile_jackknife_take_several_files(files):
    d = files
    data = [str(d / "b0.ecsv"), str(d / "b1.ecsv")]
    _run(["sample", *data, str(d / "per.toml"), "--walkers", "16", "--max-steps", "60", "--json", str(d / "s.json")])
    out = json.loads((d / "s.json").read_text())
    assert out["data"] == data
    # the invented truth: 1.0 Jy in the first file, 1.3 Jy in the second (wide: 60 steps only)
    assert abs(out["parameters"]["a.flux@1"]["median"] - 1.0) < 0.1
    assert abs(out["parameters"]["a.flux@2"]["median"] - 1.3) < 0.1
    _run(
        ["profile", *data, str(d / "per.toml"), "--parameter", "b.flux", "--points", "20", "--json", str(d / "p.json")]
    )
    prof = json.loads((d / "p.json").read_text())
    assert prof["data"] == data
    _run(["jackknife", *data, str(d / "per.toml"), "--by", "station", "--json", str(d / "j.json")])
    assert json.loads((d / "j.json").read_text())["data"] == data


def test_compare_and_closures_take_several_files(files):
    d = files
    data = [str(d / "b0.ecsv"), str(d / "b1.ecsv")]
    _run(["compare", *data, str(d / "one.toml"), str(d / "shared.toml"), "--json", str(d / "c.json")])
    out = json.loads((d / "c.json").read_text())
    assert out["data"] == data and len(out["model_files"]) == 2
    # closures of two files: the closures of each file, counted together (common practice)
    snaps = [str(d / "s0.ecsv"), str(d / "s1.ecsv")]
    _run(["closures", *snaps, "--model", str(d / "per.toml"), "--json", str(d / "k.json")])
    both = json.loads((d / "k.json").read_text())
    assert both["data"] == snaps
    single = []
    for k, path in enumerate(snaps):
        _run(["closures", path, "--model", str(d / "shared.toml"), "--json", str(d / f"k{k}.json")])
        single.append(json.loads((d / f"k{k}.json").read_text()))
    assert both["n_closure_phases"] == sum(s["n_closure_phases"] for s in single)


def test_a_per_file_fit_read_back_keeps_each_files_value(files, tmp_path):
    from uvfit.show.readback import model_from_fit

    d = files
    data = [str(d / "b0.ecsv"), str(d / "b1.ecsv")]
    _run(["fit", *data, str(d / "per.toml"), "--starts", "1", "--no-resolved-test", "--json", str(tmp_path / "f.json")])
    rec = json.loads((tmp_path / "f.json").read_text())
    model = model_from_fit(rec)
    assert model.values()["a.flux@2"] == pytest.approx(rec["parameters"]["a.flux@2"]["value"])
    assert loads(rec["model_toml"]).parameters["a.flux"].per == "file"
    assert "a.flux@1" in rec["files"][0]["parameters"]["a.flux"]["name"]
