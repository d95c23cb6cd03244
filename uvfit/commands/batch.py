"""uvfit batch: run a manifest of fit or sample jobs on a Dask cluster."""

import os

import click

from ..outputs import atomic_write_with
from ._common import as_options, check_outputs, force_option, progressbar


@click.command("batch")
@click.argument("manifest", type=click.Path(dir_okay=False))
@click.option(
    "--scheduler",
    default=None,
    metavar="ADDRESS",
    help="Connect to a running Dask scheduler (tcp://HOST:PORT) instead of a local cluster.",
)
@click.option(
    "--workers",
    type=int,
    default=2,
    show_default=True,
    help="Worker processes of the local cluster (ignored with --scheduler).",
)
@click.option(
    "-o",
    "--output",
    "output",
    default=None,
    metavar="RESULTS.ecsv",
    help="Results table, one row per job (default: batch-results.ecsv beside the manifest).",
)
@force_option
def command(manifest, scheduler, workers, output, force):
    """Fit many datasets: one Dask task per job of MANIFEST, results gathered into one table.

    Jobs whose JSON output exists and matches their inputs are not run again.
    """
    from ..infer.batch import check_cluster, job_output, load_manifest, results_table, run_batch
    from ..infer.batch import check_outputs as check_job_outputs
    from ..show.text import batch_text

    with as_options(workers="--workers", scheduler="--scheduler", output_dir="--output"):
        check_cluster(scheduler, workers)
    jobs = load_manifest(manifest)
    if output is None:
        output = os.path.join(os.path.dirname(os.path.abspath(manifest)), "batch-results.ecsv")
    inputs = {"the manifest": manifest}
    for job in jobs:
        inputs[f"job {job['name']}'s data"] = job["data"]
        inputs[f"job {job['name']}'s model"] = job["model"]
        inputs[f"job {job['name']}'s result"] = job_output(job)
    check_outputs({"-o": output}, inputs, force=True, stdout_ok=())
    check_job_outputs(jobs, force=force)
    # Rule: the results table is derived from the jobs' own JSON files, so a table written by an
    # earlier batch run of the same manifest is rewritten; any other existing file needs --force.
    rewrite = force or _is_own_table(output, manifest)
    if os.path.exists(output) and not rewrite:
        from ..errors import UvfitError

        raise UvfitError(
            f"results table {output} exists and was not written by this manifest",
            "choose another -o, or pass --force to overwrite it",
        )
    with progressbar(len(jobs), "jobs") as bar:
        rows, n_run = run_batch(jobs, scheduler=scheduler, workers=workers, progress=bar.update)
    table = results_table(rows)
    table.meta["uvfit_batch_manifest"] = os.path.abspath(manifest)
    atomic_write_with(output, lambda tmp: table.write(tmp, format="ascii.ecsv"), force=rewrite)
    click.echo(batch_text(rows, n_run, output))
    n_failed = sum(r["status"] == "failed" for r in rows)
    if n_failed:
        raise SystemExit(1)


def _is_own_table(path, manifest):
    if not os.path.exists(path):
        return False
    try:
        from astropy.table import Table

        meta = Table.read(path, format="ascii.ecsv").meta
    except Exception:
        return False
    return meta.get("uvfit_batch_manifest") == os.path.abspath(manifest)
