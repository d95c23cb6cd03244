"""Statistics on closure quantities, and the closure check of any fitted model.

Closure phases and log closure amplitudes are unchanged by station-based complex gains
(Thompson, Moran & Swenson 2017, ch. 10), so a model fitted to them alone does not depend on the
phase or amplitude calibration of the stations, and any model can be checked against them.
Construction, errors and the choice of a non-redundant set are described in
``uvfit.stats.closures_build``. Errors use the diagonal approximation (common practice): the
correlation between closures that share a baseline is ignored.

Statistics (constructor ``Cls(vset, model, systematic=0.0, snr_cut=3.0, full=False)``):

- ClosurePhaseStatistic (mode "closure_phase"): data in radians, residuals wrapped into (-pi, pi];
- LogClosureAmplitudeStatistic (mode "closure_amplitude"): natural log of closure amplitudes;
- ClosureStatistic (mode "closure"): both, joined end to end;
- HybridStatistic (mode "hybrid"): visibility amplitudes plus closure phases.

Each closure statistic's predict is index arithmetic on the model visibilities at the rows used:
V = model.visibilities(u[used], v[used]); psi = sum_k s_k arg V[k]; log CA = sum_k t_k log|V[k]|;
the Jacobian uses d arg V = Im(dV / V) and d log|V| = Re(dV / V).
"""
import numpy as np

from ..errors import UvfitError
from ..labels import CLOSURE_CAUTION
from .base import Statistic
from .closures_build import (COVARIANCE_NOTE, DEFAULT_SNR_CUT, ClosureSet, build_closures,
                             no_closure_error)

__all__ = ["ClosurePhaseStatistic", "LogClosureAmplitudeStatistic", "ClosureStatistic",
           "HybridStatistic", "check_closures", "closure_table", "build_closures", "ClosureSet",
           "DEFAULT_SNR_CUT", "COVARIANCE_NOTE", "CLOSURE_CAUTION"]


# ---------------------------------------------------------------------------- degeneracies
def _parameters(model):
    return getattr(model, "parameters", None) or {}


def _components(model):
    seen = []
    for name in _parameters(model):
        comp = name.split(".", 1)[0]
        if comp not in seen:
            seen.append(comp)
    return seen


def _status(model, name):
    """'free', 'fixed', 'tied' or None (no such parameter)."""
    p = _parameters(model).get(name)
    if p is None:
        return None
    if getattr(p, "tie", None):
        return "tied"
    return "fixed" if getattr(p, "fixed", False) else "free"


def _common_mode(model, local):
    """The first free ``component.local`` when no component has it fixed (so that a common shift or
    scale of all of them is unconstrained); else None."""
    free_names = list(getattr(model, "free_names", []))
    first = None
    for comp in _components(model):
        name = f"{comp}.{local}"
        st = _status(model, name)
        if st == "fixed":
            return None
        if st == "free" and first is None and name in free_names:
            first = name
    return first


def position_degeneracies(model, why):
    """[(name, reason)] for the east and north of the first component with a free position, when
    no component's position is fixed (a shift of the whole model is then unconstrained)."""
    out = []
    for local in ("east", "north"):
        name = _common_mode(model, local)
        if name:
            out.append((name, f"{why} are blind to the absolute position of the source (a shift of "
                              f"the whole model cancels in them); {name} is fixed and the other "
                              f"positions are measured relative to it"))
    return out


def flux_degeneracies(model, why):
    """[(name, reason)] for the flux of the first component with a free flux, when no flux is
    fixed (a common scale of all fluxes is then unconstrained)."""
    name = _common_mode(model, "flux")
    if not name:
        return []
    return [(name, f"{why} constrain flux ratios but not the total flux (scaling every flux by "
                   f"one factor leaves them unchanged); {name} is fixed at its starting value, "
                   f"which sets the flux scale, and the other fluxes are measured relative to it")]


# ------------------------------------------------------------------------------ statistics
COVARIANCES = ("diagonal", "snapshot")


def _check_covariance(covariance, full):
    """The covariance to use: "snapshot" by default for the non-redundant set, "diagonal" for the
    full set (whose covariance is singular)."""
    if covariance is None:
        return "diagonal" if full else "snapshot"
    if covariance not in COVARIANCES:
        raise UvfitError(f"unknown closure covariance '{covariance}'",
                         "use 'diagonal' (default) or 'snapshot'")
    if covariance == "snapshot" and full:
        raise UvfitError("the full (redundant) closure set has a singular covariance",
                         "use the non-redundant set (no --full) with the snapshot covariance")
    return covariance


class _ClosurePart(Statistic):
    """A statistic on one kind of closure quantity (see the module docstring).

    ``covariance``: "snapshot" (default for the non-redundant set) whitens the residuals of each
    snapshot with the full covariance A diag(sigma_k^2 / |V_k|^2) A^T of its closures (A: the
    signs on the rows), so that the chi2 and the errors account for shared baselines; "diagonal"
    (common practice; always used for the redundant full set) weighs every closure by its own
    sigma and ignores those correlations, which on simulated data underestimated the errors of
    relative positions by some 30 per cent. ``sigma`` is the per-closure error either way.
    """

    kind = ""
    why = ""

    def __init__(self, vset, model, systematic=0.0, snr_cut=DEFAULT_SNR_CUT, full=False,
                 covariance=None, closures=None, amplitude_reference="neighbours", **options):
        vset = vset.good()
        snr_cut = DEFAULT_SNR_CUT if snr_cut is None else float(snr_cut)
        covariance = _check_covariance(covariance, full)
        super().__init__(vset, model, systematic=systematic, snr_cut=snr_cut, full=bool(full),
                         covariance=covariance, amplitude_reference=amplitude_reference, **options)
        cs = closures if closures is not None else build_closures(
            vset, snr_cut=snr_cut, systematic=systematic, full=full, kinds=(self.kind,),
            amplitude_reference=amplitude_reference)[self.kind]
        if cs.n == 0:
            raise no_closure_error(vset, self.kind, snr_cut)
        self.closures = cs
        self.snr_cut = snr_cut
        self.full = bool(full)
        self.covariance = covariance
        self.covariance_note = (COVARIANCE_NOTE if covariance == "diagonal" else
                                "full covariance within each snapshot (closures sharing a baseline "
                                "correlated); snapshots independent")
        self.data = cs.value.copy()
        self.sigma = cs.sigma.copy()
        #: rows of ``vset`` that enter each datum (n_data, 3 or 4), and their stations
        self.row_index = cs.rows
        self.station_index = cs.stations
        self.labels = cs.labels
        self._used = np.unique(cs.rows)
        self._local = np.searchsorted(self._used, cs.rows)
        self._signs = cs.signs
        self._u = vset.u[self._used]
        self._v = vset.v[self._used]
        self._f = vset.frequency[self._used]
        self._white = None
        self._logdet = 0.0
        if covariance == "snapshot":
            self._white, self._logdet = self._whitening(vset, cs)

    @staticmethod
    def _whitening(vset, cs):
        """Block-diagonal W with W C W^T = 1 (C the covariance of each snapshot's closures) and
        0.5 log det C. The covariance blocks are built in a loop over snapshots (construction
        only); their Cholesky factors and inverses are computed in batches of equal size."""
        from scipy.sparse import block_diag

        if cs.row_sigma is not None:
            rel2 = cs.row_sigma ** 2
        else:
            amp = np.abs(vset.vis)
            with np.errstate(divide="ignore", invalid="ignore"):
                rel2 = (vset.sigma ** 2 + (cs.systematic * amp) ** 2) / amp ** 2
        bounds = np.flatnonzero(np.diff(cs.snapshot)) + 1
        groups = np.split(np.arange(cs.n), bounds)
        covs = []
        for idx in groups:
            rows = cs.rows[idx]
            uniq, inv = np.unique(rows, return_inverse=True)
            a = np.zeros((len(idx), len(uniq)))
            np.add.at(a, (np.repeat(np.arange(len(idx)), rows.shape[1]), inv.ravel()),
                      cs.signs[idx].ravel())
            covs.append((a * rel2[uniq]) @ a.T)
        blocks = [None] * len(groups)
        logdet = 0.0
        sizes = np.array([len(g) for g in groups])
        for k in np.unique(sizes):
            which = np.flatnonzero(sizes == k)
            low = np.linalg.cholesky(np.stack([covs[i] for i in which]))
            white = np.linalg.inv(low)
            logdet += float(np.sum(np.log(np.diagonal(low, axis1=1, axis2=2))))
            for j, i in enumerate(which):
                blocks[i] = white[j]
        return block_diag(blocks, format="csr"), logdet

    def _vis(self, theta):
        return np.asarray(self.model.visibilities(self._u, self._v, self._f, theta=theta))

    def _vis_jac(self, theta):
        both = getattr(self.model, "visibilities_and_jacobian", None)
        if both is not None:
            vis, jac = both(self._u, self._v, frequency=self._f, theta=theta)
        else:
            vis = self.model.visibilities(self._u, self._v, self._f, theta=theta)
            jac = self.model.jacobian(self._u, self._v, self._f, theta=theta)
        vis = np.asarray(vis, complex).reshape(-1)
        return vis, np.asarray(jac, complex).reshape(vis.size, -1)

    def residuals(self, theta):
        if self._white is None:
            return super().residuals(theta)
        return self._white @ self._difference(self.predict(theta))

    def jacobian(self, theta):
        if self._white is None:
            return super().jacobian(theta)
        _, dpred = self.predict_jacobian(theta)
        return -(self._white @ dpred)

    def log_likelihood(self, theta):
        if self._white is None:
            return super().log_likelihood(theta)
        r = self.residuals(theta)
        return float(-0.5 * (r @ r) - self._logdet - 0.5 * self.n_data * np.log(2 * np.pi))

    def scaled(self, factor):
        out = super().scaled(factor)
        if self._white is not None:
            out._white = self._white / float(factor)
            out._logdet = self._logdet + self.n_data * np.log(float(factor))
        return out

    def model_values(self, theta=None):
        """The model's closure quantities (phases wrapped into (-pi, pi])."""
        return self.predict(theta)

    def degeneracies(self):
        return position_degeneracies(self.model, self.why) + flux_degeneracies(self.model, self.why)


class ClosurePhaseStatistic(_ClosurePart):
    """Closure phases (radians) on the triangles of simultaneously observed baselines."""

    mode = "closure_phase"
    kind = "phase"
    why = "closure phases"
    wrapped = True

    def predict(self, theta):
        ph = np.angle(self._vis(theta))
        return np.angle(np.exp(1j * np.sum(self._signs * ph[self._local], axis=1)))

    def predict_jacobian(self, theta):
        vis, jac = self._vis_jac(theta)
        with np.errstate(divide="ignore", invalid="ignore"):
            dph = (jac / vis[:, None]).imag
        pred = np.angle(np.exp(1j * np.sum(self._signs * np.angle(vis)[self._local], axis=1)))
        return pred, np.einsum("nk,nkp->np", self._signs, dph[self._local])


class LogClosureAmplitudeStatistic(_ClosurePart):
    """Natural logs of closure amplitudes |V_ab| |V_cd| / (|V_ac| |V_bd|) on quadrangles."""

    mode = "closure_amplitude"
    kind = "amplitude"
    why = "log closure amplitudes"
    wrapped = None

    def predict(self, theta):
        with np.errstate(divide="ignore"):
            la = np.log(np.abs(self._vis(theta)))
        return np.sum(self._signs * la[self._local], axis=1)

    def predict_jacobian(self, theta):
        vis, jac = self._vis_jac(theta)
        with np.errstate(divide="ignore", invalid="ignore"):
            dla = (jac / vis[:, None]).real
            la = np.log(np.abs(vis))
        return (np.sum(self._signs * la[self._local], axis=1),
                np.einsum("nk,nkp->np", self._signs, dla[self._local]))


def _pad(a, width=4):
    a = np.asarray(a, int)
    if a.ndim == 1:
        a = a[:, None]
    out = np.full((a.shape[0], width), -1, dtype=int)
    out[:, :a.shape[1]] = a
    return out


class _Joined(Statistic):
    """Several statistics on the same model, joined end to end (like CombinedStatistic).

    The members are kept in ``members`` rather than ``parts`` so that a fitter that rebuilds a
    statistic on a changed model calls this class again (``type(s)(s.vset, model, systematic,
    **s.options)``) and keeps its attributes (``row_index``, ``closures``, degeneracies).
    """

    def _join(self, members):
        self.members = list(members)
        self.data = np.concatenate([p.data for p in self.members])
        self.sigma = np.concatenate([p.sigma for p in self.members])
        self.wrapped = np.concatenate([np.broadcast_to(
            False if p.wrapped is None else p.wrapped, (p.n_data,)) for p in self.members])

    def predict(self, theta):
        return np.concatenate([p.predict(theta) for p in self.members])

    def predict_jacobian(self, theta):
        out = [p.predict_jacobian(theta) for p in self.members]
        return np.concatenate([o[0] for o in out]), np.vstack([o[1] for o in out])

    def residuals(self, theta):
        return np.concatenate([p.residuals(theta) for p in self.members])

    def jacobian(self, theta):
        return np.vstack([p.jacobian(theta) for p in self.members])

    def log_likelihood(self, theta):
        return float(sum(p.log_likelihood(theta) for p in self.members))

    def scaled(self, factor):
        out = object.__new__(type(self))
        out.__dict__.update(self.__dict__)
        out.members = [p.scaled(factor) for p in self.members]
        out.sigma = np.concatenate([p.sigma for p in out.members])
        return out


class ClosureStatistic(_Joined):
    """Closure phases and log closure amplitudes together (mode "closure").

    Immune to every station-based gain; blind to absolute position and to the total flux.
    With only three stations there are no closure amplitudes and the closure phases are used alone
    (``notices`` says so). Phase and log-amplitude noise are independent at high SNR (they come
    from the perpendicular and parallel noise components), so the two blocks are not correlated.
    """

    mode = "closure"

    def __init__(self, vset, model, systematic=0.0, snr_cut=DEFAULT_SNR_CUT, full=False,
                 covariance=None, amplitude_reference="neighbours", **options):
        vset = vset.good()
        snr_cut = DEFAULT_SNR_CUT if snr_cut is None else float(snr_cut)
        covariance = _check_covariance(covariance, full)
        super().__init__(vset, model, systematic=systematic, snr_cut=snr_cut, full=bool(full),
                         covariance=covariance, amplitude_reference=amplitude_reference, **options)
        cs = build_closures(vset, snr_cut=snr_cut, systematic=systematic, full=full,
                            amplitude_reference=amplitude_reference)
        if cs["phase"].n == 0:
            raise no_closure_error(vset, "phase", snr_cut)
        members = [ClosurePhaseStatistic(vset, model, systematic, snr_cut, full, covariance,
                                         closures=cs["phase"],
                                         amplitude_reference=amplitude_reference)]
        self.notices = []
        if cs["amplitude"].n:
            members.append(LogClosureAmplitudeStatistic(vset, model, systematic, snr_cut, full,
                                                        covariance, closures=cs["amplitude"],
                                                        amplitude_reference=amplitude_reference))
        else:
            self.notices.append("no closure amplitudes can be formed (fewer than four stations with "
                                "enough SNR at every time): closure phases only")
        self._join(members)
        self.snr_cut = snr_cut
        self.full = bool(full)
        self.covariance = covariance
        self.covariance_note = members[0].covariance_note
        self.closures = cs
        self.row_index = np.vstack([_pad(p.row_index) for p in members])
        self.station_index = np.vstack([_pad(p.station_index) for p in members])
        self.labels = np.concatenate([p.labels for p in members])
        self.kinds = np.concatenate([np.full(p.n_data, p.kind) for p in members])

    def degeneracies(self):
        why = "closure phases and log closure amplitudes"
        return position_degeneracies(self.model, why) + flux_degeneracies(self.model, why)


class _AmplitudePart(Statistic):
    """Visibility amplitudes |V| with sigma (the noise of either part; high-SNR approximation);
    used only where the fitting layer's AmplitudeStatistic is not available."""

    mode = "amplitude"
    wrapped = None

    def __init__(self, vset, model, systematic=0.0, **options):
        vset = vset.good()
        super().__init__(vset, model, systematic=systematic, **options)
        amp = np.abs(vset.vis)
        self.data = amp
        self.sigma = np.sqrt(vset.sigma ** 2 + (self.systematic * amp) ** 2)
        self.row_index = np.arange(vset.n)

    def predict(self, theta):
        return np.abs(self.model.visibilities(self.vset.u, self.vset.v, self.vset.frequency,
                                              theta=theta))

    def predict_jacobian(self, theta):
        vs = self.vset
        vis = np.asarray(self.model.visibilities(vs.u, vs.v, vs.frequency, theta=theta))
        jac = np.asarray(self.model.jacobian(vs.u, vs.v, vs.frequency, theta=theta))
        amp = np.abs(vis)
        with np.errstate(divide="ignore", invalid="ignore"):
            d = (np.conj(vis)[:, None] * jac).real / amp[:, None]
        return amp, np.nan_to_num(d)

    def degeneracies(self):
        return position_degeneracies(self.model, "visibility amplitudes")


def _amplitude_statistic(vset, model, systematic, **options):
    """The fitting layer's AmplitudeStatistic where it exists, else the small one above."""
    try:
        from .visibility import AmplitudeStatistic
    except ImportError:
        return _AmplitudePart(vset, model, systematic=systematic)
    return AmplitudeStatistic(vset, model, systematic=systematic, **options)


class HybridStatistic(_Joined):
    """Visibility amplitudes and closure phases (mode "hybrid").

    Immune to station-based phase errors (not to amplitude errors); the amplitudes fix the total
    flux, nothing fixes the absolute position. The closure phases use the SNR cut, the amplitudes
    every unflagged row (low-SNR rows as the amplitude statistic treats them).
    """

    mode = "hybrid"

    def __init__(self, vset, model, systematic=0.0, snr_cut=DEFAULT_SNR_CUT, full=False,
                 covariance=None, amplitude_reference="neighbours", **options):
        vset = vset.good()
        snr_cut = DEFAULT_SNR_CUT if snr_cut is None else float(snr_cut)
        super().__init__(vset, model, systematic=systematic, snr_cut=snr_cut, full=bool(full),
                         covariance=covariance, amplitude_reference=amplitude_reference, **options)
        amp = _amplitude_statistic(vset, model, systematic, **options)
        cp = ClosurePhaseStatistic(vset, model, systematic, snr_cut, full, covariance,
                                   amplitude_reference=amplitude_reference)
        self._join([amp, cp])
        self.notices = list(getattr(amp, "notices", []) or [])
        self.snr_cut = snr_cut
        self.full = bool(full)
        self.covariance = covariance
        self.covariance_note = cp.covariance_note + " (closure phases); amplitudes independent"
        self.closures = {"phase": cp.closures}
        amp_rows = getattr(amp, "row_index", None)
        if amp_rows is None or len(amp_rows) != amp.n_data:
            amp_rows = np.arange(amp.n_data)
        amp_rows = _pad(amp_rows, 1)[:, 0]
        self.row_index = np.vstack([_pad(amp_rows), _pad(cp.row_index)])
        amp_st = np.stack([vset.ant1[amp_rows], vset.ant2[amp_rows]], 1)
        self.station_index = np.vstack([_pad(amp_st), _pad(cp.station_index)])
        self.kinds = np.concatenate([np.full(amp.n_data, "visibility_amplitude"),
                                     np.full(cp.n_data, "phase")])

    def degeneracies(self):
        return position_degeneracies(self.model, "visibility amplitudes and closure phases")


# ----------------------------------------------------------------------------- the check
def _model_vis_at_rows(model, vset, rows):
    """Model visibilities at every row of vset (NaN where not needed), computed only at ``rows``."""
    used = np.unique(rows)
    out = np.full(vset.n, np.nan + 0j)
    theta = model.get_free() if hasattr(model, "get_free") else None
    out[used] = model.visibilities(vset.u[used], vset.v[used], vset.frequency[used], theta=theta)
    return out


def _group_chi2(labels, chi):
    """[{label, n, chi2, reduced_chi2}] over distinct labels, worst (largest reduced chi2) first."""
    if len(labels) == 0:
        return []
    uniq, inv = np.unique(labels, return_inverse=True)
    n = np.bincount(inv, minlength=len(uniq))
    c = np.bincount(inv, weights=chi, minlength=len(uniq))
    rows = [{"label": str(l), "n": int(k), "chi2": float(x), "reduced_chi2": float(x / k)}
            for l, k, x in zip(uniq, n, c)]
    rows.sort(key=lambda r: -r["reduced_chi2"])
    return rows


def _station_chi2(names, parts):
    """Per station: chi2 and number of the closures it takes part in (each closure counts toward
    each of its three or four stations)."""
    out = []
    for i, name in enumerate(names):
        n = 0
        c = 0.0
        for stations, chi in parts:
            if len(chi) == 0:
                continue
            has = np.any(stations == i, axis=1)
            n += int(has.sum())
            c += float(chi[has].sum())
        if n:
            out.append({"station": name, "n": n, "chi2": c, "reduced_chi2": c / n})
    out.sort(key=lambda r: -r["reduced_chi2"])
    return out


def _judge(what, chi2, n, full):
    """(ok: bool or None, words) for a chi2 over n closures."""
    if n == 0:
        return None, f"no {what}"
    red = chi2 / n
    spread = np.sqrt(2.0 / n)
    text = f"{what}: reduced chi2 {red:.3g} over {n} (expected 1 +/- {spread:.2g})"
    if full:
        text += "; the full set is redundant, so this spread is too small"
    if red > 1 + 3 * spread:
        return False, text + " -> the model does not reproduce them"
    if red < 1 - 3 * spread:
        return True, text + " -> smaller than expected: errors probably overestimated"
    return True, text + " -> consistent"


def check_closures(vset, model=None, systematic=0.0, snr_cut=DEFAULT_SNR_CUT, full=False,
                   covariance=None, worst=5, amplitude_reference="neighbours"):
    """Counts of the closure quantities of ``vset`` and, with a model, how well the model's closure
    phases and log closure amplitudes match the data (at the model's current parameter values).

    Returns a dict: counts (``n_closure_phases``, ``n_closure_amplitudes``, ``n_triangles``,
    ``n_quadrangles``, ``n_stations``, ``n_snapshots``), settings, ``covariance`` (words),
    ``caution``; with a model also ``closure_phase_chi2`` and ``closure_amplitude_chi2`` (with the
    snapshot covariance for the non-redundant set, diagonal for the full set), the diagonal values
    ``*_chi2_diagonal``, reduced values and their expected spread sqrt(2/n), ``per_triangle``,
    ``per_quadrangle``, ``per_station`` (worst first; from diagonal per-closure residuals, each
    closure counted toward each of its stations), ``worst_*`` (the first ``worst`` of each),
    ``supported`` (bool) and ``verdict`` (words). Also ``closures`` (the ClosureSet of each kind)
    and, with a model, ``model_values`` (radians / natural log) for tables; these two are not JSON
    material (see :func:`json_summary`). Raises DataError when no closure phase can be formed.
    """
    vset = vset.good()
    snr_cut = DEFAULT_SNR_CUT if snr_cut is None else float(snr_cut)
    covariance = _check_covariance(covariance, full)
    cs = build_closures(vset, snr_cut=snr_cut, systematic=systematic, full=full,
                        amplitude_reference=amplitude_reference)
    cp, ca = cs["phase"], cs["amplitude"]
    if cp.n == 0:
        raise no_closure_error(vset, "phase", snr_cut)
    used_st = np.unique(np.concatenate([cp.stations.ravel(), ca.stations.ravel()]))
    note = (COVARIANCE_NOTE if covariance == "diagonal" else
            "linear propagation; full covariance within each snapshot for the chi2 totals "
            "(closures sharing a baseline are correlated), diagonal errors for the per-triangle, "
            "per-quadrangle and per-station breakdown")
    out = {
        "n_closure_phases": int(cp.n),
        "n_closure_amplitudes": int(ca.n),
        "n_triangles": int(len(np.unique(cp.labels))),
        "n_quadrangles": int(len(np.unique(ca.labels))) if ca.n else 0,
        "n_stations": int(len(vset.station_names)),
        "stations": list(vset.station_names),
        "n_stations_in_closures": int(len(used_st)),
        "n_snapshots": int(cp.n_snapshots),
        "set": "full (redundant)" if full else "non-redundant",
        "snr_cut": snr_cut,
        "systematic": float(systematic),
        "covariance": note,
        "covariance_mode": covariance,
        "closure_phase_unit": "deg",
        "closure_amplitude_unit": "natural log",
        "caution": CLOSURE_CAUTION,
        "closures": cs,
    }
    if model is None:
        return out
    mvis = _model_vis_at_rows(model, vset, np.concatenate([cp.rows.ravel(), ca.rows.ravel()]))
    m_cp = cp.evaluate(mvis)
    d_cp = np.angle(np.exp(1j * (cp.value - m_cp)))
    m_ca = ca.evaluate(mvis) if ca.n else np.zeros(0)
    d_ca = ca.value - m_ca
    chi_cp, chi_ca = (d_cp / cp.sigma) ** 2, (d_ca / ca.sigma) ** 2
    tot = {}
    for kind, c, d, chi in (("phase", cp, d_cp, chi_cp), ("amplitude", ca, d_ca, chi_ca)):
        if c.n == 0:
            tot[kind] = None
        elif covariance == "snapshot":
            w, _ = _ClosurePart._whitening(vset, c)
            r = w @ d
            tot[kind] = float(r @ r)
        else:
            tot[kind] = float(chi.sum())
    out["model_values"] = {"phase": m_cp, "amplitude": m_ca}
    out["closure_phase_chi2"] = tot["phase"]
    out["closure_amplitude_chi2"] = tot["amplitude"]
    out["closure_phase_chi2_diagonal"] = float(chi_cp.sum())
    out["closure_amplitude_chi2_diagonal"] = float(chi_ca.sum()) if ca.n else None
    out["closure_phase_reduced_chi2"] = tot["phase"] / cp.n
    out["closure_amplitude_reduced_chi2"] = tot["amplitude"] / ca.n if ca.n else None
    out["closure_phase_expected_spread"] = float(np.sqrt(2.0 / cp.n))
    out["closure_amplitude_expected_spread"] = float(np.sqrt(2.0 / ca.n)) if ca.n else None
    out["per_triangle"] = _group_chi2(cp.labels, chi_cp)
    out["per_quadrangle"] = _group_chi2(ca.labels, chi_ca)
    out["per_station"] = _station_chi2(cp.station_names, [(cp.stations, chi_cp), (ca.stations, chi_ca)])
    out["worst_triangles"] = out["per_triangle"][:worst]
    out["worst_quadrangles"] = out["per_quadrangle"][:worst]
    out["worst_stations"] = out["per_station"][:worst]
    ok_p, t_p = _judge("closure phases", tot["phase"], cp.n, full)
    ok_a, t_a = _judge("log closure amplitudes", tot["amplitude"] or 0.0, ca.n, full)
    supported = bool(ok_p and ok_a is not False)
    if supported:
        head = "The closure quantities support the fitted structure."
    else:
        head = "The closure quantities do NOT support the fitted structure."
        if out["worst_stations"]:
            w = out["worst_stations"][0]
            head += (f" The largest misfit involves station {w['station']} (reduced chi2 "
                     f"{w['reduced_chi2']:.3g}): the model may miss structure, the errors may be "
                     f"underestimated (try a systematic floor), or that station may carry "
                     f"baseline-based errors.")
    out["supported"] = supported
    out["verdict"] = " ".join([head, t_p + ";", t_a + "."])
    return out


def closure_table(result, vset=None):
    """An astropy Table of the closure quantities in ``result`` (from :func:`check_closures`):
    kind, time (MJD), frequency (Hz), channel, stations, value, sigma, model (NaN without a
    model), unit (deg for closure phases, empty for natural-log closure amplitudes)."""
    from astropy.table import Table, vstack
    import astropy.units as un

    cs = result["closures"]
    models = result.get("model_values") or {}
    tabs = []
    for kind, scale, unit in (("phase", np.degrees(1.0), "deg"), ("amplitude", 1.0, "")):
        c = cs[kind]
        m = models.get(kind)
        m = np.full(c.n, np.nan) if m is None else np.asarray(m) * scale
        t = Table()
        t["kind"] = np.full(c.n, "closure_phase" if kind == "phase" else "log_closure_amplitude",
                            dtype="U21")
        t["time"] = c.time * un.day
        t["time"].description = "MJD (UTC)"
        t["frequency"] = c.frequency * un.Hz
        t["channel"] = c.channel.astype(int)
        t["stations"] = c.labels.astype("U64") if c.n else np.zeros(0, "U64")
        t["value"] = c.value * scale
        t["sigma"] = c.sigma * scale
        t["model"] = m
        t["unit"] = np.full(c.n, unit, dtype="U3")
        tabs.append(t)
    out = vstack(tabs, metadata_conflicts="silent")
    out.meta["closure_set"] = result["set"]
    out.meta["snr_cut"] = result["snr_cut"]
    out.meta["systematic"] = result["systematic"]
    out.meta["covariance"] = result["covariance"]
    out.meta["stations_meaning"] = ("triangle A-B-C: arg V_AB + arg V_BC + arg V_CA; quadrangle "
                                    "A-B-C-D: ln(|V_AB| |V_CD| / (|V_AC| |V_BD|))")
    out.meta["caution"] = CLOSURE_CAUTION
    return out


def json_summary(result):
    """The JSON-safe part of a :func:`check_closures` result (no arrays)."""
    return {k: v for k, v in result.items() if k not in ("closures", "model_values")}

