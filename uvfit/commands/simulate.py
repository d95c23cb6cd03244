"""uvfit simulate: a sky model observed by an array, with thermal noise and optional gain errors."""
import click

from ._common import force_option, seed_option
from ._observation import observation_options, pop_observation


@click.command("simulate")
@click.argument("array_file", metavar="ARRAY", type=click.Path(dir_okay=False))
@click.argument("model_file", metavar="MODEL", type=click.Path(dir_okay=False))
@observation_options
@click.option("--no-noise", is_flag=True, help="Leave out the thermal noise (sigmas are still set).")
@click.option("-o", "--output", required=True, type=click.Path(dir_okay=False),
              help="Output visibility file; .uvfits or .ecsv.")
@click.option("--json", "json_path", default=None, type=click.Path(dir_okay=False),
              help="Also write the summary as JSON here.")
@seed_option
@force_option
def command(array_file, model_file, output, json_path, seed, force, no_noise, **kwargs):
    """Simulate an observation of MODEL (a model file) with ARRAY (an array file).

    (u, v, w) follow from Earth rotation (J2000 frame), baselines come and go as stations rise
    above and set below their elevation limits, and the noise follows the radiometer equation
    from the stations' SEFDs. The result is only as realistic as those assumptions: no
    atmosphere, no calibration errors beyond the gain errors asked for.
    """
    from .. import load_model
    from ..outputs import check_writable, write_json
    from ..sim.array import load_array
    from ..sim.observe import simulate, write_simulation

    observation, corruption = pop_observation(kwargs)
    check_writable(output, force)
    if json_path:
        check_writable(json_path, force)
    array = load_array(array_file)
    model = load_model(model_file)
    vset, layout = simulate(array, model, observation, seed=seed, thermal=not no_noise, **corruption)
    write_simulation(vset, output, force=force)
    summary = layout.summary()
    summary.update({"seed": seed, "output": output, "model": model_file, **corruption})
    if summary["notice"]:
        click.echo(summary["notice"], err=True)
    click.echo(format_summary(summary, observation))
    if json_path:
        write_json(json_path, {**summary, "observation": observation.describe()}, force=force)


def format_summary(s, obs):
    lines = [
        f"wrote {s['output']}: {s['rows']} visibilities over {s['times']} integrations and "
        f"{s['channels']} channel(s), source {s['source']}, seed {s['seed']}",
        f"band: {obs.frequency_hz / 1e9:.6g} GHz centre, {obs.bandwidth_hz / 1e6:.6g} MHz in "
        f"{obs.channels} channel(s) of {obs.channel_width_hz / 1e6:.6g} MHz; integration "
        f"{obs.integration_s:g} s; scans of {obs.scan_length_s:g} s",
        f"baselines with data: {s['baselines_with_data']} of {s['baselines_in_array']}",
        f"nominal resolution lambda/B_max: {s['nominal_resolution_uas']:.1f} microarcsec "
        f"(longest projected baseline {s['max_uv_lambda'] / 1e6:.1f} Mlambda)",
        f"median thermal sigma per real/imaginary part: {s['median_sigma_jy'] * 1e3:.3g} mJy",
        "time on source (h, above the elevation limit):",
    ]
    lines += [f"  {name:<10s} {h:6.2f}" for name, h in s["hours_on_source"].items()]
    return "\n".join(lines)
