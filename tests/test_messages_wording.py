"""The library speaks of parameters, the command line of options.

Every string the library (uvfit/ outside cli.py and commands/) puts in a message is free of
command-line options (``--name``); it quotes parameter names (`` `snr_cut` ``) and the command
group rewords them as the running command's options. Docstrings may name commands and options
(they describe what a command writes). Checked with the standard library's ``ast``.
"""

import ast
import pathlib
import re

from click.testing import CliRunner

import uvfit
from tests.helpers.real_data import real_file
from uvfit.cli import cli
from uvfit.commands._common import reword
from uvfit.errors import UvfitError

ROOT = pathlib.Path(__file__).resolve().parents[1]
OPTION = re.compile(r"(?<![\w-])--[a-z][a-z-]+")


def _docstrings(tree):
    out = set()
    for node in ast.walk(tree):
        if isinstance(node, (ast.Module, ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)):
            body = node.body
            if body and isinstance(body[0], ast.Expr) and isinstance(body[0].value, ast.Constant):
                out.add(id(body[0].value))
    return out


def test_library_strings_name_no_option():
    found = []
    for path in sorted((ROOT / "uvfit").rglob("*.py")):
        rel = path.relative_to(ROOT).as_posix()
        if rel == "uvfit/cli.py" or rel.startswith("uvfit/commands/"):
            continue
        tree = ast.parse(path.read_text(), filename=rel)
        docs = _docstrings(tree)
        for node in ast.walk(tree):
            if isinstance(node, ast.Constant) and isinstance(node.value, str) and id(node) not in docs:
                for match in OPTION.finditer(node.value):
                    # a description of a demo file names the command that writes it: not a message
                    if "uvfit " in node.value:
                        continue
                    found.append(f"{rel}:{node.lineno}: {match.group(0)}")
    assert not found, "library strings naming command-line options:\n" + "\n".join(found)


def test_reword_maps_quoted_parameters_to_options():
    exc = UvfitError("`max_steps` must be at least 1", "use `walkers=12` or more, or `resume`; `nothing` else")
    worded = reword(exc, {"max_steps": "--max-steps", "walkers": "--walkers", "resume": "--resume"})
    assert worded.message == "--max-steps must be at least 1"
    assert worded.hint == "use --walkers 12 or more, or --resume; `nothing` else"
    assert worded.exit_code == exc.exit_code


def test_same_error_through_the_library_and_the_command_line():
    """One problem, two audiences: the Python caller reads the parameter, the shell user the option
    (an unknown station asked of the real 3C 279 file in tests/data)."""
    path = real_file("lo")
    try:
        uvfit.closures(path, selection={"stations": "AA,QQ,LM"})
    except UvfitError as exc:
        assert "`stations`" in str(exc)
    else:  # pragma: no cover - the check above must raise
        raise AssertionError("an unknown station was accepted")
    result = CliRunner().invoke(cli, ["closures", str(path), "--stations", "AA,QQ,LM"])
    assert result.exit_code != 0
    text = result.output + str(result.exception or "")
    assert "unknown station" in text and "QQ" in text
    assert "`" not in text
    assert "--stations" in text
