"""Brightness temperatures of component shapes (Rayleigh-Jeans law, T = c^2 I / (2 k nu^2)).

Gaussian: Tb = 2 ln2 c^2 S / (pi k nu^2 theta_maj theta_min) (1 + z) (e.g. Kovalev et al. 2005,
AJ 130, 2473). Uniform disk of diameter D: the mean brightness S / (pi D^2 / 4) gives
Tb = 2 c^2 S / (pi k nu^2 D^2) (1 + z). Sizes in radians, S in Jy, nu in Hz, z the redshift.
"""

import math

# SI constants (CODATA 2018 exact values; c and k are defined exactly in the SI)
C_LIGHT = 299792458.0
K_BOLTZMANN = 1.380649e-23
JY = 1e-26


def brightness_temperature_gaussian(flux_jy, nu_hz, major_rad, minor_rad, redshift=0.0):
    """Tb (K) of a Gaussian: 2 ln2 c^2 S / (pi k nu^2 theta_maj theta_min) (1 + z)."""
    return (
        2.0
        * math.log(2.0)
        * C_LIGHT**2
        * flux_jy
        * JY
        / (math.pi * K_BOLTZMANN * nu_hz**2 * major_rad * minor_rad)
        * (1.0 + redshift)
    )


def brightness_temperature_disk(flux_jy, nu_hz, diameter_rad, redshift=0.0):
    """Tb (K) of a uniform disk of diameter D: 2 c^2 S / (pi k nu^2 D^2) (1 + z)."""
    return 2.0 * C_LIGHT**2 * flux_jy * JY / (math.pi * K_BOLTZMANN * nu_hz**2 * diameter_rad**2) * (1.0 + redshift)
