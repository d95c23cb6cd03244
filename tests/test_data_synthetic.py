"""The UVFITS reader on files written here with astropy.io.fits.GroupsHDU directly (not uvfit's writer).

Layout written by hand from the FITS random-groups convention for interferometer data (from memory):
u, v, w in seconds at the reference frequency, a channel's frequency
CRVAL(FREQ) + IF FREQ + (k + 1 - CRPIX) * CH WIDTH * SIDEBAND, weight = 1/sigma^2, Stokes codes
RR LL RL LR = -1..-4 and XX YY XY YX = -5..-8, BASELINE = 256 a1 + a2.
"""

import numpy as np
import pytest
from astropy.io import fits

import uvfit
from uvfit.data.uvfits import _to_sky_convention
from uvfit.errors import DataError

F0 = 86.0e9
IF_FREQ = np.array([0.0, 64.0e6, -32.0e6])
CH_WIDTH = np.array([8.0e6, 8.0e6, 8.0e6])
SIDEBAND = np.array([1, 1, -1])
N_CHAN = 4
CRPIX_F = 2.0
NAMES = ["KELP", "DUNE", "MOSS", "FERN"]  # invented stations


def expected_freq():
    k = np.arange(N_CHAN) + 1 - CRPIX_F
    return F0 + IF_FREQ[:, None] + k[None, :] * CH_WIDTH[:, None] * SIDEBAND[:, None]


def make_file(
    path, stokes_crval=-1.0, n_groups=6, seed=1, weights=None, antenna_params=False, extra_parnames=None, drop_uu=False
):
    rng = np.random.default_rng(seed)
    n_if, n_st = len(IF_FREQ), 4
    data = np.zeros((n_groups, 1, 1, n_if, N_CHAN, n_st, 3))
    vals = rng.normal(size=(n_groups, n_if, N_CHAN, n_st)) + 1j * rng.normal(size=(n_groups, n_if, N_CHAN, n_st))
    wts = rng.uniform(1.0, 4.0, size=(n_groups, n_if, N_CHAN, n_st)) if weights is None else weights
    data[:, 0, 0, :, :, :, 0] = vals.real
    data[:, 0, 0, :, :, :, 1] = vals.imag
    data[:, 0, 0, :, :, :, 2] = wts
    u_s = rng.normal(size=n_groups) * 1e-6
    v_s = rng.normal(size=n_groups) * 1e-6
    w_s = rng.normal(size=n_groups) * 1e-7
    a1 = np.array([1, 1, 1, 2, 2, 3])[np.arange(n_groups) % 6]
    a2 = np.array([2, 3, 4, 3, 4, 4])[np.arange(n_groups) % 6]
    jd = 2458000.5 + np.zeros(n_groups)
    frac = 0.1 + np.arange(n_groups) * 10.0 / 86400.0
    if antenna_params:
        names = ["UU", "VV", "WW", "ANTENNA1", "ANTENNA2", "DATE", "DATE", "INTTIM"]
        pars = [u_s, v_s, w_s, a1.astype(float), a2.astype(float), jd, frac, np.full(n_groups, 10.0)]
    else:
        names = ["UU---SIN", "VV---SIN", "WW---SIN", "BASELINE", "DATE", "DATE", "INTTIM"]
        pars = [u_s, v_s, w_s, (256 * a1 + a2).astype(float), jd, frac, np.full(n_groups, 10.0)]
    if drop_uu:
        names[0] = "XX-NOPE"
    g = fits.GroupData(data, parnames=names, pardata=pars, bitpix=-64)
    hdu = fits.GroupsHDU(g)
    h = hdu.header
    axes = [
        ("COMPLEX", 1.0, 1.0, 1.0),
        ("STOKES", stokes_crval, -1.0, 1.0),
        ("FREQ", F0, CH_WIDTH[0], CRPIX_F),
        ("IF", 1.0, 1.0, 1.0),
        ("RA", 150.25, 1.0, 1.0),
        ("DEC", -30.5, 1.0, 1.0),
    ]
    for k, (ct, cv, cd, cp) in enumerate(axes, start=2):
        h[f"CTYPE{k}"], h[f"CRVAL{k}"], h[f"CDELT{k}"], h[f"CRPIX{k}"] = ct, cv, cd, cp
    h["OBJECT"] = "NOVA-X"
    an = fits.BinTableHDU.from_columns(
        [
            fits.Column(name="ANNAME", format="8A", array=np.array(NAMES)),
            fits.Column(name="STABXYZ", format="3D", array=np.arange(12.0).reshape(4, 3) * 1000.0),
            fits.Column(name="NOSTA", format="1J", array=np.arange(1, 5)),
        ]
    )
    an.header["EXTNAME"] = "AIPS AN"
    fq = fits.BinTableHDU.from_columns(
        [
            fits.Column(name="FRQSEL", format="1J", array=np.array([1])),
            fits.Column(name="IF FREQ", format="3D", array=IF_FREQ[None, :]),
            fits.Column(name="CH WIDTH", format="3E", array=CH_WIDTH[None, :]),
            fits.Column(name="TOTAL BANDWIDTH", format="3E", array=(CH_WIDTH * N_CHAN)[None, :]),
            fits.Column(name="SIDEBAND", format="3J", array=SIDEBAND[None, :]),
        ]
    )
    fq.header["EXTNAME"] = "AIPS FQ"
    fits.HDUList([hdu, an, fq]).writeto(path)
    return dict(vals=vals, wts=wts, u_s=u_s, v_s=v_s, w_s=w_s, a1=a1, a2=a2, mjd=(jd - 2400000.5) + frac)


@pytest.mark.parametrize("crval, pair", [(-1.0, "(RR+LL)/2"), (-5.0, "(XX+YY)/2")])
def test_channels_frequencies_and_stokes(tmp_path, crval, pair):
    path = tmp_path / "syn.uvfits"
    truth = make_file(path, stokes_crval=crval)
    vs = uvfit.read(path)
    n_if = len(IF_FREQ)
    assert vs.n == 6 * n_if * N_CHAN
    assert vs.meta["stokes_i_from"] == pair
    # rows group-major, then IF, then channel; channel = IF * n_chan + chan
    f = expected_freq()
    assert np.allclose(vs.frequency.reshape(6, n_if, N_CHAN), f[None], rtol=0, atol=1e-3)
    assert np.array_equal(vs.channel.reshape(6, -1)[0], np.arange(n_if * N_CHAN))
    # each channel's u, v, w scale with its own frequency (stored seconds x frequency), through
    # the one documented sign mapping
    u_exp, v_exp, w_exp, _ = _to_sky_convention(
        truth["u_s"][:, None, None] * f[None],
        truth["v_s"][:, None, None] * f[None],
        truth["w_s"][:, None, None] * f[None],
        None,
    )
    assert np.allclose(vs.u, u_exp.ravel(), rtol=1e-13, atol=0)
    assert np.allclose(vs.v, v_exp.ravel(), rtol=1e-13, atol=0)
    assert np.allclose(vs.w, w_exp.ravel(), rtol=1e-13, atol=0)
    # Stokes I = mean of the parallel hands; sigma = 0.5 sqrt(s1^2 + s2^2) (error propagation)
    vals, wts = truth["vals"], truth["wts"]
    i_exp = 0.5 * (vals[..., 0] + vals[..., 1])
    s_exp = 0.5 * np.sqrt(1 / wts[..., 0] + 1 / wts[..., 1])
    assert np.allclose(vs.vis, i_exp.ravel(), rtol=1e-14)
    assert np.allclose(vs.sigma, s_exp.ravel(), rtol=1e-14)
    # stations and times
    assert list(vs.station1[:: n_if * N_CHAN]) == [NAMES[a - 1] for a in truth["a1"]]
    assert list(vs.station2[:: n_if * N_CHAN]) == [NAMES[a - 1] for a in truth["a2"]]
    assert np.allclose(vs.time[:: n_if * N_CHAN], truth["mjd"], rtol=0, atol=1e-11)
    assert vs.source == "NOVA-X" and vs.ra_deg == 150.25 and vs.dec_deg == -30.5
    assert np.allclose(vs.integration, 10.0)
    assert vs.meta["channel_width_hz"] == pytest.approx(list(np.repeat(CH_WIDTH, N_CHAN)))


def test_flagged_rows_and_single_hands(tmp_path):
    n_if = len(IF_FREQ)
    w = np.full((6, n_if, N_CHAN, 4), 4.0)
    w[0, :, :, :2] = 0.0  # group 0: both hands zero weight -> flagged
    w[1, 0, 0, 0] = -4.0  # group 1, IF 0, chan 0: RR flagged -> LL alone
    w[2, 1, 2, 1] = np.nan  # group 2, IF 1, chan 2: LL NaN -> RR alone
    path = tmp_path / "flags.uvfits"
    truth = make_file(path, weights=w)
    vs = uvfit.read(path)
    flag = vs.flag.reshape(6, n_if, N_CHAN)
    assert flag[0].all() and not flag[1:].any()
    assert vs.good().n == 5 * n_if * N_CHAN  # flagged rows drop out
    vis = vs.vis.reshape(6, n_if, N_CHAN)
    sig = vs.sigma.reshape(6, n_if, N_CHAN)
    assert vis[1, 0, 0] == pytest.approx(truth["vals"][1, 0, 0, 1])  # LL alone
    assert sig[1, 0, 0] == pytest.approx(0.5)  # its own sigma 1/sqrt(4)
    assert vis[2, 1, 2] == pytest.approx(truth["vals"][2, 1, 2, 0])  # RR alone
    assert sig[3, 0, 0] == pytest.approx(0.5 * np.sqrt(0.25 + 0.25))  # both hands
    assert vs.meta["n_single_hand_rows"] == 2 and "one good parallel hand" in vs.meta["note_single_hand"]


def test_antenna_parameters_and_projection_suffixes(tmp_path):
    path = tmp_path / "ants.uvfits"
    truth = make_file(path, antenna_params=True)
    vs = uvfit.read(path)
    step = len(IF_FREQ) * N_CHAN
    assert list(vs.station1[::step]) == [NAMES[a - 1] for a in truth["a1"]]
    assert list(vs.station2[::step]) == [NAMES[a - 1] for a in truth["a2"]]


def test_baseline_encodings():
    from uvfit.data.uvfits import _decode_baselines

    # 256*a1 + a2 + (subarray-1)/100, and 2048*a1 + a2 + 65536 for large numbers (from memory)
    a1, a2, sub = _decode_baselines(np.array([258.0, 3 * 256 + 7 + 0.01, 2048 * 300 + 299 + 65536], np.float32))
    assert a1.tolist() == [1, 3, 300] and a2.tolist() == [2, 7, 299] and sub.tolist()[:2] == [1, 2]


def test_stokes_i_axis_and_one_hand(tmp_path):
    # a Stokes axis starting at I (CRVAL = 1, CDELT = -1 gives I, 0, -1, -2): I is used as stored
    path = tmp_path / "i.uvfits"
    truth = make_file(path, stokes_crval=1.0)
    vs = uvfit.read(path)
    assert vs.meta["stokes_i_from"] == "I"
    assert np.allclose(vs.vis, truth["vals"][..., 0].ravel())
    assert np.allclose(vs.sigma, 1 / np.sqrt(truth["wts"][..., 0]).ravel())


def test_no_uu_parameter_is_a_clear_error(tmp_path):
    path = tmp_path / "nouu.uvfits"
    make_file(path, drop_uu=True)
    with pytest.raises(DataError, match="UU"):
        uvfit.read(path)


def test_multi_source_file_needs_a_source_choice(tmp_path):
    n = 4
    data = np.zeros((n, 1, 1, 1, 1, 1, 3))
    data[..., 0] = np.arange(n)[:, None, None, None, None, None]
    data[..., 2] = 1.0
    g = fits.GroupData(
        data,
        parnames=["UU", "VV", "WW", "BASELINE", "DATE", "SOURCE"],
        pardata=[
            np.full(n, 1e-6),
            np.full(n, 1e-6),
            np.zeros(n),
            np.full(n, 258.0),
            np.full(n, 2458000.6),
            np.array([1, 2, 1, 2.0]),
        ],
        bitpix=-64,
    )
    hdu = fits.GroupsHDU(g)
    for k, ct in enumerate(["COMPLEX", "STOKES", "FREQ", "IF", "RA", "DEC"], start=2):
        hdu.header[f"CTYPE{k}"] = ct
        hdu.header[f"CRVAL{k}"] = 1.0e9 if ct == "FREQ" else 1.0
    su = fits.BinTableHDU.from_columns(
        [
            fits.Column(name="ID. NO.", format="1J", array=np.array([1, 2])),
            fits.Column(name="SOURCE", format="16A", array=np.array(["QSO-A", "QSO-B"])),
            fits.Column(name="RAEPO", format="1D", array=np.array([10.0, 20.0])),
            fits.Column(name="DECEPO", format="1D", array=np.array([-1.0, -2.0])),
        ]
    )
    su.header["EXTNAME"] = "AIPS SU"
    path = tmp_path / "multi.uvfits"
    fits.HDUList([hdu, su]).writeto(path)
    with pytest.raises(DataError, match="QSO-A, QSO-B"):
        uvfit.read(path)
    vs = uvfit.read(path, source="QSO-B")
    assert vs.n == 2 and vs.source == "QSO-B" and (vs.ra_deg, vs.dec_deg) == (20.0, -2.0)
    assert np.allclose(vs.vis.real, [1, 3])
    with pytest.raises(DataError, match="no source 'QSO-C'"):
        uvfit.read(path, source="QSO-C")
