"""Structure of the package: no import cycle among uvfit's modules, and no test reading outside
the repository. The import graph is built with the standard library's ``ast`` (every ``import``
and ``from ... import`` statement, those inside functions included)."""

import ast
import pathlib

ROOT = pathlib.Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "uvfit"


def _module_name(path):
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def _imports(path, name, modules):
    """The uvfit modules that the file at ``path`` (module ``name``) imports, anywhere in it."""
    is_package = path.name == "__init__.py"
    package = name if is_package else name.rpartition(".")[0]
    found = set()
    for node in ast.walk(ast.parse(path.read_text(), filename=str(path))):
        targets = []
        if isinstance(node, ast.Import):
            targets = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - (node.level - 1)]
                stem = ".".join(base + ([node.module] if node.module else []))
            else:
                stem = node.module or ""
            targets = [stem] + [f"{stem}.{a.name}" for a in node.names]
        for target in targets:
            # the longest known module that the target names (a name imported from a module is the module)
            while target and target not in modules:
                target = target.rpartition(".")[0]
            if target and target != name:
                found.add(target)
    return found


def _graph():
    files = {_module_name(p): p for p in PACKAGE.rglob("*.py")}
    return {name: _imports(path, name, files) for name, path in files.items()}


def _cycle(graph, skip_parents=True):
    """A cycle of the graph as a list of modules, or None. An import of a package by one of its own
    modules (``from . import x`` executes the package's ``__init__`` that is already loading) is
    not followed when ``skip_parents`` is true: Python resolves it without a cycle of loads."""
    state, stack = {}, []

    def visit(node):
        state[node] = 1
        stack.append(node)
        for nxt in sorted(graph.get(node, ())):
            if skip_parents and node.startswith(nxt + "."):
                continue
            if state.get(nxt) == 1:
                return stack[stack.index(nxt) :] + [nxt]
            if nxt not in state:
                found = visit(nxt)
                if found:
                    return found
        stack.pop()
        state[node] = 2
        return None

    for start in sorted(graph):
        if start not in state:
            found = visit(start)
            if found:
                return found
    return None


def test_graph_builder_finds_a_cycle():
    # a check of the checker on an invented graph (common practice: test the test)
    assert _cycle({"a": {"b"}, "b": {"c"}, "c": {"a"}}) == ["a", "b", "c", "a"]
    assert _cycle({"a": {"b"}, "b": set()}) is None


def test_sky_model_and_modelfile_do_not_import_each_other_both_ways():
    graph = _graph()
    assert "uvfit.sky.modelfile" not in graph["uvfit.sky.model"]


def test_no_import_cycle_among_modules():
    cycle = _cycle(_graph())
    assert cycle is None, " -> ".join(cycle)


def test_no_test_reads_outside_the_repository():
    here = pathlib.Path(__file__).resolve()
    offenders = []
    for path in (ROOT / "tests").rglob("*.py"):
        if path == here:
            continue
        for number, line in enumerate(path.read_text().splitlines(), 1):
            if "../shared" in line or "/work/" in line:
                offenders.append(f"{path.relative_to(ROOT)}:{number}: {line.strip()}")
    assert not offenders, "\n".join(offenders)
