"""uvfit fit DATA MODEL: least-squares fit of a sky model, with errors and derived quantities."""

import click

from ..stats.modes import MODES
from ._common import (
    GAIN_OPTION_NAMES,
    STARTS_AUTO_HELP,
    as_options,
    at_least_zero,
    check_outputs,
    closure_options,
    echo_notes,
    force_option,
    gain_options,
    pop_closure_options,
    pop_gains,
    pop_selection,
    procs_option,
    progressbar,
    seed_option,
    selection_options,
    starts_option,
    worded,
)


@click.command("fit")
@click.argument("data", nargs=-1, required=True, type=click.Path())
@click.argument("model", type=click.Path(dir_okay=False))
@click.option(
    "--mode",
    type=click.Choice(list(MODES)),
    default="complex",
    show_default=True,
    help="What is fitted: " + "; ".join(f"{k}: {v[2]}" for k, v in MODES.items()) + ".",
)
@click.option(
    "--systematic",
    type=float,
    callback=at_least_zero,
    default=0.0,
    show_default=True,
    help="Fraction of |V| added in quadrature to every sigma (e.g. 0.02).",
)
@click.option(
    "--rescale-errors",
    is_flag=True,
    help="Scale the errors by sqrt(chi2/dof), as if the sigmas gave a reduced chi2 of 1.",
)
@starts_option(
    "Number of starts: the model's values, then random ones inside the bounds (or around the values)."
    + STARTS_AUTO_HELP
)
@click.option(
    "--global-search",
    is_flag=True,
    help="Search chi2 globally inside the bounds first (needs a finite min and max everywhere).",
)
@click.option(
    "--redshift",
    type=float,
    callback=at_least_zero,
    default=0.0,
    show_default=True,
    help="Source redshift, for rest-frame brightness temperatures.",
)
@click.option(
    "--max-evaluations",
    type=int,
    default=None,
    help="Most model evaluations per start (default 200 x (free parameters + 1)).",
)
@click.option("--no-resolved-test", is_flag=True, help="Skip the refits that test whether each component is resolved.")
@click.option(
    "--json", "json_out", type=click.Path(dir_okay=False), default=None, help="Write the full result as JSON here."
)
@click.option(
    "--save-model", type=click.Path(dir_okay=False), default=None, help="Write the best-fit model (TOML) here."
)
@click.option(
    "--profile",
    "profile_name",
    default=None,
    metavar="NAME",
    help="Add the profile-likelihood interval of this free parameter (component.parameter).",
)
@click.option(
    "--jackknife",
    type=click.Choice(["station", "scan", "channel"]),
    default=None,
    help="Add refits with each station, scan or channel left out, and their jackknife errors.",
)
@click.option(
    "--write-model-column",
    is_flag=True,
    help="Write the best-fit model visibilities into the Measurement Set's MODEL_DATA column "
    "(created if absent; DATA is never touched).",
)
@click.option(
    "--gains-out",
    type=click.Path(dir_okay=False),
    default=None,
    metavar="FILE.ecsv",
    help="Write the gain solutions (station, interval, amplitude, phase and their errors) as ECSV here.",
)
@click.option(
    "--gains-plot",
    type=click.Path(dir_okay=False),
    default=None,
    metavar="FILE.png",
    help="Draw the gain amplitudes and phases against time into this PNG.",
)
@closure_options
@seed_option
@procs_option("Run the starts (and the --jackknife refits and --profile grid) in N processes.")
@gain_options
@force_option
@selection_options
def command(
    data,
    model,
    mode,
    systematic,
    rescale_errors,
    starts,
    global_search,
    redshift,
    max_evaluations,
    no_resolved_test,
    json_out,
    save_model,
    profile_name,
    jackknife,
    seed,
    procs,
    force,
    gains_out=None,
    gains_plot=None,
    write_model_column=False,
    **kwargs,
):
    """Fit MODEL (a TOML model file) to the visibilities in DATA by least squares. Several DATA
    files of one source and phase centre are fitted jointly (every parameter shared, the chi2 of
    each file reported).

    Prints every parameter with its error, the derived quantities (separations, position angles,
    flux ratios, sizes, brightness temperatures, whether each component is resolved), the
    goodness of fit and the stations and baselines that fit worst.
    """
    from .. import tasks
    from ..outputs import atomic_write, write_json

    closure = pop_closure_options(kwargs)
    with as_options():  # refused before any work, naming the option
        tasks.closure_options(mode, **closure)
    selection = pop_selection(kwargs)
    inputs = {f"data file {k + 1}": d for k, d in enumerate(data)}
    data = data[0] if len(data) == 1 else list(data)
    if write_model_column and isinstance(data, list):
        from ..errors import UvfitError

        raise UvfitError(
            "--write-model-column takes one data file", "fit each Measurement Set alone to write its column"
        )
    gains = pop_gains(kwargs)
    if (gains_out or gains_plot) and not gains["gains"]:
        from ..errors import UvfitError

        raise UvfitError(
            "--gains-out and --gains-plot need gains solved in the fit", "add --gains amplitude|phase|complex"
        )
    if write_model_column:
        from ..data.ms import check_model_column_writable

        check_model_column_writable(data)
    check_outputs(
        {"--json": json_out, "--save-model": save_model, "--gains-out": gains_out, "--gains-plot": gains_plot},
        {**inputs, "the model": model},
        force,
    )
    options = dict(
        mode=mode,
        systematic=systematic,
        rescale_errors=rescale_errors,
        starts=starts,
        seed=seed,
        global_search=global_search,
        redshift=redshift,
        selection=selection,
        resolved_test=not no_resolved_test,
        max_evaluations=max_evaluations,
        profile=profile_name,
        jackknife=jackknife,
        procs=procs,
        **gains,
        **closure,
    )
    from ..infer.lsq import AUTO_FIRST, GLOBAL_POLISH

    total = (AUTO_FIRST if starts == "auto" else starts) + (GLOBAL_POLISH if global_search else 0)
    with as_options(
        max_evaluations="--max-evaluations",
        jackknife="--jackknife",
        starts="--starts",
        global_search="--global-search",
        rescale_errors="--rescale-errors",
        **GAIN_OPTION_NAMES,
    ):
        if total > 1:
            with progressbar(total, "fitting") as bar:
                report = tasks.fit(data, model, progress=bar.update, **options)
        else:
            report = tasks.fit(data, model, **options)
    echo_notes(report.notes)
    out = report.to_dict()
    click.echo(worded(report.text()))
    if json_out:
        write_json(json_out, out, force=force)
        click.echo(f"wrote {json_out}", err=True)
    if save_model:
        atomic_write(save_model, out["model_toml"], force=force)
        click.echo(f"wrote {save_model}", err=True)
    if gains_out:
        from ..outputs import atomic_write_with
        from ..stats.gains import gain_astropy_table

        table = gain_astropy_table(out["gains"], {"seed": out["seed"], "data": out["data"]})
        atomic_write_with(gains_out, lambda p: table.write(p, format="ascii.ecsv"), force=force)
        click.echo(f"wrote {gains_out}", err=True)
    if gains_plot:
        from ..show.gains_plot import gain_plot
        from ..show.style import close, save_png

        fig, _ = gain_plot(out["gains"])
        save_png(fig, gains_plot, force=force)
        close(fig)
        click.echo(f"wrote {gains_plot}", err=True)
    if write_model_column:
        from ..data.ms import write_model_column as write_column
        from ..sky.modelfile import loads

        done = write_column(data, loads(out["model_toml"]), field=selection.get("field"), spw=selection.get("spw"))
        click.echo(
            f"wrote the best-fit model into {done['column']} of {data} ({done['rows_written']} of "
            f"{done['rows_total']} rows{'; column created' if done['created'] else ''})",
            err=True,
        )
