"""Writers draw only from the run's result: no input opened, no loss run, nothing read back.

The demo is run once; its outputs are written twice, the second time with the
input rasters' ``rasterio.open``, the loss engine and every GeoPackage read
made to fail. Both sets of files must be the same.
"""

from __future__ import annotations

import dataclasses
import sys
from pathlib import Path

import pandas as pd
import pyogrio
import pytest
import rasterio

import gisrun
from gisrun import load_project, run, write_extras, write_outputs

#: An end-to-end test of the demo (slow).
pytestmark = pytest.mark.slow

DEMO = Path(__file__).resolve().parents[1] / "demo_catchment"


class Forbidden(AssertionError):
    """Raised by anything the writers must not call."""


@pytest.fixture(scope="module")
def demo_result():
    # two storms keep every kind of output (a design storm; rain that differs between
    # subcatchments, with its rain map and weights) at a third of the demo's writing time
    project = load_project(DEMO)
    kinds = [s.get("kind") for s in project.storms]
    keep = (project.storms[0], project.storms[kinds.index("rain_grid")])
    return run(dataclasses.replace(project, storms=keep))


def _write(result: gisrun.RunResult, folder: Path) -> Path:
    gpkg = write_outputs(result, output=folder / "demo.gpkg")
    write_extras(result, gpkg)
    return gpkg


def _forbid_everything_but_writing(monkeypatch: pytest.MonkeyPatch, inputs: set[str]) -> None:
    real_open = rasterio.open

    def guarded_open(path, *args, **kwargs):
        if str(Path(str(path)).resolve()) in inputs:
            raise Forbidden(f"a writer opened the input raster {path}")
        return real_open(path, *args, **kwargs)

    def forbidden(*_args, **_kwargs):
        raise Forbidden("a writer called something it must not")

    monkeypatch.setattr(rasterio, "open", guarded_open)
    for name in ("read_dataframe", "read_arrow", "read_info", "open_arrow"):
        monkeypatch.setattr(pyogrio, name, forbidden)
    for module in list(sys.modules.values()):  # the engine, wherever it was imported to
        if getattr(module, "__name__", "").startswith("gisrun"):
            for name in ("run_losses", "assign_parameters", "compute_unit_areas"):
                if hasattr(module, name):
                    monkeypatch.setattr(module, name, forbidden)


def test_outputs_are_the_same_with_inputs_engine_and_reads_forbidden(demo_result, tmp_path,
                                                                    monkeypatch):
    project = demo_result.project
    free = _write(demo_result, tmp_path / "free")
    inputs = {str(p.resolve()) for p in (project.soil.path, project.cover.path)}
    _forbid_everything_but_writing(monkeypatch, inputs)
    with pytest.raises(Forbidden):  # the guard itself works
        gisrun.run_losses(None, None, 1.0)
    guarded = _write(demo_result, tmp_path / "guarded")
    monkeypatch.undo()
    _assert_same_geopackage(free, guarded)
    _assert_same_files(free.with_name("demo_files"), guarded.with_name("demo_files"))


def _assert_same_geopackage(a: Path, b: Path) -> None:
    names = [n for n, _ in pyogrio.list_layers(a)]
    assert names == [n for n, _ in pyogrio.list_layers(b)]
    for name in names:
        pd.testing.assert_frame_equal(pyogrio.read_dataframe(a, layer=name),
                                      pyogrio.read_dataframe(b, layer=name), check_exact=True,
                                      obj=name)


def _assert_same_files(a: Path, b: Path) -> None:
    files = sorted(p.relative_to(a) for p in a.rglob("*") if p.is_file())
    assert files == sorted(p.relative_to(b) for p in b.rglob("*") if p.is_file())
    assert any(f.suffix == ".tif" for f in files) and any(f.suffix == ".png" for f in files)
    for rel in files:
        assert (a / rel).read_bytes() == (b / rel).read_bytes(), rel
