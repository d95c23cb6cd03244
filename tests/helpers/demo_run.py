"""Run the README's demo command once per test session (shared by test_demo.py and
test_readme.py, each of which wraps it in a module-scoped fixture; the cache below makes the
second fixture free)."""

import atexit
import os
import re
import shlex
import shutil
import subprocess
import sys
import tempfile

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
README = os.path.join(ROOT, "README.md")

_CACHE = {}


def setup_commands():
    """The two set-up commands of the README: the code blocks of "Set-up on a fresh machine"."""
    with open(README, encoding="utf-8") as handle:
        text = handle.read()
    start = text.index("## Set-up on a fresh machine")
    end = text.index("\n## ", start + 3)
    blocks = re.findall(r"```[a-z]*\n(.*?)```", text[start:end], flags=re.S)
    return [b.strip() for b in blocks]


def demo_argv(command, tmp):
    """The `uvfit demo ...` part of the first set-up command, as an argv for `python -m uvfit`,
    with its output folder moved inside ``tmp``. Returns (argv, out_dir)."""
    parts = [p.strip() for p in command.split("&&")]
    demo = [p for p in parts if p.startswith("uvfit demo")]
    assert len(demo) == 1, f"no single 'uvfit demo' command in {command!r}"
    words = shlex.split(demo[0])
    out_dir = None
    for i, w in enumerate(words):
        if w == "--out":
            words[i + 1] = out_dir = os.path.join(tmp, words[i + 1])
        elif w.startswith("--out="):
            out_dir = os.path.join(tmp, w.split("=", 1)[1])
            words[i] = "--out=" + out_dir
    if out_dir is None:  # the command's default folder, relative to the working directory
        out_dir = os.path.join(tmp, "uvfit-demo")
        words += ["--out", out_dir]
    return [sys.executable, "-m", "uvfit"] + words[1:], out_dir


def demo_run():
    """(CompletedProcess, out_dir) of the README's demo command, run once (cwd = repo root)."""
    if "run" not in _CACHE:
        tmp = tempfile.mkdtemp(prefix="uvfit-demo-test-")
        atexit.register(shutil.rmtree, tmp, True)
        argv, out_dir = demo_argv(setup_commands()[0], tmp)
        # the README's command installs no compiled engine: run the numpy path it gets (the chain's
        # numbers depend on the engine beyond the last printed digit)
        env = dict(os.environ, MPLBACKEND="Agg", UVFIT_ENGINE="numpy")
        proc = subprocess.run(argv, cwd=ROOT, capture_output=True, text=True, env=env, timeout=900)
        _CACHE["run"] = (proc, out_dir, argv)
    return _CACHE["run"]
