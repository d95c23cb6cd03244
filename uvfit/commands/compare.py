"""uvfit compare DATA... MODEL_A MODEL_B [...]: which model do the data require?"""

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
    joint_data,
    pop_closure_options,
    pop_gains,
    pop_selection,
    procs_option,
    progressbar,
    seed_option,
    selection_options,
    split_data_and_models,
    starts_option,
    worded,
)


@click.command("compare")
@click.argument("arguments", nargs=-1, required=True, type=click.Path(dir_okay=False))
@click.option(
    "--mode",
    type=click.Choice(list(MODES)),
    default="complex",
    show_default=True,
    help="What is fitted (as for uvfit fit).",
)
@click.option(
    "--systematic",
    type=float,
    callback=at_least_zero,
    default=0.0,
    show_default=True,
    help="Fraction of |V| added in quadrature to every sigma.",
)
@click.option("--rescale-errors", is_flag=True, help="Multiply each fit's errors by sqrt(chi2/dof) (as for uvfit fit).")
@starts_option("Starts of each model's fit to the data." + STARTS_AUTO_HELP)
@click.option(
    "--global-search", is_flag=True, help="Search chi2 globally inside the bounds before each fit (as for uvfit fit)."
)
@click.option(
    "--reference",
    default=None,
    metavar="NAME",
    help="Judge every model against this one (a model file's stem); default: each "
    "model against the next simpler one, and all against the simplest.",
)
@click.option(
    "--bootstrap",
    type=int,
    callback=at_least_zero,
    default=0,
    show_default=True,
    help="Simulated data sets for the false-alarm probability of each richer model.",
)
@click.option(
    "--json", "json_out", type=click.Path(dir_okay=False), default=None, help="Write the comparison as JSON here."
)
@seed_option
@procs_option("Run the starts and the bootstrap simulations in N processes.")
@gain_options
@force_option
@closure_options
@selection_options
def command(
    arguments,
    mode,
    systematic,
    rescale_errors,
    starts,
    global_search,
    reference,
    bootstrap,
    json_out,
    seed,
    procs,
    force,
    **kwargs,
):
    """Fit two or more MODELS to DATA and say whether the richer ones are required.

    Several data files are fitted jointly: the arguments before the first model file (a name
    ending in .toml) are data; when no name ends in .toml, the first argument is the data.

    Reports chi2, AIC and BIC of each model and, against the model with the fewest free
    parameters, the likelihood ratio; with --bootstrap N, its false-alarm probability calibrated
    on N simulations of the simpler best fit on the same (u, v) coverage and errors.
    """
    from .. import tasks
    from ..errors import UvfitError
    from ..outputs import write_json

    paths, models = split_data_and_models(arguments)
    if len(models) < 2:
        raise UvfitError("compare needs at least two model files", "give DATA... MODEL_A MODEL_B [...]")
    data, data_inputs = joint_data(paths)
    closure = pop_closure_options(kwargs)
    with as_options():  # refused before any work, naming the option
        tasks.closure_options(mode, **closure)
    selection = pop_selection(kwargs)
    check_outputs({"--json": json_out}, {**data_inputs, **{f"model {m}": m for m in models}}, force)
    options = dict(
        mode=mode,
        systematic=systematic,
        starts=starts,
        bootstrap=bootstrap,
        seed=seed,
        selection=selection,
        rescale_errors=rescale_errors,
        global_search=global_search,
        reference=reference,
        procs=procs,
        **pop_gains(kwargs),
        **closure,
    )
    with as_options(bootstrap="--bootstrap", reference="--reference", **GAIN_OPTION_NAMES):
        if bootstrap > 0:
            with progressbar(bootstrap, "bootstrap") as bar:
                report = tasks.compare(data, list(models), progress=bar.update, **options)
        else:
            report = tasks.compare(data, list(models), **options)
    echo_notes(report.notes)
    click.echo(worded(report.text()))
    if json_out:
        write_json(json_out, report.to_dict(), force=force)
        click.echo(f"wrote {json_out}", err=True)
