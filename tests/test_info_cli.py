"""`uvfit info` on real data, and bad input through the command line: one clear line, exit 2."""

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from astropy.io import fits
from click.testing import CliRunner

from tests.helpers.real_data import REAL_DATA
from uvfit.cli import cli

ROOT = Path(__file__).resolve().parents[1]
HI = "SR1_3C279_2017_095_hi_hops_netcal_StokesI.uvfits"


def run_cli(*args):
    return subprocess.run([sys.executable, "-m", "uvfit", *map(str, args)], cwd=ROOT, capture_output=True, text=True)


def test_info_table_and_json(tmp_path):
    path = REAL_DATA / HI
    out = tmp_path / "info.json"
    res = CliRunner().invoke(cli, ["info", str(path), "--json", str(out)])
    assert res.exit_code == 0, res.output
    for word in (
        "3C279",
        "12h56m11.1666s",
        "-05d47m21.525s",
        "229.0707 GHz",
        "5790 usable",
        "AA AP AZ JC LM PV SM",
        "Glambda",
        "resolution",
        "median SNR",
    ):
        assert word in res.output
    s = json.loads(out.read_text())
    for key in ("source", "n_visibilities", "stations", "frequency_hz", "uv_max_lambda", "resolution_mas"):
        assert key in s
    # the publishers' CSV export beside the file lists 5790 rows and the 7 stations that observed
    assert s["n_visibilities"] == 5790 and len(s["stations"]) == 7
    # resolution lambda/B_max from the maximum uv distance, converted with astropy.units
    import astropy.units as u

    assert s["resolution_mas"] == pytest.approx((1 / s["uv_max_lambda"] * u.rad).to_value(u.mas))
    # the same again refuses to overwrite the JSON without --force
    res = CliRunner().invoke(cli, ["info", str(path), "--json", str(out)])
    assert res.exit_code != 0
    res = CliRunner().invoke(cli, ["info", str(path), "--json", str(out), "--force"])
    assert res.exit_code == 0


def test_info_json_to_stdout_with_selection():
    path = REAL_DATA / HI
    res = run_cli("info", path, "--json", "-", "--stations", "AA,LM,PV", "--average", "60")
    assert res.returncode == 0, res.stderr
    s = json.loads(res.stdout)
    assert s["stations"] == ["AA", "LM", "PV"] and s["n_baselines"] == 3
    assert "time smearing" in res.stderr


def _bad_files(tmp):
    files = {}
    p = tmp / "notes.uvfits"
    p.write_text("these are my observing notes, not visibilities\n")
    files["text"] = (p, "not a FITS file")
    p = tmp / "image.fits"
    fits.PrimaryHDU(np.zeros((8, 8), np.float32)).writeto(p)
    files["image"] = (p, "no random groups")
    data = np.zeros((3, 1, 1, 1, 1, 1, 3))
    data[..., 2] = 1.0
    g = fits.GroupData(
        data,
        parnames=["AA", "BB", "BASELINE", "DATE"],
        pardata=[np.zeros(3), np.zeros(3), np.full(3, 258.0), np.full(3, 2458000.5)],
        bitpix=-32,
    )
    p = tmp / "nouu.uvfits"
    fits.HDUList([fits.GroupsHDU(g)]).writeto(p)
    files["no UU"] = (p, "no UU")
    # a complete file, then cut short
    g = fits.GroupData(
        data,
        parnames=["UU", "VV", "WW", "BASELINE", "DATE"],
        pardata=[np.ones(3) * 1e-6, np.ones(3) * 1e-6, np.zeros(3), np.full(3, 258.0), np.full(3, 2458000.5)],
        bitpix=-32,
    )
    hdu = fits.GroupsHDU(g)
    for k, ct in enumerate(["COMPLEX", "STOKES", "FREQ", "IF", "RA", "DEC"], start=2):
        hdu.header[f"CTYPE{k}"] = ct
        hdu.header[f"CRVAL{k}"] = 1.0e9 if ct == "FREQ" else 1.0
    full = tmp / "full.uvfits"
    fits.HDUList([hdu]).writeto(full)
    p = tmp / "short.uvfits"
    p.write_bytes(full.read_bytes()[: 2880 + 40])
    files["truncated"] = (p, "truncated")
    hdu.data.data[..., 2] = 0.0
    p = tmp / "zero.uvfits"
    fits.HDUList([hdu]).writeto(p)
    files["zero weights"] = (p, "every visibility is flagged")
    files["missing"] = (tmp / "nowhere.uvfits", "no such file")
    p = tmp / "table.ecsv"
    p.write_text("# %ECSV 1.0\n# ---\n# datatype:\n# - {name: a, datatype: int64}\na\n1\n")
    files["ecsv columns"] = (p, "lacks the column")
    return files, full


@pytest.mark.parametrize("kind", ["text", "image", "no UU", "truncated", "zero weights", "missing", "ecsv columns"])
def test_bad_input_gives_one_clear_line(tmp_path, kind):
    files, _ = _bad_files(tmp_path)
    path, words = files[kind]
    res = run_cli("info", path)
    assert res.returncode == 2, (res.stdout, res.stderr)
    assert "Traceback" not in res.stderr and "internal error" not in res.stderr
    assert words in res.stderr
    assert res.stderr.strip().count("\n") == 0  # one line
    assert res.stderr.startswith("uvfit: error:")


def test_the_complete_small_file_reads(tmp_path):
    _, full = _bad_files(tmp_path)
    res = run_cli("info", full)
    assert res.returncode == 0, res.stderr


def test_unknown_station_lists_known_ones():
    res = run_cli("info", REAL_DATA / HI, "--stations", "AA,XX")
    assert res.returncode == 2 and "XX" in res.stderr and "AA, AP, AZ, JC, LM, PV, SM" in res.stderr
    assert "Traceback" not in res.stderr
