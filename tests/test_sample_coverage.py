"""Coverage of the credible intervals over many seeded simulations (short chains, tiny data)."""

import math
import multiprocessing

import numpy as np
import pytest

from tests.helpers.sample_data import simulate, two_points
from uvfit.infer.sampling import sample

N_SIM = 250
TRUE = {"flux_a": 1.0, "flux_b": 0.3, "east": 0.3, "north": 0.2}
TRUE_SEPARATION = math.hypot(TRUE["east"], TRUE["north"])
TRUE_RATIO = TRUE["flux_b"] / TRUE["flux_a"]


def _one(k):
    truth = two_points(**TRUE)
    vs = simulate(truth, n=120, q_max=4e8, sigma=0.05, seed=7, noise_seed=5000 + k)
    post = sample(vs, two_points(**TRUE), n_walkers=12, max_steps=400, seed=k)
    sep = post.derived["a-b.separation"]
    ratio = post.derived["a-b.flux_ratio"]
    return (sep["lower"] <= TRUE_SEPARATION <= sep["upper"], ratio["lower"] <= TRUE_RATIO <= ratio["upper"])


@pytest.mark.slow
def test_68_percent_intervals_cover_the_truth():
    with multiprocessing.get_context("fork").Pool(2) as pool:
        hits = np.array(pool.map(_one, range(N_SIM)))
    coverage = hits.mean(axis=0)
    # a 68% credible interval with flat priors in the Gaussian regime covers the truth 68% of the
    # time (frequentist calibration of Bayesian intervals, common practice); with 250 simulations
    # the binomial scatter is 0.03, the tolerance 0.07 about 2.4 of it. Measured when written:
    # 0.652 and 0.644; the least-squares +-1 sigma intervals on the same 250 data sets covered
    # 0.668 and 0.648, so the shortfall is that of these noise draws, not of the sampler.
    assert abs(coverage[0] - 0.68) <= 0.07, coverage
    assert abs(coverage[1] - 0.68) <= 0.07, coverage
