"""The closure check of any model: how well it reproduces the closure quantities, and the verdict.

Closure quantities do not depend on station-based calibration, so they can test a model fitted in
any mode (Thompson, Moran & Swenson 2017, ch. 10). The chi2 totals use the covariance of
:mod:`uvfit.stats.closures.covariance`; the breakdown per triangle, quadrangle and station uses
each closure's own (diagonal) error.
"""

import numpy as np

from ...labels import CLOSURE_CAUTION
from ..base import row_files
from .build import DEFAULT_SNR_CUT, build_closures, no_closure_error
from .covariance import COVARIANCE_NOTE, check_covariance, whitening


def _model_vis_at_rows(model, vset, rows):
    """Model visibilities at every row of vset (NaN where not needed), computed only at ``rows``."""
    used = np.unique(rows)
    out = np.full(vset.n, np.nan + 0j)
    files = row_files(model, vset)
    out[used] = model.visibilities(
        vset.u[used],
        vset.v[used],
        vset.frequency[used],
        theta=model.get_free(),
        files=None if files is None else files[used],
    )
    return out


def _group_chi2(labels, chi):
    """[{label, n, chi2, reduced_chi2}] over distinct labels, worst (largest reduced chi2) first."""
    if len(labels) == 0:
        return []
    uniq, inv = np.unique(labels, return_inverse=True)
    n = np.bincount(inv, minlength=len(uniq))
    c = np.bincount(inv, weights=chi, minlength=len(uniq))
    rows = [
        {"label": str(l), "n": int(k), "chi2": float(x), "reduced_chi2": float(x / k)} for l, k, x in zip(uniq, n, c)
    ]
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


#: how many expected spreads sqrt(2/n) from 1 a reduced chi2 may lie and still be consistent
SPREADS = 3.0


def _judge(what, chi2, n, full):
    """(state, words) for a chi2 over n closures; state is None (no closures), "consistent",
    "not finite" (no verdict), "high" (more than SPREADS spreads above 1) or "low" (more than SPREADS spreads below 1: the
    errors are overestimated, so the closures can neither support nor reject the model)."""
    if n == 0:
        return None, f"no {what}"
    if chi2 is None or not np.isfinite(chi2):
        # a non-finite statistic is never a verdict: the model or the data cannot be evaluated
        return "not finite", (
            f"{what}: chi2 is {chi2} over {n} -> no verdict: the model's visibilities "
            "vanish or are not finite on some baselines, or the data hold non-finite "
            "values"
        )
    red = chi2 / n
    spread = np.sqrt(2.0 / n)
    text = f"{what}: reduced chi2 {red:.3g} over {n} (expected 1 +/- {spread:.2g})"
    if full:
        text += "; the full set is redundant, so this spread is too small"
    if red > 1 + SPREADS * spread:
        return "high", text + " -> the model does not reproduce them"
    if red < 1 - SPREADS * spread:
        below = (1 - red) / spread
        return "low", text + (
            f" -> {below:.3g} spreads below 1: the errors are overestimated "
            "(too large a systematic floor or thermal sigma)"
        )
    return "consistent", text + " -> consistent"


def check_closures(
    vset,
    model=None,
    systematic=0.0,
    snr_cut=DEFAULT_SNR_CUT,
    full=False,
    covariance=None,
    worst=5,
    amplitude_reference="neighbours",
    closure_average=None,
    scan_gap=None,
    site_distance=None,
):
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
    covariance = check_covariance(covariance, full)
    cs = build_closures(
        vset,
        snr_cut=snr_cut,
        systematic=systematic,
        full=full,
        amplitude_reference=amplitude_reference,
        closure_average=closure_average,
        scan_gap=scan_gap,
        site_distance=site_distance,
    )
    cp, ca = cs["phase"], cs["amplitude"]
    if cp.n == 0:
        raise no_closure_error(vset, "phase", snr_cut)
    used_st = np.unique(np.concatenate([cp.stations.ravel(), ca.stations.ravel()]))
    note = (
        COVARIANCE_NOTE
        if covariance == "diagonal"
        else "linear propagation; full covariance within each snapshot for the chi2 totals "
        "(closures sharing a baseline are correlated), diagonal errors for the per-triangle, "
        "per-quadrangle and per-station breakdown"
    )
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
        "average": cp.average,
        "averaging": cp.note if cp.average is not None else "none: closures per integration",
        "sites_left_out": [list(g) for g in cp.sites],
        "caution": CLOSURE_CAUTION,
        "closures": cs,
    }
    if model is None:
        return out
    mvis = _model_vis_at_rows(model, vset, np.concatenate([cp.used_rows(), ca.used_rows()]))
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
            w, _ = whitening(vset, c)
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
    st_p, t_p = _judge("closure phases", tot["phase"], cp.n, full)
    st_a, t_a = _judge("log closure amplitudes", tot["amplitude"], ca.n, full)
    states = [st for st in (st_p, st_a) if st is not None]
    supported = bool(states) and all(st == "consistent" for st in states)
    out["errors_overestimated"] = "low" in states
    if supported:
        head = "The closure quantities support the fitted structure."
    elif "not finite" in states:
        head = (
            "No verdict: a closure chi2 is not finite, so the model or the data cannot be "
            "evaluated (see the lines below)."
        )
    elif "high" not in states:
        head = (
            "The closure quantities neither support nor reject the fitted structure: their "
            "chi2 is far below what the errors predict, so the errors are overestimated "
            "(lower the systematic floor, or check the thermal sigma, and run the check "
            "again)."
        )
    else:
        head = "The closure quantities do NOT support the fitted structure."
        if out["worst_stations"]:
            w = out["worst_stations"][0]
            head += (
                f" The largest misfit involves station {w['station']} (reduced chi2 "
                f"{w['reduced_chi2']:.3g}): the model may miss structure, the errors may be "
                f"underestimated (try a systematic floor), or that station may carry "
                f"baseline-based errors."
            )
    out["supported"] = supported
    out["verdict"] = " ".join([head, t_p + ";", t_a + "."])
    return out


def json_summary(result):
    """The JSON-safe part of a :func:`check_closures` result (no arrays)."""
    return {k: v for k, v in result.items() if k not in ("closures", "model_values")}
