"""Results a practitioner checks on real data: the closure check of a fit uses the fit's selection,
only amplitude-only statistics have the 180-degree ambiguity, a closure chi2 far below 1 means
overestimated errors, `compare` judges pairs and warns when the best model does not fit, the
corner plot and the posterior share one 68% interval, and the README's numbers come from the
commands printed beside them (real 3C 279 data in tests/data/3c279, see its ABOUT.md)."""

import re
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from tests.helpers.real_data import real_file
from uvfit import tasks
from uvfit.cli import cli
from uvfit.sky.model import SkyModel
from uvfit.sky.modelfile import load_model
from uvfit.stats.base import REFLECTION_NOTICE
from uvfit.stats.closures.check import _judge
from uvfit.stats.modes import make_statistic

ROOT = Path(__file__).resolve().parents[1]
README = (ROOT / "README.md").read_text(encoding="utf-8")
TWO = ROOT / "examples" / "3c279" / "two_gaussians.toml"


@pytest.fixture(scope="module")
def cut_fit():
    """The closure fit of the README on the 3C 279 lo band, baselines >= 10 Mlambda, 2% floor."""
    return tasks.fit(
        str(real_file("lo")), str(TWO), mode="closure", systematic=0.02, resolved_test=False, selection={"min_uv": 1e7}
    )


# ------------------------------------------------------------------ item 1: the fit's selection
def test_closures_of_a_fit_use_its_selection_and_floor(cut_fit):
    # Outside reference: the same closure check with the fit's selection and floor given again
    # by hand (what `uvfit report` shows); the check of a fit must equal it, not the check of
    # every row.
    data = str(real_file("lo"))
    record = cut_fit.to_dict()
    implicit = tasks.closures(data, record)
    explicit = tasks.closures(data, record, systematic=0.02, selection={"min_uv": 1e7})
    # every row, the loops through one site kept (site_distance 0), which the cut also removes
    every_row = tasks.closures(data, record, selection={"min_uv": 0.0, "site_distance": 0.0})
    a = implicit.to_dict()["closure_amplitude_reduced_chi2"]
    assert a == pytest.approx(explicit.to_dict()["closure_amplitude_reduced_chi2"], rel=1e-12)
    assert every_row.to_dict()["closure_amplitude_reduced_chi2"] > 3 * a
    assert implicit.to_dict()["selection"] == {"min_uv": 1e7}
    assert implicit.to_dict()["systematic_from"] == "the fit"
    note = implicit.notes[0]
    assert "min_uv=10000000.0" in note and "from the fit: min_uv" in note and "0.02" in note


# ------------------------------------------------------------------ item 2: the 180-degree notice
def test_only_amplitude_only_statistics_are_reflection_ambiguous(cut_fit):
    # Outside reference: the shift theorem (TMS 2017, ch. 2): a point reflection through the
    # origin conjugates every visibility, so amplitudes are unchanged while closure phases change
    # sign. Evaluated on the real 3C 279 rows at the fitted model and its reflection.
    vs, _ = tasks.load_data(str(real_file("lo")), {"min_uv": 1e7})
    model = cut_fit.model.copy()
    reflected = model.copy()
    for east, north in model.position_names().values():
        reflected.parameters[east].value = -model.parameters[east].value
        reflected.parameters[north].value = -model.parameters[north].value
    chi2 = {}
    for mode in ("amplitude", "closure_amplitude", "closure_phase", "hybrid"):
        stats = [make_statistic(mode, vs, m.copy(), systematic=0.02) for m in (model, reflected)]
        chi2[mode] = [s.chi2(s.model.get_free()) for s in stats]
        amplitude_only = mode in ("amplitude", "closure_amplitude")
        assert stats[0].amplitude_only is amplitude_only, mode
        assert (REFLECTION_NOTICE in getattr(stats[0], "notices", [])) is (mode == "amplitude")
    for mode in ("amplitude", "closure_amplitude"):
        assert chi2[mode][0] == pytest.approx(chi2[mode][1], rel=1e-9), mode
    gain = chi2["closure_phase"][1] - chi2["closure_phase"][0]
    assert gain > 0.2 * chi2["closure_phase"][0]
    # hybrid = amplitudes (unchanged) + closure phases: the reflection costs it the same
    assert chi2["hybrid"][1] - chi2["hybrid"][0] == pytest.approx(gain, rel=1e-6)


# ------------------------------------------------------------------ item 3: far below 1
def test_closure_chi2_far_below_one_says_errors_overestimated():
    # Outside reference: chi2 with n degrees of freedom has mean n and standard deviation
    # sqrt(2n), so the reduced value spreads sqrt(2/n) about 1 (common practice). 0.66 over 5000
    # closures is 17 spreads below 1.
    state, words = _judge("closure phases", 0.66 * 5000, 5000, False)
    assert state == "low" and "overestimated" in words and "consistent" not in words
    assert _judge("closure phases", 1.01 * 5000, 5000, False)[0] == "consistent"
    assert _judge("closure phases", 1.5 * 5000, 5000, False)[0] == "high"


def test_closure_check_with_too_large_a_floor_does_not_call_it_support(cut_fit):
    # Real 3C 279 data: a 50% floor makes every closure error far too large.
    res = tasks.closures(str(real_file("lo")), cut_fit.to_dict(), systematic=0.5).result
    assert res["closure_phase_reduced_chi2"] < 1 - 3 * res["closure_phase_expected_spread"]
    assert res["supported"] is False and res["errors_overestimated"] is True
    assert "support the fitted" not in res["verdict"].replace("neither support nor reject the fitted", "")
    assert "overestimated" in res["verdict"]


# ------------------------------------------------------------------ item 4: compare
ONE_TOML = """angular_unit = "uas"
[[component]]
name = "a"
shape = "gaussian"
flux = 8.0
east = 0.0
north = 0.0
fwhm = { value = 20.0, min = 0.0, max = 200.0 }
"""


def test_compare_pairs_reference_and_caution_on_3c279(tmp_path):
    # Real 3C 279 lo band (closure mode, >= 10 Mlambda, 2% floor): the better model's reduced chi2
    # is about 12, far above 1 + 3 sqrt(2/dof) (common practice), so AIC, BIC and the FAP are
    # flagged as not to be trusted as stated.
    one = tmp_path / "one.toml"
    one.write_text(ONE_TOML)
    report = tasks.compare(
        str(real_file("lo")),
        [str(one), str(TWO)],
        mode="closure",
        systematic=0.02,
        selection={"min_uv": 1e7},
        reference="two_gaussians",
        rescale_errors=True,
    )
    out = report.to_dict()
    assert out["reference"] == "two_gaussians" and out["rescale_errors"] is True
    assert [(p["simpler"], p["richer"]) for p in out["pairs"]] == [("one", "two_gaussians")]
    best = {r["name"]: r for r in out["models"]}["two_gaussians"]
    assert best["reduced_chi2"] == pytest.approx(12.56, abs=0.01)  # as in the README (same-site loops left out)
    assert "not to be trusted" in out["fit_caution"]
    text = report.text()
    assert "pair: 'two_gaussians' against 'one'" in text and "caution:" in text


def test_compare_three_models_gives_each_nested_pair():
    # Invented demo data (uvfit/demo_data): three models of 1, 2 and 2+ components; each model is
    # judged against the next simpler one. Reference: the likelihood-ratio statistic is the
    # difference of the two chi2 values (Wilks 1938; common practice).
    from uvfit.demo import demo_file

    one, two = load_model(demo_file("one.toml")), load_model(demo_file("two.toml"))
    out = tasks.compare(
        demo_file("uvd0917.uvfits"), [two, one, one.copy()], names=["two", "one", "one_again"]
    ).to_dict()
    chi2 = {r["name"]: r["chi2"] for r in out["models"]}
    pairs = out["pairs"]
    assert len(pairs) == 2
    for p in pairs:
        assert p["likelihood_ratio"] == pytest.approx(chi2[p["simpler"]] - chi2[p["richer"]])
    assert pairs[-1]["richer"] == "two"


def test_compare_command_takes_the_fit_options(tmp_path):
    from uvfit.demo import demo_file

    res = CliRunner().invoke(
        cli,
        [
            "compare",
            demo_file("uvd0917.uvfits"),
            demo_file("one.toml"),
            demo_file("two.toml"),
            "--reference",
            "nothing",
        ],
    )
    assert res.exit_code != 0 and "--reference 'nothing'" in str(res.exception)
    res = CliRunner().invoke(cli, ["compare", "--help"])
    for option in ("--rescale-errors", "--global-search", "--reference", "--systematic"):
        assert option in res.output


# ------------------------------------------------------------------ item 6: one 68% interval
def test_corner_plot_marks_the_posterior_interval():
    # Outside reference: numpy.percentile (linear) of the samples, which the posterior JSON
    # records; the corner plot must show the same numbers, and those it is given.
    from uvfit.infer.posterior import summarize
    from uvfit.show import style
    from uvfit.show.corner import corner_plot

    rng = np.random.default_rng(19)
    samples = np.column_stack([rng.normal(1.0, 0.04, 3000), rng.gamma(3.0, 0.2, 3000)])
    fig, numbers = corner_plot(samples, ["a.flux", "a.fwhm"], ["Jy", "mas"])
    style.close(fig)
    p16, p50, p84 = np.percentile(samples, [16, 50, 84], axis=0)
    assert np.allclose(numbers["lower"], p16, rtol=1e-12)
    assert np.allclose(numbers["median"], p50, rtol=1e-12)
    assert np.allclose(numbers["upper"], p84, rtol=1e-12)
    given = [summarize(samples[:, j]) for j in range(2)]
    given[0] = dict(given[0], lower=0.9, median=1.0, upper=1.1)
    fig, numbers = corner_plot(samples, ["a.flux", "a.fwhm"], summaries=given)
    titles = [ax.get_title() for ax in fig.axes if ax.get_title()]
    style.close(fig)
    assert numbers["lower"][0] == 0.9 and numbers["upper"][0] == 1.1
    assert any("-0.1" in t and "+0.1" in t for t in titles)


# ------------------------------------------------------------------ items 13 and 15: the README
def _readme_fit_command():
    m = re.search(r"^(uvfit fit tests/data/3c279/\S+ examples/3c279/two_gaussians.toml [^\n]*)$", README, re.M)
    assert m, "the README's 3C 279 closure command"
    return m.group(1).split()[1:]


def test_readme_3c279_closure_numbers_come_from_its_command(tmp_path):
    # Real 3C 279 data; the README's sentence gives separation, position angle and reduced chi2
    # with and without the cut; each number is compared to the run to its last printed digit.
    import json

    args = _readme_fit_command()
    sentence = README[README.index(" ".join(args[-7:])) :]
    sentence = sentence[: sentence.index("Time averaging")]
    nums = [float(x) for x in re.findall(r"(\d+\.\d+)\s+(?:microarcseconds|degrees)", sentence)]
    reds = [float(x) for x in re.findall(r"reduced chi2 (\d+\.\d+)", sentence)]
    assert len(nums) == 4 and len(reds) == 2, sentence
    runs = []
    for cut in (True, False):
        argv = list(args)
        if not cut:
            i = argv.index("--min-uv")
            del argv[i : i + 2]
        out = tmp_path / f"fit{len(runs)}.json"
        res = CliRunner().invoke(cli, ROOT_ARGS(argv) + ["--json", str(out)])
        assert res.exit_code == 0, res.output
        doc = json.loads(out.read_text())
        d = doc["derived"]
        runs.append((d["a-b.separation"]["value"], d["a-b.position_angle"]["value"], doc["statistics"]["reduced_chi2"]))
    assert runs[0][0] == pytest.approx(nums[0], abs=0.051)
    assert runs[0][1] == pytest.approx(nums[1], abs=0.051)
    assert runs[1][0] == pytest.approx(nums[2], abs=0.051)
    assert runs[1][1] == pytest.approx(nums[3], abs=0.051)
    assert runs[0][2] == pytest.approx(reds[0], abs=0.0051)
    assert runs[1][2] == pytest.approx(reds[1], abs=0.0051)


def ROOT_ARGS(argv):
    """The README's paths are relative to the repository: make them absolute."""
    return [str(ROOT / a) if a.startswith(("tests/", "examples/")) else a for a in argv]


def test_readme_info_example_is_the_output_of_its_command():
    # Real 3C 279 hi band, in the repository (not a path a reader lacks).
    m = re.search(r"```\n\$ (uvfit info (\S+))\n(.*?)```", README, re.S)
    assert m and m.group(2).startswith("tests/data/3c279/")
    res = CliRunner().invoke(cli, ["info", str(ROOT / m.group(2))])
    assert res.exit_code == 0, res.output
    assert res.stdout.strip() == m.group(3).strip()
    assert "/shared/" not in README  # the shared folder beside the project is not the reader's


# ------------------------------------------------------------------ item 5: forecast counts
def test_forecast_counts_free_parameters_as_the_closure_fits_have_them(tmp_path):
    # Invented 86 GHz plan (examples/planning/array.toml), the core's position fixed in both
    # models. Reference: closures cannot see the flux scale (common practice), so the double's 6
    # free parameters are fitted as 5 and the single's 2 as 1, and the likelihood-ratio threshold
    # is the 99% point of chi-square with 5 - 1 = 4 degrees of freedom (scipy.stats.chi2), not
    # with 6 - 2. The axis ratio of an elliptical true model is reported.
    from scipy.stats import chi2 as chi2_dist

    from tests.helpers.invented import component, model_toml
    from uvfit.data.select import parse_time
    from uvfit.sim.array import load_array
    from uvfit.sim.forecast import forecast
    from uvfit.sim.observe import Observation

    (tmp_path / "d.toml").write_text(
        model_toml(component("core", 1.0, fwhm=40.0), component("knot", 0.4, east=-60.0, north=-80.0, fwhm=50.0))
    )
    (tmp_path / "s.toml").write_text(model_toml(component("core", 1.0, fwhm=40.0)))
    double, single = load_model(tmp_path / "d.toml"), load_model(tmp_path / "s.toml")
    assert len(double.free_names) == 6 and len(single.free_names) == 2
    arr = load_array(str(ROOT / "examples" / "planning" / "array.toml"))
    obs = Observation(
        ra_deg=210.547,
        dec_deg=38.753,
        start=parse_time("2027-04-10T03:00"),
        duration_s=3600.0,
        integration_s=600.0,
        frequency_hz=86e9,
    )
    out = forecast(arr, double, [single], obs, trials=1, seed=3, mode="closure", alt_names=["single"])
    assert out["true_free_parameters"] == 5
    alt = out["alternatives"][0]
    assert alt["free_parameters"] == 1
    assert np.isclose(alt["lr_threshold_delta_chi2"], chi2_dist.ppf(0.99, 4))
    ellipse = SkyModel.build(
        [
            {
                "name": "core",
                "shape": "elliptical_gaussian",
                "flux": 1.0,
                "east": 0.0,
                "north": 0.0,
                "fwhm": 60.0,
                "axis_ratio": 0.5,
                "position_angle": 30.0,
            }
        ],
        angular_unit="uas",
    )
    out = forecast(arr, ellipse, [single], obs, trials=1, seed=3, alt_names=["single"])
    assert out["structure"]["core.axis_ratio"]["true"] == pytest.approx(0.5)


# ------------------------------------------------------------------ item 14: the demo transcript
_NUMBER = re.compile(r"[-+]?\d+(?:\.\d+)?(?:e[-+]?\d+)?")


def _same_but_last_digit(a, b):
    """Lines equal, except that numbers may differ by one unit of their last printed digit (the
    compiled and numpy engines round differently there)."""
    if _NUMBER.sub("#", a) != _NUMBER.sub("#", b):
        return False
    for x, y in zip(_NUMBER.findall(a), _NUMBER.findall(b)):
        if x == y:
            continue
        digits = len(x.split("e")[0].split(".")[1]) if "." in x.split("e")[0] else 0
        exp = int(x.split("e")[1]) if "e" in x else 0
        if abs(float(x) - float(y)) > 1.01 * 10.0 ** (exp - digits):
            return False
    return True


def test_readme_demo_transcript_is_the_current_output():
    # The README's transcript against a fresh run of its command (tests/helpers/demo_run.py, the
    # engine these tests use); regenerate with examples/demo/make_transcript.py.
    import importlib.util

    from tests.helpers.demo_run import demo_run

    spec = importlib.util.spec_from_file_location("make_transcript", ROOT / "examples" / "demo" / "make_transcript.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    proc, out_dir, _ = demo_run()
    assert proc.returncode == 0, proc.stderr
    run = mod.transcript(proc.stdout, out_dir).splitlines()
    shown = mod.readme_transcript().splitlines()
    assert len(run) == len(shown)
    bad = [(a, b) for a, b in zip(shown, run) if not _same_but_last_digit(a, b)]
    assert not bad, bad[:3]
