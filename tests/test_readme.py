"""The README's two set-up commands are the ones that work: the first runs the demo as written
and prints the answer, the second is the test command CI runs (so the README cannot drift)."""

import os
import re

import pytest

from tests.helpers import demo_run as _demo_run

ROOT = _demo_run.ROOT


@pytest.fixture(scope="module")
def run():
    return _demo_run.demo_run()


def test_exactly_two_setup_commands():
    cmds = _demo_run.setup_commands()
    assert len(cmds) == 2, cmds
    assert cmds[0].startswith("pip install . && uvfit demo"), cmds[0]
    assert "pytest" in cmds[1]


def test_first_command_runs_the_demo_and_prints_the_answer(run):
    proc, out_dir, argv = run
    assert proc.returncode == 0, proc.stderr[-3000:]
    assert "Traceback" not in proc.stderr and "Traceback" not in proc.stdout
    last = proc.stdout.strip().splitlines()[-1]
    # the headline: the decision, the separation with its error and unit, the PA, the flux ratio
    # and the false-alarm probability
    assert re.match(
        r"answer: two components, separation [0-9.]+ \+/- [0-9.]+ mas at PA [0-9.]+ "
        r"\+/- [0-9.]+ deg, flux ratio [0-9.]+ \+/- [0-9.]+ \(false-alarm probability "
        r"of the single component",
        last,
    ), last
    assert os.path.isdir(out_dir) and os.path.isfile(os.path.join(out_dir, "report.html"))
    assert out_dir in proc.stdout  # it says where the outputs are


def test_second_command_is_what_ci_runs():
    install, _, test = _demo_run.setup_commands()[1].partition("&&")
    install, test = install.strip(), test.strip()
    with open(os.path.join(ROOT, ".ci", "run"), encoding="utf-8") as handle:
        lines = [ln.strip() for ln in handle if ln.strip() and not ln.strip().startswith("#")]
    # the test command is a line of its own in the CI script
    assert test in lines, (test, lines)
    # the install command installs the same extra, with pip
    spec = install.split()[-1]
    assert install.startswith("pip install ")
    assert any("pip install" in ln and ln.split()[-1] == spec for ln in lines), (spec, lines)
