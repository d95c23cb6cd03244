"""Station gains as nuisance parameters of a complex-visibility fit.

Model of a row on (station i, station j) in gain interval b::

    V_ij = g_bi conj(g_bj) V_model(u, v; theta),   g = exp(a + i phi)

with a the log amplitude gain and phi the phase gain of a station in an interval. ``gains`` says
what is solved: "amplitude" (a only), "phase" (phi only) or "complex" (both).

Intervals (``gain_interval``): "scan" (the VisibilitySet's per-row ``scan`` where the file has one,
else scans found from gaps in time longer than :data:`SCAN_GAP_FACTOR` times the median spacing of
the integrations, and at least :data:`MIN_SCAN_GAP_S`), or a number of seconds (bins of that length
counted from the start of each scan).

Priors (``gain_prior``): ``{station: spread}`` with ``"*"`` for every other station; the spread is
the fractional rms of the amplitude gain: a Gaussian prior of mean 1 and rms ``spread`` on
|g| = exp(a), one extra residual (|g| - 1) / spread per station and interval. A station without a
spread has a flat prior on a. Phases always have a flat prior; in each interval the phase of a
reference station (the station with the most rows overall among those present) is held at 0,
which changes no prediction (only phase differences enter V_ij).

Flux scale: amplitude gains with a flat prior on every station leave the total flux undetermined
(all gains of an interval times c and every flux divided by c^2 give the same data). The fitter
then holds the total flux at its start value (as the closure modes do), which sets the flux scale;
a ``gain_prior`` on at least one station lets the amplitude calibration constrain it instead.

Method. For given structure parameters theta the gains of every interval are solved as in
self-calibration (Thompson, Moran & Swenson 2017, "Interferometry and Synthesis in Radio
Astronomy", 3rd ed., ch. 10; gain constraints as in Cornwell & Wilkinson 1981, MNRAS 196, 1067):
first damped alternating updates of each station's complex gain (each a weighted linear least
squares with the other gains held), then Gauss-Newton steps on (a, phi) with the prior as extra
residuals (each step at most :data:`MAX_STEP` in a and phi). Intervals are independent given
theta, so the normal matrix of the gains is block diagonal: each block (2 x stations) is
solved by one batched dense solve, and hundreds of gains stay cheap.

The structure fit then sees the profiled residuals r(theta, g*(theta)) (variable projection,
Golub & Pereyra 1973, SIAM J. Numer. Anal. 10, 413) with the Jacobian
J_p = J_theta + J_g dg*/dtheta, dg*/dtheta from the same blocks (Kaufman 1975, BIT 15, 49).
J_p^T J_p is the Schur complement of the gain block in the full normal matrix, so the covariance
of the structure parameters accounts for the gains. The log-likelihood (for the sampler) is the
Laplace approximation of the likelihood marginalised over the gains of every interval (Tierney &
Kadane 1986, JASA 81, 82): -chi2_p / 2 - 1/2 sum_b log |det H_b| + const, with H_b the Gauss-Newton
Hessian of block b. The number of degrees of freedom counts every solved gain as a parameter.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from ..errors import UvfitError
from .base import Statistic, common_shift, effective_sigma, model_visibilities_and_jacobian
from .visibility import _Rows, free_translation

#: what can be solved
GAIN_KINDS = ("amplitude", "phase", "complex")
#: a gap between integrations longer than this many median spacings starts a new scan ...
SCAN_GAP_FACTOR = 5.0
#: ... and never a gap shorter than this (s)
MIN_SCAN_GAP_S = 30.0
_ALTERNATING_STEPS = 8
_NEWTON_STEPS = 30
#: the largest Gauss-Newton change of a log amplitude or a phase (rad) in one step
MAX_STEP = 0.5
#: a median |g - 1| / spread above this gets a notice (the gains absorb a model mismatch)
PRIOR_PULL_LIMIT = 2.0
#: the gains are solved when no Gauss-Newton step changes a log amplitude or phase by more
STEP_TOLERANCE = 1e-6
_SECONDS_PER_DAY = 86400.0

FLAT_AMPLITUDE_REASON = (
    "amplitude gains with a flat prior leave the total flux undetermined (the gains absorb any "
    "common scale); it is held at its start value, which sets the flux scale, and the other "
    "fluxes are measured relative to it; give gain_prior (e.g. '*=0.1') to let the amplitude "
    "calibration constrain it"
)


def check_gain_kind(gains: str | None) -> str | None:
    """``gains`` itself when it is None or one of :data:`GAIN_KINDS`, else UvfitError."""
    if gains is None or gains in GAIN_KINDS:
        return gains
    raise UvfitError(f"gains must be one of {', '.join(GAIN_KINDS)} (got {gains!r})", "e.g. gains='complex'")


def parse_gain_interval(interval: str | float | None) -> str | float:
    """ "scan" or a positive number of seconds, from ``gain_interval`` (None: "scan")."""
    if interval is None or (isinstance(interval, str) and interval.strip().lower() == "scan"):
        return "scan"
    try:
        seconds = float(interval)
    except (TypeError, ValueError):
        raise UvfitError(
            f"gain_interval must be 'scan' or a number of seconds (got {interval!r})", "e.g. gain_interval=600"
        ) from None
    if not np.isfinite(seconds) or seconds <= 0:
        raise UvfitError(f"gain_interval must be a positive number of seconds (got {interval!r})")
    return seconds


def parse_gain_prior(prior: str | dict | None) -> dict[str, float]:
    """{station or "*": fractional spread} from ``gain_prior``, text "AA=0.05,LM=0.3,*=0.1" or a dict."""
    if prior is None or prior == "":
        return {}
    if isinstance(prior, str):
        items = {}
        for part in prior.split(","):
            part = part.strip()
            if not part:
                continue
            name, sep, value = part.partition("=")
            if not sep or not name.strip():
                raise UvfitError(
                    f"gain_prior entries are STATION=SPREAD (got {part!r})", "e.g. gain_prior='AA=0.05,*=0.1'"
                )
            items[name.strip()] = value.strip()
        prior = items
    out = {}
    for name, value in dict(prior).items():
        try:
            spread = float(value)
        except (TypeError, ValueError):
            raise UvfitError(f"gain_prior of {name} must be a number (got {value!r})", "e.g. '*=0.1'") from None
        if not np.isfinite(spread) or spread <= 0:
            raise UvfitError(
                f"gain_prior of {name} must be a positive fraction (got {value!r})",
                "leave a station out of gain_prior for a flat prior",
            )
        out[str(name)] = spread
    return out


def scan_numbers(time_mjd: np.ndarray, scan: np.ndarray | None = None) -> np.ndarray:
    """Scan index (0, 1, ...) per row: the file's ``scan`` where every row has one (>= 0), else
    from gaps in time (see the module docstring)."""
    t = np.asarray(time_mjd, float) * _SECONDS_PER_DAY
    if scan is not None and len(scan) and np.all(np.asarray(scan) >= 0):
        # order the file's scans by time
        ids, inverse = np.unique(np.asarray(scan, int), return_inverse=True)
        first = np.full(len(ids), np.inf)
        np.minimum.at(first, inverse, t)
        rank = np.empty(len(ids), int)
        rank[np.argsort(first, kind="stable")] = np.arange(len(ids))
        return rank[inverse]
    times = np.unique(t)
    if times.size < 2:
        return np.zeros(t.size, int)
    steps = np.diff(times)
    gap = max(SCAN_GAP_FACTOR * float(np.median(steps)), MIN_SCAN_GAP_S)
    starts = np.concatenate([[0], np.cumsum(steps > gap)])
    return starts[np.searchsorted(times, t)]


def gain_intervals(time_mjd: np.ndarray, scan: np.ndarray | None, interval: str | float) -> np.ndarray:
    """Interval index (0, 1, ..., in time order) per row for ``interval`` ("scan" or seconds)."""
    scans = scan_numbers(time_mjd, scan)
    if interval == "scan":
        return scans
    t = np.asarray(time_mjd, float) * _SECONDS_PER_DAY
    n_scans = int(scans.max()) + 1 if scans.size else 0
    t0 = np.full(n_scans, np.inf)
    np.minimum.at(t0, scans, t)
    bins = np.floor((t - t0[scans]) / float(interval)).astype(int)
    _, index = np.unique(np.stack([scans, bins]), axis=1, return_inverse=True)
    return np.asarray(index).reshape(-1)


class GainSolution:
    """The gains of one structure vector: log amplitudes ``a`` and phases ``phi`` (n_intervals,
    n_stations), the whitened residual vector, the sparse gain Jacobian and the bordered blocks."""

    def __init__(self, a, phi, predicted, residuals, blocks, build_jacobian):
        self.a, self.phi = a, phi
        self.predicted = predicted
        self.residuals = residuals
        self.blocks = blocks
        self._build_jacobian = build_jacobian
        self._jac = None

    @property
    def jac_gain(self):
        """The sparse Jacobian of the residuals in the gains (built when first asked)."""
        if self._jac is None:
            self._jac = self._build_jacobian()
        return self._jac

    @property
    def gains(self) -> np.ndarray:
        return np.exp(self.a + 1j * self.phi)


class GainSolver:
    """Solves the gains of every interval for given model visibilities (module docstring).

    ``interval``, ``ant1``, ``ant2``: per row (ant indices 0 .. n_stations-1); ``vis`` the data,
    ``sigma`` per real/imaginary part; ``spread``: prior spread of a per station (inf: flat).
    """

    def __init__(self, kind, interval, ant1, ant2, vis, sigma, spread):
        self.kind = kind
        self.interval = np.asarray(interval, int)
        self.ant1 = np.asarray(ant1, int)
        self.ant2 = np.asarray(ant2, int)
        self.vis = np.asarray(vis, complex)
        self.sigma = np.asarray(sigma, float)
        self.spread = np.asarray(spread, float)
        n_int = int(self.interval.max()) + 1 if self.interval.size else 0
        n_st = len(self.spread)
        self.n_intervals, self.n_stations = n_int, n_st
        self.width = 2 * n_st  # a (stations), then phi (stations)
        present = np.zeros((n_int, n_st), bool)
        present[self.interval, self.ant1] = True
        present[self.interval, self.ant2] = True
        self.present = present
        rows_per_station = np.bincount(self.ant1, minlength=n_st) + np.bincount(self.ant2, minlength=n_st)
        order = np.argsort(-rows_per_station, kind="stable")
        # the reference of each interval: the present station with most rows overall
        rank = np.empty(n_st, int)
        rank[order] = np.arange(n_st)
        ranked = np.where(present, rank[None, :], n_st + 1)
        self.reference = np.argmin(ranked, axis=1)
        solve_a = kind in ("amplitude", "complex")
        solve_phi = kind in ("phase", "complex")
        active = np.zeros((n_int, self.width), bool)
        if solve_a:
            active[:, :n_st] = present
        if solve_phi:
            active[:, n_st : 2 * n_st] = present
            active[np.arange(n_int), n_st + self.reference] = False
        flat = ~np.isfinite(self.spread)
        #: True when the total flux is undetermined (amplitudes solved, no station with a prior)
        self.flux_free = bool(solve_a and np.all(flat[np.any(present, axis=0)]))
        self.active = active
        # prior rows: one per (interval, station) with a solved and a finite spread
        if solve_a:
            pb, ps = np.nonzero(present & ~flat[None, :])
        else:
            pb, ps = np.zeros(0, int), np.zeros(0, int)
        self.prior_interval, self.prior_station = pb, ps
        self.n_prior = int(pb.size)
        n = self.vis.size
        self.n_rows = n
        w = self.width
        base = self.interval * w
        self._cols = np.stack([base + self.ant1, base + self.ant2, base + n_st + self.ant1, base + n_st + self.ant2])
        self._prior_cols = pb * w + ps
        # where each row's 4 x 4 products land in the normal blocks, and its 4 terms in the gradient
        local = np.stack([self.ant1, self.ant2, n_st + self.ant1, n_st + self.ant2])
        block_base = self.interval * (w * w)
        self._block_index = (block_base[None, None, :] + local[:, None, :] * w + local[None, :, :]).reshape(-1)
        self._grad_index = ((self.interval * w)[None, :] + local).reshape(-1)
        self.n_gains = int(active.sum())

    def scaled(self, factor: float) -> GainSolver:
        out = object.__new__(GainSolver)
        out.__dict__.update(self.__dict__)
        out.sigma = self.sigma * float(factor)
        return out

    # -- pieces ---------------------------------------------------------------------------
    def _row_gains(self, a, phi):
        b, i, j = self.interval, self.ant1, self.ant2
        return np.exp(a[b, i] + a[b, j] + 1j * (phi[b, i] - phi[b, j]))

    def _reference_phases(self, model_vis, wt, k1, k2, size):
        """Phase of each station from its baselines to the interval's reference station (whose
        phase is 0): arg of the weighted sum of V conj(V_model) (conjugated where the station is
        first); 1 where a station has no baseline to the reference."""
        ref = self.reference[self.interval]
        x = wt * self.vis * np.conj(model_vis)
        z = np.zeros(size, complex)
        first, second = self.ant1 == ref, self.ant2 == ref
        np.add.at(z, k2[first], np.conj(x[first]))
        np.add.at(z, k1[second], x[second])
        mod = np.abs(z)
        return np.where(mod > 0, z / np.where(mod > 0, mod, 1.0), 1.0 + 0j)

    def _alternating(self, model_vis):
        """Damped alternating least squares for complex (or unit-modulus) gains, from the
        phases on the baselines to the reference station."""
        b, i, j = self.interval, self.ant1, self.ant2
        n_int, n_st = self.n_intervals, self.n_stations
        size = n_int * n_st
        wt = 1.0 / self.sigma**2
        k1, k2 = b * n_st + i, b * n_st + j
        g = self._reference_phases(model_vis, wt, k1, k2, size)
        vis = self.vis
        for step in range(_ALTERNATING_STEPS):
            gi, gj = g[k1], g[k2]
            x1 = wt * vis * gj * np.conj(model_vis)  # V conj(conj(g_j) M)
            d1 = wt * np.abs(gj * model_vis) ** 2
            x2 = wt * np.conj(vis) * gi * model_vis
            d2 = wt * np.abs(gi * model_vis) ** 2
            num = (
                np.bincount(k1, x1.real, size)
                + np.bincount(k2, x2.real, size)
                + 1j * (np.bincount(k1, x1.imag, size) + np.bincount(k2, x2.imag, size))
            )
            den = np.bincount(k1, d1, size) + np.bincount(k2, d2, size)
            new = np.where(den > 0, num / np.where(den > 0, den, 1.0), g)
            if self.kind == "phase":
                mod = np.abs(new)
                new = np.where(mod > 0, new / np.where(mod > 0, mod, 1.0), g)
            else:
                mod = np.abs(new)
                new = np.where(mod > 1e-3, new, 1e-3 * np.exp(1j * np.angle(new)))
            change = float(np.max(np.abs(new - g))) if size else 0.0
            g = 0.5 * (g + new)
            if change < 1e-3 and step > 2:
                break
        g = g.reshape(n_int, n_st)
        return np.log(np.abs(g)), np.angle(g)

    def _gauge(self, a, phi):
        if self.kind != "amplitude":
            phi = phi - phi[np.arange(self.n_intervals), self.reference][:, None]
            phi = np.angle(np.exp(1j * phi))
        if self.kind == "phase":
            a = np.zeros_like(a)
        if self.kind == "amplitude":
            phi = np.zeros_like(phi)
        a = np.where(self.present, a, 0.0)
        phi = np.where(self.present, phi, 0.0)
        return a, phi

    def _linearise(self, model_vis, a, phi, jacobian=False):
        """(predicted, residual vector, normal blocks, gradient blocks, sparse gain Jacobian or
        None); the blocks are summed straight from the rows (bincount), the sparse Jacobian is
        built only when asked."""
        n, w, n_int = self.n_rows, self.width, self.n_intervals
        pred = self._row_gains(a, phi) * model_vis
        res_c = (self.vis - pred) / self.sigma
        d = -pred / self.sigma  # d residual / d a_i (and a_j)
        # d residual / d phi_i = -i pred / sigma, d / d phi_j = +i pred / sigma
        vals = np.stack([d, d, 1j * d, -1j * d])
        weight = np.real(np.conj(vals)[:, None, :] * vals[None, :, :]).reshape(-1)
        blocks = np.bincount(self._block_index, weight, n_int * w * w).reshape(n_int, w, w)
        grad_w = np.real(np.conj(vals) * res_c).reshape(-1)
        grad = np.bincount(self._grad_index, grad_w, n_int * w).reshape(n_int, w)
        prior_sd = self.spread[self.prior_station]
        pb, ps = self.prior_interval, self.prior_station
        prior_amp = np.exp(a[pb, ps])
        prior_res = -(prior_amp - 1.0) / prior_sd
        blocks[pb, ps, ps] += (prior_amp / prior_sd) ** 2
        grad[pb, ps] += (prior_amp / prior_sd) * (prior_amp - 1.0) / prior_sd
        residuals = np.concatenate([res_c.real, res_c.imag, prior_res])
        inactive = ~self.active
        blocks[np.broadcast_to(inactive[:, :, None], blocks.shape)] = 0.0
        blocks[np.broadcast_to(inactive[:, None, :], blocks.shape)] = 0.0
        ib, ic = np.nonzero(inactive)
        blocks[ib, ic, ic] = 1.0
        # a relative ridge of 1e-10 keeps a block solvable when an interval's stations form two
        # groups with no baseline between them (a second free phase offset); it moves nothing else
        diag = np.einsum("bii->bi", blocks)
        diag += 1e-10 * diag.max(axis=1, keepdims=True) * self.active
        grad[inactive] = 0.0
        jac = None
        if jacobian:
            rows = np.arange(n)
            data_r = np.concatenate([vals.real.reshape(-1), vals.imag.reshape(-1), -prior_amp / prior_sd])
            row_r = np.concatenate([np.tile(rows, 4), np.tile(rows + n, 4), 2 * n + np.arange(self.n_prior)])
            col_r = np.concatenate([self._cols.reshape(-1), self._cols.reshape(-1), self._prior_cols])
            keep = self.active.reshape(-1)[col_r]
            jac = sp.csr_matrix((data_r[keep], (row_r[keep], col_r[keep])), shape=(2 * n + self.n_prior, n_int * w))
        return pred, residuals, blocks, grad, jac

    def solve(self, model_vis: np.ndarray, start: GainSolution | None = None) -> GainSolution:
        """The gains (and what the profile needs) for the model visibilities of every row;
        ``start``: the gains of a nearby structure vector to begin from (else alternating steps
        from g = 1)."""
        model_vis = np.asarray(model_vis, complex)
        n_st = self.n_stations
        if start is not None:
            a, phi = start.a.copy(), start.phi.copy()
        elif self.kind == "amplitude":
            a = np.zeros((self.n_intervals, n_st))
            phi = np.zeros_like(a)
        else:
            a, phi = self._alternating(model_vis)
        a, phi = self._gauge(a, phi)
        a = np.clip(a, -5.0, 5.0)
        for _ in range(_NEWTON_STEPS):
            _, _, blocks, grad, _ = self._linearise(model_vis, a, phi)
            step = _block_solve(blocks, -grad[:, :, None])[:, :, 0]
            step[~self.active | ~np.isfinite(step)] = 0.0
            step = np.clip(step, -MAX_STEP, MAX_STEP)
            a = a + step[:, :n_st]
            phi = phi + step[:, n_st:]
            if float(np.max(np.abs(step), initial=0.0)) < STEP_TOLERANCE:
                break
        a = np.clip(a, -10.0, 10.0)
        pred, res, blocks, _, _ = self._linearise(model_vis, a, phi)
        return GainSolution(a, phi, pred, res, blocks, lambda: self._linearise(model_vis, a, phi, jacobian=True)[4])


def _block_solve(blocks, rhs):
    try:
        return np.linalg.solve(blocks, rhs)
    except np.linalg.LinAlgError:
        return np.stack([np.linalg.lstsq(m, r, rcond=None)[0] for m, r in zip(blocks, rhs)])


class GainStatistic(Statistic):
    """Complex visibilities with station gains solved per interval (see the module docstring)."""

    mode = "complex"

    def __init__(self, vset, model, systematic=0.0, gains="complex", gain_interval="scan", gain_prior=None, **options):
        super().__init__(
            vset, model, systematic, gains=gains, gain_interval=gain_interval, gain_prior=gain_prior, **options
        )
        kind = check_gain_kind(gains) or "complex"
        interval = parse_gain_interval(gain_interval)
        prior = parse_gain_prior(gain_prior)
        self.kind, self.interval_spec, self.prior = kind, interval, prior
        self.rows = rows = _Rows(vset)
        good = rows.set
        names = list(vset.stations.names)
        unknown = sorted(set(prior) - set(names) - {"*"})
        if unknown:
            raise UvfitError(
                f"gain_prior names stations not in the data: {', '.join(unknown)}",
                "use the station names of the data (" + ", ".join(names) + ") or '*'",
            )
        default = prior.get("*", np.inf)
        spread = np.array([prior.get(nm, default) for nm in names], float)
        self.station_names = names
        self.interval_index = gain_intervals(good.time, good.scan, interval)
        s = effective_sigma(rows.sigma, np.abs(rows.vis), self.systematic)
        self.data = np.concatenate([rows.vis.real, rows.vis.imag])
        self.solver = GainSolver(kind, self.interval_index, good.ant1, good.ant2, rows.vis, s, spread)
        self.sigma = np.concatenate([s, s])
        n_prior = self.solver.n_prior
        #: the row of ``vset`` behind each residual (-1 for the prior residuals)
        self.row_index = np.concatenate([rows.index, rows.index, np.full(n_prior, -1)])
        t = good.time
        n_int = self.solver.n_intervals
        self.interval_start = np.full(n_int, np.inf)
        self.interval_end = np.full(n_int, -np.inf)
        np.minimum.at(self.interval_start, self.interval_index, t)
        np.maximum.at(self.interval_end, self.interval_index, t)
        self.notices: list[str] = []
        self._cache: tuple | None = None

    # the residual vector carries one prior residual per (interval, station) with a prior; the
    # degrees of freedom count every solved gain
    @property
    def n_data(self):
        sv = self.solver
        return int(2 * sv.n_rows + sv.n_prior - sv.n_gains)

    def _theta(self, theta):
        return np.asarray(self.model.get_free() if theta is None else theta, float)

    def solution(self, theta=None) -> GainSolution:
        """The gains solved at ``theta`` (default: the model's current values)."""
        th = self._theta(theta)
        key = th.tobytes()
        if self._cache is not None and self._cache[0] == key:
            return self._cache[1]
        r = self.rows
        vis = self.model.visibilities(r.u, r.v, frequency=r.frequency, theta=th, files=r.files(self.model))
        vis = np.asarray(vis, complex).reshape(-1)
        sol = self.solver.solve(vis)
        self._cache = (key, sol)
        return sol

    def predict(self, theta):
        pred = self.solution(theta).predicted
        return np.concatenate([pred.real, pred.imag])

    def predict_jacobian(self, theta):
        sol = self.solution(theta)
        jac = self.jacobian(theta)
        n = self.rows.n
        return np.concatenate([sol.predicted.real, sol.predicted.imag]), -jac[: 2 * n] * self.sigma[:, None]

    def residuals(self, theta):
        return self.solution(theta).residuals

    def _structure_jacobian(self, theta):
        th = self._theta(theta)
        sol = self.solution(th)
        r = self.rows
        _, dm = model_visibilities_and_jacobian(self.model, r.u, r.v, r.frequency, th, files=r.files(self.model))
        g = self.solver._row_gains(sol.a, sol.phi)
        s = self.solver.sigma
        d = -(g / s)[:, None] * dm
        jt = np.vstack([d.real, d.imag, np.zeros((self.solver.n_prior, dm.shape[1]))])
        return sol, jt

    def _gain_derivative(self, sol, jt):
        """d gains / d theta per block, (n_intervals, width, n_free)."""
        sv = self.solver
        rhs = np.asarray(sol.jac_gain.T @ jt).reshape(sv.n_intervals, sv.width, -1)
        rhs[~sv.active] = 0.0
        return _block_solve(sol.blocks, -rhs)

    def jacobian(self, theta):
        """The Jacobian of the profiled residuals (variable projection; module docstring)."""
        sol, jt = self._structure_jacobian(theta)
        dg = self._gain_derivative(sol, jt)
        dg[~self.solver.active] = 0.0
        return jt + sol.jac_gain @ dg.reshape(-1, jt.shape[1])

    def chi2(self, theta):
        r = self.residuals(theta)
        return float(r @ r)

    def log_likelihood(self, theta):
        """Laplace approximation of the likelihood marginalised over the gains (module docstring)."""
        sol = self.solution(theta)
        r = sol.residuals
        _, logdet = np.linalg.slogdet(sol.blocks)
        n = 2 * self.rows.n
        return float(
            -0.5 * (r @ r)
            - 0.5 * np.sum(logdet)
            - np.sum(np.log(self.sigma))
            - 0.5 * n * np.log(2 * np.pi)
            + 0.5 * self.solver.n_gains * np.log(2 * np.pi)
        )

    def degeneracies(self):
        out = []
        if self.kind != "amplitude":
            reason = (
                "station phase gains absorb a shift of the whole model (a phase gradient across the "
                "array), so the absolute position is not constrained; it is held at its start value"
            )
            out += [(name, reason) for name in free_translation(self.model)]
        if self.solver.flux_free:
            name = common_shift(self.model, "flux")
            if name:
                out.append((name, FLAT_AMPLITUDE_REASON))
        return out

    def scaled(self, factor):
        out = object.__new__(type(self))
        out.__dict__.update(self.__dict__)
        out.sigma = self.sigma * float(factor)
        out.solver = self.solver.scaled(factor)
        out._cache = None
        return out

    # -- what a fit reports ----------------------------------------------------------------
    def gain_table(self, theta=None, covariance=None) -> list[dict]:
        """One entry per solved (station, interval): time span (MJD), amplitude and its error,
        phase (deg) and its error. Errors: the gains' conditional covariance (the inverse of
        each block) plus, with ``covariance`` of the free structure parameters, their share
        propagated through dg*/dtheta."""
        sv = self.solver
        sol = self.solution(theta)
        inv = np.linalg.inv(sol.blocks)
        var = np.abs(np.diagonal(inv, axis1=1, axis2=2)).copy()
        if covariance is not None and np.size(covariance):
            _, jt = self._structure_jacobian(theta)
            dg = self._gain_derivative(sol, jt)
            cov = np.asarray(covariance, float)
            cov = np.where(np.isfinite(cov), cov, 0.0)
            var = var + np.einsum("bkp,pq,bkq->bk", dg, cov, dg)
        var[~sv.active] = 0.0
        n_st = sv.n_stations
        amp = np.exp(sol.a)
        out = []
        for b, s in zip(*np.nonzero(sv.present)):
            sd_a = float(np.sqrt(var[b, s]))
            sd_phi = float(np.sqrt(var[b, n_st + s]))
            out.append(
                {
                    "station": self.station_names[s],
                    "interval": int(b),
                    "time_start_mjd": float(self.interval_start[b]),
                    "time_end_mjd": float(self.interval_end[b]),
                    "amplitude": float(amp[b, s]),
                    "amplitude_error": float(amp[b, s] * sd_a),
                    "phase_deg": float(np.degrees(sol.phi[b, s])),
                    "phase_error_deg": float(np.degrees(sd_phi)),
                    "reference": bool(sv.kind != "amplitude" and s == sv.reference[b]),
                }
            )
        return out

    def prior_pull(self, theta=None) -> float | None:
        """Median over the gains with a prior of |amplitude - 1| / spread (None without priors)."""
        sv = self.solver
        if not sv.n_prior:
            return None
        sol = self.solution(theta)
        amp = np.exp(sol.a[sv.prior_interval, sv.prior_station])
        return float(np.median(np.abs(amp - 1.0) / sv.spread[sv.prior_station]))

    def gain_record(self, theta=None, covariance=None) -> dict:
        """The ``gains`` section of a fit's JSON (``notices``: cautions about the solution)."""
        sv = self.solver
        spreads = {k: float(v) for k, v in self.prior.items()}
        pull = self.prior_pull(theta)
        notices = []
        if pull is not None and pull > PRIOR_PULL_LIMIT:
            notices.append(
                f"the amplitude gains sit far outside their prior (median |g - 1| / spread = {pull:.3g}): "
                "the model's amplitudes or its flux scale do not match the data, and the gains absorb the "
                "difference; compare with a closure fit, which station gains cannot touch"
            )
        return {
            "notices": notices,
            "prior_pull_median": pull,
            "solved": self.kind,
            "interval": self.interval_spec,
            "n_intervals": int(sv.n_intervals),
            "n_gains": int(sv.n_gains),
            "flux_scale_from": "the model's start flux (flat amplitude prior)"
            if sv.flux_free
            else "the data and prior",
            "prior_spread": spreads,
            "prior_form": "Gaussian on the amplitude gain, mean 1, rms = the fractional spread; flat on phases",
            "phase_reference": "in each interval the present station with most rows has phase 0",
            "method": "gains profiled per interval (Gauss-Newton self-calibration); structure errors "
            "from the Schur complement of the gain blocks",
            "table": self.gain_table(theta, covariance),
        }


def gain_astropy_table(record: dict, meta: dict | None = None):
    """The ``gains`` record of a fit as an astropy Table (for ECSV): station, interval, time start
    and end (MJD), amplitude and its error, phase and its error (deg), reference; ``meta``
    (seed, data, ...) and the record's settings go into the table's meta."""
    import astropy.units as un
    from astropy.table import Table

    rows = record.get("table") or []
    t = Table()
    t["station"] = np.array([r["station"] for r in rows], dtype="U32")
    t["interval"] = np.array([r["interval"] for r in rows], int)
    for key in ("time_start_mjd", "time_end_mjd"):
        t[key.replace("_mjd", "")] = np.array([r[key] for r in rows], float) * un.day
        t[key.replace("_mjd", "")].description = "MJD (UTC)"
    t["amplitude"] = np.array([r["amplitude"] for r in rows], float)
    t["amplitude_error"] = np.array([r["amplitude_error"] for r in rows], float)
    t["phase"] = np.array([r["phase_deg"] for r in rows], float) * un.deg
    t["phase_error"] = np.array([r["phase_error_deg"] for r in rows], float) * un.deg
    t["reference"] = np.array([r["reference"] for r in rows], bool)
    t.meta.update({k: v for k, v in record.items() if k != "table"})
    t.meta["model"] = "V_ij = g_i conj(g_j) V_model, g = amplitude * exp(i phase)"
    t.meta.update(meta or {})
    return t
