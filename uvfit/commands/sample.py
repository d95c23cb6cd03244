"""uvfit sample: posterior distributions of a model's parameters by ensemble MCMC."""

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
    progressbar,
    seed_option,
    selection_options,
    starts_option,
    worded,
)


@click.command("sample")
@click.argument("data", nargs=-1, required=True, type=click.Path(dir_okay=False))
@click.argument("model")
@click.option(
    "--mode",
    type=click.Choice(list(MODES)),
    default="complex",
    show_default=True,
    help="Which quantities the likelihood compares.",
)
@click.option(
    "--systematic",
    type=float,
    callback=at_least_zero,
    default=0.0,
    show_default=True,
    metavar="F",
    help="Fraction of |V| added in quadrature to every sigma.",
)
@click.option(
    "--walkers",
    type=int,
    default=None,
    metavar="N",
    help="Number of walkers (default max(32, 4 x free parameters); taken from the chain on --resume).",
)
@click.option(
    "--max-steps",
    type=int,
    default=5000,
    show_default=True,
    metavar="N",
    help="Longest chain (steps per walker, counting steps already in a resumed chain).",
)
@seed_option
@click.option(
    "--procs", type=int, default=1, show_default=True, metavar="N", help="Evaluate the walkers in N processes."
)
@click.option(
    "--chain",
    "chain_path",
    default=None,
    metavar="OUT.h5",
    help="Keep the chain in this HDF5 file (needed for --resume).",
)
@click.option("--resume", is_flag=True, help="Continue the chain in --chain where it stopped.")
@click.option(
    "--corner", "corner_path", default=None, metavar="OUT.png", help="Write a corner plot of the free parameters."
)
@click.option(
    "--derived",
    "derived",
    multiple=True,
    metavar="KEY",
    help="Draw this derived quantity beside the free parameters in the --corner plot: a key such as "
    "core-knot.separation, or a quantity (separation, position_angle, flux_ratio, size...) for every "
    "key of that quantity. Repeatable.",
)
@click.option("--json", "json_path", default=None, metavar="OUT.json", help="Write the posterior summaries as JSON.")
@click.option(
    "--order-by",
    type=click.Choice(["flux", "distance"]),
    default="flux",
    show_default=True,
    help="Label components of the same shape in every sample by flux (brightest first) "
    "or by distance from the phase centre (nearest first).",
)
@starts_option(
    "Least-squares starts for the point the walkers start from (the first at the "
    "model file's values, the others random, seeded)." + STARTS_AUTO_HELP
)
@click.option(
    "--redshift",
    type=float,
    callback=at_least_zero,
    default=0.0,
    show_default=True,
    help="Redshift for the rest-frame brightness temperatures.",
)
@click.option(
    "--rescale-errors", is_flag=True, help="Multiply every sigma by sqrt(chi2/dof) of the least-squares fit first."
)
@gain_options
@force_option
@closure_options
@selection_options
def command(
    data,
    model,
    mode,
    systematic,
    walkers,
    max_steps,
    seed,
    procs,
    chain_path,
    resume,
    corner_path,
    derived,
    json_path,
    order_by,
    starts,
    redshift,
    rescale_errors,
    force,
    **kwargs,
):
    """Sample the posterior of MODEL's free parameters given the visibilities in DATA.

    The chain starts at the least-squares best fit and stops when the autocorrelation time has
    settled (or at --max-steps). Priors are those of the model file (uniform inside the bounds
    where none is given). Prints medians with 68% and 95% credible intervals of every free
    parameter and derived quantity; sizes consistent with zero are given as 95% upper limits.
    """
    from .. import tasks
    from ..infer.sampling import check_chain_file
    from ..outputs import write_json
    from ..show.corner import write_corner_plot

    closure = pop_closure_options(kwargs)
    selection = pop_selection(kwargs)
    gains = pop_gains(kwargs)
    names = dict(procs="--procs", walkers="--walkers", max_steps="--max-steps", order_by="--order-by")
    data, data_inputs = joint_data(data)
    with as_options(**names):
        tasks.check_sample_options(procs=procs, walkers=walkers, max_steps=max_steps, order_by=order_by)
        tasks.closure_options(mode, **closure)
    # refuse early, before any long work, whatever would be refused at the end
    check_outputs(
        {"--chain": chain_path, "--json": json_path, "--corner": corner_path},
        {**data_inputs, "the model": model},
        force=True,
    )
    check_outputs({"--json": json_path, "--corner": corner_path}, {}, force)
    if derived:
        from ..errors import UvfitError
        from ..show.corner import derived_keys, select_derived

        if corner_path is None:
            raise UvfitError(
                "--derived names quantities of the corner plot, but none is written", "add --corner OUT.png"
            )
        with as_options(derived="--derived"):
            select_derived(derived_keys(tasks.load_model_or_path(model)), derived)
    previous = check_chain_file(chain_path, resume, force)

    todo = max(max_steps - previous, 0)
    with progressbar(max(todo, 1), "sampling", show_pos=True) as bar:
        state = {"done": 0}

        def progress(done):
            bar.update(done - state["done"])
            state["done"] = done

        with as_options(**GAIN_OPTION_NAMES):
            report = tasks.sample(
                data,
                model,
                mode=mode,
                systematic=systematic,
                walkers=walkers,
                max_steps=max_steps,
                seed=seed,
                procs=procs,
                chain=chain_path,
                resume=resume,
                force=force,
                order_by=order_by,
                progress=progress,
                starts=starts,
                redshift=redshift,
                selection=selection,
                rescale_errors=rescale_errors,
                **gains,
                **closure,
            )
    echo_notes(report.notes)
    echo_notes(report.posterior.notes, prefix="note: ")
    click.echo(worded(report.text()))
    if json_path is not None:
        write_json(json_path, report.to_dict(), force=force)
        click.echo(f"wrote {json_path}", err=True)
    if corner_path is not None:
        with as_options(derived="--derived"):
            write_corner_plot(report.posterior, corner_path, force=force, derived=derived)
        click.echo(f"wrote {corner_path}", err=True)
