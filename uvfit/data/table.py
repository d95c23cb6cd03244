"""The project's own visibility table: ECSV (astropy.table), one row per visibility.

Columns (README "Data formats"): time_mjd (d, UTC), station1, station2, u_lambda, v_lambda,
w_lambda (wavelengths), frequency_hz (Hz), vis_re_jy, vis_im_jy, sigma_jy (Jy), flag (bool),
channel (int), integration_s (s), scan (int, -1 where the source file had none). Table metadata:
format name and version, source, ra_deg, dec_deg,
station_names, station_xyz_m, and the set's own ``meta`` (as JSON-like values).

Floating-point columns are written with full double precision, so a round trip is exact.
"""

import json
import os
import re
import warnings

import numpy as np

from ..errors import DataError, UvfitError
from ..outputs import _to_builtin, atomic_write_with
from .visset import StationTable, VisibilitySet, check_station_names, screen_rows

FORMAT_NAME = "uvfit visibility table"
FORMAT_VERSION = 1

# (column, VisibilitySet attribute, unit, description)
COLUMNS = [
    ("time_mjd", "time", "d", "time of the visibility, MJD (UTC)"),
    ("station1", "station1", None, "first station of the baseline"),
    ("station2", "station2", None, "second station of the baseline"),
    ("u_lambda", "u", None, "u coordinate of the baseline, wavelengths"),
    ("v_lambda", "v", None, "v coordinate of the baseline, wavelengths"),
    ("w_lambda", "w", None, "w coordinate of the baseline, wavelengths"),
    ("frequency_hz", "frequency", "Hz", "frequency of the row"),
    ("vis_re_jy", None, "Jy", "real part of the visibility"),
    ("vis_im_jy", None, "Jy", "imaginary part of the visibility"),
    ("sigma_jy", "sigma", "Jy", "1-sigma error of the real and of the imaginary part each"),
    ("flag", "flag", None, "true where the row must not be used"),
    ("channel", "channel", None, "flattened channel index (IF * n_channels + channel)"),
    ("integration_s", "integration", "s", "integration time of the row"),
    ("scan", "scan", None, "scan number of the row as its file gave it; -1 where none"),
]
REQUIRED = (
    "time_mjd",
    "station1",
    "station2",
    "u_lambda",
    "v_lambda",
    "frequency_hz",
    "vis_re_jy",
    "vis_im_jy",
    "sigma_jy",
)


def write_table(vset, path, force=False):
    """Write ``vset`` as an ECSV table, atomically; refuses to overwrite without ``force``."""
    from astropy.table import Column, Table

    table = Table()
    for name, attr, unit, desc in COLUMNS:
        if name == "vis_re_jy":
            data = vset.vis.real
        elif name == "vis_im_jy":
            data = vset.vis.imag
        else:
            data = getattr(vset, attr)
        table[name] = Column(np.asarray(data), unit=unit, description=desc)
    table.meta["format"] = FORMAT_NAME
    table.meta["format_version"] = FORMAT_VERSION
    table.meta["source"] = str(vset.source)
    table.meta["ra_deg"] = _num(vset.ra_deg)
    table.meta["dec_deg"] = _num(vset.dec_deg)
    table.meta["station_names"] = list(vset.stations.names)
    table.meta["station_xyz_m"] = [[_num(x) for x in row] for row in np.asarray(vset.stations.xyz)]
    # the set's meta as JSON text: keeps any nesting exactly and never trips the YAML writer
    table.meta["meta_json"] = json.dumps(_to_builtin(vset.meta))

    def _write(tmp):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            table.write(tmp, format="ascii.ecsv", overwrite=True)

    return atomic_write_with(os.fspath(path), _write, force=force)


def _num(x):
    """A float for the YAML header: 'nan' stays a float."""
    return float(x)


MAX_HEADER_BYTES = 4 * 1024 * 1024
#: longest data line accepted (bytes): a row holds about a dozen numbers and two station names of
#: at most MAX_STATION_NAME characters. A string column is stored as wide as its longest entry on
#: every row, so one long line would cost its length on every row in memory.
MAX_LINE_BYTES = 1024
_YAML_NODE_REFERENCE = re.compile(r"(^|[\s\[{,:-])[&*][A-Za-z0-9_.-]")


def _check_header(path):
    """Refuse a YAML header that could expand without bound before the parser sees it.

    The header (the leading '#' lines) is capped at MAX_HEADER_BYTES, and YAML anchors and aliases
    ('&name', '*name') are refused: a small header of nested aliases expands to gigabytes.
    The project's writer never makes either. Returns (bytes, lines) of the header.
    """
    size = lines = 0
    with open(path, "rb") as handle:
        for number, line in enumerate(handle, start=1):
            if not line.startswith(b"#"):
                break
            size += len(line)
            lines = number
            if size > MAX_HEADER_BYTES:
                raise DataError(
                    f"{path}: the ECSV header is larger than {MAX_HEADER_BYTES} bytes",
                    "a visibility table's header holds a few columns and station names",
                )
            text = line[1:].decode("utf-8", errors="replace")
            if "'" not in text and '"' not in text and _YAML_NODE_REFERENCE.search(text):
                raise DataError(
                    f"{path}: the ECSV header uses a YAML anchor or alias (line {number})",
                    "uvfit refuses them (they can expand without bound); write the values out",
                )
    return size, lines


def _check_lines(path, start, first_line):
    """Refuse a data line longer than MAX_LINE_BYTES, reading the file in blocks from byte
    ``start`` (the end of the header; its line number is ``first_line``)."""
    block = 1 << 20
    partial = 0  # bytes of the line running over from the previous block
    lines = 0
    with open(path, "rb") as handle:
        handle.seek(start)
        while True:
            chunk = handle.read(block)
            if not chunk:
                break
            ends = np.flatnonzero(np.frombuffer(chunk, np.uint8) == 10)
            lengths = np.diff(ends, prepend=-1) - 1
            if lengths.size:
                lengths[0] += partial
                partial = len(chunk) - int(ends[-1]) - 1
            else:
                partial += len(chunk)
            if lengths.size and lengths.max() > MAX_LINE_BYTES:
                k = int(np.argmax(lengths > MAX_LINE_BYTES))
                _long_line(path, first_line + lines + k + 1, int(lengths[k]))
            if partial > MAX_LINE_BYTES:
                _long_line(path, first_line + lines + lengths.size + 1, partial)
            lines += lengths.size


def _long_line(path, number, length):
    raise DataError(
        f"{path}: line {number} of the ECSV table is {length} bytes long (at most {MAX_LINE_BYTES} accepted)",
        "a row holds a few numbers and two station names; check the file",
    )


def read_table(path):
    """Read an ECSV visibility table written by :func:`write_table` (or by hand, same columns)."""
    from astropy.table import Table

    path = os.fspath(path)
    header_bytes, header_lines = _check_header(path)
    _check_lines(path, header_bytes, header_lines)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            table = Table.read(path, format="ascii.ecsv")
    except UvfitError:
        raise
    except Exception as exc:
        first = (str(exc).strip().splitlines() or [""])[0]
        raise DataError(
            f"{path}: not a readable ECSV visibility table ({type(exc).__name__}: {first})",
            "check the file; see README 'Data formats' for the columns",
        ) from None
    missing = [c for c in REQUIRED if c not in table.colnames]
    if missing:
        raise DataError(
            f"{path}: the table lacks the column(s) {', '.join(missing)}", "required columns: " + ", ".join(REQUIRED)
        )

    def col(name, default=None):
        if name not in table.colnames:
            return default
        c = table[name]
        if hasattr(c, "mask") and np.any(c.mask):
            raise DataError(f"{path}: column '{name}' has empty entries", "fill them (use nan for an unknown number)")
        return np.asarray(c)

    meta = table.meta
    try:
        names = meta.get("station_names")
        stations = None
        if names:
            xyz = meta.get("station_xyz_m")
            stations = StationTable(list(names), None if xyz is None else np.array(xyz, float))
        extra = json.loads(meta["meta_json"]) if "meta_json" in meta else {}
        vis = col("vis_re_jy").astype(float) + 1j * col("vis_im_jy").astype(float)
        vset = VisibilitySet(
            u=col("u_lambda"),
            v=col("v_lambda"),
            w=col("w_lambda"),
            time=col("time_mjd"),
            frequency=col("frequency_hz"),
            station1=col("station1"),
            station2=col("station2"),
            vis=vis,
            sigma=col("sigma_jy"),
            flag=col("flag"),
            channel=col("channel"),
            integration=col("integration_s"),
            scan=col("scan"),
            stations=stations,
            source=str(meta.get("source", "unknown")),
            ra_deg=float(meta.get("ra_deg", np.nan)),
            dec_deg=float(meta.get("dec_deg", np.nan)),
            meta=extra,
        )
    except UvfitError:
        raise
    except Exception as exc:
        raise DataError(
            f"{path}: the table's columns or header cannot be used ({type(exc).__name__}: {exc})",
            "see README 'Data formats'",
        ) from None
    check_station_names(vset.stations.names, path, "the header's station list")
    used = sorted(set(vset.station1.tolist()) | set(vset.station2.tolist()))
    check_station_names(used, path, "the station1 or station2 column")
    unknown = sorted(set(used) - set(vset.stations.names))
    if unknown:
        vset.stations = StationTable(
            list(vset.stations.names) + unknown, np.vstack([vset.stations.xyz, np.full((len(unknown), 3), np.nan)])
        )
    vset.meta.setdefault("format", "ecsv")
    return screen_rows(vset, path)
