"""The UVFITS reader against the publishers' own text export of the same 3C 279 rows.

Source of the expected values: the CSV files beside each UVFITS file in tests/data/3c279
(Event Horizon Telescope Collaboration data release 2020-D01-01, see its ABOUT.md), one line per
visibility in the file's group order. The CSV lists the stored (u, v) of the file and the stored
phase; the project's convention negates (u, v) (the one mapping, in
uvfit.data.uvfits._to_sky_convention), so the comparison goes through that function.
"""

import numpy as np
import pytest

import uvfit
from uvfit.data.uvfits import _to_sky_convention

BANDS = ["hi", "lo"]


def _paths(real_data, band):
    stem = f"SR1_3C279_2017_095_{band}_hops_netcal_StokesI"
    return real_data / f"{stem}.uvfits", real_data / f"{stem}.csv"


def _read_csv(path):
    with open(path) as handle:
        first = handle.readline()
    cols = np.genfromtxt(
        path,
        delimiter=",",
        comments="#",
        dtype=None,
        encoding="ascii",
        names=["t", "s1", "s2", "u", "v", "amp", "phase", "sigma"],
    )
    return first, cols


def _half_unit(column_text_values):
    """Half a unit in the last printed digit of a CSV column (the precision of that text)."""
    decimals = max(len(x.split(".")[1]) if "." in x else 0 for x in column_text_values)
    return 0.5 * 10.0 ** (-decimals)


@pytest.mark.parametrize("band", BANDS)
def test_every_row_matches_the_publishers_export(real_data, band):
    uvf, csv = _paths(real_data, band)
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
def test_header_facts(real_data, band):
    uvf, _ = _paths(real_data, band)
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


def test_uv_geometry_is_station2_minus_station1(real_data):
    """The project's (u, v) of a row is the baseline x(station2) - x(station1) projected with
    TMS 2017 eq. 4.1 (from memory; REFERENCES.md), the Greenwich sidereal time from astropy.time.
    """
    from astropy.time import Time

    uvf, _ = _paths(real_data, "hi")
    vs = uvfit.read(uvf)
    pick = np.linspace(0, vs.n - 1, 40).astype(int)
    pick = pick[vs.uv_distance[pick] > 1e8]  # long baselines: geometry dominates rounding
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


def test_orientation_guard_closure_phases_put_the_jet_south_west(real_data):
    """A light guard of the reader's one sign mapping (the full proof belongs to the closure layer).

    Closure phases are blind to station phase errors but change sign if the sky is point-reflected.
    Two circular Gaussians, visibilities from REFERENCES.md (Gaussian closed form and the shift
    theorem with the kernel exp[-2 pi i (u l + v m)]), fitted to the closure phases of triangles at
    common times: the fainter component must lie south-west of the brighter, position angle between
    180 and 270 deg, 25-35 microarcsec away (Kim et al. 2020, A&A 640, A69; REFERENCES.md).
    """
    import itertools

    from scipy.optimize import least_squares

    vs = uvfit.read(_paths(real_data, "hi")[0]).good()
    key = {}
    for i, (t, a, b) in enumerate(zip(vs.time, vs.station1, vs.station2)):
        key[(t, a, b)] = (i, 1)
        key[(t, b, a)] = (i, -1)
    tri = []
    times = np.unique(vs.time)
    for t in times[::3]:
        here = sorted(set(vs.station1[vs.time == t]) | set(vs.station2[vs.time == t]) - {"AP", "SM"})
        for a, b, c in itertools.combinations(here, 3):  # AP and SM: co-sited twins of AA, JC
            if (t, a, b) in key and (t, b, c) in key and (t, c, a) in key:
                tri.append([key[(t, a, b)], key[(t, b, c)], key[(t, c, a)]])
    tri = np.array(tri)
    idx, sgn = tri[..., 0], tri[..., 1]
    u, v = vs.u[idx] * sgn, vs.v[idx] * sgn  # V(-u,-v) = conj V(u,v)
    vis = np.where(sgn > 0, vs.vis[idx], np.conj(vs.vis[idx]))
    cphase = np.angle(vis.prod(axis=1))
    err = np.hypot(np.sqrt(((vs.sigma[idx] / np.abs(vis)) ** 2).sum(axis=1)), 0.02)
    uas = np.radians(1.0 / 3.6e9)
    q = np.hypot(u, v)

    def model(p):
        f2, x, y, s1, s2 = p
        g1 = np.exp(-((np.pi * s1 * uas * q) ** 2) / (4 * np.log(2)))
        g2 = np.exp(-((np.pi * s2 * uas * q) ** 2) / (4 * np.log(2)))
        return g1 + f2 * g2 * np.exp(-2j * np.pi * (u * x + v * y) * uas)

    def resid(p):
        return np.angle(np.exp(1j * (cphase - np.angle(model(p).prod(axis=1))))) / err

    fits_ = [
        least_squares(resid, [0.5, x0, y0, 20.0, 20.0], bounds=([0, -80, -80, 0, 0], [1, 80, 80, 80, 80]))
        for x0, y0 in ((20.0, 15.0), (-20.0, -15.0), (20.0, -15.0), (-20.0, 15.0))
    ]
    best = min(fits_, key=lambda r: r.cost)
    f2, x, y = best.x[:3]
    pa = np.degrees(np.arctan2(x, y)) % 360.0
    assert f2 < 1.0
    assert 180.0 < pa < 270.0, f"fainter component at PA {pa:.0f} deg: the sky is point-reflected"
    assert 25.0 < np.hypot(x, y) < 35.0
