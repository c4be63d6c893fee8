"""Modules and functions stay small enough to read in one sitting (DEVELOPERS.md, 'Rules')."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "gisrun"
MAX_MODULE_LINES = 400
MAX_FUNCTION_LINES = 60
FILES = sorted(PACKAGE.rglob("*.py"))


def _name(path: Path) -> str:
    return str(path.relative_to(PACKAGE.parent))


@pytest.mark.parametrize("path", FILES, ids=_name)
def test_module_within_400_lines(path):
    lines = len(path.read_text().splitlines())
    assert lines <= MAX_MODULE_LINES, f"{_name(path)} has {lines} lines"


@pytest.mark.parametrize("path", FILES, ids=_name)
def test_functions_within_60_lines(path):
    """A function's length: its signature and body, without its docstring."""
    tree = ast.parse(path.read_text())
    long = [f"{node.name} ({_length(node)} lines)" for node in ast.walk(tree)
            if isinstance(node, ast.FunctionDef | ast.AsyncFunctionDef)
            and _length(node) > MAX_FUNCTION_LINES]
    assert long == [], f"{_name(path)}: {long}"


def _length(node: ast.FunctionDef | ast.AsyncFunctionDef) -> int:
    body = node.body
    doc = ast.get_docstring(node, clean=False) is not None
    docstring_lines = body[0].end_lineno - body[0].lineno + 1 if doc else 0
    return node.end_lineno - node.lineno + 1 - docstring_lines
