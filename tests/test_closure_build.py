"""Construction of closure phases and log closure amplitudes: invariance, counts, rank, errors."""

from itertools import combinations
from math import comb

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from uvfit.data.visset import VisibilitySet
from uvfit.errors import DataError
from uvfit.stats.closures import ClosurePhaseStatistic, ClosureStatistic, check_closures
from uvfit.stats.closures.build import build_closures


def snapshot_set(n_stations, n_times=1, seed=0, swap=0.5, sigma=0.05):
    """Every baseline at every time, random visibilities, some baselines stored the other way."""
    rng = np.random.default_rng(seed)
    names = [f"Q{i}" for i in range(n_stations)]
    rows = []
    for t in range(n_times):
        for i, j in combinations(range(n_stations), 2):
            if rng.random() < swap:
                i, j = j, i
            rows.append((t, i, j))
    rows = np.array(rows)
    n = len(rows)
    vis = (1.0 + rng.uniform(0, 2, n)) * np.exp(1j * rng.uniform(-np.pi, np.pi, n))
    names = np.array(names)
    return VisibilitySet(
        u=rng.normal(size=n),
        v=rng.normal(size=n),
        w=None,
        time=59000.0 + rows[:, 0] / 8640.0,
        frequency=1e11,
        station1=names[rows[:, 1]],
        station2=names[rows[:, 2]],
        vis=vis,
        sigma=np.full(n, sigma),
    )


def corrupt(vset, gains_by_time):
    """Station-based gains: V_ab -> g_a conj(g_b) V_ab (TMS 2017 ch. 10, as quoted in REFERENCES.md)."""
    t = np.unique(vset.time, return_inverse=True)[1]
    g = gains_by_time
    return vset.with_vis(vset.vis * g[t, vset.ant1] * np.conj(g[t, vset.ant2]))


@settings(max_examples=40, deadline=None)
@given(n=st.integers(3, 8), seed=st.integers(0, 10_000), full=st.booleans())
def test_station_gains_leave_closures_unchanged(n, seed, full):
    # Outside source: the closure relations of REFERENCES.md (TMS 2017 ch. 10): arg(V12 V23 V31)
    # and |V12||V34|/(|V13||V24|) are unchanged by any station-based complex gain.
    rng = np.random.default_rng(seed)
    vs = snapshot_set(n, n_times=3, seed=seed)
    g = rng.uniform(0.5, 2.0, (3, n)) * np.exp(1j * rng.uniform(-np.pi, np.pi, (3, n)))
    bad = corrupt(vs, g)
    c0 = build_closures(vs, snr_cut=0, full=full)
    c1 = build_closures(bad, snr_cut=0, full=True) if full else None
    for kind in ("phase", "amplitude"):
        cs = c0[kind]
        # the same closures evaluated on the corrupted visibilities
        diff = cs.evaluate(bad.vis) - cs.value
        if kind == "phase":
            diff = np.angle(np.exp(1j * diff))
        assert np.all(np.abs(diff) < 1e-9)
        if full:  # the full set does not depend on the SNR ordering: built anew, it is the same
            assert np.array_equal(c1[kind].rows, cs.rows)
            d = c1[kind].value - cs.value
            if kind == "phase":
                d = np.angle(np.exp(1j * d))
            assert np.all(np.abs(d) < 1e-9)


@pytest.mark.parametrize("n", range(3, 11))
def test_counts_and_independence(n):
    # Outside source: (N-1)(N-2)/2 independent closure phases and N(N-3)/2 closure amplitudes per
    # snapshot of N stations (TMS 2017 ch. 10, from memory, as quoted in REFERENCES.md); the full set
    # has C(N,3) triangles and 3 C(N,4) closure amplitudes (combinatorics).
    vs = snapshot_set(n, seed=n)
    nr = build_closures(vs, snr_cut=0)
    fu = build_closures(vs, snr_cut=0, full=True)
    assert nr["phase"].n == (n - 1) * (n - 2) // 2
    assert nr["amplitude"].n == n * (n - 3) // 2
    assert fu["phase"].n == comb(n, 3)
    assert fu["amplitude"].n == 3 * comb(n, 4)
    for kind, count in (("phase", (n - 1) * (n - 2) // 2), ("amplitude", n * (n - 3) // 2)):
        m, _ = nr[kind].design_matrix()
        mf, _ = fu[kind].design_matrix()
        if count:
            assert np.linalg.matrix_rank(m) == count  # independent
            assert np.linalg.matrix_rank(mf) == count  # and spanning everything there is
            assert np.linalg.matrix_rank(np.vstack([m, mf[:, : m.shape[1]]])) == count


def test_reference_station_is_the_highest_snr_one():
    # With a complete snapshot every chosen triangle runs through the station of largest summed SNR
    # (the reference-station construction of REFERENCES.md).
    vs = snapshot_set(6, seed=3)
    boost = (vs.station1 == "Q4") | (vs.station2 == "Q4")
    vs = vs.with_vis(vs.vis * np.where(boost, 10.0, 1.0))
    cp = build_closures(vs, snr_cut=0)["phase"]
    ref = vs.stations.index("Q4")
    assert np.all(np.any(cp.stations == ref, axis=1))


def test_orientation_of_stored_baselines_does_not_matter():
    # Hermitian symmetry (REFERENCES.md): a row stored on (b, a) with conj(V) and (-u, -v) is the
    # same measurement; every closure must come out the same.
    vs = snapshot_set(5, n_times=2, seed=7, swap=0.0)
    flip = np.arange(vs.n) % 2 == 0
    other = vs.copy()
    other.station1 = np.where(flip, vs.station2, vs.station1)
    other.station2 = np.where(flip, vs.station1, vs.station2)
    other.vis = np.where(flip, np.conj(vs.vis), vs.vis)
    other.u = np.where(flip, -vs.u, vs.u)
    other.v = np.where(flip, -vs.v, vs.v)
    a = build_closures(vs, snr_cut=0, full=True)
    b = build_closures(other, snr_cut=0, full=True)
    for kind in ("phase", "amplitude"):
        assert np.array_equal(a[kind].labels, b[kind].labels)
        d = a[kind].value - b[kind].value
        assert np.allclose(np.angle(np.exp(1j * d)) if kind == "phase" else d, 0.0, atol=1e-12)


def test_closure_phase_error_matches_monte_carlo():
    # Outside check: the linear propagation sigma_psi = sqrt(sum (sigma_k/|V_k|)^2) (Chael et al.
    # 2018, ApJ 857, 23, as quoted in REFERENCES.md) against the scatter of closure phases and log
    # closure amplitudes of many noisy copies at SNR 30 (numpy random draws).
    rng = np.random.default_rng(5)
    vs = snapshot_set(4, seed=11, sigma=0.05)
    cs = build_closures(vs, snr_cut=0)
    draws = {"phase": [], "amplitude": []}
    for _ in range(3000):
        noisy = vs.vis + 0.05 * (rng.normal(size=vs.n) + 1j * rng.normal(size=vs.n))
        for kind in draws:
            draws[kind].append(cs[kind].evaluate(noisy))
    for kind in draws:
        x = np.array(draws[kind])
        if kind == "phase":
            x = np.angle(np.exp(1j * (x - cs[kind].value)))
        sd = x.std(axis=0)
        assert np.allclose(sd, cs[kind].sigma, rtol=0.08)


def test_snr_cut_drops_faint_visibilities():
    vs = snapshot_set(5, seed=2)
    faint = (vs.station1 == "Q0") | (vs.station2 == "Q0")
    vs = vs.with_vis(np.where(faint, vs.vis * 0.05 / np.abs(vs.vis), vs.vis))  # SNR 1 on Q0
    cs = build_closures(vs, snr_cut=3)
    q0 = vs.stations.index("Q0")
    assert not np.any(cs["phase"].stations == q0)
    # the four other stations remain: (4-1)(4-2)/2 = 3 phases and 4(4-3)/2 = 2 amplitudes
    assert cs["phase"].n == 3
    assert not np.any(cs["amplitude"].stations == q0)
    assert cs["amplitude"].n == 2


def test_systematic_floor_enters_in_quadrature():
    vs = snapshot_set(4, seed=4)
    a = build_closures(vs, snr_cut=0)["phase"]
    b = build_closures(vs, snr_cut=0, systematic=0.1)["phase"]
    rel = np.sqrt((vs.sigma / np.abs(vs.vis)) ** 2 + 0.1**2)
    assert np.allclose(b.sigma, np.sqrt(np.sum(rel[b.rows] ** 2, axis=1)))
    assert np.all(b.sigma > a.sigma)


def two_station_set():
    names = np.array(["Q0", "Q1"])
    return VisibilitySet(
        u=[1.0, 2.0],
        v=[0.0, 0.0],
        w=None,
        time=[1.0, 2.0],
        frequency=1e9,
        station1=names[[0, 0]],
        station2=names[[1, 1]],
        vis=[1.0, 1.0],
        sigma=[0.1, 0.1],
    )


def test_fewer_than_three_stations_is_a_clear_error():
    vs = two_station_set()
    with pytest.raises(DataError, match="three"):
        check_closures(vs)
    with pytest.raises(DataError, match="three"):
        ClosurePhaseStatistic(vs, None)
    with pytest.raises(DataError, match="three"):
        ClosureStatistic(vs, None)


def test_non_simultaneous_rows_form_no_closure():
    # three baselines of a triangle, but each at its own time: no closure phase
    names = np.array(["Q0", "Q1", "Q2"])
    vs = VisibilitySet(
        u=[1.0, 2.0, 3.0],
        v=[0.0, 0.0, 0.0],
        w=None,
        time=[1.0, 2.0, 3.0],
        frequency=1e9,
        station1=names[[0, 1, 0]],
        station2=names[[1, 2, 2]],
        vis=[1.0, 1.0, 1.0],
        sigma=[0.1, 0.1, 0.1],
    )
    with pytest.raises(DataError, match="at most 2 station"):
        check_closures(vs)


@pytest.mark.parametrize("n", [5, 6, 8])
def test_missing_baseline_keeps_every_independent_closure(n):
    # One baseline missing (here one through the reference station): the independent closure
    # phases are the cycle rank E - N + 1 = (N-1)(N-2)/2 - 1 and the independent closure amplitudes
    # E - N = N(N-3)/2 - 1 (graph theory: the gain-free subspace of the baseline space).
    vs = snapshot_set(n, seed=n + 20)
    boost = (vs.station1 == "Q0") | (vs.station2 == "Q0")
    vs = vs.with_vis(vs.vis * np.where(boost, 10.0, 1.0))  # Q0 becomes the reference
    drop = ((vs.station1 == "Q0") & (vs.station2 == "Q1")) | ((vs.station1 == "Q1") & (vs.station2 == "Q0"))
    vs = vs.subset(~drop)
    cs = build_closures(vs, snr_cut=0)
    for kind, count in (("phase", (n - 1) * (n - 2) // 2 - 1), ("amplitude", n * (n - 3) // 2 - 1)):
        assert cs[kind].n == count
        m, _ = cs[kind].design_matrix()
        assert np.linalg.matrix_rank(m) == count


def test_three_stations_give_phases_but_no_amplitudes():
    from uvfit.stats.closures import LogClosureAmplitudeStatistic

    vs = snapshot_set(3, n_times=4, seed=1)
    with pytest.raises(DataError, match="four"):
        LogClosureAmplitudeStatistic(vs, None)
    res = check_closures(vs)
    assert res["n_closure_phases"] == 4 and res["n_closure_amplitudes"] == 0
