"""UVFITS (FITS random groups) visibilities: reader and writer.

The layout follows the random-groups convention of the FITS standard (Greisen & Harten 1981,
A&AS 44, 371; Wells, Greisen & Harten 1981) as used for interferometer data (from memory):

- one group per (time, baseline); random parameters ``UU VV WW`` (seconds of light travel time at
  the reference frequency, often with a projection suffix such as ``UU---SIN`` or ``UU-L``),
  ``BASELINE`` (or ``ANTENNA1``/``ANTENNA2``), ``DATE`` (Julian date, commonly split over two
  parameters that must be summed), ``INTTIM`` (s), optional ``SUBARRAY``, ``FREQSEL``, ``SOURCE``;
- the group array has axes ``COMPLEX`` (real, imaginary, weight), ``STOKES``, ``FREQ``, ``IF``,
  ``RA``, ``DEC``; the weight is 1/sigma^2 and a zero, negative or NaN weight marks a flagged value;
- the antenna table (one per subarray) holds ``ANNAME``, ``STABXYZ`` (m, relative to the table's
  ``ARRAYX/Y/Z``), ``NOSTA``; the frequency table holds per frequency setup and IF the offset
  ``IF FREQ`` from the reference frequency, the channel width ``CH WIDTH`` and ``SIDEBAND``.

The reader returns one row per (group, IF, channel) in file order (group-major), each with its own
frequency, and forms Stokes I from what the file holds (see :func:`_stokes_i`). The one place where
the file's baseline order and phase sign are mapped onto the project's Fourier convention is
:func:`_to_sky_convention`.
"""

import os
import warnings

import numpy as np

from ..errors import DataError, UvfitError
from ..labels import printable
from .visset import MAX_STATION_NAME, StationTable, VisibilitySet, screen_rows

# Extension names of the standard tables, matched as strings.
ANTENNA_EXTNAME = "AIPS AN"
FREQUENCY_EXTNAME = "AIPS FQ"
SOURCE_EXTNAME = "AIPS SU"

MJD_ZERO_JD = 2400000.5  # MJD = JD - 2400000.5 (IAU convention; common practice)

# Stokes axis codes (FITS random-groups convention, from memory): I Q U V = 1..4,
# RR LL RL LR = -1..-4, XX YY XY YX = -5..-8.
STOKES_CODES = {
    1: "I",
    2: "Q",
    3: "U",
    4: "V",
    -1: "RR",
    -2: "LL",
    -3: "RL",
    -4: "LR",
    -5: "XX",
    -6: "YY",
    -7: "XY",
    -8: "YX",
}
_PARALLEL_PAIRS = ((-1, -2), (-5, -6))

# Baseline encodings (from memory): 256*a1 + a2 + (subarray - 1)/100 for antenna numbers below 256;
# 2048*a1 + a2 + 65536 for larger antenna numbers.
_LARGE_BASELINE_OFFSET = 65536
_LARGE_BASELINE_FACTOR = 2048


# --------------------------------------------------------------------------- orientation
def _to_sky_convention(u, v, w, vis):
    """Map a file's (u, v, w, visibility) onto the project's convention.  THE one place to flip.

    Project convention (README "Conventions"; Thompson, Moran & Swenson 2017, ch. 3, from memory):
    V(u, v) = integral I(l, m) exp[-2 pi i (u l + v m)] dl dm, l toward east, m toward north, and
    the (u, v, w) of a row on (station1, station2) is the baseline vector x(station2) - x(station1)
    projected as in TMS 2017 eq. 4.1 (u toward east, v toward north).

    What the reader assumes of a UVFITS file: the group's UU VV WW are the projection of
    x(a1) - x(a2) for its baseline (a1, a2) (the FITS interferometer convention, from memory), and
    its complex value, taken as stored, obeys the project's kernel once (u, v, w) point from a1 to
    a2. So the mapping negates u, v and w and keeps the visibility as stored; station1, station2
    are the file's (a1, a2).

    Evidence (measured on the 3C 279 files in tests/data/3c279, see tests/test_data_3c279.py):
    - geometry: the stored UU VV of every group checked equal minus TMS eq. 4.1 applied to
      x(a2) - x(a1) from the antenna table (agreement to ~1e-5 relative);
    - sky: a closure-phase fit of two circular Gaussians with the project's kernel places the
      fainter component at position angle ~241 deg, ~29 microarcseconds from the brighter one
      (south-west, as published: Kim et al. 2020, A&A 640, A69); with the stored (u, v) it comes
      out at ~61 deg (north-east), the point-reflected sky.
    - the publishers' text export beside the files lists the stored (u, v) (= minus ours) and the
      stored phase (= ours).

    If the project's orientation check ever fails, the sky is point-reflected: flip HERE, and only
    here, by returning ``(u, v, w, vis)`` instead (or equivalently ``(-u, -v, -w, conj(vis))``).
    Returning ``(u, v, w, conj(vis))`` would NOT help: conjugating and negating together only
    relabels the baseline direction and leaves the sky unchanged. The writer calls this same
    function (it is its own inverse), so written files keep the file convention.
    """
    return -u, -v, -w, vis


ORIENTATION_NOTE = (
    "(u, v, w) negated from the UVFITS file (file: x1 - x2; here x2 - x1), "
    "phases as stored; defined in uvfit.data.uvfits._to_sky_convention"
)


def _ms_to_sky_convention(u, v, w, vis):
    """Map a Measurement Set's (UVW, visibility) onto the project's convention.  THE one place for MS.

    Kept beside :func:`_to_sky_convention` so that both formats' mappings are read together; the
    Measurement Set reader (uvfit.data.ms) and its model-column writer call only this function.

    What the Measurement Set definition says (Kemball & Wieringa 2000, MeasurementSet definition
    version 2.0; wording from memory): a row's ``UVW`` (m) are "the uvw
    coordinates for the baseline from ANTENNA2 to ANTENNA1", i.e. the vector that starts at
    ANTENNA2 and ends at ANTENNA1, x(ANTENNA1) - x(ANTENNA2), in the frame of the field's
    PHASE_DIR; the correlation in ``DATA`` is ANTENNA1 times the conjugate of ANTENNA2. (The same
    sentence of the definition then calls this "POSITION2 - POSITION1", which reads the other way;
    the files decide, below.) So a row's stored UVW point the opposite way from the project's
    x(station2) - x(station1) for (station1, station2) = (ANTENNA1, ANTENNA2), exactly like the
    UVFITS groups, and the visibility, taken as stored, obeys the project's kernel
    V = integral I exp[-2 pi i (u l + v m)] once (u, v, w) point from ANTENNA1 to ANTENNA2: the
    mapping negates u, v and w and keeps the visibility, the same mapping as for UVFITS.

    Evidence (tests/test_data_ms.py, files in tests/data/ms):
    - geometry: in a VLA Measurement Set and in a Measurement Set written by another library, the
      stored UVW of the rows checked are minus the TMS 2017 eq. 4.1 projection of
      x(ANTENNA2) - x(ANTENNA1) from the ANTENNA table (agreement to about 10% on VLA baselines of
      tens of metres, 1e-5 on VLBI ones; the other sign is off by 200%);
    - the 3C 279 rows read from the Measurement Set and from the UVFITS original, each through its
      own mapping, agree row by row (u, v, w, visibilities) to float precision;
    - a Measurement Set written in the tests from an invented double with the definition's UVW
      and the textbook kernel fits back with its fainter component to the east.

    Like the UVFITS mapping it is its own inverse (the model-column writer uses it to go back).
    If a sky from a Measurement Set ever comes out point-reflected, flip HERE and only here.
    """
    return -u, -v, -w, vis


MS_ORIENTATION_NOTE = (
    "(u, v, w) negated from the Measurement Set's UVW (file: from ANTENNA2 to "
    "ANTENNA1; here x2 - x1), phases as stored; defined in "
    "uvfit.data.uvfits._ms_to_sky_convention"
)


# --------------------------------------------------------------------------- helpers
def _fail(path, problem, hint=None):
    raise DataError(f"{path}: {problem}", hint)


def _norm_param(name):
    """'UU---SIN' -> 'UU', 'UU-L' -> 'UU', ' date ' -> 'DATE'."""
    name = str(name).strip().upper()
    return name.split("-")[0].strip() if not name.startswith("-") else name


def _axes(header, path):
    """The array axes of a random-groups header: {CTYPE: dict(index, n, crval, cdelt, crpix)}."""
    naxis = int(header.get("NAXIS", 0))
    axes = {}
    unnamed = []
    for k in range(2, naxis + 1):
        n = int(header.get(f"NAXIS{k}", 0))
        ctype = str(header.get(f"CTYPE{k}", "")).strip().upper()
        entry = dict(
            fits_axis=k,
            numpy_axis=naxis - k + 1,
            n=n,
            crval=float(header.get(f"CRVAL{k}", 0.0)),
            cdelt=float(header.get(f"CDELT{k}", 1.0)),
            crpix=float(header.get(f"CRPIX{k}", 1.0)),
        )
        if not ctype:
            unnamed.append(entry)
            continue
        axes[ctype.split("-")[0]] = entry
    return axes, unnamed


_BLOCK = 2880
_MAX_HEADER_BLOCKS = 4000


def _card_value(card):
    text = card[10:].split("/")[0].strip()
    if text in ("T", "F"):
        return text == "T"
    if text.lstrip("+-").isdigit():
        return int(text)
    return text


def _scan_structure(path):
    """Walk the FITS units of a file from their raw headers, before astropy sees them.

    Checks what a damaged file can get wrong and what would make a reader hang or allocate without
    bound: NAXIS within 0..999 (FITS standard), integer non-negative sizes, an END card, and data
    that the file really holds. Returns ``[(cards, data_offset, data_bytes), ...]``.
    """
    size = os.path.getsize(path)
    if size % _BLOCK:
        # FITS files are whole 2880-byte blocks: a shorter last block means a lost tail, which may
        # hold a whole table (the frequency table: every IF would read at the reference frequency)
        _fail(
            path,
            f"is truncated: {size} bytes is not a whole number of 2880-byte FITS blocks "
            f"({size % _BLOCK} bytes of a last block; trailing tables may be missing)",
            "copy or download the file again",
        )
    units = []
    with open(path, "rb") as handle:
        offset = 0
        while offset < size:
            cards = {}
            found_end = False
            for block in range(_MAX_HEADER_BLOCKS):
                chunk = handle.read(_BLOCK)
                if block == 0 and units and not chunk.startswith(b"XTENSION="):
                    return units  # padding or stray bytes after the last unit
                if len(chunk) < _BLOCK:
                    if units and not chunk.strip(b"\0 "):
                        return units  # blank padding after the last unit
                    if units:
                        _fail(
                            path,
                            f"is truncated inside the header of extension {len(units)} "
                            "(after the visibilities; e.g. the antenna or frequency table)",
                            "copy or download the file again",
                        )
                    _fail(
                        path,
                        "is truncated or damaged inside a FITS header (the header ends early)",
                        "copy or download the file again",
                    )
                text = chunk.decode("ascii", errors="replace")
                for i in range(0, _BLOCK, 80):
                    card = text[i : i + 80]
                    key = card[:8].strip()
                    if key == "END":
                        found_end = True
                        break
                    if card[8:10] == "= " and key not in cards:
                        cards[key] = _card_value(card)
                if found_end:
                    break
            if not found_end:
                _fail(path, "has a FITS header without an END card", "the file is damaged")
            header_end = handle.tell()
            naxis = cards.get("NAXIS", 0)
            if not isinstance(naxis, int) or isinstance(naxis, bool) or not 0 <= naxis <= 999:
                _fail(path, f"has an impossible NAXIS = {naxis!r} (FITS allows 0 to 999)", "the file is damaged")
            dims = []
            for key in [f"NAXIS{k}" for k in range(1, naxis + 1)] + ["PCOUNT", "GCOUNT"]:
                val = cards.get(key, 1 if key == "GCOUNT" else 0)
                if not isinstance(val, int) or isinstance(val, bool) or val < 0:
                    _fail(path, f"header card {key} = {val!r} is not a non-negative integer", "the file is damaged")
                if key.startswith("NAXIS"):
                    dims.append(val)
            bitpix = cards.get("BITPIX")
            if bitpix not in (8, 16, 32, 64, -32, -64):
                _fail(path, f"header card BITPIX = {bitpix!r} is not a FITS data type", "the file is damaged")
            groups = not units and cards.get("GROUPS") is True and dims[:1] == [0]
            if naxis == 0:
                nbytes = 0
            else:
                prod = 1
                for d in dims[1:] if groups else dims:
                    prod *= d
                if units or groups:
                    nbytes = abs(bitpix) // 8 * cards.get("GCOUNT", 1) * (cards.get("PCOUNT", 0) + prod)
                else:
                    nbytes = abs(bitpix) // 8 * prod
            if header_end + nbytes > size:
                what = "visibilities" if groups else "data"
                _fail(
                    path,
                    f"is truncated: a header promises {nbytes} bytes of {what}, the file holds "
                    f"{max(size - header_end, 0)}",
                    "copy or download the file again",
                )
            units.append((cards, header_end, nbytes))
            offset = header_end + -(-nbytes // _BLOCK) * _BLOCK
            handle.seek(offset)
    return units


def _table_column(table, name):
    names = [c.strip().upper() for c in table.columns.names]
    if name not in names:
        return None
    return np.asarray(table.data.field(names.index(name)))


def _read_stations(hdul, path):
    """Station names and positions from every antenna table: ({(subarray, number): name}, StationTable)."""
    lookup = {}
    names, xyz = [], []
    for hdu in hdul[1:]:
        if str(hdu.header.get("EXTNAME", "")).strip().upper() != ANTENNA_EXTNAME:
            continue
        sub = int(hdu.header.get("EXTVER", 1) or 1)
        anname = _table_column(hdu, "ANNAME")
        nosta = _table_column(hdu, "NOSTA")
        if anname is None or nosta is None:
            _fail(path, f"the antenna table (subarray {sub}) has no ANNAME or NOSTA column")
        pos = _table_column(hdu, "STABXYZ")
        centre = np.array([float(hdu.header.get(k, 0.0) or 0.0) for k in ("ARRAYX", "ARRAYY", "ARRAYZ")])
        seen = {}
        for i, (nm, no) in enumerate(zip(anname, nosta)):
            nm = nm.decode(errors="replace") if isinstance(nm, bytes) else str(nm)
            nm = nm.strip() or f"{int(no)}"
            if len(nm) > MAX_STATION_NAME:
                _fail(
                    path,
                    f"the antenna table (subarray {sub}) row {i + 1} has a station name of "
                    f"{len(nm)} characters (at most {MAX_STATION_NAME} accepted)",
                    "the antenna table is damaged",
                )
            if (sub, int(no)) in lookup:
                _fail(
                    path,
                    f"the antenna table (subarray {sub}) gives station number {int(no)} twice "
                    f"(rows {seen[int(no)] + 1} and {i + 1})",
                    "each station needs its own number; the data cannot be labelled",
                )
            if nm in [v for (s_, _), v in lookup.items() if s_ == sub]:
                _fail(
                    path,
                    f"the antenna table (subarray {sub}) gives the name '{printable(nm)}' to two "
                    f"stations (row {i + 1} and an earlier one)",
                    "each station needs its own name, else its baselines look like autocorrelations",
                )
            seen[int(no)] = i
            lookup[(sub, int(no))] = nm
            if nm not in names:
                names.append(nm)
                # STABXYZ is relative to the array centre ARRAYX/Y/Z (from memory).
                xyz.append(np.asarray(pos[i], float).reshape(3) + centre if pos is not None else np.full(3, np.nan))
    return lookup, names, xyz


def _read_frequency_table(hdul, n_if):
    """Rows of the frequency table as arrays (n_setups, n_if), or None when there is no table."""
    for hdu in hdul[1:]:
        if str(hdu.header.get("EXTNAME", "")).strip().upper() != FREQUENCY_EXTNAME:
            continue
        n_rows = len(hdu.data) if hdu.data is not None else 0
        if n_rows == 0:
            return None
        out = {}
        ids = _table_column(hdu, "FRQSEL")
        out["FRQSEL"] = np.arange(1, n_rows + 1) if ids is None else np.asarray(ids, int).reshape(n_rows)
        for name in ("IF FREQ", "CH WIDTH", "TOTAL BANDWIDTH", "SIDEBAND"):
            col = _table_column(hdu, name)
            if col is None:
                out[name] = None
                continue
            col = np.asarray(col, float).reshape(n_rows, -1)
            if col.shape[1] != n_if:
                if col.shape[1] == 1:
                    col = np.repeat(col, n_if, axis=1)
                else:
                    raise DataError(
                        f"the frequency table has {col.shape[1]} IFs in column '{name}' but the data have {n_if}"
                    )
            out[name] = col
        return out
    return None


def _channel_frequencies(faxis, n_if, fq):
    """Frequency (Hz) and channel width (Hz) of every (setup, IF, channel).

    f = CRVAL(FREQ) + IF FREQ[setup, IF] + (channel + 1 - CRPIX(FREQ)) * spacing[setup, IF], with the
    spacing |CH WIDTH| signed by SIDEBAND from the frequency table, falling back to CDELT(FREQ)
    (frequency-table layout from memory).
    """
    n_chan = faxis["n"]
    k = np.arange(n_chan) + 1.0 - faxis["crpix"]
    if fq is None:
        offsets = np.zeros((1, n_if))
        spacing = np.full((1, n_if), faxis["cdelt"])
    else:
        n_setups = len(fq["FRQSEL"])
        offsets = fq["IF FREQ"] if fq["IF FREQ"] is not None else np.zeros((n_setups, n_if))
        width = fq["CH WIDTH"]
        spacing = np.full((n_setups, n_if), faxis["cdelt"])
        if width is not None:
            usable = np.isfinite(width) & (width != 0)
            sign = np.sign(width)
            if fq["SIDEBAND"] is not None:
                sb = fq["SIDEBAND"]
                sign = np.where(np.isfinite(sb) & (sb != 0), np.sign(sb), sign)
            spacing = np.where(usable, np.abs(width) * sign, spacing)
    freq = faxis["crval"] + offsets[:, :, None] + k[None, None, :] * spacing[:, :, None]
    return freq, np.abs(spacing)


def _stokes_i(values, weights, codes, path):
    """Stokes I and its sigma from the Stokes axis, per row.

    ``values`` complex (..., n_stokes), ``weights`` (..., n_stokes) with weight = 1/sigma^2.
    Returns (vis, sigma, good, description, n_single) where good marks rows with a usable value.
    I = (RR + LL)/2 or (XX + YY)/2, sigma_I = 0.5 sqrt(sigma_1^2 + sigma_2^2) when both hands are
    good (error propagation of the mean); where only one hand is good it stands for I with its own
    sigma (correct for an unpolarised source). A row with no good hand keeps the combination of the
    flagged values (weights taken by magnitude) and is flagged.
    """
    codes = list(codes)
    with np.errstate(divide="ignore", invalid="ignore"):
        good_w = np.isfinite(weights) & (weights > 0) & np.isfinite(weights**2)
        good = good_w & np.isfinite(values)
        mag = np.abs(weights)
        sig = np.where(np.isfinite(mag) & (mag > 0), 1.0 / np.sqrt(mag), np.inf)
    if 1 in codes:
        i = codes.index(1)
        return values[..., i], sig[..., i], good[..., i], "I", 0
    for c1, c2 in _PARALLEL_PAIRS:
        have = [c for c in (c1, c2) if c in codes]
        if len(have) == 2:
            a, b = codes.index(c1), codes.index(c2)
            va, vb, sa, sb, ga, gb = (
                values[..., a],
                values[..., b],
                sig[..., a],
                sig[..., b],
                good[..., a],
                good[..., b],
            )
            with np.errstate(invalid="ignore"):
                both_v = 0.5 * (va + vb)
                both_s = 0.5 * np.sqrt(sa**2 + sb**2)
            vis = np.where(ga & gb, both_v, np.where(ga, va, np.where(gb, vb, both_v)))
            sigma = np.where(ga & gb, both_s, np.where(ga, sa, np.where(gb, sb, both_s)))
            single = int(np.count_nonzero(ga ^ gb))
            name = f"({STOKES_CODES[c1]}+{STOKES_CODES[c2]})/2"
            return vis, sigma, ga | gb, name, single
        if len(have) == 1:
            a = codes.index(have[0])
            return values[..., a], sig[..., a], good[..., a], STOKES_CODES[have[0]] + " only", -1
    held = ", ".join(STOKES_CODES.get(c, str(c)) for c in codes)
    _fail(
        path,
        f"the Stokes axis holds {held}: no Stokes I and no parallel hands (RR/LL or XX/YY)",
        "uvfit fits total intensity; give it a file with I, RR/LL or XX/YY",
    )


def _decode_baselines(bl):
    """(a1, a2, subarray) from the BASELINE parameter (encodings from memory, see module top)."""
    bl = np.asarray(bl, float)
    whole = np.floor(bl + 1e-6)
    sub = np.rint((bl - whole) * 100.0).astype(int) + 1
    whole = whole.astype(np.int64)
    large = whole > _LARGE_BASELINE_OFFSET
    a1 = np.where(large, (whole - _LARGE_BASELINE_OFFSET) // _LARGE_BASELINE_FACTOR, whole // 256)
    a2 = np.where(large, (whole - _LARGE_BASELINE_OFFSET) % _LARGE_BASELINE_FACTOR, whole % 256)
    return a1.astype(int), a2.astype(int), sub


def _jd_to_mjd(parts, header):
    """MJD from the DATE parameters (JD, possibly split): subtract the offset from the largest part
    first so that no precision is lost."""
    parts = [np.asarray(p, np.float64) for p in parts]
    order = sorted(range(len(parts)), key=lambda i: -float(np.nanmax(np.abs(parts[i]))) if parts[i].size else 0)
    big = parts[order[0]]
    rest = sum((parts[i] for i in order[1:]), np.zeros_like(big))
    if big.size and np.nanmedian(big + rest) < 1.0e6:
        # Only a day fraction is stored: count it from 0h UTC of DATE-OBS (common practice).
        from astropy.time import Time

        try:
            start = Time(str(header.get("DATE-OBS", "")).strip()[:10], scale="utc").mjd
        except Exception:
            raise DataError("the DATE parameters hold no Julian date and DATE-OBS is missing or unreadable") from None
        return (start + big) + rest
    return (big - MJD_ZERO_JD) + rest


# --------------------------------------------------------------------------- reader
def read_uvfits(path, source=None):
    """Read a UVFITS file into a :class:`VisibilitySet` of Stokes I rows.

    ``source``: name of the source to keep in a multi-source file (required when there are several).
    Raises :class:`DataError` with a clear message for anything that is not a usable UVFITS file.
    """
    path = os.fspath(path)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            with np.errstate(all="ignore"):
                return _read(path, source)
    except UvfitError:
        raise
    except MemoryError:
        raise DataError(
            f"{path}: the header describes more data than fits in memory", "the file is probably corrupted"
        ) from None
    except Exception as exc:  # astropy raises many kinds for damaged files
        raise DataError(
            f"{path}: not a readable UVFITS file ({type(exc).__name__}: {exc})",
            "check that the file is complete and is FITS random groups",
        ) from None


def _read(path, source):
    from astropy.io import fits

    if not os.path.exists(path):
        _fail(path, "no such file")
    if os.path.isdir(path):
        _fail(path, "is a folder, not a visibility file")
    try:
        with open(path, "rb") as handle:
            start = handle.read(80)
    except OSError as exc:
        _fail(path, f"cannot be read ({exc.strerror or exc})")
    if not start.startswith(b"SIMPLE  ="):
        _fail(
            path,
            "is not a FITS file (it does not begin with the card 'SIMPLE  =')",
            "give a UVFITS file, or an .ecsv visibility table",
        )
    _scan_structure(path)
    with fits.open(path, memmap=False, lazy_load_hdus=True) as hdul:
        hdu = hdul[0]
        header = hdu.header
        if not (isinstance(hdu, fits.GroupsHDU) and bool(header.get("GROUPS", False))):
            kind = "an image" if int(header.get("NAXIS", 0)) >= 2 else "no data array"
            _fail(
                path,
                f"is a FITS file but holds no visibilities (no random groups, GROUPS = T missing; "
                f"the primary unit is {kind})",
                "give a UVFITS visibility file",
            )
        pcount = int(header.get("PCOUNT", 0))
        ptypes = [str(header.get(f"PTYPE{i}", "")) for i in range(1, pcount + 1)]
        pnames = [_norm_param(p) for p in ptypes]
        if "UU" not in pnames or "VV" not in pnames:
            _fail(
                path,
                "has no UU/VV random parameter (the baseline coordinates); found "
                f"{', '.join(p.strip() for p in ptypes) or 'none'}",
                "the file is not interferometer visibilities in UVFITS form",
            )
        data = hdu.data
        n_groups = len(data)
        par = lambda i: np.asarray(data.par(i), dtype=np.float64).reshape(n_groups)  # noqa: E731

        def one(name):
            return par(pnames.index(name)) if name in pnames else None

        u_s, v_s = one("UU"), one("VV")
        w_s = one("WW") if "WW" in pnames else np.zeros(n_groups)
        dates = [par(i) for i, p in enumerate(pnames) if p == "DATE"]
        if not dates:
            _fail(path, "has no DATE random parameter, so the times of the visibilities are unknown")
        mjd = _jd_to_mjd(dates, header)
        if "ANTENNA1" in pnames and "ANTENNA2" in pnames:
            a1 = np.rint(one("ANTENNA1")).astype(int)
            a2 = np.rint(one("ANTENNA2")).astype(int)
            sub = np.rint(one("SUBARRAY")).astype(int) if "SUBARRAY" in pnames else np.ones(n_groups, int)
        elif "BASELINE" in pnames:
            a1, a2, sub = _decode_baselines(one("BASELINE"))
            if "SUBARRAY" in pnames:
                sub = np.rint(one("SUBARRAY")).astype(int)
        else:
            _fail(path, "has neither a BASELINE nor ANTENNA1/ANTENNA2 random parameter")
        inttim = one("INTTIM") if "INTTIM" in pnames else np.full(n_groups, np.nan)
        freqsel = np.rint(one("FREQSEL")).astype(int) if "FREQSEL" in pnames else None
        src_id = np.rint(one("SOURCE")).astype(int) if "SOURCE" in pnames else None

        # ---- the array axes
        axes, unnamed = _axes(header, path)
        for need in ("COMPLEX", "STOKES", "FREQ"):
            if need not in axes:
                _fail(path, f"the visibility array has no {need} axis")
        ncomplex = axes["COMPLEX"]["n"]
        if ncomplex not in (2, 3):
            _fail(path, f"the COMPLEX axis has length {ncomplex}; expected 3 (real, imaginary, weight) or 2")
        fq_hint = None
        if "IF" not in axes:
            multi = [a for a in unnamed if a["n"] > 1]
            if len(multi) == 1:  # an unnamed axis of several IFs
                axes["IF"] = multi[0]
                fq_hint = "unnamed axis taken as IF"
        arr = np.asarray(data.data)
        keep = {axes[k]["numpy_axis"]: k for k in ("COMPLEX", "STOKES", "FREQ", "IF") if k in axes}
        index = []
        for ax in range(1, arr.ndim):
            if ax in keep:
                index.append(slice(None))
            elif arr.shape[ax] == 1:
                index.append(0)
            else:
                _fail(
                    path,
                    f"the visibility array has an axis of length {arr.shape[ax]} that uvfit "
                    "cannot interpret (only COMPLEX, STOKES, FREQ, IF may be longer than 1)",
                )
        arr = arr[(slice(None),) + tuple(index)]
        remaining = [k for ax, k in sorted(keep.items())]
        if "IF" not in remaining:
            arr = arr[..., None]
            remaining.append("IF")
        order = [1 + remaining.index(k) for k in ("IF", "FREQ", "STOKES", "COMPLEX")]
        arr = np.transpose(arr, [0] + order).astype(np.float64)  # (G, IF, CHAN, STOKES, COMPLEX)
        n_if, n_chan, n_stokes = arr.shape[1:4]
        st = axes["STOKES"]
        codes = np.rint(st["crval"] + (np.arange(n_stokes) + 1 - st["crpix"]) * st["cdelt"]).astype(int)

        values = arr[..., 0] + 1j * arr[..., 1]
        weights = arr[..., 2] if ncomplex == 3 else np.ones(values.shape)
        vis, sigma, good, stokes_name, n_single = _stokes_i(values, weights, codes, path)

        # ---- frequencies
        fq = _read_frequency_table(hdul, n_if)
        freq, width = _channel_frequencies(axes["FREQ"], n_if, fq)
        if freqsel is not None and fq is not None and len(fq["FRQSEL"]) > 1:
            ids = list(np.asarray(fq["FRQSEL"], int))
            lookup = np.full(max(ids) + 2, -1)
            lookup[ids] = np.arange(len(ids))
            sel = lookup[np.clip(freqsel, 0, len(lookup) - 1)]
            if np.any(sel < 0):
                _fail(path, "a FREQSEL value has no row in the frequency table")
        else:
            sel = np.zeros(n_groups, int)
        row_freq = freq[sel]  # (G, IF, CHAN)
        if not np.all(np.isfinite(row_freq)) or np.any(row_freq <= 0):
            _fail(path, "the FREQ axis and frequency table give a non-positive or undefined frequency")

        # ---- stations
        lookup, names, xyz = _read_stations(hdul, path)
        pairs = np.stack([sub, a1, a2], axis=1)
        uniq, inv = np.unique(pairs, axis=0, return_inverse=True)
        inv = inv.reshape(-1)
        missing = []
        n1, n2 = [], []
        for s, x, y in uniq:
            for num, out in ((x, n1), (y, n2)):
                nm = lookup.get((int(s), int(num)), lookup.get((1, int(num))))
                if nm is None:
                    nm = str(int(num))
                    if nm not in names:
                        names.append(nm)
                        xyz.append(np.full(3, np.nan))
                        missing.append(nm)
                out.append(nm)
        st1 = np.asarray(n1, dtype=str)[inv]
        st2 = np.asarray(n2, dtype=str)[inv]

        # ---- source
        src_name = str(header.get("OBJECT", "")).strip() or "unknown"
        ra, dec = _phase_centre(header, axes)
        group_keep = np.ones(n_groups, bool)
        if src_id is not None:
            src_table = _read_sources(hdul)
            ids_present = np.unique(src_id)
            if len(ids_present) > 1 or source is not None:
                known = {i: src_table.get(i, (str(i), np.nan, np.nan)) for i in ids_present}
                if source is None:
                    _fail(
                        path,
                        "holds several sources: " + ", ".join(v[0] for v in known.values()),
                        "choose one with the reader option source=NAME",
                    )
                chosen = [i for i, v in known.items() if v[0] == source]
                if not chosen:
                    _fail(path, f"has no source '{source}'; it holds " + ", ".join(v[0] for v in known.values()))
                group_keep = src_id == chosen[0]
                src_name, ra_s, dec_s = known[chosen[0]]
            elif int(ids_present[0]) in src_table:
                src_name, ra_s, dec_s = src_table[int(ids_present[0])]
            else:
                ra_s = dec_s = np.nan
            if np.isfinite(ra_s) and np.isfinite(dec_s):
                ra, dec = ra_s, dec_s
        elif source is not None and source != src_name:
            _fail(path, f"holds source '{src_name}', not '{source}'")

        # ---- rows: group-major, then IF, then channel
        shape = (n_groups, n_if, n_chan)
        u_s, v_s, w_s, vis = _to_sky_convention(u_s, v_s, w_s, vis)
        u = (u_s[:, None, None] * row_freq).ravel()
        v = (v_s[:, None, None] * row_freq).ravel()
        w = (w_s[:, None, None] * row_freq).ravel()
        rows = dict(
            u=u,
            v=v,
            w=w,
            time=np.broadcast_to(mjd[:, None, None], shape).ravel(),
            frequency=row_freq.ravel(),
            station1=np.broadcast_to(st1[:, None, None], shape).ravel(),
            station2=np.broadcast_to(st2[:, None, None], shape).ravel(),
            vis=vis.ravel(),
            sigma=sigma.ravel(),
            channel=np.broadcast_to((np.arange(n_if)[:, None] * n_chan + np.arange(n_chan)[None, :]), shape).ravel(),
            integration=np.broadcast_to(inttim[:, None, None], shape).ravel(),
        )
        auto = rows["station1"] == rows["station2"]
        flag = ~good.ravel() | auto
        keep_rows = np.broadcast_to(group_keep[:, None, None], shape).ravel()
        if not np.all(keep_rows):
            rows = {k: val[keep_rows] for k, val in rows.items()}
            flag, auto = flag[keep_rows], auto[keep_rows]
        if rows["u"].size and np.all(flag):
            _fail(
                path,
                f"every visibility is flagged: all {flag.size} rows have a zero, negative or NaN "
                "weight" + (" or are autocorrelations" if auto.any() else ""),
                "check the file's weights; uvfit has nothing to fit",
            )
        if rows["u"].size == 0:
            _fail(path, "holds no visibilities (GCOUNT = 0)")

        meta = {
            "format": "uvfits",
            "path": os.path.abspath(path),
            "stokes_axis": [STOKES_CODES.get(int(c), str(int(c))) for c in codes],
            "stokes_i_from": stokes_name,
            "n_if": int(n_if),
            "n_channels_per_if": int(n_chan),
            "channel_width_hz": [float(x) for x in width[0].repeat(n_chan)],
            "n_autocorrelation_rows_flagged": int(auto.sum()),
            "orientation": ORIENTATION_NOTE,
            "telescope": str(header.get("TELESCOP", "")).strip(),
            "date_obs": str(header.get("DATE-OBS", "")).strip(),
        }
        if n_single > 0:
            meta["n_single_hand_rows"] = n_single
            meta["note_single_hand"] = (
                f"{n_single} rows had only one good parallel hand; that hand "
                "stands for Stokes I with its own sigma (exact only for an "
                "unpolarised source)"
            )
        if n_single < 0:
            meta["note_single_hand"] = (
                "the file holds one parallel hand only; it stands for Stokes I "
                "with its own sigma (exact only for an unpolarised source)"
            )
        if ncomplex == 2:
            meta["note_weights"] = "the file has no weights; sigma set to 1 Jy for every row"
        if missing:
            meta["note_stations"] = "stations missing from the antenna table, named by number: " + ", ".join(missing)
        if fq_hint:
            meta["note_axes"] = fq_hint
        stations = StationTable(names, np.array(xyz, float).reshape(len(names), 3) if names else None)
        return screen_rows(
            VisibilitySet(
                flag=flag, stations=stations, source=src_name, ra_deg=float(ra), dec_deg=float(dec), meta=meta, **rows
            ),
            path,
        )


def _phase_centre(header, axes):
    """RA, Dec (deg) of the phase centre: the RA/DEC axes' CRVAL, else OBSRA/OBSDEC."""
    ra = axes["RA"]["crval"] if "RA" in axes else None
    dec = axes["DEC"]["crval"] if "DEC" in axes else None
    if ra is None or dec is None or (ra == 0 and dec == 0 and "OBSRA" in header):
        ra = float(header.get("OBSRA", np.nan))
        dec = float(header.get("OBSDEC", np.nan))
    return ra, dec


def _read_sources(hdul):
    """{id: (name, ra_deg, dec_deg)} from a source table, if any."""
    out = {}
    for hdu in hdul[1:]:
        if str(hdu.header.get("EXTNAME", "")).strip().upper() != SOURCE_EXTNAME:
            continue
        ids = _table_column(hdu, "ID. NO.")
        names = _table_column(hdu, "SOURCE")
        ra = _table_column(hdu, "RAEPO")
        dec = _table_column(hdu, "DECEPO")
        if ids is None or names is None:
            continue
        for i, sid in enumerate(ids):
            nm = names[i].decode() if isinstance(names[i], bytes) else str(names[i])
            out[int(sid)] = (
                nm.strip(),
                float(ra[i]) if ra is not None else np.nan,
                float(dec[i]) if dec is not None else np.nan,
            )
    return out


# --------------------------------------------------------------------------- writer
def write_uvfits(vset, path, force=False):
    """Write a VisibilitySet as UVFITS (Stokes I), atomically; refuses to overwrite without ``force``.

    Layout: one group per (time, station1, station2, integration) in order of first appearance, one
    IF per distinct ``channel`` value (channels renumbered 0..n-1 in sorted order), one spectral
    channel per IF, one Stokes axis entry (I). Every channel must have one frequency; the first is
    the reference frequency and the others are IF offsets in the frequency table. A (group, IF)
    without a row is written with weight 0 and reads back as a flagged row; a flagged row is written
    with weight -1/sigma^2 so its sigma survives. Data and parameters are 64-bit floats, so a set
    read back is the same to rounding of u/f*f (about 1e-16 relative). The date is split over two
    DATE parameters (integer JD + 0.5 and the day fraction). The antenna table holds the station
    table (ANNAME, STABXYZ, NOSTA = position + 1); the frequency table the IF offsets and widths
    (widths from ``meta['channel_width_hz']`` where known, else NaN).
    """
    from astropy.io import fits

    from ..outputs import atomic_write_with

    if vset.n == 0:
        raise DataError("nothing to write: the visibility set is empty")
    path = os.fspath(path)
    chans, chan_index = np.unique(vset.channel, return_inverse=True)
    chan_index = chan_index.reshape(-1)
    f_of_chan = np.full(len(chans), np.nan)
    f_of_chan[chan_index] = vset.frequency
    spread = np.zeros(len(chans))
    np.maximum.at(spread, chan_index, np.abs(vset.frequency - f_of_chan[chan_index]))
    if np.any(spread > 0):
        raise DataError(
            "cannot write UVFITS: rows of one channel have different frequencies",
            "write the table format (.ecsv) instead, which keeps every row's frequency",
        )
    f_ref = f_of_chan[0]
    n_if = len(chans)

    names = list(vset.stations.names)
    for extra in sorted(set(vset.station1.tolist()) | set(vset.station2.tolist())):
        if extra not in names:
            names.append(extra)
    number = {nm: i + 1 for i, nm in enumerate(names)}
    a1 = _lookup(vset.station1, number)
    a2 = _lookup(vset.station2, number)

    u, v, w, vis = _to_sky_convention(vset.u, vset.v, vset.w, vset.vis)
    freq = vset.frequency
    u_s, v_s, w_s = u / freq, v / freq, w / freq
    scale = max(float(np.nanmax(np.abs(np.concatenate([u_s, v_s, w_s])))), 1e-300)
    quant = np.rint(np.stack([u_s, v_s, w_s], 1) / (1e-10 * scale))
    integ = np.where(np.isfinite(vset.integration), vset.integration, -1.0)
    keys = np.column_stack([vset.time, a1, a2, integ, quant])
    _, first, group_of_row = np.unique(keys, axis=0, return_index=True, return_inverse=True)
    group_of_row = group_of_row.reshape(-1)
    # number groups by first appearance so the file keeps the set's row order
    rank = np.empty(len(first), int)
    rank[np.argsort(first, kind="stable")] = np.arange(len(first))
    g = rank[group_of_row]
    n_groups = len(first)
    taken = np.zeros((n_groups, n_if), bool)
    if np.any(np.bincount(g * n_if + chan_index, minlength=n_groups * n_if) > 1):
        raise DataError(
            "cannot write UVFITS: two rows share time, baseline and channel", "write the table format (.ecsv) instead"
        )
    taken[g, chan_index] = True
    rep = np.empty(n_groups, int)
    rep[g] = np.arange(vset.n)  # any row of the group gives its parameters
    data = np.zeros((n_groups, 1, 1, n_if, 1, 1, 3), np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        weight = np.where(np.isfinite(vset.sigma) & (vset.sigma > 0), 1.0 / vset.sigma**2, 0.0)
    weight = np.where(vset.flag, -weight, weight)
    data[g, 0, 0, chan_index, 0, 0, 0] = vis.real
    data[g, 0, 0, chan_index, 0, 0, 1] = vis.imag
    data[g, 0, 0, chan_index, 0, 0, 2] = weight

    t = vset.time[rep]
    day = np.floor(t)
    jd1 = day + MJD_ZERO_JD
    jd2 = t - day
    bl = np.where(
        (a1[rep] > 255) | (a2[rep] > 255),
        _LARGE_BASELINE_FACTOR * a1[rep] + a2[rep] + _LARGE_BASELINE_OFFSET,
        256 * a1[rep] + a2[rep],
    ).astype(np.float64)
    parnames = ["UU---SIN", "VV---SIN", "WW---SIN", "BASELINE", "DATE", "DATE", "INTTIM"]
    pardata = [u_s[rep], v_s[rep], w_s[rep], bl, jd1, jd2, vset.integration[rep]]
    groups = fits.GroupData(data, parnames=parnames, pardata=pardata, bitpix=-64)
    hdu = fits.GroupsHDU(groups)
    h = hdu.header
    ra = vset.ra_deg if np.isfinite(vset.ra_deg) else 0.0
    dec = vset.dec_deg if np.isfinite(vset.dec_deg) else 0.0
    widths = np.full(n_if, np.nan)
    known = vset.meta.get("channel_width_hz") if isinstance(vset.meta, dict) else None
    if isinstance(known, (list, tuple)):
        for i, c in enumerate(chans):
            if 0 <= c < len(known) and known[c] is not None:
                widths[i] = float(known[c])
    for k, (ctype, crval, cdelt) in enumerate(
        [
            ("COMPLEX", 1.0, 1.0),
            ("STOKES", 1.0, 1.0),
            ("FREQ", f_ref, widths[0] if np.isfinite(widths[0]) else 1.0),
            ("IF", 1.0, 1.0),
            ("RA", ra, 1.0),
            ("DEC", dec, 1.0),
        ],
        start=2,
    ):
        h[f"CTYPE{k}"] = ctype
        h[f"CRVAL{k}"] = float(crval)
        h[f"CDELT{k}"] = float(cdelt)
        h[f"CRPIX{k}"] = 1.0
        h[f"CROTA{k}"] = 0.0
    h["OBJECT"] = str(vset.source)[:68]
    h["OBSRA"] = float(ra)
    h["OBSDEC"] = float(dec)
    h["EQUINOX"] = 2000.0
    h["BUNIT"] = "JY"
    from astropy.time import Time

    h["DATE-OBS"] = Time(float(np.floor(vset.time.min())), format="mjd", scale="utc").isot[:10]
    h["ORIGIN"] = "uvfit"
    h.add_comment("u, v, w in seconds at each IF's frequency; weights 1/sigma^2, negative = flagged")

    an_cols = [
        fits.Column(name="ANNAME", format=f"{max(8, max(len(n) for n in names))}A", array=np.array(names)),
        fits.Column(name="STABXYZ", format="3D", unit="METERS", array=_station_xyz(vset, names)),
        fits.Column(name="NOSTA", format="1J", array=np.arange(1, len(names) + 1)),
        fits.Column(name="MNTSTA", format="1J", array=np.zeros(len(names), int)),
        fits.Column(name="STAXOF", format="1E", unit="METERS", array=np.zeros(len(names))),
        fits.Column(name="POLTYA", format="1A", array=np.array(["R"] * len(names))),
        fits.Column(name="POLAA", format="1E", unit="DEGREES", array=np.zeros(len(names))),
        fits.Column(name="POLCALA", format="1E", array=np.zeros(len(names))),
        fits.Column(name="POLTYB", format="1A", array=np.array(["L"] * len(names))),
        fits.Column(name="POLAB", format="1E", unit="DEGREES", array=np.zeros(len(names))),
        fits.Column(name="POLCALB", format="1E", array=np.zeros(len(names))),
    ]
    an = fits.BinTableHDU.from_columns(an_cols)
    an.header["EXTNAME"] = ANTENNA_EXTNAME
    an.header["EXTVER"] = 1
    for k in ("ARRAYX", "ARRAYY", "ARRAYZ"):
        an.header[k] = 0.0
    an.header["FREQ"] = float(f_ref)
    an.header["TIMSYS"] = "UTC"
    an.header["NO_IF"] = n_if
    fmt = f"{n_if}"
    fq_cols = [
        fits.Column(name="FRQSEL", format="1J", array=np.array([1])),
        fits.Column(name="IF FREQ", format=fmt + "D", unit="HZ", array=(f_of_chan - f_ref)[None, :]),
        fits.Column(name="CH WIDTH", format=fmt + "E", unit="HZ", array=widths[None, :]),
        fits.Column(name="TOTAL BANDWIDTH", format=fmt + "E", unit="HZ", array=widths[None, :]),
        fits.Column(name="SIDEBAND", format=fmt + "J", array=np.ones((1, n_if), int)),
    ]
    fq = fits.BinTableHDU.from_columns(fq_cols)
    fq.header["EXTNAME"] = FREQUENCY_EXTNAME
    fq.header["EXTVER"] = 1
    fq.header["NO_IF"] = n_if
    hdul = fits.HDUList([hdu, an, fq])

    def _write(tmp):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            hdul.writeto(tmp, output_verify="silentfix")

    return atomic_write_with(path, _write, force=force)


def _lookup(names, number):
    uniq, inv = np.unique(np.asarray(names, dtype=str), return_inverse=True)
    return np.array([number[s] for s in uniq], int)[inv.reshape(-1)]


def _station_xyz(vset, names):
    out = np.full((len(names), 3), np.nan)
    for i, nm in enumerate(names):
        if nm in vset.stations.names:
            out[i] = vset.stations.xyz[vset.stations.index(nm)]
    return out
