"""Comparing models fitted to the same data: chi2, AIC, BIC, likelihood ratio, bootstrap FAP.

Against the simplest model (fewest free parameters; the first of those on a tie) each model gets
the likelihood-ratio statistic 2 ln(L_model / L_simplest) = chi2_simplest - chi2_model (for the
Gaussian objective the fit minimises). Its chi-square reference distribution fails when the richer
model reduces to the simpler one on a boundary (a second component's flux going to zero, where its
position means nothing), so the false-alarm probability is calibrated by a parametric bootstrap
(common practice): the simplest best fit is observed N times on the same (u, v) coverage with
complex Gaussian noise of the data's sigmas (the systematic floor included, so the simulated
scatter matches the weights), seeded per trial from ``seed``; both models are refitted from their
best fits and FAP = (1 + #{delta chi2_sim >= delta chi2_obs}) / (1 + N) (Davison & Hinkley 1997,
"Bootstrap Methods and their Application", ch. 4).
"""

import numpy as np

from .. import __version__
from ..errors import FitError, UvfitError
from ..labels import COMPARE_CAUTION
from ..stats.base import effective_sigma
from ..stats.modes import make_statistic
from .lsq import aic, bic, fit


def _fit_model(vset, model, mode, systematic, starts, seed):
    stat = make_statistic(mode, vset, model.copy(), systematic=systematic)
    return fit(stat, starts=starts, seed=seed)


def _refit_on(result, vset_sim, seed, starts):
    """chi2 of a refit of a fitted model on simulated rows (systematic 0: the simulated sigmas
    include it), starting from its best fit."""
    stat = result.statistic.rebuilt(result.model.copy(), vset=vset_sim, systematic=0.0)
    try:
        res = fit(stat, starts=starts, seed=seed, strict=False)
    except FitError:
        return float("nan")
    return res.chi2


def compare(
    vset,
    models,
    mode="complex",
    systematic=0.0,
    bootstrap=0,
    seed=0,
    progress=None,
    starts=1,
    names=None,
    bootstrap_starts=1,
    alpha=0.01,
    rescale_errors=False,
):
    """Fit every model and compare them; returns a JSON-ready dict (see README, "compare").

    ``models``: SkyModel objects; ``names``: labels for them (default model1, model2...).
    ``bootstrap``: number of simulated data sets for the false-alarm probabilities (0: none).
    ``progress``: called with 1 after each bootstrap trial. ``alpha``: the FAP below which a richer
    model counts as required. ``rescale_errors``: every sigma times f = sqrt(chi2/dof) of the
    model with the most free parameters (chi2, AIC, BIC and likelihood ratios divided by f^2; the
    bootstrap noise times f); f is recorded as ``error_scale``.
    """
    models = list(models)
    if len(models) < 2:
        raise UvfitError(f"compare needs at least two models (got {len(models)})", "pass two or more models")
    names = list(names) if names else [f"model{i + 1}" for i in range(len(models))]
    if len(set(names)) != len(names):
        names = [f"{n} ({i + 1})" for i, n in enumerate(names)]
    bootstrap = int(bootstrap or 0)
    if bootstrap < 0:
        raise UvfitError(f"bootstrap must be >= 0 (got {bootstrap})")
    vset = vset.good()
    results = []
    for name, model in zip(names, models):
        try:
            results.append(_fit_model(vset, model, mode, systematic, starts, seed))
        except FitError as exc:
            raise FitError(f"model '{name}': {exc.message}", exc.hint) from None
    n_free = [r.n_free for r in results]
    simple = int(np.argmin(n_free))
    s_res = results[simple]
    f2 = 1.0
    if rescale_errors:
        rich = results[int(np.argmax(n_free))]
        if rich.dof > 0 and rich.chi2 > 0:
            f2 = float(rich.chi2 / rich.dof)
    rows = []
    for name, r in zip(names, results):
        c = r.chi2 / f2
        rows.append(
            {
                "name": name,
                "chi2": c,
                "dof": r.dof,
                "n_free": r.n_free,
                "n_data": r.n_data,
                "reduced_chi2": c / r.dof if r.dof > 0 else float("nan"),
                "aic": aic(c, r.n_free),
                "bic": bic(c, r.n_free, r.n_data),
                "likelihood_ratio": float((s_res.chi2 - r.chi2) / f2),
                "false_alarm_probability": None,
                "notices": list(r.notices),
            }
        )
    richer = [i for i in range(len(results)) if i != simple and n_free[i] > n_free[simple]]
    n_failed = 0
    if bootstrap > 0 and richer:
        sim_stat = s_res.statistic
        vs = sim_stat.vset
        sigma = effective_sigma(vs.sigma, np.abs(vs.vis), systematic) * np.sqrt(f2)
        truth = np.asarray(s_res.model.visibilities(vs.u, vs.v, frequency=vs.frequency), complex)
        obs = {i: rows[i]["likelihood_ratio"] for i in richer}
        exceed = {i: 0 for i in richer}
        valid = {i: 0 for i in richer}
        for trial in range(bootstrap):
            rng = np.random.default_rng([int(seed), trial])
            noise = rng.normal(0.0, sigma) + 1j * rng.normal(0.0, sigma)
            sim = vs.with_vis(truth + noise, sigma=sigma)
            c_simple = _refit_on(s_res, sim, seed, bootstrap_starts)
            for i in richer:
                c_rich = _refit_on(results[i], sim, seed, bootstrap_starts)
                d = c_simple - c_rich
                if not np.isfinite(d):
                    n_failed += 1
                    continue
                valid[i] += 1
                # a tiny tolerance so that equal fits (richer model collapsed onto the simpler) tie
                if d >= obs[i] - 1e-9 * max(1.0, abs(obs[i])):
                    exceed[i] += 1
            if progress:
                progress(1)
        for i in richer:
            rows[i]["false_alarm_probability"] = (1.0 + exceed[i]) / (1.0 + valid[i])
            rows[i]["n_simulations"] = valid[i]
            rows[i]["n_exceeding"] = exceed[i]
    verdict, preferred = _verdict(rows, simple, richer, bootstrap, alpha)
    return {
        "version": __version__,
        "mode": mode,
        "systematic": float(systematic),
        "seed": int(seed),
        "n_bootstrap": bootstrap,
        "n_failed_refits": n_failed,
        "alpha": alpha,
        "simplest": names[simple],
        "models": rows,
        "preferred": preferred,
        "verdict": verdict,
        "caution": COMPARE_CAUTION,
        **({"error_scale": float(np.sqrt(f2))} if rescale_errors else {}),
    }


def _fmt_p(p):
    return f"{100 * p:.2g}%" if p >= 0.001 else f"{100 * p:.1g}%"


def _verdict(rows, simple, richer, bootstrap, alpha):
    s = rows[simple]
    if not richer:
        best = min(range(len(rows)), key=lambda i: rows[i]["bic"])
        text = f"every model has the same number of free parameters; the lowest BIC is '{rows[best]['name']}'"
        return text + ". " + COMPARE_CAUTION, rows[best]["name"]
    if bootstrap > 0:
        required = [
            i
            for i in richer
            if rows[i]["false_alarm_probability"] is not None
            and (
                rows[i]["false_alarm_probability"] < alpha
                or (rows[i].get("n_exceeding") == 0 and rows[i]["false_alarm_probability"] <= 0.05)
            )
        ]
        too_few = [i for i in richer if rows[i].get("n_exceeding") == 0 and i not in required]
        if required:
            best = min(required, key=lambda i: rows[i]["bic"])
            r = rows[best]
            n_sim = r.get("n_simulations", bootstrap)
            fap = r["false_alarm_probability"]
            if r.get("n_exceeding") == 0:
                fap_text = f"at most {_fmt_p(fap)} (no simulation reached the observed improvement"
                fap_text += f"; N = {n_sim} simulations" + (", use more for a tighter bound)" if fap >= alpha else ")")
            else:
                fap_text = f"{_fmt_p(fap)} (N = {n_sim} simulations)"
            text = f"'{r['name']}' preferred over '{s['name']}'; false-alarm probability {fap_text}"
        elif too_few:
            best = simple
            text = (
                "undecided: no simulation reached the improvement of "
                + ", ".join(f"'{rows[i]['name']}'" for i in too_few)
                + f" over '{s['name']}', but N = {bootstrap} simulations cannot show a false-alarm "
                "probability below 5%; run again with --bootstrap 100 or more"
            )
        else:
            faps = ", ".join(
                f"of '{rows[i]['name']}': {_fmt_p(rows[i]['false_alarm_probability'])}"
                for i in richer
                if rows[i]["false_alarm_probability"] is not None
            )
            best = simple
            text = (
                f"the data do not require a richer model than '{s['name']}' (false-alarm "
                f"probability {faps}, N = {bootstrap} simulations)"
            )
        return text + ". " + COMPARE_CAUTION, rows[best]["name"]
    best = min(range(len(rows)), key=lambda i: rows[i]["bic"])
    best_aic = min(range(len(rows)), key=lambda i: rows[i]["aic"])
    text = f"BIC prefers '{rows[best]['name']}'"
    text += ", and so does AIC" if best_aic == best else f", AIC prefers '{rows[best_aic]['name']}'"
    text += (
        "; no false-alarm probability was computed (use --bootstrap N to calibrate the "
        "likelihood ratio on simulated data)"
    )
    return text + ". " + COMPARE_CAUTION, rows[best]["name"]
