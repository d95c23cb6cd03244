"""Statistics on closure quantities (the fitting modes of the closures).

Closure phases and log closure amplitudes are unchanged by station-based complex gains
(Thompson, Moran & Swenson 2017, ch. 10), so a model fitted to them alone does not depend on the
phase or amplitude calibration of the stations. Construction, errors and the choice of a
non-redundant set: :mod:`uvfit.stats.closures.build`; the covariance:
:mod:`uvfit.stats.closures.covariance` ("snapshot" by default for the non-redundant set,
"diagonal" for the full set).

Statistics (constructor ``Cls(vset, model, systematic=0.0, snr_cut=3.0, full=False,
covariance=None, amplitude_reference="neighbours")``):

- ClosurePhaseStatistic (mode "closure_phase"): data in radians, residuals wrapped into (-pi, pi];
- LogClosureAmplitudeStatistic (mode "closure_amplitude"): natural log of closure amplitudes;
- ClosureStatistic (mode "closure"): both, joined end to end;
- HybridStatistic (mode "hybrid"): visibility amplitudes plus closure phases.

Each closure statistic's predict is index arithmetic on the model visibilities at the rows used:
V = model.visibilities(u[used], v[used]); psi = sum_k s_k arg V[k]; log CA = sum_k t_k log|V[k]|;
the Jacobian uses d arg V = Im(dV / V) and d log|V| = Re(dV / V).
"""

import numpy as np

from ..base import (
    REFLECTION_NOTICE,
    JoinedStatistic,
    Statistic,
    common_shift,
    model_visibilities_and_jacobian,
    row_files,
)
from ..visibility import AmplitudeStatistic
from .build import DEFAULT_SNR_CUT, _aggregator, _bispectra, build_closures, no_closure_error
from .covariance import COVARIANCE_NOTE, check_covariance, whitening


def position_degeneracies(model, why):
    """[(name, reason)] for the east and north of the first component with a free position, when
    no component's position is fixed (a shift of the whole model is then unconstrained)."""
    out = []
    for local in ("east", "north"):
        name = common_shift(model, local)
        if name:
            out.append(
                (
                    name,
                    f"{why} are blind to the absolute position of the source (a shift of "
                    f"the whole model cancels in them); {name} is fixed and the other "
                    f"positions are measured relative to it",
                )
            )
    return out


def flux_degeneracies(model, why):
    """[(name, reason)] for the flux of the first component with a free flux, when no flux is
    fixed (a common scale of all fluxes is then unconstrained)."""
    name = common_shift(model, "flux")
    if not name:
        return []
    return [
        (
            name,
            f"{why} constrain flux ratios but not the total flux (scaling every flux by "
            f"one factor leaves them unchanged); {name} is fixed at its starting value, "
            f"which sets the flux scale, and the other fluxes are measured relative to it",
        )
    ]


def _build_options(closure_average=None, scan_gap=None, site_distance=None):
    """The construction options of the closures that were given (kept in ``.options``)."""
    given = {"closure_average": closure_average, "scan_gap": scan_gap, "site_distance": site_distance}
    return {k: v for k, v in given.items() if v is not None}


def averaging_notice(cs):
    """One line on how an averaged closure set was made."""
    what = "closure phases" if cs.kind == "phase" else "log closure amplitudes"
    line = f"{what} averaged: {cs.note}; {cs.n} from {len(cs.member_closure)} integrations"
    if cs.kind == "phase" and cs.n:
        n_sc = int(np.count_nonzero(cs.error_source == "scatter"))
        line += f"; error from the scatter (larger than thermal) for {n_sc} of {cs.n}"
    else:
        line += "; amplitudes debiased (incoherent power average)"
    return line


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

    def __init__(
        self,
        vset,
        model,
        systematic=0.0,
        snr_cut=DEFAULT_SNR_CUT,
        full=False,
        covariance=None,
        closures=None,
        amplitude_reference="neighbours",
        closure_average=None,
        scan_gap=None,
        site_distance=None,
        **options,
    ):
        vset = vset.good()
        snr_cut = DEFAULT_SNR_CUT if snr_cut is None else float(snr_cut)
        covariance = check_covariance(covariance, full)
        build = _build_options(closure_average, scan_gap, site_distance)
        super().__init__(
            vset,
            model,
            systematic=systematic,
            snr_cut=snr_cut,
            full=bool(full),
            covariance=covariance,
            amplitude_reference=amplitude_reference,
            **build,
            **options,
        )
        cs = (
            closures
            if closures is not None
            else build_closures(
                vset,
                snr_cut=snr_cut,
                systematic=systematic,
                full=full,
                kinds=(self.kind,),
                amplitude_reference=amplitude_reference,
                **build,
            )[self.kind]
        )
        if cs.n == 0:
            raise no_closure_error(vset, self.kind, snr_cut)
        self.closures = cs
        self.snr_cut = snr_cut
        self.full = bool(full)
        self.covariance = covariance
        self.covariance_note = (
            COVARIANCE_NOTE
            if covariance == "diagonal"
            else "full covariance within each snapshot (closures sharing a baseline correlated); snapshots independent"
        )
        self.data = cs.value.copy()
        self.sigma = cs.sigma.copy()
        #: rows of ``vset`` that enter each datum (n_data, 3 or 4), and their stations
        self.row_index = cs.rows
        self.station_index = cs.stations
        self.labels = cs.labels
        self.averaged = cs.member_rows is not None
        if self.averaged:
            self._used = np.unique(cs.member_rows)
            self._local = np.searchsorted(self._used, cs.member_rows)
            self._signs = cs.member_signs
            self._coef = cs.signs
            self._agg = _aggregator(cs.member_closure, cs.n)
            self.notices = list(getattr(self, "notices", []) or []) + [averaging_notice(cs)]
        else:
            self._used = np.unique(cs.rows)
            self._local = np.searchsorted(self._used, cs.rows)
            self._signs = cs.signs
        self._u = vset.u[self._used]
        self._v = vset.v[self._used]
        self._f = vset.frequency[self._used]
        files = row_files(model, vset)
        self._files = None if files is None else files[self._used]
        self._white = None
        self._logdet = 0.0
        if covariance == "snapshot":
            self._white, self._logdet = whitening(vset, cs)

    def _vis(self, theta):
        return np.asarray(self.model.visibilities(self._u, self._v, self._f, theta=theta, files=self._files))

    def _vis_jac(self, theta):
        return model_visibilities_and_jacobian(self.model, self._u, self._v, self._f, theta, files=self._files)

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
        if self.averaged:
            return np.angle(self._agg @ _bispectra(self._vis(theta)[self._local], self._signs))
        ph = np.angle(self._vis(theta))
        return np.angle(np.exp(1j * np.sum(self._signs * ph[self._local], axis=1)))

    def predict_jacobian(self, theta):
        vis, jac = self._vis_jac(theta)
        with np.errstate(divide="ignore", invalid="ignore"):
            dph = (jac / vis[:, None]).imag
        if self.averaged:
            # d arg S = Im(conj S dS) / |S|^2, S = sum_t B_t, dB_t = B_t sum_k (Re g + i s_k Im g),
            # g = dV / V at each corner (conj V for s = -1 gives conj g)
            g = jac / vis[:, None]
            gl = g[self._local]  # (m, k, p)
            b = _bispectra(vis[self._local], self._signs)
            db = b[:, None] * np.sum(gl.real + 1j * self._signs[:, :, None] * gl.imag, axis=1)
            big_s = self._agg @ b
            ds = self._agg @ db
            with np.errstate(divide="ignore", invalid="ignore"):
                d = (np.conj(big_s)[:, None] * ds).imag / (np.abs(big_s) ** 2)[:, None]
            return np.angle(big_s), d
        pred = np.angle(np.exp(1j * np.sum(self._signs * np.angle(vis)[self._local], axis=1)))
        return pred, np.einsum("nk,nkp->np", self._signs, dph[self._local])


class LogClosureAmplitudeStatistic(_ClosurePart):
    """Natural logs of closure amplitudes |V_ab| |V_cd| / (|V_ac| |V_bd|) on quadrangles."""

    mode = "closure_amplitude"
    kind = "amplitude"
    amplitude_only = True
    why = "log closure amplitudes"
    wrapped = None

    def _power(self, vis):
        """Summed |V|^2 of each closure's corners over its integrations (n, 4)."""
        p = np.abs(vis[self._local]) ** 2
        return np.stack([self._agg @ p[:, j] for j in range(p.shape[1])], 1)

    def predict(self, theta):
        if self.averaged:
            with np.errstate(divide="ignore"):
                return np.sum(self._coef * 0.5 * np.log(self._power(self._vis(theta))), axis=1)
        with np.errstate(divide="ignore"):
            la = np.log(np.abs(self._vis(theta)))
        return np.sum(self._signs * la[self._local], axis=1)

    def predict_jacobian(self, theta):
        vis, jac = self._vis_jac(theta)
        if self.averaged:
            q = self._power(vis)
            dp = 2.0 * (np.conj(vis)[:, None] * jac).real  # d|V|^2 per row (rows, p)
            dpl = dp[self._local]  # (m, 4, p)
            d = np.zeros((self.n_data, jac.shape[1]))
            for j in range(q.shape[1]):
                with np.errstate(divide="ignore", invalid="ignore"):
                    d += (self._coef[:, j] * 0.5 / q[:, j])[:, None] * (self._agg @ dpl[:, j, :])
            with np.errstate(divide="ignore"):
                return np.sum(self._coef * 0.5 * np.log(q), axis=1), d
        with np.errstate(divide="ignore", invalid="ignore"):
            dla = (jac / vis[:, None]).real
            la = np.log(np.abs(vis))
        return (np.sum(self._signs * la[self._local], axis=1), np.einsum("nk,nkp->np", self._signs, dla[self._local]))


def _pad(a, width=4):
    a = np.asarray(a, int)
    if a.ndim == 1:
        a = a[:, None]
    out = np.full((a.shape[0], width), -1, dtype=int)
    out[:, : a.shape[1]] = a
    return out


class ClosureStatistic(JoinedStatistic):
    """Closure phases and log closure amplitudes together (mode "closure").

    Immune to every station-based gain; blind to absolute position and to the total flux.
    With only three stations there are no closure amplitudes and the closure phases are used alone
    (``notices`` says so). Phase and log-amplitude noise are independent at high SNR (they come
    from the perpendicular and parallel noise components), so the two blocks are not correlated.
    """

    mode = "closure"

    def __init__(
        self,
        vset,
        model,
        systematic=0.0,
        snr_cut=DEFAULT_SNR_CUT,
        full=False,
        covariance=None,
        amplitude_reference="neighbours",
        closure_average=None,
        scan_gap=None,
        site_distance=None,
        **options,
    ):
        vset = vset.good()
        snr_cut = DEFAULT_SNR_CUT if snr_cut is None else float(snr_cut)
        covariance = check_covariance(covariance, full)
        build = _build_options(closure_average, scan_gap, site_distance)
        super().__init__(
            vset,
            model,
            systematic=systematic,
            snr_cut=snr_cut,
            full=bool(full),
            covariance=covariance,
            amplitude_reference=amplitude_reference,
            **build,
            **options,
        )
        cs = build_closures(
            vset, snr_cut=snr_cut, systematic=systematic, full=full, amplitude_reference=amplitude_reference, **build
        )
        if cs["phase"].n == 0:
            raise no_closure_error(vset, "phase", snr_cut)
        members = [
            ClosurePhaseStatistic(
                vset,
                model,
                systematic,
                snr_cut,
                full,
                covariance,
                closures=cs["phase"],
                amplitude_reference=amplitude_reference,
            )
        ]
        self.notices = []
        if cs["amplitude"].n:
            members.append(
                LogClosureAmplitudeStatistic(
                    vset,
                    model,
                    systematic,
                    snr_cut,
                    full,
                    covariance,
                    closures=cs["amplitude"],
                    amplitude_reference=amplitude_reference,
                )
            )
        else:
            self.notices.append(
                "no closure amplitudes can be formed (fewer than four stations with "
                "enough SNR at every time): closure phases only"
            )
        if cs["phase"].member_rows is not None:
            self.notices += [averaging_notice(c) for c in cs.values() if c.n]
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


class HybridStatistic(JoinedStatistic):
    """Visibility amplitudes and closure phases (mode "hybrid").

    Immune to station-based phase errors (not to amplitude errors); the amplitudes fix the total
    flux, nothing fixes the absolute position. The closure phases use the SNR cut, the amplitudes
    every unflagged row (low-SNR rows as the amplitude statistic treats them).
    """

    mode = "hybrid"

    def __init__(
        self,
        vset,
        model,
        systematic=0.0,
        snr_cut=DEFAULT_SNR_CUT,
        full=False,
        covariance=None,
        amplitude_reference="neighbours",
        closure_average=None,
        scan_gap=None,
        site_distance=None,
        **options,
    ):
        vset = vset.good()
        snr_cut = DEFAULT_SNR_CUT if snr_cut is None else float(snr_cut)
        build = _build_options(closure_average, scan_gap, site_distance)
        super().__init__(
            vset,
            model,
            systematic=systematic,
            snr_cut=snr_cut,
            full=bool(full),
            covariance=covariance,
            amplitude_reference=amplitude_reference,
            **build,
            **options,
        )
        amp = AmplitudeStatistic(vset, model, systematic=systematic, **options)
        cp = ClosurePhaseStatistic(
            vset, model, systematic, snr_cut, full, covariance, amplitude_reference=amplitude_reference, **build
        )
        self._join([amp, cp])
        # the closure phases break the point-reflection symmetry of the amplitudes: keep the
        # amplitudes' notices except the 180-degree one, unless the join is amplitude-only
        self.notices = [n for n in amp.notices if self.amplitude_only or n != REFLECTION_NOTICE]
        self.notices += list(cp.notices)
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
        self.kinds = np.concatenate([np.full(amp.n_data, "visibility_amplitude"), np.full(cp.n_data, "phase")])

    def degeneracies(self):
        return position_degeneracies(self.model, "visibility amplitudes and closure phases")
