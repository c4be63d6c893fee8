"""The demo project, run end to end through the command line, and its output read back."""

import json
import shutil
import sqlite3
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pytest
from numpy.testing import assert_allclose

from gisrun.cli.main import main

#: Written values carry 6 significant digits (gisrun.units.SIGNIFICANT_DIGITS): each is within
#: 5e-6 of the unrounded value, so sums and products of them agree to about 1e-5 (the run itself
#: keeps its mass balance to 1e-9, checked in memory elsewhere).
WRITTEN_RTOL = 2e-5

#: End-to-end, dask, memory, interrupt and fuzz tests: `pytest -m "not slow"` skips them.
pytestmark = pytest.mark.slow

DEMO = Path(__file__).resolve().parents[1] / "demo_catchment"


@pytest.fixture(scope="module")
def demo_output(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo") / "runoff.gpkg"
    code = main(["run", str(DEMO), "--output", str(out), "--quiet"])
    assert code == 0
    return out


def storm_layers(path):
    return [name for name, geom in pyogrio.list_layers(path) if name.startswith("runoff_")]


def test_one_feature_per_subcatchment_with_every_column_and_input_crs(demo_output):
    source = gpd.read_file(DEMO / "subcatchments.gpkg")
    layers = storm_layers(demo_output)
    assert len(layers) >= 3
    for name in layers:
        out = gpd.read_file(demo_output, layer=name)
        assert out.crs == source.crs
        assert sorted(out["subcatchment_id"]) == sorted(source["catchment_code"])
        for col in ["area_m2", "modelled_area_m2", "rain_depth_mm", "infiltration_depth_mm",
                    "runoff_depth_mm", "runoff_volume_m3", "runoff_coefficient",
                    "time_to_ponding_min", "peak_excess_intensity_mm_per_h",
                    "impervious_fraction", "soil_A_fraction", "soil_B_D_fraction"]:
            assert col in out.columns, col
        # each subcatchment's soil shares add up to one
        shares = out[[c for c in out.columns if c.startswith("soil_") and c.endswith("_fraction")]]
        assert_allclose(shares.sum(axis=1), 1.0, rtol=WRITTEN_RTOL)
        # modelled area within the nodata limit of the polygon area (max_fraction = 0.25)
        assert (out["modelled_area_m2"] <= out["area_m2"] * (1 + 1e-9)).all()


def test_mass_balance_per_subcatchment(demo_output):
    for name in storm_layers(demo_output):
        out = pyogrio.read_dataframe(demo_output, layer=name, read_geometry=False)
        rain = out["rain_depth_mm"]
        fates = out["infiltration_depth_mm"] + out["runoff_depth_mm"] + out["storage_depth_mm"]
        assert_allclose(fates, rain, rtol=WRITTEN_RTOL)
        assert_allclose(out["runoff_volume_m3"], out["runoff_depth_mm"] / 1000 *
                        out["modelled_area_m2"], rtol=WRITTEN_RTOL)


def test_series_sums_to_subcatchment_depths(demo_output):
    series = pyogrio.read_dataframe(demo_output, layer="excess_series")
    results = pyogrio.read_dataframe(demo_output, layer="subcatchment_results")
    step_h = series.groupby("storm")["time_end_min"].min() / 60.0
    totals = series.groupby(["storm", "subcatchment_id"]).agg(
        excess=("excess_mm", "sum"), rain=("rain_mm", "sum"),
        excess_rate=("excess_intensity_mm_per_h", "sum")).reset_index()
    merged = totals.merge(results, on=["storm", "subcatchment_id"])
    assert len(merged) == len(results)
    assert_allclose(merged["excess"], merged["runoff_depth_mm"], rtol=WRITTEN_RTOL, atol=1e-12)
    assert_allclose(merged["rain"], merged["rain_depth_mm"], rtol=WRITTEN_RTOL)
    # intensities x step length give the same depths
    assert_allclose(merged["excess_rate"] * merged["storm"].map(step_h), merged["runoff_depth_mm"],
                    rtol=WRITTEN_RTOL, atol=1e-12)


def test_run_table_describes_the_run(demo_output):
    info = pyogrio.read_dataframe(demo_output, layer="run_info")
    facts = dict(zip(info["key"], info["value"], strict=False))
    assert facts["loss_method"] == "green_ampt"
    assert facts["unit_system"] == "si"
    assert "licensed engineer" in facts["caution"]
    keys = set(info["key"])
    assert {"sha256:subcatchments.gpkg", "sha256:soil_groups.tif", "sha256:land_cover.tif",
            "sha256:gisrun.toml"} <= keys
    assert (info["key"] == "storm").sum() >= 3


def test_more_rain_more_runoff_across_demo_storms(demo_output):
    results = pyogrio.read_dataframe(demo_output, layer="subcatchment_results")
    nrcs = results[results["storm"].str.startswith("nrcs_ii")]
    by_storm = nrcs.pivot(index="subcatchment_id", columns="storm", values="runoff_depth_mm")
    order = nrcs.groupby("storm")["rain_depth_mm"].mean().sort_values().index
    assert len(order) == 3
    ordered = by_storm[order].to_numpy()
    assert (np.diff(ordered, axis=1) >= -1e-12).all()


def test_never_ponding_is_null_in_the_file(demo_output):
    name = storm_layers(demo_output)[0]
    con = sqlite3.connect(demo_output)
    nulls = con.execute(f"select count(*) from {name} where time_to_ponding_min is null").fetchone()
    total = con.execute(f"select count(*) from {name}").fetchone()
    con.close()
    out = pyogrio.read_dataframe(demo_output, layer=name, read_geometry=False)
    assert nulls[0] == out["time_to_ponding_min"].isna().sum() <= total[0]


def test_cli_prints_summary_caution_and_json(tmp_path, capsys):
    out = tmp_path / "a.gpkg"
    # the maps and report are not what this checks: --no-extras keeps it quick
    assert main(["run", str(DEMO), "--output", str(out), "--no-extras"]) == 0
    text = capsys.readouterr()
    assert "licensed engineer" in text.out and str(out) in text.out
    # a second run without --overwrite stops and keeps the file
    before = out.read_bytes()
    assert main(["run", str(DEMO), "--output", str(out)]) == 2
    assert "already exists" in capsys.readouterr().err
    assert out.read_bytes() == before
    assert main(["run", str(DEMO), "--output", str(out), "--overwrite", "--json",
                 "--no-extras"]) == 0
    summary = json.loads(capsys.readouterr().out)
    assert summary["subcatchments"] == len(gpd.read_file(DEMO / "subcatchments.gpkg"))
    assert summary["caution"]


def broken_demo(tmp_path: Path) -> Path:
    folder = tmp_path / "broken"
    shutil.copytree(DEMO, folder, ignore=shutil.ignore_patterns("output"))
    text = (folder / "gisrun.toml").read_text()
    text = text.replace('path = "land_cover.tif"', 'path = "land_cover_missing.tif"')
    text = text.replace('id_field = "catchment_code"', 'id_field = "catchment_cod"')
    text = text.replace('"9" = "water"\n', "")  # code 9 is in the soil raster
    (folder / "gisrun.toml").write_text(text)
    return folder


def test_check_reports_each_problem_on_one_line(tmp_path, capsys):
    folder = broken_demo(tmp_path)
    assert main(["check", str(folder)]) == 2
    err = capsys.readouterr().err
    lines = [line for line in err.splitlines() if line.startswith("gisrun: error:")]
    assert any("land_cover_missing.tif" in line for line in lines)
    assert any("catchment_cod" in line and "catchment_code" in line for line in lines)
    assert any("soil_groups.tif" in line and "9" in line for line in lines)
    assert len(lines) == 3, lines
    assert "Traceback" not in err


def test_check_unknown_soil_code(tmp_path, capsys):
    folder = tmp_path / "codes"
    shutil.copytree(DEMO, folder, ignore=shutil.ignore_patterns("output"))
    text = (folder / "gisrun.toml").read_text().replace('"9" = "water"\n', "")
    (folder / "gisrun.toml").write_text(text)
    assert main(["check", str(folder)]) == 2
    err = capsys.readouterr().err
    assert "soil_groups.tif" in err and "9" in err
    assert main(["check", str(DEMO)]) == 0


def test_series_csv_is_a_batched_copy_of_the_streamed_table(demo_output):
    # the CLI streams the series into the GeoPackage chunk by chunk and copies it to CSV in
    # batches; both must hold the same rows
    csv = pd.read_csv(demo_output.parent / f"{demo_output.stem}_files" / "excess_series.csv")
    table = pyogrio.read_dataframe(demo_output, layer="excess_series")
    assert list(csv.columns) == list(table.columns)
    pd.testing.assert_frame_equal(csv, table, check_dtype=False)


def test_cli_into_an_existing_geopackage_keeps_its_layers(tmp_path, capsys):
    from shapely.geometry import box

    theirs = tmp_path / "their_project.gpkg"
    roads = gpd.GeoDataFrame({"road": ["Mill Lane"]}, geometry=[box(0, 0, 5, 1)], crs=32617)
    roads.to_file(theirs, layer="roads")
    before = gpd.read_file(theirs, layer="roads")
    args = ["run", str(DEMO), "--into", str(theirs), "--no-extras", "--quiet"]
    assert main(args) == 0
    layers = dict(pyogrio.list_layers(theirs))
    assert "roads" in layers and any(name.startswith("runoff_") for name in layers)
    pd.testing.assert_frame_equal(gpd.read_file(theirs, layer="roads"), before)
    assert main(args) == 2  # gisrun's layers are there now: replaced only with --overwrite
    assert "--overwrite" in capsys.readouterr().err
    assert main([*args, "--overwrite"]) == 0
    assert main(["run", str(DEMO), "--into", str(tmp_path / "none.gpkg"), "--quiet"]) == 2
