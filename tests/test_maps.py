"""Maps and plots: PNGs decode, are not blank, and the classing and series are right."""

from __future__ import annotations

import io
import os
import subprocess
import sys

import geopandas as gpd
import matplotlib.image as mpimg
import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose
from shapely.geometry import box

from gisrun.engine import run_losses
from gisrun.present import maps


def decoded(png: bytes) -> np.ndarray:
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    image = mpimg.imread(io.BytesIO(png), format="png")
    assert image.shape[0] > 100 and image.shape[1] > 100
    assert len(np.unique(image.reshape(-1, image.shape[-1]), axis=0)) > 10  # not one colour
    return image


def test_class_breaks_cover_the_values_with_round_edges():
    edges = maps.class_breaks([0.3, 7.9, 12.2])
    assert edges[0] <= 0.3 and edges[-1] >= 12.2
    assert np.all(np.diff(edges) > 0)
    assert maps.class_breaks([np.nan, np.nan]).tolist() == [0.0, 1.0]
    assert len(maps.class_breaks([5.0, 5.0])) >= 2  # one value still gets a class


def test_subcatchment_and_raster_maps_decode_and_are_not_blank():
    gdf = gpd.GeoDataFrame({"v": [1.0, 20.0, np.nan]},
                           geometry=[box(0, 0, 100, 100), box(100, 0, 200, 100),
                                     box(200, 0, 300, 100)], crs="EPSG:32617")
    decoded(maps.figure_png(maps.subcatchment_map(gdf, "v", title="t", label="runoff (mm)",
                                                  crs=gdf.crs)))
    values = np.arange(100.0).reshape(10, 10)
    values[0, 0] = np.nan
    decoded(maps.figure_png(maps.raster_map(values, (0, 300, 0, 100), title="t", label="mm",
                                            crs="EPSG:32617", outlines=gdf)))


def test_pervious_series_weights_by_pervious_area_and_marks_ponding():
    params = pd.DataFrame({"subcatchment_id": ["S", "S", "S"],
                           "surface": ["pervious", "pervious", "impervious"],
                           "area_m2": [1.0, 3.0, 5.0],
                           "phi_index_m_per_s": [2e-6, 6e-6, 0.0],
                           "depression_storage_m": [0.0, 0.0, 0.0]})
    rain = np.full(6, 0.01)  # 10 mm per 10 min step = 16.7 um/s, above both rates
    loss = run_losses(params, rain, 600.0, method="phi_index")
    s = maps.pervious_series(loss, params, "S", 600.0)
    # actual infiltration = phi of each pervious unit, weighted 1:3 (impervious left out)
    assert_allclose(s.infiltration_m_per_s, (1 * 2e-6 + 3 * 6e-6) / 4)
    assert_allclose(s.rain_m_per_s, 0.01 / 600)
    decoded(maps.figure_png(maps.infiltration_plot(s, title="S", rate_unit="mm/h",
                                                   to_rate=lambda v: np.asarray(v) * 3.6e6)))


def test_hyetograph_plot_decodes():
    decoded(maps.figure_png(maps.hyetograph_plot(
        [("a", np.array([0.0, 10, 20]), np.array([5.0, 10.0]))], rate_unit="mm/h")))


@pytest.mark.parametrize("crs", ["EPSG:4326"])
def test_geographic_maps_still_name_the_crs(crs):
    gdf = gpd.GeoDataFrame({"v": [1.0]}, geometry=[box(0, 0, 0.01, 0.01)], crs=crs)
    fig = maps.subcatchment_map(gdf, "v", title="t", label="mm", crs=crs)
    texts = [t.get_text() for t in fig.axes[0].texts]
    assert any("WGS 84" in t for t in texts)
    assert not any(t.endswith(" m") or t.endswith(" km") for t in texts)  # no scale bar in degrees
    maps.figure_png(fig)


def test_drawing_leaves_pyplot_figures_alone():
    """Figures live on their own Agg canvas: pyplot's figure list never sees them."""
    import matplotlib.pyplot as plt

    before = plt.get_fignums()
    fig = maps.hyetograph_plot([("a", np.array([0.0, 10, 20]), np.array([5.0, 10.0]))],
                               rate_unit="mm/h")
    assert plt.get_fignums() == before
    assert type(fig.canvas).__name__ == "FigureCanvasAgg"
    decoded(maps.figure_png(fig))


def test_importing_maps_does_not_switch_the_backend():
    code = ("import matplotlib, gisrun.present.maps, gisrun.present.report; "
            "print(matplotlib.rcParams['backend'])")
    env = {**os.environ, "MPLBACKEND": "svg"}
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True,
                         check=True).stdout
    assert out.strip() == "svg"
