"""Reading rain stacks: CF NetCDF (xarray), multi-band GeoTIFF, a folder of GeoTIFFs."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import rasterio
import xarray as xr
from pyproj import CRS
from rasterio.transform import from_origin

from gisrun.errors import GisrunError
from gisrun.io.rain_grid import RainGridSettings, open_rain_grid

RNG = np.random.default_rng(11)


def write_netcdf(path: Path, values: np.ndarray, *, units: str | None = "mm h-1",
                 time_units: str = "minutes since 2026-07-01 00:00:00",
                 minutes: np.ndarray | None = None, bounds: bool = False,
                 projected: bool = False) -> Path:
    """A CF NetCDF written with xarray: ``values`` (time, y, x)."""
    n, ny, nx = values.shape
    minutes = np.arange(1, n + 1) * 5.0 if minutes is None else minutes
    attrs = {} if units is None else {"units": units}
    if projected:
        coords = {"y": ("y", 4_480_000.0 - 1000 * np.arange(ny),
                        {"standard_name": "projection_y_coordinate", "units": "m"}),
                  "x": ("x", 500_500.0 + 1000 * np.arange(nx),
                        {"standard_name": "projection_x_coordinate", "units": "m"})}
        attrs["grid_mapping"] = "crs"
        dims = ("time", "y", "x")
    else:
        coords = {"lat": ("lat", 40.0 + 0.1 * np.arange(ny), {"units": "degrees_north"}),
                  "lon": ("lon", -80.0 + 0.1 * np.arange(nx), {"units": "degrees_east"})}
        dims = ("time", "lat", "lon")
    ds = xr.Dataset({"precip": (dims, values, attrs)}, coords=coords)
    ds["time"] = ("time", minutes, {"units": time_units, "standard_name": "time"})
    if bounds:
        ds["time"].attrs["bounds"] = "time_bnds"
        ds["time_bnds"] = (("time", "nv"), np.column_stack([minutes - 5.0, minutes]))
    if projected:
        ds["crs"] = ((), 0, CRS("EPSG:32617").to_cf())
    ds.to_netcdf(path)
    return path


def test_netcdf_intensity_becomes_depth_per_step_with_cf_times(tmp_path):
    values = RNG.uniform(0, 30, (4, 3, 5))  # mm/h over 5-minute steps
    stack = open_rain_grid(RainGridSettings(write_netcdf(tmp_path / "r.nc", values)))
    assert stack.step_s == 300.0 and stack.steps == 4
    assert stack.start == "2026-07-01T00:00:00"  # the first time marks the end of its step
    assert stack.labels[0] == "2026-07-01T00:05:00"
    assert stack.crs.equals(CRS("EPSG:4326"))
    assert (stack.width, stack.height) == (5, 3)
    assert stack.transform.c == pytest.approx(-80.05) and stack.transform.e == pytest.approx(0.1)
    # mm/h x 5 min / 60 -> mm -> m
    np.testing.assert_allclose(stack.read_steps(1, 3), values[1:3] * 5 / 60 / 1000, rtol=1e-12)



@pytest.mark.parametrize("dtype", [np.float32, np.float64, np.int16, ">f4"])
def test_stored_values_keep_float32_and_times_the_factor_are_the_depths(tmp_path, dtype):
    # read_stored gives what xarray decodes (float32 stays float32, so the areal rain widens
    # it as it keeps the used cells); read_steps is those values widened to float64, then
    # multiplied by the factor, to the bit (the bits the areal rain keeps).
    values = np.round(RNG.uniform(0, 30, (4, 3, 5))).astype(dtype)
    stack = open_rain_grid(RainGridSettings(write_netcdf(tmp_path / "r.nc", values)))
    stored = stack.read_stored(0, 4)
    assert stored.dtype == (np.float32 if np.dtype(dtype).char == "f" else np.float64)
    assert stored.flags.c_contiguous and stored.dtype.isnative
    np.testing.assert_array_equal(stored, values.astype(np.float64))
    depths = np.array(stored, dtype=np.float64)
    depths *= 5 / 60 / 1000
    assert stack.to_depth_m == 5 / 60 / 1000 * 1.0
    np.testing.assert_array_equal(stack.read_steps(0, 4), depths)


def test_netcdf_time_bounds_give_the_step_and_its_start(tmp_path):
    path = write_netcdf(tmp_path / "r.nc", np.ones((3, 2, 2)), units="kg m-2", bounds=True)
    stack = open_rain_grid(RainGridSettings(path, time_marks="start"))  # bounds win
    assert stack.start == "2026-07-01T00:00:00" and stack.step_s == 300.0
    np.testing.assert_allclose(stack.read_steps(0, 3), 0.001)  # 1 kg m-2 = 1 mm


def test_netcdf_grid_mapping_gives_the_crs(tmp_path):
    path = write_netcdf(tmp_path / "r.nc", np.ones((2, 3, 2)), units="mm", projected=True)
    stack = open_rain_grid(RainGridSettings(path))
    assert stack.crs.to_epsg() == 32617
    assert (stack.transform.a, stack.transform.e) == (1000.0, -1000.0)
    assert (stack.transform.c, stack.transform.f) == (500_000.0, 4_480_500.0)


def test_netcdf_projected_coordinates_in_km_are_read_in_the_crs_metres(tmp_path):
    # CF: a projection_x_coordinate may carry any length unit ("km" is common in radar
    # products); the grid mapping's CRS is in metres. The km file must place its cells where
    # the metre file does (it was read 1000 times too small, and the run said the grid did
    # not cover the subcatchments)
    metres = open_rain_grid(RainGridSettings(write_netcdf(tmp_path / "m.nc", np.ones((2, 3, 4)),
                                                          projected=True)))
    ds = xr.open_dataset(tmp_path / "m.nc", decode_times=False).load()
    for axis in ("x", "y"):
        ds[axis] = (axis, ds[axis].values / 1000.0, {**ds[axis].attrs, "units": "km"})
    ds.to_netcdf(tmp_path / "km.nc")
    km = open_rain_grid(RainGridSettings(tmp_path / "km.nc"))
    assert km.crs.equals(metres.crs)
    np.testing.assert_allclose(tuple(km.transform), tuple(metres.transform), rtol=1e-12)
    assert (metres.transform.a, metres.transform.c) == (1000.0, 500_000.0)


@pytest.mark.parametrize("dims", [("time", "level", "lat", "lon"),
                                  ("member", "time", "lat", "lon")])
def test_netcdf_extra_dimension_of_length_one_reads_as_the_plain_stack(tmp_path, dims):
    # (time, 1, y, x) as some products write it: the same values as the (time, y, x) variable
    # (it stopped with "has 0 gridded variables []")
    values = RNG.uniform(0, 30, (4, 3, 5))
    plain = open_rain_grid(RainGridSettings(write_netcdf(tmp_path / "plain.nc", values)))
    ds = xr.open_dataset(tmp_path / "plain.nc", decode_times=False).load()
    extra = next(d for d in dims if d not in ("time", "lat", "lon"))
    ds["precip"] = ds["precip"].expand_dims(extra).transpose(*dims)
    ds.to_netcdf(tmp_path / "extra.nc")
    stack = open_rain_grid(RainGridSettings(tmp_path / "extra.nc"))
    assert (stack.labels, stack.step_s, stack.transform) == (plain.labels, plain.step_s,
                                                             plain.transform)
    np.testing.assert_array_equal(stack.read_steps(1, 4), plain.read_steps(1, 4))
    np.testing.assert_allclose(stack.read_steps(0, 4), values * 5 / 60 / 1000, rtol=1e-12)


def test_netcdf_extra_dimension_longer_than_one_is_a_one_line_error(tmp_path):
    ds = xr.open_dataset(write_netcdf(tmp_path / "plain.nc", np.ones((4, 3, 5))),
                         decode_times=False).load()
    ds["precip"] = ds["precip"].expand_dims(member=3).transpose("time", "member", "lat", "lon")
    ds.to_netcdf(tmp_path / "members.nc")
    with pytest.raises(GisrunError, match=r"members\.nc:precip: has dimensions \(time: 4, "
                       r"member: 3, lat: 3, lon: 5\), not \(time, y, x\)"):
        open_rain_grid(RainGridSettings(tmp_path / "members.nc"))


def test_netcdf_curvilinear_grid_is_refused_not_read_by_cell_index(tmp_path):
    # x and y dimensions without coordinate values, the cells placed by 2-D lat and lon only:
    # read as a grid of cells 1 unit wide at 0, 1, 2 ... (the run then said the grid did not
    # cover the subcatchments)
    lon, lat = np.meshgrid(-80.0 + 0.1 * np.arange(5), 40.0 + 0.1 * np.arange(3))
    ds = xr.Dataset({"precip": (("time", "y", "x"), np.ones((2, 3, 5)),
                                {"units": "mm h-1", "coordinates": "lat lon"})},
                    coords={"time": ("time", [5.0, 10.0],
                                     {"units": "minutes since 2026-07-01"}),
                            "lat": (("y", "x"), lat, {"units": "degrees_north"}),
                            "lon": (("y", "x"), lon, {"units": "degrees_east"})})
    ds.to_netcdf(tmp_path / "curved.nc")
    with pytest.raises(GisrunError, match=r"curved\.nc:precip: has no coordinate values along "
                       r"dimension 'x' \(only 2-D lat, lon: a curvilinear grid\); regrid"):
        open_rain_grid(RainGridSettings(tmp_path / "curved.nc", crs="EPSG:4326"))


@pytest.mark.parametrize("case, message", [
    ("fortnights", r"r\.nc:time: time units 'fortnights since 2026-07-01' are not understood"),
    ("no_since", r"r\.nc:time: has no CF time units"),
    ("irregular", r"r\.nc:precip: has an irregular time step: 5 min at first, 10 min from "
                  r"2026-07-01T00:10:00"),
    ("unit", r"r\.nc:precip: rain unit 'furlongs' is not understood"),
    ("no_unit", r"r\.nc:precip: has no rain unit"),
    ("step_min", r"r\.nc:precip: has a step of 5 min but the project file says step_min = 10"),
    ("rain_is", r"r\.nc:precip: rain_is = 'depth' but its unit 'mm h-1' is an intensity"),
    ("variable", r"r\.nc: has no variable 'rain'"),
])
def test_bad_netcdf_is_a_one_line_error(tmp_path, case, message):
    kwargs, settings = {}, {}
    if case == "fortnights":
        kwargs["time_units"] = "fortnights since 2026-07-01"
    elif case == "no_since":
        kwargs["time_units"] = "minutes"
    elif case == "irregular":
        kwargs["minutes"] = np.array([5.0, 10.0, 20.0, 25.0])
    elif case in ("unit", "no_unit"):
        kwargs["units"] = "furlongs" if case == "unit" else None
    settings = {"step_min": {"step_s": 600.0}, "rain_is": {"rain_is": "depth"},
                "variable": {"variable": "rain"}}.get(case, {})
    path = write_netcdf(tmp_path / "r.nc", np.ones((4, 2, 2)), **kwargs)
    with pytest.raises(GisrunError, match=message) as err:
        open_rain_grid(RainGridSettings(path, **settings))
    assert "\n" not in str(err.value)


def _write_bands(path: Path, values: np.ndarray, descriptions: list[str] | None,
                 unit: str | None = "mm", nodata: float | None = None) -> Path:
    profile = {"driver": "GTiff", "height": values.shape[1], "width": values.shape[2],
               "count": values.shape[0], "dtype": "float32", "crs": "EPSG:32617",
               "transform": from_origin(500_000, 4_480_000, 1000, 1000), "nodata": nodata}
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(values.astype(np.float32))
        for b in range(1, values.shape[0] + 1):
            if descriptions:
                dst.set_band_description(b, descriptions[b - 1])
            if unit:
                dst.set_band_unit(b, unit)
    return path


def test_multiband_geotiff_with_band_times(tmp_path):
    values = RNG.uniform(0, 2, (3, 2, 4)).astype(np.float32)
    values[1, 0, 0] = -9999
    times = [f"2026-07-01T00:{m:02d}:00" for m in (10, 20, 30)]
    path = _write_bands(tmp_path / "r.tif", values, times, nodata=-9999)
    stack = open_rain_grid(RainGridSettings(path))
    assert stack.step_s == 600.0 and stack.start == "2026-07-01T00:00:00"
    got = stack.read_steps(0, 3)
    assert np.isnan(got[1, 0, 0])
    ok = ~np.isnan(got)
    np.testing.assert_allclose(got[ok], values.astype(np.float64)[ok] / 1000, rtol=1e-12)


def test_multiband_geotiff_times_from_the_project(tmp_path):
    path = _write_bands(tmp_path / "r.tif", np.ones((3, 2, 2)), None, unit=None)
    stack = open_rain_grid(RainGridSettings(path, unit="in/h", start="2026-07-01T06:00",
                                            step_s=900.0, time_marks="start"))
    assert stack.labels == ("2026-07-01T06:00:00", "2026-07-01T06:15:00",
                            "2026-07-01T06:30:00")
    np.testing.assert_allclose(stack.read_steps(2, 3), 0.0254 / 4)  # 1 in/h for 15 min
    with pytest.raises(GisrunError, match=r"r\.tif: has no band times"):
        open_rain_grid(RainGridSettings(path, unit="mm"))


def _folder(tmp_path: Path, names: list[str]) -> Path:
    folder = tmp_path / "grids"
    folder.mkdir()
    for k, name in enumerate(names):
        _write_bands(folder / name, np.full((1, 2, 3), float(k)), None)
    return folder


def test_folder_of_geotiffs_ordered_by_the_time_in_their_names(tmp_path):
    names = ["rain_20260701_0015.tif", "rain_20260701_0005.tif", "rain_20260701_0010.tif"]
    folder = _folder(tmp_path, names)
    stack = open_rain_grid(RainGridSettings(folder, time_pattern="rain_%Y%m%d_%H%M.tif"))
    assert stack.format == "geotiff_folder" and stack.step_s == 300.0
    assert stack.start == "2026-07-01T00:00:00"
    # the values written were 0, 1, 2 mm in the order of `names`: time order is 1, 2, 0
    np.testing.assert_allclose(stack.read_steps(0, 3)[:, 0, 0], [0.001, 0.002, 0.0])


def test_folder_errors_name_the_file(tmp_path):
    folder = _folder(tmp_path, ["rain_20260701_0005.tif", "radar_0010.tif"])
    with pytest.raises(GisrunError, match=r"radar_0010\.tif: does not match time_pattern"):
        open_rain_grid(RainGridSettings(folder, time_pattern="rain_%Y%m%d_%H%M.tif"))
    with pytest.raises(GisrunError, match=r"no time_pattern is given"):
        open_rain_grid(RainGridSettings(folder))


def test_band_and_file_units_must_agree(tmp_path):
    # a band (or a folder's file) in "mm" among ones in "mm/h" was read as mm/h, its own unit
    # passed over
    times = [f"2026-07-01T00:{m:02d}:00" for m in (5, 10, 15)]
    path = _write_bands(tmp_path / "r.tif", np.ones((3, 2, 2)), times, unit="mm/h")
    with rasterio.open(path, "r+") as dst:
        dst.set_band_unit(3, "mm")
    with pytest.raises(GisrunError, match=r"r\.tif:band 3: has unit 'mm', band 1 'mm/h'; give "
                                          r"every band the same rain unit"):
        open_rain_grid(RainGridSettings(path))
    folder = _folder(tmp_path, ["rain_20260701_0005.tif", "rain_20260701_0010.tif"])
    with rasterio.open(folder / "rain_20260701_0010.tif", "r+") as dst:
        dst.set_band_unit(1, "in")
    with pytest.raises(GisrunError, match=r"rain_20260701_0010\.tif: has unit 'in', "
                                          r"rain_20260701_0005\.tif 'mm'"):
        open_rain_grid(RainGridSettings(folder, time_pattern="rain_%Y%m%d_%H%M.tif"))


def test_a_project_crs_that_names_the_stacks_own_is_taken(tmp_path):
    # the same CRS written two ways: an EPSG code in the project file, a CF grid mapping in the
    # file (pyproj does not call them equal; they put the grid at the same place)
    path = write_netcdf(tmp_path / "r.nc", np.ones((2, 3, 4)), projected=True)
    assert open_rain_grid(RainGridSettings(path, crs="EPSG:32617")).crs.to_epsg() == 32617
    ds = xr.open_dataset(write_netcdf(tmp_path / "ll.nc", np.ones((2, 3, 4))),
                         decode_times=False).load()
    ds["precip"].attrs["grid_mapping"] = "crs"
    ds["crs"] = ((), 0, {"grid_mapping_name": "latitude_longitude", "semi_major_axis": 6378137.0,
                         "inverse_flattening": 298.257223563})
    ds.to_netcdf(tmp_path / "mapped.nc")
    own = CRS.from_cf(ds["crs"].attrs)
    assert not own.equals(CRS("EPSG:4326"), ignore_axis_order=True)
    stack = open_rain_grid(RainGridSettings(tmp_path / "mapped.nc", crs="EPSG:4326"))
    assert stack.crs.equals(own)
    with pytest.raises(GisrunError, match=r"r\.nc:precip: has its own CRS \(WGS 84 / UTM zone "
                                          r"17N\) but the project file says crs = 'EPSG:32616'"):
        open_rain_grid(RainGridSettings(path, crs="EPSG:32616"))  # the next zone west


def test_cf_times_decoded_by_xarray_agree_with_pandas(tmp_path):
    # The decoded labels are xarray's; pandas' own arithmetic is the independent check.
    minutes = np.array([7.0, 12.0, 17.0])
    path = write_netcdf(tmp_path / "r.nc", np.zeros((3, 2, 2)), minutes=minutes,
                        time_units="minutes since 2026-06-30 23:58:00")
    stack = open_rain_grid(RainGridSettings(path))
    expected = pd.Timestamp("2026-06-30 23:58:00") + pd.to_timedelta(minutes, unit="min")
    assert stack.labels == tuple(t.isoformat() for t in expected)


def test_a_cf_calendar_other_than_the_standard_one(tmp_path):
    # A 365-day calendar decodes to cftime dates (xarray); the step and labels are the same.
    path = write_netcdf(tmp_path / "r.nc", np.ones((3, 2, 2)))
    with xr.open_dataset(path, decode_times=False) as ds:
        ds = ds.load()
    ds["time"].attrs["calendar"] = "noleap"
    ds.to_netcdf(tmp_path / "noleap.nc")
    stack = open_rain_grid(RainGridSettings(tmp_path / "noleap.nc"))
    assert stack.step_s == 300.0 and stack.start == "2026-07-01T00:00:00"
    assert stack.labels[-1] == "2026-07-01T00:15:00"
