"""Posterior sampling with the affine-invariant ensemble sampler (emcee).

The posterior is ``model.log_prior(theta) + statistic.log_likelihood(theta)`` over the model's
free parameters. The chain starts from a small ball around the least-squares best fit, scaled by
its covariance, and stops when the integrated autocorrelation time has settled or at the step
limit. Cautions: a posterior is conditional on the model family and on the data weights (thermal
sigmas, plus any systematic fraction); calibration errors not in the statistic are not in the
error bars.

Modules, one concept each: :mod:`.logpost` (the log-posterior), :mod:`.start` (the start ball),
:mod:`.convergence` (autocorrelation time, stopping rule, burn-in), :mod:`.chainfile` (the HDF5
chain file), :mod:`.runner` (the sampler run and the entry :func:`sample`), :mod:`.summary`
(:class:`Posterior`), :mod:`.table` (its text table). The corner plot is
:mod:`uvfit.show.corner`.
"""

from .chainfile import CHAIN_GROUP, chain_info, check_chain_file, read_chain
from .convergence import autocorrelation_time, burn_and_thin, convergence_check
from .logpost import LogPosterior
from .runner import Chain, run_chain, sample
from .start import initial_ball
from .summary import Posterior, summarize_chain

__all__ = [
    "CHAIN_GROUP",
    "Chain",
    "LogPosterior",
    "Posterior",
    "autocorrelation_time",
    "burn_and_thin",
    "chain_info",
    "check_chain_file",
    "convergence_check",
    "initial_ball",
    "read_chain",
    "run_chain",
    "sample",
    "summarize_chain",
]
