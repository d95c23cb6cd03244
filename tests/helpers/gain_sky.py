"""An invented eight-station array observing an invented double, with station gains applied.

Every name and site is invented (not a real instrument). The double: two points 40 microarcseconds
apart at position angle 230 deg, flux ratio 0.4, 1.5 Jy in all. ``observe_double`` simulates it
through uvfit.sim (Earth-rotation tracks, thermal noise, one complex gain per station per scan)
and keeps the simulation's scan numbers on the rows.
"""

import numpy as np

from uvfit.data.select import parse_time
from uvfit.sim.array import parse_array
from uvfit.sim.observe import Observation, observe, plan
from uvfit.sky.model import SkyModel

SITES = [
    ("NAV", 40.0, -110.0),
    ("ORC", 20.0, -155.0),
    ("PIK", 52.0, 5.0),
    ("QUA", -24.0, -68.0),
    ("RIV", 37.0, -3.0),
    ("SOL", 45.0, 10.0),
    ("TUN", 30.0, -100.0),
    ("VEX", 60.0, -140.0),
]
TRUE = {"flux": 1.5, "flux_ratio": 0.4, "separation": 40.0, "position_angle": 230.0}
SCAN_S = 600.0


def eight_station_array(sefd=60000.0):
    stations = [
        {"name": n, "lat": lat, "lon": lon, "height": 1000.0, "sefd": sefd, "diameter": 20.0} for n, lat, lon in SITES
    ]
    return parse_array(
        {"name": "invented eight", "defaults": {"eta": 0.88, "min_elevation": 10.0}, "station": stations}
    )


def double(flux=1.5, flux_ratio=0.4, separation=40.0, position_angle=230.0):
    """The double as a model (positions free within bounds, the position angle free)."""
    return SkyModel.build(
        [
            {
                "name": "pair",
                "shape": "double",
                "member": "point",
                "flux": {"value": flux, "min": 0.0},
                "east": {"value": 0.0, "min": -200.0, "max": 200.0},
                "north": {"value": 0.0, "min": -200.0, "max": 200.0},
                "flux_ratio": {"value": flux_ratio, "min": 0.0, "max": 1.0},
                "separation": {"value": separation, "min": 0.0, "max": 300.0},
                "position_angle": {"value": position_angle},
            }
        ],
        angular_unit="uas",
    )


def start_model():
    """Start values off the truth (as a user would guess)."""
    return double(flux=1.2, flux_ratio=0.5, separation=35.0, position_angle=220.0)


def observe_double(seed, gain_error=0.3, phase_error_deg=180.0, hours=6.0, integration_s=120.0, sefd=60000.0):
    """The double observed; 30% amplitude gains and phases of 180 deg rms (random) per 10-min scan."""
    obs = Observation(
        ra_deg=150.0,
        dec_deg=30.0,
        start=parse_time("2027-03-01T02:00"),
        duration_s=hours * 3600.0,
        integration_s=integration_s,
        frequency_hz=230e9,
        bandwidth_hz=2e9,
        scan_length_s=SCAN_S,
    )
    layout = plan(eight_station_array(sefd), obs)
    t = layout.template
    vis = double().visibilities(t.u, t.v, t.frequency)
    vs = observe(layout, vis, seed=seed, gain_error=gain_error, phase_error_deg=phase_error_deg).copy()
    vs.scan = np.asarray(layout.scan, int)
    return vs
