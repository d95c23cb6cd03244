"""Options shared by the commands that simulate observations (simulate, forecast)."""

import click

_KEYS = (
    "ra",
    "dec",
    "start",
    "duration",
    "integration",
    "frequency",
    "bandwidth",
    "channels",
    "scan_length",
    "gain_error",
    "phase_error",
    "systematic",
    "source",
)


def observation_options(func):
    options = [
        click.option("--ra", required=True, help="Right ascension of the phase centre (J2000), e.g. 12h30m49.4s."),
        click.option("--dec", required=True, help="Declination of the phase centre (J2000), e.g. +12d23m28s."),
        click.option("--start", required=True, help="Start of the observation, UTC, e.g. 2027-03-01T02:00."),
        click.option("--duration", required=True, help="Length of the observation, e.g. 12h."),
        click.option("--integration", default="30s", show_default=True, help="Integration time per visibility."),
        click.option("--frequency", required=True, help="Centre frequency, e.g. 86GHz."),
        click.option(
            "--bandwidth",
            default="1GHz",
            show_default=True,
            help="Total recorded bandwidth, split equally over the channels.",
        ),
        click.option("--channels", type=int, default=1, show_default=True, help="Number of channels across the band."),
        click.option(
            "--scan-length",
            default="5min",
            show_default=True,
            help="Time over which station gain errors stay constant.",
        ),
        click.option(
            "--gain-error",
            type=float,
            default=0.0,
            show_default=True,
            help="Station gain amplitude scatter per scan (fraction, rms).",
        ),
        click.option(
            "--phase-error",
            type=float,
            default=0.0,
            show_default=True,
            help="Station phase error per scan (degrees, rms).",
        ),
        click.option(
            "--systematic",
            type=float,
            default=0.0,
            show_default=True,
            help="Extra error per visibility as a fraction of its amplitude (added in quadrature).",
        ),
        click.option("--source", default="SIM", show_default=True, help="Source name written to the file."),
    ]
    for opt in reversed(options):
        func = opt(func)
    return func


def pop_observation(kwargs):
    """Remove the observation options from kwargs; return (Observation, corruption keywords of
    the simulate and forecast tasks)."""
    from ..tasks import observation

    o = {k: kwargs.pop(k) for k in _KEYS}
    if _is_number(o["ra"]):
        # a bare number is taken as degrees; say so, since hours are common for RA
        click.echo(f"note: --ra {o['ra']} read as degrees", err=True)
    obs = observation(
        o["ra"],
        o["dec"],
        o["start"],
        o["duration"],
        o["frequency"],
        integration=o["integration"],
        bandwidth=o["bandwidth"],
        channels=o["channels"],
        scan_length=o["scan_length"],
        source=o["source"],
    )
    corruption = {"gain_error": o["gain_error"], "phase_error": o["phase_error"], "systematic": o["systematic"]}
    from ..sim.noise import check_corruption

    check_corruption(corruption["gain_error"], corruption["phase_error"], corruption["systematic"])
    return obs, corruption


def _is_number(text):
    try:
        float(text)
        return True
    except ValueError:
        return False
