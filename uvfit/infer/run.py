"""Library-side orchestration of a fit: statistic -> least squares -> derived quantities -> a dict.

``run_fit`` returns the very dictionary that ``uvfit fit --json`` writes, so that the batch runner,
the demo and the report can fit without the command line. See README, "fit", for the keys.
"""

import numpy as np

from .. import __version__
from ..labels import FIT_CAUTIONS, unit_text
from ..stats.modes import make_statistic
from .derived import derived_quantities
from .lsq import fit


def parameter_table(result):
    """{name: {"value", "error", "unit", "free", "fixed", "tie"}} for every model parameter."""
    model = result.model
    errors = dict(zip(result.names, result.errors))
    out = {}
    for name, p in model.parameters.items():
        tie = p.tie
        free = name in errors
        if free:
            err = float(errors[name])
        elif tie is not None:
            root = model.root(name)
            err = float(errors.get(root, float("nan")))
        else:
            err = None
        out[name] = {
            "value": float(p.value),
            "error": err,
            "unit": unit_text(p),
            "free": bool(free),
            "fixed": bool(p.fixed),
            "tie": tie,
        }
        note = p.note
        if note:
            out[name]["note"] = note
    return out


def observation_record(vset):
    """Where and when the fitted rows were observed: source, phase centre (deg), times (MJD, UTC)."""
    t = np.asarray(vset.time, dtype=float)
    t = t[np.isfinite(t)]
    rec = {
        "source": str(vset.source),
        "ra_deg": float(vset.ra_deg),
        "dec_deg": float(vset.dec_deg),
        "time_start_mjd": float(t.min()) if t.size else None,
        "time_end_mjd": float(t.max()) if t.size else None,
        "time_mean_mjd": float(t.mean()) if t.size else None,
        "time_mean_utc": None,
        "max_uv_wavelengths": float(np.max(vset.uv_distance)) if vset.n else None,
    }
    if t.size:
        from astropy.time import Time

        rec["time_mean_utc"] = Time(float(t.mean()), format="mjd", scale="utc").isot
    return rec


def result_dict(result, derived=None, mode=None, data_path=None, selection=None, redshift=0.0, frequency=None):
    """The JSON-ready dictionary of a fit (see README, "fit", for the keys)."""
    model = result.model
    stat = result.statistic
    names = list(result.names)
    out = {
        "version": __version__,
        "mode": mode or stat.mode,
        "seed": int(result.seed),
        "data": None if data_path is None else str(data_path),
        "selection": {k: v for k, v in (selection or {}).items()},
        "systematic": float(result.systematic),
        "rescale_errors": bool(result.rescale_errors),
        "error_scale": float(result.error_scale),
        "starts": int(result.starts),
        "starts_requested": getattr(result, "starts_requested", int(result.starts)),
        "global_search": bool(result.global_search),
        "angular_unit": model.angular_unit_text,
        "frequency_hz": frequency,
        "observation": observation_record(stat.vset),
        "redshift": float(redshift or 0.0),
        "parameters": parameter_table(result),
        "derived": derived or {},
        "statistics": {
            "chi2": result.chi2,
            "dof": result.dof,
            "reduced_chi2": result.reduced_chi2,
            "n_data": result.n_data,
            "n_free": result.n_free,
            "aic": result.aic,
            "bic": result.bic,
            "log_likelihood": result.log_likelihood,
            "converged": result.converged,
            "status": result.status,
            "n_evaluations": result.nfev,
        },
        "covariance": {"names": names, "matrix": np.asarray(result.covariance).tolist()},
        "correlation": {"names": names, "matrix": np.asarray(result.correlation).tolist()},
        "per_station": result.per_station,
        "per_baseline": result.per_baseline,
        "fixed_by_fitter": list(result.fixed_by_fitter),
        "unconstrained": list(result.unconstrained),
        "start_chi2": list(result.start_chi2),
        "solutions": list(getattr(result, "solutions", [])),
        "errors_reliable": bool(getattr(result, "errors_reliable", True)),
        "notices": list(result.notices),
        "cautions": list(FIT_CAUTIONS),
        "model_toml": model.to_toml(),
    }
    return out


def run_fit(
    vset,
    model,
    mode="complex",
    systematic=0.0,
    rescale_errors=False,
    starts="auto",
    seed=0,
    global_search=False,
    redshift=0.0,
    progress=None,
    data_path=None,
    selection=None,
    resolved_test=True,
    frequency=None,
    return_result=False,
    max_evaluations=None,
    procs=1,
    **options,
):
    """Fit ``model`` (not changed; a copy is fitted) to ``vset`` in ``mode``; returns the result
    dictionary (and the FitResult too with ``return_result``). ``options`` go to the statistic.

    ``frequency`` (Hz) for the brightness temperatures: default the data's mean frequency.
    ``max_evaluations``: limit of model evaluations per start (default 200 (k + 1)).
    ``procs``: processes for the starts (the numbers do not depend on it).
    """
    work = model.copy()
    stat = make_statistic(mode, vset, work, systematic=systematic, **options)
    result = fit(
        stat,
        starts=starts,
        seed=seed,
        global_search=global_search,
        progress=progress,
        rescale_errors=rescale_errors,
        max_nfev=max_evaluations,
        procs=procs,
    )
    if frequency is None:
        vs = result.statistic.vset
        frequency = float(np.mean(vs.frequency[~vs.flag]))
    derived = derived_quantities(result, redshift=redshift, frequency=frequency, resolved_test=resolved_test)
    out = result_dict(
        result, derived, mode=mode, data_path=data_path, selection=selection, redshift=redshift, frequency=frequency
    )
    gain_record = getattr(result.statistic, "gain_record", None)
    if gain_record is not None:  # station gains solved with the structure (uvfit.stats.gains)
        out["gains"] = gain_record(result.values, result.covariance)
        out["notices"].extend(out["gains"]["notices"])
    return (out, result) if return_result else out
