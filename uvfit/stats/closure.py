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

from .base import CombinedStatistic, Statistic
from .closures_build import (COVARIANCE_NOTE, DEFAULT_SNR_CUT, ClosureSet, build_closures,
                             no_closure_error)

__all__ = ["ClosurePhaseStatistic", "LogClosureAmplitudeStatistic", "ClosureStatistic",
           "HybridStatistic", "check_closures", "closure_table", "build_closures", "ClosureSet",
           "DEFAULT_SNR_CUT", "COVARIANCE_NOTE", "CLOSURE_CAUTION"]

#: the caution every closure result carries
CLOSURE_CAUTION = ("Closure quantities are immune to station-based gain errors but not to "
                   "baseline-based errors (e.g. bandpass or polarisation leakage that differ per "
                   "baseline), and they cannot fix the absolute position or the total flux of the "
                   "model. A good closure fit supports the model family fitted; it does not exclude "
                   "other structure the model cannot represent.")


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
class _ClosurePart(Statistic):
    """A statistic on one kind of closure quantity (see the module docstring)."""

    kind = ""
    why = ""

    def __init__(self, vset, model, systematic=0.0, snr_cut=DEFAULT_SNR_CUT, full=False,
                 closures=None, **options):
        super().__init__(vset, model, systematic=systematic, snr_cut=snr_cut, full=full, **options)
        snr_cut = DEFAULT_SNR_CUT if snr_cut is None else float(snr_cut)
        cs = closures if closures is not None else build_closures(
            vset, snr_cut=snr_cut, systematic=systematic, full=full, kinds=(self.kind,))[self.kind]
        if cs.n == 0:
            raise no_closure_error(vset, self.kind, snr_cut)
        self.closures = cs
        self.snr_cut = snr_cut
        self.full = bool(full)
        self.covariance = COVARIANCE_NOTE
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

    def _vis(self, theta):
        return np.asarray(self.model.visibilities(self._u, self._v, self._f, theta=theta))

    def _jac(self, theta):
        return np.asarray(self.model.jacobian(self._u, self._v, self._f, theta=theta))

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
        vis = self._vis(theta)
        jac = self._jac(theta)
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
        vis = self._vis(theta)
        jac = self._jac(theta)
        with np.errstate(divide="ignore", invalid="ignore"):
            dla = (jac / vis[:, None]).real
            la = np.log(np.abs(vis))
        return (np.sum(self._signs * la[self._local], axis=1),
                np.einsum("nk,nkp->np", self._signs, dla[self._local]))


def _pad(a, width=4):
    out = np.full((a.shape[0], width), -1, dtype=int)
    out[:, :a.shape[1]] = a
    return out


class _Joined(CombinedStatistic):
    """A CombinedStatistic that keeps its class (and attributes) when scaled."""

    def scaled(self, factor):
        out = object.__new__(type(self))
        out.__dict__.update(self.__dict__)
        out.parts = [p.scaled(factor) for p in self.parts]
        out.sigma = np.concatenate([p.sigma for p in out.parts])
        return out


class ClosureStatistic(_Joined):
    """Closure phases and log closure amplitudes together (mode "closure").

    Immune to every station-based gain; blind to absolute position and to the total flux.
    With only three stations there are no closure amplitudes and the closure phases are used alone
    (a note says so in ``notes``).
    """

    mode = "closure"

    def __init__(self, vset, model, systematic=0.0, snr_cut=DEFAULT_SNR_CUT, full=False, **options):
        snr_cut = DEFAULT_SNR_CUT if snr_cut is None else float(snr_cut)
        cs = build_closures(vset, snr_cut=snr_cut, systematic=systematic, full=full)
        if cs["phase"].n == 0:
            raise no_closure_error(vset, "phase", snr_cut)
        parts = [ClosurePhaseStatistic(vset, model, systematic, snr_cut, full, closures=cs["phase"])]
        self.notes = []
        if cs["amplitude"].n:
            parts.append(LogClosureAmplitudeStatistic(vset, model, systematic, snr_cut, full,
                                                      closures=cs["amplitude"]))
        else:
            self.notes.append("no closure amplitudes can be formed (fewer than four stations with "
                              "enough SNR at every time): closure phases only")
        super().__init__(parts, mode="closure")
        self.options = dict(snr_cut=snr_cut, full=bool(full), **options)
        self.snr_cut = snr_cut
        self.full = bool(full)
        self.covariance = COVARIANCE_NOTE
        self.closures = cs
        self.row_index = np.vstack([_pad(p.row_index) for p in parts])
        self.station_index = np.vstack([_pad(p.station_index) for p in parts])
        self.labels = np.concatenate([p.labels for p in parts])
        self.kinds = np.concatenate([np.full(p.n_data, p.kind) for p in parts])

    def degeneracies(self):
        why = "closure phases and log closure amplitudes"
        return position_degeneracies(self.model, why) + flux_degeneracies(self.model, why)


class _AmplitudePart(Statistic):
    """Visibility amplitudes |V| with sigma (the noise of either part; high-SNR approximation)."""

    mode = "amplitude"
    wrapped = None

    def __init__(self, vset, model, systematic=0.0, **options):
        super().__init__(vset, model, systematic=systematic, **options)
        use = np.flatnonzero(~vset.flag)
        if use.size == 0:
            vset.good()  # raises the DataError that says why
        self._used = use
        amp = np.abs(vset.vis[use])
        self.data = amp
        self.sigma = np.sqrt(vset.sigma[use] ** 2 + (self.systematic * amp) ** 2)
        self.row_index = use[:, None]
        self._u, self._v, self._f = vset.u[use], vset.v[use], vset.frequency[use]

    def predict(self, theta):
        return np.abs(self.model.visibilities(self._u, self._v, self._f, theta=theta))

    def predict_jacobian(self, theta):
        vis = np.asarray(self.model.visibilities(self._u, self._v, self._f, theta=theta))
        jac = np.asarray(self.model.jacobian(self._u, self._v, self._f, theta=theta))
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
    flux, nothing fixes the absolute position.
    """

    mode = "hybrid"

    def __init__(self, vset, model, systematic=0.0, snr_cut=DEFAULT_SNR_CUT, full=False, **options):
        snr_cut = DEFAULT_SNR_CUT if snr_cut is None else float(snr_cut)
        amp = _amplitude_statistic(vset, model, systematic, **options)
        cp = ClosurePhaseStatistic(vset, model, systematic, snr_cut, full)
        super().__init__([amp, cp], mode="hybrid")
        self.options = dict(snr_cut=snr_cut, full=bool(full), **options)
        self.snr_cut = snr_cut
        self.full = bool(full)
        self.covariance = COVARIANCE_NOTE + " (closure phases); visibility amplitudes independent"
        self.closures = {"phase": cp.closures}
        amp_rows = getattr(amp, "row_index", None)
        if amp_rows is None:
            amp_rows = np.flatnonzero(~vset.flag)[:, None]
        amp_rows = np.asarray(amp_rows).reshape(amp.n_data, -1)
        self.row_index = np.vstack([_pad(amp_rows), _pad(cp.row_index)])
        amp_st = np.full(amp_rows.shape[:1] + (2,), -1)
        ok = amp_rows[:, 0] >= 0
        amp_st[ok, 0] = vset.ant1[amp_rows[ok, 0]]
        amp_st[ok, 1] = vset.ant2[amp_rows[ok, 0]]
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


def check_closures(vset, model=None, systematic=0.0, snr_cut=DEFAULT_SNR_CUT, full=False, worst=5):
    """Counts of the closure quantities of ``vset`` and, with a model, how well the model's closure
    phases and log closure amplitudes match the data (at the model's current parameter values).

    Returns a dict: counts (``n_closure_phases``, ``n_closure_amplitudes``, ``n_triangles``,
    ``n_quadrangles``, ``n_stations``, ``n_snapshots``), settings, ``covariance`` (the diagonal
    approximation), ``caution``; with a model also ``closure_phase_chi2``,
    ``closure_amplitude_chi2``, their reduced values and expected spreads sqrt(2/n),
    ``per_triangle``, ``per_quadrangle``, ``per_station`` (worst first), ``worst_*`` (the first
    ``worst`` of each), ``supported`` (bool) and ``verdict`` (words). Also ``closures``: the
    ClosureSet of each kind and, with a model, ``model_values`` (for tables; not JSON material).
    Raises DataError when no closure phase can be formed.
    """
    snr_cut = DEFAULT_SNR_CUT if snr_cut is None else float(snr_cut)
    cs = build_closures(vset, snr_cut=snr_cut, systematic=systematic, full=full)
    cp, ca = cs["phase"], cs["amplitude"]
    if cp.n == 0:
        raise no_closure_error(vset, "phase", snr_cut)
    used_st = np.unique(np.concatenate([cp.stations.ravel(), ca.stations.ravel()]))
    good = vset.subset(~vset.flag) if vset.n else vset
    out = {
        "n_closure_phases": int(cp.n),
        "n_closure_amplitudes": int(ca.n),
        "n_triangles": int(len(np.unique(cp.labels))),
        "n_quadrangles": int(len(np.unique(ca.labels))) if ca.n else 0,
        "n_stations": int(len(good.station_names)),
        "stations": list(good.station_names),
        "n_stations_in_closures": int(len(used_st)),
        "n_snapshots": int(cp.n_snapshots),
        "set": "full (redundant)" if full else "non-redundant",
        "snr_cut": snr_cut,
        "systematic": float(systematic),
        "covariance": COVARIANCE_NOTE,
        "closure_phase_unit": "deg",
        "closure_amplitude_unit": "natural log",
        "caution": CLOSURE_CAUTION,
        "closures": cs,
    }
    if model is None:
        return out
    mvis = _model_vis_at_rows(model, vset, np.concatenate([cp.rows.ravel(), ca.rows.ravel()]))
    m_cp = cp.evaluate(mvis)
    r_cp = np.angle(np.exp(1j * (cp.value - m_cp))) / cp.sigma
    if ca.n:
        m_ca = ca.evaluate(mvis)
        r_ca = (ca.value - m_ca) / ca.sigma
    else:
        m_ca = np.zeros(0)
        r_ca = np.zeros(0)
    chi_cp, chi_ca = r_cp ** 2, r_ca ** 2
    out["model_values"] = {"phase": m_cp, "amplitude": m_ca}
    out["closure_phase_chi2"] = float(chi_cp.sum())
    out["closure_amplitude_chi2"] = float(chi_ca.sum()) if ca.n else None
    out["closure_phase_reduced_chi2"] = float(chi_cp.mean())
    out["closure_amplitude_reduced_chi2"] = float(chi_ca.mean()) if ca.n else None
    out["closure_phase_expected_spread"] = float(np.sqrt(2.0 / cp.n))
    out["closure_amplitude_expected_spread"] = float(np.sqrt(2.0 / ca.n)) if ca.n else None
    out["per_triangle"] = _group_chi2(cp.labels, chi_cp)
    out["per_quadrangle"] = _group_chi2(ca.labels, chi_ca)
    out["per_station"] = _station_chi2(cp.station_names, [(cp.stations, chi_cp), (ca.stations, chi_ca)])
    out["worst_triangles"] = out["per_triangle"][:worst]
    out["worst_quadrangles"] = out["per_quadrangle"][:worst]
    out["worst_stations"] = out["per_station"][:worst]
    ok_p, t_p = _judge("closure phases", out["closure_phase_chi2"], cp.n, full)
    ok_a, t_a = _judge("log closure amplitudes", out["closure_amplitude_chi2"] or 0.0, ca.n, full)
    supported = bool(ok_p and ok_a is not False)
    if supported:
        head = "The closure quantities support the fitted structure."
    else:
        head = "The closure quantities do NOT support the fitted structure."
        if out["worst_stations"]:
            w = out["worst_stations"][0]
            head += (f" The largest misfit involves station {w['station']} (reduced chi2 "
                     f"{w['reduced_chi2']:.3g}); the model may miss structure, or the errors are "
                     f"underestimated (try a systematic floor), or that station has "
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

