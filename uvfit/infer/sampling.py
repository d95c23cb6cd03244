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
  ``tau_change`` (1%) since the previous check ``check_every`` (100) steps earlier. Burn-in is
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

#: defaults of the stopping rule (see the module docstring)
CHECK_EVERY = 100
TAU_FACTOR = 50.0
TAU_CHANGE = 0.01
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
        lo, hi = _bounds_arrays(model.free_bounds(), len(model.free_names))
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


def _bounds_arrays(bounds, n):
    """(lower, upper) arrays from a model's ``free_bounds()`` (pairs, or a pair of sequences)."""
    b = np.asarray(bounds, dtype=float) if bounds is not None else np.full((n, 2), np.nan)
    if b.shape == (2, n) and n != 2:
        b = b.T
    if b.shape != (n, 2):
        raise ValueError(f"free_bounds() has shape {b.shape}, expected ({n}, 2)")
    lo = np.where(np.isnan(b[:, 0]), -np.inf, b[:, 0])
    hi = np.where(np.isnan(b[:, 1]), np.inf, b[:, 1])
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
    tau = autocorrelation_time(chain[:n])
    if n - check_every < 4 or not np.all(np.isfinite(tau)):
        return False, tau
    previous = autocorrelation_time(chain[:n - check_every])
    settled = np.all(np.abs(tau - previous) < tau_change * tau)
    return bool(settled and n > tau_factor * np.max(tau)), tau


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
    if resume:
        if chain_path is None:
            raise UvfitError("--resume needs the chain file to continue", "give it with --chain FILE.h5")
        if not os.path.exists(chain_path):
            raise UvfitError(f"there is no chain file {chain_path} to resume",
                             "run once without --resume to start the chain")
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
                if not force:
                    raise UvfitError(f"the chain file {chain_path} exists already",
                                     "pass --resume to continue it, or --force to start it again")
                os.unlink(chain_path)
            folder = os.path.dirname(os.path.abspath(chain_path))
            if not os.path.isdir(folder):
                raise UvfitError(f"the folder for the chain file {chain_path} does not exist",
                                 "create it first")
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
        notes.append(f"the chain has NOT converged after {n_steps} steps: it needs to be longer "
                     f"than {tau_factor:g} autocorrelation times (now {_ratio_text(n_steps, tau)}) with "
                     f"tau settled to {100 * tau_change:g}%; treat the intervals as rough and run "
                     "longer (--max-steps, --resume)")
    acc = float(np.mean(acceptance))
    if not ACCEPTANCE_RANGE[0] <= acc <= ACCEPTANCE_RANGE[1]:
        notes.append(f"the mean acceptance fraction {acc:.2f} is outside {ACCEPTANCE_RANGE[0]}-"
                     f"{ACCEPTANCE_RANGE[1]}: the posterior may be multimodal or badly scaled")
    return Chain(names=names, chain=chain, log_prob=log_post, acceptance=np.asarray(acceptance, float),
                 tau=tau, converged=bool(converged), seed=int(seed), burn_in=burn, thin=thin,
                 path=chain_path, notes=notes, resumed_from=previous)


def _ratio_text(n_steps, tau):
    tau = np.asarray(tau, float)
    if tau.size == 0 or not np.all(np.isfinite(tau)) or np.max(tau) <= 0:
        return "tau undefined"
    return f"{n_steps / np.max(tau):.0f} tau"
