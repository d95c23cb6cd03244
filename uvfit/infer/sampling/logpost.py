"""The log-posterior the sampler explores, and how it reaches the workers of a process pool.

``model.log_prior(theta) + statistic.log_likelihood(theta)`` over the model's free parameters:
uniform inside the bounds unless the model file gives a prior.
"""

import numpy as np


class LogPosterior:
    """Picklable log-posterior: ``model.log_prior(theta) + statistic.log_likelihood(theta)``.

    Returns -inf outside the bounds, where the prior vanishes, or where the likelihood is not
    finite. A top-level class so that a multiprocessing pool can send it to its workers.
    """

    def __init__(self, statistic, model):
        self.statistic = statistic
        self.model = model
        lo, hi = _bounds_arrays(model)
        self.lower = lo
        self.upper = hi

    def __call__(self, theta):
        theta = np.asarray(theta, dtype=float)
        if not np.all(np.isfinite(theta)) or np.any(theta < self.lower) or np.any(theta > self.upper):
            return -np.inf
        lp = float(self.model.log_prior(theta))
        if not np.isfinite(lp):
            return -np.inf
        with np.errstate(all="ignore"):
            ll = float(self.statistic.log_likelihood(theta))
        if not np.isfinite(ll):
            return -np.inf
        return lp + ll


_WORKER_LOG_PROB = None


def _init_worker(log_prob):
    global _WORKER_LOG_PROB
    _WORKER_LOG_PROB = log_prob


class _WorkerLogProb:
    """What the pool sends with every batch: a name, not the data (set once per worker)."""

    def __call__(self, theta):
        return _WORKER_LOG_PROB(theta)


def _bounds_arrays(model):
    """(lower, upper) arrays of the free parameters, -inf / +inf where unbounded."""
    from ..lsq import free_bounds

    lo, hi = free_bounds(model)
    lo = np.where(np.isnan(lo), -np.inf, np.asarray(lo, float))
    hi = np.where(np.isnan(hi), np.inf, np.asarray(hi, float))
    return lo, hi
