"""Invented observations for the plot and report tests (an invented array; nothing real).

The visibilities are computed here from published closed forms, independently of uvfit's model
code: a circular Gaussian of FWHM theta has V(q) = S exp[-(pi theta q)^2 / (4 ln 2)] (Pearson 1995,
Synthesis Imaging in Radio Astronomy, ASP Conf. Ser. 180), moved to (l0, m0) by the shift theorem
V -> V exp[-2 pi i (u l0 + v m0)]; the tracks follow TMS 2017 eq. 4.1.
"""

import json
import math

import numpy as np

from .arrays import earth_rotation_uv, every_baseline, observe
from .invented import component, model_toml

UAS = math.pi / 180 / 3600 * 1e-6  # radians per microarcsecond (definition)

MODEL_TOML = model_toml(
    component("core", 1.0, fwhm=20.0),
    component("knot", 0.4, east=-15.0, north=-20.0, fwhm=30.0),
    description="invented core and knot",
    gap="\n",
)

TRUTH = {
    "core.flux": 1.0,
    "core.fwhm": 20.0,
    "knot.flux": 0.4,
    "knot.east": -15.0,
    "knot.north": -20.0,
    "knot.fwhm": 30.0,
}
UNITS = {
    "core.flux": "Jy",
    "core.fwhm": "uas",
    "knot.flux": "Jy",
    "knot.east": "uas",
    "knot.north": "uas",
    "knot.fwhm": "uas",
}

STATIONS = ["OSPREY", "HERON", "CRANE", "EGRET", "PLOVER"]


def gaussian_vis(u, v, flux, fwhm_uas, east_uas=0.0, north_uas=0.0):
    q = np.hypot(u, v)
    theta = fwhm_uas * UAS
    amp = flux * np.exp(-((np.pi * theta * q) ** 2) / (4 * np.log(2)))
    return amp * np.exp(-2j * np.pi * (u * east_uas * UAS + v * north_uas * UAS))


def truth_vis(u, v):
    t = TRUTH
    return gaussian_vis(u, v, t["core.flux"], t["core.fwhm"]) + gaussian_vis(
        u, v, t["knot.flux"], t["knot.fwhm"], t["knot.east"], t["knot.north"]
    )


def simulated_set(noise=0.0, n_times=30, seed=3, frequency=230e9):
    """A VisibilitySet on an invented 5-station array, noiseless when ``noise`` is 0."""
    rng = np.random.default_rng(seed)
    lam = 299792458.0 / frequency
    xyz = rng.normal(size=(len(STATIONS), 3)) * 3.0e6  # metres, an invented Earth-sized array
    hours = np.linspace(-2.0, 2.0, n_times)
    dec = math.radians(25.0)
    t, i, j = every_baseline(len(STATIONS), n_times)
    u, v = earth_rotation_uv(xyz, i, j, np.radians(15.0 * hours)[t], dec, lam)
    names = np.array(STATIONS)
    return observe(
        u,
        v,
        names[i],
        names[j],
        60000.25 + t * 120.0 / 86400.0,
        frequency=frequency,
        sigma=noise if noise > 0 else 0.01,
        vis=truth_vis(u, v),
        noise=noise if noise > 0 else None,
        rng=rng,
        integration=120.0,
        source="INVENTED-1",
        ra_deg=150.0,
        dec_deg=25.0,
    )


def truth_fit_json(mode="complex"):
    """A fit output with the true values (the keys of 'uvfit fit --json')."""
    return {
        "version": "test",
        "mode": mode,
        "seed": 0,
        "data": "sim.uvfits",
        "selection": {},
        "systematic": 0.0,
        "angular_unit": "uas",
        "frequency_hz": 230e9,
        "parameters": {n: {"value": v, "error": 0.0, "unit": UNITS[n], "free": True} for n, v in TRUTH.items()},
        "derived": {},
        "statistics": {"chi2": 0.0, "dof": 1, "reduced_chi2": 0.0, "n_data": 7, "aic": 12.0, "bic": 13.0},
        "covariance": None,
        "correlation": None,
        "per_station": {},
        "per_baseline": {},
        "notices": [],
        "model_toml": MODEL_TOML,
    }


def write_json(path, obj):
    with open(path, "w", encoding="utf-8") as handle:
        json.dump(obj, handle, indent=1)
    return path
