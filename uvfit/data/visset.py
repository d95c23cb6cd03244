"""The in-memory visibility set: one row per visibility.

Conventions (see README, "Conventions"):
- u, v, w in wavelengths at the row's own frequency; the visibility of a sky brightness I(l, m) is
  V(u, v) = integral I(l, m) exp[-2 pi i (u l + v m)] dl dm, l toward east, m toward north
  (Thompson, Moran & Swenson 2017, ch. 3).
- A row on stations (station1, station2) is the correlation of station1 with the conjugate of
  station2; the (u, v, w) of a row is the baseline from station1 to station2, i.e. the projection of
  x(station2) - x(station1) as in TMS 2017 eq. 4.1. A reader maps its file's convention onto this in
  one function (UVFITS: uvfit.data.uvfits._to_sky_convention, which negates the stored u, v, w).
- vis and sigma in Jy; sigma is the 1-sigma error of the real and of the imaginary part each.
- time is MJD (UTC) as a float; frequency in Hz, per row.
- flag is True for a row that must not be used.
- scan is the scan number of a row as its file gives it (Measurement Sets: SCAN_NUMBER), -1 where
  the file has none (UVFITS, ECSV, simulations); carried through subsets and averaging.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
from numpy.typing import ArrayLike

from ..errors import DataError

_ROW_FIELDS = (
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


@dataclass
class StationTable:
    """Names of the stations, and their geocentric positions (m, NaN where unknown)."""

    names: list
    xyz: np.ndarray | None = None

    def __post_init__(self):
        self.names = [str(n) for n in self.names]
        if self.xyz is None:
            self.xyz = np.full((len(self.names), 3), np.nan)
        self.xyz = np.asarray(self.xyz, dtype=float).reshape(len(self.names), 3)

    def __len__(self):
        return len(self.names)

    def index(self, name):
        return self.names.index(name)


@dataclass
class VisibilitySet:
    """Calibrated visibilities, one row each, with the station table and source metadata.

    Attributes that are 1-D arrays of one length (the rows): ``u``, ``v``, ``w`` (wavelengths),
    ``time`` (MJD), ``frequency`` (Hz), ``station1``, ``station2`` (station names, str),
    ``vis`` (complex, Jy), ``sigma`` (Jy), ``flag`` (bool), ``channel`` (int: flattened index
    IF * n_channels + channel of the row in its file), ``integration`` (s, NaN where unknown),
    ``scan`` (int, the file's scan number; -1 where the file has none).
    """

    u: np.ndarray
    v: np.ndarray
    w: np.ndarray
    time: np.ndarray
    frequency: np.ndarray
    station1: np.ndarray
    station2: np.ndarray
    vis: np.ndarray
    sigma: np.ndarray
    flag: np.ndarray = None  # type: ignore[assignment]  # None given: filled by __post_init__
    channel: np.ndarray = None  # type: ignore[assignment]  # None given: filled by __post_init__
    integration: np.ndarray = None  # type: ignore[assignment]  # None given: filled by __post_init__
    scan: np.ndarray = None  # type: ignore[assignment]  # None given: filled by __post_init__
    stations: StationTable = None  # type: ignore[assignment]  # None given: filled by __post_init__
    source: str = "unknown"
    ra_deg: float = float("nan")
    dec_deg: float = float("nan")
    meta: dict = field(default_factory=dict)

    def __post_init__(self):
        n = len(np.asarray(self.u))
        self.u = np.asarray(self.u, dtype=np.float64).ravel()
        self.v = np.asarray(self.v, dtype=np.float64).ravel()
        self.w = np.zeros(n) if self.w is None else np.asarray(self.w, dtype=np.float64).ravel()
        self.time = np.asarray(self.time, dtype=np.float64).ravel()
        self.frequency = np.broadcast_to(np.asarray(self.frequency, dtype=np.float64), (n,)).copy()
        self.station1 = np.asarray(self.station1).astype(str).ravel()
        self.station2 = np.asarray(self.station2).astype(str).ravel()
        self.vis = np.asarray(self.vis, dtype=np.complex128).ravel()
        self.sigma = np.asarray(self.sigma, dtype=np.float64).ravel()
        self.flag = np.zeros(n, bool) if self.flag is None else np.asarray(self.flag, dtype=bool).ravel()
        self.channel = np.zeros(n, int) if self.channel is None else np.asarray(self.channel, dtype=int).ravel()
        self.integration = (
            np.full(n, np.nan)
            if self.integration is None
            else np.broadcast_to(np.asarray(self.integration, float), (n,)).copy()
        )
        self.scan = (
            np.full(n, -1, int) if self.scan is None else np.broadcast_to(np.asarray(self.scan, int), (n,)).copy()
        )
        for name in _ROW_FIELDS:
            if len(getattr(self, name)) != n:
                raise DataError(f"visibility column '{name}' has {len(getattr(self, name))} rows, expected {n}")
        # Rows whose weight or value is not usable are flagged, never silently used.
        bad = ~np.isfinite(self.sigma) | (self.sigma <= 0) | ~np.isfinite(self.vis)
        self.flag = self.flag | bad
        if self.stations is None:
            names = sorted(set(self.station1.tolist()) | set(self.station2.tolist()))
            self.stations = StationTable(names)

    # ----------------------------------------------------------------- basics
    def __len__(self):
        return len(self.u)

    @property
    def n(self) -> int:
        return len(self.u)

    @property
    def uv_distance(self) -> np.ndarray:
        """Projected baseline length sqrt(u^2 + v^2) in wavelengths."""
        return np.hypot(self.u, self.v)

    @property
    def amplitude(self) -> np.ndarray:
        return np.abs(self.vis)

    @property
    def phase(self) -> np.ndarray:
        """Visibility phase in radians."""
        return np.angle(self.vis)

    @property
    def snr(self) -> np.ndarray:
        return np.abs(self.vis) / self.sigma

    @property
    def frequencies(self) -> np.ndarray:
        """The distinct frequencies of the rows (Hz), sorted."""
        return np.unique(self.frequency)

    @property
    def station_names(self) -> list[str]:
        """Names of the stations that appear in the rows, in station-table order."""
        used = set(self.station1.tolist()) | set(self.station2.tolist())
        return [n for n in self.stations.names if n in used]

    def _station_index(self, names):
        """Station-table index of every name in ``names`` (vectorised: one lookup per distinct name)."""
        if len(names) == 0:
            return np.zeros(0, int)
        distinct, inverse = np.unique(names, return_inverse=True)
        table = {name: i for i, name in enumerate(self.stations.names)}
        return np.array([table[name] for name in distinct.tolist()], dtype=int)[inverse.ravel()]

    @property
    def ant1(self) -> np.ndarray:
        """Station-table index of station1 for every row."""
        return self._station_index(self.station1)

    @property
    def ant2(self) -> np.ndarray:
        """Station-table index of station2 for every row."""
        return self._station_index(self.station2)

    @property
    def baseline_labels(self):
        """'A-B' label of every row."""
        return np.char.add(np.char.add(self.station1, "-"), self.station2)

    # -------------------------------------------------------------- subsets
    def subset(self, mask: ArrayLike) -> VisibilitySet:
        """A new set with the rows selected by a boolean mask or an index array."""
        mask = np.asarray(mask)
        kw = {name: getattr(self, name)[mask] for name in _ROW_FIELDS}
        return replace(self, **kw, meta=dict(self.meta))

    def good(self) -> VisibilitySet:
        """The unflagged rows; raises DataError if there are none."""
        out = self.subset(~self.flag)
        if out.n == 0:
            raise DataError(
                "no unflagged visibilities are left (every row is flagged or has a zero, negative or NaN weight)",
                "check the file's weights, or widen the selection options",
            )
        return out

    def with_vis(self, vis: ArrayLike, sigma: ArrayLike | None = None) -> VisibilitySet:
        """A copy with new visibilities (and optionally new sigmas), same rows otherwise."""
        out = self.subset(np.arange(self.n))
        out.vis = np.asarray(vis, dtype=np.complex128).copy()
        if sigma is not None:
            out.sigma = np.broadcast_to(np.asarray(sigma, float), (self.n,)).copy()
        return out

    def copy(self):
        return self.subset(np.arange(self.n))

    def summary(self) -> dict:
        """A dictionary of what is in the set (used by ``uvfit info``)."""
        good = self.subset(~self.flag)
        q = good.uv_distance
        out = {
            "source": self.source,
            "ra_deg": self.ra_deg,
            "dec_deg": self.dec_deg,
            "n_visibilities": int(good.n),
            "n_flagged": int(self.flag.sum()),
            "stations": good.station_names,
            "n_stations": len(good.station_names),
            "n_baselines": int(len(set(zip(good.station1.tolist(), good.station2.tolist())))),
            "frequency_hz": [float(f) for f in good.frequencies],
            "time_start_mjd": float(good.time.min()) if good.n else None,
            "time_end_mjd": float(good.time.max()) if good.n else None,
            "uv_min_lambda": float(q.min()) if good.n else None,
            "uv_max_lambda": float(q.max()) if good.n else None,
            "median_snr": float(np.median(good.snr)) if good.n else None,
        }
        # derived numbers a reader of the data wants at a glance
        out["n_rows"] = int(self.n)
        out["channels"] = sorted(int(c) for c in np.unique(good.channel))
        out["time_span_hours"] = float(good.time.max() - good.time.min()) * 24.0 if good.n else None
        if good.n:
            from astropy.time import Time

            out["time_start_utc"] = Time(out["time_start_mjd"], format="mjd", scale="utc").isot
            out["time_end_utc"] = Time(out["time_end_mjd"], format="mjd", scale="utc").isot
        cross = q[good.station1 != good.station2] if good.n else q
        cross = cross[cross > 0]
        rad_to_mas = 180.0 / np.pi * 3.6e6
        # nominal resolution lambda / B_max and largest angular scale lambda / B_min, radians
        # (common practice), with B in wavelengths
        out["resolution_mas"] = float(rad_to_mas / cross.max()) if cross.size else None
        out["largest_scale_mas"] = float(rad_to_mas / cross.min()) if cross.size else None
        out["median_sigma_jy"] = float(np.median(good.sigma)) if good.n else None
        integ = good.integration[np.isfinite(good.integration)] if good.n else good.integration
        out["median_integration_s"] = float(np.median(integ)) if integ.size else None
        if self.meta.get("flagged_reasons"):
            out["flagged_reasons"] = dict(self.meta["flagged_reasons"])
        return out


# Largest |u|, |v| a row may have, in wavelengths: 1e15 is far beyond any baseline (Earth-space
# baselines at the highest radio frequencies are ~1e11 wavelengths; common practice).
MAX_UV_LAMBDA = 1.0e15
#: times (MJD) a row may have: 1858-11-17 to 2406 (common practice: no interferometer observed
#: before MJD 0, and calendar conversions fail far outside it)
MJD_RANGE = (0.0, 200000.0)

#: longest station name a reader accepts (characters). Each row holds its two names as
#: fixed-width strings as long as the longest name, so one long name costs memory on every row;
#: names of real stations are short (common practice).
MAX_STATION_NAME = 64


def check_station_names(names, path, where="the station table"):
    """DataError naming the file when a station name is longer than MAX_STATION_NAME."""
    for i, name in enumerate(names):
        if len(name) > MAX_STATION_NAME:
            raise DataError(
                f"{path}: {where} holds a station name of {len(name)} characters (entry {i + 1}; at most "
                f"{MAX_STATION_NAME} accepted)",
                "shorten the station names",
            )


def screen_rows(vset, path):
    """Flag the rows a reader must not use, counting each reason in ``meta["flagged_reasons"]``.

    Flagged (with a count): non-finite u, v, w or time, a time outside MJD_RANGE, |u| or |v|
    above MAX_UV_LAMBDA,
    autocorrelations (station1 == station2), and every repeat of a row with the same time,
    stations, channel and frequency (the first is kept). Refused (DataError naming the file):
    a non-finite, zero or negative frequency, which would make every (u, v) of the row wrong.
    Rows flagged in the file stay flagged and are not counted here.
    """
    freq = vset.frequency
    bad_f = ~np.isfinite(freq) | (freq <= 0)
    if bad_f.any():
        raise DataError(
            f"{path}: {int(bad_f.sum())} row(s) have a zero, negative or non-finite "
            f"frequency (first at row {int(np.argmax(bad_f))})",
            "frequencies must be positive, in Hz",
        )
    reasons = {}
    with np.errstate(invalid="ignore"):
        checks = [
            ("non-finite u, v or w", ~(np.isfinite(vset.u) & np.isfinite(vset.v) & np.isfinite(vset.w))),
            ("non-finite time", ~np.isfinite(vset.time)),
            (
                f"time outside MJD {MJD_RANGE[0]:g} to {MJD_RANGE[1]:g} (years 1858 to 2406)",
                np.isfinite(vset.time) & ((vset.time < MJD_RANGE[0]) | (vset.time > MJD_RANGE[1])),
            ),
            (
                f"|u| or |v| above {MAX_UV_LAMBDA:g} wavelengths",
                (np.abs(vset.u) > MAX_UV_LAMBDA) | (np.abs(vset.v) > MAX_UV_LAMBDA),
            ),
            ("autocorrelation (station1 = station2)", vset.station1 == vset.station2),
        ]
    if vset.n:
        keys = np.rec.fromarrays([vset.time, vset.station1, vset.station2, vset.channel, vset.frequency])
        _, first = np.unique(keys, return_index=True)
        dup = np.ones(vset.n, bool)
        dup[first] = False
        checks.append(("repeat of an earlier row (same time, stations, channel, frequency)", dup))
    flag = vset.flag.copy()
    for reason, mask in checks:
        new = mask & ~flag
        if new.any():
            reasons[reason] = int(new.sum())
            flag |= new
    vset.flag = flag
    if reasons:
        vset.meta["flagged_reasons"] = reasons
    return vset
