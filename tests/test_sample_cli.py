"""uvfit sample on the command line: outputs, resume, and clear refusals of bad input."""

import json
import os
import subprocess
import sys

import pytest
from click.testing import CliRunner

import uvfit
from tests.helpers.sample_data import simulate, two_points
from uvfit.cli import cli

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    d = tmp_path_factory.mktemp("sample")
    truth = two_points(1.0, 0.3, east=0.3, north=0.2)
    vs = simulate(truth, n=100, sigma=0.05, seed=2)
    uvfit.write(vs, str(d / "obs.ecsv"))
    flagged = vs.copy()
    flagged.flag[:] = True
    uvfit.write(flagged, str(d / "flagged.ecsv"))
    truth.save(str(d / "model.toml"))
    return d


def _run(args, cwd):
    return subprocess.run([sys.executable, "-m", "uvfit", "sample", *args], cwd=ROOT, capture_output=True, text=True)


def test_run_resume_and_outputs(files):
    d = files
    base = [str(d / "obs.ecsv"), str(d / "model.toml"), "--walkers", "10", "--seed", "4", "--chain", str(d / "c.h5")]
    runner = CliRunner()
    r = runner.invoke(
        cli, ["sample", *base, "--max-steps", "150", "--json", str(d / "a.json"), "--corner", str(d / "a.png")]
    )
    assert r.exit_code == 0, r.output
    assert "a-b.separation" in r.output and "95% interval" in r.output
    out = json.loads((d / "a.json").read_text())
    for key in (
        "parameters",
        "derived",
        "autocorrelation_time",
        "acceptance_fraction",
        "n_samples",
        "n_walkers",
        "n_steps",
        "burn_in",
        "thin",
        "converged",
        "seed",
        "mode",
        "ordering",
        "version",
        "model_toml",
        "data",
    ):
        assert key in out, key
    flux = out["parameters"]["a.flux"]
    for key in ("median", "lower", "upper", "lower_95", "upper_95", "max_posterior", "unit"):
        assert key in flux
    assert flux["unit"] == "Jy" and flux["lower_95"] < flux["lower"] < flux["median"] < flux["upper"]
    assert out["n_steps"] == 150 and out["n_walkers"] == 10 and out["seed"] == 4
    assert out["converged"] is False
    assert set(out["derived"]) >= {"a-b.separation", "a-b.position_angle", "a-b.flux_ratio"}
    assert (d / "a.png").stat().st_size > 1000
    # the max-posterior model file is a valid model
    from uvfit.sky.modelfile import loads

    assert loads(out["model_toml"]).free_names == list(out["parameters"])

    r = runner.invoke(cli, ["sample", *base, "--max-steps", "200", "--resume", "--json", str(d / "b.json")])
    assert r.exit_code == 0, r.output
    out2 = json.loads((d / "b.json").read_text())
    assert out2["n_steps"] == 200 and out2["resumed_from_step"] == 150

    # the chain file exists: refused without --force or --resume, nothing overwritten
    before = (d / "c.h5").stat().st_mtime_ns
    p = _run(base + ["--max-steps", "50"], d)
    assert p.returncode == 2 and "exists already" in p.stderr and "--resume" in p.stderr
    assert "Traceback" not in p.stderr + p.stdout
    assert (d / "c.h5").stat().st_mtime_ns == before
    # an existing JSON output is refused before any sampling
    p = _run(base + ["--max-steps", "50", "--resume", "--json", str(d / "a.json")], d)
    assert p.returncode == 2 and "exists already" in p.stderr and "Traceback" not in p.stderr


def test_resume_without_a_chain_file(files):
    d = files
    p = _run([str(d / "obs.ecsv"), str(d / "model.toml"), "--resume", "--chain", str(d / "none.h5")], d)
    assert p.returncode == 2 and "no chain file" in p.stderr and "Traceback" not in p.stderr
    p = _run([str(d / "obs.ecsv"), str(d / "model.toml"), "--resume"], d)
    assert p.returncode == 2 and "--chain" in p.stderr and "Traceback" not in p.stderr


def test_all_flagged_data(files):
    d = files
    p = _run([str(d / "flagged.ecsv"), str(d / "model.toml"), "--max-steps", "20"], d)
    assert p.returncode == 2 and "unflagged" in p.stderr and "Traceback" not in p.stderr


def test_resume_refuses_another_model(files, tmp_path):
    d = files
    chain = str(tmp_path / "c.h5")
    r = CliRunner().invoke(
        cli,
        [
            "sample",
            str(d / "obs.ecsv"),
            str(d / "model.toml"),
            "--walkers",
            "10",
            "--max-steps",
            "20",
            "--chain",
            chain,
        ],
    )
    assert r.exit_code == 0, r.output
    other = two_points(free_position=False)
    other.save(str(tmp_path / "other.toml"))
    p = _run([str(d / "obs.ecsv"), str(tmp_path / "other.toml"), "--resume", "--chain", chain], d)
    assert p.returncode == 2 and "other free parameters" in p.stderr and "Traceback" not in p.stderr
