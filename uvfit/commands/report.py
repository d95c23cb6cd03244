"""uvfit report: one self-contained HTML page of a fit, its checks, figures and cautions."""

import click

from ._common import echo_notes, force_option, pop_selection, selection_options


@click.command("report")
@click.argument("data", type=click.Path())
@click.option(
    "--fit",
    "fit_path",
    required=True,
    type=click.Path(dir_okay=False),
    help="Fit output written by 'uvfit fit --json'.",
)
@click.option(
    "--posterior",
    "posterior_path",
    default=None,
    type=click.Path(dir_okay=False),
    help="Posterior summary written by 'uvfit sample --json'.",
)
@click.option(
    "--chain",
    "chain_path",
    default=None,
    type=click.Path(dir_okay=False),
    help="HDF5 chain written by 'uvfit sample'; adds a corner plot.",
)
@click.option(
    "--compare",
    "compare_path",
    default=None,
    type=click.Path(dir_okay=False),
    help="Model comparison written by 'uvfit compare --json'.",
)
@click.option("-o", "--out", "out", required=True, type=click.Path(dir_okay=False), help="HTML file to write.")
@force_option
@selection_options
def command(data, fit_path, posterior_path, chain_path, compare_path, out, force, **kwargs):
    """Write one HTML page that shows the fit in FIT.json on the visibilities in DATA.

    The page holds the data summary, the parameters and derived quantities with their errors, the
    goodness of fit, the closure check of the fitted model, the comparison and posterior when
    given, the figures, and the cautions. It needs nothing but a browser: figures are embedded,
    nothing is loaded from the network. The same inputs give the same file, byte for byte.
    """
    import os

    from ..outputs import atomic_write, check_writable
    from ..show import readback
    from ..show.report import build_report, run_closure_check

    selection = pop_selection(kwargs)
    check_writable(out, force)
    posterior = readback.load_posterior(posterior_path) if posterior_path else None
    compare = readback.load_compare(compare_path) if compare_path else None
    chain = None
    if chain_path:
        discard, thin = readback.chain_settings(posterior)
        chain = readback.read_chain(chain_path, discard, thin)
    view, notes = readback.open_fit_view(data, fit_path, selection)
    echo_notes(notes)
    if chain is not None:
        chain = readback.order_chain(chain, view.model, posterior)
    check = run_closure_check(view)
    page = build_report(
        view,
        closure_check=check,
        posterior=posterior,
        chain=chain,
        compare=compare,
        data_name=os.path.basename(str(data)),
    )
    atomic_write(out, page, force=force)
    click.echo(f"wrote {out}")
