"""When the ensemble chain has converged: integrated autocorrelation time, stopping rule, burn-in.

tau is estimated as in Sokal 1997 ("Monte Carlo methods in statistical mechanics") with the
ensemble average of the walkers' autocorrelation functions (emcee's ``integrated_time``;
Foreman-Mackey et al. 2013, PASP 125, 306). The chain is taken as converged once it is longer than
``tau_factor`` (50) times every tau and every tau changed by less than ``tau_change`` (3%) since
the previous check ``check_every`` (100) steps earlier. Burn-in is ``burn_factor`` (3) times the
largest tau, thinning half the smallest tau. The decision at step n is a pure function of the
first n steps, so a resumed run decides exactly as an uninterrupted one.
"""

import math

import numpy as np

#: defaults of the stopping rule (see the module docstring)
CHECK_EVERY = 100
TAU_FACTOR = 50.0
TAU_CHANGE = 0.03
BURN_FACTOR = 3.0


def autocorrelation_time(chain):
    """Integrated autocorrelation time of every parameter (steps), from (n_steps, n_walkers, n_dim).

    emcee's ensemble-averaged estimator with window constant c = 5 (Sokal 1997), without its
    length check (so that short chains still get an estimate; judge it by ``n_steps / tau``).
    """
    import emcee

    chain = np.asarray(chain, dtype=float)
    if chain.shape[0] < 4:
        return np.full(chain.shape[2], np.nan)
    with np.errstate(all="ignore"):
        tau = emcee.autocorr.integrated_time(chain, c=5, tol=0, quiet=True)
    return np.asarray(tau, dtype=float)


def convergence_check(chain, n, check_every=CHECK_EVERY, tau_factor=TAU_FACTOR, tau_change=TAU_CHANGE):
    """(converged, tau) for the first ``n`` steps of ``chain``.

    Converged when n > tau_factor * max(tau) and every tau changed by less than the fraction
    ``tau_change`` against the estimate from the first ``n - check_every`` steps. A pure function
    of the chain, so a resumed run takes the same decisions as an uninterrupted one.
    """
    converged, tau, _ = convergence_state(chain, n, check_every, tau_factor, tau_change)
    return converged, tau


def convergence_state(chain, n, check_every, tau_factor, tau_change):
    """(converged, tau, largest relative change of tau since the previous check)."""
    tau = autocorrelation_time(chain[:n])
    if n - check_every < 4 or not np.all(np.isfinite(tau)):
        return False, tau, float("nan")
    previous = autocorrelation_time(chain[: n - check_every])
    change = float(np.max(np.abs(tau - previous) / tau))
    return bool(change < tau_change and n > tau_factor * np.max(tau)), tau, change


def burn_and_thin(tau, n_steps, burn_factor=BURN_FACTOR):
    """(burn-in, thinning, note) from the autocorrelation times: burn_factor * max(tau), min(tau) / 2.

    Burn-in is capped at half the chain (with a note) when tau is undefined or too long.
    """
    tau = np.asarray(tau, dtype=float)
    note = None
    if tau.size == 0 or not np.all(np.isfinite(tau)):
        return n_steps // 2, 1, "the autocorrelation time is undefined; half the chain is discarded as burn-in"
    burn = int(math.ceil(burn_factor * float(np.max(tau))))
    thin = max(1, int(0.5 * float(np.min(tau))))
    if burn > n_steps // 2:
        burn = n_steps // 2
        note = f"burn-in of {burn_factor:g} tau would exceed half the chain; half the chain is discarded instead"
    return burn, thin, note
