import os

import geopandas as gpd
import pandas as pd
import pyogrio
import pytest
from shapely.geometry import box

from gisrun.errors import OutputError, OutputExistsError
from gisrun.io.files import atomic_target
from gisrun.io.geopackage import write_geopackage
from gisrun.present.layers import layer_name


def layers():
    poly = gpd.GeoDataFrame({"subcatchment_id": ["a"], "runoff_depth_mm": [1.5]},
                            geometry=[box(0, 0, 10, 10)], crs="EPSG:32617")
    table = pd.DataFrame({"key": ["method"], "value": ["green_ampt"]})
    return {"runoff_storm": poly, "run_info": table}


def test_writes_layers_and_tables(tmp_path):
    target = write_geopackage(tmp_path / "out.gpkg", layers())
    names = dict(pyogrio.list_layers(target))
    assert names == {"runoff_storm": "MultiPolygon", "run_info": None}
    back = gpd.read_file(target, layer="runoff_storm")
    assert back.crs.to_epsg() == 32617 and back["runoff_depth_mm"].iloc[0] == 1.5
    assert os.listdir(tmp_path) == ["out.gpkg"]


def test_existing_output_is_kept_without_overwrite(tmp_path):
    target = tmp_path / "out.gpkg"
    target.write_bytes(b"earlier result")
    with pytest.raises(OutputExistsError, match="out.gpkg.*--overwrite"):
        write_geopackage(target, layers())
    assert target.read_bytes() == b"earlier result"
    write_geopackage(target, layers(), overwrite=True)
    assert target.read_bytes() != b"earlier result"


def test_failure_midway_leaves_previous_output_and_no_temporary(tmp_path):
    target = tmp_path / "out.gpkg"
    target.write_bytes(b"earlier result")
    with pytest.raises(RuntimeError), atomic_target(target, overwrite=True) as tmp:
        tmp.write_bytes(b"half")
        raise RuntimeError("crash while writing")
    assert target.read_bytes() == b"earlier result"
    assert sorted(os.listdir(tmp_path)) == ["out.gpkg"]


def test_unwritable_folder_is_an_output_error(tmp_path):
    blocker = tmp_path / "file"
    blocker.write_text("x")
    with pytest.raises(OutputError, match="file"):
        write_geopackage(blocker / "sub" / "out.gpkg", layers())


def test_layer_names_are_safe():
    assert layer_name("runoff 10-yr/24 h") == "runoff_10_yr_24_h"
    assert layer_name("100yr") == "l_100yr"
