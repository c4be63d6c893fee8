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
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from numpy.testing import assert_allclose
from PIL import Image
from report_helpers import methods_project
from shapely.geometry import box

from gisrun import run
from gisrun.engine import run_losses
from gisrun.present import maps, plots
from gisrun.present.canvas import FileCanvas, figure_png, new_figure
from gisrun.write.figures import write_figures


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
    assert maps.shared_classes([[5.0, 5.0]]).labels() == ["5"]


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
    s = plots.pervious_series(loss, params, "S", 600.0)
    # actual infiltration = phi of each pervious unit, weighted 1:3 (impervious left out)
    assert_allclose(s.infiltration_m_per_s, (1 * 2e-6 + 3 * 6e-6) / 4)
    assert_allclose(s.rain_m_per_s, 0.01 / 600)
    assert s.method == "phi_index"
    decoded(maps.figure_png(plots.infiltration_plot(s, title="S", rate_unit="mm/h",
                                                    to_rate=lambda v: np.asarray(v) * 3.6e6)))


def test_hyetograph_plot_decodes():
    decoded(maps.figure_png(plots.hyetograph_plot(
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
    fig = plots.hyetograph_plot([("a", np.array([0.0, 10, 20]), np.array([5.0, 10.0]))],
                                rate_unit="mm/h")
    assert plt.get_fignums() == before
    assert isinstance(fig.canvas, FigureCanvasAgg)
    decoded(maps.figure_png(fig))


def test_importing_maps_does_not_switch_the_backend():
    code = ("import matplotlib, gisrun.present.maps, gisrun.present.report; "
            "print(matplotlib.rcParams['backend'])")
    env = {**os.environ, "MPLBACKEND": "svg"}
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True,
                         check=True).stdout
    assert out.strip() == "svg"


# --- what the issue found wrong with the maps (each test failed on the maps before) ---

def boxes(values, **columns):
    geoms = [box(100 * i, 0, 100 * i + 100, 100) for i in range(len(values))]
    return gpd.GeoDataFrame({"v": values, "sid": [f"S{i + 1}" for i in range(len(values))],
                             **columns}, geometry=geoms, crs="EPSG:32617")


def legend_texts(fig, title=None):
    out = []
    for legend in fig.axes[0].get_children():
        if type(legend).__name__ == "Legend" and (
                title is None or legend.get_title().get_text() == title):
            out += [t.get_text() for t in legend.get_texts()]
    return out


def test_zero_runoff_legend_reads_zero():
    """Defect: a storm with no runoff got the legend ``-1e-06 - -5e-07 ...``."""
    fig = maps.subcatchment_map(boxes([0.0, 0.0, 0.0]), "v", title="t",
                                label="runoff depth (mm)", crs="EPSG:32617")
    assert legend_texts(fig, "runoff depth (mm)") == ["0"]
    decoded(maps.figure_png(fig))


def test_maps_are_print_resolution():
    """Defect: map PNGs were about 780 x 440 px; now 150 dpi and about 2000 px wide."""
    png = maps.figure_png(maps.subcatchment_map(boxes([1.0, 5.0, 9.0]), "v", title="t",
                                                label="mm", crs="EPSG:32617"))
    image = Image.open(io.BytesIO(png))
    assert image.size[0] >= 1800
    assert round(image.info["dpi"][0]) >= 150


def test_ids_are_written_where_they_fit():
    """Defect: no subcatchment labels. A 100 m box holds its id; a 1 m sliver does not."""
    gdf = boxes([1.0, 2.0])
    gdf.loc[len(gdf)] = {"v": 3.0, "sid": "SLIVER", "geometry": box(200, 0, 201, 100)}
    gdf = gdf.set_crs("EPSG:32617", allow_override=True)
    fig = maps.subcatchment_map(gdf, "v", title="t", label="mm", crs=gdf.crs, id_column="sid")
    texts = [t.get_text() for t in fig.axes[0].texts]
    assert "S1" in texts and "S2" in texts and "SLIVER" not in texts


@pytest.mark.parametrize(("unit", "ends"), [("m", (" m", " km")), ("ft", (" ft", " mi"))])
def test_scale_bar_is_off_the_data_and_in_the_run_units(unit, ends):
    """Defects: the scale bar sat on the data with an unreadable label, and US-unit runs got
    a metric bar. The bar now lies below the map frame, labelled in the run's units."""
    small = gpd.GeoDataFrame({"v": [1.0, 2.0]}, geometry=[box(0, 0, 30, 30), box(30, 0, 60, 30)],
                             crs="EPSG:32617")
    fig = maps.subcatchment_map(small, "v", title="t", label="mm", crs=small.crs,
                                distance_unit=unit)
    fig.canvas.draw()
    ax = fig.axes[0]
    frame = ax.get_window_extent()
    bars = [p for p in ax.patches if type(p).__name__ == "Rectangle" and p.get_facecolor()[:3]
            in ((0.0, 0.0, 0.0), (1.0, 1.0, 1.0))]
    assert len(bars) == 2
    for bar in bars:
        assert bar.get_window_extent().y1 < frame.y0  # below the frame: never on the data
    labels = [t for t in ax.texts if t.get_text().endswith(ends)]
    assert len(labels) == 1 and labels[0].get_fontsize() >= 9
    assert labels[0].get_window_extent().y1 < frame.y0


@pytest.mark.parametrize(("crs", "metres_per_crs_unit"), [
    ("EPSG:32617", 1.0),               # UTM zone 17N, metres
    ("EPSG:2263", 1200.0 / 3937.0),    # NY Long Island, US survey feet (1 ftUS = 1200/3937 m)
])
@pytest.mark.parametrize("unit", ["m", "ft"])
def test_scale_bar_length_matches_its_label(crs, metres_per_crs_unit, unit):
    """The bar drawn is as long on the ground as its label says. Exact factors from NIST SP 811
    (2008) Appendix B: 1 ft = 0.3048 m, 1 mi = 5280 ft; the US survey foot is 1200/3937 m
    by its definition (also NIST SP 811 App. B)."""
    ground = gpd.GeoDataFrame({"v": [1.0, 2.0]}, crs=crs,
                              geometry=[box(0, 0, 3000, 2000), box(3000, 0, 6000, 2000)])
    fig = maps.subcatchment_map(ground, "v", title="t", label="mm", crs=crs, distance_unit=unit)
    ax = fig.axes[0]
    bars = [p for p in ax.patches if type(p).__name__ == "Rectangle" and p.get_facecolor()[:3]
            in ((0.0, 0.0, 0.0), (1.0, 1.0, 1.0))]
    span_crs = sum(bar.get_width() for bar in bars)
    label = next(t.get_text() for t in ax.texts
                 if t.get_text().endswith((" m", " km", " ft", " mi")))
    number, word = label.replace(",", "").split()
    metres = float(number) * {"m": 1.0, "km": 1000.0, "ft": 0.3048, "mi": 5280 * 0.3048}[word]
    assert word in (("m", "km") if unit == "m" else ("ft", "mi"))
    assert_allclose(span_crs * metres_per_crs_unit, metres, rtol=1e-12)


def test_methods_are_hatched_with_a_legend_where_they_differ():
    """Defect: maps did not say which loss method each subcatchment used."""
    gdf = boxes([1.0, 2.0, 3.0], how=["green_ampt", "green_ampt", "curve_number"])
    fig = maps.subcatchment_map(gdf, "v", title="t", label="mm", crs=gdf.crs,
                                method_column="how")
    assert legend_texts(fig, "loss method") == ["Green-Ampt", "curve number"]
    one = maps.subcatchment_map(boxes([1.0, 2.0], how=["horton"] * 2), "v", title="t",
                                label="mm", crs="EPSG:32617", method_column="how")
    assert legend_texts(one, "loss method") == []  # one method: nothing to tell apart


def test_every_map_of_a_run_shares_its_classes(tmp_path, monkeypatch):
    """Defect: each storm's map picked its own breaks, so one colour meant 40-50 mm on one
    map and 120-140 mm on another. Every map of a quantity now has the same legend,
    spanning every storm's values."""
    result = run(methods_project(tmp_path / "p"))
    seen = []
    real = maps.subcatchment_map

    def recording(gdf, column, **kw):
        fig = real(gdf, column, **kw)
        classes = [t for t in legend_texts(fig, kw["label"]) if t != "does not pond"]
        seen.append((kw["label"], classes))
        return fig

    monkeypatch.setattr(maps, "subcatchment_map", recording)
    write_figures(result, tmp_path / "maps", plot_ids=[], cell_maps=False,
                  progress=lambda *a: None)
    runoff = [t for label, t in seen if label.startswith("runoff depth")]
    ponding = [t for label, t in seen if label.startswith("time to ponding")]
    assert len(runoff) == len(ponding) == len(result.storms) == 2
    assert runoff[0] == runoff[1] and ponding[0] == ponding[1]
    # the drizzle makes no runoff, the heavy storm up to ~29 mm: one legend covers both
    assert runoff[0][0] == "0"
    top = max(float(s.subcatchments["runoff_depth_m"].max()) * 1000 for s in result.storms)
    assert float(runoff[0][-1].split("–")[-1].replace(",", "")) >= top


def test_maps_are_drawn_once_when_saved_not_per_layer(monkeypatch):
    """geopandas asks the canvas to redraw after every layer it plots; on a file canvas that
    must not draw the whole figure each time (it did, a fifth of a demo run), and the PNG must
    be the one a plain Agg canvas gives."""
    gdf = gpd.GeoDataFrame({"v": [1.0, 2.0]}, geometry=[box(0, 0, 1, 1), box(1, 0, 2, 1)])
    draws = []
    real_draw = Figure.draw
    monkeypatch.setattr(Figure, "draw", lambda self, r: (draws.append(1), real_draw(self, r)))
    fig = new_figure((4, 3))
    assert isinstance(fig.canvas, FileCanvas)
    ax = fig.add_subplot()
    for _ in range(3):
        gdf.plot(ax=ax, column="v")
    assert draws == []
    png = figure_png(fig)
    plain = Figure(figsize=(4, 3), dpi=100)
    FigureCanvasAgg(plain)
    ax = plain.add_subplot()
    for _ in range(3):
        gdf.plot(ax=ax, column="v")
    assert figure_png(plain) == png


def test_a_figure_title_over_the_panels_is_kept_in_the_png():
    # The PNG is trimmed to what is drawn; a title over several panels (a figure text, not an
    # axes') was trimmed away with the margin before.
    storms = [("a", np.array([0.0, 10, 20]), np.array([5.0, 10.0]))]
    plain = Image.open(io.BytesIO(maps.figure_png(plots.hyetograph_plot(storms,
                                                                          rate_unit="mm/h"))))
    titled = Image.open(io.BytesIO(maps.figure_png(plots.hyetograph_plot(
        storms, rate_unit="mm/h", title="Rain intensity of each storm"))))
    assert plain.width == titled.width
    extra_px = titled.height - plain.height
    assert 0.2 * 150 <= extra_px <= 0.5 * 150  # the title's band, about 0.3 in at 150 dpi
    top = np.asarray(titled.convert("L"))[: extra_px // 2]
    assert (top < 128).any()  # dark pixels (the title's letters) in the band
