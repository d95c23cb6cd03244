"""Closures averaged over scans, sites, scans and the phase-calibration hint.

Each check names its outside reference beside it: a direct computation of the definition, finite
differences, the truth of an invented simulation, or the real 3C 279 files in tests/data (their
antenna table, their CSV export made by the data's publishers).
"""

import numpy as np
import pytest
from click.testing import CliRunner

import uvfit
from tests.helpers.closure_tools import point_double, scan_vset
from tests.helpers.real_data import real_file
from uvfit.cli import cli
from uvfit.data.scans import scan_index, scan_structure
from uvfit.data.select import apply_selection
from uvfit.data.sites import find_sites, same_site_rows
from uvfit.data.visset import StationTable, VisibilitySet
from uvfit.infer.lsq import fit
from uvfit.stats.closures.build import build_closures
from uvfit.stats.modes import make_statistic
from uvfit.stats.phases import phase_calibration


def double(ratio=0.3, sep=25.0):
    return point_double(ratio, sep)


def hand_made_scan(n_times=7, seed=4):
    """Four invented stations far apart, every baseline at every time of one scan, random
    visibilities and sigmas; the A-C baseline stored as C-A."""
    rng = np.random.default_rng(seed)
    names = ["A", "B", "C", "D"]
    xyz = np.array([[6.4e6, 0, 0], [0, 6.4e6, 0], [0, 0, 6.4e6], [-6.4e6, 0, 0]])
    pairs = [("A", "B"), ("B", "C"), ("C", "A"), ("A", "D"), ("B", "D"), ("C", "D")]
    s1, s2, t = [], [], []
    for k in range(n_times):
        for a, b in pairs:
            s1.append(a)
            s2.append(b)
            t.append(60000.0 + k * 10.0 / 86400.0)
    n = len(t)
    vis = (1.0 + rng.uniform(0, 1, n)) * np.exp(1j * rng.uniform(-np.pi, np.pi, n))
    sigma = rng.uniform(0.05, 0.1, n)
    return VisibilitySet(
        u=rng.uniform(1e8, 1e9, n),
        v=rng.uniform(1e8, 1e9, n),
        w=None,
        time=np.array(t),
        frequency=230e9,
        station1=np.array(s1),
        station2=np.array(s2),
        vis=vis,
        sigma=sigma,
        stations=StationTable(names, xyz),
    )


def test_scan_averaged_closure_phase_is_the_argument_of_the_mean_bispectrum():
    # Outside reference: the definition computed directly (TMS 2017 ch. 9; Rogers, Doeleman &
    # Moran 1995): psi = arg sum_t V_AB V_BC V_CA, with V_CA the row stored C-A as it is.
    vs = hand_made_scan()
    cp = build_closures(vs, closure_average="scan", snr_cut=0, kinds=("phase",), site_distance=0)["phase"]
    assert cp.n == 3  # (4-1)(4-2)/2 independent triangles in the one scan
    for label, value in zip(cp.labels, cp.value):
        a, b, c = label.split("-")

        def v(x, y):
            m = (vs.station1 == x) & (vs.station2 == y)
            if m.any():
                return vs.vis[m]
            return np.conj(vs.vis[(vs.station1 == y) & (vs.station2 == x)])

        direct = np.angle(np.sum(v(a, b) * v(b, c) * v(c, a)))
        assert np.angle(np.exp(1j * (value - direct))) == pytest.approx(0.0, abs=1e-12)


def test_scan_averaged_log_closure_amplitude_is_debiased_power():
    # Outside reference: the formula computed directly: X = mean|V|^2 - 2 mean sigma^2 per
    # baseline, log A = 0.5 (log X + var X / (2 X^2)), var X = (4 X s2 + 4 s2^2) / n (incoherent
    # averaging, TMS 2017 ch. 9). With a single scan there are no neighbouring intervals, so the
    # reference power is the scan's own.
    vs = hand_made_scan()
    ca = build_closures(vs, closure_average="scan", snr_cut=0, kinds=("amplitude",), site_distance=0)["amplitude"]
    assert ca.n == 2  # N(N-3)/2 for N = 4

    def log_amp(x, y):
        m = ((vs.station1 == x) & (vs.station2 == y)) | ((vs.station1 == y) & (vs.station2 == x))
        s2 = np.mean(vs.sigma[m] ** 2)
        big_x = np.mean(np.abs(vs.vis[m]) ** 2) - 2 * s2
        var = (4 * big_x * s2 + 4 * s2**2) / m.sum()
        return 0.5 * (np.log(big_x) + var / (2 * big_x**2))

    for label, value in zip(ca.labels, ca.value):
        a, b, c, d = label.split("-")
        direct = log_amp(a, b) + log_amp(c, d) - log_amp(a, c) - log_amp(b, d)
        assert value == pytest.approx(direct, abs=1e-12)


@pytest.mark.parametrize("mode", ["closure_phase", "closure_amplitude"])
def test_averaged_statistics_jacobian_matches_finite_differences(mode):
    # Outside reference: central finite differences of the statistic's own prediction.
    vs = scan_vset(double(), n_stations=5, n_scans=3, per_scan=6, sigma=0.05, seed=2)
    m = double(0.4, 20.0)
    st = make_statistic(mode, vs, m, closure_average="scan")
    th = m.get_free()
    _, jac = st.predict_jacobian(th)
    eps = 1e-6
    num = np.stack(
        [(st.predict(th + eps * e) - st.predict(th - eps * e)) / (2 * eps) for e in np.eye(len(th))],
        axis=1,
    )
    np.testing.assert_allclose(jac, num, atol=1e-6 * max(1.0, np.abs(num).max()))


def test_scan_averaged_fit_recovers_a_double_without_noise():
    # Outside reference: the injected truth of the simulation (random station phases at every
    # integration cancel in the closures).
    vs = scan_vset(double(), n_stations=6, n_scans=4, per_scan=6, sigma=1e-4, seed=0)
    start = double(0.4, 18.0)
    res = fit(make_statistic("closure", vs, start, closure_average=120))
    assert res.value("pair.flux_ratio") == pytest.approx(0.3, abs=1e-3)
    assert res.value("pair.separation") == pytest.approx(25.0, abs=1e-2)


def test_scans_of_3c279_from_gaps_agree_with_the_csv_export():
    # Outside reference: the CSV export made by the data's publishers (its own times, in hours):
    # scans counted from gaps longer than 4 integrations (40 s) there.
    vs = uvfit.read(real_file("lo"))
    hours = np.loadtxt(real_file("lo", "csv"), delimiter=",", usecols=0, comments="#")
    t = np.unique(hours) * 3600.0
    expected = 1 + int(np.count_nonzero(np.diff(t) > 40.0))
    s = scan_structure(vs)
    assert s["n_scans"] == expected
    assert s["scan_gap_s"] == pytest.approx(40.0, rel=0.01)
    scan, _, _ = scan_index(vs, scan_gap=1e6)  # one long gap limit: one scan
    assert np.all(scan == 0)


def test_sites_of_3c279_from_the_antenna_table():
    # Outside reference: the files' antenna table (AIPS AN) and the array described by Kim et al.
    # 2020, A&A 640, A69: ALMA (AA) and APEX (AP) about 2.6 km apart on Chajnantor, the JCMT (JC)
    # and the SMA (SM) about 160 m apart on Maunakea. The table also lists SR at SM's position
    # (0 m), without rows in these files.
    for band in ("lo", "hi"):
        vs = uvfit.read(real_file(band))
        sites = find_sites(vs)
        assert sites.groups == [["AA", "AP"], ["JC", "SM"]]
        d = {tuple(p[:2]): p[2] for p in sites.pairs}
        assert d[("AA", "AP")] == pytest.approx(2636, abs=5)
        assert d[("JC", "SM")] == pytest.approx(163, abs=2)
        names = vs.stations.names
        xyz = vs.stations.xyz
        assert np.linalg.norm(xyz[names.index("SM")] - xyz[names.index("SR")]) < 1.0
        assert {p[3] for p in sites.pairs} == {"position"}


def test_same_site_baselines_are_dropped_and_trivial_loops_avoided():
    # Outside reference: the 3C 279 antenna table (as above). No closure holds two stations of
    # one site; excluding same-site baselines leaves no baseline within a site.
    vs = uvfit.read(real_file("lo")).good()
    sites = find_sites(vs)
    out, notes = apply_selection(vs, exclude_same_site=True)
    assert not np.any(same_site_rows(out, sites))
    assert out.n == vs.n - int(np.count_nonzero(same_site_rows(vs, sites)))
    cs = build_closures(vs)
    for kind in ("phase", "amplitude"):
        for label in cs[kind].labels:
            st = set(label.split("-"))
            assert not {"AA", "AP"} <= st and not {"JC", "SM"} <= st
    every = build_closures(vs, site_distance=0)
    assert every["phase"].n > cs["phase"].n


def test_phase_hint_on_real_and_invented_data():
    # Outside references: the real 3C 279 files (their phases on the baselines within a site are
    # far from 0), the real VLA file of tests/data/ms (phases known to be uncalibrated), and the
    # invented demo data (simulated with calibrated phases).
    from uvfit.demo import demo_file

    for band in ("lo", "hi"):
        pc = phase_calibration(uvfit.read(real_file(band)))
        assert pc["calibrated"] is False and "closure" in pc["hint"]
    vla = uvfit.read(real_file("lo").parents[1] / "ms" / "day2_TDEM0003_10s_norx_1src_1spw.ms")
    assert phase_calibration(vla)["calibrated"] is False
    assert phase_calibration(uvfit.read(demo_file("uvd0917.uvfits")))["calibrated"] is True


def test_info_prints_scans_sites_and_the_phase_hint():
    # Outside reference: the 3C 279 antenna table and times (as above).
    res = CliRunner().invoke(cli, ["info", str(real_file("lo"))])
    assert res.exit_code == 0, res.output
    assert "AA-AP" in res.output and "JC-SM" in res.output
    assert "scans" in res.output and "uncalibrated" in res.output


@pytest.mark.parametrize("command", ["fit", "sample", "compare", "forecast", "closures", "profile", "jackknife"])
def test_closure_options_on_every_command_that_builds_closures(command):
    # common practice: one option, one default, one meaning on every such command
    res = CliRunner().invoke(cli, [command, "--help"])
    assert res.exit_code == 0
    for opt in ("--snr-cut", "--closure-average", "--scan-gap"):
        assert opt in res.output


def test_closure_options_refused_for_a_visibility_mode(capsys):
    # common practice: bad input gives exit code 2 and one line naming the option
    from uvfit.cli import main
    from uvfit.demo import demo_file

    with pytest.raises(SystemExit) as exc:
        main(["fit", demo_file("uvd0917.uvfits"), demo_file("two.toml"), "--closure-average", "scan"])
    err = capsys.readouterr().err.strip()
    assert exc.value.code == 2
    assert "--closure-average applies only" in err
    assert "Traceback" not in err and len(err.splitlines()) == 1


# ------------------------------------------------------------------ low SNR: averaged closures
#: the invented low-SNR case: a 1 Jy double, SNR 1.5 per 10-s visibility, 5-minute scans
LOW_SIGMA = 1.0 / 1.5
DRAWS = 20


def low_snr_pulls(draws=DRAWS, **options):
    """(fits made, flux-ratio pulls) of closure fits to ``draws`` invented data sets."""
    made, pulls = 0, []
    for seed in range(draws):
        vs = scan_vset(double(), n_stations=8, n_scans=12, per_scan=30, sigma=LOW_SIGMA, seed=seed)
        try:
            res = fit(make_statistic("closure", vs, double(), **options), starts=1)  # start at the truth
        except uvfit.UvfitError:
            continue
        made += 1
        pulls.append((res.value("pair.flux_ratio") - 0.3) / res.error("pair.flux_ratio"))
    return made, np.array(pulls)


@pytest.mark.slow
def test_scan_averaged_closures_fit_low_snr_data_per_integration_cut_cannot():
    # Outside reference: the injected truth of the simulation (flux ratio 0.3; 8 invented
    # stations, 12 scans of 30 x 10 s, random station phases every integration, 20 draws).
    # Measured when written (40 draws for the averaged fits): scan-averaged closures fit every
    # draw, flux-ratio pull mean +0.72, spread 1.93 (separation +0.42, 1.80); per-integration
    # closures with an SNR cut of 1.5 fit 19 of 20, pull mean -2.31, spread 2.10 (-1.59 over the
    # first 10); with a cut of 2
    # most draws leave too few closures. The same case at SNR 5 per visibility gives +0.11 / 1.06
    # per integration and +0.44 / 0.77 averaged. The goal of a mean pull within 0.3 at SNR 1.5 is
    # NOT reached: the averaged errors are about half the scatter there (see the README caution).
    made, averaged = low_snr_pulls(closure_average="scan")
    assert made == DRAWS
    made_cut, cut = low_snr_pulls(draws=10, snr_cut=1.5)  # the slower fits: 10 draws suffice
    assert abs(averaged.mean()) < abs(cut.mean())
    assert abs(averaged.mean()) < 1.2 and cut.mean() < -1.0


def test_closure_panels_worst_first_one_per_distinct_triangle():
    # Outside reference: the reduced chi2 computed by hand on a made-up series; A and A2 are on
    # one site, so A-B-C and A2-B-C are one distinct triangle and A-A2-B is trivial (common
    # practice).
    from uvfit.show.plots import choose_loops

    labels = ["A-B-C"] * 2 + ["A2-B-C"] * 2 + ["A-A2-B"] * 2 + ["B-C-D"] * 2
    series = {
        "triangle": np.array(labels),
        "phase": np.array([0.1, -0.1, 0.5, 0.5, 2.0, 2.0, 0.2, 0.2]),
        "model": np.zeros(8),
        "sigma": np.full(8, 0.1),
        "shortest_uv": np.ones(8),
        "longest_uv": 1.0,
    }
    sites = [["A", "A2"]]
    assert choose_loops(series, "worst", 6, sites) == ["A2-B-C", "B-C-D"]
    assert choose_loops(series, ["C-B-A"], 6, sites) == ["A-B-C"]
    with pytest.raises(uvfit.UvfitError, match="no closure"):
        choose_loops(series, ["A-B-X"], 6, sites)
