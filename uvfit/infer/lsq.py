"""Weighted least squares on a statistic: several starts, an optional global stage, honest errors.

The objective is chi2(theta) = sum of the statistic's whitened residuals squared, minimised with
scipy.optimize.least_squares (trust-region reflective, analytic Jacobian, the model's bounds). The
covariance is the inverse of the Fisher matrix of the linearised problem, C = (J^T J)^-1 at the
optimum (e.g. Press et al., Numerical Recipes, 3rd ed. 2007, sec. 15.5), computed by SVD of the
column-scaled Jacobian so that a near-singular problem is detected and named instead of inverted.

AIC = chi2 + 2k (Akaike 1974, IEEE Trans. Autom. Control 19, 716) and BIC = chi2 + k ln n
(Schwarz 1978, Ann. Stat. 6, 461), with k free parameters and n data, up to a constant common to
all models fitted to the same data.

Priors other than the bounds are ignored here (use the sampler for them).
"""

from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import OptimizeResult, differential_evolution, least_squares

from ..errors import FitError, UvfitError
from .parallel import check_procs, run_pieces

#: relative singular value (of the column-normalised Jacobian) below which a direction counts as
#: unconstrained by the data
NULL_TOL = 1e-7

#: the rule of ``starts="auto"`` (see :func:`fit`): a first batch of AUTO_FIRST starts, then
#: batches of AUTO_BATCH until AUTO_AGREE starts end at the lowest chi2, at most AUTO_CAP in all
AUTO_FIRST = 8
AUTO_BATCH = 8
AUTO_AGREE = 3
AUTO_CAP = 32
#: evaluations per free parameter (+1) of a random start of the "auto" rule before it is judged
AUTO_NFEV = 40
#: two ends reach the same lowest chi2 when they differ by less than this (absolute, plus 1e-6 relative)
AUTO_SAME_CHI2 = 0.01


def check_starts(starts):
    """``starts`` as given ("auto" or an int >= 1); a UvfitError naming it otherwise."""
    if isinstance(starts, str):
        if starts.strip().lower() == "auto":
            return "auto"
        try:
            starts = int(starts)
        except ValueError:
            raise UvfitError(f"starts must be 'auto' or a whole number of at least 1 (got {starts!r})") from None
    if isinstance(starts, bool) or int(starts) != starts or int(starts) < 1:
        raise UvfitError(f"starts must be 'auto' or a whole number of at least 1 (got {starts})")
    return int(starts)


def agreeing_starts(chi2s):
    """How many of the end chi2 values lie within ``AUTO_SAME_CHI2`` (+1e-6 relative) of the lowest."""
    c = np.asarray([x for x in chi2s if np.isfinite(x)], float)
    if c.size == 0:
        return 0
    best = float(c.min())
    return int(np.sum(c - best <= AUTO_SAME_CHI2 + 1e-6 * abs(best)))


@dataclass
class FitResult:
    """Everything a least-squares fit found. Arrays follow ``names`` (the free parameters)."""

    names: list
    values: np.ndarray
    errors: np.ndarray
    covariance: np.ndarray
    correlation: np.ndarray
    chi2: float
    dof: int
    n_data: int
    log_likelihood: float
    converged: bool
    status: str
    nfev: int
    model: object
    statistic: object
    seed: int = 0
    starts: int = 1
    starts_requested: object = 1
    global_search: bool = False
    rescale_errors: bool = False
    error_scale: float = 1.0
    systematic: float = 0.0
    per_station: dict = field(default_factory=dict)
    per_baseline: dict = field(default_factory=dict)
    notices: list = field(default_factory=list)
    fixed_by_fitter: list = field(default_factory=list)
    start_chi2: list = field(default_factory=list)
    unconstrained: list = field(default_factory=list)
    solutions: list = field(default_factory=list)
    errors_reliable: bool = True

    @property
    def n_free(self):
        return len(self.names)

    @property
    def reduced_chi2(self):
        return self.chi2 / self.dof if self.dof > 0 else float("nan")

    @property
    def aic(self):
        return aic(self.chi2, self.n_free)

    @property
    def bic(self):
        return bic(self.chi2, self.n_free, self.n_data)

    def value(self, name):
        return float(self.values[self.names.index(name)])

    def error(self, name):
        return float(self.errors[self.names.index(name)])


def _poor_fit_chi2(dof):
    """The 99.9% point of the chi-square distribution with ``dof`` degrees of freedom (scipy)."""
    from scipy.stats import chi2 as chi2_dist

    return float(chi2_dist.isf(1e-3, dof))


def aic(chi2, k):
    """Akaike information criterion, chi2 + 2k (Akaike 1974)."""
    return float(chi2 + 2.0 * k)


def bic(chi2, k, n):
    """Bayesian information criterion, chi2 + k ln n (Schwarz 1978)."""
    return float(chi2 + k * np.log(n))


# -------------------------------------------------------------------------------------- helpers


def free_bounds(model):
    """(lower, upper) arrays of the free parameters, whatever form the model returns them in."""
    b = model.free_bounds()
    k = len(model.free_names)
    if (
        isinstance(b, tuple)
        and len(b) == 2
        and all(np.ndim(x) == 1 and len(x) == k for x in b)
        and not (k == 2 and all(isinstance(x, tuple) for x in b))
    ):
        lo, hi = np.asarray(b[0], float), np.asarray(b[1], float)
    else:
        arr = np.asarray(b, dtype=float).reshape(k, 2) if k else np.zeros((0, 2))
        lo, hi = arr[:, 0], arr[:, 1]
    return lo, hi


def check_bounds(model):
    """Raise a FitError naming any free parameter whose bounds or start value are inconsistent."""
    lo, hi = free_bounds(model)
    x0 = np.asarray(model.get_free(), float)
    for name, a, b, x in zip(model.free_names, lo, hi, x0):
        if not (a < b):
            raise FitError(
                f"parameter {name} has inconsistent bounds: min {a:g} is not below max {b:g}",
                "correct min/max in the model file",
            )
        if not np.isfinite(x):
            raise FitError(f"parameter {name} has no finite start value", "set a value in the model file")
        if not (a <= x <= b):
            raise FitError(
                f"the start value {x:g} of parameter {name} lies outside its bounds [{a:g}, {b:g}]",
                "move the value inside the bounds or widen them",
            )
    return lo, hi


def random_starts(model, statistic, n, rng, around=False):
    """``n`` start vectors: uniform inside finite bounds; otherwise a scatter around the start
    value scaled to the parameter's kind (the array's resolution for a length, 180 deg for an
    angle, half the value for a flux), reflected into one-sided bounds. ``around``: the scatter
    around the start values for every parameter, bounded ones included (reflected into the
    bounds, then clipped)."""
    names = model.free_names
    x0 = np.asarray(model.get_free(), float)
    lo, hi = free_bounds(model)
    vs = statistic.vset
    good = ~vs.flag
    qmax = float(np.max(np.hypot(vs.u[good], vs.v[good]))) if good.any() else 1.0
    resolution = (1.0 / qmax) / model.rad_per_unit if qmax > 0 else 1.0
    fmax = float(np.max(np.abs(vs.vis[good]))) if good.any() else 1.0
    out = []
    for _ in range(n):
        x = np.empty_like(x0)
        for i, name in enumerate(names):
            a, b = lo[i], hi[i]
            if np.isfinite(a) and np.isfinite(b) and not around:
                x[i] = rng.uniform(a, b)
                continue
            kind = model.parameters[name].kind
            if kind == "angle":
                val = x0[i] + rng.uniform(-180.0, 180.0)
            else:
                base = {"length": 2.0 * resolution, "flux": 0.3 * fmax}.get(kind, 0.3)
                scale = max(0.5 * abs(x0[i]), base)
                val = rng.normal(x0[i], scale)
            if np.isfinite(a) and val < a:
                val = a + (a - val)
            if np.isfinite(b) and val > b:
                val = b - (val - b)
            x[i] = min(max(val, a), b)
        out.append(x)
    return out


def _auto_starts(model, statistic, n, rng):
    """The random starts of the "auto" rule: alternately a scatter around the start values and a
    draw over the bounds (see :func:`random_starts`), so that a good start is refined cheaply and
    distant minima are still visited."""
    out = []
    for i in range(n):
        out += random_starts(model, statistic, 1, rng, around=(i % 2 == 0))
    return out


def null_directions(jac, names, tol=NULL_TOL):
    """Groups of parameter names the data cannot constrain (near-null directions of ``jac``).

    Columns are scaled to unit norm first (so units do not matter); a zero column is a parameter
    with no effect at all; a singular value below ``tol`` times the largest is a combination the
    data cannot tell apart, named by the parameters that dominate its null vector.
    """
    jac = np.asarray(jac, float)
    if jac.size == 0:
        return [[n] for n in names], np.inf
    norms = np.sqrt(np.sum(jac**2, axis=0))
    scale = norms.max() if norms.size else 0.0
    if not np.isfinite(scale) or scale == 0:
        return [list(names)], np.inf
    groups = []
    zero = norms <= 1e-12 * scale
    for i in np.where(zero)[0]:
        groups.append([names[i]])
    keep = np.where(~zero)[0]
    cond = np.inf if zero.any() else 1.0
    if keep.size:
        jn = jac[:, keep] / norms[keep]
        _, s, vt = np.linalg.svd(jn, full_matrices=False)
        if s[0] > 0:
            rel = s / s[0]
            if not zero.any():
                cond = float(1.0 / rel[-1]) if rel[-1] > 0 else np.inf
            for j in np.where(rel < tol)[0]:
                vec = np.abs(vt[j])
                order = np.argsort(vec)[::-1]
                dominant = [names[keep[i]] for i in order if vec[i] >= 0.3 * vec[order[0]]]
                groups.append(dominant)
    return groups, cond


def covariance_from_jacobian(jac, tol=NULL_TOL):
    """(covariance, mask of parameters in an unconstrained direction) from C = (J^T J)^-1.

    The inverse is taken by SVD of the column-normalised Jacobian; singular values below ``tol``
    times the largest are dropped (pseudo-inverse) and every parameter with weight in a dropped
    direction is marked, its variance set to infinity.
    """
    jac = np.asarray(jac, float)
    k = jac.shape[1]
    norms = np.sqrt(np.sum(jac**2, axis=0))
    bad = np.zeros(k, bool)
    cov = np.full((k, k), np.nan)
    if k == 0:
        return np.zeros((0, 0)), bad
    good = norms > 1e-12 * max(norms.max(), 1e-300)
    bad |= ~good
    idx = np.where(good)[0]
    if idx.size:
        jn = jac[:, idx] / norms[idx]
        _, s, vt = np.linalg.svd(jn, full_matrices=False)
        keep = s > tol * s[0]
        inv = (vt[keep].T / s[keep] ** 2) @ vt[keep]
        for j in np.where(~keep)[0]:
            vec = np.abs(vt[j])
            bad[idx[vec >= 0.3 * vec.max()]] = True
        sub = inv / np.outer(norms[idx], norms[idx])
        cov[np.ix_(idx, idx)] = sub
    cov[bad, :] = np.nan
    cov[:, bad] = np.nan
    for i in np.where(bad)[0]:
        cov[i, i] = np.inf
    return cov, bad


def correlation_from_covariance(cov):
    d = np.sqrt(np.diag(cov))
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = cov / np.outer(d, d)
    for i in range(len(d)):
        if np.isfinite(d[i]):
            corr[i, i] = 1.0
    return corr


def residual_breakdown(statistic, residuals):
    """chi2 and number of data per station and per baseline, from the whitened residuals.

    Uses ``statistic.row_index`` (an int array mapping each datum to a row of ``statistic.vset``,
    -1 for none; a 2-D array lists several rows per datum, whose chi2 is then shared equally).
    Without it, a data vector of n or 2n entries on n rows is mapped in order; otherwise the
    breakdown is empty.
    """
    vs = statistic.vset
    r2 = np.asarray(residuals, float) ** 2
    index = getattr(statistic, "row_index", None)
    if index is None:
        if len(r2) == vs.n:
            index = np.arange(vs.n)
        elif len(r2) == 2 * vs.n:
            index = np.concatenate([np.arange(vs.n), np.arange(vs.n)])
        else:
            return {}, {}
    index = np.asarray(index, int)
    if index.ndim == 1:
        index = index[:, None]
    if index.shape[0] != len(r2):
        return {}, {}
    valid = index >= 0
    count = np.maximum(valid.sum(axis=1), 1)
    share = (r2 / count)[:, None] * np.ones(index.shape)
    rows = index[valid]
    weights = share[valid]
    ones = np.ones_like(weights)
    # per row totals, then per baseline and station
    row_chi2 = np.bincount(rows, weights=weights, minlength=vs.n)
    row_n = np.bincount(rows, weights=ones, minlength=vs.n)
    labels, inverse = np.unique(vs.baseline_labels, return_inverse=True)
    b_chi2 = np.bincount(inverse, weights=row_chi2, minlength=len(labels))
    b_n = np.bincount(inverse, weights=row_n, minlength=len(labels))
    per_baseline = {str(lab): {"chi2": float(c), "n": float(m)} for lab, c, m in zip(labels, b_chi2, b_n) if m > 0}
    names = np.array(vs.stations.names)
    a1, a2 = vs.ant1, vs.ant2
    s_chi2 = np.bincount(a1, weights=row_chi2, minlength=len(names)) + np.bincount(
        a2, weights=row_chi2, minlength=len(names)
    )
    s_n = np.bincount(a1, weights=row_n, minlength=len(names)) + np.bincount(a2, weights=row_n, minlength=len(names))
    per_station = {str(nm): {"chi2": float(c), "n": float(m)} for nm, c, m in zip(names, s_chi2, s_n) if m > 0}
    for d in (per_baseline, per_station):
        for item in d.values():
            item["n"] = int(round(item["n"])) if float(item["n"]).is_integer() else item["n"]
    return per_station, per_baseline


def fix_degeneracies(statistic):
    """Fix, in the statistic's model, every parameter the statistic says it cannot constrain.

    Returns (statistic rebuilt on the changed model, [names fixed], [notices]); the notices start
    with the statistic's own ``notices``.
    """
    model = statistic.model
    degs = list(statistic.degeneracies() or [])
    notices = list(statistic.notices)
    fixed = []
    for name, reason in degs:
        p = model.parameters[name]
        if p.fixed or p.tie is not None:
            continue
        p.fixed = True
        p.note = f"fixed by the fitter: {reason}"
        fixed.append(name)
        notices.append(f"{name} fixed at {p.value:g}: {reason}")
    if fixed:
        statistic = statistic.rebuilt(model)
    return statistic, fixed, notices


# ------------------------------------------------------------------------------------- the fit


def _run_start(statistic, x0, lo, hi, max_nfev):
    # least_squares needs a start inside the bounds; nudge one sitting on a bound inward a little
    with np.errstate(invalid="ignore"):
        span = np.where(np.isfinite(hi - lo), hi - lo, np.maximum(np.abs(x0), 1.0))
        x0 = np.clip(np.asarray(x0, float), lo, hi)
        on_lo = np.isfinite(lo) & (x0 <= lo)
        on_hi = np.isfinite(hi) & (x0 >= hi)
        x0 = np.where(on_lo, lo + 1e-9 * span, x0)
        x0 = np.where(on_hi, hi - 1e-9 * span, x0)
    with np.errstate(all="ignore"):
        return least_squares(
            statistic.residuals,
            x0,
            jac=statistic.jacobian,
            bounds=(lo, hi),
            method="trf",
            x_scale="jac",
            max_nfev=max_nfev,
        )


def _start_piece(shared, piece):
    """One start's least-squares run, in a worker: the few fields the fitter reads (None when the
    residuals were not finite)."""
    statistic, lo, hi = shared
    x0, nfev = piece
    try:
        res = _run_start(statistic, x0, lo, hi, nfev)
    except ValueError:
        return None
    return OptimizeResult(
        x=np.asarray(res.x, float),
        cost=float(res.cost),
        status=int(res.status),
        nfev=int(res.nfev),
        message=res.message,
    )


#: members of the global search's final population polished by least squares
GLOBAL_POLISH = 4
#: relative spread of the population's chi2 at which the global search stops (the polish by least
#: squares does the rest)
GLOBAL_TOL = 0.01


def global_minimum(statistic, lo, hi, seed, maxiter=150, popsize=15, polish=GLOBAL_POLISH):
    """Start vectors from a global search of chi2 inside finite bounds: the best ``polish``
    distinct members of the final population of a seeded differential evolution (Storn & Price
    1997, J. Global Optim. 11, 341; scipy.optimize.differential_evolution with the DE/rand/1/bin
    strategy, which keeps the population spread longer than DE/best/1, a Latin-hypercube initial
    population and no polish of its own). The fitter polishes each by least squares as one
    more start, so the search's best basin and its runners-up are all tried: a population that
    has not converged often holds the global basin in a member other than its best.
    """
    names = statistic.model.free_names
    open_ = [n for n, a, b in zip(names, lo, hi) if not (np.isfinite(a) and np.isfinite(b))]
    if open_:
        raise FitError(
            "the global search needs a finite min and max for every free parameter; "
            "these have none: " + ", ".join(open_),
            "set min and max for them in the model file, or set global_search to False",
        )

    def objective(x):
        with np.errstate(all="ignore"):
            try:
                c = statistic.chi2(x)
            except (ValueError, FloatingPointError, ZeroDivisionError):
                return 1e300
        return c if np.isfinite(c) else 1e300

    res = differential_evolution(
        objective,
        list(zip(lo, hi)),
        strategy="rand1bin",
        seed=seed,
        maxiter=maxiter,
        popsize=popsize,
        tol=GLOBAL_TOL,
        polish=False,
        init="latinhypercube",
    )
    out = [np.asarray(res.x, float)]
    population = getattr(res, "population", None)
    energies = getattr(res, "population_energies", None)
    if population is not None and energies is not None:
        span = np.asarray(hi, float) - np.asarray(lo, float)
        for j in np.argsort(energies, kind="stable"):
            if len(out) >= polish:
                break
            x = np.asarray(population[j], float)
            if all(np.max(np.abs(x - y) / span) > 1e-3 for y in out):
                out.append(x)
    return out


def _canonical_best(statistic, model, theta, movable, lo=None, hi=None, max_nfev=None):
    """The best fit relabelled to canonical order (uvfit.infer.solutions), kept when the
    relabelled point fits as well: the same chi2 (an exact label swap), or, for a statistic only
    nearly blind to the shift and scale that the swap uses, as well after one polishing run from
    it (within ``AUTO_SAME_CHI2`` plus 1e-6 relative)."""
    from .solutions import canonical

    other = canonical(model, theta[None, :], movable)[0]
    if np.allclose(other, theta, rtol=0, atol=0):
        return theta
    with np.errstate(all="ignore"):
        c0, c1 = statistic.chi2(theta), statistic.chi2(other)
    if np.isfinite(c1) and abs(c1 - c0) <= 1e-9 * max(1.0, abs(c0)):
        return other
    if lo is None or not np.isfinite(c1) or not np.all((other >= lo) & (other <= hi)):
        return theta
    try:
        res = _run_start(statistic, other, lo, hi, max_nfev)
    except ValueError:
        return theta
    polished = np.asarray(res.x, float)
    c2 = float(2.0 * res.cost)
    if res.status > 0 and c2 <= c0 + AUTO_SAME_CHI2 + 1e-6 * abs(c0):
        again = canonical(model, polished[None, :], movable)[0]
        if np.allclose(again, polished, rtol=0, atol=0):
            return polished
    return theta


def fit(
    statistic,
    model=None,
    starts="auto",
    seed=0,
    global_search=False,
    progress=None,
    rescale_errors=False,
    max_nfev=None,
    strict=True,
    procs=1,
):
    """Least-squares fit of the statistic's model; returns a :class:`FitResult`.

    ``model``: the model to fit (default: the statistic's own); it is changed in place (parameters
    the statistic cannot constrain are fixed, the best-fit values are set), ``result.model`` is a
    copy. ``starts``: the number of starts, or "auto" (the default). The first start is the
    model's values, the others are random (see :func:`random_starts`: uniform inside finite
    bounds, else scattered around the start values), seeded by ``numpy.random.default_rng(seed)``.
    The "auto" rule: a first batch of ``AUTO_FIRST`` (8) starts, the random ones alternately
    scattered around the start values and drawn over the bounds (:func:`_auto_starts`); then
    another batch of ``AUTO_BATCH`` (8) while fewer than ``AUTO_AGREE`` (3) starts end within
    ``AUTO_SAME_CHI2`` (0.01, plus 1e-6 relative) of the lowest chi2 found and the last batch
    lowered it, up to ``AUTO_CAP`` (32) starts in all. A random start gets ``AUTO_NFEV`` (40) x
    (free parameters + 1) evaluations; one that has not converged by then is finished (with
    ``max_nfev``) only when it is already below the best chi2 found. The number used is
    ``result.starts`` (``result.starts_requested`` is what was asked). ``global_search``: a seeded
    global search of chi2 inside the (finite) bounds (see :func:`global_minimum`); its best
    distinct points are more starts (counted in ``result.starts``). ``progress``: called with 1 after each start. ``rescale_errors``: multiply
    every error by sqrt(chi2/dof), as if the sigmas were scaled to give a reduced chi2 of 1.
    ``strict``: raise FitError when no start converged (False: return the best anyway).
    ``procs``: processes for the starts (each start's first run is independent of the others, and
    finishing the promising ones keeps the order of one process: the numbers do not change).
    """
    if model is not None and model is not statistic.model:
        statistic = statistic.rebuilt(model)
    model = statistic.model
    starts = check_starts(starts)
    statistic, fixed, notices = fix_degeneracies(statistic)
    names = list(model.free_names)
    k = len(names)
    if k == 0:
        raise FitError(
            "the model has no free parameter left to fit"
            + (f" (fixed because the mode cannot constrain them: {', '.join(fixed)})" if fixed else ""),
            "free at least one parameter in the model file, or use another fitting mode",
        )
    n = statistic.n_data
    if n <= k:
        raise FitError(
            f"only {n} data for {k} free parameters: the fit is not determined",
            "fix some parameters, or use more data (check the selection options)",
        )
    lo, hi = check_bounds(model)
    x_start = np.asarray(model.get_free(), float)

    with np.errstate(all="ignore"):
        r0 = statistic.residuals(x_start)
    if not np.all(np.isfinite(r0)):
        raise FitError(
            "the model gives non-finite predictions at its start values", "check the parameter values in the model file"
        )
    with np.errstate(all="ignore"):
        j0 = statistic.jacobian(x_start)
    j0 = np.asarray(j0, float)
    if not np.all(np.isfinite(j0)):
        raise FitError(
            "the model's derivatives are not finite at its start values",
            "check the parameter values in the model file (a size of exactly zero?)",
        )
    if not np.any(j0 != 0):
        raise FitError(
            "the data cannot constrain any free parameter at the start values (the "
            f"{statistic.mode} data do not change when {', '.join(names)} change)",
            "fix these parameters, choose start values where they matter, or use another fitting mode",
        )
    groups, _ = null_directions(j0, names)
    for grp in groups:
        if len(grp) == 1:
            notices.append(f"at the start values the data do not constrain {grp[0]}")
        else:
            notices.append(
                "at the start values the data cannot separate " + ", ".join(grp) + " (a degenerate combination)"
            )

    rng = np.random.default_rng(seed)
    first = AUTO_FIRST if starts == "auto" else int(starts)
    start_list = [x_start] + (
        _auto_starts(model, statistic, first - 1, rng)
        if starts == "auto"
        else random_starts(model, statistic, first - 1, rng)
    )
    n_global = 0
    if global_search:
        found = global_minimum(statistic, lo, hi, seed)
        n_global = len(found)
        start_list += found
    if max_nfev is None:
        max_nfev = 200 * (k + 1)

    best, best_any, start_chi2, ends, end_chi2 = None, None, [], [], []
    batch_best = np.inf
    procs = check_procs(procs)

    def is_short(j):  # start j (from 0) gets the short budget of the "auto" rule
        return starts == "auto" and j > 0 and not (first <= j < first + n_global)

    def budget(j):
        return min(max_nfev, AUTO_NFEV * (k + 1)) if is_short(j) else max_nfev

    # with several processes the first run of every start of a batch is made ahead, in parallel
    # (it depends on nothing but the start); finishing a promising one stays in order, here
    ahead: dict = {}
    i = 0
    while i < len(start_list):
        if procs > 1 and i not in ahead and len(start_list) - i > 1:
            todo = list(range(i, len(start_list)))
            runs = run_pieces(_start_piece, [(start_list[j], budget(j)) for j in todo], (statistic, lo, hi), procs)
            ahead.update(zip(todo, runs))
        x0 = start_list[i]
        i += 1
        short = is_short(i - 1)
        try:
            if i - 1 in ahead:
                res = ahead.pop(i - 1)
                if res is None:
                    raise ValueError("non-finite residuals")
            else:
                res = _run_start(statistic, x0, lo, hi, budget(i - 1))
            if short and res.status == 0 and (best is None or 2.0 * res.cost < 2.0 * best.cost):
                res = _run_start(statistic, res.x, lo, hi, max_nfev)  # promising: finish it
        except ValueError:  # non-finite residuals at a random start, typically
            res = None
        if res is None:
            start_chi2.append(float("nan"))
        else:
            c = float(2.0 * res.cost)
            start_chi2.append(c)
            ends.append(np.asarray(res.x, float))
            end_chi2.append(c if res.status > 0 else float("nan"))
            if np.isfinite(c):
                if best_any is None or c < 2.0 * best_any.cost:
                    best_any = res
                if res.status > 0 and (best is None or c < 2.0 * best.cost):
                    best = res
        if progress:
            progress(1)
        if starts == "auto" and i == len(start_list):
            cap = AUTO_CAP + n_global
            now = 2.0 * best.cost if best is not None else np.inf
            improved = now < batch_best - AUTO_SAME_CHI2 - 1e-6 * abs(now)
            batch_best = now
            if agreeing_starts(end_chi2) < AUTO_AGREE and improved and len(start_list) < cap:
                more = min(AUTO_BATCH, cap - len(start_list))
                start_list += _auto_starts(model, statistic, more, rng)
    if best is None:
        if best_any is None:
            raise FitError(
                "every start of the fit failed: the model's predictions were not finite",
                "check the start values and bounds in the model file",
            )
        if strict:
            raise FitError(
                f"the fit did not converge after {best_any.nfev} evaluations ({len(start_list)} start(s))",
                "try starts 20, tighter bounds, or better start values",
            )
        best = best_any
        notices.append(f"the fit did not converge after {best.nfev} evaluations")

    theta = np.asarray(best.x, float)
    theta = _canonical_best(statistic, model, theta, fixed, lo, hi, max_nfev)
    model.set_free(theta)
    r = statistic.residuals(theta)
    chi2 = float(r @ r)
    jac = statistic.jacobian(theta)
    cov, bad = covariance_from_jacobian(jac)
    unconstrained = [names[i] for i in np.where(bad)[0]]
    if unconstrained:
        if len(unconstrained) == k:
            msg = "the data constrain none of the free parameters at the best fit"
            if strict:
                raise FitError(
                    msg + f" ({', '.join(names)})",
                    "fix or tie parameters, or choose a model with fewer free parameters",
                )
        groups, _ = null_directions(jac, names)
        for grp in groups:
            notices.append(
                "at the best fit the data cannot constrain "
                + " + ".join(grp)
                + ": their errors are undefined (reported as infinite); fix or tie one of them"
            )
    dof = n - k
    scale = 1.0
    if rescale_errors:
        scale = float(np.sqrt(chi2 / dof)) if dof > 0 and chi2 > 0 else 1.0
        cov = cov * scale**2
        notices.append(f"errors multiplied by sqrt(chi2/dof) = {scale:.3g} (errors rescaled on request)")
    elif dof > 0 and chi2 > _poor_fit_chi2(dof):
        notices.append(
            f"reduced chi2 {chi2 / dof:.3g} is far above 1 (beyond the 99.9% point of chi2 with "
            f"{dof} degrees of freedom): the model does not describe the data to within their "
            "errors, so the quoted errors are too small; consider a richer model, a systematic "
            "floor or errors rescaled by sqrt(chi2/dof)"
        )
    with np.errstate(invalid="ignore"):
        errors = np.sqrt(np.diag(cov))
    corr = correlation_from_covariance(cov)
    per_station, per_baseline = residual_breakdown(statistic, r)
    from .solutions import ambiguity_text, catalogue
    from .solutions import errors_reliable as _reliable

    end_chi2 = [chi2 if e is best.x else c for e, c in zip(ends, end_chi2)]
    solutions = catalogue(model, names, ends or [theta], end_chi2 or [chi2], theta, errors, movable=fixed)
    reliable = _reliable(solutions, k)
    if not reliable:
        notices.insert(0, ambiguity_text(solutions, k))
    result = FitResult(
        names=names,
        values=theta,
        errors=errors,
        covariance=cov,
        correlation=corr,
        chi2=chi2,
        dof=dof,
        n_data=n,
        log_likelihood=float(statistic.log_likelihood(theta)),
        converged=bool(best.status > 0),
        status=str(best.message),
        nfev=int(best.nfev),
        model=model.copy(),
        statistic=statistic,
        seed=int(seed),
        starts=len(start_list),
        starts_requested=starts,
        global_search=bool(global_search),
        rescale_errors=bool(rescale_errors),
        error_scale=scale,
        systematic=float(statistic.systematic),
        per_station=per_station,
        per_baseline=per_baseline,
        notices=notices,
        fixed_by_fitter=fixed,
        start_chi2=start_chi2,
        unconstrained=unconstrained,
        solutions=solutions,
        errors_reliable=bool(reliable),
    )
    return result
