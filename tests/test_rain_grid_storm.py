"""A storm from a rain grid (``kind = "rain_grid"``), run through the whole program.

Acceptance (issue 19): a uniform grid gives exactly the uniform storm's results (every output
table equal, bit for bit); the grid's weights reach the output's weights layer.
"""

from __future__ import annotations

import dataclasses
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pyogrio
import pytest
import xarray as xr
from bad_inputs_helpers import make_project, run_cli, write_rain_grid

from gisrun import load_project, read_inputs, run, write_outputs
from gisrun.config.storms import storm_from_config
from gisrun.errors import GisrunWarning
from gisrun.io.rain_grid import RainStack
from gisrun.storm.gridded import BLOCK_SHARE

DEMO = Path(__file__).resolve().parents[1] / "demo_catchment"


def write_uniform_grid(path: Path, depth_m: np.ndarray, bounds: tuple[float, ...]) -> Path:
    """A lon/lat CF NetCDF whose cells all hold ``depth_m[k]`` (m per 5-minute step)."""
    west, south, east, north = bounds
    lon = np.arange(west - 0.01, east + 0.01, 0.004)
    lat = np.arange(south - 0.01, north + 0.01, 0.003)
    values = np.broadcast_to(depth_m[:, None, None], (depth_m.size, lat.size, lon.size))
    ds = xr.Dataset({"rain": (("time", "lat", "lon"), np.array(values), {"units": "m"})},
                    coords={"lat": ("lat", lat, {"units": "degrees_north"}),
                            "lon": ("lon", lon, {"units": "degrees_east"})})
    ds["time"] = ("time", 5.0 * np.arange(1, depth_m.size + 1),
                  {"units": "minutes since 2026-07-14 15:00:00"})
    ds.to_netcdf(path)
    return path


@pytest.fixture(scope="module")
def demo():
    loaded = load_project(DEMO)
    project = dataclasses.replace(loaded, storms=tuple(  # the short observed event
        s for s in loaded.storms if s["name"] == "observed_event"))
    return project, read_inputs(project)


def _layers(path: Path) -> dict[str, pd.DataFrame]:
    return {name: pyogrio.read_dataframe(path, layer=name)
            for name, _ in pyogrio.list_layers(path)}


def test_a_uniform_grid_gives_exactly_the_uniform_storm(demo, tmp_path):
    project, inputs = demo
    h = inputs.storms[0]
    assert np.all(np.diff(h.time_s) == 300.0)
    bounds = tuple(inputs.subcatchments.to_crs("EPSG:4326").total_bounds)
    write_uniform_grid(tmp_path / "uniform.nc", h.depth_m, bounds)
    storm = storm_from_config({"name": h.name, "kind": "rain_grid", "path": "uniform.nc"},
                              base_dir=tmp_path, units=project.units, where="t",
                              subcatchments=inputs.subcatchments)
    assert storm.areal is not None and np.array_equal(storm.depth_m, h.depth_m)
    small = dataclasses.replace(project, memory_budget_mb=2.0)  # many chunks
    plain = write_outputs(run(small, inputs=inputs), output=tmp_path / "plain.gpkg")
    gridded = write_outputs(run(small, inputs=dataclasses.replace(inputs, storms=(storm,))),
                            output=tmp_path / "grid.gpkg")
    before, after = _layers(plain), _layers(gridded)
    assert set(after) == set(before) | {"rain_weights"}
    for name, frame in before.items():
        if name != "run_info":
            pd.testing.assert_frame_equal(after[name], frame, check_exact=True, obj=name)
    weights = after["rain_weights"]
    sums = weights.groupby("subcatchment_id")["weight"].sum()
    assert len(sums) == len(inputs.subcatchments)
    np.testing.assert_allclose(sums, 1.0, rtol=1e-9)
    assert weights["source_id"].str.fullmatch(r"r\d+_c\d+").all()


def test_the_grid_is_read_in_blocks_of_a_share_of_the_memory_budget(demo, tmp_path,
                                                                  monkeypatch):
    project, inputs = demo
    west, south, east, north = inputs.subcatchments.to_crs("EPSG:4326").total_bounds
    lon = np.arange(west - 0.01, east + 0.01, 0.004)
    lat = np.arange(south - 0.01, north + 0.01, 0.003)
    rain = np.random.default_rng(19).gamma(0.5, 2e-4, size=(20, lat.size, lon.size))
    ds = xr.Dataset({"rain": (("time", "lat", "lon"), rain, {"units": "m"})},
                    coords={"lat": ("lat", lat, {"units": "degrees_north"}),
                            "lon": ("lon", lon, {"units": "degrees_east"})})
    ds["time"] = ("time", 5.0 * np.arange(1, 21), {"units": "minutes since 2026-07-14 15:00:00"})
    ds.to_netcdf(tmp_path / "random.nc")
    reads: list[tuple[int, int]] = []
    read_stored = RainStack.read_stored
    monkeypatch.setattr(RainStack, "read_stored",
                        lambda self, first, stop: reads.append((first, stop))
                        or read_stored(self, first, stop))
    spec = {"name": "random", "kind": "rain_grid", "path": "random.nc"}

    def build(**budget):
        reads.clear()
        return storm_from_config(spec, base_dir=tmp_path, units=project.units, where="t",
                                 subcatchments=inputs.subcatchments, **budget)

    whole = build()  # no budget: blocks of 128 MB, the whole stack at once
    assert reads == [(0, 20)]
    step_mb = 8 * lat.size * lon.size / 2**20  # a block of 7 steps, then 7, then 6
    with warnings.catch_warnings():  # the kept cells (20 steps at most) fit the budget
        warnings.simplefilter("error", GisrunWarning)
        small = build(memory_budget_mb=7.5 * step_mb / BLOCK_SHARE)
    assert reads == [(0, 7), (7, 14), (14, 20)]
    with pytest.warns(GisrunWarning, match=r"more than 50% of memory_budget_mb .* so the run "
                                           r"may use more memory than its budget"):
        build(memory_budget_mb=step_mb)  # 20 steps of the used cells: over half of it
    assert small.areal is not None and whole.areal is not None
    assert np.array_equal(small.areal.depth_m, whole.areal.depth_m)  # block size: no matter
    assert not np.all(whole.areal.depth_m == whole.areal.depth_m[:, :1])  # rain varies


def test_check_names_the_grid_and_run_writes_its_weights(tmp_path, capsys):
    # The tiny project: S1 and S2 are 50 x 100 m side by side; the grid has 25 m cells, so
    # each subcatchment covers 2 x 4 whole cells, each weighing 1/8 (by hand).
    folder = tmp_path / "p"
    make_project(folder)
    write_rain_grid(folder / "rain.nc")
    with open(folder / "gisrun.toml", "a") as handle:
        handle.write('\n[[storms]]\nname = "radar"\nkind = "rain_grid"\npath = "rain.nc"\n')
    code, out, err = run_cli(capsys, ["check", str(folder)])
    assert code == 0, err
    assert ("storm 'radar': rain per subcatchment from rain grid rain.nc:precip (4 x 4 cells "
            "of 25 x 25 metre, WGS 84 / UTM zone 17N; 3 steps of 5 min from "
            "2026-07-01T00:00:00") in out
    code, out, err = run_cli(capsys, ["run", str(folder), "--no-extras", "--quiet"])
    assert code == 0, err
    weights = pyogrio.read_dataframe(folder / "out" / "result.gpkg", layer="rain_weights")
    assert sorted(weights.groupby("subcatchment_id").size().tolist()) == [8, 8]
    np.testing.assert_allclose(weights["weight"], 1 / 8, rtol=1e-12)
    west = set(weights.loc[weights["subcatchment_id"] == "S1", "source_id"])
    assert west == {f"r{r}_c{c}" for r in range(4) for c in (0, 1)}


def test_fill_gaps_fills_a_nodata_cell_from_the_cells_around_it(tmp_path, capsys):
    # A uniform grid (10 mm/h) with one cell without a value in one step: its eight neighbours
    # all hold 10 mm/h, so the filled value is exactly 10 mm/h (by hand) and every output equals
    # the grid without the gap; the run says what it filled. Without fill_gaps: an error.
    results = {}
    for name, nodata, fill in (("whole", None, ""), ("gap", (1, 2, 2), "fill_gaps = true\n")):
        folder = tmp_path / name
        make_project(folder)
        write_rain_grid(folder / "rain.nc", nodata_at=nodata)
        with open(folder / "gisrun.toml", "a") as handle:
            handle.write('\n[[storms]]\nname = "radar"\nkind = "rain_grid"\npath = "rain.nc"\n'
                         + fill)
        code, out, err = run_cli(capsys, ["run", str(folder), "--no-extras", "--quiet"])
        assert code == 0, err
        results[name] = _layers(folder / "out" / "result.gpkg")
    for layer, frame in results["whole"].items():
        if layer != "run_info":
            pd.testing.assert_frame_equal(results["gap"][layer], frame, check_exact=True)
    warnings = results["gap"]["run_info"].to_string()
    assert ("1 missing value(s) of the rain grid in cells the subcatchments use were filled "
            "with the mean of the cells around them (fill_gaps = true), the first at time "
            "2026-07-01T00:10:00 in cell r2_c2") in warnings


def test_check_and_run_make_runoff_bands_for_a_rain_grid_storm(tmp_path, capsys):
    # [uncertainty] with a storm of areal rain: check raises nothing, and the run's bands of a
    # uniform grid are those of the same rain given as one series (the exact comparison is in
    # tests/uncertainty/test_uncertainty_areal.py; here both go through the 6-digit output)
    folder = tmp_path / "p"
    make_project(folder)
    write_rain_grid(folder / "rain.nc", minutes=[5.0 * k for k in range(1, 13)], value=60.0)
    (folder / "storm.csv").write_text("time_min,intensity_mm_per_h\n0,0\n"
                                      + "".join(f"{5 * k},60\n" for k in range(1, 13)))
    with open(folder / "gisrun.toml", "a") as handle:
        handle.write('\n[[storms]]\nname = "radar"\nkind = "rain_grid"\npath = "rain.nc"\n'
                     "\n[uncertainty]\nsamples = 8\nseed = 5\n")
    code, out, err = run_cli(capsys, ["check", str(folder)])
    assert code == 0, err + out
    code, out, err = run_cli(capsys, ["run", str(folder), "--no-extras", "--quiet"])
    assert code == 0, err
    bands = pyogrio.read_dataframe(folder / "out" / "result.gpkg", layer="runoff_bands")
    steady, radar = (bands[bands["storm"] == s].set_index("subcatchment_id").sort_index()
                     for s in ("steady", "radar"))
    assert list(radar.index) == ["S1", "S2"]
    columns = [c for c in bands.columns if c.startswith(("runoff_depth_p", "runoff_volume_p"))]
    assert (radar["runoff_depth_p90_mm"] > radar["runoff_depth_p10_mm"]).all()
    np.testing.assert_allclose(radar[columns], steady[columns], rtol=1e-5)
