"""Component motions across epochs: a linear motion of each component relative to a reference.

Input: fit results of several epochs (the JSON of ``uvfit fit --json``; each records its
observation time, ``observation.time_mean_mjd``). For each component other than the reference,
its offset from the reference at epoch i, r_i = (east, north), has covariance
C_i = C_cc + C_rr - C_cr - C_rc (from the fit's covariance; a fixed parameter contributes 0).
The motion r(t) = r0 + mu (t - t_ref) is fitted by weighted least squares over the epochs with
weights C_i^-1 (generalised least squares; t in Julian years of 365.25 days, t_ref the mean
epoch), parameter covariance (A^T W A)^-1, times chi2 / dof when that exceeds 1 (common practice).

Reported: proper motion |mu| with its position angle (north through east), the ejection epoch
(the time of closest approach to the reference, t_ref - r0 . mu / |mu|^2, zero separation for a
radial motion; given as MJD and as a Julian epoch, Time.jyear) and, with a redshift, the apparent speed

    beta_app = mu D_L / (c (1 + z))

(the relation of the standard texts on superluminal motion, e.g. Lister et al. 2009, AJ 138,
1874), D_L from astropy.cosmology (Planck18 by default). Errors follow by linear propagation.
"""

from __future__ import annotations

import os

import numpy as np

from ..errors import UvfitError
from ..labels import MOTION_CAUTIONS

#: days per Julian year
YEAR_DAYS = 365.25
#: how components are matched across epochs
BY_NAME = "by name"
BY_POSITION = "by nearest position under the fitted motion"


def _epoch(fit: dict, where: str) -> dict:
    """One epoch's positions: {"time_mjd", "names", "position" {c: (e, n)}, "cov" {c: 2x2},
    "cross" {(a, b): 2x2}, "flux" {c: Jy}, "angular_unit"}."""
    from ..show.readback import model_from_fit

    obs = fit.get("observation") or {}
    t = obs.get("time_mean_mjd")
    if not isinstance(t, (int, float)) or not np.isfinite(t):
        raise UvfitError(
            f"{where} records no observation time (observation.time_mean_mjd)",
            "refit that epoch with this version of uvfit, which records it",
        )
    model = model_from_fit(fit, path=where)
    cov_names = list((fit.get("covariance") or {}).get("names") or [])
    matrix = np.asarray((fit.get("covariance") or {}).get("matrix") or np.zeros((0, 0)), dtype=float)
    index = {n: i for i, n in enumerate(cov_names)}

    def block(a, b):
        out = np.zeros((2, 2))
        for i, pa in enumerate(a):
            for j, pb in enumerate(b):
                if pa in index and pb in index:
                    out[i, j] = matrix[index[pa], index[pb]]
        return out

    pos_names = model.position_names()
    fluxes = model.flux_names()
    return {
        "where": where,
        "time_mjd": float(t),
        "angular_unit": fit.get("angular_unit") or model.angular_unit_text,
        "rad_per_unit": model.rad_per_unit,
        "names": list(pos_names),
        "position": {
            c: np.array([model.parameters[e].value, model.parameters[n].value]) for c, (e, n) in pos_names.items()
        },
        "pairs": pos_names,
        "block": block,
        "flux": {c: float(model.parameters[fluxes[c]].value) for c in pos_names},
    }


def relative(ep: dict, comp: str, ref: str) -> tuple[np.ndarray, np.ndarray]:
    """(offset of ``comp`` from ``ref``, its 2 x 2 covariance) at one epoch."""
    c, r = ep["pairs"][comp], ep["pairs"][ref]
    b = ep["block"]
    cov = b(c, c) + b(r, r) - b(c, r) - b(r, c)
    return ep["position"][comp] - ep["position"][ref], cov


def linear_motion(t_years: np.ndarray, r: np.ndarray, cov: np.ndarray) -> dict:
    """Generalised least squares of r_i = r0 + mu t_i: t (n,), r (n, 2), cov (n, 2, 2).

    Returns {"theta": [e0, n0, mu_e, mu_n], "covariance" 4 x 4, "chi2", "dof", "error_scale"}."""
    n = len(t_years)
    a = np.zeros((2 * n, 4))
    a[0::2, 0] = 1.0
    a[1::2, 1] = 1.0
    a[0::2, 2] = t_years
    a[1::2, 3] = t_years
    w = np.zeros((2 * n, 2 * n))
    for i in range(n):  # one 2 x 2 block per epoch (a handful of epochs)
        try:
            w[2 * i : 2 * i + 2, 2 * i : 2 * i + 2] = np.linalg.inv(cov[i])
        except np.linalg.LinAlgError:
            raise UvfitError(
                "a relative position has no error at some epoch (fixed in its fit)",
                "free the component's position in that fit, or choose another reference",
            ) from None
    normal = a.T @ w @ a
    try:
        pcov = np.linalg.inv(normal)
    except np.linalg.LinAlgError:
        raise UvfitError(
            "the epochs do not constrain a motion (all at one time?)", "give epochs at different times"
        ) from None
    y = r.reshape(-1)
    theta = pcov @ (a.T @ w @ y)
    res = y - a @ theta
    chi2 = float(res @ w @ res)
    dof = 2 * n - 4
    scale = float(np.sqrt(chi2 / dof)) if dof > 0 and chi2 > dof else 1.0
    return {"theta": theta, "covariance": pcov * scale**2, "chi2": chi2, "dof": dof, "error_scale": scale}


def _match(epochs: list[dict], ref: str) -> tuple[dict[str, list], str]:
    """{track name: [component name at each epoch or None]} and how they were matched."""
    names = [set(ep["names"]) for ep in epochs]
    if all(s == names[0] for s in names):
        return {c: [c] * len(epochs) for c in epochs[0]["names"] if c != ref}, BY_NAME
    from scipy.optimize import linear_sum_assignment

    first = epochs[0]
    tracks: dict[str, list] = {c: [c] for c in first["names"] if c != ref}
    for k in range(1, len(epochs)):
        ep = epochs[k]
        others = [c for c in ep["names"] if c != ref]
        labels = list(tracks)
        predicted = []
        for label in labels:
            seen = [(epochs[i], c) for i, c in enumerate(tracks[label]) if c is not None]
            t = np.array([(e["time_mjd"] - ep["time_mjd"]) / YEAR_DAYS for e, _ in seen])
            r = np.array([e["position"][c] - e["position"][ref] for e, c in seen])
            if len(seen) >= 2:
                coef = np.polyfit(t, r, 1)
                predicted.append(coef[1])  # at t = 0, this epoch
            else:
                predicted.append(r[-1])
        cost = np.array([[np.hypot(*(ep["position"][c] - ep["position"][ref] - p)) for c in others] for p in predicted])
        rows, cols = linear_sum_assignment(cost) if cost.size else ([], [])
        for label in labels:
            tracks[label].append(None)
        for i, j in zip(rows, cols):
            tracks[labels[i]][-1] = others[j]
    return tracks, BY_POSITION


def _cosmology(name: str):
    import astropy.cosmology as cosmo

    available = list(cosmo.realizations.available)
    if name not in available:
        raise UvfitError(f"cosmology {name!r} is not one of astropy's: {', '.join(available)}")
    return getattr(cosmo, name)


def apparent_speed(mu_rad_per_year: float, redshift: float, cosmology: str = "Planck18") -> tuple[float, float]:
    """(beta_app, D_L in Mpc): mu D_L / (c (1 + z)) for mu in radians per year."""
    import astropy.units as u
    from astropy.constants import c

    d_l = _cosmology(cosmology).luminosity_distance(redshift)
    mu = mu_rad_per_year * u.rad / u.yr
    beta = (mu * d_l / (c * (1.0 + redshift))).to(u.dimensionless_unscaled, equivalencies=u.dimensionless_angles())
    return float(beta.value), float(d_l.to_value(u.Mpc))


def motions(
    fits: list[tuple[str, dict]],
    reference: str | None = None,
    redshift: float | None = None,
    cosmology: str = "Planck18",
) -> dict:
    """The motion record of fits [(path, fit dict), ...] of several epochs (see the module)."""
    import astropy.units as u
    from astropy.time import Time

    if len(fits) < 2:
        raise UvfitError(f"a motion needs fits of at least two epochs (got {len(fits)})", "give one fit per epoch")
    if redshift is not None and not (np.isfinite(redshift) and redshift > 0):
        raise UvfitError(f"redshift must be a positive number (got {redshift!r})")
    if redshift is not None:
        _cosmology(cosmology)
    epochs = sorted((_epoch(fit, where) for where, fit in fits), key=lambda e: e["time_mjd"])
    units = {e["angular_unit"] for e in epochs}
    if len(units) > 1:
        raise UvfitError(
            f"the fits use different angular units ({', '.join(sorted(units))})", "fit every epoch in one unit"
        )
    common = set(epochs[0]["names"]).intersection(*[e["names"] for e in epochs])
    if reference is None:
        if not common:
            raise UvfitError("no component name is in every epoch", "name the reference component (reference)")
        reference = max(sorted(common), key=lambda c: np.mean([e["flux"][c] for e in epochs]))
        ref_how = "the brightest component present in every epoch"
    else:
        missing = [os.path.basename(e["where"]) for e in epochs if reference not in e["names"]]
        if missing:
            raise UvfitError(f"reference {reference!r} is not a component of {', '.join(missing)}")
        ref_how = "given"
    tracks, matched = _match(epochs, reference)
    unit = epochs[0]["angular_unit"]
    mas_per_unit = float((1.0 * u.Unit(unit)).to_value(u.mas))
    t_all = np.array([e["time_mjd"] for e in epochs])
    t_ref = float(np.mean(t_all))
    out_tracks = {}
    notes = []
    for label, members in tracks.items():
        rows = [(e, c) for e, c in zip(epochs, members) if c is not None]
        if len(rows) < 2:
            notes.append(f"{label}: found in {len(rows)} epoch(s), no motion fitted")
            continue
        t = np.array([(e["time_mjd"] - t_ref) / YEAR_DAYS for e, _ in rows])
        rel = [relative(e, c, reference) for e, c in rows]
        r = np.array([x for x, _ in rel])
        cov = np.array([cv for _, cv in rel])
        if all(np.all(cv == 0) for cv in cov):
            notes.append(f"{label}: its position relative to {reference} is fixed in every fit, no motion fitted")
            continue
        fit = linear_motion(t, r, cov)
        e0, n0, me, mn = fit["theta"]
        pc = fit["covariance"]
        mu = float(np.hypot(me, mn))
        j_mu = np.array([0, 0, me / mu, mn / mu]) if mu > 0 else np.zeros(4)
        j_pa = np.array([0, 0, mn, -me]) / mu**2 if mu > 0 else np.zeros(4)
        pa = float(np.degrees(np.arctan2(me, mn))) % 360.0
        # ejection: t_ref - (r0 . mu) / |mu|^2 (years from t_ref)
        dot = e0 * me + n0 * mn
        t_ej = -dot / mu**2 if mu > 0 else np.nan
        j_ej = (
            np.array([-me, -mn, -e0 + 2 * dot * me / mu**2, -n0 + 2 * dot * mn / mu**2]) / mu**2
            if mu > 0
            else np.zeros(4)
        )
        mu_err = float(np.sqrt(j_mu @ pc @ j_mu))
        ej_mjd = t_ref + t_ej * YEAR_DAYS
        entry = {
            "components": [c for _, c in rows],
            "epochs_mjd": [e["time_mjd"] for e, _ in rows],
            "east": r[:, 0].tolist(),
            "north": r[:, 1].tolist(),
            "east_error": np.sqrt(cov[:, 0, 0]).tolist(),
            "north_error": np.sqrt(cov[:, 1, 1]).tolist(),
            "position_at_reference_epoch": {"east": float(e0), "north": float(n0), "unit": unit},
            "velocity": {"east": float(me), "north": float(mn), "unit": f"{unit}/yr"},
            "covariance": {"names": ["east0", "north0", "mu_east", "mu_north"], "matrix": pc.tolist()},
            "proper_motion": {"value": mu * mas_per_unit, "error": mu_err * mas_per_unit, "unit": "mas/yr"},
            "proper_motion_uas_per_yr": {"value": mu * mas_per_unit * 1e3, "error": mu_err * mas_per_unit * 1e3},
            "position_angle": {"value": pa, "error": float(np.degrees(np.sqrt(j_pa @ pc @ j_pa))), "unit": "deg"},
            "ejection_epoch": {
                "mjd": float(ej_mjd),
                "error_days": float(np.sqrt(j_ej @ pc @ j_ej) * YEAR_DAYS),
                "year": float(Time(ej_mjd, format="mjd").jyear) if np.isfinite(ej_mjd) else None,
                "error_years": float(np.sqrt(j_ej @ pc @ j_ej)),
            },
            "chi2": fit["chi2"],
            "dof": fit["dof"],
            "error_scale": fit["error_scale"],
        }
        if redshift is not None:
            mu_rad = mu * epochs[0]["rad_per_unit"]
            beta, d_l = apparent_speed(mu_rad, redshift, cosmology)
            entry["beta_app"] = {"value": beta, "error": beta * mu_err / mu if mu > 0 else np.nan}
            entry["luminosity_distance_mpc"] = d_l
        out_tracks[label] = entry
    return {
        "epochs": [
            {"fit": e["where"], "time_mjd": e["time_mjd"], "time_utc": Time(e["time_mjd"], format="mjd").isot}
            for e in epochs
        ],
        "reference": reference,
        "reference_chosen": ref_how,
        "matched": matched,
        "angular_unit": unit,
        "reference_epoch_mjd": t_ref,
        "time_unit": "Julian year (365.25 d); epochs as Julian epochs (J2000.0 = 2000.0)",
        "redshift": redshift,
        "cosmology": cosmology if redshift is not None else None,
        "components": out_tracks,
        "notes": notes,
        "cautions": list(MOTION_CAUTIONS),
    }
