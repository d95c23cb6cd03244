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
from .parallel import check_procs, run_pieces


def _fit_model(
    vset, model, mode, systematic, starts, seed, rescale_errors=False, global_search=False, options=None, procs=1
):
    stat = make_statistic(mode, vset, model.copy(), systematic=systematic, **(options or {}))
    return fit(stat, starts=starts, seed=seed, rescale_errors=rescale_errors, global_search=global_search, procs=procs)


def _refit_on(result, vset_sim, seed, starts):
    """chi2 of a refit of a fitted model on simulated rows (systematic 0: the simulated sigmas
    include it), starting from its best fit."""
    stat = result.statistic.rebuilt(result.model.copy(), vset=vset_sim, systematic=0.0)
    try:
        res = fit(stat, starts=starts, seed=seed, strict=False)
    except FitError:
        return float("nan")
    return res.chi2


def _bootstrap_trial(shared, trial):
    """One bootstrap simulation: (chi2 of the simpler refit, {i: chi2 of richer refit i})."""
    s_res, rich, truth, sigma, seed, bootstrap_starts = shared
    vs = s_res.statistic.vset
    rng = np.random.default_rng([int(seed), trial])
    noise = rng.normal(0.0, sigma) + 1j * rng.normal(0.0, sigma)
    sim = vs.with_vis(truth + noise, sigma=sigma)
    c_simple = _refit_on(s_res, sim, seed, bootstrap_starts)
    return c_simple, {i: _refit_on(res, sim, seed, bootstrap_starts) for i, res in rich.items()}


def _bootstrap(s_res, rich, obs, systematic, bootstrap, seed, bootstrap_starts, progress, procs=1):
    """Parametric bootstrap from the fit ``s_res``: for each richer fit ``rich[i]``, how many of
    ``bootstrap`` simulations reach the observed improvement ``obs[i]``; (exceed, valid, failed).
    Trial k draws its noise from ``default_rng([seed, k])``, so ``procs`` processes give the same
    numbers as one."""
    vs = s_res.statistic.vset
    sigma = effective_sigma(vs.sigma, np.abs(vs.vis), systematic)
    truth = np.asarray(s_res.model.visibilities(vs.u, vs.v, frequency=vs.frequency), complex)
    exceed = {i: 0 for i in rich}
    valid = {i: 0 for i in rich}
    n_failed = 0
    shared = (s_res, rich, truth, sigma, seed, bootstrap_starts)
    done = run_pieces(_bootstrap_trial, range(bootstrap), shared, procs=procs, progress=progress)
    for c_simple, c_rich_all in done:
        for i in rich:
            d = c_simple - c_rich_all[i]
            if not np.isfinite(d):
                n_failed += 1
                continue
            valid[i] += 1
            # a tiny tolerance so that equal fits (richer model collapsed onto the simpler) tie
            if d >= obs[i] - 1e-9 * max(1.0, abs(obs[i])):
                exceed[i] += 1
    return exceed, valid, n_failed


def _pairs(n_free, names, reference):
    """(simpler, richer) index pairs: each model against ``reference`` (an index) when given,
    else each model against the next simpler one (models sorted by free parameters)."""
    if reference is not None:
        return [
            (reference, i) if n_free[i] >= n_free[reference] else (i, reference)
            for i in range(len(n_free))
            if i != reference
        ]
    order = sorted(range(len(n_free)), key=lambda i: (n_free[i], i))
    return [(a, b) for a, b in zip(order, order[1:])]


def _pair_verdict(rows, a, b, alpha):
    ra, rb = rows[a], rows[b]
    lr = float(ra["chi2"] - rb["chi2"])
    extra = rb["n_free"] - ra["n_free"]
    out = {
        "simpler": ra["name"],
        "richer": rb["name"],
        "likelihood_ratio": lr,
        "extra_free_parameters": int(extra),
        "false_alarm_probability": None,
    }
    text = f"'{rb['name']}' against '{ra['name']}': 2 ln LR {lr:.4g} for {extra} more free parameter" + (
        "" if extra == 1 else "s"
    )
    fap = rb.get("_pair_fap", {}).get(a)
    if fap is not None:
        p, n_sim, n_exc = fap
        out.update(false_alarm_probability=p, n_simulations=n_sim, n_exceeding=n_exc)
        if p < alpha or (n_exc == 0 and p <= 0.05):
            text += f", false-alarm probability {_fmt_p(p)} (N = {n_sim}): '{rb['name']}' required"
        else:
            text += f", false-alarm probability {_fmt_p(p)} (N = {n_sim}): '{rb['name']}' not required"
    else:
        pick = rb if rb["bic"] < ra["bic"] else ra
        text += f"; BIC prefers '{pick['name']}'"
    out["verdict"] = text
    return out


def fit_caution(rows, preferred):
    """A caution when the preferred model's reduced chi2 lies more than 3 spreads sqrt(2/dof)
    above 1 (common practice): AIC, BIC and the false-alarm probability assume a model that
    fits, so they are not to be trusted as stated. None when it fits."""
    best = next((r for r in rows if r["name"] == preferred), None)
    if best is None or not best["dof"] or best["dof"] <= 0:
        return None
    red = best["reduced_chi2"]
    if red > 1.0 + 3.0 * np.sqrt(2.0 / best["dof"]):
        return (
            f"the preferred model '{preferred}' has reduced chi2 {red:.3g}, far above 1: AIC, "
            "BIC and the false-alarm probability assume a model that fits the data, so they "
            "are not to be trusted as stated (look for missing structure, or a systematic "
            "floor, before choosing between these models)"
        )
    return None


def compare(
    vset,
    models,
    mode="complex",
    systematic=0.0,
    bootstrap=0,
    seed=0,
    progress=None,
    starts="auto",
    names=None,
    bootstrap_starts=1,
    alpha=0.01,
    rescale_errors=False,
    global_search=False,
    reference=None,
    options=None,
    procs=1,
):
    """Fit every model and compare them; returns a JSON-ready dict (see README, "compare").
    ``options`` go to every model's statistic (closure options such as ``snr_cut``).

    ``models``: SkyModel objects; ``names``: labels for them (default model1, model2...).
    ``bootstrap``: number of simulated data sets for the false-alarm probabilities (0: none).
    ``progress``: called with 1 after each bootstrap trial. ``alpha``: the FAP below which a richer
    model counts as required. ``rescale_errors``, ``global_search``: as for the fit.
    ``reference``: the name of the model every other is judged against (default: the simplest);
    ``pairs`` of the output gives a verdict for each pair (against ``reference``, or each model
    against the next simpler one). ``options`` go to every model's statistic (e.g. ``gains``).
    ``procs``: processes for the bootstrap simulations and the starts (the numbers do not change).
    """
    procs = check_procs(procs)
    models = list(models)
    if len(models) < 2:
        raise UvfitError(f"compare needs at least two models (got {len(models)})", "pass two or more models")
    names = list(names) if names else [f"model{i + 1}" for i in range(len(models))]
    if len(set(names)) != len(names):
        names = [f"{n} ({i + 1})" for i, n in enumerate(names)]
    if reference is not None and reference not in names:
        raise UvfitError(
            f"reference '{reference}' is none of the models ({', '.join(names)})", "give the name of one of the models"
        )
    bootstrap = int(bootstrap or 0)
    if bootstrap < 0:
        raise UvfitError(f"bootstrap must be >= 0 (got {bootstrap})")
    vset = vset.good()
    results = []
    for name, model in zip(names, models):
        try:
            results.append(
                _fit_model(
                    vset,
                    model,
                    mode,
                    systematic,
                    starts,
                    seed,
                    rescale_errors=rescale_errors,
                    global_search=global_search,
                    options=options,
                    procs=procs,
                )
            )
        except FitError as exc:
            raise FitError(f"model '{name}': {exc.message}", exc.hint) from None
    n_free = [r.n_free for r in results]
    simple = int(np.argmin(n_free)) if reference is None else names.index(reference)
    s_res = results[simple]
    rows = []
    for name, r in zip(names, results):
        c = r.chi2
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
                "likelihood_ratio": float(s_res.chi2 - r.chi2),
                "false_alarm_probability": None,
                "notices": list(r.notices),
            }
        )
    richer = [i for i in range(len(results)) if i != simple and n_free[i] > n_free[simple]]
    pairs = _pairs(n_free, names, None if reference is None else simple)
    n_failed = 0
    pair_fap = {}
    if bootstrap > 0:
        by_simpler = {}
        for a, b in pairs:
            if n_free[b] > n_free[a]:
                by_simpler.setdefault(a, set()).add(b)
        if richer:
            by_simpler.setdefault(simple, set()).update(richer)
        for a in sorted(by_simpler, key=lambda i: (i != simple, i)):
            rich = {i: results[i] for i in sorted(by_simpler[a])}
            obs = {i: float(results[a].chi2 - results[i].chi2) for i in rich}
            exceed, valid, failed = _bootstrap(
                results[a],
                rich,
                obs,
                systematic,
                bootstrap,
                seed,
                bootstrap_starts,
                progress if a == simple or not richer else None,
                procs=procs,
            )
            n_failed += failed if a == simple else 0
            for i in rich:
                pair_fap[(a, i)] = ((1.0 + exceed[i]) / (1.0 + valid[i]), valid[i], exceed[i])
        for i in richer:
            p, n_sim, n_exc = pair_fap[(simple, i)]
            rows[i]["false_alarm_probability"] = p
            rows[i]["n_simulations"] = n_sim
            rows[i]["n_exceeding"] = n_exc
    verdict, preferred = _verdict(rows, simple, richer, bootstrap, alpha)
    for (a, b), fap in pair_fap.items():
        rows[b].setdefault("_pair_fap", {})[a] = fap
    pair_rows = [_pair_verdict(rows, a, b, alpha) for a, b in pairs]
    for r in rows:
        r.pop("_pair_fap", None)
    out = {
        "version": __version__,
        "mode": mode,
        "statistic_options": {k: v for k, v in (options or {}).items() if v is not None},
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
        "pairs": pair_rows,
        "rescale_errors": bool(rescale_errors),
        "global_search": bool(global_search),
        "reference": reference,
    }
    caution = fit_caution(rows, preferred)
    if caution:
        out["fit_caution"] = caution
    return out


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
                "probability below 5%; run again with 100 or more bootstrap simulations"
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
        "; no false-alarm probability was computed (ask for bootstrap simulations to calibrate the "
        "likelihood ratio on simulated data)"
    )
    return text + ". " + COMPARE_CAUTION, rows[best]["name"]
