"""A damaged UVFITS file never makes the reader raise anything but a UvfitError (or read fine)."""

import os
import tempfile

import numpy as np
from astropy.io import fits
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import uvfit
from uvfit.data.visset import VisibilitySet
from uvfit.errors import UvfitError


def _valid_bytes():
    n = 4
    data = np.zeros((n, 1, 1, 2, 2, 2, 3))
    data[..., 0] = 1.0
    data[..., 2] = 1.0
    g = fits.GroupData(
        data,
        parnames=["UU---SIN", "VV---SIN", "WW---SIN", "BASELINE", "DATE", "DATE", "INTTIM"],
        pardata=[
            np.full(n, 1e-6),
            np.full(n, 2e-6),
            np.zeros(n),
            np.full(n, 258.0),
            np.full(n, 2458000.5),
            np.linspace(0.1, 0.2, n),
            np.full(n, 4.0),
        ],
        bitpix=-32,
    )
    hdu = fits.GroupsHDU(g)
    for k, (ct, cv) in enumerate(
        [("COMPLEX", 1.0), ("STOKES", -1.0), ("FREQ", 5e9), ("IF", 1.0), ("RA", 10.0), ("DEC", 20.0)], start=2
    ):
        hdu.header[f"CTYPE{k}"] = ct
        hdu.header[f"CRVAL{k}"] = cv
        hdu.header[f"CDELT{k}"] = -1.0 if ct == "STOKES" else 1.0
        hdu.header[f"CRPIX{k}"] = 1.0
    an = fits.BinTableHDU.from_columns(
        [
            fits.Column(name="ANNAME", format="8A", array=np.array(["OWL", "ELK"])),
            fits.Column(name="STABXYZ", format="3D", array=np.zeros((2, 3))),
            fits.Column(name="NOSTA", format="1J", array=np.array([1, 2])),
        ]
    )
    an.header["EXTNAME"] = "AIPS AN"
    fq = fits.BinTableHDU.from_columns(
        [
            fits.Column(name="FRQSEL", format="1J", array=np.array([1])),
            fits.Column(name="IF FREQ", format="2D", array=np.array([[0.0, 1e8]])),
            fits.Column(name="CH WIDTH", format="2E", array=np.array([[1e6, 1e6]])),
            fits.Column(name="SIDEBAND", format="2J", array=np.array([[1, 1]])),
        ]
    )
    fq.header["EXTNAME"] = "AIPS FQ"
    with tempfile.TemporaryDirectory() as d:
        p = os.path.join(d, "ok.uvfits")
        fits.HDUList([hdu, an, fq]).writeto(p)
        with open(p, "rb") as handle:
            return handle.read()


VALID = _valid_bytes()
N_CARDS = len(VALID) // 80  # every 80-byte card of every header (and of the data)


def _read_bytes(raw):
    with tempfile.TemporaryDirectory() as d:
        p = os.path.join(d, "x.uvfits")
        with open(p, "wb") as handle:
            handle.write(raw)
        try:
            out = uvfit.read(p)
        except UvfitError:
            return None
        assert isinstance(out, VisibilitySet)
        return out


def test_the_valid_file_reads():
    vs = _read_bytes(VALID)
    assert vs is not None and vs.n == 16 and set(vs.station_names) == {"OWL", "ELK"}


card_values = st.one_of(
    st.text(alphabet=st.characters(min_codepoint=32, max_codepoint=126), max_size=20),
    st.integers(-(10**12), 10**12).map(str),
    st.sampled_from(["T", "F", "'UU'", "'DATE'", "0", "-1", "1E300", "NAN", "'STOKES'", "'IF'", "''"]),
)
SETTINGS = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@SETTINGS
@given(card=st.integers(0, N_CARDS - 1), value=card_values)
def test_mutated_header_card_values(card, value):
    raw = bytearray(VALID)
    start = card * 80 + 10
    raw[start : start + 20] = value.rjust(20)[:20].encode("ascii")
    _read_bytes(bytes(raw))


@SETTINGS
@given(edits=st.lists(st.tuples(st.integers(0, len(VALID) - 1), st.integers(0, 255)), min_size=1, max_size=8))
def test_mutated_bytes(edits):
    raw = bytearray(VALID)
    for pos, byte in edits:
        raw[pos] = byte
    _read_bytes(bytes(raw))


@SETTINGS
@given(cut=st.integers(0, len(VALID) - 1))
def test_cut_short(cut):
    _read_bytes(VALID[:cut])
