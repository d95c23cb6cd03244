"""The whole job on data that ship with uvfit: ``uvfit demo``.

The demo data (``uvfit/demo_data/uvd0917.uvfits``) are invented: nine invented 22 GHz stations
(``examples/demo/array.toml``) observe the invented source UVD 0917+224, a 20 mJy double whose
parts are 0.55 mas apart, less than half the array's nominal resolution lambda/B_max of 1.2 mas
(the truth is ``examples/demo/truth.toml``; ``examples/demo/make_demo_data.py`` makes the file,
seeded, by the simulation layer). The demo, in order:

1. describes the data (the ``uvfit info`` summary);
2. fits one component (a circular Gaussian) and two (a double of points) by least squares;
3. decides between them with the false-alarm probability of the single component, calibrated by a
   parametric bootstrap (``uvfit.infer.compare``);
4. samples the posterior of the double (``uvfit.infer.sampling``, emcee);
5. checks the double against the closure phases and log closure amplitudes
   (``uvfit.stats.closures``), which station-based calibration errors cannot change;
6. draws the figures and writes the one-file HTML report (``uvfit.show``);
7. says where everything is and gives the answer in one line (the "headline").

Every step calls the same library functions as the commands, so each output file is the one the
corresponding command would write (``uvfit fit --json``, ``uvfit compare --json``, ...).
"""

import json
import os
from importlib import resources

import numpy as np

from .errors import UvfitError
from .labels import DEMO_CAUTION
from .show import text as show_text

#: the files shipped in uvfit/demo_data
DATA_FILE = "uvd0917.uvfits"
MODEL_FILES = {"one": "one.toml", "two": "two.toml"}
#: the fitting mode (the demo data are phase-calibrated: thermal noise only)
MODE = "complex"
#: bootstrap simulations: 100 can show a false-alarm probability below 1% (1/101)
DEFAULT_BOOTSTRAP = 100
#: the longest chain (steps per walker); the chain stops earlier once it has converged
DEFAULT_MAX_STEPS = 6000
#: names of the outputs in the demo folder
OUTPUTS = {
    "info": "info.json",
    "fit_one": "fit_one.json",
    "fit_two": "fit_two.json",
    "compare": "compare.json",
    "posterior": "posterior.json",
    "chain": "chain.h5",
    "closures": "closures.json",
    "closure_table": "closures.ecsv",
    "report": "report.html",
    "radial": "radial.png",
    "uv": "uv.png",
    "closure_plot": "closure_phases.png",
    "sky": "sky.png",
    "corner": "corner.png",
    "headline": "headline.json",
}
#: the output of each figure of uvfit.show.figures.KINDS
FIGURE_OUTPUTS = {"radial": "radial", "uv": "uv", "closure": "closure_plot", "sky": "sky"}


def demo_file(name):
    """Path of a file shipped in uvfit/demo_data (an installed package or the work tree)."""
    path = resources.files("uvfit").joinpath("demo_data", name)
    if not path.is_file():
        raise UvfitError(
            f"the demo file {name} is missing from this installation of uvfit",
            "reinstall uvfit (pip install .) from a complete copy of the project",
        )
    return str(path)


def check_out_dir(out_dir, force=False):
    """Refuse an existing, non-empty folder unless ``force``; create the folder if needed."""
    out_dir = os.fspath(out_dir)
    if os.path.exists(out_dir) and not os.path.isdir(out_dir):
        raise UvfitError(f"{out_dir} exists and is not a folder", "give a new folder as out_dir")
    if os.path.isdir(out_dir) and os.listdir(out_dir) and not force:
        raise UvfitError(
            f"the output folder {out_dir} exists already and is not empty",
            "give a new folder as out_dir, or pass force to overwrite the demo's files in it",
        )
    parent = os.path.dirname(os.path.abspath(out_dir))
    if not os.path.isdir(parent):
        raise UvfitError(
            f"the folder {parent} for the demo's output folder does not exist",
            "create it first, or give another out_dir",
        )
    os.makedirs(out_dir, exist_ok=True)
    return out_dir


class _NoBar:
    def __init__(self, length=None, label=None):
        pass

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False

    def update(self, n):
        pass


def _roundtrip(obj):
    """The object as a JSON reader sees it (what the report command would read from the files)."""
    from .outputs import to_json

    return json.loads(to_json(obj))


def _pm(value, error, digits=2):
    """'value +/- error' with the value rounded to the error's first ``digits`` figures."""
    if error is None or not np.isfinite(error) or error <= 0:
        return f"{value:.3g}"
    decimals = max(0, digits - 1 - int(np.floor(np.log10(error))))
    return f"{value:.{decimals}f} +/- {error:.{decimals}f}"


def _percent(p):
    return f"{100 * p:.2g}%"


def headline(fit_two, fit_one, comparison, posterior=None):
    """(text, numbers): the demo's answer in one line, and the numbers behind it (a dict).

    The values and 1-sigma errors are the least-squares ones of the double (fit_two.json); the
    false-alarm probability is the bootstrap's (compare.json).
    """
    rows = {r["name"]: r for r in comparison["models"]}
    two = rows.get("two", {})
    fap = two.get("false_alarm_probability")
    n_sim = two.get("n_simulations", comparison.get("n_bootstrap", 0))
    n_exceed = two.get("n_exceeding")
    params = fit_two["parameters"]
    unit = fit_two.get("angular_unit", "mas")

    def val(key):
        p = params[f"pair.{key}"]
        return float(p["value"]), (None if p.get("error") is None else float(p["error"]))

    sep, sep_e = val("separation")
    pa, pa_e = val("position_angle")
    ratio, ratio_e = val("flux_ratio")
    numbers = {
        "preferred": comparison.get("preferred"),
        "separation": sep,
        "separation_error": sep_e,
        "separation_unit": unit,
        "position_angle": pa % 360.0,
        "position_angle_error": pa_e,
        "position_angle_unit": "deg",
        "flux_ratio": ratio,
        "flux_ratio_error": ratio_e,
        "false_alarm_probability": fap,
        "n_simulations": n_sim,
        "n_exceeding": n_exceed,
        "source": "least squares (fit_two.json); false-alarm probability by parametric bootstrap (compare.json)",
    }
    if fap is None:
        fap_text = "no false-alarm probability computed (bootstrap 0)"
    elif n_exceed == 0:
        bound = "< 1%" if fap < 0.01 else f"<= {_percent(fap)}"
        fap_text = (
            f"false-alarm probability of the single component {bound}: none of {n_sim} simulations of it came as close"
        )
    else:
        fap_text = f"false-alarm probability of the single component {_percent(fap)} ({n_sim} simulations)"
    undecided = comparison.get("preferred") != "two" and n_exceed == 0 and fap is not None and fap > 0.05
    numbers["undecided"] = bool(undecided)
    if undecided:
        # no simulation of the single component came as close, but too few were run to say so
        text = (
            f"undecided: the double fits better than one component and none of {n_sim} simulations of the "
            f"single component came as close, but {n_sim} simulations cannot show a false-alarm probability "
            "below 5%; run the demo with 100 or more bootstrap simulations"
        )
    elif comparison.get("preferred") == "two":
        text = (
            f"two components, separation {_pm(sep, sep_e)} {unit} at PA "
            f"{_pm(pa % 360.0, pa_e, 1)} deg, flux ratio {_pm(ratio, ratio_e)} ({fap_text})"
        )
    else:
        one = fit_one["parameters"]
        size = one.get("source.fwhm", {})
        text = (
            f"one component suffices: a Gaussian of FWHM "
            f"{_pm(float(size.get('value', float('nan'))), size.get('error'))} {unit}; "
            f"the double is not required ({fap_text})"
        )
    if posterior is not None:
        pp = posterior.get("parameters", {})
        if "pair.separation" in pp and "pair.flux_ratio" in pp:
            numbers["posterior_separation_median"] = pp["pair.separation"]["median"]
            numbers["posterior_flux_ratio_median"] = pp["pair.flux_ratio"]["median"]
            numbers["posterior_converged"] = posterior.get("converged")
    numbers["text"] = text
    return text, numbers


def run_demo(
    out_dir,
    seed=0,
    bootstrap=DEFAULT_BOOTSTRAP,
    force=False,
    max_steps=DEFAULT_MAX_STEPS,
    echo=print,
    progressbar=None,
    procs=None,
):
    """Run the whole demo into the folder ``out_dir``; returns {"headline", "numbers", "outputs"}.

    ``echo(text)`` prints a step's human output; ``progressbar(length, label)`` returns a context
    manager with ``update(n)`` (a click progress bar in the command; nothing by default).
    ``seed`` seeds every random step (fits, bootstrap, sampler) and is recorded in each output.
    ``procs``: processes for the starts and the bootstrap simulations (default: every core,
    ``os.cpu_count()``); the numbers do not depend on it. The chain stays in one process: a step
    of the demo's walkers costs less than sending them to other processes.
    """
    from .infer.parallel import check_procs

    procs = check_procs((os.cpu_count() or 1) if procs is None else procs)
    from ._blas import single_threaded

    if int(bootstrap) < 0:
        raise UvfitError(f"bootstrap must be >= 0 (got {bootstrap})")
    if int(max_steps) < 1:
        raise UvfitError(f"max_steps must be at least 1 (got {max_steps})")
    out_dir = check_out_dir(out_dir, force)
    bar = progressbar or _NoBar
    with single_threaded():
        return _run(out_dir, int(seed), int(bootstrap), bool(force), int(max_steps), echo, bar, procs)


def _run(out_dir, seed, bootstrap, force, max_steps, echo, bar, procs=1):
    from . import tasks
    from .outputs import atomic_write, atomic_write_with, write_json
    from .show import readback, style
    from .show.corner import write_corner_plot
    from .show.figures import make_figure
    from .show.report import build_report

    def path(key):
        return os.path.join(out_dir, OUTPUTS[key])

    def step(title):
        echo("")
        echo(f"== {title}")

    # copies of the inputs, so that every command can be tried on them afterwards
    src_data = demo_file(DATA_FILE)
    data_path = os.path.join(out_dir, DATA_FILE)
    with open(src_data, "rb") as handle:
        atomic_write(data_path, handle.read(), force=force)
    model_paths = {}
    for key, name in MODEL_FILES.items():
        model_paths[key] = os.path.join(out_dir, name)
        with open(demo_file(name), "rb") as handle:
            atomic_write(model_paths[key], handle.read(), force=force)
    echo(
        f"uvfit demo: the invented source UVD 0917+224 seen by the invented Aster Ridge Array; "
        f"outputs in {out_dir}/ (seed {seed})"
    )

    # 1. the data
    step(f"1. the data ({DATA_FILE}; uvfit info)")
    vset, _ = tasks.load_data(data_path)
    described = tasks.info(vset, data_path=data_path)
    echo(described.text())
    write_json(path("info"), described.to_dict(), force=force)

    # 2. two least-squares fits
    fits = {}
    for key, label in (("one", "one component: a circular Gaussian"), ("two", "two components: a double of points")):
        step(f"2{'ab'[key == 'two']}. least-squares fit, {label} ({MODEL_FILES[key]}; uvfit fit)")
        out = tasks.fit(
            vset, model_paths[key], mode=MODE, seed=seed, data_path=data_path, selection={}, procs=procs
        ).to_dict()
        write_json(path(f"fit_{key}"), out, force=force)
        fits[key] = _roundtrip(out)
        echo(show_text.fit_text(fits[key]))

    # 3. one or two? the bootstrap false-alarm probability
    step(f"3. one or two components? ({bootstrap} bootstrap simulations; uvfit compare)")
    with bar(length=max(bootstrap, 1), label="bootstrap") as b:
        cmp = tasks.compare(
            vset,
            [model_paths["one"], model_paths["two"]],
            mode=MODE,
            bootstrap=bootstrap,
            seed=seed,
            progress=b.update,
            data_path=data_path,
            selection={},
            procs=procs,
        ).to_dict()
    write_json(path("compare"), cmp, force=force)
    cmp = _roundtrip(cmp)
    echo(show_text.compare_text(cmp))

    # 4. the posterior of the double
    step(f"4. posterior of the double (emcee, at most {max_steps} steps; uvfit sample)")
    with bar(length=max_steps, label="sampling") as b:
        state = {"done": 0}

        def progress(done):
            b.update(done - state["done"])
            state["done"] = done

        sampled = tasks.sample(
            vset,
            model_paths["two"],
            mode=MODE,
            max_steps=max_steps,
            seed=seed,
            chain=path("chain"),
            force=force,
            progress=progress,
            data_path=data_path,
            selection={},
        )
    for note in sampled.posterior.notes:
        echo(f"note: {note}")
    echo(sampled.posterior.table())
    write_json(path("posterior"), sampled.to_dict(), force=force)
    write_corner_plot(sampled.posterior, path("corner"), force=force)
    posterior = _roundtrip(sampled.to_dict())

    # 5. the closure check of the fitted double
    step("5. closure check of the fitted double (uvfit closures)")
    checked = tasks.closures(vset, fits["two"], data_path=data_path, model_path=path("fit_two"), selection={})
    check = checked.result
    echo(checked.text())
    write_json(path("closures"), checked.to_dict(), force=force)
    table = checked.table()
    atomic_write_with(path("closure_table"), lambda p: table.write(p, format="ascii.ecsv"), force=force)

    # 6. figures and the report
    step("6. figures and the report (uvfit plot, uvfit report)")
    view = readback.fit_view(vset, fits["two"], {})
    with bar(length=len(FIGURE_OUTPUTS) + 1, label="figures and report") as b:
        for kind in FIGURE_OUTPUTS:
            fig, _ = make_figure(kind, view)
            try:
                style.save_png(fig, path(FIGURE_OUTPUTS[kind]), force=force)
            finally:
                style.close(fig)
            b.update(1)
        discard, thin = readback.chain_settings(posterior)
        chain = readback.order_chain(readback.read_chain(path("chain"), discard, thin), view.model, posterior)
        page = build_report(
            view, closure_check=check, posterior=posterior, chain=chain, compare=cmp, data_name=DATA_FILE
        )
        atomic_write(path("report"), page, force=force)
        b.update(1)

    # 7. the answer
    text, numbers = headline(fits["two"], fits["one"], cmp, posterior)
    numbers.update({"seed": seed, "n_bootstrap": bootstrap, "closures_support_the_double": check.get("supported")})
    write_json(path("headline"), numbers, force=force)
    step("7. outputs")
    width = max(len(v) for v in OUTPUTS.values())
    described = {
        "info": "what the data file holds (uvfit info --json)",
        "fit_one": "least-squares fit of one component (uvfit fit --json)",
        "fit_two": "least-squares fit of the double",
        "compare": "one against two, bootstrap false-alarm probability (uvfit compare --json)",
        "posterior": "posterior summaries of the double (uvfit sample --json)",
        "chain": "the MCMC chain (HDF5)",
        "closures": "closure check of the fitted double (uvfit closures --json)",
        "closure_table": "every closure quantity, data and model (uvfit closures --table)",
        "report": "everything on one page: open it in a browser",
        "radial": "amplitude and phase against uv distance, data and model",
        "uv": "the (u, v) coverage",
        "closure_plot": "closure phases against time",
        "sky": "the fitted double on the sky",
        "corner": "posterior samples (corner plot)",
        "headline": "the answer below, with its numbers",
    }
    for key, name in OUTPUTS.items():
        echo(f"  {os.path.join(out_dir, name):<{width + len(out_dir) + 1}}  {described[key]}")
    echo(f"  inputs: {data_path}, {model_paths['one']}, {model_paths['two']}")
    echo("")
    echo(DEMO_CAUTION)
    echo("")
    echo(f"answer: {text}")
    return {"headline": text, "numbers": numbers, "outputs": {k: path(k) for k in OUTPUTS}, "out_dir": out_dir}
