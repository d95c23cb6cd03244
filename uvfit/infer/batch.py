"""Many fits at once: a batch manifest run as one task per job on a Dask cluster.

The manifest (TOML, the project's own format; see README, "batch"):

    [defaults]                 # shared by every job; any job may override any key
    command = "fit"            # "fit" or "sample"
    mode = "complex"
    starts = "auto"            # as uvfit fit --starts; a number also works
    seed = 1
    output_dir = "results"     # each job's JSON is written here as NAME.json

    [[job]]
    name = "epoch-1"           # optional; defaults to the data file's stem
    data = "epoch1.uvfits"     # paths are relative to the manifest's folder
    model = "double.toml"

Each job runs as one task through the same library call that ``uvfit fit`` / ``uvfit sample``
makes, so a job's JSON equals the one the command writes for the same inputs and seed. A job that
fails records its error and the others go on. A job whose JSON exists and records the same input
digest (data bytes, model bytes, options, uvfit version) is skipped on a rerun.
"""

import hashlib
import json
import os

import tomllib

from .. import __version__
from ..errors import UvfitError

#: options a job may set, with their defaults; anything else in a job is an error
JOB_OPTIONS = {
    "command": "fit",
    "mode": "complex",
    "systematic": 0.0,
    "rescale_errors": False,
    "starts": "auto",
    "global_search": False,
    "seed": 0,
    "redshift": 0.0,
    "walkers": None,
    "max_steps": 2000,
    "selection": None,
}
_JOB_KEYS = {"name", "data", "model", "output_dir", *JOB_OPTIONS}
COMMANDS = ("fit", "sample")


def _read_manifest_text(path):
    from ..inputs import read_input_bytes

    raw = read_input_bytes(path, "batch manifest")
    try:
        return tomllib.loads(raw.decode("utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise UvfitError(
            f"the batch manifest {path} is not valid TOML: {exc}", "fix the syntax at the line named"
        ) from None
    except RecursionError:
        raise UvfitError(
            f"the batch manifest {path} is nested too deeply to read",
            "a manifest has a [defaults] table and [[job]] entries only",
        ) from None


def load_manifest(path):
    """Parse a manifest into a list of job dictionaries with absolute paths and all options."""
    doc = _read_manifest_text(path)
    folder = os.path.dirname(os.path.abspath(path))
    unknown_top = set(doc) - {"defaults", "job"}
    if unknown_top:
        raise UvfitError(
            f"unknown key(s) {sorted(unknown_top)} at the top of {path}",
            "a manifest has a [defaults] table and [[job]] entries only",
        )
    defaults = doc.get("defaults", {})
    if not isinstance(defaults, dict):
        raise UvfitError(f"'defaults' in the batch manifest {path} is not a table", "write it as a [defaults] table")
    jobs = doc.get("job", [])
    if not isinstance(jobs, list) or not jobs:
        raise UvfitError(f"the batch manifest {path} lists no jobs", "add [[job]] entries with data and model")
    out, names = [], set()
    for number, entry in enumerate(jobs, 1):
        if not isinstance(entry, dict):
            raise UvfitError(f"job {number} of {path} is not a table", "write each job as [[job]]")
        spec = {**defaults, **entry}
        unknown = set(spec) - _JOB_KEYS
        if unknown:
            raise UvfitError(
                f"job {number} of {path}: unknown key(s) {sorted(unknown)}",
                "known keys: " + ", ".join(sorted(_JOB_KEYS)),
            )
        for key in ("data", "model"):
            if key not in spec:
                raise UvfitError(f"job {number} of {path} has no '{key}'", f"give the {key} file's path")
        job = {k: spec.get(k, v) for k, v in JOB_OPTIONS.items()}
        if job["command"] not in COMMANDS:
            raise UvfitError(f"job {number} of {path}: unknown command '{job['command']}'", "use 'fit' or 'sample'")
        for key in ("data", "model", "output_dir"):
            if key in spec and not isinstance(spec[key], str):
                raise UvfitError(
                    f"job {number} of {path}: '{key}' must be a path (a string), "
                    f"not {type(spec[key]).__name__} {spec[key]!r}",
                    f'write it in quotes, e.g. {key} = "file"',
                )
        job["data"] = os.path.normpath(os.path.join(folder, spec["data"]))
        job["model"] = os.path.normpath(os.path.join(folder, spec["model"]))
        name = spec.get("name")
        if name is None:
            name = os.path.splitext(os.path.basename(spec["data"]))[0]
        job["name"] = check_job_name(name, number, path)
        if job["name"] in names:
            raise UvfitError(
                f"job {number} of {path}: the name '{job['name']}' is used twice", "give each job its own name"
            )
        names.add(job["name"])
        job["output_dir"] = os.path.normpath(os.path.join(folder, spec.get("output_dir", "batch-results")))
        out.append(job)
    return out


def check_job_name(name, number, path):
    """A job name is a plain file name: it becomes NAME.json inside the output folder, so it may
    hold no folder separator, no control character, and be neither '.', '..' nor hidden."""
    if not isinstance(name, str) or not name.strip():
        raise UvfitError(
            f"job {number} of {path}: the name {name!r} is not a plain name",
            "give each job a name of letters, digits, '-', '_' or '.'",
        )
    bad = [c for c in name if c in "/\\" or ord(c) < 32 or ord(c) == 127]
    if bad or name in (".", "..") or name.startswith(".") or os.path.isabs(name) or name != name.strip():
        shown = name.encode("unicode_escape").decode("ascii")
        raise UvfitError(
            f"job {number} of {path}: the name '{shown}' is not a plain file name "
            "(it would place its result outside the output folder or hide it)",
            "use letters, digits, '-', '_' and '.' only, not starting with '.'",
        )
    return name


def check_outputs(jobs, force=False):
    """Before any work: every job's result stays inside its output folder, no two jobs share a
    result file, and an existing file that is not this job's own earlier batch result is never
    overwritten (unless ``force``)."""
    seen = {}
    for job in jobs:
        out = job_output(job)
        folder = os.path.realpath(job["output_dir"])
        real = os.path.realpath(out)
        if os.path.dirname(real) != folder:
            raise UvfitError(
                f"job '{job['name']}': its result {out} would be written outside the output folder {job['output_dir']}",
                "give the job a plain name and no links in the output folder",
            )
        key = os.path.normcase(real)
        if key in seen:
            raise UvfitError(
                f"jobs '{seen[key]}' and '{job['name']}' would write the same result file {out}",
                "give each job its own name",
            )
        seen[key] = job["name"]
        for other in ("data", "model"):
            if os.path.exists(job[other]) and os.path.realpath(job[other]) == real:
                raise UvfitError(
                    f"job '{job['name']}': its result {out} is its own {other} file",
                    "choose another output_dir or name",
                )
        if os.path.lexists(out) and not force and not _own_result(out, job):
            raise UvfitError(
                f"job '{job['name']}': {out} exists and is not a batch result of this job",
                "move it away, choose another `output_dir`, or pass `force`",
            )


def _own_result(path, job):
    """True when ``path`` is a regular file holding an earlier batch result of this job's name."""
    if os.path.islink(path) or not os.path.isfile(path):
        return False
    try:
        with open(path) as handle:
            done = json.load(handle)
    except (OSError, ValueError, UnicodeDecodeError, RecursionError):
        return False
    return isinstance(done, dict) and isinstance(done.get("batch"), dict) and done["batch"].get("name") == job["name"]


def job_digest(job):
    """SHA-256 of what decides a job's result: the data and model bytes, its options, the version."""
    h = hashlib.sha256()
    for key in ("data", "model"):
        if not os.path.isfile(job[key]) and not os.path.isdir(job[key]):
            h.update(f"not a file:{job[key]}".encode())
            continue
        try:
            with open(job[key], "rb") as handle:
                for block in iter(lambda: handle.read(1 << 20), b""):
                    h.update(block)
        except OSError:
            h.update(f"missing:{job[key]}".encode())
    options = {k: job[k] for k in sorted(JOB_OPTIONS)}
    h.update(json.dumps(options, sort_keys=True, default=str).encode())
    h.update(__version__.encode())
    return h.hexdigest()


def job_output(job):
    return os.path.join(job["output_dir"], job["name"] + ".json")


def is_current(job):
    """True when the job's JSON exists and records the digest of its present inputs."""
    path = job_output(job)
    try:
        with open(path) as handle:
            done = json.load(handle)
    except (OSError, ValueError, UnicodeDecodeError, RecursionError):
        return False
    if not _own_result(path, job):
        return False
    return done["batch"].get("input_digest") == job_digest(job)


def run_job(job):
    """Run one job (a Dask task); return a row dictionary. Never raises: errors become the row."""
    from ..outputs import write_json

    row = {
        "name": job["name"],
        "command": job["command"],
        "data": job["data"],
        "model": job["model"],
        "status": "failed",
        "error": "",
        "output": job_output(job),
    }
    from .._blas import single_threaded

    try:
        digest = job_digest(job)
        with single_threaded():
            result = _run(job)
        result["batch"] = {
            "name": job["name"],
            "input_digest": digest,
            "options": {k: job[k] for k in sorted(JOB_OPTIONS)},
        }
        os.makedirs(job["output_dir"], exist_ok=True)
        write_json(job_output(job), result, force=True)
        row.update(status="done", result=result)
    except UvfitError as exc:
        row["error"] = str(exc)
    except Exception as exc:  # a job must never take the batch down
        row["error"] = f"{type(exc).__name__}: {exc}"
    return row


def _run(job):
    """The same tasks the fit and sample commands call (``uvfit.tasks``)."""
    from .. import tasks

    selection = job["selection"] or {}
    if job["command"] == "fit":
        return tasks.fit(
            job["data"],
            job["model"],
            mode=job["mode"],
            systematic=job["systematic"],
            rescale_errors=job["rescale_errors"],
            starts=job["starts"],
            global_search=job["global_search"],
            seed=job["seed"],
            redshift=job["redshift"],
            selection=selection,
        ).to_dict()
    return tasks.sample(
        job["data"],
        job["model"],
        mode=job["mode"],
        systematic=job["systematic"],
        walkers=job["walkers"],
        max_steps=job["max_steps"],
        seed=job["seed"],
        starts=job["starts"],
        redshift=job["redshift"],
        selection=selection,
    ).to_dict()


def failed_row(job, error):
    """The row of a job that could not run to its end."""
    return {
        "name": job["name"],
        "command": job["command"],
        "data": job["data"],
        "model": job["model"],
        "status": "failed",
        "error": error,
        "output": job_output(job),
    }


def cached_row(job):
    with open(job_output(job)) as handle:
        result = json.load(handle)
    return {
        "name": job["name"],
        "command": job["command"],
        "data": job["data"],
        "model": job["model"],
        "status": "cached",
        "error": "",
        "output": job_output(job),
        "result": result,
    }


def run_batch(jobs, scheduler=None, workers=2, progress=None):
    """Run the jobs on Dask; returns (rows in manifest order, number of jobs actually run).

    Without ``scheduler`` a LocalCluster of ``workers`` single-threaded processes on loopback is
    started and closed again; with it, the client connects to that scheduler address.
    """
    try:
        from dask.distributed import Client, LocalCluster, as_completed
    except ImportError:
        raise UvfitError(
            "uvfit batch needs Dask's distributed scheduler, which is not installed",
            "pip install 'uvfit[batch]' (or: pip install 'dask[distributed]')",
        ) from None
    check_cluster(scheduler, workers)
    rows = {}
    todo = []
    for job in jobs:
        if is_current(job):
            rows[job["name"]] = cached_row(job)
        else:
            todo.append(job)
    if progress:
        progress(len(rows))
    if todo:
        cluster = None
        try:
            if scheduler:
                client = _connect(scheduler, SCHEDULER_TIMEOUT)
            else:
                cluster = LocalCluster(
                    n_workers=int(workers),
                    threads_per_worker=1,
                    processes=True,
                    host="127.0.0.1",
                    dashboard_address=None,
                )
                client = Client(cluster)
        except (OSError, TimeoutError) as exc:
            raise UvfitError(
                f"cannot reach the Dask scheduler {scheduler or '(local)'}: {exc}",
                "check the address (tcp://HOST:PORT) and that the scheduler runs",
            ) from None
        try:
            futures = {
                client.submit(run_job, job, key=f"uvfit-{job['name']}-{job_digest(job)[:12]}", pure=False): job
                for job in todo
            }
            for future in as_completed(list(futures)):
                try:
                    row = future.result()
                except Exception as exc:  # the worker died (or the task was lost): that job failed
                    row = failed_row(futures[future], f"the worker running it died ({type(exc).__name__}: {exc})")
                rows[row["name"]] = row
                if progress:
                    progress(1)
        finally:
            client.close()
            if cluster is not None:
                cluster.close()
    return [rows[job["name"]] for job in jobs], len(todo)


#: seconds to wait for a scheduler to answer (connection and handshake) before giving up
SCHEDULER_TIMEOUT = 20.0
_SCHEMES = ("tcp", "tls")


def check_cluster(scheduler, workers):
    """Refuse a local cluster of no workers and a scheduler address Dask cannot dial."""
    if scheduler is None:
        if isinstance(workers, bool) or not isinstance(workers, int) or workers < 1:
            raise UvfitError(
                f"workers must be a whole number of at least 1, not {workers!r}",
                "a local cluster needs at least one worker process",
            )
        return
    import re

    m = re.fullmatch(
        r"(?:(?P<scheme>[A-Za-z][\w+.-]*)://)?(?P<host>\[[0-9A-Fa-f:.]+\]|[\w.-]+):(?P<port>\d{1,5})", scheduler or ""
    )
    if not m or (m["scheme"] or "tcp").lower() not in _SCHEMES or not 0 < int(m["port"]) < 65536:
        raise UvfitError(
            f"scheduler address '{scheduler}' is not tcp://HOST:PORT",
            "give the address the Dask scheduler prints, e.g. tcp://10.0.0.5:8786",
        )


def _connect(scheduler, timeout):
    """A Dask client of ``scheduler``, or a clear error within about ``timeout`` seconds: the
    connection, the handshake and the first answer are all bounded."""
    import concurrent.futures

    import dask
    from dask.distributed import Client

    def dial():
        with dask.config.set({"distributed.comm.timeouts.connect": f"{timeout}s"}):
            client = Client(scheduler, timeout=f"{timeout}s")
        return client

    pool = concurrent.futures.ThreadPoolExecutor(1)
    future = pool.submit(dial)
    try:
        client = future.result(timeout + 5.0)
    except concurrent.futures.TimeoutError:
        pool.shutdown(wait=False, cancel_futures=True)
        raise UvfitError(
            f"the Dask scheduler {scheduler} did not answer within {timeout:g} s",
            "check the address and that a Dask scheduler (not another program) listens there",
        ) from None
    except (OSError, TimeoutError, ValueError) as exc:
        pool.shutdown(wait=False)
        raise UvfitError(
            f"cannot reach the Dask scheduler {scheduler}: {exc}",
            "check the address (tcp://HOST:PORT) and that the scheduler runs",
        ) from None
    pool.shutdown(wait=False)
    return client


def results_table(rows):
    """One astropy Table row per job: status, error, chi-square, every parameter and derived value."""
    import numpy as np
    from astropy.table import Table

    value_keys = []
    for row in rows:
        result = row.get("result") or {}
        for section in ("parameters", "derived"):
            for key, entry in (result.get(section) or {}).items():
                if isinstance(entry, dict) and (key, section) not in value_keys:
                    value_keys.append((key, section))
    table = Table()
    table["name"] = [r["name"] for r in rows]
    table["command"] = [r["command"] for r in rows]
    table["status"] = [r["status"] for r in rows]
    table["error"] = [r["error"] for r in rows]
    stats = [((r.get("result") or {}).get("statistics") or {}) for r in rows]
    for key in ("chi2", "dof", "reduced_chi2", "aic", "bic"):
        table[key] = np.array([s.get(key) if s.get(key) is not None else np.nan for s in stats], float)
    for key, section in value_keys:
        values, errors, unit = [], [], ""
        for r in rows:
            entry = ((r.get("result") or {}).get(section) or {}).get(key) or {}
            unit = unit or entry.get("unit") or ""
            value = entry.get("value", entry.get("median"))
            if "error" in entry:
                err = entry.get("error")
            elif "upper" in entry and "lower" in entry and entry["upper"] is not None and entry["lower"] is not None:
                err = 0.5 * (entry["upper"] - entry["lower"])
            else:
                err = None
            values.append(np.nan if not isinstance(value, (int, float)) or isinstance(value, bool) else value)
            errors.append(np.nan if err is None else err)
        table[key] = np.array(values, float)
        table[key + "_error"] = np.array(errors, float)
        if unit:
            table[key].unit = unit
            table[key + "_error"].unit = unit
    table["data"] = [r["data"] for r in rows]
    table["model"] = [r["model"] for r in rows]
    table["output"] = [r["output"] for r in rows]
    table.meta["uvfit_version"] = __version__
    return table
