"""Simulated observations: a sky model seen by an array on its Earth-rotation tracks.

``simulate(array, model, observation, ...)`` returns a VisibilitySet (station table with
positions, source name, RA/Dec, the seed in ``meta``) that ``uvfit.write`` stores as UVFITS or
ECSV. The geometry is in :mod:`uvfit.sim.tracks`, the noise and gains in :mod:`uvfit.sim.noise`.

Channels: the band of width ``bandwidth_hz`` centred on ``frequency_hz`` is cut into ``channels``
equal channels; channel k is centred on f + (k - (n - 1)/2) * bandwidth / n and has width
bandwidth / n, which enters the radiometer equation. (u, v, w) scale with each channel frequency.

Scans: station gain errors are constant over a scan; scans are consecutive blocks of
``scan_length_s`` (default 300 s) counted from the start of the observation.

A simulation is only as good as its assumptions: perfect calibration apart from the gain errors
asked for, no atmosphere, no source variability, the model exactly as given.
"""

from dataclasses import dataclass

import numpy as np

from ..data.visset import StationTable, VisibilitySet
from ..errors import UvfitError
from .noise import check_corruption, corrupt, thermal_sigma
from .tracks import C_LIGHT, _Quiet, compute_tracks, time_grid

DEFAULT_BANDWIDTH_HZ = 1.0e9
DEFAULT_SCAN_S = 300.0


@dataclass
class Observation:
    """What is observed, when and how (all in SI units, angles in degrees, start an astropy Time)."""

    ra_deg: float
    dec_deg: float
    start: object
    duration_s: float
    integration_s: float
    frequency_hz: float
    bandwidth_hz: float = DEFAULT_BANDWIDTH_HZ
    channels: int = 1
    scan_length_s: float = DEFAULT_SCAN_S
    source: str = "SIM"

    def check(self):
        if not self.frequency_hz > 0:
            raise UvfitError(f"the frequency must be positive, got {self.frequency_hz} Hz")
        if not self.bandwidth_hz > 0:
            raise UvfitError(f"the bandwidth must be positive, got {self.bandwidth_hz} Hz")
        if int(self.channels) != self.channels or self.channels < 1:
            raise UvfitError(f"the number of channels must be a positive integer, got {self.channels}")
        if self.bandwidth_hz >= 2 * self.frequency_hz:
            raise UvfitError(
                "the bandwidth is wider than twice the centre frequency",
                "check the units of `bandwidth` and `frequency`",
            )
        if not self.scan_length_s > 0:
            raise UvfitError(f"the scan length must be positive, got {self.scan_length_s} s")
        if not -90 <= self.dec_deg <= 90:
            raise UvfitError(f"the declination {self.dec_deg} deg is outside -90..+90")

    @property
    def channel_frequencies(self):
        n = int(self.channels)
        width = self.bandwidth_hz / n
        return self.frequency_hz + (np.arange(n) - (n - 1) / 2.0) * width

    @property
    def channel_width_hz(self):
        return self.bandwidth_hz / int(self.channels)

    def describe(self):
        with _Quiet():
            start = self.start.isot
        return {
            "ra_deg": self.ra_deg,
            "dec_deg": self.dec_deg,
            "start_utc": start,
            "duration_s": self.duration_s,
            "integration_s": self.integration_s,
            "frequency_hz": self.frequency_hz,
            "bandwidth_hz": self.bandwidth_hz,
            "channels": int(self.channels),
            "scan_length_s": self.scan_length_s,
            "source": self.source,
        }


@dataclass
class Layout:
    """The rows of an observation before any visibility is put in them."""

    template: VisibilitySet  # vis = 0, sigma = thermal sigma
    tracks: object  # uvfit.sim.tracks.Tracks
    ant1: np.ndarray
    ant2: np.ndarray
    scan: np.ndarray
    observation: Observation
    array: object

    def summary(self):
        """Rows, baselines, time on source per station, resolution (a dict for printing / JSON)."""
        vs, tr, obs = self.template, self.tracks, self.observation
        on_source = tr.visible.sum(axis=0) * obs.integration_s / 3600.0
        pairs = sorted(set(zip(self.ant1.tolist(), self.ant2.tolist())))
        q_max = float(vs.uv_distance.max())
        res_uas = np.degrees(1.0 / q_max) * 3600e6
        return {
            "array": self.array.name,
            "source": vs.source,
            "rows": int(vs.n),
            "times": int(len(np.unique(vs.time))),
            "channels": int(obs.channels),
            "baselines_with_data": len(pairs),
            "baselines_in_array": len(tr.station1),
            "hours_on_source": {name: float(h) for name, h in zip(self.array.names, on_source)},
            "max_uv_lambda": q_max,
            "nominal_resolution_uas": float(res_uas),
            "median_sigma_jy": float(np.median(vs.sigma)),
            "notice": tr.notice,
        }


def _iso(t):
    with _Quiet():
        return t.isot[:16]


#: most visibilities (rows) one simulated observation may hold
MAX_ROWS = 10_000_000


def plan(array, observation):
    """The rows (times, baselines, channels) with their (u, v, w) and thermal sigma."""
    obs = observation
    obs.check()
    times = time_grid(obs.start, obs.duration_s, obs.integration_s)
    n_names = len(array.names)
    most = len(times) * (n_names * (n_names - 1) // 2) * int(obs.channels)
    if most > MAX_ROWS:
        raise UvfitError(
            f"the observation could hold up to {most} visibilities ({len(times)} integrations x "
            f"{n_names * (n_names - 1) // 2} baselines x {int(obs.channels)} channels), more than {MAX_ROWS}",
            "use fewer channels, a longer integration or a shorter duration",
        )
    tracks = compute_tracks(array, obs.ra_deg, obs.dec_deg, times)
    ti, bi = np.nonzero(tracks.valid)
    if len(ti) == 0:
        never = [n for n, up in zip(array.names, tracks.visible.any(axis=0)) if not up]
        raise UvfitError(
            "the source is never above the elevation limit of two stations at the same time "
            f"between {_iso(times[0])} and {_iso(times[-1])} UTC"
            + (f" (never up at: {', '.join(never)})" if never else ""),
            "choose another start time or duration, or check `ra` and `dec`",
        )
    freqs = obs.channel_frequencies
    n_ch = len(freqs)
    uvw = tracks.uvw_m[ti, bi]  # (R, 3) m
    s1, s2 = tracks.station1[bi], tracks.station2[bi]
    ant1, ant2 = np.repeat(s1, n_ch), np.repeat(s2, n_ch)
    scale = np.tile(freqs, len(ti)) / C_LIGHT
    uvw_l = np.repeat(uvw, n_ch, axis=0) * scale[:, None]
    mjd = np.repeat(tracks.mjd[ti], n_ch)
    elapsed = np.repeat((tracks.mjd[ti] - obs.start.mjd) * 86400.0, n_ch)
    scan = np.floor(elapsed / obs.scan_length_s).astype(int)
    _, scan = np.unique(scan, return_inverse=True)  # scans with data, numbered 0..
    sefd = array.sefd
    sigma = thermal_sigma(sefd[ant1], sefd[ant2], obs.channel_width_hz, obs.integration_s, array.eta)
    names = np.array(array.names)
    template = VisibilitySet(
        u=uvw_l[:, 0],
        v=uvw_l[:, 1],
        w=uvw_l[:, 2],
        time=mjd,
        frequency=np.tile(freqs, len(ti)),
        station1=names[ant1],
        station2=names[ant2],
        vis=np.zeros(len(mjd), complex),
        sigma=sigma,
        channel=np.tile(np.arange(n_ch), len(ti)),
        integration=np.full(len(mjd), float(obs.integration_s)),
        stations=StationTable(list(array.names), array.xyz),
        source=obs.source,
        ra_deg=float(obs.ra_deg),
        dec_deg=float(obs.dec_deg),
        meta={},
    )
    return Layout(template, tracks, ant1, ant2, scan.ravel(), obs, array)


def observe(layout, model_vis, seed=0, gain_error=0.0, phase_error_deg=0.0, systematic=0.0, thermal=True, rng=None):
    """Fill a layout with ``model_vis`` (per row) corrupted as asked; returns a VisibilitySet."""
    rng = np.random.default_rng(seed) if rng is None else rng
    vis, sigma, _ = corrupt(
        model_vis,
        layout.template.sigma,
        layout.ant1,
        layout.ant2,
        layout.scan,
        len(layout.array),
        rng,
        gain_error=gain_error,
        phase_error_deg=phase_error_deg,
        systematic=systematic,
        thermal=thermal,
    )
    out = layout.template.with_vis(vis, sigma)
    settings = {
        "seed": seed,
        "gain_error": gain_error,
        "phase_error_deg": phase_error_deg,
        "systematic": systematic,
        "thermal_noise": bool(thermal),
        "eta": layout.array.eta,
        "array": layout.array.name,
        **layout.observation.describe(),
    }
    out.meta = {
        "origin": "uvfit simulate",
        "channel_width_hz": [layout.observation.channel_width_hz] * int(layout.observation.channels),
        "seed": seed,
        "simulation": settings,
        "history": [
            f"uvfit simulation: array '{layout.array.name}', seed {seed}, gain error "
            f"{gain_error}, phase error {phase_error_deg} deg, systematic {systematic}, "
            f"thermal noise {'on' if thermal else 'off'}"
        ],
    }
    if layout.tracks.notice:
        out.meta["notes"] = [layout.tracks.notice]
    return out


def simulate(array, model, observation, seed=0, gain_error=0.0, phase_error_deg=0.0, systematic=0.0, thermal=True):
    """Simulate ``observation`` of the SkyModel ``model`` with ``array``; returns (vset, layout)."""
    check_corruption(gain_error, phase_error_deg, systematic)
    layout = plan(array, observation)
    t = layout.template
    model_vis = model.visibilities(t.u, t.v, t.frequency)
    vset = observe(
        layout,
        model_vis,
        seed=seed,
        gain_error=gain_error,
        phase_error_deg=phase_error_deg,
        systematic=systematic,
        thermal=thermal,
    )
    return vset, layout


def write_simulation(vset, path, force=False):
    """Write a simulated set through ``uvfit.write`` (format by suffix), with its history.

    ECSV keeps ``meta`` (seed included) itself; for UVFITS the history lines (seed, settings) are
    added as FITS HISTORY cards, in the same atomic write.
    """
    import os

    from .. import write
    from ..outputs import atomic_write_with, check_writable

    path = os.fspath(path)
    check_writable(path, force)
    if os.path.splitext(path)[1].lower() in (".uvfits", ".uvf", ".fits", ".fit", ".fts"):

        def _write(tmp):
            with _Quiet():  # dates past the leap-second table: ERFA's "dubious year" is expected
                write(vset, tmp, force=True)
            from astropy.io import fits

            with fits.open(tmp, mode="update") as hdul:
                header = hdul[0].header
                lines = list(vset.meta.get("history", []))
                settings = vset.meta.get("simulation", {})
                lines += [f"uvfit simulation {k} = {v}" for k, v in settings.items()]
                lines += list(vset.meta.get("notes", []))
                for line in lines:
                    header.add_history(str(line))
                header["UVFSEED"] = (int(vset.meta.get("seed", 0)), "uvfit simulation seed")

        return atomic_write_with(path, _write, force=force)
    with _Quiet():
        return write(vset, path, force=force)
