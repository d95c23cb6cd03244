"""The Measurement Set reader (uvfit.data.ms), checked against sources outside the project.

Sources of the expected values, named beside each check:
- tests/data/3c279/SR1_3C279_2017_095_lo_hops_netcal_StokesI.uvfits (published data, its reader
  checked against the publishers' text export in test_data_3c279.py) and the same rows converted
  to a Measurement Set by another general-purpose library (tests/data/ms, see its ABOUT.md);
- tests/data/ms/day2_TDEM0003_10s_norx_1src_1spw.ms, a real VLA observation, whose ABOUT.md states
  28 antennas, one field, 64 channels, one scan;
- TMS 2017 eq. 4.1 (from memory) with astropy's sidereal time for the geometry;
- invented Measurement Sets written here with python-casacore (tests/_ms_tools.py: textbook
  kernel, UVW as the Measurement Set definition states, Kemball & Wieringa 2000, Measurement Set definition v2.0).
"""

import os
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("casacore.tables")

import uvfit  # noqa: E402
from uvfit.data import ms as msmod  # noqa: E402
from uvfit.errors import UvfitError  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _ms_tools import TRUTH, textbook_double, tms_projection, write_invented_ms  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
DATA = ROOT / "tests" / "data"
UVF = DATA / "3c279" / "SR1_3C279_2017_095_lo_hops_netcal_StokesI.uvfits"
MS3C = DATA / "ms" / "SR1_3C279_2017_095_lo_hops_netcal_StokesI.ms"
VLA = DATA / "ms" / "day2_TDEM0003_10s_norx_1src_1spw.ms"


def cli(*args):
    out = subprocess.run([sys.executable, "-m", "uvfit", *map(str, args)], capture_output=True, text=True, cwd=ROOT)
    assert "Traceback" not in out.stderr, out.stderr
    return out


def one_error_line(out):
    assert out.returncode == 2, (out.returncode, out.stdout, out.stderr)
    lines = [x for x in out.stderr.splitlines() if x.startswith("uvfit: error")]
    assert len(lines) == 1, out.stderr
    return lines[0]


@pytest.fixture(scope="module")
def invented(tmp_path_factory):
    d = tmp_path_factory.mktemp("ms")
    info = write_invented_ms(d / "double.ms")
    return d / "double.ms", info


# --------------------------------------------------------------------------- real data
def test_3c279_rows_equal_the_uvfits_original():
    """Same rows from both formats, each through its own mapping (source: the UVFITS original)."""
    a, b = uvfit.read(UVF), uvfit.read(MS3C)
    assert a.n == b.n == 5843
    for name in ("u", "v", "w"):
        x, y = getattr(a, name), getattr(b, name)
        assert np.allclose(x, y, rtol=1e-12, atol=1e-6 * np.abs(x).max())
    assert np.array_equal(a.time, b.time) or np.max(np.abs(a.time - b.time)) * 86400 < 1e-3
    assert np.allclose(a.vis, b.vis, rtol=1e-6, atol=0)  # float32 in both files
    assert np.allclose(a.sigma, b.sigma, rtol=1e-6)
    assert np.array_equal(a.station1, b.station1) and np.array_equal(a.station2, b.station2)
    assert np.array_equal(a.flag, b.flag)
    assert np.allclose(a.frequency, b.frequency, rtol=1e-12)
    assert a.meta["stokes_i_from"] == b.meta["stokes_i_from"] == "(RR+LL)/2"
    for nm in a.stations.names:
        assert np.allclose(a.stations.xyz[a.stations.index(nm)], b.stations.xyz[b.stations.index(nm)], atol=1e-6)
    assert b.meta["ms_column"] == "DATA" and "no CORRECTED_DATA" in b.meta["ms_column_note"]


@pytest.mark.parametrize("path", [VLA, MS3C])
def test_stored_uvw_point_from_antenna2_to_antenna1(path):
    """The stored UVW are minus the TMS 2017 eq. 4.1 projection of x(ANTENNA2) - x(ANTENNA1)
    (from memory; astropy sidereal time): the direction the reader's one mapping assumes. The
    agreement is to ~10% on the VLA's short baselines (its own geometry model differs from this
    textbook one); the other sign would be off by 200%."""
    import casacore.tables as ct

    t = ct.table(str(path), ack=False)
    pos = ct.table(str(path / "ANTENNA"), ack=False).getcol("POSITION")
    ra, dec = ct.table(str(path / "FIELD"), ack=False).getcol("PHASE_DIR")[0, 0]
    pick = np.arange(0, t.nrows(), max(1, t.nrows() // 60))
    a1, a2 = t.getcol("ANTENNA1")[pick], t.getcol("ANTENNA2")[pick]
    uvw = t.getcol("UVW")[pick]
    proj = tms_projection(pos[a2] - pos[a1], t.getcol("TIME")[pick] / 86400.0, np.degrees(ra), np.degrees(dec))
    q = np.hypot(proj[:, 0], proj[:, 1])
    minus = np.median(np.hypot(uvw[:, 0] + proj[:, 0], uvw[:, 1] + proj[:, 1]) / q)
    plus = np.median(np.hypot(uvw[:, 0] - proj[:, 0], uvw[:, 1] - proj[:, 1]) / q)
    assert minus < 0.15 and plus > 1.8
    vs = uvfit.read(path)
    assert vs.meta["orientation"] == msmod.MS_ORIENTATION_NOTE


def test_vla_info_lists_antennas_field_channels_scan():
    """Source: the data's ABOUT.md (28 antennas, one field J1008+0730, 64 channels, one scan)."""
    out = cli("info", VLA, "--json", "-")
    assert out.returncode == 0, out.stderr
    import json

    s = json.loads(out.stdout)
    assert len(s["ms_antennas"]) == 28
    assert len(s["ms_fields"]) == 1 and s["ms_fields"][0]["name"] == "J1008+0730"
    assert len(s["ms_spws"]) == 1 and s["ms_spws"][0]["n_channels"] == 64
    assert len(s["channels"]) == 64
    assert len(s["scans"]) == 1 and 70 < s["scans"][0]["duration_s"] < 90  # "about 80 s"
    assert s["stokes"] == "(RR+LL)/2"
    text = cli("info", VLA)
    assert "28 in the ANTENNA table" in text.stdout and "data column" in text.stdout
    assert "DATA (the default" in text.stderr


@pytest.mark.xfail(
    strict=True,
    reason=(
        "finding: the file's phases are not calibrated. Averaged over the scan and the band, each "
        "baseline keeps its own steady phase (e.g. about -150 deg on one, +20 deg on another) and "
        "closure phases scatter widely, so a complex-mode point fit does not land on the phase centre "
        "(it finds a faint point about 1.7 arcsec away); the ABOUT.md's 'phases scatter around 0' does "
        "not hold per baseline"
    ),
)
def test_vla_point_fit_at_phase_centre():
    """A complex-mode point-source fit should place the calibrator at the phase centre within its
    errors (expectation from the data's description, ABOUT.md)."""
    from uvfit.data.select import average_channels, average_time
    from uvfit.infer.run import run_fit
    from uvfit.sky.model import SkyModel

    vs = uvfit.read(VLA).good()
    vs, _ = average_time(vs, 80.0)
    vs, _ = average_channels(vs, 64)
    m = SkyModel.build(
        [{"name": "cal", "shape": "point", "flux": 0.002, "east": 0.0, "north": 0.0}], angular_unit="arcsec"
    )
    out = run_fit(vs, m, rescale_errors=True, resolved_test=False, starts=3, seed=1)
    for k in ("cal.east", "cal.north"):
        p = out["parameters"][k]
        assert abs(p["value"]) < 3 * p["error"]


# --------------------------------------------------------------------------- invented data
@pytest.mark.parametrize("feeds", ["circular", "linear"])
def test_invented_double_fits_back_east_to_the_east(tmp_path, feeds):
    """Truth: tests/_ms_tools.py TRUTH (invented), visibilities from the textbook kernel, UVW as
    the Measurement Set definition states (Kemball & Wieringa 2000); within 3 errors, companion to the east."""
    from uvfit.infer.run import run_fit
    from uvfit.sky.model import SkyModel

    path = tmp_path / f"{feeds}.ms"
    write_invented_ms(path, feeds=feeds)
    vs = uvfit.read(path)
    assert vs.meta["ms_column"] == "CORRECTED_DATA" and "default" in vs.meta["ms_column_note"]
    assert vs.meta["stokes_i_from"] == {"circular": "(RR+LL)/2", "linear": "(XX+YY)/2"}[feeds]
    start = SkyModel.build(
        [
            {"name": "a", "shape": "point", "flux": 0.9, "east": 0.05, "north": 0.02},
            {"name": "b", "shape": "point", "flux": 0.2, "east": 0.5, "north": -0.2},
        ],
        angular_unit="arcsec",
    )
    out = run_fit(vs.good(), start, resolved_test=False)
    for key, true in TRUTH.items():
        p = out["parameters"][key]
        assert abs(p["value"] - true) < 3 * p["error"], (key, p, true)
    assert out["parameters"]["b.east"]["value"] > 0.5
    assert 0.9 < out["statistics"]["reduced_chi2"] < 1.1  # sigma propagation of the hands


def test_rows_and_scans_of_the_invented_set(invented):
    path, info = invented
    vs = uvfit.read(path)
    assert vs.n == info["n_rows"] * info["n_chan"]
    assert np.all(vs.flag[vs.channel == info["n_chan"] - 1])  # the flagged channel
    assert not vs.flag[vs.channel < info["n_chan"] - 1].any()
    assert set(np.unique(vs.scan)) == {1, 2}
    # u in wavelengths: the projection of x2 - x1 (TMS eq. 4.1) times f / c
    u = (info["uvw_true"][:, 0:1] * info["freqs"][None, :] / 299792458.0).ravel()
    assert np.allclose(vs.u, u, rtol=1e-12, atol=1e-9)
    # the DATA column (not the default) holds a different content
    other = uvfit.read(path, column="DATA")
    assert other.meta["ms_column_note"] == "DATA (chosen)"
    assert not np.allclose(other.vis, vs.vis)
    # scans survive a subset and averaging (VisibilitySet.scan)
    from uvfit.data.select import average_time

    avg, _ = average_time(vs.good(), 600.0)
    assert set(np.unique(avg.scan)) == {1, 2}
    assert np.array_equal(vs.subset(vs.channel == 0).scan, vs.scan[vs.channel == 0])


def test_chunked_reading_gives_the_same_rows(invented):
    path, info = invented
    whole = uvfit.read(path)
    chunks = list(msmod.iter_ms(path, chunk_rows=333))
    assert len(chunks) == -(-info["n_rows"] // 333)
    for name in ("u", "v", "vis", "sigma", "flag", "time", "channel", "scan"):
        assert np.array_equal(np.concatenate([getattr(c, name) for c in chunks]), getattr(whole, name))
    parts = msmod.row_ranges(msmod.count_rows(path), 3)
    assert parts[0][0] == 0 and parts[-1][1] == info["n_rows"]
    assert all(a[1] == b[0] for a, b in zip(parts[:-1], parts[1:]))
    lay = msmod.ms_layout(path)
    mine = msmod.read_ms(path, rows=parts[1], layout=lay)
    lo, hi = parts[1]
    assert np.array_equal(mine.vis, whole.vis[lo * info["n_chan"] : hi * info["n_chan"]])


def test_write_model_column(invented, tmp_path):
    """MODEL_DATA gets the model at each row's (u, v) (checked against the textbook kernel of
    the written geometry); DATA and CORRECTED_DATA stay as they were."""
    import casacore.tables as ct

    src, info = invented
    path = tmp_path / "copy.ms"
    shutil.copytree(src, path)
    before = ct.table(str(path), ack=False)
    data0, corr0 = before.getcol("DATA"), before.getcol("CORRECTED_DATA")
    before.close()
    from uvfit.sky.model import SkyModel

    model = SkyModel.build(
        [
            {"name": "a", "shape": "point", "flux": TRUTH["a.flux"], "east": 0.0, "north": 0.0},
            {
                "name": "b",
                "shape": "point",
                "flux": TRUTH["b.flux"],
                "east": TRUTH["b.east"],
                "north": TRUTH["b.north"],
            },
        ],
        angular_unit="arcsec",
    )
    done = msmod.write_model_column(path, model, chunk_rows=500)
    assert done["created"] and done["rows_written"] == info["n_rows"]
    after = ct.table(str(path), ack=False)
    assert np.array_equal(after.getcol("DATA"), data0) and np.array_equal(after.getcol("CORRECTED_DATA"), corr0)
    written = after.getcol("MODEL_DATA")
    after.close()
    assert np.allclose(written[:, :, 0], info["model"], atol=1e-6) and np.allclose(
        written[:, :, 1], info["model"], atol=1e-6
    )
    back = uvfit.read(path, column="MODEL_DATA")
    u_l = info["uvw_true"][:, 0:1] * info["freqs"][None, :] / 299792458.0
    v_l = info["uvw_true"][:, 1:2] * info["freqs"][None, :] / 299792458.0
    assert np.allclose(back.vis, textbook_double(u_l, v_l).ravel(), atol=1e-6)


def test_fit_write_model_column_cli_and_read_only(invented, tmp_path):
    src, _ = invented
    path = tmp_path / "cli.ms"
    shutil.copytree(src, path)
    model = tmp_path / "m.toml"
    model.write_text(
        'angular_unit = "arcsec"\n[[component]]\nname = "a"\nshape = "point"\nflux = 1.0\n'
        'east = 0.0\nnorth = 0.0\n[[component]]\nname = "b"\nshape = "point"\nflux = 0.25\n'
        "east = 0.55\nnorth = -0.2\n"
    )
    out = cli(
        "fit",
        path,
        model,
        "--write-model-column",
        "--no-resolved-test",
        "--spw",
        "BAND0",
        "--json",
        tmp_path / "fit.json",
    )
    assert out.returncode == 0, out.stderr
    assert "MODEL_DATA" in out.stderr and "column created" in out.stderr
    import json

    read = json.loads((tmp_path / "fit.json").read_text())["read_options"]
    assert read == {"spw": [0], "column": "CORRECTED_DATA", "field": 0}
    ro = tmp_path / "ro.ms"
    shutil.copytree(src, ro)
    for root, _dirs, files in os.walk(ro):
        for f in files:
            os.chmod(os.path.join(root, f), 0o444)
    os.chmod(ro, 0o555)
    try:
        line = one_error_line(cli("fit", ro, model, "--write-model-column", "--no-resolved-test"))
        assert "read-only" in line
    finally:
        os.chmod(ro, 0o755)


# --------------------------------------------------------------------------- bad input
def test_bad_input_one_line(tmp_path, invented):
    src, _ = invented
    plain = tmp_path / "folder.ms"
    plain.mkdir()
    assert "not a casacore table" in one_error_line(cli("info", plain))
    other = tmp_path / "folder"
    other.mkdir()
    assert "not a visibility file or a Measurement Set" in one_error_line(cli("info", other))
    broken = tmp_path / "nopol.ms"
    shutil.copytree(src, broken)
    shutil.rmtree(broken / "POLARIZATION")
    assert "no POLARIZATION sub-table" in one_error_line(cli("info", broken))
    line = one_error_line(cli("info", MS3C, "--column", "CORRECTED_DATA"))
    assert "no CORRECTED_DATA column" in line and "DATA" in line
    mixed = tmp_path / "mixed.ms"
    write_invented_ms(mixed, second_spw_feeds="linear")
    line = one_error_line(cli("info", mixed))
    assert "mixes polarisation setups" in line and "RR LL" in line and "XX YY" in line
    assert cli("info", mixed, "--spw", "BAND1").returncode == 0
    flagged = tmp_path / "flagged.ms"
    write_invented_ms(flagged, flag_all=True)
    assert "every visibility is flagged" in one_error_line(cli("info", flagged))
    fields = tmp_path / "fields.ms"
    write_invented_ms(fields, field_names=("DBL", "CAL"))
    line = one_error_line(cli("info", fields))
    assert "several fields" in line and "DBL" in line and "CAL" in line
    assert cli("info", fields, "--field", "CAL").returncode == 0
    assert "no field 'X'" in one_error_line(cli("info", fields, "--field", "X"))


def test_missing_casacore_names_the_extra(monkeypatch, invented):
    monkeypatch.setitem(sys.modules, "casacore.tables", None)
    monkeypatch.setitem(sys.modules, "casacore", None)
    with pytest.raises(UvfitError) as err:
        uvfit.read(invented[0])
    assert "python-casacore" in str(err.value) and "uvfit[ms]" in (err.value.hint or "")
