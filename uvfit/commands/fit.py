"""uvfit fit DATA MODEL: least-squares fit of a sky model, with errors and derived quantities."""

import click

from ..stats.modes import MODES
from ._common import (
    STARTS_AUTO_HELP,
    as_options,
    at_least_zero,
    check_outputs,
    echo_notes,
    force_option,
    pop_selection,
    progressbar,
    seed_option,
    selection_options,
    starts_option,
)


@click.command("fit")
@click.argument("data", type=click.Path())
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
@seed_option
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
    force,
    write_model_column=False,
    **kwargs,
):
    """Fit MODEL (a TOML model file) to the visibilities in DATA by least squares.

    Prints every parameter with its error, the derived quantities (separations, position angles,
    flux ratios, sizes, brightness temperatures, whether each component is resolved), the
    goodness of fit and the stations and baselines that fit worst.
    """
    from .. import tasks
    from ..outputs import atomic_write, write_json

    selection = pop_selection(kwargs)
    if write_model_column:
        from ..data.ms import check_model_column_writable

        check_model_column_writable(data)
    check_outputs({"--json": json_out, "--save-model": save_model}, {"the data": data, "the model": model}, force)
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
    )
    from ..infer.lsq import AUTO_FIRST, GLOBAL_POLISH

    total = (AUTO_FIRST if starts == "auto" else starts) + (GLOBAL_POLISH if global_search else 0)
    with as_options(
        max_evaluations="--max-evaluations",
        jackknife="--jackknife",
        starts="--starts",
        global_search="--global-search",
        rescale_errors="--rescale-errors",
    ):
        if total > 1:
            with progressbar(total, "fitting") as bar:
                report = tasks.fit(data, model, progress=bar.update, **options)
        else:
            report = tasks.fit(data, model, **options)
    echo_notes(report.notes)
    out = report.to_dict()
    click.echo(report.text())
    if json_out:
        write_json(json_out, out, force=force)
        click.echo(f"wrote {json_out}", err=True)
    if save_model:
        atomic_write(save_model, out["model_toml"], force=force)
        click.echo(f"wrote {save_model}", err=True)
    if write_model_column:
        from ..data.ms import write_model_column as write_column
        from ..sky.modelfile import loads

        done = write_column(data, loads(out["model_toml"]), field=selection.get("field"), spw=selection.get("spw"))
        click.echo(
            f"wrote the best-fit model into {done['column']} of {data} ({done['rows_written']} of "
            f"{done['rows_total']} rows{'; column created' if done['created'] else ''})",
            err=True,
        )
