"""Hostile command lines, manifests and files: each probe must end with exit code 2 and one line
naming the problem, no traceback, nothing written outside the output folder, nothing overwritten
without --force.

The expected behaviour is the project's own rule (DEVELOPERS.md, "Errors and outputs"), so each
check compares against the files as they were before the command ran (byte for byte) and the
exit code the command line promises for the user's mistakes (2).
"""

import errno
import json
import os
import shutil
import socket
import threading
import time

import pytest

from uvfit.cli import main

DEMO = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "uvfit", "demo_data")
SENTINEL = b"precious: not made by uvfit\n"


#: labels of the progress bars, printed once on stderr when it is not a terminal
PROGRESS_LABELS = {"jobs", "sampling", "fitting"}


def _snapshot(root):
    """Every file under ``root`` with its bytes."""
    out = {}
    for folder, _, files in os.walk(root):
        for name in files:
            path = os.path.join(folder, name)
            with open(path, "rb") as handle:
                out[path] = handle.read()
    return out


def probe(args, cwd, capsys, outside=None, allowed=()):
    """Run ``uvfit ARGS`` in ``cwd``; assert exit 2, one line on stderr, no traceback, nothing
    changed in ``outside`` (a folder that must stay as it was) and no new file in ``cwd`` except
    those in ``allowed``. Returns the message."""
    before_out = _snapshot(outside) if outside else {}
    before = _snapshot(cwd)
    old = os.getcwd()
    os.chdir(cwd)
    try:
        with pytest.raises(SystemExit) as exc:
            main(list(args))
    finally:
        os.chdir(old)
    captured = capsys.readouterr()
    err = captured.err.strip()
    assert exc.value.code == 2, (args, exc.value.code, captured.err)
    assert "Traceback" not in captured.err and "internal error" not in captured.err, captured.err
    lines = [line for line in err.splitlines() if line.strip()]
    lines = [line for line in lines if line.split()[0].rstrip(":") not in PROGRESS_LABELS]
    assert len(lines) == 1, err
    assert lines[0].startswith("uvfit: error:"), err
    if outside:
        assert _snapshot(outside) == before_out, "a file outside the output folder changed"
    after = _snapshot(cwd)
    for path, data in before.items():
        assert after.get(path) == data, f"{path} changed or vanished"
    new = set(after) - set(before) - {os.path.join(cwd, a) for a in allowed}
    assert not new, f"new files: {sorted(new)}"
    return lines[0]


@pytest.fixture
def demo(tmp_path):
    """A work folder holding copies of the demo data and models, and a folder beside it that no
    command may touch (holding one precious file)."""
    work = tmp_path / "work"
    work.mkdir()
    for name in ("uvd0917.uvfits", "one.toml", "two.toml"):
        shutil.copy(os.path.join(DEMO, name), work / name)
    victim = tmp_path / "x"
    victim.mkdir()
    (victim / "victim.json").write_bytes(SENTINEL)
    return work, victim


def _manifest(work, body, defaults='output_dir = "out"\n'):
    (work / "m.toml").write_text("[defaults]\n" + defaults + "\n" + body)
    return "m.toml"


def _job(name=None, data="uvd0917.uvfits", model="one.toml"):
    line = "" if name is None else f"name = {json.dumps(name)}\n"
    return f'[[job]]\n{line}data = {json.dumps(data) if isinstance(data, str) else data}\nmodel = "{model}"\n'


# ---- item 1: batch job names never leave the output folder -----------------------------------


@pytest.mark.parametrize(
    "name",
    ["../../x/victim", "../x/victim", "sub/a", "./a", "..", ".", ".hidden", "a\\b", "a\x1b[2Jb", "a\nb", " a", ""],
)
def test_batch_job_name_must_be_plain(demo, capsys, name):
    work, victim = demo
    name = name.replace("/x/", f"/{victim.name}/")
    _manifest(work, _job(name))
    message = probe(["batch", "m.toml"], work, capsys, outside=victim)
    assert "name" in message and "m.toml" in message


def test_batch_absolute_job_name_refused(demo, capsys):
    work, victim = demo
    _manifest(work, _job(str(victim / "victim")))
    message = probe(["batch", "m.toml"], work, capsys, outside=victim)
    assert "not a plain file name" in message


def test_batch_names_a_and_dot_a_do_not_share_a_result(demo, capsys):
    work, victim = demo
    _manifest(work, _job("a") + _job("./a"))
    probe(["batch", "m.toml"], work, capsys, outside=victim)


def test_batch_never_overwrites_a_file_it_did_not_make(demo, capsys):
    work, _ = demo
    (work / "out").mkdir()
    (work / "out" / "a.json").write_bytes(SENTINEL)
    _manifest(work, _job("a"))
    message = probe(["batch", "m.toml"], work, capsys)
    assert "not a batch result of this job" in message
    assert (work / "out" / "a.json").read_bytes() == SENTINEL


def test_batch_result_through_a_link_refused(demo, capsys):
    work, victim = demo
    (work / "out").mkdir()
    os.symlink(victim / "victim.json", work / "out" / "a.json")
    _manifest(work, _job("a"))
    probe(["batch", "m.toml"], work, capsys, outside=victim)


def test_batch_table_may_not_be_an_input(demo, capsys):
    work, _ = demo
    _manifest(work, _job("a"))
    message = probe(["batch", "m.toml", "-o", "one.toml"], work, capsys)
    assert "input" in message


# ---- item 8: no hangs -------------------------------------------------------------------------


@pytest.mark.parametrize("workers", ["0", "-1", "-100"])
def test_batch_workers_must_be_positive(demo, capsys, workers):
    work, _ = demo
    _manifest(work, _job("a"))
    start = time.monotonic()
    message = probe(["batch", "m.toml", "--workers", workers], work, capsys)
    assert "--workers" in message
    assert time.monotonic() - start < 10


@pytest.mark.parametrize("address", ["bogus://x", "tcp://", "tcp://host", "tcp://h:99999", "x y:1", "inproc://a:1"])
def test_batch_scheduler_address_checked(demo, capsys, address):
    work, _ = demo
    _manifest(work, _job("a"))
    message = probe(["batch", "m.toml", "--scheduler", address], work, capsys)
    assert "--scheduler" in message


def test_batch_silent_scheduler_times_out(demo, capsys, monkeypatch):
    """A port on 127.0.0.1 that accepts connections and never answers."""
    pytest.importorskip("dask.distributed")
    from uvfit.infer import batch

    monkeypatch.setattr(batch, "SCHEDULER_TIMEOUT", 2.0)
    server = socket.socket()
    server.bind(("127.0.0.1", 0))
    server.listen(8)
    port = server.getsockname()[1]
    held = []
    stop = threading.Event()

    def accept():
        server.settimeout(0.2)
        while not stop.is_set():
            try:
                held.append(server.accept()[0])
            except OSError:
                pass

    thread = threading.Thread(target=accept, daemon=True)
    thread.start()
    work, _ = demo
    _manifest(work, _job("a"))
    start = time.monotonic()
    try:
        message = probe(["batch", "m.toml", "--scheduler", f"tcp://127.0.0.1:{port}"], work, capsys)
    finally:
        stop.set()
        thread.join(2)
        for conn in held:
            conn.close()
        server.close()
    assert time.monotonic() - start < 30
    assert "scheduler" in message


# ---- item 12 (manifests) ----------------------------------------------------------------------


def test_manifest_data_not_a_string(demo, capsys):
    work, _ = demo
    _manifest(work, _job("a", data=5))
    message = probe(["batch", "m.toml"], work, capsys)
    assert "'data' must be a path" in message


def test_manifest_deeply_nested(demo, capsys):
    work, _ = demo
    (work / "m.toml").write_text("x = " + "[" * 5000 + "]" * 5000 + "\n")
    probe(["batch", "m.toml"], work, capsys)


@pytest.mark.parametrize(
    "text", ["defaults = 3\n[[job]]\ndata='a'\nmodel='b'\n", "job = [1, 2]\n", "job = 'x'\n", "[[job]]\ndata = 'a'\n"]
)
def test_manifest_odd_shapes(demo, capsys, text):
    work, _ = demo
    (work / "m.toml").write_text(text)
    probe(["batch", "m.toml"], work, capsys)


# ---- item 9: a dying worker is a failed job, the table is still written ---------------------


def test_dead_worker_recorded_as_failed(demo, monkeypatch):
    pytest.importorskip("dask.distributed")
    import dask.distributed as dd

    from uvfit.infer import batch

    class Future:
        def __init__(self, job, dies):
            self.job, self.dies = job, dies

        def result(self):
            if self.dies:
                raise RuntimeError("worker lost three times (invented)")
            return batch.failed_row(self.job, "") | {"status": "done"}

    class Client:
        def __init__(self, *a, **k):
            pass

        def submit(self, fn, job, **k):
            return Future(job, job["name"] == "dies")

        def close(self):
            pass

    class Cluster:
        def __init__(self, *a, **k):
            pass

        def close(self):
            pass

    monkeypatch.setattr(dd, "Client", Client)
    monkeypatch.setattr(dd, "LocalCluster", Cluster)
    monkeypatch.setattr(dd, "as_completed", lambda futures: iter(futures))
    work, _ = demo
    _manifest(work, _job("dies") + _job("lives"))
    jobs = batch.load_manifest(str(work / "m.toml"))
    rows, n_run = batch.run_batch(jobs, workers=1)
    status = {r["name"]: r["status"] for r in rows}
    assert status == {"dies": "failed", "lives": "done"}
    assert "worker" in rows[0]["error"]
    table = batch.results_table(rows)
    assert list(table["status"]) == ["failed", "done"]


# ---- item 13: outputs checked against each other and the inputs, before any work -------------

OBS = [
    "--ra",
    "12h30m49s",
    "--dec",
    "12d23m28s",
    "--start",
    "2027-03-01T02:00",
    "--duration",
    "2h",
    "--frequency",
    "86GHz",
]
COLLISIONS = [
    ["fit", "uvd0917.uvfits", "one.toml", "--json", "X", "--save-model", "X"],
    ["fit", "uvd0917.uvfits", "one.toml", "--json", "X", "--save-model", "./X", "--force"],
    ["fit", "uvd0917.uvfits", "one.toml", "--json", "one.toml", "--force"],
    ["fit", "uvd0917.uvfits", "one.toml", "--save-model", "uvd0917.uvfits", "--force"],
    ["plot", "uvd0917.uvfits", "--fit", "f.json", "--kind", "radial", "-o", "X", "--numbers", "X"],
    ["plot", "uvd0917.uvfits", "--fit", "f.json", "--kind", "radial", "-o", "f.json", "--force"],
    ["sample", "uvd0917.uvfits", "one.toml", "--chain", "X", "--json", "X", "--corner", "X"],
    ["sample", "uvd0917.uvfits", "one.toml", "--chain", "X", "--corner", "X"],
    ["sample", "uvd0917.uvfits", "one.toml", "--chain", "uvd0917.uvfits", "--force"],
    ["closures", "uvd0917.uvfits", "--json", "X", "--table", "X"],
    ["closures", "uvd0917.uvfits", "--json", "uvd0917.uvfits", "--force"],
    ["compare", "uvd0917.uvfits", "one.toml", "two.toml", "--json", "two.toml", "--force"],
    ["report", "uvd0917.uvfits", "--fit", "f.json", "-o", "f.json", "--force"],
    ["simulate", "arr.toml", "one.toml", *OBS, "-o", "X", "--json", "X"],
    ["simulate", "arr.toml", "one.toml", *OBS, "-o", "one.toml", "--force"],
    ["info", "uvd0917.uvfits", "--json", "uvd0917.uvfits", "--force"],
]


@pytest.mark.parametrize("args", COLLISIONS, ids=lambda a: "-".join(a[:1] + a[-3:]))
def test_output_collisions_refused_before_work(demo, capsys, args):
    work, _ = demo
    (work / "f.json").write_text("{}")
    (work / "arr.toml").write_text("# not read: the outputs are checked first\n")
    start = time.monotonic()
    message = probe(args, work, capsys)
    assert "same file" in message or "input of this command" in message, message
    assert time.monotonic() - start < 10


@pytest.mark.parametrize(
    "args",
    [
        ["fit", "uvd0917.uvfits", "one.toml", "--json", "-"],
        ["plot", "uvd0917.uvfits", "--fit", "f.json", "--kind", "radial", "-o", "-"],
        ["closures", "uvd0917.uvfits", "--table", "-"],
        ["sample", "uvd0917.uvfits", "one.toml", "--json", "-"],
        ["compare", "uvd0917.uvfits", "one.toml", "two.toml", "--json", "-"],
        ["report", "uvd0917.uvfits", "--fit", "f.json", "-o", "-"],
    ],
    ids=lambda a: a[0],
)
def test_dash_is_stdout_only_for_info(demo, capsys, args):
    """One meaning of '-' everywhere: the standard output where a command says so (info --json),
    refused elsewhere, never a file named '-'."""
    work, _ = demo
    (work / "f.json").write_text("{}")
    message = probe(args, work, capsys)
    assert "file only" in message
    assert not (work / "-").exists()


def test_info_json_dash_is_stdout(demo, capsys):
    work, _ = demo
    old = os.getcwd()
    os.chdir(work)
    try:
        with pytest.raises(SystemExit) as exc:
            main(["info", "uvd0917.uvfits", "--json", "-"])
    finally:
        os.chdir(old)
    assert exc.value.code == 0
    assert json.loads(capsys.readouterr().out)["n_rows"] > 0
    assert not (work / "-").exists()


# ---- items 12 and 14: option values -----------------------------------------------------------

BAD_VALUES = [
    ["fit", "uvd0917.uvfits", "one.toml", "--seed", "-1"],
    ["sample", "uvd0917.uvfits", "one.toml", "--seed", "-5"],
    ["compare", "uvd0917.uvfits", "one.toml", "two.toml", "--seed", str(2**70)],
    ["fit", "uvd0917.uvfits", "one.toml", "--redshift", "nan"],
    ["fit", "uvd0917.uvfits", "one.toml", "--redshift", "inf"],
    ["fit", "uvd0917.uvfits", "one.toml", "--redshift", "-0.5"],
    ["sample", "uvd0917.uvfits", "one.toml", "--redshift", "nan"],
    ["compare", "uvd0917.uvfits", "one.toml", "two.toml", "--bootstrap", "-1"],
    ["fit", "uvd0917.uvfits", "one.toml", "--systematic", "nan"],
    ["fit", "uvd0917.uvfits", "one.toml", "--systematic", "inf"],
    ["fit", "uvd0917.uvfits", "one.toml", "--systematic", "-0.1"],
    ["sample", "uvd0917.uvfits", "one.toml", "--systematic", "nan"],
    ["closures", "uvd0917.uvfits", "--systematic", "inf"],
    ["compare", "uvd0917.uvfits", "one.toml", "two.toml", "--systematic", "nan"],
]


@pytest.mark.parametrize("args", BAD_VALUES, ids=lambda a: "-".join(a[:1] + a[-2:]))
def test_bad_option_values(demo, capsys, args):
    work, _ = demo
    message = probe(args, work, capsys)
    assert args[-2] in message


# ---- item 7 and 12: chain files ---------------------------------------------------------------


def _tampered_chain(path, **attrs):
    h5py = pytest.importorskip("h5py")
    with h5py.File(path, "w") as f:
        g = f.create_group("uvfit_chain")
        g.attrs["uvfit_names"] = json.dumps(["source.flux"])
        g.attrs["uvfit_seed"] = 0
        g.attrs["uvfit_meta"] = "{}"
        g.attrs["iteration"] = 3
        g.attrs["nwalkers"] = 8
        for key, value in attrs.items():
            g.attrs[key] = value


@pytest.mark.parametrize(
    "attrs",
    [
        {"uvfit_names": "{not json"},
        {"uvfit_meta": "[[["},
        {"uvfit_seed": "abc"},
        {"iteration": -4},
        {"uvfit_names": json.dumps([1, 2])},
        {"nwalkers": "x"},
    ],
    ids=lambda a: next(iter(a)),
)
def test_tampered_chain_attributes(demo, capsys, attrs):
    work, _ = demo
    _tampered_chain(work / "c.h5", **attrs)
    message = probe(["sample", "uvd0917.uvfits", "one.toml", "--chain", "c.h5", "--resume"], work, capsys)
    assert "c.h5" in message


def test_resume_mismatched_chain_refused(demo, capsys):
    """A chain of 6 steps on the demo data; resuming it with a selection, with other data or
    with narrower bounds is refused, saying what differs."""
    work, _ = demo
    old = os.getcwd()
    os.chdir(work)
    try:
        with pytest.raises(SystemExit) as exc:
            main(["sample", "uvd0917.uvfits", "one.toml", "--chain", "c.h5", "--max-steps", "6", "--walkers", "8"])
    finally:
        os.chdir(old)
    assert exc.value.code == 0, capsys.readouterr().err
    capsys.readouterr()
    message = probe(
        ["sample", "uvd0917.uvfits", "one.toml", "--chain", "c.h5", "--resume", "--max-steps", "8", "--min-uv", "1e8"],
        work,
        capsys,
    )
    assert "other data" in message
    narrow = (
        (work / "one.toml")
        .read_text()
        .replace("max = 5.0 }\n\n", "max = 5.0 }\n")
        .replace("fwhm = { value = 0.3, min = 0.0, max = 5.0 }", "fwhm = { value = 0.3, min = 0.0, max = 0.4 }")
    )
    (work / "narrow.toml").write_text(narrow)
    message = probe(
        ["sample", "uvd0917.uvfits", "narrow.toml", "--chain", "c.h5", "--resume", "--max-steps", "8"], work, capsys
    )
    assert "another model" in message and "other data" not in message


# ---- item 9: faults ---------------------------------------------------------------------------


def test_full_disk_keeps_the_complete_steps(demo, capsys, monkeypatch):
    """The fourth step's write fails with ENOSPC (simulated); exit 2, and the chain file still
    reads with its three complete steps (x 8 walkers)."""
    h5py = pytest.importorskip("h5py")
    from uvfit.infer.sampling.chainfile import read_chain

    work, _ = demo
    real = h5py.Dataset.__setitem__
    calls = {"chain": 0}

    def setitem(self, key, value):
        if self.name.endswith("/chain") and self.shape[0] > 0:
            calls["chain"] += 1
            if calls["chain"] > 3:
                raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        return real(self, key, value)

    monkeypatch.setattr(h5py.Dataset, "__setitem__", setitem)
    message = probe(
        ["sample", "uvd0917.uvfits", "one.toml", "--chain", "c.h5", "--max-steps", "6", "--walkers", "8"],
        work,
        capsys,
        allowed=("c.h5",),
    )
    assert "3 complete steps" in message and "--resume" in message
    monkeypatch.setattr(h5py.Dataset, "__setitem__", real)
    assert read_chain(str(work / "c.h5")).shape == (3 * 8, 4)  # 4 free parameters


def test_sigterm_removes_the_temporary_file(demo, capsys, monkeypatch):
    """SIGTERM arrives in the middle of a write: no hidden temporary file stays, no output."""
    import signal

    import uvfit.outputs as outputs

    work, _ = demo
    real = outputs.os.chmod

    def chmod(path, mode):
        os.kill(os.getpid(), signal.SIGTERM)
        time.sleep(0.5)
        return real(path, mode)

    old_handler = signal.getsignal(signal.SIGTERM)
    monkeypatch.setattr(outputs.os, "chmod", chmod)
    old = os.getcwd()
    os.chdir(work)
    try:
        with pytest.raises(SystemExit) as exc:
            main(["info", "uvd0917.uvfits", "--json", "i.json"])
    finally:
        os.chdir(old)
        signal.signal(signal.SIGTERM, old_handler)
    assert exc.value.code == 143
    assert "terminated" in capsys.readouterr().err
    assert sorted(os.listdir(work)) == ["one.toml", "two.toml", "uvd0917.uvfits"]


def test_simulate_colocated_stations_is_clear(demo, capsys):
    """Two stations at one place (real arrays have them, e.g. a reference dish beside an array):
    either simulated, or refused with one line before anything is written."""
    work, _ = demo
    station = 'name = "{}"\nlat = 51.8\nlon = 4.2\nheight = 320.0\nsefd = 650.0\n'
    (work / "arr.toml").write_text(
        'name = "invented"\n'
        + "".join("[[station]]\n" + station.format(n) for n in ("AAA", "BBB"))
        + '[[station]]\nname = "CCC"\nlat = 45.3\nlon = 1.9\nheight = 880.0\nsefd = 650.0\n'
    )
    old = os.getcwd()
    os.chdir(work)
    try:
        with pytest.raises(SystemExit) as exc:
            main(["simulate", "arr.toml", "one.toml", *OBS, "-o", "s.uvfits", "--json", "s.json"])
    finally:
        os.chdir(old)
    captured = capsys.readouterr()
    assert "Traceback" not in captured.err and "internal error" not in captured.err, captured.err
    assert exc.value.code in (0, 2), captured.err
    if exc.value.code == 2:
        assert not (work / "s.uvfits").exists() and not (work / "s.json").exists()


# ---- item 12: a tampered fit JSON -------------------------------------------------------------


@pytest.mark.parametrize("value", ["abc", None, [1], True], ids=repr)
@pytest.mark.parametrize("command", ["plot", "report"])
def test_tampered_fit_value(demo, capsys, value, command):
    """A fit JSON whose fitted value is not a number (the file is made here, not by a fit)."""
    work, _ = demo
    import uvfit

    model = uvfit.load_model(str(work / "one.toml"))
    params = {n: {"value": value if n == model.free_names[0] else 0.1, "free": True} for n in model.free_names}
    (work / "f.json").write_text(
        json.dumps({"parameters": params, "statistics": {}, "model_toml": model.to_toml(), "mode": "complex"})
    )
    args = {
        "plot": ["plot", "uvd0917.uvfits", "--fit", "f.json", "--kind", "radial", "-o", "p.png"],
        "report": ["report", "uvd0917.uvfits", "--fit", "f.json", "-o", "r.html"],
    }[command]
    message = probe(args, work, capsys)
    assert model.free_names[0] in message
