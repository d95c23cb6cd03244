"""Summaries of a chain: every free parameter and every derived quantity, sample by sample.

The rules (percentiles, circular angles, the limit rule against bounds, the ordering of same-shape
components and of the members of a double) are those of :mod:`uvfit.infer.posterior`.
"""

import numpy as np

from ...errors import UvfitError
from ...labels import unit_text as _unit_text
from .convergence import BURN_FACTOR, CHECK_EVERY, TAU_CHANGE, TAU_FACTOR


def _parameter_period(model, name):
    """Period (deg) of an angle parameter for circular statistics, or None.

    360 for a position angle; 180 for the orientation of an elliptical member (an axis, the same
    after half a turn). None when the parameter's bounds are narrower than the period (then the
    posterior lives on an interval, not on the circle).
    """
    p = model.parameters[name]
    period = model.periods().get(name)
    if period is None:
        return None
    if np.isfinite(p.min) and np.isfinite(p.max) and (p.max - p.min) < period:
        return None
    return period


def _limit_bounds(model, name):
    """(lower, upper) bounds against which the limit rule is tried for a parameter.

    A size (a length other than a position) has 0 as lower bound when the model gives none; every
    parameter uses its finite min and max; an angle summarised on the circle uses none.
    """
    p = model.parameters[name]
    positions = {n for pair in model.position_names().values() for n in pair}
    lo = float(p.min) if np.isfinite(p.min) else None
    hi = float(p.max) if np.isfinite(p.max) else None
    if p.kind == "length" and name not in positions and lo is None:
        lo = 0.0
    if _parameter_period(model, name):
        return None, None
    return lo, hi


def derived_samples(model, samples, frequency=None, redshift=0.0):
    """({key: array over samples}, {key: unit}) of the fitting layer's derived quantities.

    The quantities (separation, position angle and flux ratio of every pair of components, sizes,
    brightness temperatures) are those of :mod:`uvfit.infer.derived`, evaluated on every sample.
    They are a few scalar formulas per sample (not visibilities), so a loop over samples is used.
    """
    from ..derived import quantities_at

    samples = np.asarray(samples, dtype=float)
    if samples.shape[0] == 0:
        return {}, {}
    first, units, _ = quantities_at(model, samples[0], frequency, redshift)
    keys = list(first)
    out = {k: np.empty(samples.shape[0]) for k in keys}
    for k in keys:
        out[k][0] = first[k]
    with np.errstate(all="ignore"):
        for i in range(1, samples.shape[0]):
            q, _, _ = quantities_at(model, samples[i], frequency, redshift)
            for k in keys:
                out[k][i] = q[k]
    return out, units


class Posterior:
    """Summaries of a chain: every free parameter and every derived quantity, sample by sample.

    Build with :func:`summarize_chain`. ``parameters`` and ``derived`` map names to summary dicts
    (see :func:`uvfit.infer.posterior.summarize`); ``samples`` are the ordered posterior samples
    (after burn-in and thinning); ``theta_max`` the ordered max-posterior sample.
    """

    def __init__(
        self,
        chain,
        model,
        samples,
        log_prob,
        theta_max,
        parameters,
        derived,
        ordering,
        mode="",
        data_path=None,
        notes=None,
        extra=None,
        frequency=None,
        redshift=0.0,
    ):
        self.chain = chain
        self.model = model
        self.samples = samples
        self.log_prob = log_prob
        self.theta_max = theta_max
        self.parameters = parameters
        self.derived = derived
        self.ordering = ordering
        self.mode = mode
        self.data_path = data_path
        self.notes = list(notes or [])
        self.extra = dict(extra or {})
        #: the frequency (Hz) and redshift the derived quantities were evaluated at
        self.frequency = frequency
        self.redshift = float(redshift or 0.0)

    @property
    def names(self):
        return list(self.chain.names)

    def max_posterior_model(self):
        m = self.model.copy()
        m.set_free(self.theta_max)
        return m

    def to_dict(self):
        """The JSON-ready dictionary (see README, "sample", for the keys)."""
        from ... import __version__

        ch = self.chain
        out = {
            "version": __version__,
            "data": None if self.data_path is None else str(self.data_path),
            "mode": self.mode,
            "seed": ch.seed,
            "parameters": self.parameters,
            "derived": self.derived,
            "autocorrelation_time": {n: float(t) for n, t in zip(ch.names, ch.tau)},
            "acceptance_fraction": ch.acceptance_fraction,
            "n_samples": int(self.samples.shape[0]),
            "n_walkers": ch.n_walkers,
            "n_steps": ch.n_steps,
            "burn_in": ch.burn_in,
            "thin": ch.thin,
            "converged": ch.converged,
            "stopping_rule": {
                "check_every": CHECK_EVERY,
                "tau_factor": TAU_FACTOR,
                "tau_change": TAU_CHANGE,
                "burn_factor": BURN_FACTOR,
            },
            "ordering": self.ordering,
            "chain": ch.path,
            "resumed_from_step": ch.resumed_from,
            "notes": self.notes,
            "model_toml": self.max_posterior_model().to_toml(),
        }
        out.update(self.extra)
        return out

    def table(self):
        """A readable table of the summaries (text; :func:`uvfit.infer.sampling.table.posterior_table`)."""
        from .table import posterior_table

        return posterior_table(self)


def summarize_chain(
    chain,
    model,
    order_by="flux",
    frequency=None,
    redshift=0.0,
    mode="",
    data_path=None,
    derived=True,
    extra=None,
    movable=(),
):
    """A :class:`Posterior` from a :class:`Chain` on ``model`` (whose free parameters it sampled)."""
    from ..derived import derived_periods
    from ..posterior import order_samples, summarize, swap_groups

    names = list(chain.names)
    if list(model.free_names) != names:
        raise UvfitError(
            "the chain's parameters do not match the model's free parameters",
            "use the model file the chain was run with",
        )
    samples, log_prob = chain.flat()
    groups = swap_groups(model)
    samples, ordering = order_samples(model, samples, order_by, groups, movable)
    theta_max, _ = chain.max_posterior()
    theta_max = order_samples(model, theta_max[None, :], order_by, groups, movable)[0][0]
    # the max-posterior sample joins the set for the "max_posterior" entries
    both = np.vstack([samples, theta_max[None, :]])
    i_max = both.shape[0] - 1
    params = {}
    for j, name in enumerate(names):
        lo, hi = _limit_bounds(model, name)
        s = summarize(
            both[:-1, j],
            unit=_unit_text(model.parameters[name]),
            period=_parameter_period(model, name),
            lower_bound=lo,
            upper_bound=hi,
        )
        s["max_posterior"] = _max_value(both[i_max, j], _parameter_period(model, name))
        params[name] = s
    out_derived = {}
    if derived:
        values, units = derived_samples(model, both, frequency, redshift)
        periods = derived_periods(model)
        limited = set()
        for key, x in values.items():
            bound = 0.0 if key.endswith(".size") else None
            s = summarize(x[:-1], unit=units.get(key, ""), period=periods.get(key), lower_bound=bound)
            s["max_posterior"] = _max_value(x[i_max], periods.get(key))
            if "upper_limit_95" in s:
                limited.add(key[: -len(".size")])
            out_derived[key] = s
        for member in limited:
            tb = out_derived.get(f"{member}.brightness_temperature")
            if tb is not None:
                x = values[f"{member}.brightness_temperature"][:-1]
                x = x[~np.isnan(x)]
                if x.size:
                    tb["lower_limit_95"] = float(np.percentile(x, 5.0, method="nearest"))
                    tb["note"] = "the size is an upper limit, so this is a lower limit (one-sided 95%)"
    notes = list(chain.notes)
    return Posterior(
        chain,
        model,
        samples,
        log_prob,
        theta_max,
        params,
        out_derived,
        ordering,
        mode=mode,
        data_path=data_path,
        notes=notes,
        extra=extra,
        frequency=frequency,
        redshift=redshift,
    )


def _max_value(x, period):
    x = float(x)
    return x % period if (period and np.isfinite(x)) else x
