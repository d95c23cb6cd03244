"""Write then read: UVFITS and the ECSV table give back the same set; astropy reads the UVFITS."""

import numpy as np
import pytest
from astropy.io import fits
from astropy.table import Table

import uvfit
from tests.helpers.real_data import real_file
from uvfit.data.uvfits import _to_sky_convention
from uvfit.data.visset import StationTable, VisibilitySet
from uvfit.errors import DataError, UvfitError

FIELDS = (
    "u",
    "v",
    "w",
    "time",
    "frequency",
    "station1",
    "station2",
    "vis",
    "sigma",
    "flag",
    "channel",
    "integration",
    "scan",
)


def invented_set(n_times=5, channels=(0, 1), seed=3):
    """An invented 4-station array (names and positions made up), group-major rows."""
    rng = np.random.default_rng(seed)
    names = ["ORCA", "WREN", "LYNX", "IBIS"]
    xyz = rng.normal(size=(4, 3)) * 3e6
    pairs = [(a, b) for i, a in enumerate(names) for b in names[i + 1 :]]
    rows = []
    for t in range(n_times):
        for a, b in pairs:
            for c in channels:
                rows.append((57000.1 + t * 30 / 86400, a, b, c))
    time = np.array([r[0] for r in rows])
    s1 = np.array([r[1] for r in rows])
    s2 = np.array([r[2] for r in rows])
    chan = np.array([r[3] for r in rows])
    freq = 43e9 + 16e6 * chan
    useconds = rng.normal(size=len(rows) // len(channels)).repeat(len(channels)) * 1e-5
    vseconds = rng.normal(size=len(rows) // len(channels)).repeat(len(channels)) * 1e-5
    n = len(rows)
    vs = VisibilitySet(
        u=useconds * freq,
        v=vseconds * freq,
        w=rng.normal(size=n) * 0 + useconds * freq * 0.1,
        time=time,
        frequency=freq,
        station1=s1,
        station2=s2,
        vis=rng.normal(size=n) + 1j * rng.normal(size=n),
        sigma=rng.uniform(0.1, 0.3, n),
        flag=rng.uniform(size=n) < 0.1,
        channel=chan,
        integration=np.full(n, 30.0),
        scan=(np.arange(n) * 3) // n + 1,
        stations=StationTable(names, xyz),
        source="J0000-0000 (invented)",
        ra_deg=12.5,
        dec_deg=41.25,
        meta={"channel_width_hz": [16e6, 16e6]},
    )
    return vs


def assert_same(a, b, rtol=0.0, fields=FIELDS):
    for name in fields:
        x, y = getattr(a, name), getattr(b, name)
        if x.dtype.kind in "fc" and rtol:
            assert np.allclose(x, y, rtol=rtol, atol=0, equal_nan=True), name
        else:
            assert np.array_equal(x, y, equal_nan=x.dtype.kind in "fc"), name
    assert a.stations.names == b.stations.names
    assert np.array_equal(a.stations.xyz, b.stations.xyz, equal_nan=True)
    assert a.source == b.source and a.ra_deg == b.ra_deg and a.dec_deg == b.dec_deg


def test_ecsv_round_trip_is_exact(tmp_path):
    vs = invented_set()
    vs.integration[3] = np.nan
    path = tmp_path / "set.ecsv"
    uvfit.write(vs, path)
    back = uvfit.read(path)
    assert_same(vs, back)
    assert back.meta["channel_width_hz"] == [16e6, 16e6]
    # the file is plain ECSV that astropy.table reads with the documented columns and units
    t = Table.read(path, format="ascii.ecsv")
    assert t["sigma_jy"].unit == "Jy" and t["frequency_hz"].unit == "Hz"
    assert t.meta["format_version"] == 1


def test_uvfits_round_trip(tmp_path):
    vs = invented_set()
    path = tmp_path / "set.uvfits"
    uvfit.write(vs, path)
    back = uvfit.read(path)
    # u, v, w pass through seconds (u / f * f): the same to rounding (common practice: ~1e-16);
    # a UVFITS random group has no scan number (Greisen 2012, the UVFITS definition memo no. 117: from memory)
    assert_same(vs, back, rtol=1e-14, fields=tuple(f for f in FIELDS if f != "scan"))
    assert np.all(back.scan == -1)
    assert np.array_equal(vs.time, back.time)  # the split DATE keeps the MJD exactly
    assert np.array_equal(vs.vis, back.vis) and np.array_equal(vs.flag, back.flag)


def test_astropy_reads_the_written_uvfits(tmp_path):
    vs = invented_set(channels=(0,))
    path = tmp_path / "one.uvfits"
    uvfit.write(vs, path)
    with fits.open(path) as hdul:  # astropy.io.fits as the outside reader
        g = hdul[0]
        assert isinstance(g, fits.GroupsHDU) and g.header["GCOUNT"] == vs.n
        freq = g.header["CRVAL4"]
        uu = g.data.par("UU---SIN") * freq
        # the file holds the UVFITS convention; the one mapping turns it into the project's u, v
        u, v, _, _ = _to_sky_convention(uu, g.data.par("VV---SIN") * freq, uu * 0, None)
        assert np.allclose(u, vs.u, rtol=1e-14) and np.allclose(v, vs.v, rtol=1e-14)
        jd = g.data.par("DATE")  # astropy sums the two DATE parameters
        assert np.allclose(jd - 2400000.5, vs.time, rtol=0, atol=1e-8)
        d = g.data.data
        assert np.allclose(d[:, 0, 0, 0, 0, 0, 0] + 1j * d[:, 0, 0, 0, 0, 0, 1], vs.vis)
        w = d[:, 0, 0, 0, 0, 0, 2]
        assert np.allclose(np.abs(w), 1 / vs.sigma**2) and np.array_equal(w < 0, vs.flag)
        assert [n.strip() for n in hdul["AIPS AN"].data["ANNAME"]] == vs.stations.names


def test_uvfits_round_trip_of_the_real_file(tmp_path):
    src = real_file("hi")
    vs = uvfit.read(src)
    uvfit.write(vs, tmp_path / "copy.uvfits")
    back = uvfit.read(tmp_path / "copy.uvfits")
    assert_same(vs, back, rtol=1e-14)


def test_writers_refuse_to_overwrite(tmp_path):
    vs = invented_set()
    for name in ("a.uvfits", "a.ecsv"):
        uvfit.write(vs, tmp_path / name)
        with pytest.raises(UvfitError, match="exists"):
            uvfit.write(vs, tmp_path / name)
        uvfit.write(vs, tmp_path / name, force=True)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.ecsv", "a.uvfits"]  # no temp left


def test_uvfits_writer_refuses_mixed_frequencies(tmp_path):
    vs = invented_set(channels=(0,))
    vs.frequency[0] *= 1.01
    with pytest.raises(DataError, match="different frequencies"):
        uvfit.write(vs, tmp_path / "x.uvfits")


def test_ecsv_missing_columns(tmp_path):
    path = tmp_path / "bad.ecsv"
    Table({"time_mjd": [1.0], "station1": ["A"]}).write(path, format="ascii.ecsv")
    with pytest.raises(DataError, match="lacks the column"):
        uvfit.read(path)
