"""Forecasts: can this array, on this night, tell the true structure from the alternatives?

``forecast(array, true_model, alternatives, observation, trials, ...)``:

1. plans the observation once (tracks, rows, thermal sigmas) and evaluates the true model once;
2. for trial k = 0 .. trials-1 simulates a data set with its own seed (``seed + k``: thermal noise,
   gains and systematic errors drawn from ``numpy.random.default_rng(seed + k)``);
3. fits the true model and every alternative to it with the fitting layer (least squares from the
   model files' starting values, in the chosen statistic mode);
4. counts how often the true structure is **recovered**: every free parameter of the true model
   lies within 3 sigma (the fit's own error) of its true value; and **preferred** over each
   alternative: (a) by BIC (chi2 + k ln n lower for the true model), (b) by the likelihood ratio
   delta chi2 against a nominal threshold: the 99% point of the chi-square distribution with
   |k_true - k_alt| degrees of freedom. When the true model is richer, it is preferred when
   delta chi2 = chi2_alt - chi2_true exceeds the threshold; when it is simpler, when the
   alternative's improvement (-delta chi2) stays below it; with equal numbers of free parameters,
   when delta chi2 > 0 (the higher likelihood). The chi-square reference is only nominal where a
   component's flux can go to zero (a boundary case; see README, cautions): use it as a guide;
5. reports the spread (median, 16th and 84th percentiles over trials) of the derived quantities
   of the true model's fits that describe structure: separations, position angles, flux ratios
   and sizes, next to their true values.

A forecast is only as good as its assumptions: the array file's SEFDs, perfect calibration except
the gain errors asked for, the true model exactly right, no atmosphere. Fits in mode ``complex``
need phase-calibrated data; with station gain errors use a closure mode.
"""

import numpy as np

from .. import __version__
from ..errors import FitError, UvfitError
from ..infer.parallel import run_pieces
from ..labels import FORECAST_CAUTIONS
from .observe import observe, plan

STRUCTURE_SUFFIXES = (".separation", ".position_angle", ".flux_ratio", ".size", ".axis_ratio")
LR_LEVEL = 0.99


def _fit(vset, model, mode, systematic, starts, seed, frequency, options=None):
    from ..infer.derived import derived_quantities
    from ..infer.lsq import fit
    from ..stats.modes import make_statistic

    stat = make_statistic(mode, vset, model.copy(), systematic=systematic, **(options or {}))
    res = fit(stat, starts=starts, seed=seed)
    derived = derived_quantities(res, frequency=frequency, resolved_test=False, limits=False)
    return res, derived


def fitted_free_count(vset, model, mode, systematic, options=None):
    """Free parameters a fit of ``model`` in ``mode`` really has: the model's free parameters less
    those the mode cannot constrain, which the fitter fixes (a closure mode's absolute position
    and flux scale)."""
    from ..infer.lsq import fix_degeneracies
    from ..stats.modes import make_statistic

    stat = make_statistic(mode, vset, model.copy(), systematic=systematic, **(options or {}))
    _, fixed, _ = fix_degeneracies(stat)
    return len(model.free_names) - len(fixed)


def true_structure(model, frequency):
    """Derived structure quantities of the true model itself (no fit)."""
    from ..infer.derived import quantities_at

    values, _, _ = quantities_at(model, model.get_free(), frequency, 0.0)
    return {k: float(v) for k, v in values.items() if k.endswith(STRUCTURE_SUFFIXES)}


def _spread(values):
    x = np.asarray([v for v in values if v is not None and np.isfinite(v)], float)
    if len(x) == 0:
        return {"n": 0, "median": None, "p16": None, "p84": None}
    p16, p50, p84 = np.percentile(x, [16, 50, 84])
    return {"n": int(len(x)), "median": float(p50), "p16": float(p16), "p84": float(p84)}


def _trial(shared, piece):
    """One forecast trial: (the true model's fit, or its failure message; per alternative
    (chi2, BIC) or its failure message). Its noise is seeded by the trial's own seed."""
    layout, model_vis, true_model, alternatives, truth, struct_keys, mode, fit_systematic = shared[:8]
    starts, frequency, options, gain_error, phase_error_deg, systematic = shared[8:]
    _, s = piece
    vset = observe(
        layout, model_vis, seed=s, gain_error=gain_error, phase_error_deg=phase_error_deg, systematic=systematic
    )
    try:
        res, derived = _fit(vset, true_model, mode, fit_systematic, starts, s, frequency, options)
    except FitError as exc:
        return str(exc), []
    pulls = {}
    for name, value in truth.items():
        if name in res.names:
            err = res.error(name)
            pulls[name] = (res.value(name) - value) / err if err > 0 and np.isfinite(err) else float("inf")
    true_fit = {
        "pulls": pulls,
        "recovered": bool(pulls) and all(abs(p) <= 3.0 for p in pulls.values()),
        "structure": {key: float(derived[key]["value"]) for key in struct_keys if key in derived},
        "chi2_true": res.chi2,
        "bic_true": res.bic,
        "n_data": res.n_data,
        "converged": bool(res.converged),
    }
    alt_fits: list = []
    for alt in alternatives:
        try:
            ares, _ = _fit(vset, alt, mode, fit_systematic, starts, s, frequency, options)
        except FitError as exc:
            alt_fits.append(str(exc))
            continue
        alt_fits.append((ares.chi2, ares.bic))
    return true_fit, alt_fits


def forecast(
    array,
    true_model,
    alternatives,
    observation,
    trials,
    mode="complex",
    seed=0,
    gain_error=0.0,
    phase_error_deg=0.0,
    systematic=0.0,
    fit_systematic=None,
    starts=1,
    true_name="true",
    alt_names=None,
    progress=None,
    options=None,
    procs=1,
):
    """Run the forecast (see the module docstring); returns a JSON-ready dictionary.

    ``options``: statistic options of every fit (closure options such as ``snr_cut``).

    ``alternatives``: SkyModel objects; ``fit_systematic``: the systematic fraction the fits use
    (default: the simulated one); ``progress``: called with 1 after each trial; ``options`` go
    to every fit's statistic (e.g. ``gains``, ``gain_interval``, ``gain_prior``). ``procs``:
    processes for the trials (each trial is seeded by its own seed: the numbers do not change).
    """
    from scipy.stats import chi2 as chi2_dist

    trials = int(trials)
    if trials < 1:
        raise UvfitError(f"trials must be at least 1 (got {trials})")
    alternatives = list(alternatives)
    if not alternatives:
        raise UvfitError(
            "forecast needs at least one alternative model (alternatives is empty)",
            "pass one or more alternative models",
        )
    alt_names = list(alt_names) if alt_names else [f"alt{i + 1}" for i in range(len(alternatives))]
    fit_systematic = systematic if fit_systematic is None else fit_systematic
    layout = plan(array, observation)
    t = layout.template
    model_vis = true_model.visibilities(t.u, t.v, t.frequency)
    frequency = float(np.mean(t.frequency))
    truth = {name: float(true_model.parameters[name].value) for name in true_model.free_names}
    true_struct = true_structure(true_model, frequency)
    # free parameters as the fits have them (after the mode fixes what it cannot constrain),
    # counted on the first trial's data (the same simulation as that trial)
    first = observe(
        layout, model_vis, seed=int(seed), gain_error=gain_error, phase_error_deg=phase_error_deg, systematic=systematic
    )
    k_true = fitted_free_count(first, true_model, mode, fit_systematic, options)
    per_trial, struct_values = [], {k: [] for k in true_struct}
    alt_stats = [
        {
            "name": n,
            "free_parameters": fitted_free_count(first, m, mode, fit_systematic, options),
            "bic_preferred": 0,
            "lr_preferred": 0,
            "delta_chi2": [],
            "lr_threshold": None,
            "fit_failures": 0,
        }
        for n, m in zip(alt_names, alternatives)
    ]
    for a in alt_stats:
        dk = abs(k_true - a["free_parameters"])
        a["lr_threshold"] = float(chi2_dist.ppf(LR_LEVEL, dk)) if dk else 0.0
    n_recovered = n_fail_true = 0
    trial_seeds = [int(seed) + k for k in range(trials)]
    shared = (layout, model_vis, true_model, alternatives, truth, list(struct_values), mode, fit_systematic)
    shared += (starts, frequency, options, gain_error, phase_error_deg, systematic)
    done = run_pieces(_trial, list(enumerate(trial_seeds)), shared, procs=procs, progress=progress)
    for (k, s), (true_fit, alt_fits) in zip(enumerate(trial_seeds), done):
        row = {"trial": k, "seed": s}
        if isinstance(true_fit, str):
            n_fail_true += 1
            row["true_fit"] = f"failed: {true_fit}"
            per_trial.append(row)
            continue
        pulls, recovered, struct = true_fit.pop("pulls"), true_fit.pop("recovered"), true_fit.pop("structure")
        n_recovered += recovered
        for key, value in struct.items():
            struct_values[key].append(value)
        row.update({"recovered": recovered, "pulls": pulls, **true_fit})
        row["alternatives"] = {}
        for a, fitted in zip(alt_stats, alt_fits):
            if isinstance(fitted, str):
                a["fit_failures"] += 1
                row["alternatives"][a["name"]] = f"failed: {fitted}"
                continue
            a_chi2, a_bic = fitted
            dchi2 = a_chi2 - true_fit["chi2_true"]
            bic_pref = true_fit["bic_true"] < a_bic
            if k_true > a["free_parameters"]:
                lr_pref = dchi2 > a["lr_threshold"]
            elif k_true < a["free_parameters"]:
                lr_pref = -dchi2 < a["lr_threshold"]
            else:
                lr_pref = dchi2 > 0.0
            a["bic_preferred"] += bool(bic_pref)
            a["lr_preferred"] += bool(lr_pref)
            a["delta_chi2"].append(float(dchi2))
            row["alternatives"][a["name"]] = {
                "chi2": a_chi2,
                "bic": a_bic,
                "delta_chi2": float(dchi2),
                "bic_prefers_true": bool(bic_pref),
                "lr_prefers_true": bool(lr_pref),
            }
        per_trial.append(row)
    alts_out = []
    for a in alt_stats:
        alts_out.append(
            {
                "name": a["name"],
                "free_parameters": a["free_parameters"],
                "true_preferred_bic_fraction": a["bic_preferred"] / trials,
                "true_preferred_lr_fraction": a["lr_preferred"] / trials,
                "lr_threshold_delta_chi2": a["lr_threshold"],
                "lr_level": LR_LEVEL,
                "delta_chi2": _spread(a["delta_chi2"]),
                "fit_failures": a["fit_failures"],
            }
        )

    def _all(flag):
        n = 0
        for row in per_trial:
            alts = row.get("alternatives", {})
            if len(alts) == len(alt_stats) and all(isinstance(v, dict) and v[flag] for v in alts.values()):
                n += 1
        return n / trials

    summary = layout.summary()
    return {
        "version": __version__,
        "seed": int(seed),
        "trial_seeds": trial_seeds,
        "trials": trials,
        "mode": mode,
        "statistic_options": {k: v for k, v in (options or {}).items() if v is not None},
        "true_model": true_name,
        "true_free_parameters": k_true,
        "array": array.name,
        "observation": observation.describe(),
        "corruption": {
            "gain_error": gain_error,
            "phase_error_deg": phase_error_deg,
            "systematic": systematic,
            "fit_systematic": fit_systematic,
        },
        "rows_per_trial": summary["rows"],
        "nominal_resolution_uas": summary["nominal_resolution_uas"],
        "recovered_fraction": n_recovered / trials,
        "recovery_rule": "every free parameter of the true model within 3 sigma of its true value",
        "true_fit_failures": n_fail_true,
        "preferred_bic_fraction": _all("bic_prefers_true"),
        "preferred_lr_fraction": _all("lr_prefers_true"),
        "preference_rule": (
            "true model preferred over every alternative: lower BIC; or "
            f"likelihood ratio against the {LR_LEVEL:.0%} chi-square point"
        ),
        "alternatives": alts_out,
        "structure": {key: {"true": true_struct[key], **_spread(vals)} for key, vals in struct_values.items()},
        "notice": summary["notice"],
        "cautions": list(FORECAST_CAUTIONS),
        "per_trial": per_trial,
    }
