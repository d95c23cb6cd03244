"""--gains on the commands: fit's JSON, ECSV and figure; sample, compare, jackknife, forecast; bad input."""

import json

import numpy as np
import pytest
from astropy.table import Table
from click.testing import CliRunner

import uvfit
from tests.helpers.gain_sky import eight_station_array, observe_double, start_model
from uvfit.cli import cli, main
from uvfit.show.style import PNG_SIGNATURE

GAIN_ARGS = ["--gains", "complex", "--gain-prior", "*=0.3", "--gain-interval", "600"]


def _run(*args):
    return CliRunner().invoke(cli, [str(a) for a in args], catch_exceptions=False)


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    d = tmp_path_factory.mktemp("gains")
    vs = observe_double(4, hours=2.0, integration_s=300.0, sefd=20000.0)
    uvfit.write(vs, d / "data.ecsv")  # the table format keeps no scan numbers: intervals of 600 s
    (d / "start.toml").write_text(start_model().to_toml())
    one = start_model()
    one.parameters["pair.flux_ratio"].value = 0.0
    one.parameters["pair.flux_ratio"].fixed = True
    one.parameters["pair.separation"].fixed = True
    one.parameters["pair.position_angle"].fixed = True
    (d / "one.toml").write_text(one.to_toml())
    return d


def test_fit_writes_gains_json_ecsv_and_figure(files):
    d = files
    out = [d / "f.json", d / "g.ecsv", d / "g.png"]
    res = _run(
        "fit",
        d / "data.ecsv",
        d / "start.toml",
        *GAIN_ARGS,
        "--json",
        out[0],
        "--gains-out",
        out[1],
        "--gains-plot",
        out[2],
        "--no-resolved-test",
    )
    assert res.exit_code == 0, res.output
    assert "gains (complex)" in res.output and "after the gains" in res.output
    doc = json.loads(out[0].read_text())
    # the JSON equals the task's record with the same options (the task layer's contract)
    report = uvfit.fit(
        d / "data.ecsv", d / "start.toml", gains="complex", gain_prior="*=0.3", gain_interval=600, resolved_test=False
    )
    assert doc["gains"]["table"] == json.loads(json.dumps(report.to_dict()["gains"]["table"]))
    assert doc["gains"]["n_intervals"] == 12 and doc["gains"]["prior_spread"] == {"*": 0.3}
    # the ECSV reads back with astropy: one row per station and interval, explicit units
    table = Table.read(out[1], format="ascii.ecsv")
    assert len(table) == len(doc["gains"]["table"]) and table.meta["seed"] == doc["seed"]
    assert str(table["phase"].unit) == "deg" and str(table["time_start"].unit) == "d"
    assert np.allclose(table["amplitude"], [r["amplitude"] for r in doc["gains"]["table"]])
    assert out[2].read_bytes()[:8] == PNG_SIGNATURE
    assert set(doc["per_station"]) == set(eight_station_array().names)


def test_other_commands_take_gains(files, tmp_path):
    d = files
    res = _run("compare", d / "data.ecsv", d / "one.toml", d / "start.toml", *GAIN_ARGS, "--json", tmp_path / "c.json")
    assert res.exit_code == 0, res.output
    assert json.loads((tmp_path / "c.json").read_text())["statistic_options"]["gains"] == "complex"
    res = _run("jackknife", d / "data.ecsv", d / "start.toml", "--by", "station", *GAIN_ARGS)
    assert res.exit_code == 0, res.output
    res = _run(
        "sample",
        d / "data.ecsv",
        d / "start.toml",
        *GAIN_ARGS,
        "--max-steps",
        "20",
        "--walkers",
        "10",
        "--json",
        tmp_path / "s.json",
    )
    assert res.exit_code == 0, res.output
    assert "Laplace" in json.loads((tmp_path / "s.json").read_text())["gains"]["method"]


def test_forecast_with_gains():
    arr = eight_station_array(sefd=20000.0)
    obs = uvfit.tasks.observation("10h", "+30d", "2027-03-01T02:00", "1h", "230GHz")
    one = start_model()
    one.parameters["pair.flux_ratio"].value = 0.0
    one.parameters["pair.flux_ratio"].fixed = True
    one.parameters["pair.separation"].fixed = True
    one.parameters["pair.position_angle"].fixed = True
    from tests.helpers.gain_sky import double

    rep = uvfit.forecast(
        arr,
        double(),
        [one],
        obs,
        trials=1,
        gain_error=0.3,
        phase_error=180.0,
        gains="complex",
        gain_prior="*=0.3",
        gain_interval=600,
    )
    assert rep.to_dict()["statistic_options"]["gains"] == "complex"


@pytest.mark.parametrize(
    "extra, words",
    [
        (["--gains-out", "x.ecsv"], "--gains-out"),
        (["--gains", "complex", "--gain-prior", "ZZ=0.1"], "--gain-prior"),
        (["--gains", "complex", "--gain-prior", "*=-1"], "--gain-prior"),
        (["--gains", "complex", "--gain-interval", "often"], "--gain-interval"),
        (["--gains", "phase", "--mode", "closure"], "--gains"),
    ],
)
def test_bad_gain_options_give_one_line(files, extra, words, capsys):
    d = files
    with pytest.raises(SystemExit) as exit_info:
        main(["fit", str(d / "data.ecsv"), str(d / "start.toml"), *extra])
    err = capsys.readouterr().err
    assert exit_info.value.code == 2, err
    assert "Traceback" not in err and words in err
    assert len(err.strip().splitlines()) == 1, err
