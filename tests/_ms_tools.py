"""Writing small invented Measurement Sets with python-casacore, for the reader's tests.

The scenario is invented: ten stations scattered within 4 km of a site at latitude 40 N, longitude
10 E, observing for three hours at 30 GHz a double source (TRUTH) at RA 150 deg, Dec +20 deg.

Geometry and visibilities are computed here, outside the reader, from their definitions:
- the baseline of a row on (ANTENNA1, ANTENNA2) = (a, b) is projected with the hour-angle formula
  of Thompson, Moran & Swenson 2017, eq. 4.1 (from memory), the Greenwich apparent sidereal time
  from astropy.time;
- the visibility follows the textbook kernel V = sum_k F_k exp[-2 pi i (u l_k + v m_k)] with
  (u, v) the projection of x(b) - x(a) (TMS 2017, ch. 3) and l east, m north;
- the stored UVW follow the Measurement Set definition (Kemball & Wieringa 2000, Measurement Set definition v2.0,
  wording from memory): "the uvw coordinates for the baseline from ANTENNA2 to ANTENNA1", i.e. the
  projection of x(a) - x(b).
"""

import os

import numpy as np

C = 299792458.0
ARCSEC = np.pi / 180.0 / 3600.0
RA_DEG, DEC_DEG = 150.0, 20.0
# the invented double: a bright primary at the phase centre, a fainter companion to the east
TRUTH = {"a.flux": 1.0, "a.east": 0.0, "a.north": 0.0, "b.flux": 0.3, "b.east": 0.6, "b.north": -0.25}
CORR = {"circular": [5, 8], "linear": [9, 12], "full_circular": [5, 6, 7, 8]}


def stations(n=10, seed=4):
    """ITRF positions (m) of ``n`` invented stations within 4 km of the site."""
    from astropy import units as u
    from astropy.coordinates import EarthLocation

    rng = np.random.default_rng(seed)
    lat, lon = np.radians(40.0), np.radians(10.0)
    centre = EarthLocation.from_geodetic(10.0 * u.deg, 40.0 * u.deg, 200.0 * u.m)
    c = np.array([centre.x.to_value(u.m), centre.y.to_value(u.m), centre.z.to_value(u.m)])
    east = np.array([-np.sin(lon), np.cos(lon), 0.0])
    north = np.array([-np.sin(lat) * np.cos(lon), -np.sin(lat) * np.sin(lon), np.cos(lat)])
    offsets = rng.uniform(-4000.0, 4000.0, size=(n, 2))
    return c + offsets[:, :1] * east + offsets[:, 1:] * north


def tms_projection(baseline_m, mjd, ra_deg, dec_deg):
    """(n, 3) u, v, w (m) of ITRF baselines (n, 3) at times (n,): TMS 2017 eq. 4.1 (from memory)."""
    from astropy.time import Time

    gst = Time(mjd, format="mjd", scale="utc").sidereal_time("apparent", "greenwich").radian
    H = gst - np.radians(ra_deg)
    d = np.radians(dec_deg)
    X, Y, Z = baseline_m[:, 0], baseline_m[:, 1], baseline_m[:, 2]
    u = np.sin(H) * X + np.cos(H) * Y
    v = -np.sin(d) * np.cos(H) * X + np.sin(d) * np.sin(H) * Y + np.cos(d) * Z
    w = np.cos(d) * np.cos(H) * X - np.cos(d) * np.sin(H) * Y + np.sin(d) * Z
    return np.stack([u, v, w], axis=1)


def textbook_double(u_lambda, v_lambda, truth=TRUTH):
    """sum_k F_k exp[-2 pi i (u l_k + v m_k)], l east and m north in radians (TMS 2017, ch. 3)."""
    out = np.zeros(np.shape(u_lambda), complex)
    for k in ("a", "b"):
        l, m = truth[f"{k}.east"] * ARCSEC, truth[f"{k}.north"] * ARCSEC
        out = out + truth[f"{k}.flux"] * np.exp(-2j * np.pi * (u_lambda * l + v_lambda * m))
    return out


def write_invented_ms(
    path,
    feeds="circular",
    corrected=True,
    sigma=0.05,
    seed=11,
    n_times=40,
    n_chan=4,
    flag_all=False,
    second_spw_feeds=None,
    field_names=("DBL",),
):
    """Write an invented Measurement Set; returns a dict of what was written.

    ``corrected``: the double goes into CORRECTED_DATA and DATA holds something else (the
    double's conjugate, times 2), so that reading the wrong column cannot pass; otherwise DATA
    holds the double. ``second_spw_feeds``: add a second spectral window with that polarisation
    setup (rows duplicated). ``field_names``: more than one adds rows of further fields.
    """
    import casacore.tables as ct

    rng = np.random.default_rng(seed)
    xyz = stations()
    n_ant = len(xyz)
    a1, a2 = np.triu_indices(n_ant, 1)
    times = 60700.0 + 0.35 + np.arange(n_times) * (3.0 / 24.0 / n_times)  # MJD, three hours
    freqs = 30.0e9 + (np.arange(n_chan) - (n_chan - 1) / 2.0) * 50e6
    spw_setups = [feeds] + ([second_spw_feeds] if second_spw_feeds else [])
    corr_ncorr = len(CORR[feeds])
    rows = []
    for f_id in range(len(field_names)):
        for s_id in range(len(spw_setups)):
            T, B = np.meshgrid(times, np.arange(len(a1)), indexing="ij")
            rows.append((np.full(T.size, f_id), np.full(T.size, s_id), T.ravel(), a1[B.ravel()], a2[B.ravel()]))
    field_id, dd_id, t, ant1, ant2 = (np.concatenate(x) for x in zip(*rows))
    n = t.size
    uvw_true = tms_projection(xyz[ant2] - xyz[ant1], t, RA_DEG, DEC_DEG)  # x(b) - x(a), m
    stored_uvw = -uvw_true  # from ANTENNA2 to ANTENNA1
    lam_u = uvw_true[:, 0:1] * freqs[None, :] / C
    lam_v = uvw_true[:, 1:2] * freqs[None, :] / C
    model = textbook_double(lam_u, lam_v)  # (n, n_chan)
    if len(field_names) > 1:
        model = np.where((field_id > 0)[:, None], 0.1 * model, model)
    noise = sigma * (rng.standard_normal((n, n_chan, corr_ncorr)) + 1j * rng.standard_normal((n, n_chan, corr_ncorr)))
    cube = np.repeat(model[:, :, None], corr_ncorr, axis=2) + noise
    codes = CORR[feeds]
    cross = [k for k, c in enumerate(codes) if c in (6, 7, 10, 11)]
    cube[:, :, cross] = noise[:, :, cross]

    desc = [ct.makearrcoldesc("DATA", 0j, valuetype="complex", ndim=2, shape=[n_chan, corr_ncorr])]
    if corrected:
        desc.append(ct.makearrcoldesc("CORRECTED_DATA", 0j, valuetype="complex", ndim=2, shape=[n_chan, corr_ncorr]))
    if os.path.exists(path):
        raise FileExistsError(path)
    ms = ct.default_ms(str(path), ct.maketabdesc(desc))
    ms.addrows(n)
    ms.putcol("UVW", stored_uvw)
    ms.putcol("TIME", t * 86400.0)
    ms.putcol("TIME_CENTROID", t * 86400.0)
    ms.putcol("ANTENNA1", ant1.astype(np.int32))
    ms.putcol("ANTENNA2", ant2.astype(np.int32))
    ms.putcol("FIELD_ID", field_id.astype(np.int32))
    ms.putcol("DATA_DESC_ID", dd_id.astype(np.int32))
    scan = 1 + (t > times[n_times // 2 - 1]).astype(np.int32)  # two scans
    ms.putcol("SCAN_NUMBER", scan)
    ms.putcol("EXPOSURE", np.full(n, 270.0))
    ms.putcol("INTERVAL", np.full(n, 270.0))
    ms.putcol("WEIGHT", np.full((n, corr_ncorr), 1.0 / sigma**2, np.float32))
    ms.putcol("SIGMA", np.full((n, corr_ncorr), sigma, np.float32))
    flags = np.zeros((n, n_chan, corr_ncorr), bool)
    flags[:, -1, :] = True  # the last channel flagged everywhere
    if flag_all:
        flags[:] = True
    ms.putcol("FLAG", flags)
    ms.putcol("FLAG_ROW", np.zeros(n, bool))
    if corrected:
        ms.putcol("CORRECTED_DATA", cube.astype(np.complex64))
        ms.putcol("DATA", (2.0 * np.conj(cube)).astype(np.complex64))
    else:
        ms.putcol("DATA", cube.astype(np.complex64))
    ms.close()

    ant = ct.table(f"{path}/ANTENNA", readonly=False, ack=False)
    ant.addrows(n_ant)
    ant.putcol("NAME", [f"S{k:02d}" for k in range(n_ant)])
    ant.putcol("STATION", [f"P{k:02d}" for k in range(n_ant)])
    ant.putcol("POSITION", xyz)
    ant.putcol("DISH_DIAMETER", np.full(n_ant, 12.0))
    ant.putcol("MOUNT", ["ALT-AZ"] * n_ant)
    ant.close()
    fld = ct.table(f"{path}/FIELD", readonly=False, ack=False)
    fld.addrows(len(field_names))
    direction = np.tile(np.radians([[RA_DEG, DEC_DEG]]), (len(field_names), 1, 1))
    for col in ("PHASE_DIR", "DELAY_DIR", "REFERENCE_DIR"):
        fld.putcol(col, direction)
    fld.putcol("NAME", list(field_names))
    fld.close()
    spw = ct.table(f"{path}/SPECTRAL_WINDOW", readonly=False, ack=False)
    spw.addrows(len(spw_setups))
    for k in range(len(spw_setups)):
        f = freqs + k * 1e9
        spw.putcell("CHAN_FREQ", k, f)
        spw.putcell("CHAN_WIDTH", k, np.full(n_chan, 50e6))
        spw.putcell("EFFECTIVE_BW", k, np.full(n_chan, 50e6))
        spw.putcell("RESOLUTION", k, np.full(n_chan, 50e6))
        spw.putcell("NUM_CHAN", k, n_chan)
        spw.putcell("REF_FREQUENCY", k, float(f[0]))
        spw.putcell("NAME", k, f"BAND{k}")
        spw.putcell("TOTAL_BANDWIDTH", k, n_chan * 50e6)
    spw.close()
    pol = ct.table(f"{path}/POLARIZATION", readonly=False, ack=False)
    pol.addrows(len(spw_setups))
    for k, setup in enumerate(spw_setups):
        pol.putcell("CORR_TYPE", k, np.array(CORR[setup], np.int32))
        pol.putcell("NUM_CORR", k, len(CORR[setup]))
        pol.putcell("CORR_PRODUCT", k, np.zeros((len(CORR[setup]), 2), np.int32))
    pol.close()
    dd = ct.table(f"{path}/DATA_DESCRIPTION", readonly=False, ack=False)
    dd.addrows(len(spw_setups))
    dd.putcol("SPECTRAL_WINDOW_ID", np.arange(len(spw_setups), dtype=np.int32))
    dd.putcol("POLARIZATION_ID", np.arange(len(spw_setups), dtype=np.int32))
    dd.close()
    return {
        "n_rows": n,
        "n_chan": n_chan,
        "freqs": freqs,
        "xyz": xyz,
        "uvw_true": uvw_true,
        "stored_uvw": stored_uvw,
        "model": model,
        "sigma": sigma,
        "names": [f"S{k:02d}" for k in range(n_ant)],
    }
