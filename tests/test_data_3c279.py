"""The UVFITS reader against the publishers' own text export of the same 3C 279 rows.

Source of the expected values: the CSV files beside each UVFITS file in ../shared/data/3c279
(Event Horizon Telescope Collaboration data release 2020-D01-01, see its ABOUT.md), one line per
visibility in the file's group order. The CSV lists the stored (u, v) of the file and the stored
phase; the project's convention negates (u, v) (the one mapping, in
uvfit.data.uvfits._to_sky_convention), so the comparison goes through that function.
"""
import os
from pathlib import Path

import numpy as np
import pytest

import uvfit
from uvfit.data.uvfits import _to_sky_convention

ROOT = Path(__file__).resolve().parents[1]
BANDS = ["hi", "lo"]


def _data_dir():
    for cand in (ROOT / ".." / "shared" / "data" / "3c279", Path("/work/shared/data/3c279")):
        if cand.is_dir():
            return cand.resolve()
    return None


@pytest.fixture(scope="module")
def data_dir():
    d = _data_dir()
    if d is None:
        pytest.skip("the real data folder ../shared/data/3c279 is absent (CI always has it)")
    return d


def _paths(data_dir, band):
    stem = f"SR1_3C279_2017_095_{band}_hops_netcal_StokesI"
    return data_dir / f"{stem}.uvfits", data_dir / f"{stem}.csv"


def _read_csv(path):
    with open(path) as handle:
        first = handle.readline()
    cols = np.genfromtxt(path, delimiter=",", comments="#", dtype=None, encoding="ascii",
                         names=["t", "s1", "s2", "u", "v", "amp", "phase", "sigma"])
    return first, cols


def _half_unit(column_text_values):
    """Half a unit in the last printed digit of a CSV column (the precision of that text)."""
    decimals = max(len(x.split(".")[1]) if "." in x else 0 for x in column_text_values)
    return 0.5 * 10.0 ** (-decimals)


@pytest.mark.parametrize("band", BANDS)
def test_every_row_matches_the_publishers_export(data_dir, band):
    uvf, csv = _paths(data_dir, band)
    vs = uvfit.read(uvf)
    header, ref = _read_csv(csv)
    lines = [ln.strip().split(",") for ln in open(csv) if not ln.startswith("#")]
    assert vs.n == len(ref) == len(lines)
    # the CSV header line gives the day (MJD) and the frequency in GHz (4 decimals)
    mjd0 = float(header.split("DATE(MJD):")[1].split(",")[0])
    freq_ghz = float(header.split("FREQ:")[1].split("GHz")[0])
    assert np.all(np.abs(vs.frequency / 1e9 - freq_ghz) <= 0.5e-4)

    tol = [_half_unit([ln[k] for ln in lines]) for k in range(8)]
    # time in UTC hours of the day
    assert np.max(np.abs((vs.time - mjd0) * 24.0 - ref["t"])) <= tol[0] * 1.001
    # station pair, in the file's order
    assert np.array_equal(vs.station1, ref["s1"].astype(str))
    assert np.array_equal(vs.station2, ref["s2"].astype(str))
    # u, v in wavelengths: the CSV's stored values, mapped through the one documented mapping
    u_ref, v_ref, _, _ = _to_sky_convention(ref["u"], ref["v"], np.zeros(len(ref)), None)
    assert np.max(np.abs(vs.u - u_ref)) <= tol[3] * 1.001
    assert np.max(np.abs(vs.v - v_ref)) <= tol[4] * 1.001
    # amplitude (Jy) and phase (degrees, compared modulo 360)
    assert np.max(np.abs(vs.amplitude - ref["amp"])) <= tol[5] * 1.001
    dphase = (np.degrees(vs.phase) - ref["phase"] + 180.0) % 360.0 - 180.0
    assert np.max(np.abs(dphase)) <= tol[6] * 1.001
    # Stokes I sigma: RR and LL each carry sqrt(2) x the Stokes I error (ABOUT.md), so
    # 0.5 sqrt(s_RR^2 + s_LL^2) must give the CSV's Isigma. The weights are stored as 32-bit floats,
    # so allow one float32 rounding (relative 1.2e-7) beside the text precision.
    assert np.all(np.abs(vs.sigma - ref["sigma"]) <= tol[7] * 1.001 + 1.2e-7 * ref["sigma"])


@pytest.mark.parametrize("band", BANDS)
def test_header_facts(data_dir, band):
    uvf, _ = _paths(data_dir, band)
    vs = uvfit.read(uvf)
    # values from the FITS header and antenna table of the file itself, read with astropy
    from astropy.io import fits
    with fits.open(uvf) as hdul:
        h = hdul[0].header
        names = [n.strip() for n in hdul["AIPS AN"].data["ANNAME"]]
        xyz = np.asarray(hdul["AIPS AN"].data["STABXYZ"], float)
    assert vs.source == h["OBJECT"].strip() == "3C279"
    assert vs.ra_deg == pytest.approx(h["OBSRA"]) and vs.dec_deg == pytest.approx(h["OBSDEC"])
    assert vs.stations.names == names
    assert np.allclose(vs.stations.xyz, xyz)
    assert not vs.flag.any()
    assert vs.meta["stokes_i_from"] == "(RR+LL)/2"


def test_uv_geometry_is_station2_minus_station1(data_dir):
    """The project's (u, v) of a row is the baseline x(station2) - x(station1) projected with
    TMS 2017 eq. 4.1 (from memory; REFERENCES.md), the Greenwich sidereal time from astropy.time.
    """
    from astropy.time import Time
    uvf, _ = _paths(data_dir, "hi")
    vs = uvfit.read(uvf)
    pick = np.linspace(0, vs.n - 1, 40).astype(int)
    pick = pick[vs.uv_distance[pick] > 1e8]            # long baselines: geometry dominates rounding
    xyz = {n: x for n, x in zip(vs.stations.names, vs.stations.xyz)}
    t = Time(vs.time[pick], format="mjd", scale="utc")
    gst = t.sidereal_time("apparent", "greenwich").radian
    H = gst - np.radians(vs.ra_deg)
    dec = np.radians(vs.dec_deg)
    L = np.array([xyz[b] - xyz[a] for a, b in zip(vs.station1[pick], vs.station2[pick])])
    L = L * (vs.frequency[pick] / 299792458.0)[:, None]
    u = np.sin(H) * L[:, 0] + np.cos(H) * L[:, 1]
    v = -np.sin(dec) * np.cos(H) * L[:, 0] + np.sin(dec) * np.sin(H) * L[:, 1] + np.cos(dec) * L[:, 2]
    # agreement to 1e-4 of the baseline length (the file's own geometry model includes more
    # effects than this textbook projection); the opposite sign would be off by 200%
    q = np.hypot(u, v)
    assert np.all(np.hypot(vs.u[pick] - u, vs.v[pick] - v) < 1e-4 * q)
