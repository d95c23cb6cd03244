"""uvfit simulate: a sky model observed by an array, with thermal noise and optional gain errors."""

import click

from ._common import force_option, seed_option
from ._observation import observation_options, pop_observation


@click.command("simulate")
@click.argument("array_file", metavar="ARRAY", type=click.Path(dir_okay=False))
@click.argument("model_file", metavar="MODEL", type=click.Path(dir_okay=False))
@observation_options
@click.option("--no-noise", is_flag=True, help="Leave out the thermal noise (sigmas are still set).")
@click.option(
    "-o", "--output", required=True, type=click.Path(dir_okay=False), help="Output visibility file; .uvfits or .ecsv."
)
@click.option(
    "--json", "json_path", default=None, type=click.Path(dir_okay=False), help="Also write the summary as JSON here."
)
@seed_option
@force_option
def command(array_file, model_file, output, json_path, seed, force, no_noise, **kwargs):
    """Simulate an observation of MODEL (a model file) with ARRAY (an array file).

    (u, v, w) follow from Earth rotation (J2000 frame), baselines come and go as stations rise
    above and set below their elevation limits, and the noise follows the radiometer equation
    from the stations' SEFDs. The result is only as realistic as those assumptions: no
    atmosphere, no calibration errors beyond the gain errors asked for.
    """
    from .. import tasks
    from ..outputs import check_writable, write_json
    from ..sim.observe import write_simulation

    observation, corruption = pop_observation(kwargs)
    check_writable(output, force)
    if json_path:
        check_writable(json_path, force)
    report = tasks.simulate(
        array_file, model_file, observation, seed=seed, noise=not no_noise, output=output, **corruption
    )
    write_simulation(report.vset, output, force=force)
    if report.notice:
        click.echo(report.notice, err=True)
    click.echo(report.text())
    if json_path:
        write_json(json_path, report.to_dict(), force=force)
