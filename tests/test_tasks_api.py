"""The task layer and the public API: no upward imports, the documented examples run, and
uvfit.fit gives the numbers of `uvfit fit` (the command line is the outside reference here)."""

import ast
import doctest
import json
import os
import subprocess
import sys

import pytest

import uvfit
import uvfit.tasks
from uvfit.demo import demo_file

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def test_nothing_below_the_commands_imports_them():
    bad = []
    for folder, _, files in os.walk(os.path.join(ROOT, "uvfit")):
        rel = os.path.relpath(folder, ROOT)
        if rel.startswith(os.path.join("uvfit", "commands")):
            continue
        for name in files:
            if not name.endswith(".py") or (rel == "uvfit" and name == "cli.py"):
                continue
            path = os.path.join(folder, name)
            tree = ast.parse(open(path, encoding="utf-8").read())
            for node in ast.walk(tree):
                mods = []
                if isinstance(node, ast.ImportFrom):
                    mods = [("." * node.level) + (node.module or "")]
                    mods += [m + "." + a.name for m in mods for a in node.names]
                elif isinstance(node, ast.Import):
                    mods = [a.name for a in node.names]
                if any("commands" in m.split(".") for m in mods):
                    bad.append(f"{path}:{node.lineno}")
    assert not bad, bad


def test_all_lists_the_public_api():
    for name in (
        "read",
        "write",
        "load_model",
        "fit",
        "sample",
        "compare",
        "closures",
        "simulate",
        "forecast",
        "VisibilitySet",
        "SkyModel",
        "UvfitError",
        "FitReport",
    ):
        assert name in uvfit.__all__ and hasattr(uvfit, name)
    for name in ("read", "write", "load_model", "fit", "sample", "compare", "closures", "simulate", "forecast"):
        doc = getattr(uvfit, name).__doc__
        for section in ("Parameters", "Returns", "Raises", "Examples"):
            assert section in doc, (name, section)


@pytest.mark.parametrize(
    "obj",
    [
        uvfit.read,
        uvfit.write,
        uvfit.load_model,
        uvfit.fit,
        uvfit.sample,
        uvfit.compare,
        uvfit.closures,
        uvfit.simulate,
        uvfit.forecast,
        uvfit.tasks.info,
        uvfit.tasks.observation,
        uvfit.tasks.image,
    ],
)
def test_docstring_examples_run(obj):
    finder = doctest.DocTestFinder()
    runner = doctest.DocTestRunner(optionflags=doctest.ELLIPSIS)
    for test in finder.find(obj, globs={}):
        runner.run(test)
    assert runner.failures == 0


def test_library_fit_equals_the_command(tmp_path):
    data, model = demo_file("uvd0917.uvfits"), demo_file("two.toml")
    out = tmp_path / "fit.json"
    env = dict(os.environ, PYTHONPATH=ROOT)
    proc = subprocess.run(
        [sys.executable, "-m", "uvfit", "fit", data, model, "--seed", "3", "--json", str(out)],
        capture_output=True,
        text=True,
        env=env,
    )
    assert proc.returncode == 0, proc.stderr
    want = json.loads(out.read_text())
    got = json.loads(
        json.dumps(
            uvfit.fit(data, model, mode="complex", seed=3, selection={k: None for k in want["selection"]}).to_dict()
        )
    )
    for name, p in want["parameters"].items():
        assert got["parameters"][name]["value"] == pytest.approx(p["value"], rel=1e-9, abs=1e-12)
    assert got["statistics"]["chi2"] == pytest.approx(want["statistics"]["chi2"], rel=1e-9)
    assert set(got) == set(want)
