"""uvfit profile, uvfit jackknife, fit --profile/--jackknife on the shipped demo files (issue 15)."""

import json

from click.testing import CliRunner

from uvfit.cli import cli
from uvfit.demo import demo_file

DATA, MODEL = demo_file("uvd0917.uvfits"), demo_file("two.toml")


def _run(*args):
    res = CliRunner().invoke(cli, [str(a) for a in args], catch_exceptions=False)
    return res


def test_profile_command_json_and_plot(tmp_path):
    out, png = tmp_path / "p.json", tmp_path / "p.png"
    res = _run(
        "profile",
        DATA,
        MODEL,
        "--parameter",
        "pair.separation",
        "--points",
        "7",
        "--starts",
        "1",
        "--json",
        out,
        "--plot",
        png,
    )
    assert res.exit_code == 0, res.output
    d = json.loads(out.read_text())
    for key in ("parameter", "grid", "chi2", "best", "interval_68", "interval_95", "unconstrained"):
        assert key in d
    ((lo, hi),) = d["interval_68"]
    # a well-measured separation: the profile interval agrees with the curvature error
    # (the two coincide for a quadratic chi2; Venzon & Moolgavkar 1988)
    assert abs((hi - lo) / 2 - d["formal_error"]) < 0.2 * d["formal_error"]
    assert png.read_bytes()[:4] == b"\x89PNG"


def test_profile_unknown_parameter_is_one_line():
    import pytest

    from uvfit.cli import main

    with pytest.raises(SystemExit) as exc:
        main(["profile", DATA, MODEL, "--parameter", "pair.nothing"])
    assert exc.value.code == 2


def test_jackknife_command_and_fit_options(tmp_path):
    out = tmp_path / "j.json"
    res = _run("jackknife", DATA, MODEL, "--by", "station", "--json", out)
    assert res.exit_code == 0, res.output
    d = json.loads(out.read_text())
    assert d["n_fits"] == len(d["groups"]) and "pair.separation" in d["parameters"]
    f = tmp_path / "f.json"
    res = _run(
        "fit", DATA, MODEL, "--profile", "pair.flux_ratio", "--jackknife", "station", "--no-resolved-test", "--json", f
    )
    assert res.exit_code == 0, res.output
    d = json.loads(f.read_text())
    assert "pair.flux_ratio" in d["profile"] and d["jackknife"]["by"] == "station"
    assert any("jackknife" in n for n in d["notices"])
