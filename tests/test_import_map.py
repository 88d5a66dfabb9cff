"""The map of which stage may import which (DEVELOPERS.md), held against every import in the package.

Imports are read from the source with ``ast``, those inside functions included, so an import cannot
hide from the map by moving into a function. A function-level import of the package's own modules is
allowed only for start-up time, and must say so in a comment on its line.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

import crosscheck

ROOT = Path(crosscheck.__file__).parent

#: Floor of each stage: a module may import modules on its own floor's package and on lower floors
#: named in ALLOWED. The bottom modules import nothing of the package.
ALLOWED: dict[str, set[str]] = {
    "errors": set(),
    "vocabulary": set(),
    "version": set(),
    "model": {"errors", "vocabulary", "version"},
    "own": {"errors", "vocabulary", "version", "model"},
    "spice": {"errors", "vocabulary", "version", "model"},
    "judge": {"errors", "vocabulary", "version", "model", "own", "spice"},
    "run": {"errors", "vocabulary", "version", "model", "own", "spice", "judge"},
    "fuzz": {"errors", "vocabulary", "version", "model", "own", "spice", "judge", "run"},
    "report": {"errors", "vocabulary", "version", "model", "own", "spice", "judge", "run", "fuzz"},
}
TOP = {"__init__", "__main__", "api", "cli", "cli_common", "cli_parser", "cli_reduce", "pytest_plugin"}  # the top floor: may import everything


def _stage(module: str) -> str:
    """'crosscheck.own.solver' -> 'own'; 'crosscheck.errors' -> 'errors'; 'crosscheck' -> '__init__'."""
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else "__init__"


def _module_name(path: Path) -> str:
    rel = path.relative_to(ROOT.parent).with_suffix("")
    parts = list(rel.parts)
    if parts[-1] == "__init__" and len(parts) > 1:
        parts = parts[:-1] if len(parts) > 2 else parts
    return ".".join(parts)


def _imports(path: Path) -> list[tuple[str, int, bool]]:
    """(imported crosscheck module, line, inside a function) for every import of the package."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    found: list[tuple[str, int, bool]] = []

    def visit(node: ast.AST, in_function: bool) -> None:
        for child in ast.iter_child_nodes(node):
            inner = in_function or isinstance(child, ast.FunctionDef | ast.AsyncFunctionDef)
            if isinstance(child, ast.ImportFrom):
                assert child.level == 0, f"{path}:{child.lineno}: use absolute imports (crosscheck.…)"
                if child.module and (child.module == "crosscheck" or child.module.startswith("crosscheck.")):
                    for alias in child.names:
                        target = f"{child.module}.{alias.name}"
                        found.append((target if _is_module(target) else child.module, child.lineno, inner))
            elif isinstance(child, ast.Import):
                for alias in child.names:
                    if alias.name.startswith("crosscheck"):
                        found.append((alias.name, child.lineno, inner))
            visit(child, inner)

    visit(tree, False)
    return found


def _is_module(dotted: str) -> bool:
    rel = Path(*dotted.split(".")[1:])
    return (ROOT / rel).with_suffix(".py").exists() or (ROOT / rel / "__init__.py").exists()


def _package_files() -> list[Path]:
    return sorted(p for p in ROOT.rglob("*.py") if "__pycache__" not in p.parts)


def test_every_stage_is_on_the_map():
    """Every top-level module or package of crosscheck has a floor (or is the top floor)."""
    stages = {p.stem if p.parent == ROOT else p.relative_to(ROOT).parts[0] for p in _package_files()}
    assert stages - TOP - set(ALLOWED) == set()


@pytest.mark.parametrize("path", _package_files(), ids=lambda p: p.relative_to(ROOT).as_posix())
def test_imports_follow_the_map(path: Path):
    """No import runs up a floor or sideways into another stage, in a function or not."""
    here = _stage(_module_name(path))
    if here in TOP:
        return
    wrong = [f"line {line}: {target}" for target, line, _ in _imports(path)
             if _stage(target) != here and _stage(target) not in ALLOWED[here]]
    assert not wrong, f"{path.relative_to(ROOT)} ({here}) may import only {sorted(ALLOWED[here])}: {wrong}"


@pytest.mark.parametrize("path", _package_files(), ids=lambda p: p.relative_to(ROOT).as_posix())
def test_function_level_imports_say_why(path: Path):
    """An import of the package inside a function is for start-up time only, and its line says so."""
    lines = path.read_text(encoding="utf-8").splitlines()
    unexplained = [f"line {line}: {target}" for target, line, inner in _imports(path)
                   if inner and "start-up" not in lines[line - 1]]
    assert not unexplained, (f"{path.relative_to(ROOT)}: move these imports to the top of the module, or say on "
                             f"the line why they wait (# start-up time: …): {unexplained}")


def test_the_map_has_no_circles():
    """The import graph between modules (function-level imports included) has no cycle."""
    graph: dict[str, set[str]] = {}
    for path in _package_files():
        graph[_module_name(path)] = {t for t, _, _ in _imports(path)}
    state: dict[str, int] = {}
    stack: list[str] = []

    def walk(node: str) -> list[str] | None:
        state[node] = 1
        stack.append(node)
        for nxt in sorted(graph.get(node, ())):
            if nxt not in graph or nxt == node:
                continue
            if state.get(nxt) == 1:
                return stack[stack.index(nxt):] + [nxt]
            if nxt not in state and (cycle := walk(nxt)):
                return cycle
        stack.pop()
        state[node] = 2
        return None

    for node in sorted(graph):
        if node not in state and (cycle := walk(node)):
            pytest.fail("import circle: " + " -> ".join(cycle))
