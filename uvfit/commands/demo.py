"""uvfit demo: the whole job on the invented data that ship with uvfit, into one folder."""

import sys

import click

from ._common import as_options, seed_option


@click.command("demo")
@click.option(
    "--out",
    "out_dir",
    default="uvfit-demo",
    show_default=True,
    metavar="DIR",
    type=click.Path(file_okay=False),
    help="Folder for every output (created; an existing non-empty folder is refused unless --force).",
)
@seed_option
@click.option(
    "--bootstrap",
    type=click.IntRange(min=0),
    default=100,
    show_default=True,
    metavar="N",
    help="Simulations for the false-alarm probability of the single component (100 can show one below 1%).",
)
@click.option(
    "--max-steps",
    type=click.IntRange(min=1),
    default=6000,
    show_default=True,
    metavar="N",
    help="Longest MCMC chain (steps per walker); it stops earlier once converged.",
)
@click.option(
    "--procs",
    type=click.IntRange(min=1),
    default=None,
    metavar="N",
    help="Processes for the starts and the bootstrap simulations (default: every core). "
    "The numbers do not depend on N.",
)
@click.option(
    "--force", is_flag=True, help="Write into an existing non-empty folder, overwriting the demo's files there."
)
def command(out_dir, seed, bootstrap, max_steps, procs, force):
    """Run the whole job on the demo data: describe, fit one and two components, decide between
    them, sample the posterior, check the closures, write the report.

    The data are invented: an invented array observes the invented source UVD 0917+224, a double
    whose parts are closer than the array's nominal resolution. The outputs (JSON, HTML report,
    figures, chain, copies of the data and model files) go into DIR; the last line printed is the
    answer. About a minute or two.
    """
    from ..demo import check_out_dir, run_demo

    def progressbar(length, label):
        return click.progressbar(length=length, label=label, file=sys.stderr)

    with as_options(out_dir="--out", force="--force"):
        check_out_dir(out_dir, force)  # the folder is checked (and made) before any work
    run_demo(
        out_dir,
        seed=seed,
        bootstrap=bootstrap,
        force=force,
        max_steps=max_steps,
        echo=click.echo,
        progressbar=progressbar,
        procs=procs,
    )
