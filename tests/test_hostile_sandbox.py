"""Bad inputs (files built in the test, see tests/helpers/hostile.py) fed to the command line in
one subprocess under a memory limit and a time limit. For each: exit code 2, one line on stderr
that starts with 'uvfit: error:' and names the file (or option) and the problem, no traceback, no
raw RuntimeWarning, no file changed or made anywhere (the work folder, the output folder and the
folder beside them), a bounded growth of memory and a bounded time.

The rules checked are the project's own (DEVELOPERS.md, "Errors and outputs"); the limits below
are generous bounds, far above what a refusal needs (common practice: a refusal reads headers,
never the whole of a hostile file into fixed-width strings).
"""

import json
import os
import resource
import subprocess
import sys

import pytest
from helpers.hostile import PROBES, ROOT

#: address-space limit of the probe process (bytes)
MEMORY_LIMIT = 3 * 1024**3
#: most the peak resident memory may grow during one probe (bytes)
MEMORY_GROWTH = 400 * 1024**2
#: most one probe may take (s), and the whole run
PROBE_SECONDS = 30.0
RUN_SECONDS = 900

PROGRESS_LABELS = {"jobs", "sampling", "fitting", "profiling"}


def _limit():
    resource.setrlimit(resource.RLIMIT_AS, (MEMORY_LIMIT, MEMORY_LIMIT))


@pytest.fixture(scope="module")
def records(tmp_path_factory):
    root = tmp_path_factory.mktemp("hostile")
    report = root / "records.json"
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(ROOT), str(ROOT / "tests")]), MPLBACKEND="Agg")
    for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS"):
        env[var] = "1"
    env.pop("UVFIT_DEBUG", None)
    run = subprocess.run(
        [sys.executable, "-m", "helpers.hostile", str(root / "probes"), str(report)],
        cwd=ROOT / "tests",
        env=env,
        preexec_fn=_limit,
        capture_output=True,
        text=True,
        timeout=RUN_SECONDS,
    )
    assert run.returncode == 0, run.stderr[-3000:]
    return {r["name"]: r for r in json.loads(report.read_text())}


def test_enough_probes():
    assert len(REFUSED) >= 60


REFUSED = sorted(n for n, p in PROBES.items() if p.outputs is None)
ACCEPTED = sorted(n for n, p in PROBES.items() if p.outputs is not None)


def _clean(r, where):
    for text in (r["stderr"], r["stdout"]):
        assert "Traceback" not in text and "internal error" not in text, where
        assert "RuntimeWarning" not in text and "Warning:" not in text, where
    assert r["seconds"] < PROBE_SECONDS, where
    assert r["memory_growth"] < MEMORY_GROWTH, f"{r['memory_growth'] / 2**20:.0f} MiB: {where}"


@pytest.mark.parametrize("name", ACCEPTED)
def test_accepted_cleanly(records, name):
    """Odd but usable inputs: exit code 0, the bad rows named, only the asked-for outputs written."""
    r = records[name]
    where = f"{r['args']}\nstderr: {r['stderr'][-1500:]}\nstdout: {r['stdout'][-1500:]}"
    assert r["code"] == 0, where
    _clean(r, where)
    assert "error" not in r["stderr"], where
    for text in r["expect"]:
        assert text in r["stdout"] + r["stderr"], f"{text!r} missing: {where}"
    allowed = {os.path.join("work", o) for o in PROBES[name].outputs}
    assert set(r["changed"]) == allowed, where


@pytest.mark.parametrize("name", REFUSED)
def test_refused_cleanly(records, name):
    r = records[name]
    err = r["stderr"]
    where = f"{r['args']}\nstderr: {err}\nstdout: {r['stdout'][-500:]}"
    assert r["code"] == 2, where
    _clean(r, where)
    lines = [line for line in err.splitlines() if line.strip()]
    lines = [line for line in lines if line.split()[0].rstrip(":") not in PROGRESS_LABELS]
    assert len(lines) == 1, where
    message = lines[0]
    assert message.startswith("uvfit: error: "), where
    assert "allocate" not in message and message.strip() != "uvfit: error:", "a memory error, not a refusal: " + where
    for text in r["expect"]:
        assert text in message, f"{text!r} missing: {where}"
    assert not r["changed"], f"files changed or made: {r['changed']}; {where}"
