"""Model comparison: bootstrap false-alarm probabilities are calibrated; verdicts are worded."""

import numpy as np
import pytest
from scipy import stats

from tests.helpers.fit_sim import simulate
from uvfit.infer.compare import compare
from uvfit.sky.model import SkyModel


def _fixed(v):
    return {"value": v, "fixed": True}


ONE = [{"name": "core", "shape": "point", "flux": 1.0, "east": _fixed(0.0), "north": _fixed(0.0)}]
KNOT = {"name": "knot", "shape": "point", "flux": 0.05, "east": _fixed(0.3), "north": _fixed(-0.2)}


@pytest.mark.slow
def test_bootstrap_fap_is_uniform_when_the_simpler_model_is_true():
    # under the null hypothesis a p-value is uniform on (0, 1] (definition of a p-value); the
    # reference is scipy.stats.kstest against the uniform distribution, plus the binomial fraction
    one = SkyModel.build(ONE, angular_unit="mas")
    two = SkyModel.build(ONE + [KNOT], angular_unit="mas")
    faps = []
    for seed in range(40):
        vs = simulate(one, n=60, sigma=0.2, seed=500 + seed, qmax=3e9)
        out = compare(vs, [one, two], bootstrap=30, seed=seed, names=["one", "two"])
        faps.append(out["models"][1]["false_alarm_probability"])
        assert out["n_bootstrap"] == 30 and out["seed"] == seed
    faps = np.asarray(faps)
    # the FAP takes the values k / 31; the uniform distribution on those has mean 0.5 (16/31)
    assert stats.kstest(faps, "uniform").pvalue > 0.01
    assert abs(faps.mean() - 0.5) < 3 * np.sqrt(1 / 12 / len(faps))
    small = np.mean(faps <= 0.1)
    assert abs(small - 0.1) < 3 * np.sqrt(0.1 * 0.9 / len(faps)) + 1 / 31


def test_real_second_component_is_preferred_with_small_fap():
    one = SkyModel.build(ONE, angular_unit="mas")
    two = SkyModel.build(ONE + [KNOT], angular_unit="mas")
    truth = SkyModel.build(ONE + [dict(KNOT, flux=0.5)], angular_unit="mas")
    vs = simulate(truth, n=200, sigma=0.05, seed=1, qmax=3e9)
    out = compare(vs, [one, two], bootstrap=20, seed=4, names=["one", "two"])
    assert out["preferred"] == "two"
    assert out["models"][1]["false_alarm_probability"] == pytest.approx(1 / 21)
    assert out["verdict"].startswith("'two' preferred over 'one'; false-alarm probability at most 4.8%")
    assert "N = 20 simulations" in out["verdict"]
    assert "model families only" in out["verdict"]
    row = out["models"][1]
    # likelihood ratio = chi2 difference; AIC/BIC as defined in REFERENCES.md
    assert row["likelihood_ratio"] == pytest.approx(out["models"][0]["chi2"] - row["chi2"])
    assert row["aic"] == pytest.approx(row["chi2"] + 2 * row["n_free"])
    assert row["bic"] == pytest.approx(row["chi2"] + row["n_free"] * np.log(row["n_data"]))


def test_compare_without_bootstrap_uses_information_criteria():
    one = SkyModel.build(ONE, angular_unit="mas")
    two = SkyModel.build(ONE + [KNOT], angular_unit="mas")
    vs = simulate(one, n=100, sigma=0.05, seed=2)
    out = compare(vs, [one, two], names=["one", "two"])
    assert out["models"][1]["false_alarm_probability"] is None
    assert "BIC prefers" in out["verdict"] and "bootstrap simulations" in out["verdict"]
    # same seed, same answer
    a = compare(vs, [one, two], bootstrap=5, seed=3)
    b = compare(vs, [one, two], bootstrap=5, seed=3)
    assert a["models"][1]["false_alarm_probability"] == b["models"][1]["false_alarm_probability"]
