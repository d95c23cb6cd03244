"""The walkers' starting positions: a small ball around the least-squares best fit.

The ball has 0.3 times the least-squares standard deviations by default (a smaller ball needs a
longer burn-in: with 0.1 and 2 tau, posterior means in a linear test scattered by 1.4 times their
Monte Carlo error, with 0.3 and 3 tau by 1.0-1.1 times).
"""

import numpy as np

from ...errors import FitError


def initial_ball(center, covariance, bounds, n_walkers, rng, scale=0.3, log_prob=None, max_tries=100):
    """Walker positions around ``center``: normal with covariance ``scale**2 * covariance``.

    Falls back to a diagonal ball (1e-3 of |value|, of the bound range, or 1e-3 absolute) when the
    covariance is missing, not finite or not positive definite. Positions are kept inside the
    bounds: a coordinate that falls outside lands at a random point within a small margin of the
    bound it crossed (so that walkers stay linearly independent). With ``log_prob``, walkers at
    -inf are redrawn. Returns (positions (n_walkers, n_dim), note or None).
    """
    center = np.asarray(center, dtype=float)
    n = center.size
    lo, hi = bounds
    note = None
    chol = None
    if covariance is not None:
        cov = np.asarray(covariance, dtype=float)
        if cov.shape == (n, n) and np.all(np.isfinite(cov)):
            try:
                chol = np.linalg.cholesky(0.5 * (cov + cov.T))
            except np.linalg.LinAlgError:
                chol = None
    if chol is None:
        width = np.where(np.isfinite(hi - lo), 1e-3 * (hi - lo), np.nan)
        step = np.where(center != 0, 1e-3 * np.abs(center), width)
        step = np.where(np.isfinite(step) & (step > 0), step, 1e-3)
        chol = np.diag(step / scale)
        note = (
            "the least-squares covariance is singular or undefined; the walkers start in a "
            "small ball of 0.1% of each value instead"
        )

    def draw(k):
        x = center + scale * rng.standard_normal((k, n)) @ chol.T
        margin = np.where(np.isfinite(hi - lo), 1e-4 * (hi - lo), 1e-8 * (1 + np.abs(center)))
        below = x < lo
        above = x > hi
        u = rng.random((k, n))
        x = np.where(below, lo + margin * u, x)
        x = np.where(above, hi - margin * u, x)
        return x

    pos = draw(n_walkers)
    if log_prob is not None:
        for _ in range(max_tries):
            bad = np.array([not np.isfinite(log_prob(p)) for p in pos])
            if not bad.any():
                break
            pos[bad] = draw(int(bad.sum()))
        else:
            raise FitError(
                "could not place the walkers where the posterior is non-zero",
                "check the start values, bounds and priors of the model",
            )
    return pos, note
