"""Running the affine-invariant ensemble sampler (Goodman & Weare 2010, Comm. App. Math. Comp.
Sci. 5, 65; emcee, Foreman-Mackey et al. 2013, PASP 125, 306) and the library entry :func:`sample`.

Reproducibility: the seed fixes both the initial ball (``numpy.random.default_rng``) and the
sampler's own generator (a ``RandomState`` given to emcee through the initial ``State``), from
``SeedSequence(seed).spawn(2)``. With an HDF5 chain file the generator's state is stored after
every step, so a resumed chain continues the same random sequence and equals one uninterrupted run
of the same total length.
"""

import os
from dataclasses import dataclass, field

import numpy as np

from ...errors import FitError, UvfitError
from .chainfile import chain_info, check_chain_file, new_backend, resume_backend
from .convergence import (
    BURN_FACTOR,
    CHECK_EVERY,
    TAU_CHANGE,
    TAU_FACTOR,
    autocorrelation_time,
    burn_and_thin,
    convergence_check,
    convergence_state,
)
from .logpost import LogPosterior, _init_worker, _WorkerLogProb
from .start import initial_ball
from .summary import summarize_chain

#: the chain-file record of the move mixture used for several modes
MULTIMODAL_MOVES = "differential_evolution"

#: acceptance fractions outside this range get a warning (common practice for the stretch move)
ACCEPTANCE_RANGE = (0.15, 0.6)


@dataclass
class Chain:
    """A finished (or stopped) run: the stored chain and what the stopping rule found."""

    names: list
    chain: np.ndarray  # (n_steps, n_walkers, n_dim)
    log_prob: np.ndarray  # (n_steps, n_walkers)
    acceptance: np.ndarray  # per walker, over the whole chain
    tau: np.ndarray  # per parameter (steps)
    converged: bool
    seed: int
    burn_in: int
    thin: int
    path: str | None = None
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
        c = self.chain[self.burn_in :: self.thin]
        lp = self.log_prob[self.burn_in :: self.thin]
        return c.reshape(-1, c.shape[-1]), lp.reshape(-1)

    def max_posterior(self):
        """(theta, log-posterior) of the highest-posterior sample in the whole stored chain."""
        k = np.unravel_index(np.argmax(self.log_prob), self.log_prob.shape)
        return self.chain[k].copy(), float(self.log_prob[k])


#: most memory the chain (positions and log-probabilities of every step) may take, in bytes
MAX_CHAIN_BYTES = 2 * 1024**3


def check_chain_size(max_steps, n_walkers, n_dim):
    """UvfitError when max_steps x walkers x (parameters + 1) floats exceed MAX_CHAIN_BYTES: the
    sampler keeps the whole chain in memory, and reserves it before the first step."""
    need = int(max_steps) * int(n_walkers) * (int(n_dim) + 1) * 8
    if need > MAX_CHAIN_BYTES:
        raise UvfitError(
            f"a chain of max_steps {int(max_steps)} x walkers {int(n_walkers)} x {int(n_dim)} parameters "
            f"would need {need / 1024**3:.3g} GiB of memory (at most {MAX_CHAIN_BYTES / 1024**3:.3g} GiB)",
            "lower max_steps or walkers; a converged chain stops early anyway",
        )


def run_chain(
    log_prob,
    start,
    covariance,
    bounds,
    names,
    n_walkers=None,
    max_steps=5000,
    seed=0,
    procs=1,
    chain_path=None,
    resume=False,
    force=False,
    progress=None,
    check_every=CHECK_EVERY,
    tau_factor=TAU_FACTOR,
    tau_change=TAU_CHANGE,
    burn_factor=BURN_FACTOR,
    ball_scale=0.3,
    meta=None,
    modes=None,
):
    """Run (or resume) the ensemble sampler and return a :class:`Chain`.

    ``modes``: several centres (distinct least-squares solutions) for a multimodal posterior: the
    walkers start in balls around each in turn, and the moves are the mixture emcee's
    documentation suggests for several modes, differential evolution (80%) and its snooker
    variant (20%) (ter Braak 2006; ter Braak & Vrugt 2008), recorded in the chain file so that a
    resumed chain moves alike. Otherwise the stretch move (Goodman & Weare 2010).

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
        raise FitError("the model has no free parameters to sample", "free at least one parameter in the model file")
    max_steps = int(max_steps)
    if max_steps < 1:
        raise UvfitError("`max_steps` must be at least 1", "give a positive number of steps")
    notes = []
    backend = None
    previous = 0
    check_chain_file(chain_path, resume, force)
    if resume:
        backend, n_walkers, seed, notes = resume_backend(chain_path, names, n_walkers, seed)
        previous = int(backend.iteration)
    else:
        if n_walkers is None:
            n_walkers = max(32, 4 * n_dim)
        n_walkers = int(n_walkers)
        n_walkers += n_walkers % 2
        if n_walkers < 2 * n_dim:
            raise UvfitError(
                f"{n_walkers} walkers are too few for {n_dim} free parameters", f"use `walkers={2 * n_dim + 2}` or more"
            )
        modes = [np.asarray(m, float) for m in (modes or [])]
        if len(modes) > 1:
            meta = dict(meta or {}, moves=MULTIMODAL_MOVES)
        backend = new_backend(chain_path, n_walkers, n_dim, names, seed, meta)
    moves = None
    stored_moves = (meta or {}).get("moves")
    if resume and chain_path is not None:
        stored_moves = chain_info(chain_path)["meta"].get("moves")
    if stored_moves == MULTIMODAL_MOVES:
        moves = [(emcee.moves.DEMove(), 0.8), (emcee.moves.DESnookerMove(), 0.2)]

    check_chain_size(max(int(max_steps), previous), n_walkers, n_dim)
    pool = None
    fn = log_prob
    if procs and int(procs) > 1:
        import multiprocessing

        pool = multiprocessing.get_context().Pool(int(procs), initializer=_init_worker, initargs=(log_prob,))
        fn = _WorkerLogProb()
    try:
        sampler = emcee.EnsembleSampler(n_walkers, n_dim, fn, pool=pool, backend=backend, moves=moves)
        if previous:
            state = backend.get_last_sample()
        else:
            seq = np.random.SeedSequence(int(seed))
            ball_seq, walk_seq = seq.spawn(2)
            ball_rng = np.random.default_rng(ball_seq)
            centres = modes if modes is not None and len(modes) > 1 else [start]
            share = [len(range(i, n_walkers, len(centres))) for i in range(len(centres))]
            parts = [
                initial_ball(c, covariance, bounds, k, ball_rng, scale=ball_scale, log_prob=log_prob)
                for c, k in zip(centres, share)
            ]
            pos = np.concatenate([p for p, _ in parts])
            note = parts[0][1]
            if len(centres) > 1:
                notes.append(
                    f"the walkers start around {len(centres)} distinct least-squares solutions, with "
                    "differential-evolution moves (the posterior may have several modes)"
                )
            if note:
                notes.append(note)
            rstate = np.random.RandomState(np.random.MT19937(walk_seq)).get_state()
            state = emcee.State(pos, random_state=rstate)
        # the decision at the steps already stored (a resumed chain may be finished)
        converged = False
        if previous and previous % check_every == 0:
            converged, _ = convergence_check(sampler.get_chain(), previous, check_every, tau_factor, tau_change)
            if converged:
                notes.append(f"the chain had converged already at its {previous} steps; no steps were added")
        todo = max_steps - previous
        if previous and todo <= 0:
            notes.append(
                f"the chain already has {previous} steps (`max_steps={max_steps}`); raise `max_steps` to continue it"
            )
        if todo > 0 and not converged:
            done = 0
            for _ in sampler.sample(state, iterations=todo, skip_initial_state_check=bool(previous)):
                done += 1
                if progress is not None:
                    progress(done)
                it = previous + done
                if it % check_every == 0:
                    converged, _ = convergence_check(sampler.get_chain(), it, check_every, tau_factor, tau_change)
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
        _, _, change = convergence_state(chain, n_steps, check_every, tau_factor, tau_change)
        if np.all(np.isfinite(tau)) and tau.size and np.max(tau) > 0:
            how = f"it is {n_steps / np.max(tau):.0f} autocorrelation times long (needs more than {tau_factor:g})"
        else:
            how = "it is too short to estimate its autocorrelation time"
        if np.isfinite(change):
            how += (
                f" and tau changed by {100 * change:.1f}% over the last {check_every} steps "
                f"(needs less than {100 * tau_change:g}%)"
            )
        notes.append(
            f"the chain has NOT converged after {n_steps} steps: {how}; treat the "
            "intervals as rough and run longer (raise `max_steps`, add `resume`)"
        )
    acc = float(np.mean(acceptance))
    if acc < ACCEPTANCE_RANGE[0]:
        notes.append(
            f"the mean acceptance fraction {acc:.2f} is below {ACCEPTANCE_RANGE[0]}: the "
            "walkers rarely move (a multimodal, very narrow or curved posterior, or walkers "
            "stuck); the intervals may be too narrow"
        )
    elif acc > ACCEPTANCE_RANGE[1]:
        notes.append(
            f"the mean acceptance fraction {acc:.2f} is above {ACCEPTANCE_RANGE[1]}: the "
            "steps are small against the posterior width (common with few free parameters); "
            "check that the autocorrelation times are well below the chain length"
        )
    return Chain(
        names=names,
        chain=chain,
        log_prob=log_post,
        acceptance=np.asarray(acceptance, float),
        tau=tau,
        converged=bool(converged),
        seed=int(seed),
        burn_in=burn,
        thin=thin,
        path=chain_path,
        notes=notes,
        resumed_from=previous,
    )


def digests(vset, model):
    """SHA-256 digests of what a chain depends on: ``data`` (the rows after selection: u, v,
    time, frequency, visibilities, sigmas, flags, stations) and ``model`` (every parameter's
    name, bounds, fixed or free, tie, prior and unit, fixed values, the shapes and unit)."""
    import hashlib
    import json

    h = hashlib.sha256()
    for key in ("u", "v", "time", "frequency", "vis", "sigma", "flag"):
        h.update(np.ascontiguousarray(np.asarray(getattr(vset, key))).tobytes())
    for key in ("station1", "station2"):
        h.update("\x1f".join(map(str, np.asarray(getattr(vset, key)).tolist())).encode())
    m = hashlib.sha256()
    rows = []
    for name, p in model.parameters.items():
        rows.append(
            [name, p.min, p.max, bool(p.fixed), p.tie, repr(p.prior), str(p.unit), p.value if p.fixed else None]
        )
    m.update(json.dumps(rows, default=repr).encode())
    m.update(repr(model.structure_key()).encode())
    return {"data": h.hexdigest(), "model": m.hexdigest()}


def check_digests(chain_path, stored, now):
    """Refuse to resume a chain run on other data, another selection, or another model."""
    old = stored.get("digest") if isinstance(stored, dict) else None
    if not isinstance(old, dict):
        return  # a chain written before digests were kept: nothing to compare
    what = {
        "data": "other data (another file or another selection of rows)",
        "model": "another model (other bounds, priors, fixed or tied parameters, or shapes)",
    }
    differ = [what[k] for k in ("data", "model") if old.get(k) != now[k]]
    if differ:
        raise UvfitError(
            f"the chain in {chain_path} was run on " + " and ".join(differ),
            "resume with the same data, selection and model file, or start a new chain with `force`",
        )


def sample(
    vset,
    model,
    mode="complex",
    systematic=0.0,
    n_walkers=None,
    max_steps=5000,
    seed=0,
    procs=1,
    chain_path=None,
    resume=False,
    force=False,
    order_by="flux",
    progress=None,
    starts="auto",
    frequency=None,
    redshift=0.0,
    data_path=None,
    derived=True,
    fit_progress=None,
    ball_scale=0.3,
    rescale_errors=False,
    **options,
):
    """Sample the posterior of ``model`` (not changed) given ``vset`` in ``mode``; a :class:`Posterior`.

    A new chain starts from the least-squares best fit (``starts`` starts, seeded), in a ball scaled
    by its covariance; parameters the mode cannot constrain are fixed as the fitter fixes them. A
    resumed chain (``resume`` with ``chain_path``) skips the fit and continues where it stopped.
    Other arguments: see :func:`run_chain` and :func:`summarize_chain`. ``options`` go to the
    statistic. ``rescale_errors``: every sigma times sqrt(chi2/dof) of the least-squares fit (a
    reduced chi2 of 1), recorded as ``error_scale`` (a resumed chain reuses the stored factor).
    """
    from ...stats.modes import make_statistic
    from ..lsq import fit, fix_degeneracies

    if order_by not in ("flux", "distance"):
        raise UvfitError(f"unknown ordering '{order_by}'", "use `order_by=flux` or `order_by=distance`")
    work = model.copy()
    stat = make_statistic(mode, vset, work, systematic=systematic, **options)
    extra = {
        "systematic": float(systematic),
        "angular_unit": getattr(work, "angular_unit_text", str(getattr(work, "angular_unit", ""))),
    }
    if options.get("gains"):  # station gains marginalised per interval (uvfit.stats.gains)
        extra["gains"] = {
            "solved": options["gains"],
            "interval": options.get("gain_interval", "scan"),
            "prior_spread": options.get("gain_prior"),
            "method": "likelihood marginalised over the gains of each interval (Laplace approximation)",
        }
    start = cov = None
    centres, best_errors = None, None
    if resume:
        if chain_path is not None and os.path.exists(chain_path):
            stored = chain_info(chain_path)["meta"]
            for key, now in (("mode", mode), ("systematic", float(systematic))):
                if key in stored and stored[key] != now:
                    raise UvfitError(
                        f"the chain in {chain_path} was run with {key} {stored[key]}, not {now}",
                        f"resume with the same `{key}`, or start a new chain with `force`",
                    )
        stat, fixed, notices = fix_degeneracies(stat)
        if (
            chain_path is not None
            and os.path.exists(chain_path)
            and chain_info(chain_path)["names"] == list(stat.model.free_names)
        ):
            # (other free parameters: resume_backend names them)
            check_digests(chain_path, stored, digests(vset, model))
        error_scale = float(stored.get("error_scale", 1.0)) if chain_path and os.path.exists(chain_path) else 1.0
    else:
        result = fit(stat, starts=starts, seed=seed, progress=fit_progress, strict=False)
        stat = result.statistic
        fixed, notices = list(result.fixed_by_fitter), list(result.notices)
        start, cov = np.asarray(result.values, float), np.asarray(result.covariance, float)
        centres, best_errors = solution_centres(result), np.asarray(result.errors, float)
        extra["least_squares"] = {
            "values": dict(zip(result.names, map(float, result.values))),
            "errors": dict(zip(result.names, map(float, result.errors))),
            "chi2": float(result.chi2),
            "dof": int(result.dof),
            "starts": int(result.starts),
            "seed": int(seed),
        }
        error_scale = 1.0
        if rescale_errors and result.dof > 0 and result.chi2 > 0:
            error_scale = float(np.sqrt(result.chi2 / result.dof))
            cov = cov * error_scale**2
    if rescale_errors and error_scale != 1.0:
        stat = stat.scaled(error_scale)
        notices = list(notices) + [f"every sigma multiplied by sqrt(chi2/dof) = {error_scale:.4g} (rescale_errors)"]
    if rescale_errors:
        extra["error_scale"] = float(error_scale)
    work = stat.model
    if stat.n_data <= len(work.free_names):
        raise FitError(
            f"only {stat.n_data} data for {len(work.free_names)} free parameters",
            "fix some parameters, or use more data (check the selection options)",
        )
    extra["fixed_for_mode"] = list(fixed)
    if frequency is None:
        frequency = float(np.mean(stat.vset.frequency)) if stat.vset.n else float("nan")
    extra["frequency_hz"] = frequency
    extra["redshift"] = float(redshift or 0.0)
    log_prob = LogPosterior(stat, work)
    bounds = (log_prob.lower, log_prob.upper)
    meta = {
        "mode": mode,
        "systematic": float(systematic),
        "data": None if data_path is None else str(data_path),
        "digest": digests(vset, model),
    }
    if rescale_errors:
        meta["error_scale"] = float(error_scale)
    chain = run_chain(
        log_prob,
        start,
        cov,
        bounds,
        work.free_names,
        n_walkers=n_walkers,
        max_steps=max_steps,
        seed=seed,
        procs=procs,
        chain_path=chain_path,
        resume=resume,
        force=force,
        progress=progress,
        meta=meta,
        ball_scale=ball_scale,
        modes=centres,
    )
    post = summarize_chain(
        chain,
        work,
        order_by=order_by,
        frequency=frequency,
        redshift=redshift,
        mode=mode,
        data_path=data_path,
        derived=derived,
        extra=extra,
        movable=fixed,
    )
    post.notes = list(notices) + post.notes
    if centres is not None and len(centres) > 1:
        found = posterior_modes(work, post, centres, best_errors, fixed)
        post.extra["modes"] = found
        heavy = [m for m in found if m["weight"] >= MODE_WEIGHT]
        if len(heavy) > 1:
            post.notes.insert(
                0,
                f"the posterior has {len(heavy)} modes (weights "
                + ", ".join(f"{m['weight']:.2f}" for m in heavy)
                + "): the medians and intervals above mix them; see 'modes' for each one's weight and medians "
                "(walkers seldom cross between well-separated modes: the weights follow where they started "
                "more than the posterior; the sampler cannot weigh such modes)",
            )
    return post


#: a mode is reported as one when it holds at least this fraction of the samples
MODE_WEIGHT = 0.05


def solution_centres(result):
    """The best fit and every other distinct solution within the reliability rule
    (:func:`uvfit.infer.solutions.errors_reliable`), as vectors of the free parameters; None when
    the fit has one solution that counts."""
    from ..solutions import delta_chi2_limit

    if getattr(result, "errors_reliable", True):
        return None
    limit = delta_chi2_limit(len(result.names))
    out = [np.asarray(result.values, float)]
    for sol in result.solutions[1:]:
        if sol["delta_chi2"] < limit:
            out.append(np.array([sol["parameters"][n] for n in result.names], float))
    return out if len(out) > 1 else None


def posterior_modes(model, post, centres, errors, movable=()):
    """Each sample assigned to the nearest centre (canonical labels; distance in the best fit's
    errors, angles on their circle): [{"weight", "median": {name: value}, "n_samples"}]."""
    from ..solutions import _scale, canonical

    names = list(post.names)
    samples = np.asarray(post.samples, float)
    c = canonical(model, np.asarray(centres, float), movable)
    scale = _scale(c[0], errors)
    periods = model.periods()
    period = np.array([periods.get(n, 0.0) for n in names], float)
    d = samples[:, None, :] - c[None, :, :]
    circ = period > 0
    d[..., circ] = (d[..., circ] + period[circ] / 2) % period[circ] - period[circ] / 2
    nearest = np.argmin(np.sum((d / scale) ** 2, axis=2), axis=1)
    out = []
    for j in range(len(c)):
        pick = samples[nearest == j]
        if pick.shape[0] == 0:
            continue
        out.append(
            {
                "weight": float(pick.shape[0] / samples.shape[0]),
                "n_samples": int(pick.shape[0]),
                "median": {n: float(v) for n, v in zip(names, np.median(pick, axis=0))},
            }
        )
    return sorted(out, key=lambda m: -m["weight"])
