"""uvfit plot and uvfit report on the command line: every kind on simulated and real data, and bad
input answered with one clear line, a non-zero exit and no traceback."""

import json
import os
import subprocess
import sys

import numpy as np
import pytest

import uvfit
from tests.helpers import show_sim
from tests.helpers.real_data import REAL_DATA

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
KINDS = ("radial", "uv", "closure", "sky")


class Result:
    def __init__(self, returncode, stdout, stderr):
        self.returncode, self.stdout, self.stderr = returncode, stdout, stderr


def run(*args):
    """The command in this process, through the same entry point as the installed script."""
    from click.testing import CliRunner

    from uvfit.cli import cli

    res = CliRunner().invoke(cli, [str(a) for a in args], catch_exceptions=True)
    if res.exception is not None and not isinstance(res.exception, SystemExit):
        from uvfit.errors import UvfitError

        if isinstance(res.exception, UvfitError):
            return Result(2, res.stdout, f"uvfit: error: {res.exception}")
        raise res.exception
    return Result(res.exit_code, res.stdout, res.stderr)


def run_process(*args):
    return subprocess.run(
        [sys.executable, "-m", "uvfit", *map(str, args)],
        cwd=ROOT,
        capture_output=True,
        text=True,
        env={**os.environ, "MPLBACKEND": "Agg"},
    )


def check_png(path):
    """A valid PNG of sensible size: the signature of the PNG specification, then a decode."""
    import matplotlib.image as mpimg

    with open(path, "rb") as handle:
        head = handle.read(8)
    assert head == b"\x89PNG\r\n\x1a\n"
    assert os.path.getsize(path) > 10_000
    pixels = mpimg.imread(path)
    assert 300 < pixels.shape[0] < 5000 and 300 < pixels.shape[1] < 5000
    # not blank: many distinct colours
    flat = (pixels[..., :3] * 255).astype(np.uint8).reshape(-1, 3)
    assert len(np.unique(flat[::7], axis=0)) > 20


@pytest.fixture(scope="module")
def sim_files(tmp_path_factory):
    d = tmp_path_factory.mktemp("sim")
    vset = show_sim.simulated_set(noise=0.02, seed=8)
    data = uvfit.write(vset, d / "sim.uvfits")
    fit = show_sim.write_json(d / "fit.json", show_sim.truth_fit_json())
    return d, data, fit


@pytest.fixture(scope="module")
def real_files(tmp_path_factory):
    folder = str(REAL_DATA)
    d = tmp_path_factory.mktemp("real")
    data = os.path.join(folder, "SR1_3C279_2017_095_lo_hops_netcal_StokesI.uvfits")
    # two circular Gaussians, the fainter some 27 uas south-west of the brighter
    # (REFERENCES.md, "Real data to test on"); values rounded, not fitted here
    toml = show_sim.MODEL_TOML.replace("flux = 1.0", "flux = 5.0").replace("flux = 0.4", "flux = 3.0")
    fit = show_sim.truth_fit_json(mode="closure")
    fit["model_toml"] = toml
    fit["parameters"]["core.flux"]["value"] = 5.0
    fit["parameters"]["knot.flux"]["value"] = 3.0
    fit["systematic"] = 0.02
    return d, data, show_sim.write_json(d / "fit.json", fit)


@pytest.mark.parametrize("kind", KINDS)
def test_every_kind_on_simulated_data(sim_files, kind):
    d, data, fit = sim_files
    out = d / f"{kind}.png"
    res = run("plot", data, "--fit", fit, "--kind", kind, "-o", out, "--force")
    assert res.returncode == 0, res.stderr
    check_png(out)


@pytest.mark.parametrize("kind", KINDS)
def test_every_kind_on_real_data(real_files, kind):
    d, data, fit = real_files
    out = d / f"{kind}.png"
    res = run("plot", data, "--fit", fit, "--kind", kind, "-o", out, "--numbers", d / f"{kind}.json", "--force")
    assert res.returncode == 0, res.stderr
    check_png(out)
    numbers = json.loads((d / f"{kind}.json").read_text())
    assert numbers["kind"] == kind
    if kind == "radial":
        # 5843 visibilities in the lo-band file (ABOUT.md of the data)
        assert len(numbers["amplitude"]) == 5843


def test_selection_options_override_the_fit(sim_files):
    pytest.importorskip("uvfit.data.select", reason="the selection layer is not in this tree yet")
    d, data, fit = sim_files
    out = d / "sel.png"
    numbers = d / "sel.json"
    res = run(
        "plot",
        data,
        "--fit",
        fit,
        "--kind",
        "radial",
        "-o",
        out,
        "--numbers",
        numbers,
        "--exclude-stations",
        "OSPREY",
        "--force",
    )
    assert res.returncode == 0, res.stderr
    got = json.loads(numbers.read_text())
    # 4 stations left: 6 baselines of the 10, at every time
    vset = uvfit.read(data)
    assert len(got["amplitude"]) == vset.n * 6 // 10
    assert got["selection"]["exclude_stations"] == "OSPREY"


def _fails(res, *words):
    assert res.returncode != 0
    assert "Traceback" not in res.stderr and "Traceback" not in res.stdout
    for w in words:
        assert w in res.stderr, res.stderr
    assert "rror" in res.stderr.strip().splitlines()[-1]


def test_bad_inputs_are_clear(sim_files, tmp_path):
    d, data, fit = sim_files
    out = tmp_path / "x.png"
    not_fit = show_sim.write_json(tmp_path / "other.json", {"models": [], "verdict": "x"})
    broken = tmp_path / "broken.json"
    broken.write_text("{not json")
    # through a real process once each: one line, exit code 2, no traceback
    res = run_process("plot", data, "--fit", not_fit, "--kind", "radial", "-o", out)
    _fails(res, "not a fit output")
    assert res.returncode == 2 and len(res.stderr.strip().splitlines()) == 1
    res = run_process("report", data, "--fit", tmp_path / "absent.json", "-o", tmp_path / "r.html")
    _fails(res, "does not exist")
    assert res.returncode == 2 and len(res.stderr.strip().splitlines()) == 1
    _fails(run("plot", data, "--fit", not_fit, "--kind", "radial", "-o", out), "not a fit output")
    _fails(run("report", data, "--fit", not_fit, "-o", tmp_path / "r.html"), "not a fit output")
    _fails(run("plot", data, "--fit", broken, "--kind", "radial", "-o", out), "not valid JSON")
    _fails(run("plot", data, "--fit", tmp_path / "absent.json", "--kind", "sky", "-o", out), "does not exist")
    _fails(run("plot", tmp_path / "absent.uvfits", "--fit", fit, "--kind", "sky", "-o", out))
    _fails(run("report", data, "--fit", fit, "--posterior", fit, "-o", tmp_path / "r.html"), "not a posterior")
    _fails(run("report", data, "--fit", fit, "--compare", fit, "-o", tmp_path / "r.html"), "not a model comparison")
    _fails(run("report", data, "--fit", fit, "--chain", fit, "-o", tmp_path / "r.html"), "chain")
    _fails(run("plot", data, "--fit", fit, "--kind", "pie", "-o", out))
    assert not out.exists()
    # an output that exists is never overwritten without --force
    out.write_bytes(b"keep")
    _fails(run("plot", data, "--fit", fit, "--kind", "uv", "-o", out), "exists", "--force")
    assert out.read_bytes() == b"keep"
    html = tmp_path / "keep.html"
    html.write_text("keep")
    _fails(run("report", data, "--fit", fit, "-o", html), "exists")
    assert html.read_text() == "keep"


def test_report_on_real_data(real_files):
    d, data, fit = real_files
    out = d / "report.html"
    res = run("report", data, "--fit", fit, "-o", out, "--force")
    assert res.returncode == 0, res.stderr
    text = out.read_text(encoding="utf-8")
    assert text.count('src="data:image/png;base64,') == 4  # radial, coverage, closure, sky
    # the stations of the lo-band file (ABOUT.md of the data: 8 stations, 7 with good rows here)
    for station in ("AA", "AP", "AZ", "JC", "LM", "PV", "SM"):
        assert station in text
    assert "closure_phase_chi2" in text and "Cautions" in text
