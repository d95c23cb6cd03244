"""The HTML report: self-contained, complete, deterministic, and it opens in a headless browser.

The browser check uses Debian's Chromium with the network disabled: every embedded image must
decode (naturalWidth > 0, the HTML standard's definition of a decoded image) and the screenshot of
the page must not be blank.
"""

import json
import os
import re
import shutil
import subprocess

import numpy as np
import pytest
from test_show_cli import run

import uvfit
from tests.helpers import show_sim
from uvfit.outputs import write_json

CHROMIUM = shutil.which("chromium") or ("/usr/bin/chromium" if os.path.exists("/usr/bin/chromium") else None)


@pytest.fixture(scope="module")
def inputs(tmp_path_factory):
    """A real fit, a real comparison and a short sampler run on simulated data."""
    from uvfit.infer.compare import compare
    from uvfit.infer.run import run_fit
    from uvfit.sky.modelfile import loads

    d = tmp_path_factory.mktemp("report")
    vset = show_sim.simulated_set(noise=0.02, seed=8, n_times=20)
    data = uvfit.write(vset, d / "sim.uvfits")
    model = loads(show_sim.MODEL_TOML)
    fit = run_fit(vset, model, mode="complex", seed=7, data_path=str(data))
    write_json(d / "fit.json", fit)
    one = loads(show_sim.MODEL_TOML.split('[[component]]\nname = "knot"')[0])
    comp = compare(vset, [one, model], names=["core only", "core and knot"], seed=7)
    write_json(d / "compare.json", comp)
    # a short chain by the sampler (its HDF5 file is emcee's own backend)
    from uvfit.infer.sampling import sample

    post = sample(
        vset, model, max_steps=300, seed=3, chain_path=str(d / "chain.h5"), derived=False, data_path=str(data)
    ).to_dict()
    write_json(d / "posterior.json", post)
    return d, data, fit


def _report(inputs, name, *extra):
    d, data, _ = inputs
    out = d / name
    res = run(
        "report",
        data,
        "--fit",
        d / "fit.json",
        "--posterior",
        d / "posterior.json",
        "--chain",
        d / "chain.h5",
        "--compare",
        d / "compare.json",
        "-o",
        out,
        *extra,
    )
    assert res.returncode == 0, res.stderr
    return out


@pytest.fixture(scope="module")
def report(inputs):
    return _report(inputs, "report.html")


def test_report_is_complete_and_self_contained(report, inputs):
    _, _, fit = inputs
    text = report.read_text(encoding="utf-8")
    # nothing fetched from anywhere: no remote URL, no script, no external style or font
    assert not re.search(r"""(src|href)\s*=\s*["']?(https?:|//)""", text)
    assert "<script" not in text.lower() and "@import" not in text and "url(" not in text
    images = re.findall(r'<img[^>]+src="data:image/png;base64,([A-Za-z0-9+/=]+)"', text)
    assert len(images) == 5  # radial, coverage, closure phases, sky, corner
    import base64

    for b64 in images:
        assert base64.b64decode(b64)[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG spec)
    for name in fit["parameters"]:
        assert name in text
    for words in (
        "reduced_chi2",
        "aic",
        "bic",
        "Closure check",
        "Model comparison",
        "Posterior",
        "core and knot",
        "Cautions",
        "trusts the phase calibration",
        "baseline-based",
        "station-based",
        "no substitute for an image",
        "OSPREY",
        "closure_phase_chi2",
        "Closure phases by triangle",
    ):
        assert words in text, words
    assert f"{fit['statistics']['chi2']:.6g}" in text
    assert text.count("<table>") >= 8


def test_report_written_twice_is_the_same_file(report, inputs):
    again = _report(inputs, "again.html")
    assert again.read_bytes() == report.read_bytes()


def _chromium(args, tmp):
    cmd = [
        CHROMIUM,
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--disable-extensions",
        f"--user-data-dir={tmp / 'profile'}",
        "--proxy-server=127.0.0.1:9",
        "--host-resolver-rules=MAP * ~NOTFOUND",
        "--virtual-time-budget=5000",
        *args,
    ]
    return subprocess.run(cmd, capture_output=True, text=True, timeout=120)


@pytest.mark.skipif(
    CHROMIUM is None, reason="headless Chromium (Debian's 'chromium') is not installed; .ci/run installs it"
)
def test_report_opens_in_a_headless_browser(report, tmp_path):
    probe = (
        "<script>window.addEventListener('load',function(){var im=document.images,ok=0;"
        "for(var i=0;i<im.length;i++){if(im[i].complete&&im[i].naturalWidth>0)ok++;}"
        "var p=document.createElement('pre');p.id='probe';p.textContent='PROBE'+JSON.stringify("
        "{images:im.length,decoded:ok,tables:document.getElementsByTagName('table').length})"
        "+'EBORP';document.body.appendChild(p);});</script>"
    )
    page = report.read_text(encoding="utf-8").replace("</body>", probe + "</body>")
    probed = tmp_path / "probed.html"
    probed.write_text(page, encoding="utf-8")
    res = _chromium(["--dump-dom", probed.as_uri()], tmp_path)
    found = re.search(r"PROBE(\{.*?\})EBORP", res.stdout)
    assert found, f"no probe in the page dump: {res.stderr[-500:]}"
    summary = json.loads(found.group(1))
    assert summary["images"] == 5 and summary["decoded"] == 5
    assert summary["tables"] >= 8
    shot = tmp_path / "shot.png"
    _chromium([f"--screenshot={shot}", "--window-size=1200,2000", report.as_uri()], tmp_path)
    assert shot.exists()
    import matplotlib.image as mpimg

    pixels = mpimg.imread(shot)
    assert pixels.shape[0] >= 1000 and pixels.shape[1] >= 1000
    colours = np.unique((pixels[..., :3] * 255).astype(np.uint8).reshape(-1, 3)[::3], axis=0)
    assert len(colours) > 50  # text, tables and figures, not a blank page
