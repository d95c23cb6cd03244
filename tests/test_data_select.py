"""Selection and averaging: weighted means, sigma of the mean, and the smearing numbers."""

import numpy as np
import pytest
from scipy import integrate

from uvfit.data.select import (
    OMEGA_EARTH,
    apply_selection,
    average_channels,
    average_time,
    bandwidth_smearing_loss,
    parse_channels,
    time_smearing_loss,
)
from uvfit.data.visset import VisibilitySet
from uvfit.errors import DataError


def grid_set(n_times=60, step_s=2.0, channels=(0, 1, 2, 3), vis=None, sigma=0.5, seed=0):
    """Invented 3-station array, rows (time, baseline, channel)."""
    pairs = [("ROOK", "HERON"), ("ROOK", "TERN"), ("HERON", "TERN")]
    rows = [(i, p, c) for i in range(n_times) for p in range(3) for c in channels]
    i = np.array([r[0] for r in rows])
    p = np.array([r[1] for r in rows])
    c = np.array([r[2] for r in rows])
    n = len(rows)
    rng = np.random.default_rng(seed)
    freq = 5.0e9 + 1.0e6 * c
    u = (1 + p) * 1e5 * freq / 5e9 + i * 1.0
    v = (2 - p) * 1e5 * freq / 5e9 - i * 0.5
    return VisibilitySet(
        u=u,
        v=v,
        w=np.zeros(n),
        time=58000.0 + i * step_s / 86400.0,
        frequency=freq,
        station1=np.array([pairs[k][0] for k in p]),
        station2=np.array([pairs[k][1] for k in p]),
        vis=(np.full(n, 2.0 - 1.0j) if vis is None else vis(rng, n)),
        sigma=np.full(n, sigma) if np.isscalar(sigma) else sigma,
        channel=c,
        integration=np.full(n, step_s),
        meta={"channel_width_hz": [1.0e6] * 4, "n_channels_per_if": 4},
    )


def test_constant_visibilities_average_to_the_same_value_and_sigma_over_sqrt_n():
    vs = grid_set()
    out, report = average_time(vs, 20.0)
    # 20 s bins of 2 s rows: 10 rows each; mean of a constant is the constant; the error of the
    # weighted mean of N equal errors is sigma / sqrt(N) (common practice)
    assert out.n == vs.n // 10
    assert np.allclose(out.vis, 2.0 - 1.0j)
    assert np.allclose(out.sigma, 0.5 / np.sqrt(10))
    assert np.allclose(out.integration, 20.0)
    assert report["n_in"] == vs.n and report["n_out"] == out.n
    assert set(out.channel) == {0, 1, 2, 3}


def test_weighted_means_match_numpy_average():
    vs = grid_set(
        vis=lambda rng, n: rng.normal(size=n) + 1j * rng.normal(size=n),
        sigma=np.random.default_rng(5).uniform(0.2, 2.0, 60 * 3 * 4),
    )
    out, _ = average_time(vs, 30.0)
    # one output row checked against numpy.average with weights 1/sigma^2
    sel = (
        (vs.station1 == "ROOK")
        & (vs.station2 == "TERN")
        & (vs.channel == 2)
        & ((vs.time - vs.time.min()) * 86400 < 30 - 1e-6)
    )
    w = 1 / vs.sigma[sel] ** 2
    k = np.flatnonzero((out.station1 == "ROOK") & (out.station2 == "TERN") & (out.channel == 2))[0]
    assert out.vis[k] == pytest.approx(np.average(vs.vis[sel], weights=w))
    assert out.u[k] == pytest.approx(np.average(vs.u[sel], weights=w))
    # the time stamp is the bin's common time: the plain mean over every row in the bin, all
    # baselines and channels, so that rows averaged together stay simultaneous (for closures)
    in_bin = (vs.time - vs.time.min()) * 86400 < 30 - 1e-6
    assert out.time[k] == pytest.approx(np.mean(vs.time[in_bin]), abs=1e-10)  # 9 us: MJD rounding
    assert np.unique(out.time).size == 4  # 120 s of data in 30 s bins: four common time stamps
    assert out.sigma[k] == pytest.approx(1 / np.sqrt(w.sum()))


def test_time_smearing_number_against_the_formula_and_a_numerical_average():
    vs = grid_set()
    radius = 1e-6  # rad
    out, report = average_time(vs, 60.0, field_radius=radius)
    qmax = vs.uv_distance.max()
    # formula (TMS 2017 ch. 6, from memory): 1 - sin(pi x)/(pi x), x = omega_e dt theta q
    x = OMEGA_EARTH * 60.0 * radius * qmax
    assert report["smearing_loss"] == pytest.approx(1 - np.sin(np.pi * x) / (np.pi * x), rel=1e-12)
    # numerical check with scipy.integrate: a point source at m = theta on a baseline of length q
    # turning at omega_e (u = q sin(omega t), v = q cos(omega t)) is averaged over dt around t = 0,
    # where its phase runs fastest; the amplitude kept is the predicted sinc to first order
    q, dt, theta = 5e8, 600.0, 1e-8

    def phase(t):  # -2 pi (u l + v m) with l = 0, m = theta
        return -2 * np.pi * q * np.sin(OMEGA_EARTH * t) * theta

    re = integrate.quad(lambda t: np.cos(phase(t)), -dt / 2, dt / 2, limit=200)[0] / dt
    im = integrate.quad(lambda t: np.sin(phase(t)), -dt / 2, dt / 2, limit=200)[0] / dt
    kept = np.hypot(re, im)
    assert 1 - kept == pytest.approx(float(time_smearing_loss(dt, theta, q)), rel=2e-3)


def test_bandwidth_smearing_number_and_channel_averaging():
    vs = grid_set()
    out, report = average_channels(vs, 4, field_radius=2e-6)
    assert out.n == vs.n // 4 and set(out.channel) == {0}
    assert np.allclose(out.vis, 2.0 - 1.0j) and np.allclose(out.sigma, 0.5 / 2)
    # merged band: 4 channels of 1 MHz edge to edge = 4 MHz (3 MHz spread of centres + 1 MHz)
    assert report["bandwidth_hz"] == pytest.approx(4.0e6)
    k = np.argmax(out.uv_distance)
    x = 4.0e6 / out.frequency[k] * 2e-6 * out.uv_distance[k]
    # formula (TMS 2017 ch. 6, from memory): 1 - sin(pi x)/(pi x), x = (dnu/nu) theta q
    assert report["smearing_loss"] == pytest.approx(1 - np.sin(np.pi * x) / (np.pi * x), rel=1e-9)
    # numerical check: a flat band averaged over frequency with scipy.integrate
    q0, f0 = 1e8, 5e9
    # (phase measured from the band centre; the amplitude does not depend on that constant)
    kept = (
        np.hypot(
            integrate.quad(lambda f: np.cos(2 * np.pi * q0 * (f - f0) / f0 * 2e-6), f0 - 2e6, f0 + 2e6)[0],
            integrate.quad(lambda f: np.sin(2 * np.pi * q0 * (f - f0) / f0 * 2e-6), f0 - 2e6, f0 + 2e6)[0],
        )
        / 4e6
    )
    assert 1 - kept == pytest.approx(float(bandwidth_smearing_loss(4e6, f0, 2e-6, q0)), rel=1e-6)
    with pytest.raises(DataError, match="divisor"):
        average_channels(vs, 3)


def test_selection_options():
    vs = grid_set()
    out, notes = apply_selection(vs, stations="ROOK, HERON")
    assert set(out.station1) == {"ROOK"} and set(out.station2) == {"HERON"}
    out, _ = apply_selection(vs, exclude_stations=["TERN"])
    assert not np.isin("TERN", np.concatenate([out.station1, out.station2]))
    out, _ = apply_selection(vs, channels="0,2-3")
    assert sorted(set(out.channel)) == [0, 2, 3]
    t0, t1 = vs.time[0], vs.time[0] + 10 / 86400
    out, _ = apply_selection(vs, time_range=(str(t0), str(t1)))
    assert out.time.max() <= t1 and out.n == 6 * 3 * 4
    out, _ = apply_selection(vs, time_range=("2017-09-04T00:00:00", "2017-09-04T00:00:10"))
    assert out.n == 6 * 3 * 4  # MJD 58000 is 2017-09-04 (astropy.time)
    q = vs.uv_distance
    out, _ = apply_selection(vs, min_uv=np.median(q))
    assert out.uv_distance.min() >= np.median(q)
    out, notes = apply_selection(vs, average=20.0)
    assert out.n == vs.n // 10 and any("time smearing" in n for n in notes)
    assert parse_channels("0,2-5") == [0, 2, 3, 4, 5]


@pytest.mark.parametrize(
    "kwargs, words",
    [
        (dict(stations="ROOK,EMU"), "the data hold HERON, ROOK, TERN"),
        (dict(exclude_stations="EMU"), "EMU"),
        (dict(channels="7"), "not in the data"),
        (dict(channels="a-b"), "cannot read the channel list"),
        (dict(time_range=("yesterday", "today")), "cannot read the time"),
        (dict(max_uv=1.0), "leaves no visibilities"),
        (dict(average=-5), "positive"),
    ],
)
def test_selection_errors(kwargs, words):
    with pytest.raises(DataError, match=words):
        apply_selection(grid_set(), **kwargs)


def test_unknown_selection_keys_are_named():
    """A misspelt key in a selection (a batch manifest's ``selection`` table, a Python caller's
    dict) is refused by name, with the known keys listed (common practice: no silent ignore)."""
    from tests.helpers.real_data import real_file
    from uvfit.data.select import read_selected

    with pytest.raises(DataError, match="unknown selection key.*min_uvw"):
        read_selected(real_file("lo"), {"min_uvw": 1e7})
    with pytest.raises(DataError, match="not list"):
        read_selected(real_file("lo"), [1, 2])
    vset, _ = read_selected(real_file("lo"), {"min_uv": 1e7, "column": None})
    assert vset.n > 0
