"""An uncertainty run end to end: the layers, the report section, the figures; nothing else moves.

Uses the tiny invented project of ``bad_inputs_helpers`` (two squares on groups A and B).
"""

from __future__ import annotations

import shutil
import sqlite3
from pathlib import Path

import numpy as np
import pyogrio
import pytest
from bad_inputs_helpers import make_project, run_cli

import gisrun
from gisrun.model import BAND_CAUTION

pytestmark = pytest.mark.slow

UNCERTAINTY = '\n[uncertainty]\nsamples = 12\nseed = 99\npercentiles = [5, 50, 95]\ntop_k = 1\n'


def _run(tmp_path, capsys, name, extra="", printed=None):
    folder = tmp_path / name
    project = make_project(folder)
    project.write_text(project.read_text() + extra)
    # a heavier storm than the helper's, so both soils run off in some samples
    (folder / "storm.csv").write_text("time_min,intensity_mm_per_h\n0,0\n20,45\n40,45\n60,45\n")
    code, out, err = run_cli(capsys, ["run", str(folder)] + (["--quiet"] if printed is None
                                                               else []))
    assert code == 0, err
    if printed is not None:
        printed.append(out)
    return folder / "out" / "result.gpkg"


def _rows(gpkg, layer):
    with sqlite3.connect(gpkg) as db:
        return db.execute(f'SELECT * FROM "{layer}"').fetchall()


def test_bands_layers_report_and_figures(tmp_path, capsys):
    printed = []
    gpkg = _run(tmp_path, capsys, "with", UNCERTAINTY, printed)
    said = " ".join(printed[0].split())  # the console wraps long lines
    assert "Runoff bands (p5/p50/p95) from 12 parameter sets" in said
    assert BAND_CAUTION in said and "Planning-level estimates only" in said
    plain = _run(tmp_path, capsys, "without")
    layers = {name for name, _ in pyogrio.list_layers(gpkg)}
    assert {"runoff_bands", "parameter_sensitivity", "uncertainty_ranges"} <= layers
    assert not {"runoff_bands"} & {name for name, _ in pyogrio.list_layers(plain)}
    # the run's own layers are the same with and without the uncertainty runs
    for layer in ("runoff_steady", "subcatchment_results", "unit_results", "unit_parameters"):
        assert _rows(gpkg, layer) == _rows(plain, layer), layer
    bands = pyogrio.read_dataframe(gpkg, layer="runoff_bands")
    assert list(bands["subcatchment_id"]) == ["S1", "S2"]
    p5, p50, p95 = (bands[f"runoff_depth_p{p}_mm"].to_numpy() for p in (5, 50, 95))
    assert np.all(p5 <= p50) and np.all(p50 <= p95) and np.all(p95 > p5)
    assert np.all((bands["ponding_probability"] >= 0) & (bands["ponding_probability"] <= 1))
    assert bands["first_to_pond_share"].sum() <= 1.0 + 1e-12  # top_k = 1: one per sample
    assert set(bands["most_influential_parameter"]) <= {"ks", "suction_head",
                                                        "effective_porosity"}
    info = dict(_rows(gpkg, "run_info")[i][1:] for i in range(len(_rows(gpkg, "run_info"))))
    assert info.get("uncertainty_seed") == "99" and info.get("uncertainty_caution") == BAND_CAUTION
    files = gpkg.parent / "result_files"
    report = (files / "report.html").read_text(encoding="utf-8")
    section = report[report.index('id="bands"'):report.index('id="lumping"')]
    assert "parameter spread" in section or BAND_CAUTION[:60] in section
    assert "Latin hypercube" in section and "data:image/png" in section
    assert "how often each stays among the first 1" in section
    assert "between the p5 and p95 figures in 90 % of the sets" in section
    assert "Planning-level estimates only" in report
    maps = files / "maps"
    assert (maps / "runoff_band_width_steady.png").stat().st_size > 10_000
    assert list(maps.glob("tornado_steady_*.png"))


def test_same_seed_same_bands(tmp_path, capsys):
    a = pyogrio.read_dataframe(_run(tmp_path, capsys, "a", UNCERTAINTY), layer="runoff_bands")
    b = pyogrio.read_dataframe(_run(tmp_path, capsys, "b", UNCERTAINTY), layer="runoff_bands")
    c = pyogrio.read_dataframe(_run(tmp_path, capsys, "c", UNCERTAINTY.replace("99", "7")),
                               layer="runoff_bands")
    assert a.drop(columns="geometry").equals(b.drop(columns="geometry"))
    assert not np.array_equal(a["runoff_depth_p50_mm"], c["runoff_depth_p50_mm"])


def test_bands_do_not_depend_on_the_chunking(tmp_path):
    # the demo in one chunk and in several (a small memory budget): every sample runs the
    # run-wide table of distinct parts, so the bands agree (the run's own unit totals may
    # differ in the last bits between chunkings, as DEVELOPERS.md says of the engine)
    demo = Path(__file__).resolve().parents[2] / "demo_catchment"
    results = []
    for name, budget in (("one", ""), ("many", "memory_budget_mb = 50\n")):
        folder = tmp_path / name
        shutil.copytree(demo, folder, ignore=shutil.ignore_patterns("output", "*.py"))
        text = (folder / "gisrun.toml").read_text().replace("[project]\n", "[project]\n" + budget)
        (folder / "gisrun.toml").write_text(text + "\n[uncertainty]\nsamples = 8\nseed = 3\n")
        results.append(gisrun.run(folder, cells=False))
    one, many = (r.uncertainty.bands for r in results)
    numbers = [c for c in one.columns if one[c].dtype == float]
    assert np.allclose(one[numbers], many[numbers], rtol=1e-12, atol=1e-15, equal_nan=True)
    assert results[1].project.memory_budget_mb == 50


def test_pinned_values_give_the_run_result_through_the_whole_run(tmp_path, capsys):
    # every Green-Ampt parameter of both soils given without a range: nothing is sampled, and
    # the band is the run's own result in every column (the layers are written the same way)
    over = ("soil_class,ks_mm_per_h,suction_head_mm,effective_porosity\n"
            "A,10.9,110.1,0.412\nB,6.5,166.8,0.486\n")
    folder = tmp_path / "pinned"
    project = make_project(folder)
    (folder / "over.csv").write_text(over)
    project.write_text(project.read_text() + '\n[parameters]\noverrides = "over.csv"\n'
                       + UNCERTAINTY)
    (folder / "storm.csv").write_text("time_min,intensity_mm_per_h\n0,0\n20,45\n40,45\n60,45\n")
    code, _, err = run_cli(capsys, ["run", str(folder), "--quiet", "--no-extras"])
    assert code == 0, err
    gpkg = folder / "out" / "result.gpkg"
    run = pyogrio.read_dataframe(gpkg, layer="runoff_steady")
    bands = pyogrio.read_dataframe(gpkg, layer="runoff_bands")
    assert pyogrio.read_dataframe(gpkg, layer="uncertainty_ranges").empty
    for p in (5, 50, 95):
        assert np.array_equal(bands[f"runoff_depth_p{p}_mm"], run["runoff_depth_mm"])
        assert np.array_equal(bands[f"runoff_volume_p{p}_m3"], run["runoff_volume_m3"])
        assert np.array_equal(bands[f"time_to_ponding_p{p}_min"], run["time_to_ponding_min"],
                              equal_nan=True)
