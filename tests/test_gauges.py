"""Rain gauges: Thiessen and inverse-distance weights, gap filling, and the ``gauges`` storm.

References: Thiessen (1911) polygons are the nearest-gauge regions, so a straight bisector
splits a square by hand-computable areas, and a brute-force nearest-gauge count on a fine grid
(scipy's ``cKDTree``, a reference library) must agree with the exact intersection; Shepard
(1968) weights are ``d^-p / sum d^-p`` (hand-computed below); identical records must give the
uniform storm's GeoPackage tables exactly (issue acceptance).
"""

from __future__ import annotations

import dataclasses
from datetime import UTC, datetime
from fractions import Fraction
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pytest
import shapely
from bad_inputs_helpers import CRS, X0, Y0, edit_toml, make_project, run_cli
from matplotlib.legend import Legend
from pyproj import Transformer
from scipy.spatial import cKDTree

from gisrun import load_project, read_inputs, run, write_outputs
from gisrun.errors import StormError
from gisrun.io.gauges import read_gauge_records
from gisrun.present import maps
from gisrun.storm.gauges import fill_gaps, inverse_distance_weights, thiessen_weights
from gisrun.units import unit_system

DEMO = Path(__file__).resolve().parents[1] / "demo_catchment"


def _points(*xy):
    return np.array([shapely.Point(x, y) for x, y in xy], dtype=object)


def test_two_gauges_split_a_square_by_a_straight_edge_by_hand():
    # gauges at (1, 5) and (5, 5): the Thiessen edge is the bisector x = 3
    gauges = _points((1, 5), (5, 5))
    polygons = np.array([shapely.box(0, 0, 10, 10),  # 30 : 70 of 100
                         shapely.box(4, 0, 6, 2),  # wholly east of the edge
                         shapely.Polygon([(0, 0), (6, 0), (0, 6)]),  # 13.5 : 4.5 of 18
                         ], dtype=object)
    got = thiessen_weights(gauges, ["a", "b"], polygons)
    want = np.array([[0.3, 0.7], [0.0, 1.0], [0.75, 0.25]])
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-12)


def test_a_diagonal_thiessen_edge_by_hand():
    # gauges at (2, 2) and (8, 8): the edge is x + y = 10
    gauges = _points((2, 2), (8, 8))
    polygons = np.array([shapely.box(0, 0, 10, 10), shapely.box(0, 0, 4, 4),
                         shapely.box(0, 0, 10, 2)], dtype=object)
    got = thiessen_weights(gauges, ["a", "b"], polygons)
    # the strip 0 <= y <= 2 has x + y > 10 over the triangle of area 2 (of 20): 0.9 : 0.1
    want = np.array([[0.5, 0.5], [1.0, 0.0], [0.9, 0.1]])
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-12)


def test_thiessen_matches_a_fine_nearest_gauge_count():
    rng = np.random.default_rng(11)
    xy = rng.uniform(0, 100, (5, 2))
    polygon = shapely.Polygon([(10, 10), (90, 20), (70, 90), (30, 70), (20, 40)])
    got = thiessen_weights(_points(*xy), list("abcde"), np.array([polygon], dtype=object))[0]
    n = 1000
    centres = (np.arange(n) + 0.5) * 100 / n
    gx, gy = np.meshgrid(centres, centres)
    inside = shapely.contains_xy(polygon, gx, gy)
    nearest = cKDTree(xy).query(np.column_stack([gx[inside], gy[inside]]))[1]
    counted = np.bincount(nearest, minlength=5) / inside.sum()
    np.testing.assert_allclose(got, counted, atol=2e-3)
    assert got.sum() == pytest.approx(1.0, abs=1e-12)


def test_inverse_distance_weights_by_hand():
    gauges = _points((0, 0), (4, 0))
    polygons = np.array([shapely.box(0, -1, 2, 1),  # centroid (1, 0): d = 1 and 3
                         shapely.box(3, -1, 5, 1)], dtype=object)  # centroid (4, 0): on b
    got = inverse_distance_weights(gauges, polygons, 2.0)
    np.testing.assert_allclose(got[0], [1 / (1 + 1 / 9), (1 / 9) / (1 + 1 / 9)], rtol=1e-14)
    np.testing.assert_array_equal(got[1], [0.0, 1.0])
    got = inverse_distance_weights(gauges, polygons[:1], 1.0)
    np.testing.assert_allclose(got[0], [0.75, 0.25], rtol=1e-14)


def test_fill_gaps_by_the_same_weighting():
    gauges = _points((0, 0), (1, 0), (3, 0))
    depth = np.array([[1.0, 2.0, 4.0], [np.nan, 2.0, 4.0], [1.0, np.nan, np.nan]])
    filled, notes = fill_gaps(depth, gauges, ["a", "b", "c"], "thiessen", 2.0)
    np.testing.assert_array_equal(filled[1], [2.0, 2.0, 4.0])  # a's nearest is b
    np.testing.assert_array_equal(filled[2], [1.0, 1.0, 1.0])  # only a has data
    assert len(notes) == 3 and "gauge 'a': 1 missing step(s)" in notes[0]
    filled, _ = fill_gaps(depth, gauges, ["a", "b", "c"], "inverse_distance", 2.0)
    # a from b (d = 1) and c (d = 3): (2 * 1 + 4 / 9) / (1 + 1 / 9)
    assert filled[1, 0] == pytest.approx((2 + 4 / 9) / (1 + 1 / 9), rel=1e-14)
    with pytest.raises(StormError, match="no gauge has rain in step 2"):
        fill_gaps(np.array([[1.0, 1.0], [np.nan, np.nan]]), gauges[:2], ["a", "b"],
                  "thiessen", 2.0)


def test_inverse_distance_with_a_large_power_on_far_gauges_by_exact_arithmetic():
    # d = 1000 and 3000 m, power 400: d^-p underflows to 0 in floating point for both, which
    # gave 0 / 0 weights; Shepard's d^-p / sum d^-p in exact rational arithmetic (fractions)
    # is the reference
    from_fractions = Fraction(1000) ** -400 / (Fraction(1000) ** -400 + Fraction(3000) ** -400)
    gauges = _points((0, 0), (4000, 0))
    polygons = np.array([shapely.box(0, -1000, 2000, 1000)], dtype=object)  # centroid (1000, 0)
    got = inverse_distance_weights(gauges, polygons, 400.0)
    np.testing.assert_allclose(got[0], [float(from_fractions), float(1 - from_fractions)],
                               rtol=1e-15, atol=1e-300)
    filled, _ = fill_gaps(np.array([[np.nan, 2.0, 4.0]]), _points((1000, 0), (0, 0), (4000, 0)),
                          ["a", "b", "c"], "inverse_distance", 400.0)
    assert filled[0, 0] == pytest.approx(2.0 * float(from_fractions) + 4.0 * float(
        1 - from_fractions), rel=1e-15)


def test_inverse_distance_fill_takes_a_gauge_at_the_same_place_whole():
    # Shepard (1968): at a data point the interpolant is that point's value; b stands where a
    # does, so a's gap takes b's value (it was 0 * inf = nan)
    gauges = _points((0, 0), (0, 0), (3, 0))
    depth = np.array([[1.0, 2.0, 4.0], [np.nan, 2.5, 4.0]])
    filled, _ = fill_gaps(depth, gauges, ["a", "b", "c"], "inverse_distance", 2.0)
    np.testing.assert_array_equal(filled[1], [2.5, 2.5, 4.0])


def test_records_folder_matches_times_as_instants_not_as_text(tmp_path):
    # 06:05, 06:05:00, 06:05Z and 08:05+02:00 are one instant (ISO 8601; Python's
    # datetime.fromisoformat says so); the files were refused as having different times
    spellings = {"a": "2026-05-14T06:{m:02d}", "b": "2026-05-14T06:{m:02d}:00",
                 "c": "2026-05-14T06:{m:02d}Z", "d": "2026-05-14T08:{m:02d}+02:00"}
    stamps = [datetime.fromisoformat(f.format(m=5)) for f in spellings.values()]
    assert len({t if t.tzinfo else t.replace(tzinfo=UTC) for t in stamps}) == 1  # naive: UTC
    folder = tmp_path / "records"
    folder.mkdir()
    for k, (gauge, spelled) in enumerate(spellings.items()):
        (folder / f"{gauge}.csv").write_text("time,depth\n" + "".join(
            f"{spelled.format(m=5 * (i + 1))},{k + i}\n" for i in range(3)))
    records = read_gauge_records(folder, units=unit_system("si"))
    assert records.ids == ("a", "b", "c", "d") and records.step_s == 300.0
    assert records.start == "2026-05-14T06:00:00"
    np.testing.assert_array_equal(records.depth_m * 1000,
                                  np.array([[k + i for k in range(4)] for i in range(3)]))
    (folder / "d.csv").write_text("time,depth\n" + "".join(
        f"2026-05-14T06:{5 * (i + 1):02d}+02:00,1\n" for i in range(3)))  # two hours earlier
    with pytest.raises(StormError, match=r"d\.csv: step 1 is at 2026-05-14T06:05\+02:00, in "
                                         r".*a\.csv at 2026-05-14T06:05"):
        read_gauge_records(folder, units=unit_system("si"))


def test_a_small_site_takes_gauges_kilometres_away(tmp_path, capsys):
    # the tiny project is 100 m across; its gauges stand 2.5 and 3.5 km off (a site and the
    # region's gauges), which was refused as a CRS mix-up (more than 10 times its extent).
    # By hand (Thiessen 1911): the whole site is nearer G1, so every subcatchment takes G1's
    # record, 1 + 2 + 0.5 = 3.5 mm
    folder = tmp_path / "site"
    make_project(folder)
    gpd.GeoDataFrame({"gauge_id": ["G1", "G2"]}, crs=CRS, geometry=[
        shapely.Point(X0 + 2500, Y0), shapely.Point(X0 - 1500, Y0 + 3200)]).to_file(
        folder / "gauges.gpkg", engine="pyogrio")
    (folder / "records.csv").write_text("time,G1,G2\n2026-05-14T06:05,1,4\n"
                                        "2026-05-14T06:10,2,0\n2026-05-14T06:15,0.5,9\n")
    edit_toml(folder / "gisrun.toml", 'kind = "file"\npath = "storm.csv"\n',
              'kind = "gauges"\ngauges = "gauges.gpkg"\nid_field = "gauge_id"\n'
              'records = "records.csv"\n')
    code, _, err = run_cli(capsys, ["run", str(folder), "--no-extras"])
    assert code == 0, err
    table = pyogrio.read_dataframe(folder / "out" / "result.gpkg", layer="runoff_steady",
                                   read_geometry=False)
    np.testing.assert_allclose(table["rain_depth_mm"], [3.5, 3.5], rtol=1e-12)


def test_two_gauges_at_one_place_are_refused():
    with pytest.raises(StormError, match="gauges 'a' and 'b' stand at the same place"):
        thiessen_weights(_points((1, 1), (1, 1)), ["a", "b"],
                         np.array([shapely.box(0, 0, 2, 2)], dtype=object))


# --- the gauges storm in a project -----------------------------------------------------------

#: Invented gauges around the demo town (its CRS, UTM 17N).
GAUGES = {"G1": (537500.0, 4380500.0), "G2": (539800.0, 4381900.0), "G3": (538600.0, 4380200.0)}


def write_gauges(folder: Path, gauges: dict[str, tuple[float, float]] = GAUGES) -> None:
    gdf = gpd.GeoDataFrame({"gauge_id": list(gauges)},
                           geometry=[shapely.Point(*xy) for xy in gauges.values()],
                           crs="EPSG:32617")
    pyogrio.write_dataframe(gdf, folder / "gauges.gpkg", layer="gauges")


def records_text(depth_mm: dict[str, list[float | None]], step_min: int = 5) -> str:
    ids = list(depth_mm)
    n = len(depth_mm[ids[0]])
    lines = ["time," + ",".join(ids)]
    for k in range(n):
        minutes = 360 + (k + 1) * step_min
        cells = ["" if depth_mm[g][k] is None else f"{depth_mm[g][k]:g}" for g in ids]
        lines.append(f"2026-05-14T{minutes // 60:02d}:{minutes % 60:02d}," + ",".join(cells))
    return "\n".join(lines) + "\n"


def demo_project(folder: Path, storm: str) -> Path:
    """The demo project in ``folder`` (inputs by absolute path) with one storm table."""
    text = (DEMO / "gisrun.toml").read_text()
    for name in ("subcatchments.gpkg", "soil_groups.tif", "land_cover.tif"):
        text = text.replace(f'path = "{name}"', f'path = "{DEMO / name}"')
    head = text[: text.index("\n[[storms]]") + 1]
    (folder / "gisrun.toml").write_text(head + storm)
    return folder


SERIES_MM = [0.5, 1.5, 4.0, 6.5, 3.0, 1.0, 0.0, 0.25]


def _gauge_storm(extra: str = "") -> str:
    return ('[[storms]]\nname = "event"\nkind = "gauges"\ngauges = "gauges.gpkg"\n'
            f'id_field = "gauge_id"\nrecords = "records.csv"\n{extra}')


def _layers(path):
    return {name: pyogrio.read_dataframe(path, layer=name)
            for name, _ in pyogrio.list_layers(path)}


def test_gauges_with_identical_records_give_exactly_the_uniform_storm(tmp_path):
    plain_dir, gauge_dir = tmp_path / "plain", tmp_path / "gauges"
    plain_dir.mkdir(), gauge_dir.mkdir()
    (plain_dir / "event.csv").write_text("time_min,depth_mm\n" + "".join(
        f"{5 * (k + 1)},{v:g}\n" for k, v in enumerate(SERIES_MM)))
    plain = load_project(demo_project(plain_dir, '[[storms]]\nname = "event"\nkind = "file"\n'
                                                 'path = "event.csv"\n'))
    write_gauges(gauge_dir)
    (gauge_dir / "records.csv").write_text(records_text({g: SERIES_MM for g in GAUGES}))
    gauged = load_project(demo_project(gauge_dir, _gauge_storm()))
    storm = read_inputs(gauged).storms[0]
    assert storm.areal is not None and storm.areal.start == "2026-05-14T06:00:00"
    before = _layers(write_outputs(run(plain), output=tmp_path / "plain.gpkg"))
    after = _layers(write_outputs(run(gauged), output=tmp_path / "gauged.gpkg"))
    assert set(after) == set(before) | {"rain_weights"}
    for name, frame in before.items():
        if name != "run_info":
            pd.testing.assert_frame_equal(after[name], frame, check_exact=True, obj=name)
    weights = after["rain_weights"]
    assert set(weights["source_id"]) == set(GAUGES)
    sums = weights.groupby("subcatchment_id")["weight"].sum()
    np.testing.assert_allclose(sums, 1.0, atol=1e-12)


def test_gauge_rain_follows_the_weights(tmp_path):
    write_gauges(tmp_path)
    depth = {"G1": [1.0, 2.0, 0.0], "G2": [3.0, 0.0, 1.0], "G3": [0.0, 4.0, 2.0]}
    (tmp_path / "records.csv").write_text(records_text(depth))
    project = load_project(demo_project(tmp_path, _gauge_storm(
        'weighting = "inverse_distance"\npower = 2\n')))
    inputs = read_inputs(project)
    areal = inputs.storms[0].areal
    w = areal.weights.pivot(index="subcatchment_id", columns="source_id", values="weight")
    w = w.reindex(index=list(areal.subcatchment_ids), columns=list(depth)).fillna(0.0)
    want = np.array(list(depth.values())).T / 1000.0 @ w.to_numpy().T  # (steps, subs)
    np.testing.assert_allclose(areal.depth_m, want, rtol=1e-12, atol=1e-15)
    # inverse distance from each centroid, power 2, by hand for the first subcatchment
    subs = inputs.subcatchments.set_index("subcatchment_id")
    c = subs.geometry.iloc[0].centroid
    inv = np.array([1.0 / ((c.x - x) ** 2 + (c.y - y) ** 2) for x, y in GAUGES.values()])
    np.testing.assert_allclose(w.loc[subs.index[0]].to_numpy(), inv / inv.sum(), rtol=1e-12)


def test_a_gap_is_filled_when_asked_and_said(tmp_path):
    write_gauges(tmp_path)
    depth = {"G1": [1.0, None, 0.0], "G2": [3.0, 0.0, 1.0], "G3": [0.0, 4.0, 2.0]}
    (tmp_path / "records.csv").write_text(records_text(depth))
    project = load_project(demo_project(tmp_path, _gauge_storm("fill_gaps = true\n")))
    with pytest.warns(UserWarning, match="gauge 'G1': 1 missing step"):
        inputs = read_inputs(project)
    assert np.isfinite(inputs.storms[0].areal.depth_m).all()
    gapped = dataclasses.replace(project, storms=({**project.storms[0], "fill_gaps": False},))
    with pytest.raises(StormError, match=r"records\.csv:G1: has no value at 2026-05-14T06:10"):
        read_inputs(gapped)


def test_gauges_in_another_crs_are_placed_in_the_subcatchment_crs_for_the_rain_map(tmp_path):
    """A gauge layer in geographic coordinates: the gauges the rain map draws are in the
    subcatchment layer's CRS (UTM 17N), as pyproj (a reference library) transforms them, and
    the rain map shows and names each one."""
    to_lonlat = Transformer.from_crs("EPSG:32617", "EPSG:4326", always_xy=True)
    lonlat = {g: to_lonlat.transform(*xy) for g, xy in GAUGES.items()}
    gdf = gpd.GeoDataFrame({"gauge_id": list(lonlat)},
                           geometry=[shapely.Point(*xy) for xy in lonlat.values()],
                           crs="EPSG:4326")
    pyogrio.write_dataframe(gdf, tmp_path / "gauges.gpkg", layer="gauges")
    depth = {"G1": [1.0, 2.0, 0.0], "G2": [3.0, 0.0, 1.0], "G3": [0.0, 4.0, 2.0]}
    (tmp_path / "records.csv").write_text(records_text(depth))
    inputs = read_inputs(load_project(demo_project(tmp_path, _gauge_storm())))
    points = inputs.storms[0].areal.points.set_index("source_id")
    assert list(points.index) == list(GAUGES)
    for g, (x, y) in GAUGES.items():
        assert points.loc[g, "x"] == pytest.approx(x, abs=1e-6)
        assert points.loc[g, "y"] == pytest.approx(y, abs=1e-6)
    subs = inputs.subcatchments.assign(rain=np.arange(len(inputs.subcatchments), dtype=float))
    fig = maps.subcatchment_map(subs, "rain", title="t", label="rain depth (mm)",
                                crs=subs.crs, points=points.reset_index())
    ax = fig.axes[0]
    drawn = [line for line in ax.get_lines() if line.get_marker() == "^"]
    assert len(drawn) == 1
    np.testing.assert_allclose(drawn[0].get_xydata(), points[["x", "y"]].to_numpy())
    assert {t.get_text() for t in ax.texts} >= set(GAUGES)
    legend_labels = {t.get_text() for legend in ax.findobj(Legend) for t in legend.get_texts()}
    assert "rain gauge" in legend_labels
