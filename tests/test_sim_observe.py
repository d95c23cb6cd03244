"""Simulated observations: noise level, closure phases under gain errors, files that read back."""

import numpy as np
import pytest
from astropy.io import fits

import uvfit
from tests.helpers.invented import component, model_toml
from uvfit.data.select import parse_time
from uvfit.sim.array import parse_array
from uvfit.sim.observe import Observation, simulate, write_simulation

C = 299792458.0

POINT = model_toml(component("p", 1.5, shape="point"))

DOUBLE = model_toml(component("a", 1.0, fwhm=100.0), component("b", 0.4, east=-150.0, north=-250.0, fwhm=120.0))


def invented_array(n=4, sefd=(300.0, 500.0, 800.0, 1200.0, 650.0)):
    # invented stations and SEFDs
    sites = [(40.0, -105.0), (32.0, -110.0), (45.0, -80.0), (19.5, -99.0), (50.0, -120.0)][:n]
    return parse_array(
        {
            "name": "invented",
            "defaults": {"eta": 0.88},
            "station": [
                {"name": f"S{k + 1}", "lat": la, "lon": lo, "height": 500.0, "sefd": sefd[k]}
                for k, (la, lo) in enumerate(sites)
            ],
        }
    )


def model_from(text, tmp_path, name="m.toml"):
    p = tmp_path / name
    p.write_text(text)
    return uvfit.load_model(p)


def observation(**kw):
    base = dict(
        ra_deg=187.7,
        dec_deg=30.0,
        start=parse_time("2027-03-01T02:00"),
        duration_s=6 * 3600.0,
        integration_s=30.0,
        frequency_hz=86e9,
        bandwidth_hz=512e6,
        channels=2,
        source="TESTSRC",
    )
    base.update(kw)
    return Observation(**base)


def test_thermal_noise_matches_radiometer_equation(tmp_path):
    # Radiometer equation (REFERENCES.md; TMS 2017 ch. 6, from memory):
    # sigma = sqrt(SEFD_i SEFD_j) / (eta sqrt(2 dnu tau)), per real and per imaginary part.
    arr = invented_array()
    model = model_from(POINT, tmp_path)
    obs = observation()
    vs, _ = simulate(arr, model, obs, seed=11)
    sefd = dict(zip(arr.names, arr.sefd))
    s1 = np.array([sefd[s] for s in vs.station1])
    s2 = np.array([sefd[s] for s in vs.station2])
    expected = np.sqrt(s1 * s2) / (0.88 * np.sqrt(2 * (512e6 / 2) * 30.0))
    assert np.allclose(vs.sigma, expected, rtol=1e-12)
    resid = (vs.vis - model.visibilities(vs.u, vs.v, vs.frequency)) / expected
    assert vs.n > 4000
    assert abs(np.std(resid.real) - 1) < 0.02 and abs(np.std(resid.imag) - 1) < 0.02
    assert abs(np.mean(resid.real)) < 0.05 and abs(np.mean(resid.imag)) < 0.05


def _closure_phases(vs, names=("S1", "S2", "S3")):
    """arg(V12 V23 V31) per (time, channel) on one triangle, with V31 = conj(V13) (Hermitian)."""
    key = {}
    for k in range(vs.n):
        key[(vs.time[k], vs.channel[k], vs.station1[k], vs.station2[k])] = vs.vis[k]
    a, b, c = names
    out = []
    for t, ch in sorted({(t, ch) for t, ch in zip(vs.time, vs.channel)}):
        try:
            v12, v23, v13 = key[(t, ch, a, b)], key[(t, ch, b, c)], key[(t, ch, a, c)]
        except KeyError:
            continue
        out.append(np.angle(v12 * v23 * np.conj(v13)))
    return np.array(out)


def test_closure_phases_unchanged_by_gain_errors(tmp_path):
    # Closure phase arg(V12 V23 V31) is unchanged by station-based phase errors (REFERENCES.md,
    # TMS 2017 ch. 10): zero for a point source, and the model's own value for a double.
    arr = invented_array(3)
    point = model_from(POINT, tmp_path)
    obs = observation(duration_s=3 * 3600.0, integration_s=120.0, scan_length_s=600.0)
    vs, _ = simulate(arr, point, obs, seed=3, gain_error=0.2, phase_error_deg=60.0, thermal=False)
    cp = _closure_phases(vs)
    assert len(cp) > 20
    assert np.max(np.abs(cp)) < 1e-12
    # the gains really were applied: the visibility phases are far from zero
    assert np.std(np.angle(vs.vis)) > 0.3
    double = model_from(DOUBLE, tmp_path, "d.toml")
    vs_d, _ = simulate(arr, double, obs, seed=4, gain_error=0.2, phase_error_deg=60.0, thermal=False)
    clean, _ = simulate(arr, double, obs, seed=4, thermal=False)
    diff = np.angle(np.exp(1j * (_closure_phases(vs_d) - _closure_phases(clean))))
    assert np.max(np.abs(diff)) < 1e-10 and np.std(_closure_phases(clean)) > 0.01


def test_gains_constant_within_a_scan(tmp_path):
    # A point source's observed phase on one baseline is gain phase only: constant within a scan.
    arr = invented_array(2)
    vs, layout = simulate(
        arr,
        model_from(POINT, tmp_path),
        observation(channels=1, scan_length_s=600.0),
        seed=5,
        phase_error_deg=30.0,
        thermal=False,
    )
    phase = np.angle(vs.vis)
    for s in np.unique(layout.scan):
        assert np.ptp(phase[layout.scan == s]) < 1e-12
    assert len(np.unique(np.round(phase, 9))) == len(np.unique(layout.scan))


def test_seed_reproduces_and_differs(tmp_path):
    arr = invented_array(3)
    m = model_from(POINT, tmp_path)
    a, _ = simulate(arr, m, observation(duration_s=3600.0), seed=1, gain_error=0.1)
    b, _ = simulate(arr, m, observation(duration_s=3600.0), seed=1, gain_error=0.1)
    c, _ = simulate(arr, m, observation(duration_s=3600.0), seed=2, gain_error=0.1)
    assert np.array_equal(a.vis, b.vis) and not np.array_equal(a.vis, c.vis)
    assert a.meta["seed"] == 1


def test_channels_scale_uv_with_frequency(tmp_path):
    arr = invented_array(2)
    vs, _ = simulate(arr, model_from(POINT, tmp_path), observation(channels=4, bandwidth_hz=4e9))
    f = np.unique(vs.frequency)
    assert np.allclose(f, 86e9 + (np.arange(4) - 1.5) * 1e9)
    t0 = vs.time == vs.time[0]
    ratio = vs.u[t0] / vs.frequency[t0]
    assert np.allclose(ratio, ratio[0], rtol=1e-12)  # u / nu is the same baseline in metres


@pytest.mark.parametrize("suffix", [".uvfits", ".ecsv"])
def test_written_file_reads_back_same_sky(tmp_path, suffix):
    arr = invented_array(4)
    model = model_from(DOUBLE, tmp_path)
    vs, _ = simulate(arr, model, observation(duration_s=2 * 3600.0, integration_s=60.0), seed=9, gain_error=0.05)
    path = tmp_path / f"sim{suffix}"
    write_simulation(vs, path)
    back = uvfit.read(path)
    assert back.n == vs.n
    order = np.lexsort((back.channel, back.station2, back.station1, back.time))
    ref = np.lexsort((vs.channel, vs.station2, vs.station1, vs.time))
    for name in ("u", "v", "w", "frequency"):
        assert np.allclose(getattr(back, name)[order], getattr(vs, name)[ref], rtol=1e-9, atol=1e-6)
    assert np.allclose(back.vis[order], vs.vis[ref], rtol=1e-9, atol=1e-12)
    assert np.allclose(back.sigma[order], vs.sigma[ref], rtol=1e-6)
    assert back.source == "TESTSRC"
    assert np.isclose(back.ra_deg, 187.7) and np.isclose(back.dec_deg, 30.0)
    assert np.allclose(back.stations.xyz[:4], arr.xyz, atol=1e-3)
    # same sky: the model evaluated on the read-back (u, v) is the noiseless part of the data
    clean, _ = simulate(arr, model, observation(duration_s=2 * 3600.0, integration_s=60.0), thermal=False)
    assert np.allclose(model.visibilities(back.u, back.v, back.frequency)[order], clean.vis[ref], rtol=1e-9, atol=1e-12)
    if suffix == ".uvfits":
        # independent reader: astropy.io.fits sees groups, header and the seed in the history
        with fits.open(path) as h:
            assert h[0].header["OBJECT"] == "TESTSRC"
            assert h[0].header["UVFSEED"] == 9
            assert any("seed 9" in str(line) for line in h[0].header["HISTORY"])
            assert h[0].header["GCOUNT"] * 2 >= vs.n  # 2 channels per group at most
            assert "AIPS AN" in h
    else:
        assert back.meta.get("seed") == 9


def test_planning_example_files_load_and_simulate():
    # the worked example's invented array and models are valid and simulate (kept small here)
    import os

    from uvfit.sim.array import load_array

    here = os.path.join(os.path.dirname(__file__), "..", "examples", "planning")
    arr = load_array(os.path.join(here, "array.toml"))
    assert len(arr) == 7 and arr.min_elevation.tolist().count(15.0) == 1
    # continental spread: longest baseline a few thousand km (common practice for such arrays)
    assert 3.0e6 < arr.max_baseline_m() < 6.0e6
    double = uvfit.load_model(os.path.join(here, "double.toml"))
    uvfit.load_model(os.path.join(here, "single.toml"))
    obs = observation(
        ra_deg=210.547, dec_deg=38.753, start=parse_time("2027-04-10T03:00"), duration_s=3600.0, integration_s=600.0
    )
    vs, layout = simulate(arr, double, obs, seed=1)
    assert vs.n == 6 * 21 * 2 and layout.summary()["baselines_with_data"] == 21
