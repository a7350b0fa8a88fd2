"""The layout holds: imports go one way, the core stays pure, no function grows past 80 lines."""

from __future__ import annotations

import ast
import shutil
import subprocess
from importlib import resources
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "screening"
CORE_ALLOWED = {"numpy", "math", "collections", "dataclasses", "typing", "__future__"}


def _module_name(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _modules() -> dict[str, ast.Module]:
    return {_module_name(p): ast.parse(p.read_text(encoding="utf-8")) for p in PACKAGE.rglob("*.py")}


def _imports(name: str, tree: ast.Module, known: set[str]) -> set[str]:
    """Every module imported anywhere in the file (function-level imports count)."""
    found: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module:
            base = node.module
            if node.level:  # relative import
                package = name.split(".")[: -node.level] if not name.endswith("__init__") else name.split(".")
                base = ".".join([*package, node.module])
            submodules = {f"{base}.{alias.name}" for alias in node.names} & known
            found.update(submodules)
            if len(submodules) < len(node.names):  # a name from the module itself, not a submodule
                found.add(base)
    return found


def _graph() -> dict[str, set[str]]:
    modules = _modules()
    known = set(modules)
    return {
        name: {m for m in _imports(name, tree, known) if m in known and m != name}
        for name, tree in modules.items()
    }


def test_no_import_cycles():
    graph = _graph()
    state: dict[str, int] = {}
    stack: list[str] = []

    def visit(node: str) -> None:
        state[node] = 1
        stack.append(node)
        for nxt in sorted(graph[node]):
            if state.get(nxt) == 1:
                cycle = [*stack[stack.index(nxt) :], nxt]
                pytest.fail("import cycle: " + " -> ".join(cycle))
            if nxt not in state:
                visit(nxt)
        stack.pop()
        state[node] = 2

    for node in sorted(graph):
        if node not in state:
            visit(node)


def test_core_imports_only_numpy_core_and_settings():
    modules = _modules()
    for name, tree in modules.items():
        if not name.startswith("screening.core"):
            continue
        for imported in _imports(name, tree, set(modules)):
            top = imported.split(".")[0]
            if top == "screening":
                assert imported.startswith("screening.core") or imported == "screening.config", (
                    f"{name} imports {imported}: the core may use only core modules and the settings"
                )
            else:
                assert top in CORE_ALLOWED, f"{name} imports {imported}: the core is numpy only"


def test_outputs_never_import_the_job_or_cli():
    graph = _graph()
    for name, deps in graph.items():
        if name.startswith(("screening.outputs", "screening.io", "screening.core")):
            upward = {d for d in deps if d in {"screening.job", "screening.cli", "screening.demo"}}
            assert not upward, f"{name} imports {upward}: imports go from the CLI down, not up"


def test_no_function_over_80_lines():
    long = []
    for path in PACKAGE.rglob("*.py"):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, ast.FunctionDef | ast.AsyncFunctionDef):
                length = (node.end_lineno or node.lineno) - node.lineno + 1
                if length > 80:
                    long.append(f"{path.relative_to(PACKAGE.parent)}::{node.name} ({length} lines)")
    assert not long, "functions over 80 lines: " + ", ".join(long)


def test_page_files_ship_as_package_data():
    outputs = resources.files("screening.outputs")
    for name in ("webmap.js", "webmap.css", "sheet.html.j2"):
        assert outputs.joinpath(name).is_file(), name


@pytest.mark.skipif(shutil.which("node") is None, reason="node is not installed")
def test_map_script_passes_a_javascript_syntax_check():
    script = resources.files("screening.outputs").joinpath("webmap.js")
    with resources.as_file(script) as path:
        done = subprocess.run(["node", "--check", str(path)], capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
