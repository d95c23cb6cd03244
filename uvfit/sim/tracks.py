"""Earth-rotation (u, v, w) tracks of an array observing one source.

Geometry (what is computed, and how well):

- At every integration midpoint the rotation from the terrestrial frame (ITRS) to the geocentric
  celestial frame (GCRS) is taken from astropy (polar motion, Earth rotation angle from UT1,
  precession-nutation IAU 2006/2000A, frame bias), using the IERS Earth-orientation tables astropy
  ships. Station positions are rotated with it (baseline vectors: see "Sign" below).
- The baseline vectors are projected onto the (u, v, w) basis of the phase centre's catalogue
  (ICRS / J2000) direction s0 = (cos d cos a, cos d sin a, sin d):
  e_u = (-sin a, cos a, 0) (east), e_v = (-sin d cos a, -sin d sin a, cos d) (north), e_w = s0.
  This is the frame archive files use for (u, v, w): precession and nutation appear as a slow
  rotation of the tracks relative to an "of-date" computation, and are handled by the rotation
  above, not by rotating coordinates of date. GCRS and ICRS axes coincide by definition.
- Neglected: annual and diurnal aberration of the phase-centre direction (an apparent shift of up
  to about 20 arcsec, i.e. a ~1e-4 rotation of the (u, v, w) basis), light deflection, the
  geocentric/barycentric distinction, tropospheric delay and any station-specific effects.
  These matter to a correlator model, not to a planning simulation of structure on the sky.
- Elevation of the source at each station: arcsin of the dot product of the (catalogue) source
  direction with the station's geodetic vertical, rotated to the celestial frame in the same way;
  refraction and aberration neglected (agrees with astropy AltAz to better than 0.01 deg; tests).

Sign: a row on (station1, station2), station1 before station2 in array order, carries the
projection of ``r[station2] - r[station1]``: the project's convention (uvfit/data/visset.py and
uvfit.data.uvfits._to_sky_convention, where the reader negates the stored r1 - r2 of archive
files and the writer negates back). Checked in the tests against the (u, v) stored in a real
UVFITS file (equal to minus ours, to the precession its writer neglected). The simulated
visibility is then ``model.visibilities(u, v)`` with the project's Fourier kernel
exp[-2 pi i (u l + v m)], so a simulated file read back presents the same sky as the model.

Offline: the functions here that need Earth-orientation data (:func:`compute_tracks`,
:func:`terrestrial_to_celestial`, :func:`iers_last_mjd`, :func:`extrapolation_notice`) run inside
:func:`offline_earth_orientation`, which sets astropy, for the duration of the call only, to never
download Earth-orientation tables and to accept the tables it ships however old they are.
Importing this module changes no astropy setting. A date past the end of the tables (a future
observation being planned) proceeds, with UT1-UTC and polar motion extrapolated by astropy; the
:class:`Tracks` object then carries a one-line ``notice`` saying so (no stack of warnings).
"""

import functools
import warnings
from contextlib import contextmanager
from dataclasses import dataclass

import numpy as np

from ..errors import UvfitError

C_LIGHT = 299792458.0  # m/s (exact, SI definition)


@contextmanager
def offline_earth_orientation():
    """Within the block, astropy uses only the Earth-orientation data it ships and never attempts
    a download; its IERS settings are restored on leaving (nothing changes for the rest of the
    process)."""
    from astropy.utils import iers

    # Beyond the tables astropy keeps going with the last values (with a warning we collect).
    with (
        iers.conf.set_temp("auto_download", False),
        iers.conf.set_temp("auto_max_age", None),
        iers.conf.set_temp("iers_degraded_accuracy", "warn"),
    ):
        yield


def _offline(func):
    """Run ``func`` inside :func:`offline_earth_orientation`."""

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        with offline_earth_orientation():
            return func(*args, **kwargs)

    return wrapper


class _Quiet(warnings.catch_warnings):
    """Collect astropy/ERFA warnings instead of printing them."""

    def __enter__(self):
        log = super().__enter__()
        warnings.simplefilter("ignore")
        return log


@_offline
def iers_last_mjd():
    """Last MJD covered by the Earth-orientation table astropy ships (None if unavailable); read
    offline (see :func:`offline_earth_orientation`)."""
    try:
        from astropy.utils import iers

        table = iers.earth_orientation_table.get()
        return float(np.asarray(table["MJD"].to_value("d") if hasattr(table["MJD"], "to_value") else table["MJD"])[-1])
    except Exception:  # pragma: no cover - a broken astropy install
        return None


@_offline
def extrapolation_notice(mjd):
    """One line if any of the times lies past the Earth-orientation tables, else None."""
    last = iers_last_mjd()
    if last is None or np.max(mjd) <= last:
        return None
    from astropy.time import Time

    with _Quiet():
        end = Time(last, format="mjd").iso[:10]
    return (
        f"note: the observation lies after the end of the Earth-orientation tables ({end}); "
        "UT1-UTC and polar motion are extrapolated from their last values (an Earth-rotation "
        "error of a fraction of a second, ~1e-5 rad in (u, v): negligible for planning)"
    )


def time_grid(start, duration_s, integration_s):
    """Integration midpoints start + (k + 1/2) * integration, k = 0 .. floor(duration/integration) - 1."""
    from astropy import units as u

    if not integration_s > 0:
        raise UvfitError(f"the integration time must be positive, got {integration_s} s")
    if not duration_s > 0:
        raise UvfitError(f"the duration must be positive, got {duration_s} s")
    n = int(np.floor(duration_s / integration_s + 1e-9))
    if n < 1:
        raise UvfitError(
            f"the duration ({duration_s} s) is shorter than one integration ({integration_s} s)",
            "lengthen `duration` or shorten `integration`",
        )
    if n > 2_000_000:
        raise UvfitError(f"{n} integrations is too many", "use a longer integration time")
    offsets = (np.arange(n) + 0.5) * integration_s
    with _Quiet():
        return start + offsets * u.s


@_offline
def terrestrial_to_celestial(times):
    """(T, 3, 3) rotation matrices taking ITRS vectors to GCRS vectors at each time."""
    from astropy.coordinates import GCRS, ITRS, CartesianRepresentation

    times = times.reshape(-1)
    n = len(times)
    # The three ITRS axes, scaled to the Earth's radius, transformed at every time (vectorised).
    radius = 6.371e6
    basis = np.broadcast_to(np.eye(3)[:, :, None], (3, 3, n)) * radius  # (axis, component, time)
    with _Quiet():
        rep = CartesianRepresentation(basis[:, 0], basis[:, 1], basis[:, 2], unit="m")
        itrs = ITRS(rep, obstime=times)
        gcrs = itrs.transform_to(GCRS(obstime=times))
        xyz = gcrs.cartesian.xyz.to_value("m")  # (component, axis, time)
    # column k of the matrix is the image of ITRS axis k
    return np.transpose(xyz, (2, 0, 1)) / radius


def uvw_basis(ra_deg, dec_deg):
    """(3, 3) matrix whose rows are the unit vectors e_u (east), e_v (north), e_w (to source)."""
    a, d = np.radians(ra_deg), np.radians(dec_deg)
    return np.array(
        [
            [-np.sin(a), np.cos(a), 0.0],
            [-np.sin(d) * np.cos(a), -np.sin(d) * np.sin(a), np.cos(d)],
            [np.cos(d) * np.cos(a), np.cos(d) * np.sin(a), np.sin(d)],
        ]
    )


def geodetic_up(xyz):
    """(N, 3) unit vectors of the geodetic vertical (WGS84) at ITRS positions (N, 3) in metres."""
    from astropy import units as u
    from astropy.coordinates import EarthLocation

    loc = EarthLocation.from_geocentric(xyz[:, 0], xyz[:, 1], xyz[:, 2], unit=u.m)
    geo = loc.to_geodetic()
    lat, lon = geo.lat.to_value(u.rad), geo.lon.to_value(u.rad)
    return np.stack([np.cos(lat) * np.cos(lon), np.cos(lat) * np.sin(lon), np.sin(lat)], axis=-1)


@dataclass
class Tracks:
    """The geometry of one observation, on a (time, baseline) grid.

    ``uvw_m``: (T, B, 3) metres in the ICRS basis of the phase centre; ``elevation``: (T, N) deg;
    ``visible``: (T, N) station above its limit; ``valid``: (T, B) both stations above.
    """

    times: object  # astropy Time (T,)
    mjd: np.ndarray  # (T,)
    station1: np.ndarray  # (B,) station index
    station2: np.ndarray  # (B,)
    uvw_m: np.ndarray  # (T, B, 3)
    elevation: np.ndarray  # (T, N)
    visible: np.ndarray  # (T, N)
    valid: np.ndarray  # (T, B)
    ra_deg: float
    dec_deg: float
    notice: str | None = None

    def uvw_lambda(self, frequency_hz):
        """(T, B, C, 3) (u, v, w) in wavelengths for channel frequencies (C,) in Hz."""
        f = np.atleast_1d(np.asarray(frequency_hz, float))
        return self.uvw_m[:, :, None, :] * (f[None, None, :, None] / C_LIGHT)


@_offline
def compute_tracks(array, ra_deg, dec_deg, times, of_date=False):
    """(u, v, w) tracks of ``array`` (a uvfit.sim.array.Array) for a source at (ra, dec) in degrees
    (ICRS), at the astropy Time array ``times`` (UTC).

    With ``of_date=True`` the baselines and the basis are instead those of the true equator and
    equinox of date with the source's apparent (of-date) direction: the intermediate used to check
    the geometry against the classical hour-angle formula (tests); planning uses the default.

    Runs offline: astropy's IERS settings are set for this call only, by
    :func:`offline_earth_orientation` (no download is ever attempted; the tables astropy ships
    are accepted however old, and dates past their end are extrapolated with a ``notice``).
    """
    if not -90.0 <= dec_deg <= 90.0:
        raise UvfitError(f"declination {dec_deg} deg is outside -90..90")
    times = times.reshape(-1)
    xyz = array.xyz
    rot = terrestrial_to_celestial(times)  # (T, 3, 3)
    s1, s2 = array.baselines()
    base_itrs = xyz[s2] - xyz[s1]  # (B, 3): station1 -> station2
    base_cel = np.einsum("tij,bj->tbi", rot, base_itrs)  # (T, B, 3) GCRS
    basis = uvw_basis(ra_deg, dec_deg)
    if of_date:
        import erfa
        from astropy import units as u
        from astropy.coordinates import TETE, SkyCoord

        with _Quiet():
            tt = times.tt
            npb = erfa.pnm06a(tt.jd1, tt.jd2)  # GCRS -> true of date
            app = SkyCoord(ra=ra_deg * u.deg, dec=dec_deg * u.deg, frame="icrs").transform_to(TETE(obstime=times))
        base_cel = np.einsum("tij,tbj->tbi", npb, base_cel)
        a, d = app.ra.to_value(u.rad), app.dec.to_value(u.rad)
        basis_t = np.stack(
            [
                np.stack([-np.sin(a), np.cos(a), np.zeros_like(a)], -1),
                np.stack([-np.sin(d) * np.cos(a), -np.sin(d) * np.sin(a), np.cos(d)], -1),
                np.stack([np.cos(d) * np.cos(a), np.cos(d) * np.sin(a), np.sin(d)], -1),
            ],
            1,
        )
        uvw = np.einsum("tkj,tbj->tbk", basis_t, base_cel)
    else:
        uvw = np.einsum("kj,tbj->tbk", basis, base_cel)  # (T, B, 3)
    # elevation with the catalogue direction and the geodetic vertical (refraction neglected)
    up_cel = np.einsum("tij,nj->tni", rot, geodetic_up(xyz))  # (T, N, 3)
    sin_el = np.clip(up_cel @ basis[2], -1.0, 1.0)
    elevation = np.degrees(np.arcsin(sin_el))
    visible = elevation >= array.min_elevation[None, :]
    valid = visible[:, s1] & visible[:, s2]
    return Tracks(
        times=times,
        mjd=np.asarray(times.mjd, float),
        station1=s1,
        station2=s2,
        uvw_m=uvw,
        elevation=elevation,
        visible=visible,
        valid=valid,
        ra_deg=float(ra_deg),
        dec_deg=float(dec_deg),
        notice=extrapolation_notice(times.mjd),
    )
