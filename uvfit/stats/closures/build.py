"""Construction of closure phases and log closure amplitudes from a VisibilitySet.

A closure quantity is a signed sum over a few visibility rows:

- closure phase on the triangle (a, b, c):  psi = arg V_ab + arg V_bc + arg V_ca;
- log closure amplitude on the quadrangle (a, b, c, d):
  log CA = log|V_ab| + log|V_cd| - log|V_ac| - log|V_bd|, i.e. CA = |V_ab| |V_cd| / (|V_ac| |V_bd|).

Both are unchanged by any station-based complex gain g_a, because V_ab -> g_a conj(g_b) V_ab and the
gains cancel around the loop (Thompson, Moran & Swenson 2017, ch. 10). Each closure is stored as
the rows it uses and a sign per row, so that the same closure can be evaluated on any set of
visibilities at those rows (data, model, corrupted data): closure phase = sum_k s_k arg V[row_k],
log closure amplitude = sum_k t_k log|V[row_k]|. A row stored on (b, a) although the loop needs
(a, b) enters with s = -1 (V_ab = conj V_ba); amplitudes do not care about the orientation.

Snapshots. Closures are formed among rows observed at exactly the same time and in the same channel
(and frequency). Within a snapshot a baseline observed twice keeps its highest-SNR row; rows
between a station and itself are ignored.

Reference amplitudes (why not each row's own |V|). Whatever decides which rows and closures are
used, and with what error, must not depend on the noise of the data it selects or weighs. Each
row's own measured |V| does: an SNR cut on it keeps rows whose noise happened to raise |V|, the
greedy choice of the set prefers them, and errors sigma/|V| give them more weight; all three
pull log closure amplitudes toward higher faint amplitudes. On the demo data (median SNR 5.7) this
moved the flux ratio of a closure fit by -2.5 errors on average over simulated noise draws (a
systematic bias, not bad luck; closure phases were unaffected, since their noise is independent of
the amplitude noise), and by -0.3 errors at three times the SNR. The Rice bias of log|V| itself
is negligible above SNR 3: E[log|V|] = log A + E1(A^2 / (2 sigma^2)) / 2 (checked against scipy's
Rice distribution), 0.001 at SNR 3. So by default (``amplitude_reference="neighbours"``) every
row gets a reference amplitude from the up to NEIGHBOURS rows before and after it in time on the
same baseline and channel, the row itself excluded (:func:`reference_amplitudes`), which carries
none of the row's own noise; closures are formed within a snapshot, so no closure shares noise
with the reference amplitudes of its own rows. The reference is used only where the amplitudes are
smooth in time compared with the noise (:func:`amplitude_smoothness` at most SMOOTHNESS_LIMIT); where
station gains or the structure change faster between rows (high-SNR data with gain jumps) the
measured amplitudes are used, whose bias falls as 1/SNR^2 and is small there. Rows without
neighbours (single snapshots) also keep their measured amplitude.

SNR cut. A row takes part only if its SNR A_ref / sigma is at least ``snr_cut`` (default 3): below
that the phase and log-amplitude noise are far from Gaussian.

Errors. Per row, the error of arg V and of log|V| is the standard deviation of the phase and of the
log amplitude of a Rice-distributed visibility at the reference SNR (Rice 1944; :func:`rice_errors`,
a quadrature table, 6% above the linear 1/SNR at SNR 3, equal to it within 0.6% above SNR 30),
with the systematic floor f added in quadrature; closures sum them in quadrature (linear
propagation over the rows; Chael et al. 2018, ApJ 857, 23). Rows on the measured reference keep
the linear errors sigma_k / |V_k| with sigma_k = sqrt(sigma_thermal^2 + (f |V_k|)^2). No
debiasing is applied to the log amplitudes (see the Rice mean above).

Non-redundant set (default). With N stations observing at once there are (N-1)(N-2)/2
independent closure phases and N(N-3)/2 independent closure amplitudes (TMS 2017, ch. 10):
- phases: the reference station is the one with the largest summed SNR of its baselines in the
  snapshot; every triangle through it is taken (these are independent, each holds its own
  baseline not through the reference). Where baselines are missing, further triangles are added in
  order of increasing error while they raise the rank of the set (Blackburn et al. 2020, ApJ 894,
  31 discuss the general construction);
- amplitudes: every candidate quadrangle (three per set of four stations) is sorted by its error
  and taken while it raises the rank (greedy selection on a linear matroid, which gives the
  independent set of maximal size with the smallest summed error).
The rank is that of the design matrix (closures x baselines, entries the signs). The SNRs and
errors behind these choices are those of the reference amplitudes. The errors of the members of a
set are still correlated where they share a baseline (see :mod:`uvfit.stats.closures.covariance`
for the snapshot covariance, the default of the statistics on this set).

Full set (``full=True``): every triangle, and for every set of four stations all three closure
amplitudes that can be formed. It is redundant (its members are linear combinations of one another)
so a chi-square over it counts the same information several times: use it to look, not to weigh.
"""

from dataclasses import dataclass, field
from functools import lru_cache
from itertools import combinations

import numpy as np

from ...errors import DataError
from ..base import effective_sigma

#: default SNR cut on the contributing visibilities (thermal SNR |V| / sigma)
DEFAULT_SNR_CUT = 3.0


@dataclass
class ClosureSet:
    """Closure quantities of one kind ("phase" or "amplitude") built from a VisibilitySet.

    Arrays over the closures (length n): ``rows`` (n, k) row indices into the VisibilitySet the
    set was built from (k = 3 for phases, 4 for amplitudes), ``signs`` (n, k) of +1 / -1,
    ``stations`` (n, k) station-table indices in loop order (triangle a, b, c; quadrangle a, b, c, d
    meaning |V_ab| |V_cd| / (|V_ac| |V_bd|)), ``time`` (MJD), ``frequency`` (Hz), ``channel``,
    ``snapshot`` (index of the snapshot), ``value`` (closure phase in radians wrapped into
    (-pi, pi], or natural log of the closure amplitude) and ``sigma`` (same units).
    """

    kind: str
    rows: np.ndarray
    signs: np.ndarray
    stations: np.ndarray
    time: np.ndarray
    frequency: np.ndarray
    channel: np.ndarray
    snapshot: np.ndarray
    value: np.ndarray
    sigma: np.ndarray
    station_names: list = field(default_factory=list)
    full: bool = False
    snr_cut: float = DEFAULT_SNR_CUT
    systematic: float = 0.0
    n_snapshots: int = 0
    #: per row of the VisibilitySet: the amplitude (Jy) behind the SNR cut, the choice of the set and
    #: the errors (see ``reference_amplitudes``); None for sets made without it
    reference_amplitude: np.ndarray | None = None
    #: the reference actually used: "neighbours" or "measured" (see ``build_closures``)
    amplitude_reference: str = "neighbours"
    #: per row of the VisibilitySet: the error of its arg V (phase sets, radians) or of its
    #: log|V| (amplitude sets); ``sigma`` is the root sum of squares over each closure's rows
    row_sigma: np.ndarray | None = None
    #: robust reduced chi2 of the amplitudes against their neighbours (``amplitude_smoothness``;
    #: NaN when not computed); above SMOOTHNESS_LIMIT the measured amplitudes are used
    smoothness: float = float("nan")
    #: the averaging of the closures: None (per integration), "scan" or seconds
    average: str | float | None = None
    #: averaged sets: per integration entering a closure, its rows (m, k) into the VisibilitySet,
    #: the signs (m, k) and the closure it belongs to (m,); None for sets per integration
    member_rows: np.ndarray | None = None
    member_signs: np.ndarray | None = None
    member_closure: np.ndarray | None = None
    #: averaged sets: per closure, the (interval, baseline) entries it uses (n, k) and the error of
    #: each entry (radians of phase or of log amplitude), for the covariance of shared baselines
    entry_rows: np.ndarray | None = None
    entry_sigma: np.ndarray | None = None
    #: averaged sets: per closure, which error was larger: "thermal" or "scatter" (phases)
    error_source: np.ndarray | None = None
    #: the sites whose loops were left out (lists of names) and how the intervals were made
    sites: list = field(default_factory=list)
    note: str = ""

    def __len__(self):
        return len(self.value)

    @property
    def n(self):
        return len(self.value)

    @property
    def labels(self):
        """'A-B-C' (triangle) or 'A-B-C-D' (quadrangle) label of every closure."""
        names = np.asarray(self.station_names, dtype=object)
        if self.n == 0:
            return np.zeros(0, dtype=str)
        parts = names[self.stations]
        return np.array(["-".join(p) for p in parts], dtype=str)

    def used_rows(self):
        """Every row of the VisibilitySet the closures use (the integrations of averaged sets)."""
        return np.unique(self.member_rows if self.member_rows is not None else self.rows)

    def evaluate(self, vis):
        """The closure quantities of complex visibilities ``vis`` given at every row of the set's
        VisibilitySet (vis[row] is used): phases in radians wrapped into (-pi, pi], or log CA.

        Averaged sets: the argument of the mean bispectrum over each closure's integrations, or
        the log closure amplitude of the mean squared amplitudes (model visibilities: no noise,
        no debiasing)."""
        vis = np.asarray(vis)
        if self.member_rows is not None:
            return averaged_values(self, vis[self.member_rows])
        if self.kind == "phase":
            return _wrap(np.sum(self.signs * np.angle(vis[self.rows]), axis=1))
        return np.sum(self.signs * np.log(np.abs(vis[self.rows])), axis=1)

    def design_matrix(self):
        """(n_closures, n_baselines) matrix of the signs, and the list of baselines (a, b), a < b.

        For phases the entry is the sign with which arg V_ab (a < b in station-table order) enters;
        for amplitudes the sign with which log|V_ab| enters. Its rank is the number of independent
        closures in the set.
        """
        if self.kind == "phase":
            s1 = self.stations
            s2 = np.roll(self.stations, -1, axis=1)
            orient = np.where(s1 < s2, 1.0, -1.0)
            pairs = np.stack([np.minimum(s1, s2), np.maximum(s1, s2)], axis=-1)
            coef = orient
        else:
            st = self.stations
            pairs = np.stack(
                [
                    np.stack([np.minimum(st[:, i], st[:, j]), np.maximum(st[:, i], st[:, j])], -1)
                    for i, j in ((0, 1), (2, 3), (0, 2), (1, 3))
                ],
                axis=1,
            )
            coef = np.broadcast_to(np.array([1.0, 1.0, -1.0, -1.0]), pairs.shape[:2])
        # one column per (baseline, snapshot): closures of different snapshots never share a column
        key = np.concatenate([pairs.reshape(-1, 2), np.repeat(self.snapshot, pairs.shape[1])[:, None]], axis=1)
        uniq, inv = np.unique(key, axis=0, return_inverse=True)
        mat = np.zeros((self.n, len(uniq)))
        rows = np.repeat(np.arange(self.n), pairs.shape[1])
        np.add.at(mat, (rows, inv.ravel()), coef.ravel())
        return mat, [tuple(k) for k in uniq]


def _wrap(x):
    """Angles wrapped into (-pi, pi]."""
    return np.angle(np.exp(1j * np.asarray(x)))


# ---------------------------------------------------------------------------- combinatorics
@lru_cache(maxsize=64)
def _triangles(n):
    if n < 3:
        return np.zeros((0, 3), int)
    return np.array(list(combinations(range(n), 3)), dtype=int)


@lru_cache(maxsize=64)
def _quadrangles(n):
    """All closure-amplitude loops (a, b, c, d) of n stations: three per set of four stations."""
    if n < 4:
        return np.zeros((0, 4), int)
    sets = np.array(list(combinations(range(n), 4)), dtype=int)
    a, b, c, d = sets.T
    out = np.stack(
        [
            np.stack([a, b, c, d], 1),  # |ab||cd| / (|ac||bd|)
            np.stack([a, d, c, b], 1),  # |ad||bc| / (|ac||bd|)
            np.stack([a, b, d, c], 1),
        ],  # |ab||cd| / (|ad||bc|)
        axis=1,
    )
    return out.reshape(-1, 4)


def _greedy_independent(vectors, order, start=None, limit=None, tol=1e-9):
    """Indices (in ``order``) of the vectors taken greedily while they raise the rank.

    ``start``: indices taken first without test (known independent); ``limit``: stop at this rank.
    Incremental Gram-Schmidt on small dense vectors (length = number of baselines in a snapshot).
    """
    basis = []
    chosen = []
    if start is not None:
        for i in start:
            x = vectors[i].astype(float)
            for q in basis:
                x = x - (q @ x) * q
            nx = np.linalg.norm(x)
            if nx > tol * max(1.0, np.linalg.norm(vectors[i])):
                basis.append(x / nx)
                chosen.append(i)
    taken = set(chosen)
    for i in order:
        if limit is not None and len(chosen) >= limit:
            break
        if i in taken:
            continue
        x = vectors[i].astype(float)
        if basis:
            q = np.array(basis)
            x = x - q.T @ (q @ x)
            x = x - q.T @ (q @ x)  # second pass for numerical safety
        nx = np.linalg.norm(x)
        if nx > tol * max(1.0, np.linalg.norm(vectors[i])):
            basis.append(x / nx)
            chosen.append(i)
            taken.add(i)
    return np.array(chosen, dtype=int)


def _graph_bounds(n_nodes, edges):
    """(maximal number of independent closure phases, of closure amplitudes) of a graph.

    Phases: the cycle rank E - V + C (connected components C over the stations with a baseline).
    Amplitudes: E - rank of the unsigned incidence matrix (the station-gain amplitudes).
    """
    if len(edges) == 0:
        return 0, 0
    inc = np.zeros((len(edges), n_nodes))
    idx = np.arange(len(edges))
    inc[idx, edges[:, 0]] = 1.0
    inc[idx, edges[:, 1]] = 1.0
    signed = inc.copy()
    signed[idx, edges[:, 1]] = -1.0
    r_signed = np.linalg.matrix_rank(signed)
    r_unsigned = np.linalg.matrix_rank(inc)
    return len(edges) - r_signed, len(edges) - r_unsigned


# ------------------------------------------------------------------------------- snapshots
def _snapshots(vset, usable):
    """Groups of row indices with exactly the same (time, frequency, channel)."""
    idx = np.flatnonzero(usable)
    if idx.size == 0:
        return []
    t, f, c = vset.time[idx], vset.frequency[idx], vset.channel[idx]
    order = np.lexsort((c, f, t))
    idx = idx[order]
    t, f, c = t[order], f[order], c[order]
    new = np.ones(idx.size, bool)
    new[1:] = (t[1:] != t[:-1]) | (f[1:] != f[:-1]) | (c[1:] != c[:-1])
    starts = np.flatnonzero(new)
    return np.split(idx, starts[1:])


#: rows on each side of a row whose amplitudes give its reference amplitude
NEIGHBOURS = 4

AMPLITUDE_REFERENCES = ("neighbours", "measured")


def reference_amplitudes(vset, window=NEIGHBOURS):
    """(amplitude, from_neighbours) per row: an estimate of each row's true amplitude |V| (Jy)
    that does not contain the row's own noise.

    For every unflagged cross-correlation row, the up to ``window`` rows before and after it in
    time on the same baseline (either orientation), channel and frequency, the row itself
    EXCLUDED, give A_ref^2 = mean_j (|V_j|^2 - 2 sigma_j^2) (E|V|^2 = A^2 + 2 sigma^2 for noise
    sigma per part), A_ref = sqrt(max(A_ref^2, 0)). Rows without such neighbours keep their own
    measured |V| (``from_neighbours`` False). Vectorised: one pass per offset.
    """
    n = vset.n
    amp = np.abs(vset.vis)
    ref = amp.astype(float).copy()
    found = np.zeros(n, bool)
    a1, a2 = vset.ant1, vset.ant2
    ok = np.flatnonzero((~vset.flag) & (a1 != a2) & np.isfinite(amp) & (vset.sigma > 0))
    if ok.size < 2 or window < 1:
        return ref, found
    lo, hi = np.minimum(a1[ok], a2[ok]), np.maximum(a1[ok], a2[ok])
    order = np.lexsort((vset.time[ok], vset.frequency[ok], vset.channel[ok], hi, lo))
    idx = ok[order]
    key = np.stack([lo[order], hi[order], vset.channel[idx], vset.frequency[idx]], 1)
    new = np.ones(idx.size, bool)
    new[1:] = np.any(key[1:] != key[:-1], axis=1)
    group = np.cumsum(new)
    power = amp[idx] ** 2 - 2.0 * vset.sigma[idx] ** 2
    total = np.zeros(idx.size)
    count = np.zeros(idx.size)
    pos = np.arange(idx.size)
    for d in list(range(-window, 0)) + list(range(1, window + 1)):
        j = pos + d
        inside = (j >= 0) & (j < idx.size)
        same = np.zeros(idx.size, bool)
        same[inside] = group[j[inside]] == group[inside]
        total[same] += power[j[same]]
        count[same] += 1
    has = count > 0
    ref[idx[has]] = np.sqrt(np.maximum(total[has] / count[has], 0.0))
    found[idx[has]] = True
    return ref, found


#: SNR above which the linear errors 1/SNR of arg V and log|V| are used (within 0.6% of the Rice law)
RICE_LINEAR_SNR = 30.0


@lru_cache(maxsize=1)
def _rice_table(n_grid=400, n_nodes=96):
    """(snr grid, std of log|V|, std of arg V) for a visibility of true amplitude snr and unit
    Gaussian noise per part, by Gauss-Hermite quadrature over the two noise parts."""
    snr = np.geomspace(0.5, RICE_LINEAR_SNR, n_grid)
    x, w = np.polynomial.hermite_e.hermegauss(n_nodes)
    w = w / w.sum()
    n1, n2 = np.meshgrid(x, x, indexing="ij")
    ww = (w[:, None] * w[None, :]).ravel()
    re = snr[:, None] + n1.ravel()[None, :]
    im = np.broadcast_to(n2.ravel()[None, :], re.shape)
    logr = 0.5 * np.log(re**2 + im**2)
    arg = np.arctan2(im, re)

    def std(f):
        m = f @ ww
        return np.sqrt(np.maximum((f - m[:, None]) ** 2 @ ww, 0.0))

    return snr, std(logr), std(arg)


def rice_errors(snr):
    """(std of log|V|, std of arg V) in natural-log units and radians for a visibility of true
    SNR ``snr`` = A / sigma (sigma per part) under Gaussian noise, i.e. for the Rice-distributed
    amplitude |V| (Rice 1944) and its phase; the linear values 1/snr above RICE_LINEAR_SNR and
    the table's first value below SNR 0.5."""
    snr = np.asarray(snr, float)
    grid, s_log, s_arg = _rice_table()
    with np.errstate(divide="ignore", invalid="ignore"):
        lin = np.where(snr > 0, 1.0 / snr, np.inf)
        ls = np.log(np.clip(snr, grid[0], grid[-1]))
        lg = np.log(grid)
        e_log = np.where(snr >= grid[-1], lin, np.interp(ls, lg, s_log))
        e_arg = np.where(snr >= grid[-1], lin, np.interp(ls, lg, s_arg))
    return e_log, e_arg


#: largest robust reduced chi2 of log(|V| / A_ref) for which amplitudes count as smooth in time
SMOOTHNESS_LIMIT = 2.0


def amplitude_smoothness(vset, ref, found, window=NEIGHBOURS):
    """Robust reduced chi2 of y = log|V| - log A_ref over the rows with neighbours: median of
    y^2 / var(y) divided by 0.4549 (the median of chi2 with one degree of freedom), where var(y)
    is the Rice error of log|V| at the reference SNR squared plus the noise of the neighbours'
    estimate, (sigma^2 / A^2 + sigma^4 / A^4) / n_neighbours. Near 1 when the amplitudes change
    between neighbouring rows by less than the noise; large when station gains or structure
    change faster (then the neighbours are no reference). NaN without such rows."""
    amp = np.abs(vset.vis)
    ok = found & (ref > 0) & (amp > 0) & (vset.sigma > 0)
    if not np.any(ok):
        return float("nan")
    snr = ref[ok] / vset.sigma[ok]
    e_log, _ = rice_errors(snr)
    var = e_log**2 + (1.0 / snr**2 + 1.0 / snr**4) / (2 * window)
    y = np.log(amp[ok]) - np.log(ref[ok])
    return float(np.median(y**2 / var) / _CHI2_1_MEDIAN)


#: median of the chi-square distribution with one degree of freedom (scipy.stats.chi2(1).median())
_CHI2_1_MEDIAN = 0.454936423119572


def _choose_loops(n, present, best, sign, rowof, rel_kind, kinds, full, same_site):
    """The loops of one snapshot (n stations in local order): {kind: (loop, members, coef)}.

    ``present`` (n, n) which baselines are there, ``best`` (n, n) their SNR, ``rowof`` (n, n) their
    row (into the arrays of ``rel_kind``, the per-row errors of each kind), ``same_site`` (n, n)
    True between two stations of one site: a loop holding two such stations is left out (see
    :func:`build_closures`).
    """
    out = {}
    ii, jj = np.nonzero(present)
    e_i, e_j = np.nonzero(np.triu(present, 1))
    edges = np.stack([e_i, e_j], 1)
    eid = np.full((n, n), -1)
    eid[e_i, e_j] = eid[e_j, e_i] = np.arange(len(edges))
    max_cp, max_ca = _graph_bounds(n, edges)

    if "phase" in kinds:
        tri = _triangles(n)
        loop = np.stack([tri[:, [0, 1]], tri[:, [1, 2]], tri[:, [2, 0]]], axis=1)  # (m, 3, 2)
        ok = np.all(present[loop[..., 0], loop[..., 1]], axis=1) & ~_has_site_pair(tri, same_site)
        tri, loop = tri[ok], loop[ok]
        if len(tri) and not full:
            tsig = np.sqrt(np.sum(rel_kind["phase"][rowof[loop[..., 0], loop[..., 1]]] ** 2, axis=1))
            vec = np.zeros((len(tri), len(edges)))
            for k in range(3):
                e = eid[loop[:, k, 0], loop[:, k, 1]]
                vec[np.arange(len(tri)), e] += np.where(loop[:, k, 0] < loop[:, k, 1], 1.0, -1.0)
            summed = np.zeros(n)
            np.add.at(summed, ii, best[ii, jj])
            ref = int(np.argmax(summed))
            through = np.flatnonzero(np.any(tri == ref, axis=1))
            through = through[np.argsort(tsig[through], kind="stable")]
            pick = _greedy_independent(vec, np.argsort(tsig, kind="stable"), start=through, limit=max_cp)
            pick = np.sort(pick)
            tri, loop = tri[pick], loop[pick]
        if len(tri):
            out["phase"] = (loop, tri, [1, 1, 1])

    if "amplitude" in kinds:
        quad = _quadrangles(n)
        # the four baselines: (a,b), (c,d) numerator; (a,c), (b,d) denominator
        loop = np.stack([quad[:, [0, 1]], quad[:, [2, 3]], quad[:, [0, 2]], quad[:, [1, 3]]], axis=1)
        ok = np.all(present[loop[..., 0], loop[..., 1]], axis=1) & ~_has_site_pair(quad, same_site)
        quad, loop = quad[ok], loop[ok]
        if len(quad) and not full:
            qsig = np.sqrt(np.sum(rel_kind["amplitude"][rowof[loop[..., 0], loop[..., 1]]] ** 2, axis=1))
            vec = np.zeros((len(quad), len(edges)))
            for k, t in enumerate((1.0, 1.0, -1.0, -1.0)):
                e = eid[loop[:, k, 0], loop[:, k, 1]]
                vec[np.arange(len(quad)), e] += t
            pick = np.sort(_greedy_independent(vec, np.argsort(qsig, kind="stable"), limit=max_ca))
            quad, loop = quad[pick], loop[pick]
        if len(quad):
            out["amplitude"] = (loop, quad, [1, 1, -1, -1])
    return out


def _has_site_pair(members, same_site):
    """True for every loop (rows of local station indices) holding two stations of one site."""
    if same_site is None or not np.any(same_site) or len(members) == 0:
        return np.zeros(len(members), bool)
    k = members.shape[1]
    hit = np.zeros(len(members), bool)
    for a in range(k):
        for b in range(a + 1, k):
            hit |= same_site[members[:, a], members[:, b]]
    return hit


def build_closures(
    vset,
    snr_cut=DEFAULT_SNR_CUT,
    systematic=0.0,
    full=False,
    kinds=("phase", "amplitude"),
    amplitude_reference="neighbours",
    closure_average=None,
    scan_gap=None,
    site_distance=None,
):
    """Closure phases and log closure amplitudes of ``vset`` (see the module docstring).

    Returns a dict kind -> ClosureSet for the requested ``kinds`` ("phase", "amplitude"). Row
    indices refer to ``vset`` as given (flagged rows never take part). The loop runs over
    snapshots (times), never over visibilities inside a likelihood.

    ``amplitude_reference``: the amplitude behind the SNR cut, the choice of rows and closures
    and the errors sigma/|V|. "neighbours" (default): :func:`reference_amplitudes`, free of each
    row's own noise; "measured": each row's own noisy |V| (which selects and overweights upward
    noise fluctuations and biases log closure amplitudes at low SNR; kept for comparison).

    ``closure_average``: None (closures per integration), "scan" or seconds: closures averaged
    over each scan or interval (:func:`build_averaged`; ``scan_gap`` in seconds separates scans,
    :mod:`uvfit.data.scans`). ``site_distance`` (m, default 5000; 0: no sites): a loop holding
    two stations of one site (:mod:`uvfit.data.sites`) is left out. Its closure phase is ~0 and
    its closure amplitude ~1 whatever the structure (the two stations see the same sky), or,
    where the loop uses the short baseline within the site, it is dominated by that baseline,
    which sees the total flux and extended emission the long baselines resolve out. Nothing is
    left out when every station is on one site (a connected-element array).
    """
    snr_cut = float(snr_cut if snr_cut is not None else 0.0)
    systematic = float(systematic or 0.0)
    if snr_cut < 0 or not np.isfinite(snr_cut):
        raise DataError(f"the SNR cut must be a finite number >= 0, not {snr_cut}", "give e.g. `snr_cut=3`")
    if systematic < 0 or not np.isfinite(systematic):
        raise DataError(
            f"the systematic floor must be a finite fraction >= 0, not {systematic}",
            "give e.g. `systematic=0.02` for 2 per cent of |V|",
        )
    if amplitude_reference not in AMPLITUDE_REFERENCES:
        raise DataError(
            f"unknown amplitude reference '{amplitude_reference}' for the closures",
            "use 'neighbours' (default) or 'measured'",
        )
    from ...data.scans import check_interval, check_scan_gap

    closure_average = check_interval(closure_average)
    check_scan_gap(scan_gap)
    site_of, site_groups = _site_numbers(vset, site_distance)

    def same_site_local(st):
        sl = site_of[st]
        return (sl[:, None] == sl[None, :]) & (sl[:, None] >= 0)

    if closure_average is not None:
        return build_averaged(
            vset,
            closure_average,
            scan_gap=scan_gap,
            snr_cut=snr_cut,
            systematic=systematic,
            full=full,
            kinds=kinds,
            same_site_local=same_site_local,
            site_groups=site_groups,
        )
    names = list(vset.stations.names)
    ant1, ant2 = vset.ant1, vset.ant2
    measured = np.abs(vset.vis)
    smoothness = float("nan")
    if amplitude_reference == "neighbours":
        amp, from_neighbours = reference_amplitudes(vset, NEIGHBOURS)
        smoothness = amplitude_smoothness(vset, amp, from_neighbours)
        if not smoothness <= SMOOTHNESS_LIMIT:  # amplitudes jump between rows: no reference
            amp, from_neighbours = measured, np.zeros(vset.n, bool)
    else:
        amp, from_neighbours = measured, np.zeros(vset.n, bool)
    used_reference = "neighbours" if np.any(from_neighbours) else "measured"
    with np.errstate(divide="ignore", invalid="ignore"):
        snr = np.where(vset.sigma > 0, amp / vset.sigma, 0.0)
        sig_eff = effective_sigma(vset.sigma, amp, systematic)
        rel = sig_eff / amp  # sigma / |V| of every row (radians of phase, or of log amplitude)
    # errors of arg V and log|V| per row: the Rice law at the reference SNR where the reference
    # comes from the neighbours, the linear sigma/|V| where it is the row's own amplitude
    e_log, e_arg = rice_errors(snr)
    rel_kind = {
        "phase": np.where(from_neighbours, np.sqrt(e_arg**2 + systematic**2), rel),
        "amplitude": np.where(from_neighbours, np.sqrt(e_log**2 + systematic**2), rel),
    }
    usable = (~vset.flag) & (ant1 != ant2) & np.isfinite(rel) & (amp > 0) & (measured > 0) & (snr >= snr_cut)

    acc = {k: {"rows": [], "signs": [], "stations": [], "snap": []} for k in kinds}
    groups = _snapshots(vset, usable)
    for s_i, rows in enumerate(groups):
        a1, a2 = ant1[rows], ant2[rows]
        st = np.unique(np.concatenate([a1, a2]))
        if st.size < 3:
            continue
        # local station order: by name, so that loops are labelled reproducibly across files
        st = st[np.argsort(np.array([names[i] for i in st]), kind="stable")]
        n = st.size
        local = np.full(len(names), -1)
        local[st] = np.arange(n)
        p, q = local[a1], local[a2]
        # one row per baseline: the highest SNR wins
        rowof = np.full((n, n), -1)
        best = np.full((n, n), -np.inf)
        for r, i, j in zip(rows, p, q):  # rows of one snapshot: tens at most
            if snr[r] > best[i, j]:
                best[i, j] = best[j, i] = snr[r]
                rowof[i, j] = rowof[j, i] = r
        sign = np.zeros((n, n))
        present = rowof >= 0
        rr = rowof[present]
        ii, jj = np.nonzero(present)
        sign[ii, jj] = np.where(ant1[rr] == st[ii], 1.0, -1.0)
        chosen = _choose_loops(n, present, best, sign, rowof, rel_kind, kinds, full, same_site_local(st))
        for kind, (loop, members, coef) in chosen.items():
            _append(acc[kind], rowof, None if kind == "amplitude" else sign, loop, st, members, s_i, coef)

    out = {}
    for kind in kinds:
        a = acc[kind]
        k = 3 if kind == "phase" else 4
        if a["rows"]:
            rows = np.concatenate(a["rows"])
            signs = np.concatenate(a["signs"])
            stations = np.concatenate(a["stations"])
            snap = np.concatenate(a["snap"])
        else:
            rows = np.zeros((0, k), int)
            signs = np.zeros((0, k))
            stations = np.zeros((0, k), int)
            snap = np.zeros(0, int)
        first = rows[:, 0] if len(rows) else np.zeros(0, int)
        cs = ClosureSet(
            kind=kind,
            rows=rows,
            signs=signs,
            stations=stations,
            time=vset.time[first],
            frequency=vset.frequency[first],
            channel=vset.channel[first],
            snapshot=snap,
            value=np.zeros(len(rows)),
            sigma=np.sqrt(np.sum(rel_kind[kind][rows] ** 2, axis=1)),
            station_names=names,
            full=bool(full),
            snr_cut=snr_cut,
            systematic=systematic,
            n_snapshots=len(groups),
            reference_amplitude=amp,
            amplitude_reference=used_reference,
            smoothness=smoothness,
            row_sigma=rel_kind[kind],
            sites=site_groups,
        )
        cs.value = cs.evaluate(vset.vis)
        out[kind] = cs
    return out


def _append(store, rowof, sign, loop, st, members, s_i, coef):
    rows = rowof[loop[..., 0], loop[..., 1]]
    if sign is None:
        signs = np.broadcast_to(np.asarray(coef, float), rows.shape).copy()
    else:
        signs = sign[loop[..., 0], loop[..., 1]] * np.asarray(coef, float)
    store["rows"].append(rows)
    store["signs"].append(signs)
    store["stations"].append(st[members])
    store["snap"].append(np.full(len(rows), s_i))


def no_closure_error(vset, kind, snr_cut):
    """The DataError for a set from which no closure of ``kind`` can be formed, with the reason."""
    need = 3 if kind == "phase" else 4
    what = "closure phases" if kind == "phase" else "closure amplitudes"
    ant1, ant2 = vset.ant1, vset.ant2
    usable = (~vset.flag) & (ant1 != ant2)
    most = 0
    for rows in _snapshots(vset, usable):
        most = max(most, np.unique(np.concatenate([ant1[rows], ant2[rows]])).size)
    if most < need:
        return DataError(
            f"no {what} can be formed: at most {most} station(s) observe at the same "
            f"time and channel, and {what} need {need}",
            "closures need at least three (phases) or four (amplitudes) stations "
            "observing at once; check the selection (`stations`, `exclude_stations`, "
            "`time_range`) or use a visibility mode",
        )
    return DataError(
        f"no {what} can be formed after the SNR cut of {snr_cut:g} on the contributing visibilities",
        "lower `snr_cut`, or average in time (`average`) to raise the SNR",
    )


def _site_numbers(vset, site_distance):
    """(site number per station-table index, -1 for none; the site groups) for the loops to
    leave out; no sites when ``site_distance`` is 0 or every station is on one site."""
    from ...data.sites import check_site_distance, find_sites

    none = np.full(len(vset.stations.names), -1)
    distance = check_site_distance(site_distance)
    if distance == 0:
        return none, []
    sites = find_sites(vset, distance)
    if sites.one_site or not sites.groups:
        return none, []
    return sites.site_of(vset.stations.names), [list(g) for g in sites.groups]


# ------------------------------------------------------------------------ averaged closures
#: the scatter of the integrations sets a closure phase's error only with at least this many
MIN_SCATTER_MEMBERS = 4


def _aggregator(member_closure, n):
    """Sparse (n, m) matrix summing the members of each closure."""
    from scipy.sparse import csr_matrix

    m = len(member_closure)
    return csr_matrix((np.ones(m), (member_closure, np.arange(m))), shape=(n, m))


def _bispectra(vis, signs):
    """Product over the corners of V (sign +1) or conj V (sign -1): (m,) complex."""
    return np.prod(np.where(signs > 0, vis, np.conj(vis)), axis=1)


def averaged_values(cs, member_vis, agg=None):
    """Closure values of an averaged set from visibilities at its member rows (m, k), without
    noise terms: arg of the summed bispectra, or sum_k t_k log sqrt(mean |V_k|^2)."""
    agg = _aggregator(cs.member_closure, cs.n) if agg is None else agg
    if cs.kind == "phase":
        return np.angle(agg @ _bispectra(member_vis, cs.member_signs))
    power = agg @ (np.abs(member_vis) ** 2)
    count = np.asarray(agg.sum(axis=1)).ravel()[:, None]
    with np.errstate(divide="ignore"):
        return np.sum(cs.signs * 0.5 * np.log(power / count), axis=1)


def build_averaged(
    vset,
    average,
    scan_gap=None,
    snr_cut=DEFAULT_SNR_CUT,
    systematic=0.0,
    full=False,
    kinds=("phase", "amplitude"),
    same_site_local=None,
    site_groups=(),
):
    """Closures averaged over scans or intervals (``average`` "scan" or seconds).

    Intervals: :func:`uvfit.data.scans.interval_index`; each interval, frequency and channel is
    one group. Per baseline of a group, with n integrations, the incoherent (power) average of the
    amplitude is X = mean |V|^2 - 2 mean sigma^2 (sigma per part; E|V|^2 = A^2 + 2 sigma^2), with
    var X = (4 X s2 + 4 s2^2) / n, s2 = mean sigma^2 (TMS 2017, ch. 9; Rogers, Doeleman & Moran
    1995, AJ 109, 1391). The SNR cut applies to A = sqrt(X) over the thermal error of the
    interval's mean visibility, sqrt(s2 / n); baselines with X <= 0 never take part. Loops are
    chosen per group as for single snapshots (non-redundant by default), on these SNRs and errors.

    - Closure phase: the bispectrum B_t = V_ab V_bc V_ca at every integration t where all three
      baselines were observed, averaged: psi = arg mean_t B_t (the noise of B averages down
      while the phase is kept; TMS 2017 ch. 9, Rogers et al. 1995). Its error: thermal,
      sqrt(sum_t var B_t / 2) / (T |B|), var B_t = prod_k (A_k^2 + 2 sigma_k^2) - prod_k A_k^2
      and |B| = prod_k A_k (the interval amplitudes, not the noisy mean); or, with at least
      MIN_SCATTER_MEMBERS integrations, from the scatter of the B_t about their mean,
      sqrt(sum_t |B_t - mean B|^2 / (2 T (T - 1))) / |B|, whichever is larger
      (``error_source`` says which). A systematic floor f adds 3 f^2 to the variance.
    - Log closure amplitude: from the four baselines' X over the integrations where all four
      were observed, log A_k = 0.5 (log X_k + var X_k / (2 X_k^2)): the log of the debiased
      power plus the second-order correction of the bias of a log (the log-amplitude debiasing
      of Chael et al. 2018, ApJ 857, 23, and Blackburn et al. 2020, ApJ 894, 31, done on the
      averaged power); error of log A_k = 0.5 sqrt(var X_k) / X_k, summed in quadrature over the
      four (plus 4 f^2).

    The model of an averaged closure is computed the same way from the model visibilities at the
    same integrations (``averaged_values``), so averaging over changing structure is modelled.
    Caution: at an interval SNR below about 2 the averaged closure phase's error is far from
    Gaussian; its mean stays unbiased.
    """
    from ...data.scans import interval_index

    names = list(vset.stations.names)
    ant1, ant2 = vset.ant1, vset.ant2
    usable = (~vset.flag) & (ant1 != ant2) & (vset.sigma > 0) & np.isfinite(vset.vis)
    interval, how = interval_index(vset, average, scan_gap)
    idx = np.flatnonzero(usable)
    lo, hi = np.minimum(ant1, ant2), np.maximum(ant1, ant2)
    # groups: (interval, frequency, channel); entries: (group, baseline)
    gkey = np.stack([interval[idx], vset.channel[idx], np.round(vset.frequency[idx]).astype(np.int64)], 1)
    _, group = np.unique(gkey, axis=0, return_inverse=True)
    group = np.ravel(group)
    ekey = np.stack([group, lo[idx], hi[idx]], 1)
    ekeys, entry = np.unique(ekey, axis=0, return_inverse=True)
    entry = np.ravel(entry)
    n_e = len(ekeys)
    cnt = np.bincount(entry, minlength=n_e).astype(float)
    s2 = np.bincount(entry, weights=vset.sigma[idx] ** 2, minlength=n_e) / np.maximum(cnt, 1)
    p = np.bincount(entry, weights=np.abs(vset.vis[idx]) ** 2, minlength=n_e) / np.maximum(cnt, 1)
    x = p - 2.0 * s2
    # the reference power of each entry, free of its own noise: the neighbouring intervals
    ch = np.zeros(n_e, np.int64)
    fr = np.zeros(n_e, np.int64)
    ch[entry] = vset.channel[idx]
    fr[entry] = np.round(vset.frequency[idx]).astype(np.int64)
    x_ref, from_neighbours = _entry_reference(x, ekeys, ch, fr)
    amp_e = np.sqrt(np.maximum(x_ref, 0.0))
    with np.errstate(divide="ignore", invalid="ignore"):
        snr_e = amp_e / np.sqrt(s2 / cnt)
        varx = (4.0 * np.maximum(x_ref, 0.0) * s2 + 4.0 * s2**2) / cnt
        rel_amp = np.sqrt(0.25 * varx / x_ref**2 + systematic**2)
        rel_phase = np.sqrt(1.0 / snr_e**2 + systematic**2)
    ok_e = (x > 0) & (x_ref > 0) & (snr_e >= snr_cut) & np.isfinite(rel_amp)
    rel_kind = {"phase": rel_phase, "amplitude": rel_amp}
    # rows of each entry by time: row_at[(entry, time)] for the members
    row_time = vset.time[idx]
    acc = {k: {"entries": [], "stations": [], "snap": [], "coef": []} for k in kinds}
    n_groups = int(group.max()) + 1 if group.size else 0
    estart = np.searchsorted(ekeys[:, 0], np.arange(n_groups + 1))
    for g in range(n_groups):
        e_here = np.arange(estart[g], estart[g + 1])
        e_here = e_here[ok_e[e_here]]
        if e_here.size < 3:
            continue
        st = np.unique(ekeys[e_here][:, 1:])
        if st.size < 3:
            continue
        st = st[np.argsort(np.array([names[i] for i in st]), kind="stable")]
        n = st.size
        local = np.full(len(names), -1)
        local[st] = np.arange(n)
        pi, qi = local[ekeys[e_here, 1]], local[ekeys[e_here, 2]]
        entryof = np.full((n, n), -1)
        best = np.full((n, n), -np.inf)
        entryof[pi, qi] = entryof[qi, pi] = e_here
        best[pi, qi] = best[qi, pi] = snr_e[e_here]
        present = entryof >= 0
        # orientation of the loop's pair (i, j) against the entry's (lo, hi) in table order
        orient = np.where(st[:, None] < st[None, :], 1.0, -1.0)
        same = same_site_local(st) if same_site_local is not None else None
        chosen = _choose_loops(n, present, best, orient, entryof, rel_kind, kinds, full, same)
        for kind, (loop, members, coef) in chosen.items():
            a = acc[kind]
            a["entries"].append(entryof[loop[..., 0], loop[..., 1]])
            c = np.asarray(coef, float)
            a["coef"].append(
                orient[loop[..., 0], loop[..., 1]] * c if kind == "phase" else np.broadcast_to(c, loop.shape[:2])
            )
            a["stations"].append(st[members])
            a["snap"].append(np.full(len(loop), g))
    # the rows of every entry, keyed by time, for matching integrations
    order = np.lexsort((row_time, entry))
    e_sorted, t_sorted, r_sorted = entry[order], row_time[order], idx[order]
    first_of = np.searchsorted(e_sorted, np.arange(n_e + 1))

    out = {}
    for kind in kinds:
        a = acc[kind]
        k = 3 if kind == "phase" else 4
        entries = np.concatenate(a["entries"]) if a["entries"] else np.zeros((0, k), int)
        coefs = np.concatenate(a["coef"]) if a["coef"] else np.zeros((0, k))
        stations = np.concatenate(a["stations"]) if a["stations"] else np.zeros((0, k), int)
        snap = np.concatenate(a["snap"]) if a["snap"] else np.zeros(0, int)
        m_rows, m_signs, m_cl = [], [], []
        keep = np.zeros(len(entries), bool)
        for c in range(len(entries)):  # closures of the whole set (construction only)
            times = None
            per = []
            for j in range(k):
                e = entries[c, j]
                sl = slice(first_of[e], first_of[e + 1])
                t_e, r_e = t_sorted[sl], r_sorted[sl]
                t_e, uniq = np.unique(t_e, return_index=True)
                per.append((t_e, r_e[uniq]))
                times = t_e if times is None else np.intersect1d(times, t_e)
            if times is None or times.size == 0:
                continue
            rows_c = np.stack([pr[1][np.searchsorted(pr[0], times)] for pr in per], 1)
            # the sign of each row: the loop's coefficient, flipped where the row runs hi -> lo
            flip = np.where(ant1[rows_c] <= ant2[rows_c], 1.0, -1.0) if kind == "phase" else 1.0
            m_rows.append(rows_c)
            m_signs.append(coefs[c][None, :] * flip)
            m_cl.append(np.full(len(times), c))
            keep[c] = True
        sel = np.flatnonzero(keep)
        remap = np.full(len(entries), -1)
        remap[sel] = np.arange(sel.size)
        mr = np.concatenate(m_rows) if m_rows else np.zeros((0, k), int)
        ms = np.concatenate(m_signs) if m_signs else np.zeros((0, k))
        mc = remap[np.concatenate(m_cl)] if m_cl else np.zeros(0, int)
        entries, coefs, stations, snap = entries[sel], coefs[sel], stations[sel], snap[sel]
        nc = sel.size
        rep = np.zeros((nc, k), int)
        if nc:
            rep = r_sorted[first_of[entries]]
        cs = ClosureSet(
            kind=kind,
            rows=rep,
            signs=coefs,
            stations=stations,
            time=np.zeros(nc),
            frequency=vset.frequency[rep[:, 0]] if nc else np.zeros(0),
            channel=vset.channel[rep[:, 0]] if nc else np.zeros(0, int),
            snapshot=snap,
            value=np.zeros(nc),
            sigma=np.zeros(nc),
            station_names=names,
            full=bool(full),
            snr_cut=snr_cut,
            systematic=systematic,
            n_snapshots=n_groups,
            reference_amplitude=None,
            amplitude_reference="interval",
            row_sigma=None,
            average=average,
            member_rows=mr,
            member_signs=ms,
            member_closure=mc,
            entry_rows=entries,
            entry_sigma=rel_kind[kind],
            sites=list(site_groups),
            note=how,
        )
        _fill_averaged(cs, vset, amp_e, systematic, x_ref)
        out[kind] = cs
    return out


def _entry_reference(x, ekeys, channel, frequency, window=NEIGHBOURS):
    """(reference power, from neighbours) of every (interval, baseline) entry: the mean debiased
    power X of up to ``window`` entries before and after it on the same baseline, channel and
    frequency, the entry itself excluded (as :func:`reference_amplitudes` for single rows);
    entries without such neighbours keep their own X."""
    n = len(x)
    ref = np.asarray(x, float).copy()
    found = np.zeros(n, bool)
    if n < 2:
        return ref, found
    order = np.lexsort((ekeys[:, 0], frequency, channel, ekeys[:, 2], ekeys[:, 1]))
    key = np.stack([ekeys[order, 1], ekeys[order, 2], channel[order], frequency[order]], 1)
    new = np.ones(n, bool)
    new[1:] = np.any(key[1:] != key[:-1], axis=1)
    grp = np.cumsum(new)
    val = np.asarray(x, float)[order]
    total = np.zeros(n)
    count = np.zeros(n)
    pos = np.arange(n)
    for d in list(range(-window, 0)) + list(range(1, window + 1)):
        j = pos + d
        inside = (j >= 0) & (j < n)
        same = np.zeros(n, bool)
        same[inside] = grp[j[inside]] == grp[inside]
        total[same] += val[j[same]]
        count[same] += 1
    has = count > 0
    ref[order[has]] = total[has] / count[has]
    found[order[has]] = True
    return ref, found


def _fill_averaged(cs, vset, amp_e, systematic, x_ref):
    """Values, errors and times of an averaged set from the data (see :func:`build_averaged`)."""
    if cs.n == 0:
        cs.error_source = np.zeros(0, dtype="<U7")
        return
    agg = _aggregator(cs.member_closure, cs.n)
    count = np.asarray(agg.sum(axis=1)).ravel()
    cs.time = (agg @ vset.time[cs.member_rows[:, 0]]) / count
    vis = vset.vis[cs.member_rows]
    sig2 = vset.sigma[cs.member_rows] ** 2
    k = cs.member_rows.shape[1]
    if cs.kind == "phase":
        b = _bispectra(vis, cs.member_signs)
        mean_b = (agg @ b) / count
        a2 = amp_e[cs.entry_rows] ** 2  # (n, 3) interval amplitudes squared
        a2m = a2[cs.member_closure]
        var_t = np.prod(a2m + 2.0 * sig2, axis=1) - np.prod(a2m, axis=1)
        mod_b = np.sqrt(np.prod(a2, axis=1))
        thermal = np.sqrt((agg @ var_t) / 2.0) / (count * mod_b)
        dev = np.abs(b - mean_b[cs.member_closure]) ** 2
        with np.errstate(divide="ignore", invalid="ignore"):
            scatter = np.sqrt((agg @ dev) / (2.0 * count * (count - 1.0))) / mod_b
        scatter = np.where(count >= MIN_SCATTER_MEMBERS, scatter, 0.0)
        cs.value = np.angle(mean_b)
        cs.sigma = np.sqrt(np.maximum(thermal, scatter) ** 2 + k * systematic**2)
        cs.error_source = np.where(scatter > thermal, "scatter", "thermal")
        return
    power = np.stack([agg @ np.abs(vis[:, j]) ** 2 for j in range(k)], 1) / count[:, None]
    s2 = np.stack([agg @ sig2[:, j] for j in range(k)], 1) / count[:, None]
    x = power - 2.0 * s2
    xr = x_ref[cs.entry_rows]  # the reference powers: the errors carry none of the values' noise
    varx = (4.0 * np.maximum(xr, 0.0) * s2 + 4.0 * s2**2) / count[:, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        log_a = 0.5 * (np.log(x) + varx / (2.0 * xr**2))
        e_log = 0.5 * np.sqrt(varx) / xr
    cs.value = np.sum(cs.signs * log_a, axis=1)
    cs.sigma = np.sqrt(np.sum(e_log**2, axis=1) + k * systematic**2)
    cs.error_source = np.full(cs.n, "thermal")
    bad = ~(np.all(x > 0, axis=1) & np.isfinite(cs.value) & np.isfinite(cs.sigma))
    if np.any(bad):
        _drop_closures(cs, ~bad)


def _drop_closures(cs, keep):
    """Keep only the closures ``keep`` (bool over closures) of an averaged set, in place."""
    sel = np.flatnonzero(keep)
    remap = np.full(cs.n, -1)
    remap[sel] = np.arange(sel.size)
    mkeep = keep[cs.member_closure]
    for name in ("rows", "signs", "stations", "time", "frequency", "channel", "snapshot", "value", "sigma"):
        setattr(cs, name, getattr(cs, name)[sel])
    cs.entry_rows = cs.entry_rows[sel]
    cs.error_source = cs.error_source[sel]
    cs.member_rows = cs.member_rows[mkeep]
    cs.member_signs = cs.member_signs[mkeep]
    cs.member_closure = remap[cs.member_closure[mkeep]]
