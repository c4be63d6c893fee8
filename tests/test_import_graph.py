"""The package's import graph: no cycles, imports at the top, compute never reaches I/O.

The graph is built from the source with :mod:`ast`, counting imports inside
functions too, so a cycle or an I/O library hidden in a function body is seen.
Cycles are looked for among the imports as written. For what compute may reach,
importing ``gisrun.a.b`` also counts as running the package ``gisrun.a`` (its
``__init__``), so subpackage ``__init__`` modules are part of every chain
through them. The top package ``gisrun/__init__.py`` is left out of those
chains: it only re-exports the notebook API and is run by every
``import gisrun...`` whatever the module.
"""

from __future__ import annotations

import ast
from functools import cache
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "gisrun"

#: Layers that compute (or describe results) and may not reach files, by any chain of imports.
COMPUTE = ("gisrun.engine", "gisrun.parameters", "gisrun.storm", "gisrun.grid",
           "gisrun.aggregate", "gisrun.aggregate_kernels", "gisrun.present", "gisrun.model",
           "gisrun.units", "gisrun.units_kernels", "gisrun.crs", "gisrun.errors",
           "gisrun.options", "gisrun.uncertainty", "gisrun.runon")
#: What compute may not reach: gisrun's own I/O and orchestration layers, and I/O libraries.
FORBIDDEN_PACKAGES = ("gisrun.io", "gisrun.workflow", "gisrun.write", "gisrun.config",
                      "gisrun.cli")
IO_LIBRARIES = {"rasterio", "pyogrio", "fiona", "sqlite3", "tomllib"}

#: The only imports allowed inside functions: optional dependencies and heavy plotting,
#: as (importing module, imported module) pairs. Everything else is imported at the top.
NESTED_ALLOWED = {
    ("gisrun.workflow.execution", "dask"),
    ("gisrun.workflow.execution", "dask.distributed"),
}


def module_name(path: Path) -> str:
    parts = list(path.relative_to(PACKAGE.parent).with_suffix("").parts)
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


@cache
def modules() -> dict[str, Path]:
    return {module_name(p): p for p in sorted(PACKAGE.rglob("*.py"))}


def _resolve(node: ast.ImportFrom, here: str, is_package: bool) -> str:
    if not node.level:
        return node.module or ""
    base = here.split(".") if is_package else here.split(".")[:-1]
    base = base[: len(base) - (node.level - 1)]
    return ".".join(base + ([node.module] if node.module else []))


@cache
def imports() -> dict[str, list[tuple[str, bool]]]:
    """Module -> [(imported module, imported inside a function)], gisrun and third party."""
    out: dict[str, list[tuple[str, bool]]] = {}
    for name, path in modules().items():
        tree = ast.parse(path.read_text())
        nested = {id(n) for f in ast.walk(tree)
                  if isinstance(f, ast.FunctionDef | ast.AsyncFunctionDef)
                  for n in ast.walk(f) if n is not f}
        found = []
        for node in ast.walk(tree):
            inside = id(node) in nested
            if isinstance(node, ast.Import):
                found += [(a.name, inside) for a in node.names]
            elif isinstance(node, ast.ImportFrom):
                target = _resolve(node, name, path.name == "__init__.py")
                if target == "__future__":
                    continue
                subs = [f"{target}.{a.name}" for a in node.names
                        if f"{target}.{a.name}" in modules()]
                found += [(t, inside) for t in (subs or [target])]
                if subs and len(subs) < len(node.names):
                    found.append((target, inside))
        out[name] = found
    return out


def _with_parents(target: str) -> list[str]:
    """A gisrun module and the subpackages whose ``__init__`` importing it runs."""
    parts = target.split(".")
    chain = [".".join(parts[:k]) for k in range(2, len(parts) + 1)]
    return [m for m in chain if m in modules()]


@cache
def graph(with_packages: bool = False) -> dict[str, set[str]]:
    """gisrun module -> the gisrun modules it imports (and, optionally, their packages)."""
    edges: dict[str, set[str]] = {m: set() for m in modules()}
    for name, found in imports().items():
        for target, _ in found:
            if target in modules() and target != name:
                edges[name].add(target)
            if with_packages and target.startswith("gisrun."):
                edges[name].update(t for t in _with_parents(target) if t != name)
    return edges


def _reach(start: str) -> dict[str, str]:
    """Every gisrun module run by importing ``start`` -> the module it was reached from."""
    seen = {start: ""}
    todo = [start]
    while todo:
        here = todo.pop()
        for nxt in graph(with_packages=True)[here]:
            if nxt not in seen:
                seen[nxt] = here
                todo.append(nxt)
    return seen


def _chain(seen: dict[str, str], end: str) -> str:
    path = [end]
    while seen[path[-1]]:
        path.append(seen[path[-1]])
    return " -> ".join(reversed(path))


def _cycles() -> list[list[str]]:
    """Strongly connected components of more than one module (Tarjan)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in graph()[v]:
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                found.append(sorted(comp))

    for v in sorted(graph()):
        if v not in index:
            visit(v)
    return found


def test_no_import_cycles():
    assert _cycles() == []


def test_imports_inside_functions_only_from_the_allow_list():
    nested = sorted((name, target) for name, found in imports().items()
                    for target, inside in found if inside)
    assert [pair for pair in nested if pair not in NESTED_ALLOWED] == []


def compute_modules() -> list[str]:
    return [m for m in modules() if any(m == c or m.startswith(c + ".") for c in COMPUTE)]


@pytest.mark.parametrize("name", compute_modules())
def test_compute_reaches_no_io_by_any_chain(name):
    seen = _reach(name)
    for mod in seen:
        bad = [p for p in FORBIDDEN_PACKAGES if mod == p or mod.startswith(p + ".")]
        assert not bad, f"{name} reaches {mod}: {_chain(seen, mod)}"
        libs = {t.split(".")[0] for t, _ in imports()[mod]} & IO_LIBRARIES
        assert not libs, f"{name} reaches {sorted(libs)} through {_chain(seen, mod)}"


@pytest.mark.parametrize("name", compute_modules())
def test_compute_module_opens_no_file(name):
    tree = ast.parse(modules()[name].read_text())
    for node in ast.walk(tree):
        if isinstance(node, ast.Call) and isinstance(node.func, ast.Name):
            assert node.func.id != "open", f"{name}:{node.lineno} opens a file"


def test_the_checks_see_what_they_look_for():
    """The graph finds a real chain and a nested import (guards against an empty graph)."""
    assert "gisrun.engine.base" in graph()["gisrun.engine.green_ampt"]
    assert "gisrun.engine" in graph(with_packages=True)["gisrun.engine.green_ampt"]
    assert "gisrun.errors" in _reach("gisrun.engine")
    assert any(inside for found in imports().values() for _, inside in found)
