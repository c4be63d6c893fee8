"""Compute modules stay free of file I/O (DEVELOPERS.md, 'Rules')."""

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "gisrun"
COMPUTE = ["overlay.py", "storm.py", "aggregate.py", "layers.py", "cellgrid.py", "maps.py",
           "report.py", "export.py", "chunked.py", "engine", "parameters"]
IO_LIBRARIES = {"rasterio", "pyogrio", "fiona", "sqlite3"}


def compute_files():
    for name in COMPUTE:
        path = PACKAGE / name
        yield from (sorted(path.rglob("*.py")) if path.is_dir() else [path])


@pytest.mark.parametrize("path", list(compute_files()), ids=lambda p: p.name)
def test_compute_module_imports_no_io_library_and_opens_no_file(path):
    tree = ast.parse(path.read_text())
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names = [a.name.split(".")[0] for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            names = [(node.module or "").split(".")[0]]
            # relative imports of gisrun.io from compute code are I/O too
            if node.level and (node.module or "").split(".")[0] == "io":
                names.append("gisrun.io")
        elif isinstance(node, ast.Call) and isinstance(node.func, ast.Name):
            assert node.func.id != "open", f"{path.name}:{node.lineno} opens a file"
            continue
        else:
            continue
        bad = set(names) & (IO_LIBRARIES | {"gisrun.io"})
        assert not bad, f"{path.name}:{node.lineno} imports {bad}"
