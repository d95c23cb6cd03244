"""Delete-one-group jackknife (issue 15, item 4; Efron & Tibshirani 1993, ch. 11; the delete-d
factor for stations, whose groups share baselines: Shao & Wu 1989)."""

import numpy as np
from helpers.closure_tools import make_vset

from uvfit.infer.jackknife import groups, jackknife
from uvfit.infer.lsq import fit
from uvfit.sky.model import SkyModel
from uvfit.stats.modes import make_statistic


def _model():
    return SkyModel.build(
        [
            {
                "name": "a",
                "shape": "gaussian",
                "flux": {"value": 1.0, "min": 0.0},
                "fwhm": {"value": 30.0, "min": 0.1, "max": 200.0},
                "east": {"value": 0.0, "fixed": True},
                "north": {"value": 0.0, "fixed": True},
            },
        ],
        angular_unit="uas",
    )


def _data(bad_station_gain):
    vs = make_vset(_model(), n_stations=8, n_times=10, sigma=0.01, seed=2)
    if bad_station_gain:
        # one invented station whose amplitude gains are off by 20% (x 1.2 on every baseline to it)
        hit = (vs.station1 == "ST03") | (vs.station2 == "ST03")
        vs = vs.with_vis(np.where(hit, 1.2 * vs.vis, vs.vis))
    return vs


def _run(vs):
    stat = make_statistic("complex", vs, _model())
    best = fit(stat)
    return jackknife(stat, best, by="station")


def test_bad_station_gain_is_flagged():
    out = _run(_data(True))
    e = out["parameters"]["a.flux"]
    assert e["jackknife_error"] > e["formal_error"]
    assert "a.flux" in out["flagged"]
    assert any("flagged" in line for line in out["summary"])


def test_clean_data_within_factor_1_5():
    out = _run(_data(False))
    for name, e in out["parameters"].items():
        assert 1 / 1.5 <= e["ratio"] <= 1.5, (name, e)
    assert out["n_fits"] == 8


def test_scan_groups_from_time_gaps():
    vs = make_vset(_model(), n_stations=3, n_times=4, sigma=0.01, seed=1)
    t = np.unique(vs.time)
    shift = np.where(vs.time >= t[2], 1.0, 0.0)  # a one-day gap: two scans
    vs = vs.with_vis(vs.vis)
    vs.time = vs.time + shift
    found, how = groups(vs, "scan")
    assert len(found) == 2 and "gaps" in how
