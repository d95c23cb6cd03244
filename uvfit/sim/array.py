"""Array files: the stations of an (invented or real) interferometer, in TOML.

Format (all keys lower case; see README, "Array files")::

    name = "example array"          # required: a label for the array
    description = "..."             # optional free text

    [defaults]                      # optional
    eta = 0.88                      # digital (quantization) efficiency, 0 < eta <= 1 (default 0.88)
    min_elevation = 10.0            # elevation limit of every station, degrees (default 10)

    [[station]]                     # one table per station, at least two
    name = "N1"                     # required, unique
    x = 1234567.0                   # geocentric (ITRF-like) position in metres ...
    y = -4567890.0
    z = 4012345.0
    # ... or instead geodetic (WGS84) latitude and longitude in degrees and height in metres:
    # lat = 45.0
    # lon = -110.0                  # east positive
    # height = 1500.0
    sefd = 400.0                    # required: system equivalent flux density, Jy, > 0
    diameter = 25.0                 # optional: dish diameter, m (recorded, used for the beam size)
    min_elevation = 15.0            # optional: overrides [defaults].min_elevation, degrees

The default elevation limit of 10 degrees is a common-practice value for planning; a station below
its limit takes no data (its baselines drop out of the track).
"""

import os

try:
    import tomllib
except ModuleNotFoundError:  # Python 3.10
    import tomli as tomllib
from dataclasses import dataclass, field

import numpy as np

from ..data.visset import MAX_STATION_NAME
from ..errors import UvfitError

DEFAULT_ETA = 0.88  # 2-bit sampling efficiency (TMS 2017 ch. 8, from memory)
DEFAULT_MIN_ELEVATION = 10.0  # degrees (common practice)

_TOP_KEYS = {"name", "description", "defaults", "station"}
_DEFAULT_KEYS = {"eta", "min_elevation"}
_STATION_KEYS = {"name", "x", "y", "z", "lat", "lon", "height", "sefd", "diameter", "min_elevation"}


@dataclass
class Station:
    name: str
    xyz: np.ndarray  # geocentric position, m
    sefd: float  # Jy
    min_elevation: float  # degrees
    diameter: float = float("nan")  # m, NaN when not given


@dataclass
class Array:
    """An interferometer: named stations with positions, SEFDs and elevation limits."""

    name: str
    stations: list
    eta: float = DEFAULT_ETA
    description: str = ""
    source_path: str = ""
    extra: dict = field(default_factory=dict)

    def __len__(self):
        return len(self.stations)

    @property
    def names(self):
        return [s.name for s in self.stations]

    @property
    def xyz(self):
        """(n_stations, 3) geocentric positions in metres."""
        return np.array([s.xyz for s in self.stations], dtype=float)

    @property
    def sefd(self):
        return np.array([s.sefd for s in self.stations], dtype=float)

    @property
    def min_elevation(self):
        return np.array([s.min_elevation for s in self.stations], dtype=float)

    @property
    def diameter(self):
        return np.array([s.diameter for s in self.stations], dtype=float)

    def baselines(self):
        """Station index pairs (i, j), i < j in array order."""
        i, j = np.triu_indices(len(self.stations), k=1)
        return i, j

    def max_baseline_m(self):
        xyz = self.xyz
        d = np.linalg.norm(xyz[:, None, :] - xyz[None, :, :], axis=-1)
        return float(d.max())


def _number(value, where, key):
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise UvfitError(f"array file: {where}: '{key}' must be a number, got {value!r}", f"write {key} = <number>")
    value = float(value)
    if not np.isfinite(value):
        raise UvfitError(f"array file: {where}: '{key}' must be finite, got {value!r}")
    return value


def _elevation(value, where):
    value = _number(value, where, "min_elevation")
    if not -90.0 <= value < 90.0:
        raise UvfitError(
            f"array file: {where}: 'min_elevation' = {value} is outside -90..90 degrees",
            "give the elevation limit in degrees, e.g. 10",
        )
    return value


def parse_array(data, source="array file"):
    """Build an :class:`Array` from the parsed TOML dictionary; every problem is a UvfitError."""
    from astropy import units as u
    from astropy.coordinates import EarthLocation

    unknown = set(data) - _TOP_KEYS
    if unknown:
        raise UvfitError(
            f"{source}: unknown top-level key(s) {sorted(unknown)}", f"allowed keys are {sorted(_TOP_KEYS)}"
        )
    name = data.get("name")
    if not isinstance(name, str) or not name.strip():
        raise UvfitError(f"{source}: the array has no 'name'", 'add a line name = "my array" at the top')
    defaults = data.get("defaults", {})
    if not isinstance(defaults, dict):
        raise UvfitError(f"{source}: 'defaults' must be a table", "write [defaults] on its own line")
    unknown = set(defaults) - _DEFAULT_KEYS
    if unknown:
        raise UvfitError(
            f"{source}: unknown key(s) {sorted(unknown)} in [defaults]", f"allowed keys are {sorted(_DEFAULT_KEYS)}"
        )
    eta = _number(defaults.get("eta", DEFAULT_ETA), "[defaults]", "eta")
    if not 0.0 < eta <= 1.0:
        raise UvfitError(
            f"{source}: [defaults] eta = {eta} is outside (0, 1]",
            "eta is the digital efficiency, about 0.88 for 2-bit sampling",
        )
    min_el_default = _elevation(defaults.get("min_elevation", DEFAULT_MIN_ELEVATION), "[defaults]")

    raw = data.get("station", [])
    if not isinstance(raw, list):
        raise UvfitError(f"{source}: 'station' must be a list of tables", "write each station as a [[station]] table")
    stations, seen = [], set()
    for k, st in enumerate(raw, start=1):
        label = f"station {k}"
        if not isinstance(st, dict):
            raise UvfitError(f"{source}: {label} is not a table", "write it as a [[station]] table")
        sname = st.get("name")
        if not isinstance(sname, str) or not sname.strip():
            raise UvfitError(f"{source}: {label} has no 'name'", 'add name = "XX" to the station')
        sname = sname.strip()
        if len(sname) > MAX_STATION_NAME:
            raise UvfitError(
                f"{source}: {label} has a name of {len(sname)} characters (at most {MAX_STATION_NAME} accepted)",
                "give the station a short name",
            )
        where = f"station '{sname}'"
        unknown = set(st) - _STATION_KEYS
        if unknown:
            raise UvfitError(
                f"{source}: {where}: unknown key(s) {sorted(unknown)}", f"allowed keys are {sorted(_STATION_KEYS)}"
            )
        if sname in seen:
            raise UvfitError(f"{source}: {where}: the name is used twice", "give every station its own name")
        seen.add(sname)
        has_xyz = [key in st for key in ("x", "y", "z")]
        has_geo = [key in st for key in ("lat", "lon", "height")]
        if any(has_xyz) and any(has_geo):
            raise UvfitError(
                f"{source}: {where}: both x/y/z and lat/lon/height are given", "give the position one way only"
            )
        if all(has_xyz):
            xyz = np.array([_number(st[key], where, key) for key in ("x", "y", "z")])
            if np.linalg.norm(xyz) < 6.0e6 or np.linalg.norm(xyz) > 6.5e6:
                raise UvfitError(
                    f"{source}: {where}: position (x, y, z) is {np.linalg.norm(xyz):.0f} m "
                    "from the geocentre, not on the Earth's surface",
                    "x, y, z are geocentric coordinates in metres",
                )
        elif all(has_geo):
            lat = _number(st["lat"], where, "lat")
            lon = _number(st["lon"], where, "lon")
            height = _number(st["height"], where, "height")
            if not -90.0 <= lat <= 90.0:
                raise UvfitError(f"{source}: {where}: 'lat' = {lat} is outside -90..90 degrees")
            loc = EarthLocation.from_geodetic(lon * u.deg, lat * u.deg, height * u.m)
            xyz = np.array([loc.x.to_value(u.m), loc.y.to_value(u.m), loc.z.to_value(u.m)])
        else:
            given = [key for key in ("x", "y", "z", "lat", "lon", "height") if key in st]
            missing = (
                [key for key, h in zip("xyz", has_xyz) if not h]
                if any(has_xyz)
                else [key for key, h in zip(("lat", "lon", "height"), has_geo) if not h]
                if any(has_geo)
                else ["x", "y", "z"]
            )
            raise UvfitError(
                f"{source}: {where}: missing position key(s) {missing}" + (f" (given: {given})" if given else ""),
                "give x, y, z (geocentric, m) or lat, lon (deg) and height (m)",
            )
        if "sefd" not in st:
            raise UvfitError(f"{source}: {where}: missing key 'sefd'", "add sefd = <Jy>, e.g. sefd = 500.0")
        sefd = _number(st["sefd"], where, "sefd")
        if sefd <= 0:
            raise UvfitError(
                f"{source}: {where}: 'sefd' = {sefd} must be positive",
                "the SEFD is the system equivalent flux density in Jy",
            )
        diameter = float("nan")
        if "diameter" in st:
            diameter = _number(st["diameter"], where, "diameter")
            if diameter <= 0:
                raise UvfitError(f"{source}: {where}: 'diameter' = {diameter} must be positive (m)")
        min_el = _elevation(st["min_elevation"], where) if "min_elevation" in st else min_el_default
        stations.append(Station(sname, xyz, sefd, min_el, diameter))
    if len(stations) < 2:
        raise UvfitError(
            f"{source}: the array has {len(stations)} station(s); an interferometer needs at least two",
            "add [[station]] tables",
        )
    return Array(
        name=name.strip(), stations=stations, eta=eta, description=str(data.get("description", "")), source_path=source
    )


def load_array(path):
    """Read an array file (TOML, see the module docstring)."""
    from ..inputs import read_input_bytes

    path = os.fspath(path)
    raw = read_input_bytes(path, "array file")
    try:
        data = tomllib.loads(raw.decode("utf-8"))
    except tomllib.TOMLDecodeError as exc:
        raise UvfitError(
            f"array file {path} is not valid TOML: {exc}", "see README, 'Array files', for the format"
        ) from None
    except UnicodeDecodeError:
        raise UvfitError(f"array file {path} is not a text file") from None
    except RecursionError:
        raise UvfitError(
            f"array file {path} is nested too deeply to read", "an array file holds [[station]] tables of numbers"
        ) from None
    return parse_array(data, source=f"array file {path}")
