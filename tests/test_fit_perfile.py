"""Parameters separate per data file (``per = "file"``) in a joint fit.

Sources of the truth, named beside each check:
- the real 3C 279 bands in tests/data/3c279 and their publishers' CSV exports (ABOUT.md), fitted
  by hand with scipy.optimize.least_squares on a numpy model written here from the textbook
  visibilities of a point and a circular Gaussian (TMS 2017, ch. 3; the Gaussian's transform
  exp(-pi^2 fwhm^2 q^2 / (4 ln 2)) is common practice);
- the debiased amplitude sqrt(A^2 - sigma^2) of the amplitude mode (common practice);
- invented two-band data simulated from a known model (uvfit's simulate task, an invented array).
"""

import math

import numpy as np
import pytest
from scipy.optimize import least_squares

from tests.helpers.arrays import five_station_array
from tests.helpers.real_data import real_file
from uvfit import tasks
from uvfit.errors import UvfitError
from uvfit.sky.modelfile import loads

MODEL = """angular_unit = "uas"
[[component]]
name = "core"
shape = "point"
flux = { value = 1.2, per = "file" }
east = { value = 0.0, fixed = true }
north = { value = 0.0, fixed = true }
[[component]]
name = "knot"
shape = "gaussian"
flux = { value = 7.4, per = "file" }
east = -110.0
north = 75.0
fwhm = { value = 95.0, min = 0.0, max = 300.0 }
"""

UAS = math.pi / 180.0 / 3600.0 / 1e6


def _csv_rows(band):
    cols = np.genfromtxt(
        real_file(band, "csv"),
        delimiter=",",
        comments="#",
        dtype=None,
        encoding="ascii",
        names=["t", "s1", "s2", "u", "v", "amp", "phase", "sigma"],
    )
    return cols["u"], cols["v"], cols["amp"], cols["sigma"]


def _separation_and_angle(east, north):
    """(separation, position angle mod 180 deg) of the knot from the core at the origin; the angle
    is taken mod 180 because amplitudes do not tell a model from its point reflection."""
    return math.hypot(east, north), math.degrees(math.atan2(east, north)) % 180.0


def _hand_joint_fit(start):
    """The joint fit done by hand: both bands' CSV rows stacked, one flux column per band, the
    geometry shared; amplitudes debiased, weights 1 / sigma^2."""
    rows = [_csv_rows(band) for band in ("lo", "hi")]
    band = np.concatenate([np.full(r[0].size, k) for k, r in enumerate(rows)])
    u, v, amp, sigma = (np.concatenate([r[j] for r in rows]) for j in range(4))
    datum = np.sqrt(np.maximum(amp**2 - sigma**2, 0.0))
    q2 = u**2 + v**2

    def residuals(x):
        core = np.where(band == 0, x[0], x[1])
        knot = np.where(band == 0, x[2], x[3])
        east, north, fwhm = x[4] * UAS, x[5] * UAS, x[6] * UAS
        vis = core + knot * np.exp(-(math.pi**2) * fwhm**2 * q2 / (4 * math.log(2))) * np.exp(
            -2j * math.pi * (u * east + v * north)
        )
        return (datum - np.abs(vis)) / sigma

    return least_squares(residuals, start, x_scale="jac", xtol=1e-15, ftol=1e-15, gtol=1e-15, max_nfev=2000).x


def test_joint_fit_of_the_3c279_bands_with_per_band_fluxes(real_data):
    files = [str(real_file("lo")), str(real_file("hi"))]
    report = tasks.fit(files, loads(MODEL), mode="amplitude", starts=1, resolved_test=False, rescale_errors=True)
    rec = report.to_dict()
    p = rec["parameters"]
    # one flux per band, reported per file; the geometry shared
    assert [f["data"] for f in rec["files"]] == files
    for k, entry in enumerate(rec["files"]):
        assert entry["parameters"]["core.flux"]["name"] == f"core.flux@{k + 1}"
        assert entry["parameters"]["knot.flux"]["value"] == p[f"knot.flux@{k + 1}"]["value"]
    assert "knot.east@1" not in p and p["knot.flux"]["tie"] == "knot.flux@1"
    # the hand fit on the publishers' CSV rows (scipy.optimize.least_squares), started elsewhere
    x = _hand_joint_fit(np.array([1.2, 1.2, 7.4, 7.4, -110.0, 75.0, 95.0]))
    hand_sep, hand_pa = _separation_and_angle(x[4], x[5])
    # uvfit's joint statistic (per-file model, stacked rows) minimised to the same tolerance as
    # the hand fit: the same minimum to 1e-6
    stat = report.result.statistic
    names = stat.model.free_names
    tight = least_squares(
        stat.residuals, stat.model.get_free(), jac=stat.jacobian, x_scale="jac", xtol=1e-15, ftol=1e-15, gtol=1e-15
    ).x
    got = dict(zip(names, tight))
    ours = [got[n] for n in ("core.flux@1", "core.flux@2", "knot.flux@1", "knot.flux@2", "knot.fwhm")]
    assert ours == pytest.approx([*x[:4], x[6]], rel=1e-6)
    sep, pa = _separation_and_angle(got["knot.east"], got["knot.north"])
    assert sep == pytest.approx(hand_sep, rel=1e-6)
    assert pa == pytest.approx(hand_pa, abs=1e-6 * 180.0)
    # the task's own fit stops at the fitter's default tolerance (a relative change of chi2 of
    # 1e-8, scipy's default ftol): within a small part of its error of that minimum
    d = rec["derived"]
    sep, pa = _separation_and_angle(p["knot.east"]["value"], p["knot.north"]["value"])
    assert abs(sep - hand_sep) < 0.1 * d["core-knot.separation"]["error"]
    assert abs(pa - hand_pa) < 0.1 * d["core-knot.position_angle"]["error"]
    # the fluxes of the two bands differ by more than their errors (real data: 227 and 229 GHz)
    assert abs(p["knot.flux@1"]["value"] - p["knot.flux@2"]["value"]) > 3 * p["knot.flux@1"]["error"]
    # each band fitted alone lies inside the spread of the joint fit's (rescaled) errors
    for path in files:
        alone = tasks.fit(path, loads(MODEL), mode="amplitude", starts=1, resolved_test=False).to_dict()
        q = alone["parameters"]
        assert "core.flux@1" in q and "core.flux@2" not in q
        s1, a1 = _separation_and_angle(q["knot.east"]["value"], q["knot.north"]["value"])
        assert abs(s1 - sep) < 3 * d["core-knot.separation"]["error"], (path, s1, sep)
        assert abs(a1 - pa) < 3 * d["core-knot.position_angle"]["error"], (path, a1, pa)


ARRAY = five_station_array()
INVENTED = """angular_unit = "mas"
[[component]]
name = "core"
shape = "point"
flux = {{ value = {core}, min = 0.0{per} }}
east = 0.0
north = 0.0
[[component]]
name = "knot"
shape = "gaussian"
flux = {{ value = 0.5, min = 0.0 }}
east = {{ value = -0.9, min = -3.0, max = 3.0 }}
north = {{ value = -0.5, min = -3.0, max = 3.0 }}
fwhm = {{ value = 0.4, min = 0.0, max = 3.0 }}
"""


def _two_bands():
    sets = []
    for k, (freq, core) in enumerate((("15GHz", 1.0), ("22GHz", 1.4))):
        truth = loads(INVENTED.format(core=core, per=""))
        obs = tasks.observation("13h", "+41d", "2025-03-01T00:00", "6h", freq, integration="1200s")
        sets.append(tasks.simulate(ARRAY, truth, obs, seed=40 + k).vset)
    return sets


def test_per_file_fluxes_recover_invented_band_fluxes_and_survive_a_saved_model(tmp_path):
    sets = _two_bands()
    start = loads(INVENTED.format(core=1.2, per=', per = "file"'))
    report = tasks.fit(sets, start, starts=2, resolved_test=False)
    p = report.to_dict()["parameters"]
    # the invented truth (uvfit's simulate task): 1.0 Jy in band 1, 1.4 Jy in band 2
    for name, true in (("core.flux@1", 1.0), ("core.flux@2", 1.4), ("knot.east", -0.9)):
        assert abs(p[name]["value"] - true) < 4 * p[name]["error"], (name, p[name])
    assert sum(f["chi2"] for f in report.to_dict()["files"]) == pytest.approx(
        report.to_dict()["statistics"]["chi2"], rel=1e-9
    )
    # the table prints each file's values beside its chi2
    lines = [ln for ln in report.text().splitlines() if ln.startswith("file set ")]
    assert len(lines) == 2 and all("; core.flux " in ln and ln.endswith(" Jy") for ln in lines)
    # the model's JSON lists the values per file; a saved model reads back, per file again
    described = report.model.to_dict()["per_file"]
    assert described["files"] == ["set 1", "set 2"]
    assert set(described["parameters"]["core.flux"]) == {"core.flux@1", "core.flux@2"}
    again = loads(report.model.to_toml())
    assert again.parameters["core.flux"].per == "file" and again.parameters["core.flux"].tie is None
    # the Jacobian of the per-file model against central differences (common practice)
    model = report.model
    vs = sets[0]
    files = np.r_[np.zeros(5, int), np.ones(5, int)]
    u, v = np.r_[vs.u[:5], vs.u[:5]], np.r_[vs.v[:5], vs.v[:5]]
    theta = model.get_free()
    _, jac = model.visibilities_and_jacobian(u, v, theta=theta, files=files)
    for j in range(theta.size):
        h = 1e-6 * max(1.0, abs(theta[j]))
        up, down = theta.copy(), theta.copy()
        up[j] += h
        down[j] -= h
        num = (model.visibilities(u, v, theta=up, files=files) - model.visibilities(u, v, theta=down, files=files)) / (
            2 * h
        )
        assert np.allclose(jac[:, j], num, rtol=1e-5, atol=1e-9), model.free_names[j]
    flux1 = model.free_names.index("core.flux@1")
    assert np.all(jac[5:, flux1] == 0) and np.all(jac[:5, flux1] != 0)


def test_per_file_parameters_refuse_what_is_not_supported():
    sets = _two_bands()
    start = loads(INVENTED.format(core=1.2, per=', per = "file"'))
    with pytest.raises(UvfitError, match="mode"):
        tasks.fit(sets, start, mode="closure_phase", starts=1, resolved_test=False)
    with pytest.raises(UvfitError, match="per"):
        loads(INVENTED.format(core=1.2, per=', per = "band"'))
