"""Thermal noise and station-based corruption of simulated visibilities.

Thermal noise (radiometer equation; Thompson, Moran & Swenson 2017, ch. 6, from memory)::

    sigma = sqrt(SEFD_i SEFD_j) / (eta * sqrt(2 * dnu * tau))

with dnu the channel bandwidth (Hz), tau the integration time (s) and eta the digital efficiency
(about 0.88 for 2-bit sampling, from memory). uvfit takes this sigma as the 1-sigma error of the
real part and, independently, of the imaginary part of one visibility, the meaning the
VisibilitySet's ``sigma`` column has; the complex noise then has rms sqrt(2) sigma in modulus.

Station gains: every station gets, per scan, a complex gain g = a exp(i phi) with
a = 1 + gain_error * N(0, 1) (kept above 0.05) and phi = phase_error * N(0, 1) (degrees rms);
a row on (station1, station2) is multiplied by g1 conj(g2). Such errors cancel exactly in closure
phases and closure amplitudes, and so leave the source structure seen through closures intact.

Systematic fraction f: an extra independent error of rms f |V| per part is added to each row and
included in the row's sigma in quadrature, sigma_total = sqrt(sigma^2 + (f |V|)^2), the same form
the statistics layer uses for its systematic floor.
"""

import numpy as np

from ..errors import UvfitError


def thermal_sigma(sefd1, sefd2, bandwidth_hz, integration_s, eta):
    """Radiometer-equation sigma (Jy) per real and per imaginary part; arrays broadcast."""
    bandwidth_hz = np.asarray(bandwidth_hz, float)
    integration_s = np.asarray(integration_s, float)
    if np.any(bandwidth_hz <= 0) or np.any(integration_s <= 0) or not 0 < eta <= 1:
        raise UvfitError("the channel bandwidth, integration time and efficiency must be positive")
    return np.sqrt(np.asarray(sefd1, float) * np.asarray(sefd2, float)) / (
        eta * np.sqrt(2.0 * bandwidth_hz * integration_s)
    )


def check_corruption(gain_error=0.0, phase_error_deg=0.0, systematic=0.0):
    for label, value in (
        ("gain error", gain_error),
        ("phase error", phase_error_deg),
        ("systematic fraction", systematic),
    ):
        if value is None or not np.isfinite(value) or value < 0:
            raise UvfitError(f"the {label} must be a non-negative number, got {value}")
    if gain_error >= 1.0:
        raise UvfitError(
            f"the gain error {gain_error} is a fraction of the amplitude and must be below 1",
            "e.g. `gain_error=0.1` for 10% amplitude scatter",
        )


def station_gains(rng, n_scans, n_stations, gain_error=0.0, phase_error_deg=0.0):
    """(n_scans, n_stations) complex gains, drawn from ``rng`` (see the module docstring)."""
    amp = np.ones((n_scans, n_stations))
    phase = np.zeros((n_scans, n_stations))
    if gain_error > 0:
        amp = np.maximum(1.0 + gain_error * rng.standard_normal((n_scans, n_stations)), 0.05)
    if phase_error_deg > 0:
        phase = np.radians(phase_error_deg) * rng.standard_normal((n_scans, n_stations))
    return amp * np.exp(1j * phase)


def complex_noise(rng, sigma):
    """Independent Gaussian noise of rms ``sigma`` in the real and in the imaginary part."""
    sigma = np.asarray(sigma, float)
    return sigma * rng.standard_normal(sigma.shape) + 1j * sigma * rng.standard_normal(sigma.shape)


def corrupt(
    model_vis,
    sigma_thermal,
    ant1,
    ant2,
    scan,
    n_stations,
    rng,
    gain_error=0.0,
    phase_error_deg=0.0,
    systematic=0.0,
    thermal=True,
):
    """Observed visibilities and their sigmas from model visibilities (all arrays per row).

    ``ant1``, ``ant2``: station indices per row; ``scan``: scan index per row (0 ..). Returns
    (vis, sigma). Order of draws from ``rng`` (fixed, so a seed reproduces a data set): gains
    (amplitudes, then phases), systematic errors, thermal noise.
    """
    check_corruption(gain_error, phase_error_deg, systematic)
    model_vis = np.asarray(model_vis, complex)
    n_scans = int(scan.max()) + 1 if len(scan) else 0
    gains = station_gains(rng, n_scans, n_stations, gain_error, phase_error_deg)
    vis = model_vis * gains[scan, ant1] * np.conj(gains[scan, ant2])
    sigma = np.asarray(sigma_thermal, float).copy()
    if systematic > 0:
        extra = systematic * np.abs(model_vis)
        vis = vis + complex_noise(rng, extra)
        sigma = np.sqrt(sigma**2 + extra**2)
    if thermal:
        vis = vis + complex_noise(rng, sigma_thermal)
    return vis, sigma, gains
