"""The folder beside the GeoPackage: layout, atomic replacement, failure, CLI, and the demo."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import rasterio
import shapely
from click.testing import CliRunner

from gisrun import run, write_outputs
from gisrun.cli.main import cli
from gisrun.errors import OutputExistsError
from gisrun.write import extras as deliverables
from gisrun.write.extras import ExtrasOptions, extras_folder, write_extras
from gisrun.write.rasters import write_cell_rasters

#: End-to-end runs (and, for the report, a headless browser): `pytest -m "not slow"` skips them.
pytestmark = pytest.mark.slow

DEMO = Path(__file__).resolve().parents[1] / "demo_catchment"
FAST = ExtrasOptions(maps=False, report=False)


@pytest.fixture(scope="module")
def tiny_result(tmp_path_factory):
    from test_cellgrid import tiny_project

    return run(tiny_project(tmp_path_factory.mktemp("deliv") / "p"))


def write_all(result, gpkg, *, options, overwrite=False):
    """The GeoPackage, then the folder beside it, as a notebook user writes them."""
    write_outputs(result, output=gpkg, overwrite=overwrite)
    return gpkg, write_extras(result, gpkg, overwrite=overwrite, options=options)


def test_layout_beside_the_geopackage(tiny_result, tmp_path):
    gpkg, made = write_all(tiny_result, tmp_path / "out.gpkg", options=ExtrasOptions())
    folder = tmp_path / "out_files"
    assert made.folder == folder and gpkg.exists()
    assert (folder / "report.html").exists() and (folder / "lumped_green_ampt.csv").exists()
    assert (folder / "excess_series.csv").exists()
    assert sorted(p.name for p in (folder / "rasters").iterdir()) == [
        "runoff_depth_mm_uniform_60mm.tif", "time_to_ponding_min_uniform_60mm.tif"]
    assert (folder / "maps" / "runoff_depth_uniform_60mm.png").exists()
    assert all(Path(p).exists() for p in made.maps.values())
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]  # no temporaries


def test_existing_folder_is_kept_without_overwrite_and_replaced_with_it(tiny_result, tmp_path):
    folder = extras_folder(tmp_path / "out.gpkg")
    folder.mkdir()
    (folder / "old.txt").write_text("old")
    write_outputs(tiny_result, output=tmp_path / "out.gpkg")
    with pytest.raises(OutputExistsError, match="out_files"):
        write_extras(tiny_result, tmp_path / "out.gpkg", options=FAST)
    assert (folder / "old.txt").exists()
    write_all(tiny_result, tmp_path / "out.gpkg", options=FAST, overwrite=True)
    assert not (folder / "old.txt").exists() and (folder / "lumped_green_ampt.csv").exists()


def test_failure_midway_leaves_the_old_folder_and_no_partial_one(tiny_result, tmp_path,
                                                                 monkeypatch):
    write_all(tiny_result, tmp_path / "out.gpkg", options=FAST)
    before = sorted(p.name for p in (tmp_path / "out_files").rglob("*"))

    def broken(*args, **kwargs):
        raise RuntimeError("disk full")

    monkeypatch.setattr(deliverables, "_write_series_csv", broken)
    with pytest.raises(RuntimeError):
        deliverables.write_extras(tiny_result, tmp_path / "out.gpkg", overwrite=True,
                                  options=FAST)
    assert sorted(p.name for p in (tmp_path / "out_files").rglob("*")) == before
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".")] == []


def test_cli_json_lists_the_extras_and_no_progress_on_stdout(tmp_path, capsys):
    from test_cellgrid import tiny_project

    from gisrun.cli.main import main

    project = tiny_project(tmp_path / "p")
    out = tmp_path / "cli.gpkg"
    result = CliRunner().invoke(cli, ["run", str(project), "-o", str(out), "--json",
                                      "--no-maps", "--no-report"])
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)
    assert Path(doc["extras"]["lumped_parameters"]["green_ampt"]).exists()
    assert Path(doc["extras"]["rasters"]["uniform_60mm"]["runoff"]).exists()
    assert doc["extras"]["report"] is None
    capsys.readouterr()
    code = main(["run", str(project), "-o", str(tmp_path / "other.gpkg"), "--plot", "NOPE"])
    err = capsys.readouterr().err
    assert code == 2 and "NOPE" in err and "Traceback" not in err
    assert not (tmp_path / "other.gpkg").exists()  # checked before any work


def test_demo_cells_area_weighted_match_the_subcatchment_table(tmp_path):
    """Every demo subcatchment on the raster: the cell-level runoff, weighted by the exact
    cover of each cell (shapely), within 1% of its own runoff depth (or, for the few with
    little runoff, within 0.05% of the rain: a cut cell carries one value for its parts)."""
    result = run(DEMO)
    paths = write_cell_rasters(result, tmp_path)
    coverage = result.coverage.set_index("subcatchment_id")
    with rasterio.open(paths[result.storms[0].name]["runoff"]) as src:
        t, shape = src.transform, src.shape
    rows, cols = np.indices(shape)
    x0, y1 = t @ (cols.ravel(), rows.ravel())
    x1, y0 = t @ (cols.ravel() + 1, rows.ravel() + 1)
    boxes = shapely.box(x0, y0, x1, y1)
    tree = shapely.STRtree(boxes)
    weights = {}
    for sid, geom in zip(result.subcatchments.subcatchment_id, result.subcatchments.geometry,
                         strict=True):
        if coverage.loc[sid, "outside_area_m2"] > 0:
            continue  # area beyond the raster has no cells to show it
        hit = tree.query(geom)
        weights[sid] = (hit, shapely.area(shapely.intersection(geom, boxes[hit])))
    assert len(weights) >= 80
    for storm in result.storms[:2]:
        with rasterio.open(paths[storm.name]["runoff"]) as src:
            values = src.read(1, masked=True).filled(np.nan).ravel() / 1000
        subs = storm.subcatchments.set_index("subcatchment_id")
        for sid, (hit, area) in weights.items():
            v = values[hit]
            ok = np.isfinite(v) & (area > 0)
            mean = np.sum(area[ok] * v[ok]) / np.sum(area[ok])
            ref = subs.loc[sid, "runoff_depth_m"]
            tol = max(0.01 * ref, 5e-4 * subs.loc[sid, "rain_depth_m"])
            assert abs(mean - ref) <= tol, (storm.name, sid, mean, ref)
