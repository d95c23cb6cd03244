"""Posterior sampling with the affine-invariant ensemble sampler (emcee).

The posterior is ``model.log_prior(theta) + statistic.log_likelihood(theta)`` over the model's
free parameters: uniform inside the bounds unless the model file gives a prior. The chain starts
from a small ball around the least-squares best fit, scaled by its covariance, and stops when the
integrated autocorrelation time has settled or at the step limit.

Methods:
- Goodman & Weare 2010, Comm. App. Math. Comp. Sci. 5, 65 (the affine-invariant ensemble sampler);
  Foreman-Mackey et al. 2013, PASP 125, 306 (emcee).
- Convergence from the integrated autocorrelation time tau, estimated as in Sokal 1997 ("Monte
  Carlo methods in statistical mechanics") with the ensemble average of the walkers'
  autocorrelation functions (emcee's ``integrated_time``): the chain is taken as converged once it
  is longer than ``tau_factor`` (50) times every tau and every tau changed by less than
  ``tau_change`` (3%) since the previous check ``check_every`` (100) steps earlier. Burn-in is
  ``burn_factor`` (3) times the largest tau, thinning half the smallest tau. The initial ball has
  0.3 times the least-squares standard deviations (a smaller ball needs a longer burn-in: with
  0.1 and 2 tau, posterior means in a linear test scattered by 1.4 times their Monte Carlo error,
  with 0.3 and 3 tau by 1.0-1.1 times).

Reproducibility: the seed fixes both the initial ball (``numpy.random.default_rng``) and the
sampler's own generator (a ``RandomState`` given to emcee through the initial ``State``). With an
HDF5 chain file the generator's state is stored after every step, so a resumed chain continues the
same random sequence and equals one uninterrupted run of the same total length.

Cautions: a posterior is conditional on the model family and on the data weights (thermal sigmas,
plus any systematic fraction); calibration errors not in the statistic are not in the error bars.
"""
import json
import math
import os
from dataclasses import dataclass, field

import numpy as np

from ..errors import FitError, UvfitError
from ..labels import unit_text as _unit_text

#: defaults of the stopping rule (see the module docstring)
CHECK_EVERY = 100
TAU_FACTOR = 50.0
TAU_CHANGE = 0.03
BURN_FACTOR = 3.0
#: acceptance fractions outside this range get a warning (common practice for the stretch move)
ACCEPTANCE_RANGE = (0.15, 0.6)
#: name of the group inside the HDF5 chain file
CHAIN_GROUP = "uvfit_chain"


# --------------------------------------------------------------------------- log-probability
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
    from .lsq import free_bounds

    lo, hi = free_bounds(model)
    lo = np.where(np.isnan(lo), -np.inf, np.asarray(lo, float))
    hi = np.where(np.isnan(hi), np.inf, np.asarray(hi, float))
    return lo, hi


# --------------------------------------------------------------------------- initial ball
def initial_ball(center, covariance, bounds, n_walkers, rng, scale=0.3, log_prob=None,
                 max_tries=100):
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
        note = ("the least-squares covariance is singular or undefined; the walkers start in a "
                "small ball of 0.1% of each value instead")

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
            raise FitError("could not place the walkers where the posterior is non-zero",
                           "check the start values, bounds and priors of the model")
    return pos, note


# --------------------------------------------------------------------------- convergence
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


def convergence_check(chain, n, check_every=CHECK_EVERY, tau_factor=TAU_FACTOR,
                      tau_change=TAU_CHANGE):
    """(converged, tau) for the first ``n`` steps of ``chain``.

    Converged when n > tau_factor * max(tau) and every tau changed by less than the fraction
    ``tau_change`` against the estimate from the first ``n - check_every`` steps. A pure function
    of the chain, so a resumed run takes the same decisions as an uninterrupted one.
    """
    converged, tau, _ = _convergence(chain, n, check_every, tau_factor, tau_change)
    return converged, tau


def _convergence(chain, n, check_every, tau_factor, tau_change):
    """(converged, tau, largest relative change of tau since the previous check)."""
    tau = autocorrelation_time(chain[:n])
    if n - check_every < 4 or not np.all(np.isfinite(tau)):
        return False, tau, float("nan")
    previous = autocorrelation_time(chain[:n - check_every])
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
        note = (f"burn-in of {burn_factor:g} tau would exceed half the chain; half the chain "
                "is discarded instead")
    return burn, thin, note


# --------------------------------------------------------------------------- the chain
@dataclass
class Chain:
    """A finished (or stopped) run: the stored chain and what the stopping rule found."""

    names: list
    chain: np.ndarray            # (n_steps, n_walkers, n_dim)
    log_prob: np.ndarray         # (n_steps, n_walkers)
    acceptance: np.ndarray       # per walker, over the whole chain
    tau: np.ndarray              # per parameter (steps)
    converged: bool
    seed: int
    burn_in: int
    thin: int
    path: str = None
    notes: list = field(default_factory=list)
    resumed_from: int = 0

    @property
    def n_steps(self):
        return int(self.chain.shape[0])

    @property
    def n_walkers(self):
        return int(self.chain.shape[1])

    @property
    def acceptance_fraction(self):
        return float(np.mean(self.acceptance))

    def flat(self):
        """(samples (n, n_dim), log-posterior (n,)) after burn-in and thinning."""
        c = self.chain[self.burn_in::self.thin]
        lp = self.log_prob[self.burn_in::self.thin]
        return c.reshape(-1, c.shape[-1]), lp.reshape(-1)

    def max_posterior(self):
        """(theta, log-posterior) of the highest-posterior sample in the whole stored chain."""
        k = np.unravel_index(np.argmax(self.log_prob), self.log_prob.shape)
        return self.chain[k].copy(), float(self.log_prob[k])


def _read_chain_attrs(path):
    import h5py

    try:
        with h5py.File(path, "r") as f:
            if CHAIN_GROUP not in f:
                raise UvfitError(f"{path} holds no uvfit chain",
                                 "give the chain file written by an earlier 'uvfit sample --chain' run")
            g = f[CHAIN_GROUP]
            attrs = {k: g.attrs[k] for k in g.attrs}
    except OSError as exc:
        raise UvfitError(f"cannot read the chain file {path} ({exc})",
                         "give an HDF5 chain file written by 'uvfit sample --chain', or start a new one with --force")
    names = json.loads(attrs.get("uvfit_names", "[]"))
    return {"names": names, "seed": int(attrs.get("uvfit_seed", 0)),
            "iteration": int(attrs.get("iteration", 0)),
            "n_walkers": int(attrs.get("nwalkers", 0)),
            "meta": json.loads(attrs.get("uvfit_meta", "{}"))}


def _write_chain_attrs(path, names, seed, meta):
    import h5py

    with h5py.File(path, "a") as f:
        g = f[CHAIN_GROUP]
        g.attrs["uvfit_names"] = json.dumps(list(names))
        g.attrs["uvfit_seed"] = int(seed)
        g.attrs["uvfit_meta"] = json.dumps(meta or {})


def chain_info(path):
    """What an existing chain file holds: names, seed, iteration, n_walkers, meta."""
    return _read_chain_attrs(path)


def check_chain_file(chain_path, resume=False, force=False):
    """Refuse what a run would refuse about its chain file; the steps already in it (0 if new).

    ``resume`` needs an existing chain file; without it an existing file needs ``force``, and its
    folder must exist. Commands call this before any long work.
    """
    if resume:
        if chain_path is None:
            raise UvfitError("--resume needs the chain file to continue", "give it with --chain FILE.h5")
        if not os.path.exists(chain_path):
            raise UvfitError(f"there is no chain file {chain_path} to resume",
                             "run once without --resume to start the chain")
        return _read_chain_attrs(chain_path)["iteration"]
    if chain_path is not None:
        if os.path.exists(chain_path) and not force:
            raise UvfitError(f"the chain file {chain_path} exists already",
                             "pass --resume to continue it, or --force to start it again")
        if not os.path.isdir(os.path.dirname(os.path.abspath(chain_path))):
            raise UvfitError(f"the folder for the chain file {chain_path} does not exist",
                             "create it first")
    return 0


def run_chain(log_prob, start, covariance, bounds, names, n_walkers=None, max_steps=5000, seed=0,
              procs=1, chain_path=None, resume=False, force=False, progress=None,
              check_every=CHECK_EVERY, tau_factor=TAU_FACTOR, tau_change=TAU_CHANGE,
              burn_factor=BURN_FACTOR, ball_scale=0.3, meta=None):
    """Run (or resume) the ensemble sampler and return a :class:`Chain`.

    ``log_prob`` is a picklable callable theta -> log-posterior (e.g. :class:`LogPosterior`);
    ``start`` the centre of the initial ball and ``covariance`` its shape (may be None);
    ``bounds`` a (lower, upper) pair of arrays. ``max_steps`` is the total length of the chain,
    counting the steps already in a resumed file. ``progress(n)`` is called after every step with
    the number of steps done in this run. ``chain_path`` keeps the chain in an HDF5 file;
    ``resume`` continues the chain in it (same walkers, same random sequence), and without
    ``resume`` an existing file is refused unless ``force``.
    """
    import emcee

    names = list(names)
    n_dim = len(names)
    if n_dim == 0:
        raise FitError("the model has no free parameters to sample",
                       "free at least one parameter in the model file")
    max_steps = int(max_steps)
    if max_steps < 1:
        raise UvfitError("--max-steps must be at least 1", "give a positive number of steps")
    notes = []
    backend = None
    previous = 0
    check_chain_file(chain_path, resume, force)
    if resume:
        info = _read_chain_attrs(chain_path)
        if info["names"] != names:
            raise UvfitError(f"the chain in {chain_path} was run on other free parameters "
                             f"({', '.join(info['names'])})",
                             "resume with the same model file, or start a new chain with --force")
        if n_walkers is not None and int(n_walkers) != info["n_walkers"]:
            raise UvfitError(f"the chain in {chain_path} has {info['n_walkers']} walkers, not {n_walkers}",
                             "drop --walkers when resuming")
        if info["iteration"] < 1:
            raise UvfitError(f"the chain in {chain_path} is empty", "start it again with --force")
        n_walkers = info["n_walkers"]
        if int(seed) != info["seed"]:
            notes.append(f"the chain continues its own random sequence (seed {info['seed']}); "
                         f"--seed {seed} is not used")
        seed = info["seed"]
        backend = emcee.backends.HDFBackend(chain_path, name=CHAIN_GROUP)
        previous = int(backend.iteration)
    else:
        if n_walkers is None:
            n_walkers = max(32, 4 * n_dim)
        n_walkers = int(n_walkers)
        n_walkers += n_walkers % 2
        if n_walkers < 2 * n_dim:
            raise UvfitError(f"{n_walkers} walkers are too few for {n_dim} free parameters",
                             f"use --walkers {2 * n_dim + 2} or more")
        if chain_path is not None:
            if os.path.exists(chain_path):
                os.unlink(chain_path)  # --force: start the chain again
            backend = emcee.backends.HDFBackend(chain_path, name=CHAIN_GROUP)
            backend.reset(n_walkers, n_dim)
            _write_chain_attrs(chain_path, names, seed, meta)

    pool = None
    fn = log_prob
    if procs and int(procs) > 1:
        import multiprocessing

        pool = multiprocessing.get_context().Pool(int(procs), initializer=_init_worker,
                                                  initargs=(log_prob,))
        fn = _WorkerLogProb()
    try:
        sampler = emcee.EnsembleSampler(n_walkers, n_dim, fn, pool=pool, backend=backend)
        if previous:
            state = backend.get_last_sample()
        else:
            seq = np.random.SeedSequence(int(seed))
            ball_seq, walk_seq = seq.spawn(2)
            pos, note = initial_ball(start, covariance, bounds, n_walkers,
                                     np.random.default_rng(ball_seq), scale=ball_scale,
                                     log_prob=log_prob)
            if note:
                notes.append(note)
            rstate = np.random.RandomState(np.random.MT19937(walk_seq)).get_state()
            state = emcee.State(pos, random_state=rstate)
        # the decision at the steps already stored (a resumed chain may be finished)
        converged = False
        if previous and previous % check_every == 0:
            converged, _ = convergence_check(sampler.get_chain(), previous, check_every,
                                             tau_factor, tau_change)
            if converged:
                notes.append(f"the chain had converged already at its {previous} steps; no steps "
                             "were added")
        todo = max_steps - previous
        if previous and todo <= 0:
            notes.append(f"the chain already has {previous} steps (--max-steps {max_steps}); "
                         "raise --max-steps to continue it")
        if todo > 0 and not converged:
            done = 0
            for _ in sampler.sample(state, iterations=todo, skip_initial_state_check=bool(previous)):
                done += 1
                if progress is not None:
                    progress(done)
                it = previous + done
                if it % check_every == 0:
                    converged, _ = convergence_check(sampler.get_chain(), it, check_every,
                                                     tau_factor, tau_change)
                    if converged:
                        break
    except BaseException:
        if pool is not None:
            pool.terminate()
            pool = None
        raise
    finally:
        if pool is not None:
            pool.close()
            pool.join()
    chain = sampler.get_chain()
    log_post = sampler.get_log_prob()
    n_steps = chain.shape[0]
    acceptance = sampler.backend.accepted / max(n_steps, 1)
    tau = autocorrelation_time(chain)
    burn, thin, note = burn_and_thin(tau, n_steps, burn_factor)
    if note:
        notes.append(note)
    if not converged:
        _, _, change = _convergence(chain, n_steps, check_every, tau_factor, tau_change)
        if np.all(np.isfinite(tau)) and tau.size and np.max(tau) > 0:
            how = (f"it is {n_steps / np.max(tau):.0f} autocorrelation times long (needs more "
                   f"than {tau_factor:g})")
        else:
            how = "it is too short to estimate its autocorrelation time"
        if np.isfinite(change):
            how += (f" and tau changed by {100 * change:.1f}% over the last {check_every} steps "
                    f"(needs less than {100 * tau_change:g}%)")
        notes.append(f"the chain has NOT converged after {n_steps} steps: {how}; treat the "
                     "intervals as rough and run longer (raise --max-steps, add --resume)")
    acc = float(np.mean(acceptance))
    if acc < ACCEPTANCE_RANGE[0]:
        notes.append(f"the mean acceptance fraction {acc:.2f} is below {ACCEPTANCE_RANGE[0]}: the "
                     "walkers rarely move (a multimodal, very narrow or curved posterior, or walkers "
                     "stuck); the intervals may be too narrow")
    elif acc > ACCEPTANCE_RANGE[1]:
        notes.append(f"the mean acceptance fraction {acc:.2f} is above {ACCEPTANCE_RANGE[1]}: the "
                     "steps are small against the posterior width (common with few free parameters); "
                     "check that the autocorrelation times are well below the chain length")
    return Chain(names=names, chain=chain, log_prob=log_post, acceptance=np.asarray(acceptance, float),
                 tau=tau, converged=bool(converged), seed=int(seed), burn_in=burn, thin=thin,
                 path=chain_path, notes=notes, resumed_from=previous)


# --------------------------------------------------------------------------- the posterior


def _parameter_period(model, name):
    """Period (deg) of an angle parameter for circular statistics, or None.

    360 for a position angle; 180 for the orientation of an elliptical member (an axis, the same
    after half a turn). None when the parameter's bounds are narrower than the period (then the
    posterior lives on an interval, not on the circle).
    """
    p = model.parameters[name]
    if getattr(p, "kind", None) != "angle":
        return None
    comp, local = name.split(".", 1)
    base, _, suffix = local.rpartition("_")
    ratio = f"{comp}.axis_ratio" + (f"_{suffix}" if base and suffix.isdigit() else "")
    period = 180.0 if ratio in model.parameters else 360.0
    if np.isfinite(p.min) and np.isfinite(p.max) and (p.max - p.min) < period:
        return None
    return period


def _limit_bounds(model, name):
    """(lower, upper) bounds against which the limit rule is tried for a parameter.

    A size (a length other than a position) has 0 as lower bound when the model gives none; every
    parameter uses its finite min and max; an angle summarised on the circle uses none.
    """
    p = model.parameters[name]
    local = name.split(".", 1)[1]
    lo = float(p.min) if np.isfinite(p.min) else None
    hi = float(p.max) if np.isfinite(p.max) else None
    if getattr(p, "kind", None) == "length" and local not in ("east", "north") and lo is None:
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
    from .derived import quantities_at

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

    def __init__(self, chain, model, samples, log_prob, theta_max, parameters, derived, ordering,
                 mode="", data_path=None, notes=None, extra=None):
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

    @property
    def names(self):
        return list(self.chain.names)

    def max_posterior_model(self):
        m = self.model.copy()
        m.set_free(self.theta_max)
        return m

    def to_dict(self):
        """The JSON-ready dictionary (see README, "sample", for the keys)."""
        from .. import __version__

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
            "stopping_rule": {"check_every": CHECK_EVERY, "tau_factor": TAU_FACTOR,
                              "tau_change": TAU_CHANGE, "burn_factor": BURN_FACTOR},
            "ordering": self.ordering,
            "chain": ch.path,
            "resumed_from_step": ch.resumed_from,
            "notes": self.notes,
            "model_toml": self.max_posterior_model().to_toml(),
        }
        out.update(self.extra)
        return out

    def table(self):
        """A readable table of the summaries (text)."""
        lines = []
        head = f"{'quantity':34s} {'median':>12s} {'-1 sigma':>11s} {'+1 sigma':>11s}   " \
               f"{'95% interval':^27s} {'max post.':>12s}  unit"
        for title, block in (("free parameters", self.parameters), ("derived quantities", self.derived)):
            if not block:
                continue
            lines.append(f"{title} (median and central 68% / 95% credible intervals):")
            lines.append(head)
            for name, s in block.items():
                unit = s.get("unit", "")
                text = None
                if "upper_limit_95" in s and "lower_limit_95" in s:
                    text = (f"{_g(s['lower_limit_95'])} .. {_g(s['upper_limit_95'])} (5-95%; "
                            "fills its bounds: not constrained)")
                elif "upper_limit_95" in s:
                    at = "consistent with zero" if name.endswith((".size", "fwhm", "diameter",
                                                                  "radius")) else "at its lower bound"
                    text = f"< {_g(s['upper_limit_95'])} (95% upper limit; {at})"
                elif "lower_limit_95" in s and name in self.parameters:
                    text = f"> {_g(s['lower_limit_95'])} (95% lower limit; at its upper bound)"
                if text is not None:
                    lines.append(f"{name:34s} {text:64s} {_g(s['max_posterior']):>12s}  {unit}")
                    continue
                lo = s["lower"] - s["median"]
                hi = s["upper"] - s["median"]
                iv = f"[{_g(s['lower_95'])}, {_g(s['upper_95'])}]"
                extra = ""
                if "lower_limit_95" in s:
                    extra = f"  (> {_g(s['lower_limit_95'])}, 95% lower limit)"
                lines.append(f"{name:34s} {_g(s['median']):>12s} {_g(lo, sign=True):>11s} "
                             f"{_g(hi, sign=True):>11s}   {iv:^27s} {_g(s['max_posterior']):>12s}  "
                             f"{unit}{extra}")
            lines.append("")
        ch = self.chain
        taus = ", ".join(f"{t:.3g}" for t in ch.tau)
        lines.append(f"{ch.n_walkers} walkers x {ch.n_steps} steps; burn-in {ch.burn_in}, thinning "
                     f"{ch.thin}: {self.samples.shape[0]} samples; autocorrelation times {taus} steps; "
                     f"acceptance fraction {ch.acceptance_fraction:.2f}; "
                     f"{'converged' if ch.converged else 'NOT converged'}; seed {ch.seed}")
        lines.append(f"ordering: {self.ordering['description']}")
        return "\n".join(lines)

    def corner_plot(self, path, force=False):
        """Corner plot of the free parameters (labels with units), written atomically."""
        return corner_plot(self.samples, self.names,
                           [self.parameters[n]["unit"] for n in self.names], path, force=force,
                           truths=None)


def _g(x, sign=False):
    if x is None or not np.isfinite(x):
        return "nan" if x is None or np.isnan(x) else ("inf" if x > 0 else "-inf")
    return f"{x:+.5g}" if sign else f"{x:.5g}"


def corner_plot(samples, names, units, path, force=False, truths=None):
    """A corner plot (corner package, Agg backend) of ``samples`` written atomically to ``path``."""
    from ..outputs import atomic_write_with, check_writable

    check_writable(path, force)
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    import corner

    labels = [f"{n} [{u}]" if u else n for n, u in zip(names, units)]
    samples = np.asarray(samples, dtype=float)
    # a parameter with no spread cannot be histogrammed: widen its range by hand
    ranges = []
    for j in range(samples.shape[1]):
        lo, hi = np.min(samples[:, j]), np.max(samples[:, j])
        ranges.append((lo, hi) if hi > lo else (lo - 0.5 * (abs(lo) or 1.0), hi + 0.5 * (abs(hi) or 1.0)))
    fig = corner.corner(samples, labels=labels, quantiles=[0.16, 0.5, 0.84], show_titles=True,
                        title_fmt=".3g", range=ranges, truths=truths,
                        label_kwargs={"fontsize": 9}, title_kwargs={"fontsize": 8})
    fig.suptitle("posterior samples: median and central 68% interval", fontsize=10, y=1.0)

    def write(tmp):
        fig.savefig(tmp, format="png", dpi=90, bbox_inches="tight")

    try:
        return atomic_write_with(path, write, force=force)
    finally:
        plt.close(fig)


def summarize_chain(chain, model, order_by="flux", frequency=None, redshift=0.0, mode="",
                    data_path=None, derived=True, extra=None, movable=()):
    """A :class:`Posterior` from a :class:`Chain` on ``model`` (whose free parameters it sampled)."""
    from .posterior import order_samples, summarize, swap_groups
    from .derived import PERIODS

    names = list(chain.names)
    if list(model.free_names) != names:
        raise UvfitError("the chain's parameters do not match the model's free parameters",
                         "use the model file the chain was run with")
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
        s = summarize(both[:-1, j], unit=_unit_text(model.parameters[name]),
                      period=_parameter_period(model, name), lower_bound=lo, upper_bound=hi)
        s["max_posterior"] = _max_value(both[i_max, j], _parameter_period(model, name))
        params[name] = s
    out_derived = {}
    if derived:
        values, units = derived_samples(model, both, frequency, redshift)
        limited = set()
        for key, x in values.items():
            bound = 0.0 if key.endswith(".size") else None
            s = summarize(x[:-1], unit=units.get(key, ""), period=PERIODS.get(key), lower_bound=bound)
            s["max_posterior"] = _max_value(x[i_max], PERIODS.get(key))
            if "upper_limit_95" in s:
                limited.add(key[:-len(".size")])
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
    return Posterior(chain, model, samples, log_prob, theta_max, params, out_derived, ordering,
                     mode=mode, data_path=data_path, notes=notes, extra=extra)


def _max_value(x, period):
    x = float(x)
    return x % period if (period and np.isfinite(x)) else x


def sample(vset, model, mode="complex", systematic=0.0, n_walkers=None, max_steps=5000, seed=0,
           procs=1, chain_path=None, resume=False, force=False, order_by="flux", progress=None,
           starts=1, frequency=None, redshift=0.0, data_path=None, derived=True,
           fit_progress=None, ball_scale=0.3, **options):
    """Sample the posterior of ``model`` (not changed) given ``vset`` in ``mode``; a :class:`Posterior`.

    A new chain starts from the least-squares best fit (``starts`` starts, seeded), in a ball scaled
    by its covariance; parameters the mode cannot constrain are fixed as the fitter fixes them. A
    resumed chain (``resume`` with ``chain_path``) skips the fit and continues where it stopped.
    Other arguments: see :func:`run_chain` and :func:`summarize_chain`. ``options`` go to the
    statistic.
    """
    from ..stats.modes import make_statistic
    from .lsq import fit, fix_degeneracies

    if order_by not in ("flux", "distance"):
        raise UvfitError(f"unknown ordering '{order_by}'", "use --order-by flux or --order-by distance")
    work = model.copy()
    stat = make_statistic(mode, vset, work, systematic=systematic, **options)
    extra = {"systematic": float(systematic),
             "angular_unit": getattr(work, "angular_unit_text", str(getattr(work, "angular_unit", "")))}
    start = cov = None
    if resume:
        if chain_path is not None and os.path.exists(chain_path):
            stored = chain_info(chain_path)["meta"]
            for key, now in (("mode", mode), ("systematic", float(systematic))):
                if key in stored and stored[key] != now:
                    raise UvfitError(f"the chain in {chain_path} was run with {key} {stored[key]}, "
                                     f"not {now}",
                                     f"resume with the same --{key}, or start a new chain with --force")
        stat, fixed, notices = fix_degeneracies(stat)
    else:
        result = fit(stat, starts=starts, seed=seed, progress=fit_progress, strict=False)
        stat = result.statistic
        fixed, notices = list(result.fixed_by_fitter), list(result.notices)
        start, cov = np.asarray(result.values, float), np.asarray(result.covariance, float)
        extra["least_squares"] = {"values": dict(zip(result.names, map(float, result.values))),
                                  "errors": dict(zip(result.names, map(float, result.errors))),
                                  "chi2": float(result.chi2), "dof": int(result.dof)}
    work = stat.model
    if stat.n_data <= len(work.free_names):
        raise FitError(f"only {stat.n_data} data for {len(work.free_names)} free parameters",
                       "fix some parameters, or use more data (check the selection options)")
    extra["fixed_for_mode"] = list(fixed)
    if frequency is None:
        frequency = float(np.mean(stat.vset.frequency)) if stat.vset.n else float("nan")
    extra["frequency_hz"] = frequency
    extra["redshift"] = float(redshift or 0.0)
    log_prob = LogPosterior(stat, work)
    bounds = (log_prob.lower, log_prob.upper)
    meta = {"mode": mode, "systematic": float(systematic), "data": None if data_path is None else str(data_path)}
    chain = run_chain(log_prob, start, cov, bounds, work.free_names, n_walkers=n_walkers,
                      max_steps=max_steps, seed=seed, procs=procs, chain_path=chain_path,
                      resume=resume, force=force, progress=progress, meta=meta,
                      ball_scale=ball_scale)
    post = summarize_chain(chain, work, order_by=order_by, frequency=frequency, redshift=redshift,
                           mode=mode, data_path=data_path, derived=derived, extra=extra,
                           movable=fixed)
    post.notes = list(notices) + post.notes
    return post
