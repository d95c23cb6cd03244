"""The task layer: one function per job of uvfit, the same for the commands, the demo and batch.

Each task takes a visibility set (or a path), a model (or a path) and options as keyword
arguments with the defaults of the command of the same name, and returns a result record whose
``to_dict()`` is exactly the JSON that command writes with ``--json``; ``text()`` is the table it
prints (from :mod:`uvfit.show.text`). A task writes nothing, prints nothing and never exits: the
commands parse options, call a task, print and write. Errors are :class:`uvfit.UvfitError` naming
the task's parameters (``max_evaluations``, ``walkers``...), not command-line options.

Tasks: :func:`fit`, :func:`sample`, :func:`compare`, :func:`closures`, :func:`info`,
:func:`simulate`, :func:`forecast`; helpers :func:`load_data` (read plus selection),
:func:`load_model_or_path`, :func:`observation` (an Observation from text such as ``"86GHz"``).
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from typing import Any, Callable, Iterable, Optional, Sequence, TypeGuard, Union, cast

from .data.select import parse_time, read_selected
from .data.visset import VisibilitySet
from .errors import UvfitError
from .infer.parallel import check_procs
from .sky.model import SkyModel

#: a visibility set, or the path of a visibility file
Data = Union[VisibilitySet, str, "os.PathLike[str]"]
#: a sky model, or the path of a model file (TOML)
Model = Union[SkyModel, str, "os.PathLike[str]"]
Progress = Optional[Callable[[int], Any]]


def _is_path(x: Any) -> TypeGuard[str | os.PathLike[str]]:
    return isinstance(x, str) or hasattr(x, "__fspath__")


def _stem(path: Any) -> str:
    return os.path.splitext(os.path.basename(os.fspath(path)))[0]


def load_data(data: Data, selection: Optional[dict] = None, good: bool = True) -> tuple[VisibilitySet, list[str]]:
    """(VisibilitySet, notes): ``data`` read if it is a path, then selected (see
    :func:`uvfit.data.select.read_selected`); with ``good`` only the unflagged rows."""
    return read_selected(data, selection, good=good)


def _stacked(
    data: Sequence[Data], selection: Optional[dict], good: bool = True
) -> tuple[VisibilitySet, list[str], list[str]]:
    """Several files (or sets) read with one selection and stacked (``uvfit.data.stack``):
    (set, notes, labels)."""
    from .data.stack import stack_sets

    if not data:
        raise UvfitError("data is an empty list", "give one data file or several")
    sets, notes, labels = [], [], []
    for k, item in enumerate(data):
        vs, more = load_data(item, selection, good=good)
        sets.append(vs)
        notes += more
        labels.append(os.fspath(item) if _is_path(item) else f"set {k + 1}")
    return stack_sets(sets, labels), notes, labels


def load_model_or_path(model: Model) -> SkyModel:
    """``model`` itself, or the model file it names (:func:`uvfit.load_model`)."""
    if isinstance(model, SkyModel):
        return model
    if _is_path(model):
        from .sky.modelfile import load_model

        return load_model(model)
    raise UvfitError(f"model must be a SkyModel or the path of a model file, not {type(model).__name__}")


def _check_at_least(name: str, value: Optional[int], least: int) -> None:
    if value is not None and value < least:
        raise UvfitError(f"{name} must be at least {least} (got {value})")


def _gain_options(gains: Optional[str], gain_interval: Any = "scan", gain_prior: Any = None) -> dict:
    """The statistic options of station gains (checked), or {} without ``gains``."""
    if gains is None:
        return {}
    from .stats.gains import check_gain_kind, parse_gain_interval, parse_gain_prior

    check_gain_kind(gains)
    parse_gain_interval(gain_interval)
    parse_gain_prior(gain_prior)
    return {"gains": gains, "gain_interval": gain_interval, "gain_prior": gain_prior}


#: the modes that build closures (they take the closure options)
CLOSURE_MODES = ("closure_phase", "closure_amplitude", "closure", "hybrid")


def closure_options(
    mode: str,
    snr_cut: Optional[float] = None,
    closure_average: Union[str, float, None] = None,
    scan_gap: Optional[float] = None,
) -> dict:
    """The closure options given, checked, as statistic options; an error naming the option when
    one is given for a mode that builds no closures. ``snr_cut``: the least SNR of the
    visibilities behind a closure on each baseline (default 3; per integration the reference
    amplitude over sigma, with ``closure_average`` the interval's amplitude over the thermal error
    of its mean visibility); ``closure_average``: "scan" or seconds; ``scan_gap``: seconds."""
    from .data.scans import check_interval, check_scan_gap
    from .stats.closures.build import DEFAULT_SNR_CUT

    given: dict[str, Any] = {"snr_cut": snr_cut, "closure_average": closure_average, "scan_gap": scan_gap}
    given = {k: v for k, v in given.items() if v is not None and v != ""}
    if given and mode not in CLOSURE_MODES:
        raise UvfitError(
            f"{', '.join(given)} applies only to the modes that build closures, not to mode {mode}",
            "use one of the modes " + ", ".join(CLOSURE_MODES) + ", or leave it out",
        )
    if "snr_cut" in given:
        cut = float(given["snr_cut"])
        if not cut >= 0 or cut == float("inf"):
            raise UvfitError(
                f"snr_cut must be a finite number >= 0, not {snr_cut}", f"give e.g. snr_cut {DEFAULT_SNR_CUT:g}"
            )
        given["snr_cut"] = cut
    if "closure_average" in given:
        given["closure_average"] = check_interval(given["closure_average"])
    if "scan_gap" in given:
        given["scan_gap"] = check_scan_gap(given["scan_gap"])
    return given


def _with_site(closure: dict, mode: str, selection: Optional[dict]) -> dict:
    """The closure options plus the selection's ``site_distance`` (which stations form a site, for
    the loops the closures leave out), when given and the mode builds closures."""
    distance = (selection or {}).get("site_distance")
    if distance is not None and mode in CLOSURE_MODES:
        return {**closure, "site_distance": float(distance)}
    return closure


def _given(selection: Optional[dict]) -> dict:
    return {k: v for k, v in (selection or {}).items() if v not in (None, ())}


# --------------------------------------------------------------------------- fit


@dataclass
class FitReport:
    """The result of :func:`fit`: the fit's JSON (``record``) and the objects behind it.

    ``parameters``, ``derived`` and ``statistics`` are the sections of the JSON; ``model`` the
    best-fit SkyModel; ``result`` the least-squares :class:`uvfit.infer.lsq.FitResult`;
    ``notes`` the selection's messages.
    """

    record: dict
    model: SkyModel
    result: Any
    notes: list = field(default_factory=list)

    @property
    def parameters(self) -> dict:
        return self.record["parameters"]

    @property
    def derived(self) -> dict:
        return self.record["derived"]

    @property
    def statistics(self) -> dict:
        return self.record["statistics"]

    @property
    def chi2(self) -> float:
        return float(self.record["statistics"]["chi2"])

    def to_dict(self) -> dict:
        """What ``uvfit fit --json`` writes."""
        return self.record

    def text(self) -> str:
        """The table ``uvfit fit`` prints."""
        from .show.text import fit_text

        return fit_text(self.record)


#: the modes in which parameters separate per file are fitted (the statistics of the others see
#: degeneracies, such as one flux scale per file, that are not yet checked per file)
PER_FILE_MODES = ("complex", "amplitude")


def _per_file_model(sky, labels, data_path, mode, gains, vset=None):
    """The model with one copy per file of its per-file parameters and each file's time for its
    moving positions (``SkyModel.for_files``); the model itself when it declares neither."""
    moving = bool(sky.rate_names())
    if not moving and not any(p.per == "file" for p in sky.parameters.values()):
        return sky
    if mode not in PER_FILE_MODES:
        raise UvfitError(
            f"parameters separate per file and moving positions are fitted in mode {' or '.join(PER_FILE_MODES)} "
            f"only, not {mode!r}",
            f'use `mode={PER_FILE_MODES[0]}`, or share the parameter (remove per = "file", or rate and epoch, in the model file)',
        )
    if gains is not None:
        raise UvfitError(
            "parameters separate per file and moving positions are not fitted together with station gains",
            'leave out `gains`, or share the parameter (remove per = "file", or rate and epoch, in the model file)',
        )
    if labels is None:
        labels = [data_path if data_path is not None else "set 1"]
    times = None
    if moving and vset is not None:
        import numpy as np

        from .data.stack import file_of_rows

        owner = file_of_rows(vset)
        times = [float(np.nanmean(vset.time[owner == k])) if np.any(owner == k) else np.nan for k in range(len(labels))]
    return sky.for_files(labels, times=times)


def _add_per_file_values(out, model):
    """Per-file parameter values and errors into each entry of ``out["files"]`` (and each
    file's mean time, MJD, where the model has moving positions)."""
    table = out["parameters"]
    for entry, time in zip(out["files"], model.file_times or []):
        entry["time_mean_mjd"] = time
    for name, copies in model.per_file_names().items():
        for entry, copy in zip(out["files"], copies):
            rec = table[copy]
            entry.setdefault("parameters", {})[name] = {
                "name": copy,
                "value": rec["value"],
                "error": rec["error"],
                "unit": rec["unit"],
            }


def _joint_data(
    data: Union[Data, Sequence[Data]], selection: Optional[dict], good: bool = True
) -> tuple[VisibilitySet, list[str], Optional[list[str]]]:
    """(set, notes, labels): one file or set read (labels None), or a list of them stacked."""
    if isinstance(data, (list, tuple)):
        return _stacked(data, selection, good=good)
    vset, notes = load_data(cast(Data, data), selection, good=good)
    return vset, notes, None


def _data_record(data_path: Optional[str], labels: Optional[list[str]]) -> Union[str, list[str], None]:
    """What an output records as its data: the list of files of a joint input, else the path."""
    if labels is not None:
        return list(labels)
    return None if data_path is None else str(data_path)


def fit(
    data: Union[Data, Sequence[Data]],
    model: Model,
    mode: str = "complex",
    systematic: float = 0.0,
    rescale_errors: bool = False,
    starts: Union[int, str] = "auto",
    seed: int = 0,
    global_search: bool = False,
    redshift: float = 0.0,
    max_evaluations: Optional[int] = None,
    resolved_test: bool = True,
    selection: Optional[dict] = None,
    progress: Progress = None,
    data_path: Optional[str] = None,
    profile: Optional[str] = None,
    jackknife: Optional[str] = None,
    gains: Optional[str] = None,
    gain_interval: Union[str, float] = "scan",
    gain_prior: Union[str, dict, None] = None,
    snr_cut: Optional[float] = None,
    closure_average: Union[str, float, None] = None,
    scan_gap: Optional[float] = None,
    procs: int = 1,
) -> FitReport:
    """Least-squares fit of ``model`` to ``data``, with errors and derived quantities.

    Parameters
    ----------
    data : VisibilitySet or path, or a list of them
        The visibilities (a file is read; only unflagged rows are used). Several files of one
        source and phase centre are fitted jointly (``uvfit.data.stack.stack_sets``): every
        parameter shared unless the model declares it per file (``per = "file"``, see
        ``SkyModel.for_files``), the statistic the sum over the files, their chi2 (and per-file
        values) in ``files``.
    model : SkyModel or path
        The model (not changed: a copy is fitted), or its TOML file.
    mode : str
        What is fitted: one of ``uvfit.stats.modes.MODES`` (complex, amplitude, closure_phase,
        closure_amplitude, closure, hybrid).
    systematic : float
        Fraction of ``|V|`` added in quadrature to every sigma.
    rescale_errors : bool
        Scale the errors by ``sqrt(chi2 / dof)``.
    starts : int or "auto"
        Number of starts (the model's values, then random ones inside the bounds, or around the
        values where a parameter has no bounds; seeded). "auto" (default): 8 starts, then batches
        of 8 while fewer than 3 starts reach the lowest chi2 (within 0.01) and the last batch
        lowered it, at most 32
        (:func:`uvfit.infer.lsq.fit`). The number used is the JSON's ``starts``.
    seed : int
        Seed of every random step; recorded.
    global_search : bool
        Search chi2 globally inside the bounds first.
    redshift : float
        Source redshift for rest-frame brightness temperatures.
    max_evaluations : int, optional
        Most model evaluations per start (default 200 x (free parameters + 1)).
    resolved_test : bool
        Refit to test whether each component is resolved.
    selection : dict, optional
        Data selection (keys of :func:`uvfit.data.select.apply_selection`); recorded as given.
    progress : callable, optional
        Called with 1 after each start.
    data_path : str, optional
        The data file recorded in the result (default: ``data`` when it is a path).
    profile : str, optional
        A free parameter whose profile likelihood is added (key ``profile``; see :func:`profile`).
    jackknife : {"station", "scan", "channel"}, optional
        Add leave-one-group-out refits (key ``jackknife``; see :func:`jackknife`).
    gains : {"amplitude", "phase", "complex"}, optional
        Solve station gains per interval with the structure (:mod:`uvfit.stats.gains`; mode complex).
    gain_interval : "scan" or float
        One gain per station per scan, or per this many seconds.
    gain_prior : str or dict, optional
        Fractional rms of the amplitude gains, e.g. ``"AA=0.05,*=0.1"`` (flat where not given).
    snr_cut, closure_average, scan_gap : optional
        Closure options of the modes that build closures (see :func:`closure_options`).
    procs : int
        Processes for the starts, the jackknife refits and the profile grid (the numbers do not
        depend on it).

    Returns
    -------
    FitReport
        ``to_dict()`` is the JSON of ``uvfit fit --json``.

    Raises
    ------
    UvfitError
        Bad input (unreadable file, selection leaving nothing, an option out of range), or a fit
        that cannot be made.

    Examples
    --------
    >>> import uvfit
    >>> from uvfit.demo import demo_file
    >>> report = uvfit.fit(demo_file("uvd0917.uvfits"), demo_file("two.toml"), seed=0)
    >>> sorted(report.parameters)[:2]
    ['pair.east', 'pair.flux']
    >>> report.to_dict()["mode"]
    'complex'
    """
    from .infer.run import run_fit

    _check_at_least("max_evaluations", max_evaluations, 1)
    closure = _with_site(closure_options(mode, snr_cut, closure_average, scan_gap), mode, selection)
    sky = load_model_or_path(model)
    labels = None
    if isinstance(data, (list, tuple)):
        vset, notes, labels = _stacked(data, selection)
    else:
        vset, notes = load_data(cast(Data, data), selection)
    if data_path is None and _is_path(data):
        data_path = os.fspath(data)
    sky = _per_file_model(sky, labels, data_path, mode, gains, vset)
    out, result = run_fit(
        vset,
        sky,
        mode=mode,
        systematic=systematic,
        rescale_errors=rescale_errors,
        starts=starts,
        seed=seed,
        global_search=global_search,
        redshift=redshift,
        data_path=data_path,
        selection=selection if selection is not None else {},
        resolved_test=resolved_test,
        max_evaluations=max_evaluations,
        progress=progress,
        return_result=True,
        procs=check_procs(procs),
        **_gain_options(gains, gain_interval, gain_prior),
        **closure,
    )
    if closure:
        out["closure_options"] = closure
    if mode == "complex":
        from .stats.phases import phase_calibration

        check = phase_calibration(vset)
        out["phase_calibration"] = check
        if check.get("calibrated") is False:
            out["notices"].append(check["hint"])
    if _is_path(model):
        out["model_file"] = str(model)
    if vset.meta.get("format") == "ms":  # what was read from a Measurement Set (only then)
        out["read_options"] = {
            "column": vset.meta["ms_column"],
            "field": vset.meta["ms_field"],
            "spw": list(vset.meta["ms_spws_read"]),
        }
    from .infer.fluxscale import annotate as annotate_flux_scale

    annotate_flux_scale(out, result)
    _fit_extras(out, result, profile, jackknife, seed, redshift, procs=procs)
    if labels is not None:
        from .infer.joint import per_file_chi2

        out["data"] = labels
        out["files"] = per_file_chi2(result.statistic, result.statistic.model.get_free(), labels)
        _add_per_file_values(out, result.model)
    return FitReport(record=out, model=result.model, result=result, notes=notes)


# --------------------------------------------------------------------------- sample


@dataclass
class SampleReport:
    """The result of :func:`sample`: the posterior JSON and the :class:`Posterior` behind it."""

    record: dict
    posterior: Any
    notes: list = field(default_factory=list)

    @property
    def parameters(self) -> dict:
        return self.record["parameters"]

    @property
    def converged(self) -> bool:
        return bool(self.record["converged"])

    def to_dict(self) -> dict:
        """What ``uvfit sample --json`` writes."""
        return self.record

    def text(self) -> str:
        """The table ``uvfit sample`` prints."""
        from .show.text import sample_text

        return sample_text(self.posterior.table())


def check_sample_options(
    procs: int = 1, walkers: Optional[int] = None, max_steps: int = 5000, order_by: str = "flux"
) -> None:
    """UvfitError naming the first option of :func:`sample` out of range (checked before any
    work)."""
    _check_at_least("procs", procs, 1)
    _check_at_least("walkers", walkers, 2)
    _check_at_least("max_steps", max_steps, 1)
    if order_by not in ("flux", "distance"):
        raise UvfitError(f"unknown order_by '{order_by}'", "use 'flux' or 'distance'")


def sample(
    data: Union[Data, Sequence[Data]],
    model: Model,
    mode: str = "complex",
    systematic: float = 0.0,
    walkers: Optional[int] = None,
    max_steps: int = 5000,
    seed: int = 0,
    procs: int = 1,
    chain: Optional[str] = None,
    resume: bool = False,
    force: bool = False,
    order_by: str = "flux",
    starts: Union[int, str] = "auto",
    redshift: float = 0.0,
    selection: Optional[dict] = None,
    progress: Progress = None,
    data_path: Optional[str] = None,
    rescale_errors: bool = False,
    gains: Optional[str] = None,
    gain_interval: Union[str, float] = "scan",
    gain_prior: Union[str, dict, None] = None,
    snr_cut: Optional[float] = None,
    closure_average: Union[str, float, None] = None,
    scan_gap: Optional[float] = None,
) -> SampleReport:
    """Posterior of the model's free parameters by ensemble MCMC (emcee), from the best fit.

    Parameters
    ----------
    data : VisibilitySet or path, or a list of them
        The visibilities; several files are stacked and fitted jointly, as in :func:`fit`.
    model : SkyModel or path
        The model (not changed), or its TOML file; priors are the model's.
    mode, systematic, starts, redshift, seed, gains, gain_interval, gain_prior
        As for :func:`fit`; with ``gains`` the likelihood is marginalised over the gains of each
        interval (Laplace approximation, :mod:`uvfit.stats.gains`).
    walkers : int, optional
        Number of walkers (default max(32, 4 x free parameters)).
    max_steps : int
        Longest chain (steps per walker, counting steps already in a resumed chain).
    procs : int
        Processes evaluating the walkers.
    chain : str, optional
        HDF5 file keeping the chain (needed to resume).
    resume : bool
        Continue the chain in ``chain`` where it stopped.
    force : bool
        Overwrite an existing chain file.
    order_by : {"flux", "distance"}
        How components of the same shape are labelled in every sample.
    selection : dict, optional
        Data selection; the given entries are recorded.
    progress : callable, optional
        Called with the number of steps done so far.
    data_path : str, optional
        The data file recorded (default: ``data`` when it is a path).
    rescale_errors : bool
        Multiply every sigma by sqrt(chi2/dof) of the least-squares fit first (recorded as
        ``error_scale``).
    snr_cut, closure_average, scan_gap : optional
        Closure options (see :func:`closure_options`).

    Returns
    -------
    SampleReport
        ``to_dict()`` is the JSON of ``uvfit sample --json``.

    Raises
    ------
    UvfitError
        Bad input or options out of range (named by parameter), a chain file that cannot be used.

    Examples
    --------
    >>> import uvfit
    >>> from uvfit.demo import demo_file
    >>> report = uvfit.sample(demo_file("uvd0917.uvfits"), demo_file("two.toml"), max_steps=20)
    >>> report.to_dict()["n_steps"]
    20
    """
    from .infer.sampling import sample as run_sample

    check_sample_options(procs=procs, walkers=walkers, max_steps=max_steps, order_by=order_by)
    closure = _with_site(closure_options(mode, snr_cut, closure_average, scan_gap), mode, selection)
    vset, notes, labels = _joint_data(data, selection)
    sky = load_model_or_path(model)
    if data_path is None and _is_path(data):
        data_path = os.fspath(data)
    sky = _per_file_model(sky, labels, data_path, mode, gains, vset)
    post = run_sample(
        vset,
        sky,
        mode=mode,
        systematic=systematic,
        n_walkers=walkers,
        max_steps=max_steps,
        seed=seed,
        procs=procs,
        chain_path=chain,
        resume=resume,
        force=force,
        order_by=order_by,
        progress=progress,
        starts=starts,
        redshift=redshift,
        data_path=data_path,
        **({"rescale_errors": True} if rescale_errors else {}),
        **_gain_options(gains, gain_interval, gain_prior),
        **closure,
    )
    out = post.to_dict()
    out["selection"] = _given(selection)
    if labels is not None:
        out["data"] = list(labels)
    if closure:
        out["closure_options"] = closure
    return SampleReport(record=out, posterior=post, notes=notes)


# --------------------------------------------------------------------------- compare


@dataclass
class CompareReport:
    """The result of :func:`compare`: the comparison JSON."""

    record: dict
    notes: list = field(default_factory=list)

    @property
    def preferred(self) -> Optional[str]:
        return self.record.get("preferred")

    @property
    def verdict(self) -> str:
        return self.record["verdict"]

    def to_dict(self) -> dict:
        """What ``uvfit compare --json`` writes."""
        return self.record

    def text(self) -> str:
        """The table ``uvfit compare`` prints."""
        from .show.text import compare_text

        return compare_text(self.record)


def compare(
    data: Union[Data, Sequence[Data]],
    models: Sequence[Model],
    mode: str = "complex",
    systematic: float = 0.0,
    starts: Union[int, str] = "auto",
    bootstrap: int = 0,
    seed: int = 0,
    names: Optional[Sequence[str]] = None,
    selection: Optional[dict] = None,
    progress: Progress = None,
    data_path: Optional[str] = None,
    rescale_errors: bool = False,
    global_search: bool = False,
    reference: Optional[str] = None,
    gains: Optional[str] = None,
    gain_interval: Union[str, float] = "scan",
    gain_prior: Union[str, dict, None] = None,
    snr_cut: Optional[float] = None,
    closure_average: Union[str, float, None] = None,
    scan_gap: Optional[float] = None,
    procs: int = 1,
) -> CompareReport:
    """Fit two or more models to the same data and say whether the richer ones are required.

    Parameters
    ----------
    data : VisibilitySet or path, or a list of them
        The visibilities; several files are stacked and fitted jointly, as in :func:`fit`.
    models : sequence of SkyModel or path
        Two or more models.
    mode, systematic, starts, seed, gains, gain_interval, gain_prior
        As for :func:`fit`.
    bootstrap : int
        Simulated data sets for the false-alarm probability of each richer model (0: none).
    names : sequence of str, optional
        Labels of the models (default: the files' stems, or model1, model2, ...).
    selection : dict, optional
        Data selection; recorded as given.
    progress : callable, optional
        Called with 1 after each bootstrap simulation.
    procs : int
        Processes for the starts and the bootstrap simulations (the numbers do not depend on it).
    data_path : str, optional
        The data file recorded (default: ``data`` when it is a path).
    rescale_errors, global_search : bool
        As for :func:`fit`, in every model's fit.
    reference : str, optional
        The name of the model every other is judged against (default: the simplest); the
        ``pairs`` of the JSON then pair each model with it (else each with the next simpler one).
    snr_cut, closure_average, scan_gap : optional
        Closure options (see :func:`closure_options`).

    Returns
    -------
    CompareReport
        ``to_dict()`` is the JSON of ``uvfit compare --json``.

    Raises
    ------
    UvfitError
        Fewer than two models, ``bootstrap`` negative, a fit that cannot be made.

    Examples
    --------
    >>> import uvfit
    >>> from uvfit.demo import demo_file
    >>> report = uvfit.compare(demo_file("uvd0917.uvfits"),
    ...                        [demo_file("one.toml"), demo_file("two.toml")])
    >>> [row["name"] for row in report.to_dict()["models"]]
    ['one', 'two']
    """
    from .infer.compare import compare as run_compare

    models = list(models)
    if len(models) < 2:
        raise UvfitError(f"compare needs at least two models (got {len(models)})", "pass two or more models")
    if names is None and all(_is_path(m) for m in models):
        names = [_stem(m) for m in models]
    closure = _with_site(closure_options(mode, snr_cut, closure_average, scan_gap), mode, selection)
    vset, notes, labels = _joint_data(data, selection)
    if data_path is None and _is_path(data):
        data_path = os.fspath(data)
    skies = [_per_file_model(load_model_or_path(m), labels, data_path, mode, gains, vset) for m in models]
    out = run_compare(
        vset,
        skies,
        mode=mode,
        systematic=systematic,
        bootstrap=bootstrap,
        seed=seed,
        progress=progress,
        starts=starts,
        names=names,
        rescale_errors=rescale_errors,
        global_search=global_search,
        reference=reference,
        options={**_gain_options(gains, gain_interval, gain_prior), **closure},
        procs=procs,
    )
    if closure:
        out["closure_options"] = closure
    out["data"] = _data_record(data_path, labels)
    out["selection"] = selection if selection is not None else {}
    out["model_files"] = [str(m) if _is_path(m) else None for m in models]
    return CompareReport(record=out, notes=notes)


# --------------------------------------------------------------------------- closures


@dataclass
class ClosureReport:
    """The result of :func:`closures`: the closure check (``result``, with arrays) and its JSON."""

    record: dict
    result: dict
    notes: list = field(default_factory=list)

    @property
    def supported(self) -> Optional[bool]:
        return self.result.get("supported")

    def to_dict(self) -> dict:
        """What ``uvfit closures --json`` writes."""
        return self.record

    def table(self):
        """Every closure quantity as an astropy Table (what ``--table`` writes)."""
        from .stats.closures import closure_table

        return closure_table(self.result)

    def text(self) -> str:
        """The table ``uvfit closures`` prints."""
        from .show.text import closures_text

        return closures_text(self.result)


def closures(
    data: Union[Data, Sequence[Data]],
    model: Union[Model, dict, None] = None,
    systematic: Optional[float] = None,
    snr_cut: Optional[float] = None,
    full: bool = False,
    covariance: Optional[str] = None,
    selection: Optional[dict] = None,
    data_path: Optional[str] = None,
    model_path: Optional[str] = None,
    closure_average: Union[str, float, None] = None,
    scan_gap: Optional[float] = None,
) -> ClosureReport:
    """Closure phases and log closure amplitudes of the data; with a model, how well it fits them.

    Parameters
    ----------
    data : VisibilitySet or path, or a list of them
        The visibilities; several files are stacked and fitted jointly, as in :func:`fit`.
    model : SkyModel, path, fit dict or None
        A model, a model file (.toml), a fit result (.json written by ``fit``, or its dict: the
        fitted model is used), or None for the counts only.
    systematic : float, optional
        Fraction of ``|V|`` added in quadrature to each sigma (default 0, or the fit's value when
        ``model`` is a fit result).
    snr_cut : float, optional
        The least SNR of the visibilities behind a closure on each baseline (default 3; see
        :func:`closure_options`).
    full : bool
        Every triangle and quadrangle instead of a non-redundant set per snapshot.
    covariance : {"snapshot", "diagonal"}, optional
        Errors of the chi2 totals (default: snapshot for the non-redundant set).
    selection : dict, optional
        Data selection; the given entries are recorded.
    data_path, model_path : str, optional
        What is recorded as the data and the model (default: the paths given).
    closure_average, scan_gap : optional
        Closures averaged over scans or intervals (see :func:`closure_options`); a fit result's
        recorded closure options are used when none is given.

    Returns
    -------
    ClosureReport
        ``to_dict()`` is the JSON of ``uvfit closures --json``; ``table()`` the ECSV table.

    Raises
    ------
    UvfitError
        No closure can be formed, or bad input.

    Examples
    --------
    >>> import uvfit
    >>> from uvfit.demo import demo_file
    >>> report = uvfit.closures(demo_file("uvd0917.uvfits"), demo_file("two.toml"))
    >>> report.to_dict()["n_closure_phases"] > 0
    True
    """
    from .show.readback import load_model_or_fit, merged_selection, model_from_fit
    from .stats.closures import check_closures, json_summary

    sky, info, fit_doc = None, {}, None
    if isinstance(model, dict):
        fit_doc = model
        sky = model_from_fit(model)
        info = {"model_from": "fit result", "fit_mode": model.get("mode"), "fit_systematic": model.get("systematic")}
    elif isinstance(model, SkyModel):
        sky, info = model, {"model_from": "model"}
    elif model is not None:
        sky, info = load_model_or_fit(model)
        fit_doc = info.pop("fit", None)
        if model_path is None:
            model_path = os.fspath(model)
    used_note = None
    if fit_doc is not None:
        # the fit's recorded selection and floor, each overridden by what the caller gave
        given = _given(selection)
        selection = merged_selection(fit_doc, given)
        from_fit = sorted(k for k in selection if k not in given)
        floor_from = "the fit" if systematic is None else "given"
        if systematic is None:
            systematic = float(info.get("fit_systematic") or 0.0)
        info["selection_from_fit"] = from_fit
        info["systematic_from"] = floor_from
        shown = ", ".join(f"{k}={selection[k]}" for k in sorted(selection)) or "none"
        origin = ("from the fit: " + ", ".join(from_fit)) if from_fit else "none from the fit"
        used_note = f"note: selection used: {shown} ({origin}); systematic floor {systematic:g} ({floor_from})"
    vset, notes, labels = _joint_data(data, selection)
    if sky is not None:
        sky = _per_file_model(sky, labels, data_path, "complex", None, vset)
    if used_note:
        notes = [used_note] + list(notes)
    if systematic is None:
        systematic = float(info.get("fit_systematic") or 0.0)
    closure = closure_options("closure", snr_cut, closure_average, scan_gap)
    if fit_doc is not None and not closure and fit_doc.get("closure_options"):
        recorded = dict(fit_doc["closure_options"])
        site = recorded.pop("site_distance", None)
        closure = closure_options(
            "closure", **{k: v for k, v in recorded.items() if k in ("snr_cut", "closure_average", "scan_gap")}
        )
        if site is not None:
            closure["site_distance"] = float(site)
        info["closure_options_from"] = "the fit"
    closure = _with_site(closure, "closure", selection)
    res = check_closures(vset, sky, systematic=systematic, full=full, covariance=covariance, **closure)
    if data_path is None and _is_path(data):
        data_path = os.fspath(data)
    summary = json_summary(res)
    summary.update(
        {
            "data": _data_record(data_path, labels),
            "model": model_path,
            **info,
            "selection": {k: v for k, v in (selection or {}).items() if v not in (None, (), "")},
        }
    )
    return ClosureReport(record=summary, result=res, notes=notes)


# --------------------------------------------------------------------------- info


@dataclass
class InfoReport:
    """The result of :func:`info`: the data summary (JSON) and the selected set."""

    record: dict
    vset: VisibilitySet
    notes: list = field(default_factory=list)

    def to_dict(self) -> dict:
        """What ``uvfit info --json`` writes."""
        return self.record

    def text(self) -> str:
        """The table ``uvfit info`` prints."""
        from .show.text import info_text

        return info_text(self.record)


def summarise(vset: VisibilitySet) -> dict:
    """The summary dictionary of ``info`` (VisibilitySet.summary plus a few file facts)."""
    s = vset.summary()
    s["stokes"] = vset.meta.get("stokes_i_from", "I")
    s["file_format"] = vset.meta.get("format")
    for key in (
        "note_single_hand",
        "note_weights",
        "note_stations",
        "selection_notes",
        "orientation",
        "n_autocorrelation_rows_flagged",
    ):
        if key in vset.meta:
            s[key] = vset.meta[key]
    if vset.meta.get("format") == "ms":
        from .data.ms import add_ms_summary

        add_ms_summary(vset, s)
    return s


def info(
    data: Data,
    selection: Optional[dict] = None,
    data_path: Optional[str] = None,
    scan_gap: Optional[float] = None,
    site_distance: Optional[float] = None,
) -> InfoReport:
    """What a visibility file holds: source, frequencies, stations, times, uv coverage, resolution,
    the scans, the sites (stations closer than ``site_distance`` m, default 5000) and whether the
    phases look calibrated.

    Parameters
    ----------
    data : VisibilitySet or path
        The visibilities (flagged rows are counted, not dropped).
    selection : dict, optional
        Data selection applied first.
    data_path : str, optional
        The path recorded (default: ``data`` when it is a path).
    scan_gap : float, optional
        Seconds: a longer gap in time starts a new scan (:mod:`uvfit.data.scans`).
    site_distance : float, optional
        Metres: closer stations form one site (:mod:`uvfit.data.sites`).

    Returns
    -------
    InfoReport
        ``to_dict()`` is the JSON of ``uvfit info --json``.

    Raises
    ------
    UvfitError
        Unreadable file, or a selection that leaves no usable row.

    Examples
    --------
    >>> import uvfit
    >>> from uvfit.demo import demo_file
    >>> uvfit.tasks.info(demo_file("uvd0917.uvfits")).to_dict()["source"]
    'UVD 0917+224'
    """
    from .data.scans import scan_structure
    from .data.sites import find_sites
    from .stats.phases import phase_calibration

    vset, notes = load_data(data, selection, good=False)
    s = summarise(vset)
    s["scan_structure"] = scan_structure(vset, scan_gap)
    sites = find_sites(vset, site_distance).to_dict()
    if sites["all_one_site"]:
        sites["pairs"] = []  # every pair: not worth listing
    s["sites"] = sites
    s["phase_calibration"] = phase_calibration(vset)
    if data_path is None and _is_path(data):
        data_path = os.fspath(data)
    s["path"] = None if data_path is None else str(data_path)
    return InfoReport(record=s, vset=vset, notes=notes)


# --------------------------------------------------------------------------- simulate, forecast


def observation(
    ra: Union[str, float],
    dec: Union[str, float],
    start: Any,
    duration: Any,
    frequency: Any,
    integration: Any = "30s",
    bandwidth: Any = "1GHz",
    channels: int = 1,
    scan_length: Any = "5min",
    source: str = "SIM",
):
    """An :class:`uvfit.sim.observe.Observation` from values as users type them.

    Angles as astropy forms (``"12h30m49.4s"``, ``"+12d23m28s"``; a bare number is degrees),
    ``start`` an ISO UTC time or MJD, durations such as ``"12h"`` or ``"30s"``, frequencies such as
    ``"86GHz"``. Raises UvfitError naming the parameter that cannot be read.

    Examples
    --------
    >>> from uvfit.tasks import observation
    >>> observation("12h", "+20d", "2027-03-01T02:00", "2h", "22GHz").frequency_hz
    22000000000.0
    """
    from .sim.observe import Observation
    from .sim.options import parse_angle, parse_duration, parse_frequency

    ra_deg = parse_angle(str(ra), "right ascension", colon_unit="hourangle")
    dec_deg = parse_angle(str(dec), "declination", colon_unit="deg")
    if not -90 <= dec_deg <= 90:
        raise UvfitError(f"the declination {dec} is outside -90..+90 degrees")
    obs = Observation(
        ra_deg=ra_deg % 360.0,
        dec_deg=dec_deg,
        start=start if hasattr(start, "mjd") else parse_time(start),
        duration_s=parse_duration(str(duration), "duration"),
        integration_s=parse_duration(str(integration), "integration time"),
        frequency_hz=parse_frequency(str(frequency), "frequency"),
        bandwidth_hz=parse_frequency(str(bandwidth), "bandwidth"),
        channels=channels,
        scan_length_s=parse_duration(str(scan_length), "scan length"),
        source=source,
    )
    obs.check()
    return obs


def _array(array: Any):
    from .sim.array import Array, load_array

    return array if isinstance(array, Array) else load_array(array)


@dataclass
class SimulationReport:
    """The result of :func:`simulate`: the simulated set, the layout and the summary (JSON)."""

    record: dict
    vset: VisibilitySet
    layout: Any
    observation: Any

    @property
    def notice(self) -> Optional[str]:
        return self.record.get("notice")

    def to_dict(self) -> dict:
        """What ``uvfit simulate --json`` writes."""
        return self.record

    def text(self) -> str:
        """The summary ``uvfit simulate`` prints."""
        from .show.text import simulation_text

        return simulation_text(self.record, self.observation)


def simulate(
    array: Any,
    model: Model,
    observation: Any,
    seed: int = 0,
    noise: bool = True,
    gain_error: float = 0.0,
    phase_error: float = 0.0,
    systematic: float = 0.0,
    output: Optional[str] = None,
    model_path: Optional[str] = None,
) -> SimulationReport:
    """A sky model observed by an array: Earth-rotation (u, v), thermal noise, gain errors.

    Parameters
    ----------
    array : Array or path
        The array (an array file, TOML).
    model : SkyModel or path
        The sky model.
    observation : Observation
        What is observed and when (see :func:`observation`).
    seed : int
        Seed of the noise and gains; recorded.
    noise : bool
        Add thermal noise (the sigmas are set either way).
    gain_error : float
        Station gain amplitude scatter per scan (fraction, rms).
    phase_error : float
        Station phase error per scan (degrees, rms).
    systematic : float
        Extra error per visibility, a fraction of its amplitude.
    output : str, optional
        The file the caller will write the set to (recorded only; write with
        :func:`uvfit.sim.observe.write_simulation`).
    model_path : str, optional
        The model recorded (default: ``model`` when it is a path).

    Returns
    -------
    SimulationReport
        ``vset`` the simulated VisibilitySet; ``to_dict()`` the JSON of ``uvfit simulate --json``.

    Raises
    ------
    UvfitError
        Unreadable array or model, an impossible observation or corruption.

    Examples
    --------
    >>> import uvfit
    >>> from uvfit.demo import demo_file
    >>> from uvfit.tasks import observation
    >>> obs = observation("9h17m12s", "+22d24m", "2027-03-01T02:00", "1h", "22.2GHz",
    ...                   integration="600s")
    >>> from uvfit.sim.array import parse_array
    >>> array = parse_array({"name": "three invented stations", "station": [
    ...     {"name": "P1", "lat": 50.0, "lon": 5.0, "height": 300.0, "sefd": 700.0},
    ...     {"name": "P2", "lat": 46.0, "lon": 12.0, "height": 500.0, "sefd": 700.0},
    ...     {"name": "P3", "lat": 41.0, "lon": -3.0, "height": 600.0, "sefd": 700.0}]})
    >>> rep = uvfit.simulate(array, demo_file("two.toml"), obs, seed=1)
    >>> rep.vset.n == rep.to_dict()["rows"]
    True
    """
    from .sim.noise import check_corruption
    from .sim.observe import simulate as run_simulate

    corruption = {"gain_error": gain_error, "phase_error_deg": phase_error, "systematic": systematic}
    check_corruption(**corruption)
    arr = _array(array)
    sky = load_model_or_path(model)
    vset, layout = run_simulate(arr, sky, observation, seed=seed, thermal=noise, **corruption)
    if model_path is None and _is_path(model):
        model_path = os.fspath(model)
    summary = layout.summary()
    summary.update({"seed": seed, "output": output, "model": model_path, **corruption})
    summary["observation"] = observation.describe()
    return SimulationReport(record=summary, vset=vset, layout=layout, observation=observation)


@dataclass
class ForecastReport:
    """The result of :func:`forecast`: the forecast's JSON."""

    record: dict

    @property
    def recovered_fraction(self) -> float:
        return float(self.record["recovered_fraction"])

    @property
    def notice(self) -> Optional[str]:
        return self.record.get("notice")

    def to_dict(self) -> dict:
        """What ``uvfit forecast --json`` writes."""
        return self.record

    def text(self) -> str:
        """The summary ``uvfit forecast`` prints."""
        from .show.text import forecast_text

        return forecast_text(self.record)


def check_forecast_options(trials: int = 20) -> None:
    """UvfitError when ``trials`` is below 1 (checked before any work)."""
    _check_at_least("trials", int(trials), 1)


def forecast(
    array: Any,
    true_model: Model,
    alternatives: Iterable[Model],
    observation: Any,
    trials: int = 20,
    mode: str = "complex",
    starts: int = 1,
    seed: int = 0,
    gain_error: float = 0.0,
    phase_error: float = 0.0,
    systematic: float = 0.0,
    true_name: Optional[str] = None,
    alt_names: Optional[Sequence[str]] = None,
    progress: Progress = None,
    gains: Optional[str] = None,
    gain_interval: Union[str, float] = "scan",
    gain_prior: Union[str, dict, None] = None,
    snr_cut: Optional[float] = None,
    closure_average: Union[str, float, None] = None,
    scan_gap: Optional[float] = None,
    procs: int = 1,
) -> ForecastReport:
    """Repeated simulations and fits: can the array tell the true model from the alternatives?

    Parameters
    ----------
    array : Array or path
        The array.
    true_model : SkyModel or path
        The model simulated (and fitted).
    alternatives : sequence of SkyModel or path
        Models fitted to each simulation besides the true one.
    observation : Observation
        See :func:`observation`.
    trials : int
        Number of simulated data sets (trial k uses seed ``seed + k``).
    mode : str
        Statistic of the fits.
    gains, gain_interval, gain_prior
        Station gains solved in every fit, as for :func:`fit`.
    starts : int
        Fit starts per model and trial.
    seed, gain_error, phase_error, systematic
        As for :func:`simulate`.
    true_name, alt_names : optional
        Labels (default: the files' stems, or true, alt1, ...).
    progress : callable, optional
        Called with 1 after each trial.
    procs : int
        Processes for the trials (each seeded by its own seed: the numbers do not depend on it).
    snr_cut, closure_average, scan_gap : optional
        Closure options of the fits (see :func:`closure_options`).

    Returns
    -------
    ForecastReport
        ``to_dict()`` is the JSON of ``uvfit forecast --json``.

    Raises
    ------
    UvfitError
        ``trials`` below 1, no alternative, bad input.

    Examples
    --------
    >>> import uvfit
    >>> from uvfit.demo import demo_file
    >>> from uvfit.tasks import observation
    >>> obs = observation("9h17m12s", "+22d24m", "2027-03-01T02:00", "1h", "22.2GHz",
    ...                   integration="900s")
    >>> from uvfit.sim.array import parse_array
    >>> array = parse_array({"name": "three invented stations", "station": [
    ...     {"name": "P1", "lat": 50.0, "lon": 5.0, "height": 300.0, "sefd": 700.0},
    ...     {"name": "P2", "lat": 46.0, "lon": 12.0, "height": 500.0, "sefd": 700.0},
    ...     {"name": "P3", "lat": 41.0, "lon": -3.0, "height": 600.0, "sefd": 700.0}]})
    >>> rep = uvfit.forecast(array, demo_file("two.toml"),
    ...                      [demo_file("one.toml")], obs, trials=1)
    >>> rep.to_dict()["trials"]
    1
    """
    from .sim.forecast import forecast as run_forecast
    from .sim.noise import check_corruption

    check_forecast_options(trials=trials)
    closure = closure_options(mode, snr_cut, closure_average, scan_gap)
    alternatives = list(alternatives)
    corruption = {"gain_error": gain_error, "phase_error_deg": phase_error, "systematic": systematic}
    check_corruption(**corruption)
    arr = _array(array)
    true_sky = load_model_or_path(true_model)
    alts = [load_model_or_path(m) for m in alternatives]
    if true_name is None:
        true_name = _stem(true_model) if _is_path(true_model) else "true"
    if alt_names is None and alternatives and all(_is_path(m) for m in alternatives):
        alt_names = [_stem(m) for m in alternatives]
    out = run_forecast(
        arr,
        true_sky,
        alts,
        observation,
        trials,
        mode=mode,
        seed=seed,
        starts=starts,
        true_name=true_name,
        alt_names=alt_names,
        progress=progress,
        options={**_gain_options(gains, gain_interval, gain_prior), **closure},
        procs=check_procs(procs),
        **corruption,
    )
    if closure:
        out["closure_options"] = closure
    return ForecastReport(record=out)


# --------------------------------------------------------------------------- profile, jackknife


def _fit_extras(
    out: dict,
    result: Any,
    profile: Optional[str],
    jackknife: Optional[str],
    seed: int,
    redshift: float,
    procs: int = 1,
) -> None:
    """Add ``profile`` ({name: profile dict}) and ``jackknife`` to a fit's record, with one
    notice each."""
    if profile:
        from .infer.profile import profile as run_profile
        from .infer.profile import profile_note

        prof = run_profile(result.statistic, profile, seed=seed, best=result, starts=3, procs=procs)
        out["profile"] = {profile: prof}
        out["notices"].append(profile_note(prof))
    if jackknife:
        from .infer.jackknife import GROUPINGS
        from .infer.jackknife import jackknife as run_jackknife

        if jackknife not in GROUPINGS:
            raise UvfitError(f"jackknife must be one of {', '.join(GROUPINGS)} (got {jackknife!r})")
        jk = run_jackknife(result.statistic, result, by=jackknife, seed=seed, redshift=redshift, procs=procs)
        out["jackknife"] = jk
        out["notices"].extend(f"jackknife by {jackknife}: {line}" for line in jk["summary"])


def _fit_for(data, model, mode, systematic, seed, selection, options, procs=1):
    from .infer.lsq import fit as lsq_fit
    from .stats.modes import make_statistic

    sky = load_model_or_path(model)
    vset, notes, labels = _joint_data(data, selection)
    options = _with_site(dict(options or {}), mode, selection)
    sky = _per_file_model(sky, labels, os.fspath(data) if _is_path(data) else None, mode, options.get("gains"), vset)
    stat = make_statistic(mode, vset, sky.copy(), systematic=systematic, **options)
    return stat, lsq_fit(stat, starts="auto", seed=seed, procs=procs), notes, labels


@dataclass
class ProfileReport:
    """The result of :func:`profile`: the profile's JSON (``record``)."""

    record: dict
    notes: list = field(default_factory=list)

    def to_dict(self) -> dict:
        """What ``uvfit profile --json`` writes."""
        return self.record

    def text(self) -> str:
        """The lines ``uvfit profile`` prints."""
        from .infer.profile import profile_note

        r = self.record
        rows = [f"{'value':>14} {'delta chi2':>12}"]
        rows += [f"{g:>14.6g} {c - r['chi2_min']:>12.4g}" for g, c in zip(r["grid"], r["chi2"])]
        return "\n".join(rows + ["", profile_note(r)])


def profile(
    data: Union[Data, Sequence[Data]],
    model: Model,
    parameter: str,
    value_range: Optional[Sequence[float]] = None,
    points: int = 21,
    mode: str = "complex",
    systematic: float = 0.0,
    starts: int = 3,
    seed: int = 0,
    selection: Optional[dict] = None,
    progress: Progress = None,
    data_path: Optional[str] = None,
    procs: int = 1,
    **options,
) -> ProfileReport:
    """Profile likelihood of ``parameter`` (``component.parameter``): chi2 minimised over every
    other free parameter at ``points`` values in ``value_range`` (default: best fit +/- 5 formal
    errors inside the bounds); intervals at delta chi2 = 1 and 3.84 (Wilks 1938; Venzon &
    Moolgavkar 1988). The fit first uses the "auto" starts of :func:`fit`; ``starts``: starts per grid
    point besides the warm start. ``procs``: processes for the starts and the grid (the numbers do
    not depend on it). ``data`` may be a list of files, fitted jointly as in :func:`fit`.
    See :func:`uvfit.infer.profile.profile` for the keys of ``to_dict()``.
    """
    from .infer.profile import MAX_POINTS
    from .infer.profile import profile as run_profile

    _check_at_least("points", points, 3)
    if int(points) > MAX_POINTS:
        raise UvfitError(
            f"points must be at most {MAX_POINTS} (got {points})",
            "a profile needs a few tens of grid values; narrow the range for detail",
        )
    _check_at_least("starts", starts, 1)
    procs = check_procs(procs)
    stat, best, notes, labels = _fit_for(data, model, mode, systematic, seed, selection, options, procs=procs)
    out = run_profile(
        stat,
        parameter,
        value_range=value_range,
        points=points,
        starts=starts,
        seed=seed,
        best=best,
        progress=progress,
        procs=procs,
    )
    out.update(
        {
            "mode": mode,
            "systematic": float(systematic),
            "fit_starts": int(best.starts),
            "selection": _given(selection),
            "data": _data_record(os.fspath(data) if _is_path(data) else data_path, labels),
            **({"closure_options": dict(options)} if options else {}),
        }
    )
    return ProfileReport(record=out, notes=notes)


@dataclass
class JackknifeReport:
    """The result of :func:`jackknife`: its JSON (``record``)."""

    record: dict
    notes: list = field(default_factory=list)

    def to_dict(self) -> dict:
        """What ``uvfit jackknife --json`` writes."""
        return self.record

    def text(self) -> str:
        """The table ``uvfit jackknife`` prints."""
        r = self.record
        rows = [
            f"leave-one-{r['by']}-out: {r['n_fits']} of {r['n_groups']} refits ({r['groups_from']})",
            f"{'quantity':<36} {'value':>12} {'formal':>10} {'jackknife':>10} {'ratio':>7}",
        ]
        for key, e in {**r["parameters"], **r["derived"]}.items():
            rows.append(
                f"{key:<36} {e['value']:>12.6g} {e['formal_error']:>10.3g} "
                f"{e['jackknife_error']:>10.3g} {e['ratio']:>7.3g}"
            )
        rows.append("")
        rows += r["summary"]
        for g in r["groups"]:
            if "error" in g:
                rows.append(f"without {g['left_out']}: no fit ({g['error']})")
        return "\n".join(rows)


def jackknife(
    data: Union[Data, Sequence[Data]],
    model: Model,
    by: str = "station",
    mode: str = "complex",
    systematic: float = 0.0,
    starts: int = 1,
    seed: int = 0,
    redshift: float = 0.0,
    selection: Optional[dict] = None,
    progress: Progress = None,
    data_path: Optional[str] = None,
    procs: int = 1,
    **options,
) -> JackknifeReport:
    """Refit with each station, scan or channel (``by``) left out; the jackknife error of every
    parameter and derived quantity beside the formal one (Efron & Tibshirani 1993, ch. 11). See
    :func:`uvfit.infer.jackknife.jackknife` for the keys of ``to_dict()``. The fit of all the data
    uses the "auto" starts of :func:`fit` (``fit_starts`` in the JSON); each refit starts from its
    best values, plus ``starts - 1`` random starts. ``procs``: processes for the starts and the
    refits (the numbers do not depend on it). ``data`` may be a list of files, fitted
    jointly as in :func:`fit` (by channel, each file's channels are their own)."""
    from .infer.jackknife import GROUPINGS
    from .infer.jackknife import jackknife as run_jackknife

    if by not in GROUPINGS:
        raise UvfitError(f"by must be one of {', '.join(GROUPINGS)} (got {by!r})")
    procs = check_procs(procs)
    stat, best, notes, labels = _fit_for(data, model, mode, systematic, seed, selection, options, procs=procs)
    out = run_jackknife(stat, best, by=by, redshift=redshift, seed=seed, starts=starts, progress=progress, procs=procs)
    out.update(
        {
            "mode": mode,
            "systematic": float(systematic),
            "fit_starts": int(best.starts),
            "selection": _given(selection),
            "data": _data_record(os.fspath(data) if _is_path(data) else data_path, labels),
            **({"closure_options": dict(options)} if options else {}),
        }
    )
    return JackknifeReport(record=out, notes=notes)


# --------------------------------------------------------------------------- image


@dataclass
class ImageReport:
    """The result of :func:`image`: the image's summary (JSON), its pixels and FITS header cards.

    ``pixels[j, i]`` is FITS pixel (i + 1, j + 1); ``write(path)`` writes the FITS file."""

    record: dict
    pixels: Any
    cards: list
    history: list

    def hdu(self) -> Any:
        """The astropy PrimaryHDU of the image."""
        from .show.modelimage import image_hdu

        return image_hdu(self.pixels, self.cards, self.history)

    def write(self, path: str, force: bool = False) -> str:
        """Write the FITS file atomically; an existing file only with ``force``."""
        from .outputs import atomic_write_with

        hdu = self.hdu()
        return atomic_write_with(path, lambda tmp: hdu.writeto(tmp), force=force)

    def to_dict(self) -> dict:
        """What ``uvfit image --json`` writes."""
        return self.record

    def text(self) -> str:
        """The summary ``uvfit image`` prints."""
        from .show.text import image_text

        return image_text(self.record)


def image(
    fit: Union[dict, str, "os.PathLike[str]"],
    pixel: Optional[float] = None,
    size: int = 256,
    restore: Optional[str] = None,
    data: Optional[Data] = None,
) -> ImageReport:
    """The fitted model as an image on a celestial grid (FITS; see :mod:`uvfit.show.modelimage`).

    Parameters
    ----------
    fit : path or dict
        A fit result (the JSON of ``uvfit fit --json``).
    pixel : float, optional
        Pixel size in the fit's angular unit (default: a tenth of the nominal resolution, larger
        when needed to hold the model).
    size : int
        Pixels per side.
    restore : str, optional
        None (flux per pixel, JY/PIXEL), ``"auto"`` (a Gaussian beam from the data's uv
        coverage) or ``"MAJOR,MINOR,PA"`` (FWHM in the angular unit, degrees): JY/BEAM.
    data : VisibilitySet or path, optional
        Read only for the automatic beam or when the fit records no phase centre (default: the
        fit's data file).

    Returns
    -------
    ImageReport
        ``write(path)`` writes the FITS file; ``to_dict()`` the JSON of ``uvfit image --json``.

    Raises
    ------
    UvfitError
        A file that is not a fit result, bad pixel, size or beam, or no phase centre.

    Examples
    --------
    >>> import uvfit
    >>> from uvfit.demo import demo_file
    >>> report = uvfit.fit(demo_file("uvd0917.uvfits"), demo_file("one.toml"), seed=0)
    >>> picture = uvfit.tasks.image(report.to_dict(), size=64)
    >>> picture.record["bunit"], picture.pixels.shape
    ('JY/PIXEL', (64, 64))
    """
    from .show.modelimage import build_image
    from .show.readback import load_fit

    fit_path = None
    if isinstance(fit, dict):
        record_in = fit
    else:
        fit_path = os.fspath(fit)
        record_in = load_fit(fit_path)
    record, pixels, cards, history = build_image(
        record_in, fit_path=fit_path, pixel=pixel, size=size, restore=restore, data=data
    )
    return ImageReport(record=record, pixels=pixels, cards=cards, history=history)


# --------------------------------------------------------------------------- motion


@dataclass
class MotionReport:
    """The result of :func:`motion`: the motion of each component across the epochs (JSON)."""

    record: dict

    def to_dict(self) -> dict:
        """What ``uvfit motion --json`` writes."""
        return self.record

    def text(self) -> str:
        """The table ``uvfit motion`` prints."""
        from .show.text import motion_text

        return motion_text(self.record)


def motion(
    fits: Sequence[Union[dict, str, "os.PathLike[str]"]],
    reference: Optional[str] = None,
    redshift: Optional[float] = None,
    cosmology: str = "Planck18",
) -> MotionReport:
    """Linear motion of every component relative to a reference across fits of several epochs.

    Parameters
    ----------
    fits : sequence of paths or dicts
        Fit results (the JSON of ``uvfit fit --json``), one per epoch; each records its
        observation time.
    reference : str, optional
        The reference component (default: the brightest one present in every epoch).
    redshift : float, optional
        Source redshift: adds the apparent speed beta_app = mu D_L / (c (1 + z)).
    cosmology : str
        An astropy.cosmology realisation (Planck18, WMAP9, ...).

    Returns
    -------
    MotionReport
        ``to_dict()`` is the JSON of ``uvfit motion --json`` (see :mod:`uvfit.infer.motion`).

    Raises
    ------
    UvfitError
        Fewer than two epochs, an epoch without observation time, an unknown reference or
        cosmology, or positions without errors.
    """
    from .infer.motion import motions
    from .show.readback import load_fit

    items = []
    for k, f in enumerate(fits):
        if isinstance(f, dict):
            items.append((f"fit {k + 1}", f))
        else:
            items.append((os.fspath(f), load_fit(os.fspath(f))))
    return MotionReport(record=motions(items, reference=reference, redshift=redshift, cosmology=cosmology))


__all__ = [
    "fit",
    "sample",
    "compare",
    "closures",
    "info",
    "simulate",
    "forecast",
    "observation",
    "load_data",
    "load_model_or_path",
    "summarise",
    "FitReport",
    "SampleReport",
    "CompareReport",
    "ClosureReport",
    "InfoReport",
    "SimulationReport",
    "ForecastReport",
    "profile",
    "jackknife",
    "ProfileReport",
    "JackknifeReport",
    "image",
    "ImageReport",
    "motion",
    "MotionReport",
]
