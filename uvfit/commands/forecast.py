"""uvfit forecast: repeated simulations and fits, to see whether an array can tell models apart."""

import click

from ..stats.modes import MODES
from ._common import (
    GAIN_OPTION_NAMES,
    as_options,
    check_outputs,
    closure_options,
    force_option,
    gain_options,
    pop_closure_options,
    pop_gains,
    procs_option,
    progressbar,
    seed_option,
    worded,
)
from ._observation import observation_options, pop_observation


@click.command("forecast")
@click.argument("array_file", metavar="ARRAY", type=click.Path(dir_okay=False))
@click.argument("true_file", metavar="MODEL_TRUE", type=click.Path(dir_okay=False))
@click.argument("alt_files", metavar="MODEL_ALT...", nargs=-1, required=True, type=click.Path(dir_okay=False))
@observation_options
@click.option("--trials", type=int, default=20, show_default=True, help="Number of simulated data sets.")
@click.option(
    "--mode",
    type=click.Choice(list(MODES)),
    default="complex",
    show_default=True,
    help="Statistic the fits use (a closure mode when there are gain errors).",
)
@click.option("--starts", type=int, default=1, show_default=True, help="Fit starts per model and trial.")
@click.option(
    "--json",
    "json_path",
    default=None,
    type=click.Path(dir_okay=False),
    help="Write the forecast (all numbers, per trial, seeds) as JSON here.",
)
@closure_options
@seed_option
@procs_option("Run the trials in N processes.")
@gain_options
@force_option
def command(array_file, true_file, alt_files, trials, mode, starts, json_path, seed, procs, force, **kwargs):
    """Simulate MODEL_TRUE --trials times with ARRAY, fit MODEL_TRUE and every MODEL_ALT to each,
    and report how often the true structure is recovered and preferred.

    Trial k uses seed SEED + k. The answer holds for the assumed array performance and model
    families only; real data carry calibration errors the simulation may not.
    """
    from .. import tasks
    from ..outputs import write_json

    gains = pop_gains(kwargs)
    closure = pop_closure_options(kwargs)
    observation, corruption = pop_observation(kwargs)
    check_outputs(
        {"--json": json_path},
        {"the array": array_file, "the true model": true_file, **{f"model {m}": m for m in alt_files}},
        force,
    )
    with as_options(trials="--trials"):
        tasks.check_forecast_options(trials=trials)
        tasks.closure_options(mode, **closure)
    with progressbar(trials, "forecast trials") as bar, as_options(**GAIN_OPTION_NAMES):
        report = tasks.forecast(
            array_file,
            true_file,
            list(alt_files),
            observation,
            trials=trials,
            mode=mode,
            seed=seed,
            starts=starts,
            progress=bar.update,
            procs=procs,
            **gains,
            **closure,
            **corruption,
        )
    if report.notice:
        click.echo(report.notice, err=True)
    click.echo(worded(report.text()))
    if json_path:
        write_json(json_path, report.to_dict(), force=force)
