"""Measurement Sets (casacore tables): reader, chunked reading, and the model-column writer.

The format is the Measurement Set definition version 2.0 (Kemball & Wieringa 2000): a directory holding the main table (one row per time and baseline) and sub-tables. The
reader uses, from the main table, ``UVW`` (m), ``TIME`` (s, MJD seconds, UTC), ``ANTENNA1/2``,
``FLAG`` (per channel and correlation), ``FLAG_ROW``, ``WEIGHT``/``SIGMA`` (per correlation) and
``WEIGHT_SPECTRUM``/``SIGMA_SPECTRUM`` (per channel and correlation) where present,
``SCAN_NUMBER``, ``FIELD_ID``, ``DATA_DESC_ID``, ``EXPOSURE`` (s), and one data column
(``CORRECTED_DATA`` by default when present, else ``DATA``; or ``MODEL_DATA``); and the
sub-tables ``ANTENNA`` (NAME, STATION, POSITION), ``FIELD`` (NAME, PHASE_DIR), ``SPECTRAL_WINDOW``
(NAME, CHAN_FREQ, CHAN_WIDTH), ``POLARIZATION`` (CORR_TYPE) and ``DATA_DESCRIPTION``
(SPECTRAL_WINDOW_ID, POLARIZATION_ID). It needs python-casacore (the optional extra ``ms``).

Rows: one per (main-table row, channel), row-major, like the UVFITS reader's (group, IF, channel);
the flattened channel index is (position of the spectral window among those read) * n_channels +
channel. Stokes I comes from the parallel hands (RR/LL or XX/YY) with the same code and sigma
propagation as for UVFITS (:func:`uvfit.data.uvfits._stokes_i`), FLAG and FLAG_ROW acting like a
non-positive UVFITS weight (the value is kept, the row flagged). The orientation (which way UVW
point, the phase sign) is mapped in ONE function beside the UVFITS one,
:func:`uvfit.data.uvfits._ms_to_sky_convention`.

Weights (sigma per real and imaginary part, Jy): weight = 1/sigma^2. ``CORRECTED_DATA`` and
``MODEL_DATA`` take ``WEIGHT_SPECTRUM`` where present, else ``WEIGHT`` (then the same weight for
every channel). ``DATA`` takes the same when the set has no ``CORRECTED_DATA`` (then the weights
describe ``DATA``); when a ``CORRECTED_DATA`` column exists beside it, ``DATA`` takes
``SIGMA_SPECTRUM``, else ``SIGMA`` (the calibrated weights belong to the corrected column and SIGMA
to the uncorrected one, a convention of calibrated sets: common practice). ``meta["ms_weights"]``
says which column was used.

Chunked reading: :func:`ms_layout` reads the sub-tables and the selection once; :func:`read_ms`
with ``rows=(start, stop)`` reads one range of main-table rows (python-casacore's
``getcol(name, startrow, nrow)``), :func:`iter_ms` yields one VisibilitySet per chunk of rows and
:func:`row_ranges` splits a table for workers, each of which reads its own rows.
"""

import os

import numpy as np

from ..errors import DataError, UvfitError
from .uvfits import MS_ORIENTATION_NOTE, _ms_to_sky_convention, _stokes_i
from .visset import StationTable, VisibilitySet, check_station_names

C_LIGHT = 299792458.0  # m/s (exact, SI)
SECONDS_PER_DAY = 86400.0  # TIME is MJD in seconds (MS definition v2.0; common practice)
SUBTABLES = ("ANTENNA", "FIELD", "SPECTRAL_WINDOW", "POLARIZATION", "DATA_DESCRIPTION")
DATA_COLUMNS = ("CORRECTED_DATA", "DATA", "MODEL_DATA")
MODEL_COLUMN = "MODEL_DATA"
DEFAULT_CHUNK_ROWS = 100_000
EXTRA_HINT = "install it with: pip install 'uvfit[ms]' (python-casacore)"

# CORR_TYPE codes of the Measurement Set (the Stokes enumeration of the definition, from memory):
# I Q U V = 1..4, RR RL LR LL = 5..8, XX XY YX YY = 9..12; mapped onto the FITS codes that
# uvfit.data.uvfits._stokes_i understands (I = 1, RR LL RL LR = -1..-4, XX YY XY YX = -5..-8).
CORR_NAMES = {1: "I", 2: "Q", 3: "U", 4: "V", 5: "RR", 6: "RL", 7: "LR", 8: "LL", 9: "XX", 10: "XY", 11: "YX", 12: "YY"}
_CORR_TO_FITS = {1: 1, 2: 2, 3: 3, 4: 4, 5: -1, 6: -3, 7: -4, 8: -2, 9: -5, 10: -7, 11: -8, 12: -6}
_TOTAL_INTENSITY = (1, 5, 8, 9, 12)  # correlations that carry I for an unpolarised model


# --------------------------------------------------------------------------- helpers
def casacore_tables():
    """The ``casacore.tables`` module, or a UvfitError naming the optional extra."""
    try:
        import casacore.tables as tables
    except ImportError:
        raise UvfitError(
            "reading or writing a Measurement Set needs python-casacore, which is not installed", EXTRA_HINT
        ) from None
    return tables


def is_ms(path):
    """True when ``path`` is a directory holding a casacore table (a ``table.dat`` inside)."""
    path = os.fspath(path)
    return os.path.isdir(path) and os.path.isfile(os.path.join(path, "table.dat"))


def _fail(path, problem, hint=None):
    raise DataError(f"{path}: {problem}", hint)


def _one_line(exc):
    text = " ".join(str(exc).split())
    return text[:300] or type(exc).__name__


def _open(path, readonly=True):
    tables = casacore_tables()
    try:
        return tables.table(os.fspath(path), readonly=readonly, ack=False)
    except Exception as exc:
        _fail(
            path,
            f"cannot be opened as a casacore table ({_one_line(exc)})",
            "check that the Measurement Set is complete",
        )


def _strings(values):
    return [str(x).strip() for x in np.asarray(values).ravel().tolist()]


def _parse_choice(value):
    """'0,2' / 'spw0' / 3 / ['a', 1] -> list of strings (names or ids)."""
    if value is None:
        return None
    if isinstance(value, (list, tuple)):
        parts = [str(v) for v in value]
    else:
        parts = str(value).split(",")
    parts = [p.strip() for p in parts if p.strip()]
    return parts or None


def _match(choices, items, what, path, option):
    """Ids of ``items`` (list of dicts with 'id', 'name') named by ``choices`` (names or ids)."""
    out = []
    listing = ", ".join(f"{it['id']} ({it['name'] or 'no name'})" for it in items)
    for c in choices:
        hit = [it["id"] for it in items if it["name"] == c]
        if not hit and c.lstrip("-").isdigit():
            hit = [it["id"] for it in items if it["id"] == int(c)]
        if not hit:
            _fail(
                path,
                f"has no {what} '{c}'; it holds {listing}",
                f"choose with {option} NAME or ID (one of those listed)",
            )
        out.extend(h for h in hit if h not in out)
    return out


# --------------------------------------------------------------------------- layout
class MsLayout:
    """What a Measurement Set holds and which part of it is read (sub-tables read once).

    Attributes: ``path``, ``n_rows`` (main table), ``columns``, ``column`` (the data column read),
    ``column_note``, ``weights`` (the weight column used, see the module docstring),
    ``antenna_names``, ``antenna_xyz`` (m), ``fields`` / ``spws`` (lists of dicts), ``field_id``,
    ``spw_ids`` (read, in order), ``dd_ids`` (data descriptions read), ``dd_channel_offset``
    ({dd id: first flattened channel}), ``dd_frequency`` ({dd id: channel frequencies, Hz}),
    ``corr_types``, ``n_channels``, ``telescope``.
    """

    def __init__(self, path, column=None, field=None, spw=None):
        self.path = path = os.fspath(path)
        for sub in SUBTABLES:
            if not os.path.isfile(os.path.join(path, sub, "table.dat")):
                _fail(
                    path,
                    f"has no {sub} sub-table (the folder {sub}/ with a table.dat is missing)",
                    "the Measurement Set is incomplete; copy it again with all its sub-tables",
                )
        main = _open(path)
        try:
            self.n_rows = int(main.nrows())
            self.columns = list(main.colnames())
            needed = ("UVW", "TIME", "ANTENNA1", "ANTENNA2", "FLAG", "DATA_DESC_ID")
            missing = [c for c in needed if c not in self.columns]
            if missing:
                _fail(
                    path,
                    "the main table has no column " + ", ".join(missing),
                    "this is not a Measurement Set uvfit can read",
                )
            field_of_row = (
                np.asarray(main.getcol("FIELD_ID"), int) if "FIELD_ID" in self.columns else np.zeros(self.n_rows, int)
            )
            dd_of_row = np.asarray(main.getcol("DATA_DESC_ID"), int)
            self._choose_column(column)
            self._choose_weights(main)
        finally:
            main.close()
        self._read_subtables()
        self._select(field, spw, field_of_row, dd_of_row)

    # ---- the data column and the weights
    def _choose_column(self, column):
        present = [c for c in DATA_COLUMNS if c in self.columns]
        if column is None:
            if "CORRECTED_DATA" in self.columns:
                self.column, self.column_note = "CORRECTED_DATA", "CORRECTED_DATA (the default: present)"
            elif "DATA" in self.columns:
                self.column, self.column_note = "DATA", "DATA (the default: no CORRECTED_DATA column)"
            else:
                _fail(
                    self.path,
                    "has no data column (neither CORRECTED_DATA nor DATA)",
                    "present: " + (", ".join(present) or "none") + "; choose one with `column`",
                )
            return
        name = str(column).strip().upper()
        if name not in DATA_COLUMNS:
            _fail(
                self.path,
                f"'{column}' is not a data column uvfit reads",
                "use `column=DATA`, CORRECTED_DATA or MODEL_DATA",
            )
        if name not in self.columns:
            _fail(
                self.path,
                f"has no {name} column; its data columns are " + (", ".join(present) or "none"),
                "choose one of those with `column`",
            )
        self.column, self.column_note = name, f"{name} (chosen)"

    def _choose_weights(self, main):
        def defined(col):
            if col not in self.columns or self.n_rows == 0:
                return False
            try:
                return bool(main.iscelldefined(col, 0))
            except Exception:
                return False

        if self.column == "DATA" and "CORRECTED_DATA" in self.columns:
            order = ("SIGMA_SPECTRUM", "SIGMA", "WEIGHT_SPECTRUM", "WEIGHT")
        else:
            order = ("WEIGHT_SPECTRUM", "WEIGHT", "SIGMA_SPECTRUM", "SIGMA")
        self.weights = next((c for c in order if defined(c)), None)

    # ---- sub-tables
    def _read_subtables(self):
        path = self.path
        with _open(os.path.join(path, "ANTENNA")) as ant:
            n_ant = int(ant.nrows())
            names = _strings(ant.getcol("NAME")) if n_ant and "NAME" in ant.colnames() else [""] * n_ant
            stations = _strings(ant.getcol("STATION")) if n_ant and "STATION" in ant.colnames() else [""] * n_ant
            xyz = (
                np.asarray(ant.getcol("POSITION"), float).reshape(n_ant, 3)
                if n_ant and "POSITION" in ant.colnames()
                else np.full((n_ant, 3), np.nan)
            )
        # An antenna without a name takes its station's name, else its row number (#k); a name
        # used twice gets the row number added, so every row of the table has its own name.
        out = []
        for k, (nm, st) in enumerate(zip(names, stations)):
            label = nm or st or f"#{k}"
            if label in out:
                label = f"{label}#{k}"
            out.append(label)
        check_station_names(out, path, "the ANTENNA table")
        self.antenna_names, self.antenna_xyz = out, xyz

        with _open(os.path.join(path, "FIELD")) as fld:
            n = int(fld.nrows())
            fnames = _strings(fld.getcol("NAME")) if n else []
            direction = (
                np.asarray(fld.getcol("PHASE_DIR"), float).reshape(n, -1, 2)[:, 0, :]
                if n and "PHASE_DIR" in fld.colnames()
                else np.full((n, 2), np.nan)
            )
        self.fields = [
            {
                "id": i,
                "name": fnames[i],
                "ra_deg": float(np.degrees(direction[i, 0]) % 360.0),
                "dec_deg": float(np.degrees(direction[i, 1])),
            }
            for i in range(n)
        ]

        with _open(os.path.join(path, "SPECTRAL_WINDOW")) as sw:
            n = int(sw.nrows())
            snames = _strings(sw.getcol("NAME")) if n and "NAME" in sw.colnames() else [""] * n
            freqs, widths = [], []
            for i in range(n):  # one small row per spectral window (shapes may differ)
                f = np.asarray(sw.getcell("CHAN_FREQ", i), float).ravel()
                wd = (
                    np.abs(np.asarray(sw.getcell("CHAN_WIDTH", i), float).ravel())
                    if "CHAN_WIDTH" in sw.colnames()
                    else np.full(f.size, np.nan)
                )
                freqs.append(f)
                widths.append(wd)
        self.spws = [
            {
                "id": i,
                "name": snames[i],
                "n_channels": int(freqs[i].size),
                "frequency_hz": freqs[i],
                "width_hz": widths[i],
            }
            for i in range(n)
        ]

        with _open(os.path.join(path, "POLARIZATION")) as pol:
            self.pol_corr = [
                [int(c) for c in np.asarray(pol.getcell("CORR_TYPE", i)).ravel()] for i in range(int(pol.nrows()))
            ]
        with _open(os.path.join(path, "DATA_DESCRIPTION")) as dd:
            n = int(dd.nrows())
            self.dd_spw = np.asarray(dd.getcol("SPECTRAL_WINDOW_ID"), int).reshape(n) if n else np.zeros(0, int)
            self.dd_pol = np.asarray(dd.getcol("POLARIZATION_ID"), int).reshape(n) if n else np.zeros(0, int)
        bad = [
            (i, s, p)
            for i, (s, p) in enumerate(zip(self.dd_spw, self.dd_pol))
            if not (0 <= s < len(self.spws) and 0 <= p < len(self.pol_corr))
        ]
        if bad:
            _fail(
                path,
                f"data description {bad[0][0]} names a spectral window or polarisation setup "
                "that its sub-table does not hold",
                "the Measurement Set is damaged",
            )
        self.telescope = ""
        obs = os.path.join(path, "OBSERVATION")
        if os.path.isfile(os.path.join(obs, "table.dat")):
            try:
                with _open(obs) as ob:
                    if ob.nrows() and "TELESCOPE_NAME" in ob.colnames():
                        self.telescope = _strings(ob.getcol("TELESCOPE_NAME"))[0]
            except UvfitError:
                pass

    # ---- field and spectral-window selection
    def _select(self, field, spw, field_of_row, dd_of_row):
        path = self.path
        if self.n_rows == 0:
            _fail(path, "holds no rows (the main table is empty)")
        if np.any((dd_of_row < 0) | (dd_of_row >= len(self.dd_spw))):
            _fail(path, "a row's DATA_DESC_ID has no row in the DATA_DESCRIPTION table", "the set is damaged")
        present_fields = np.unique(field_of_row)
        if np.any((present_fields < 0) | (present_fields >= len(self.fields))):
            _fail(path, "a row's FIELD_ID has no row in the FIELD table", "the set is damaged")
        counts = np.bincount(field_of_row, minlength=len(self.fields))
        for f in self.fields:
            f["n_rows"] = int(counts[f["id"]])
        listed = [f for f in self.fields if f["n_rows"] > 0]
        choice = _parse_choice(field)
        if choice is None:
            if len(listed) > 1:
                _fail(
                    path,
                    "holds several fields: " + ", ".join(f"{f['id']} ({f['name']})" for f in listed),
                    "choose one with `field=NAME` or ID",
                )
            self.field_id = int(listed[0]["id"])
        else:
            ids = _match(choice, self.fields, "field", path, "`field`")
            if len(ids) > 1:
                _fail(
                    path,
                    "`field` names several fields (" + ", ".join(str(i) for i in ids) + "); "
                    "uvfit fits one field at a time",
                    "give one field NAME or ID",
                )
            self.field_id = int(ids[0])
            if counts[self.field_id] == 0:
                _fail(
                    path,
                    f"field {self.field_id} ({self.fields[self.field_id]['name']}) has no rows",
                    "choose a field that has data: " + ", ".join(f"{f['id']} ({f['name']})" for f in listed),
                )
        in_field = field_of_row == self.field_id
        dds_present = np.unique(dd_of_row[in_field])
        spw_present = sorted(set(int(self.dd_spw[d]) for d in dds_present))
        for s in self.spws:
            s["in_field"] = s["id"] in spw_present
        choice = _parse_choice(spw)
        if choice is None:
            spw_ids = spw_present
        else:
            spw_ids = _match(choice, self.spws, "spectral window", path, "`spw`")
            empty = [s for s in spw_ids if s not in spw_present]
            if empty:
                _fail(
                    path,
                    f"spectral window {empty[0]} has no rows in field {self.field_id}",
                    "spectral windows with data: "
                    + ", ".join(f"{s} ({self.spws[s]['name'] or 'no name'})" for s in spw_present),
                )
        dd_ids = [int(d) for d in dds_present if int(self.dd_spw[d]) in spw_ids]

        def describe(d):
            s = self.spws[int(self.dd_spw[d])]
            corr = " ".join(CORR_NAMES.get(c, str(c)) for c in self.pol_corr[int(self.dd_pol[d])])
            return f"spw {s['id']} ({s['name'] or 'no name'}, {s['n_channels']} channels, {corr})"

        setups = {tuple(self.pol_corr[int(self.dd_pol[d])]) for d in dd_ids}
        if len(setups) > 1:
            _fail(
                path,
                "mixes polarisation setups: " + "; ".join(describe(d) for d in dd_ids),
                "choose spectral windows of one setup with `spw`",
            )
        n_chan = {self.spws[int(self.dd_spw[d])]["n_channels"] for d in dd_ids}
        if len(n_chan) > 1:
            _fail(
                path,
                "has spectral windows of different channel counts: " + "; ".join(describe(d) for d in dd_ids),
                "choose spectral windows with `spw`",
            )
        if len(dd_ids) != len(spw_ids):
            _fail(
                path,
                "a spectral window appears under several data descriptions: " + "; ".join(describe(d) for d in dd_ids),
                "choose one with `spw`",
            )
        self.spw_ids = [int(s) for s in spw_ids]
        self.dd_ids = dd_ids
        self.n_channels = int(n_chan.pop())
        self.corr_types = list(setups.pop())
        position = {s: k for k, s in enumerate(self.spw_ids)}
        self.dd_channel_offset = {d: position[int(self.dd_spw[d])] * self.n_channels for d in dd_ids}
        self.dd_frequency = {d: self.spws[int(self.dd_spw[d])]["frequency_hz"] for d in dd_ids}
        freq = np.concatenate([self.spws[s]["frequency_hz"] for s in self.spw_ids])
        if not np.all(np.isfinite(freq)) or np.any(freq <= 0):
            _fail(path, "a spectral window has a non-positive or undefined channel frequency")
        self.channel_width_hz = np.concatenate([self.spws[s]["width_hz"] for s in self.spw_ids])

    # ---- reports
    def describe(self):
        """JSON-ready facts for ``vset.meta`` (and ``uvfit info``)."""
        return {
            "ms_column": self.column,
            "ms_column_note": self.column_note,
            "ms_weights": self.weights or "none (sigma 1 for every row)",
            "ms_fields": [{k: f[k] for k in ("id", "name", "ra_deg", "dec_deg", "n_rows")} for f in self.fields],
            "ms_field": int(self.field_id),
            "ms_spws": [
                {
                    "id": s["id"],
                    "name": s["name"],
                    "n_channels": s["n_channels"],
                    "frequency_min_hz": float(np.min(s["frequency_hz"])) if s["n_channels"] else None,
                    "frequency_max_hz": float(np.max(s["frequency_hz"])) if s["n_channels"] else None,
                    "in_field": bool(s.get("in_field")),
                }
                for s in self.spws
            ],
            "ms_spws_read": list(self.spw_ids),
            "ms_antennas": list(self.antenna_names),
            "ms_rows_total": int(self.n_rows),
        }


def ms_layout(path, column=None, field=None, spw=None):
    """The :class:`MsLayout` of a Measurement Set (sub-tables and selection, read once)."""
    return _guarded(path, lambda: MsLayout(path, column=column, field=field, spw=spw))


def _guarded(path, work):
    try:
        with np.errstate(all="ignore"):
            return work()
    except UvfitError:
        raise
    except MemoryError:
        _fail(path, "the rows asked for do not fit in memory", "read it in chunks (uvfit.data.ms.iter_ms)")
    except Exception as exc:  # casacore raises RuntimeError for damaged tables
        _fail(
            path,
            f"not a readable Measurement Set ({type(exc).__name__}: {_one_line(exc)})",
            "check that the Measurement Set is complete",
        )


# --------------------------------------------------------------------------- rows
def _main_columns(main, layout, start, nrow):
    """The main-table columns of rows start .. start + nrow - 1, restricted to the selection."""

    def col(name):
        return main.getcol(name, startrow=start, nrow=nrow)

    names = layout.columns
    field = np.asarray(col("FIELD_ID"), int) if "FIELD_ID" in names else np.zeros(nrow, int)
    dd = np.asarray(col("DATA_DESC_ID"), int)
    keep = (field == layout.field_id) & np.isin(dd, layout.dd_ids)
    out = {"keep": keep, "dd": dd[keep]}
    if not keep.any():
        return out
    sel = np.flatnonzero(keep)
    out["uvw"] = np.asarray(col("UVW"), float)[sel]
    out["time"] = np.asarray(col("TIME"), float)[sel]
    out["a1"] = np.asarray(col("ANTENNA1"), int)[sel]
    out["a2"] = np.asarray(col("ANTENNA2"), int)[sel]
    out["scan"] = np.asarray(col("SCAN_NUMBER"), int)[sel] if "SCAN_NUMBER" in names else np.zeros(sel.size, int)
    expo = "EXPOSURE" if "EXPOSURE" in names else ("INTERVAL" if "INTERVAL" in names else None)
    out["integration"] = np.asarray(col(expo), float)[sel] if expo else np.full(sel.size, np.nan)
    out["flag_row"] = np.asarray(col("FLAG_ROW"), bool)[sel] if "FLAG_ROW" in names else np.zeros(sel.size, bool)
    out["flag"] = np.asarray(col("FLAG"), bool)[sel]
    out["data"] = np.asarray(col(layout.column))[sel].astype(np.complex128)
    shape = out["data"].shape
    if out["flag"].shape != shape:
        raise DataError(
            f"{layout.path}: FLAG has shape {out['flag'].shape[1:]} per row but {layout.column} has {shape[1:]}",
            "the Measurement Set is damaged",
        )
    if layout.weights is None:
        weight = np.ones(shape)
    else:
        raw = np.asarray(col(layout.weights), float)[sel]
        if raw.ndim == 2:  # per correlation: the same for every channel
            raw = np.broadcast_to(raw[:, None, :], shape)
        with np.errstate(divide="ignore", invalid="ignore"):
            weight = 1.0 / raw**2 if layout.weights.startswith("SIGMA") else np.array(raw, float)
        if weight.shape != shape:
            raise DataError(
                f"{layout.path}: {layout.weights} has shape {weight.shape[1:]} per row "
                f"but {layout.column} has {shape[1:]}",
                "the Measurement Set is damaged",
            )
    out["weight"] = weight
    return out


def _rows_to_vset(layout, cols, start, stop):
    """One VisibilitySet from the selected main-table rows (vectorised over rows and channels)."""
    path = layout.path
    n_chan = layout.n_channels
    dd = cols["dd"]
    flagged = cols["flag"] | cols["flag_row"][:, None, None]
    # a flagged value acts like a non-positive UVFITS weight: kept, with its sigma, but flagged
    weight = np.where(flagged, -np.abs(cols["weight"]), cols["weight"])
    codes = [_CORR_TO_FITS.get(c, 0) for c in layout.corr_types]
    vis, sigma, good, stokes_name, n_single = _stokes_i(cols["data"], weight, codes, path)

    # frequency and flattened channel of every (row, channel)
    dd_list = np.asarray(layout.dd_ids, int)
    order = np.argsort(dd_list)
    position = order[np.searchsorted(dd_list[order], dd)]
    freq_table = np.stack([layout.dd_frequency[d] for d in dd_list])  # (n_dd, n_chan)
    offset = np.array([layout.dd_channel_offset[d] for d in dd_list], int)
    row_freq = freq_table[position]  # (n, n_chan)
    channel = offset[position][:, None] + np.arange(n_chan)[None, :]

    uvw = cols["uvw"]
    u_m, v_m, w_m, vis = _ms_to_sky_convention(uvw[:, 0], uvw[:, 1], uvw[:, 2], vis)
    scale = row_freq / C_LIGHT
    n = dd.size
    shape = (n, n_chan)
    names = np.asarray(layout.antenna_names, dtype=str)
    if np.any((cols["a1"] < 0) | (cols["a1"] >= names.size) | (cols["a2"] < 0) | (cols["a2"] >= names.size)):
        _fail(path, "a row's ANTENNA1 or ANTENNA2 has no row in the ANTENNA table", "the set is damaged")
    s1, s2 = names[cols["a1"]], names[cols["a2"]]
    auto = np.broadcast_to((cols["a1"] == cols["a2"])[:, None], shape).ravel()
    flag = ~good.ravel() | auto
    rows = dict(
        u=(u_m[:, None] * scale).ravel(),
        v=(v_m[:, None] * scale).ravel(),
        w=(w_m[:, None] * scale).ravel(),
        time=np.broadcast_to((cols["time"] / SECONDS_PER_DAY)[:, None], shape).ravel(),
        frequency=row_freq.ravel(),
        station1=np.broadcast_to(s1[:, None], shape).ravel(),
        station2=np.broadcast_to(s2[:, None], shape).ravel(),
        vis=vis.ravel(),
        sigma=sigma.ravel(),
        flag=flag,
        channel=channel.ravel(),
        integration=np.broadcast_to(cols["integration"][:, None], shape).ravel(),
        scan=np.broadcast_to(cols["scan"][:, None], shape).ravel(),
    )
    fld = layout.fields[layout.field_id]
    meta = {
        "format": "ms",
        "path": os.path.abspath(path),
        "stokes_axis": [CORR_NAMES.get(c, str(c)) for c in layout.corr_types],
        "stokes_i_from": stokes_name,
        "n_if": len(layout.spw_ids),
        "n_channels_per_if": int(n_chan),
        "channel_width_hz": [float(x) for x in layout.channel_width_hz],
        "n_autocorrelation_rows_flagged": int(auto.sum()),
        "orientation": MS_ORIENTATION_NOTE,
        "telescope": layout.telescope,
        "ms_rows": [int(start), int(stop)],
    }
    meta.update(layout.describe())
    if n_single > 0:
        meta["n_single_hand_rows"] = n_single
        meta["note_single_hand"] = (
            f"{n_single} rows had only one good parallel hand; that hand stands "
            "for Stokes I with its own sigma (exact only for an unpolarised source)"
        )
    if n_single < 0:
        meta["note_single_hand"] = (
            "the set holds one parallel hand only; it stands for Stokes I with its "
            "own sigma (exact only for an unpolarised source)"
        )
    if layout.weights is None:
        meta["note_weights"] = "the set has no WEIGHT or SIGMA column; sigma set to 1 for every row"
    stations = StationTable(layout.antenna_names, layout.antenna_xyz)
    return VisibilitySet(
        stations=stations,
        source=fld["name"] or "unknown",
        ra_deg=fld["ra_deg"],
        dec_deg=fld["dec_deg"],
        meta=meta,
        **rows,
    )


def _read_range(layout, main, start, stop):
    cols = _main_columns(main, layout, start, stop - start)
    if not cols["keep"].any():
        return None
    return _rows_to_vset(layout, cols, start, stop)


def _check_range(layout, rows):
    if rows is None:
        return 0, layout.n_rows
    try:
        start, stop = (int(x) for x in rows)
    except (TypeError, ValueError):
        raise UvfitError(f"rows must be a (start, stop) pair of row numbers, not {rows!r}") from None
    if not 0 <= start < stop <= layout.n_rows:
        raise UvfitError(
            f"rows ({start}, {stop}) are outside the main table's {layout.n_rows} rows",
            "give 0 <= start < stop <= the number of rows",
        )
    return start, stop


def read_ms(path, column=None, field=None, spw=None, rows=None, layout=None):
    """Read a Measurement Set into a :class:`VisibilitySet` of Stokes I rows.

    ``column``: DATA, CORRECTED_DATA or MODEL_DATA (default CORRECTED_DATA when present, else
    DATA; ``meta["ms_column_note"]`` says which and why). ``field``: the field's name or id
    (needed when the set holds several). ``spw``: spectral windows by name or id ("0,2" or a list;
    default every one with data in the field; they must share one polarisation setup and channel
    count). ``rows``: (start, stop) main-table rows to read (default all), so that a worker reads
    only its own rows; ``layout``: an :class:`MsLayout` already read (saves reading the
    sub-tables again). Every row is returned, flagged ones included. Raises DataError for anything
    that is not a usable Measurement Set (a whole-set read where every row is flagged included).
    """
    path = os.fspath(path)

    def work():
        lay = layout or MsLayout(path, column=column, field=field, spw=spw)
        start, stop = _check_range(lay, rows)
        main = _open(path)
        try:
            vset = _read_range(lay, main, start, stop)
        finally:
            main.close()
        fld = lay.fields[lay.field_id]
        if vset is None:
            _fail(
                path,
                f"rows {start} to {stop} hold no data of field {lay.field_id} ({fld['name']}) "
                f"in spectral windows {', '.join(str(s) for s in lay.spw_ids)}",
            )
        if rows is None and np.all(vset.flag):
            _fail(
                path,
                f"every visibility is flagged: all {vset.n} rows (main-table rows x channels) "
                f"of {lay.column} have FLAG or FLAG_ROW set, a zero weight, or are "
                "autocorrelations",
                "check the set's flags; uvfit has nothing to fit",
            )
        return vset

    return _guarded(path, work)


def row_ranges(n_rows, n_parts):
    """Split ``n_rows`` main-table rows into at most ``n_parts`` contiguous (start, stop) ranges of
    nearly equal size: one per worker, each given to :func:`read_ms` as ``rows``."""
    n_rows, n_parts = int(n_rows), int(n_parts)
    if n_parts < 1:
        raise UvfitError(f"the number of parts must be at least 1, not {n_parts}")
    edges = np.linspace(0, n_rows, min(n_parts, max(n_rows, 1)) + 1).round().astype(int)
    return [(int(a), int(b)) for a, b in zip(edges[:-1], edges[1:]) if b > a]


def iter_ms(path, chunk_rows=DEFAULT_CHUNK_ROWS, column=None, field=None, spw=None, rows=None):
    """Yield one :class:`VisibilitySet` per chunk of ``chunk_rows`` main-table rows (within
    ``rows``, default all), each read with ``getcol(startrow, nrow)``; chunks without a selected
    row are skipped. Options as for :func:`read_ms`; the sub-tables are read once. Memory: one
    chunk at a time."""
    path = os.fspath(path)
    chunk_rows = int(chunk_rows)
    if chunk_rows < 1:
        raise UvfitError(f"chunk_rows must be at least 1, not {chunk_rows}")
    layout = ms_layout(path, column=column, field=field, spw=spw)
    start, stop = _check_range(layout, rows)
    main = _guarded(path, lambda: _open(path))
    try:
        for a in range(start, stop, chunk_rows):
            b = min(a + chunk_rows, stop)
            vset = _guarded(path, lambda a=a, b=b: _read_range(layout, main, a, b))
            if vset is not None:
                yield vset
    finally:
        main.close()


def count_rows(path):
    """Number of rows of a Measurement Set's main table."""

    def work():
        main = _open(path)
        try:
            return int(main.nrows())
        finally:
            main.close()

    return _guarded(os.fspath(path), work)


# --------------------------------------------------------------------------- model column
def check_model_column_writable(path):
    """Raise UvfitError unless ``path`` is a Measurement Set whose MODEL_DATA may be written."""
    path = os.fspath(path)
    if not is_ms(path):
        raise UvfitError(
            f"{path}: writing a model column needs a Measurement Set (a casacore table folder)",
            "drop `write_model_column`, or give the Measurement Set",
        )
    casacore_tables()
    targets = [
        p for p in (path, os.path.join(path, "table.dat"), os.path.join(path, "table.lock")) if os.path.exists(p)
    ]
    # not writable for this user, or marked read-only for everyone (which even root should respect)
    if any(not os.access(p, os.W_OK) or not os.stat(p).st_mode & 0o222 for p in targets):
        raise UvfitError(
            f"{path}: the Measurement Set is read-only, so {MODEL_COLUMN} cannot be written",
            "copy it somewhere writable (or make it writable) and run again",
        )


def write_model_column(path, model, field=None, spw=None, chunk_rows=DEFAULT_CHUNK_ROWS):
    """Write ``model``'s visibilities into the MODEL_DATA column of a Measurement Set.

    MODEL_DATA is created (with the DATA column's description) when absent; DATA and
    CORRECTED_DATA are never touched. The rows of the chosen field and spectral windows (as for
    :func:`read_ms`) get the model: I in every parallel-hand correlation (RR, LL, XX, YY, or I),
    0 in the others (an unpolarised model); the model is evaluated at each row's (u, v) from its
    UVW through :func:`uvfit.data.uvfits._ms_to_sky_convention` and each channel's frequency, and
    mapped back through the same function. Other rows keep their MODEL_DATA (zero when created).
    Works in chunks of ``chunk_rows`` rows (getcol/putcol with startrow, nrow). Returns
    ``{"column", "created", "rows_written", "rows_total"}``.
    """
    path = os.fspath(path)
    check_model_column_writable(path)
    layout = ms_layout(path, column="DATA" if "DATA" in _columns(path) else None, field=field, spw=spw)
    tables = casacore_tables()
    try:
        main = tables.table(path, readonly=False, ack=False)
    except Exception as exc:
        raise UvfitError(
            f"{path}: cannot be opened for writing ({_one_line(exc)})",
            "check that no other program holds it and that it is writable",
        ) from None

    def work():
        created = MODEL_COLUMN not in main.colnames()
        if created:
            desc = main.getcoldesc("DATA")
            desc = {k: v for k, v in desc.items() if k not in ("keywords", "comment")}
            desc["comment"] = "model visibilities"
            main.addcols(tables.maketabdesc(tables.makecoldesc(MODEL_COLUMN, desc)))
        parallel = np.array([c in _TOTAL_INTENSITY for c in layout.corr_types])
        written = 0
        for a in range(0, layout.n_rows, int(chunk_rows)):
            nrow = min(int(chunk_rows), layout.n_rows - a)
            field_of = (
                np.asarray(main.getcol("FIELD_ID", a, nrow), int)
                if "FIELD_ID" in layout.columns
                else np.zeros(nrow, int)
            )
            dd = np.asarray(main.getcol("DATA_DESC_ID", a, nrow), int)
            keep = (field_of == layout.field_id) & np.isin(dd, layout.dd_ids)
            if created:
                _fill_zeros(main, layout, a, nrow, dd, keep)
            if not keep.any():
                continue
            sel = np.flatnonzero(keep)
            uvw = np.asarray(main.getcol("UVW", a, nrow), float)[sel]
            dd_list = np.asarray(layout.dd_ids, int)
            order = np.argsort(dd_list)
            position = order[np.searchsorted(dd_list[order], dd[sel])]
            freq = np.stack([layout.dd_frequency[d] for d in dd_list])[position]  # (n, n_chan)
            u_m, v_m, w_m, _ = _ms_to_sky_convention(uvw[:, 0], uvw[:, 1], uvw[:, 2], None)
            scale = freq / C_LIGHT
            vis = np.asarray(
                model.visibilities(
                    (u_m[:, None] * scale).ravel(), (v_m[:, None] * scale).ravel(), frequency=freq.ravel()
                ),
                complex,
            ).reshape(freq.shape)
            _, _, _, vis = _ms_to_sky_convention(u_m, v_m, w_m, vis)
            cells = np.where(parallel[None, None, :], vis[:, :, None], 0.0).astype(np.complex64)
            # write runs of consecutive selected rows (one putcol per run, not per row)
            breaks = np.flatnonzero(np.diff(sel) != 1) + 1
            for lo, hi in zip(np.r_[0, breaks], np.r_[breaks, sel.size]):
                main.putcol(
                    MODEL_COLUMN, np.ascontiguousarray(cells[lo:hi]), startrow=a + int(sel[lo]), nrow=int(hi - lo)
                )
            written += sel.size
        main.flush()
        return {
            "column": MODEL_COLUMN,
            "created": bool(created),
            "rows_written": int(written),
            "rows_total": int(layout.n_rows),
        }

    try:
        return _guarded(path, work)
    finally:
        main.close()


def _columns(path):
    main = _open(path)
    try:
        return list(main.colnames())
    finally:
        main.close()


def _fill_zeros(main, layout, start, nrow, dd, keep):
    """Zero MODEL_DATA cells of a new column for the rows the model does not cover (runs of rows
    with one data description share a cell shape)."""
    rows = np.flatnonzero(~keep)
    if rows.size == 0:
        return
    n_corr = {d: len(layout.pol_corr[int(layout.dd_pol[d])]) for d in np.unique(dd[rows]).tolist()}
    n_chan = {d: layout.spws[int(layout.dd_spw[d])]["n_channels"] for d in n_corr}
    key = dd[rows]
    breaks = np.flatnonzero((np.diff(rows) != 1) | (np.diff(key) != 0)) + 1
    for lo, hi in zip(np.r_[0, breaks], np.r_[breaks, rows.size]):
        d = int(key[lo])
        cells = np.zeros((int(hi - lo), n_chan[d], n_corr[d]), np.complex64)
        main.putcol(MODEL_COLUMN, cells, startrow=start + int(rows[lo]), nrow=int(hi - lo))


def add_ms_summary(vset, s):
    """Measurement Set facts for ``uvfit info``: data column, fields, spectral windows, antennas,
    scans (from the rows' scan numbers, unflagged rows)."""
    for key in (
        "ms_column",
        "ms_column_note",
        "ms_weights",
        "ms_fields",
        "ms_field",
        "ms_spws",
        "ms_spws_read",
        "ms_antennas",
        "ms_rows_total",
    ):
        if key in vset.meta:
            s[key] = vset.meta[key]
    good = vset.subset(~vset.flag)
    scans = []
    if good.n:
        numbers, inverse = np.unique(good.scan, return_inverse=True)
        inverse = inverse.reshape(-1)
        start = np.full(numbers.size, np.inf)
        end = np.full(numbers.size, -np.inf)
        np.minimum.at(start, inverse, good.time)
        np.maximum.at(end, inverse, good.time)
        count = np.bincount(inverse, minlength=numbers.size)
        scans = [
            {
                "scan": int(n),
                "start_mjd": float(a),
                "end_mjd": float(b),
                "duration_s": float((b - a) * 86400.0),
                "n_visibilities": int(c),
            }
            for n, a, b, c in zip(numbers, start, end, count)
        ]
    s["scans"] = scans
