"""Soil rasters of map-unit keys with an attribute table (CSV, GeoPackage, the raster's own).

The invented data: a 60 x 60 grid of 10 m cells holding soil groups A-D, B/D and C/D as typed
codes, and the same map with every cell's code replaced by one of 2,000 map-unit keys of its
group; the attribute table lists the 2,000 keys with their group (a blank group for a third of
them, derived from Ksat and depths by the NEH 630 Ch. 7 criteria).
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pyogrio
import pytest
import rasterio
from shapely.geometry import Polygon

sys.path.insert(0, str(Path(__file__).parent))
from bad_inputs_helpers import CRS, X0, Y0, edit_toml, make_project, run_cli  # noqa: E402
from conftest import write_geotiff, write_polygons  # noqa: E402

from gisrun import CAUTION, GisrunError, run  # noqa: E402
from gisrun.config.project import load_project  # noqa: E402
from gisrun.io.attribute_tables import read_attribute_table  # noqa: E402
from gisrun.parameters.class_keys import keyed_classes  # noqa: E402
from gisrun.present.layers import ponding_ranking  # noqa: E402
from gisrun.present.report import ReportFigures, build_report  # noqa: E402

GROUPS = {1: "A", 2: "B", 3: "C", 4: "D", 5: "B/D", 6: "C/D"}
N_KEYS = 2000
#: Per group: (Ksat um/s, impermeable layer cm, water table cm) that Table 7-1 of NEH 630 Ch. 7
#: (2009, from memory) puts in that group: A > 10 um/s deep; B 4-10 deep; C 0.4-4 deep;
#: D impermeable layer < 50 cm; B/D and C/D water table < 60 cm with B and C Ksat.
PROFILES = {"A": (25.0, "", ""), "B": (7.0, "", ""), "C": (2.0, "", ""), "D": ("", 30.0, ""),
            "B/D": (7.0, "", 40.0), "C/D": (2.0, "", 40.0)}


def _typed_codes(rng: np.random.Generator) -> np.ndarray:
    blocks = rng.integers(1, 7, size=(6, 6)).astype(np.uint8)
    return np.kron(blocks, np.ones((10, 10), dtype=np.uint8))


def _keys_for(codes: np.ndarray, rng: np.random.Generator) -> tuple[np.ndarray, pd.DataFrame]:
    """Every cell's code -> a random one of its group's keys; the 2,000-row table."""
    groups = np.array(sorted(GROUPS))
    key_group = np.resize(groups, N_KEYS)
    keys = 470_000 + rng.permutation(N_KEYS * 3)[:N_KEYS]
    out = np.zeros(codes.shape, dtype=np.int32)
    for g in groups:
        own = keys[key_group == g]
        cells = codes == g
        out[cells] = own[rng.integers(0, own.size, int(cells.sum()))]
    rows = []
    for i, (key, g) in enumerate(zip(keys, key_group, strict=True)):
        label = GROUPS[int(g)]
        ks, imp, table = PROFILES[label]
        given = (i // len(groups)) % 3 != 0  # a third of each group's keys left blank
        rows.append({"mukey": int(key), "hydrologic_soil_group": label if given else "",
                     "ks_least_transmissive_um_per_s": ks, "restrictive_layer_depth_cm": imp,
                     "water_table_depth_cm": table, "map_unit_name": f"unit {key}"})
    return out, pd.DataFrame(rows).sample(frac=1.0, random_state=3)


def _polygons() -> list[Polygon]:
    return [Polygon([(X0 + 3, Y0 + 5), (X0 + 330, Y0 + 12), (X0 + 290, Y0 + 340),
                     (X0 + 8, Y0 + 300)]),
            Polygon([(X0 + 330, Y0 + 12), (X0 + 597, Y0 + 2), (X0 + 590, Y0 + 597),
                     (X0 + 290, Y0 + 340)]),
            Polygon([(X0 + 8, Y0 + 300), (X0 + 290, Y0 + 340), (X0 + 590, Y0 + 597),
                     (X0 + 4, Y0 + 590)])]


@pytest.fixture
def twin_projects(tmp_path: Path) -> tuple[Path, Path]:
    """The typed-codes project and the keyed one, identical otherwise."""
    rng = np.random.default_rng(18)
    codes = _typed_codes(rng)
    keys, table = _keys_for(codes, rng)
    folders = []
    for name in ("typed", "keyed"):
        folder = tmp_path / name
        project = make_project(folder)
        write_polygons(folder / "sub.gpkg", _polygons(), code=["S1", "S2", "S3"])
        write_geotiff(folder / "soil.tif", codes, origin=(X0, Y0 + 600.0), crs=CRS, nodata=0)
        write_geotiff(folder / "cover.tif", np.full((60, 60), 5, np.uint8),
                      origin=(X0, Y0 + 600.0), crs=CRS)
        typed = "\n".join(f'"{c}" = "{g}"' for c, g in GROUPS.items())
        edit_toml(project, '"1" = "A"\n"2" = "B"', typed)
        folders.append(project)
    keyed = folders[1]
    write_geotiff(keyed.parent / "soil.tif", keys, origin=(X0, Y0 + 600.0), crs=CRS, nodata=0)
    table.to_csv(keyed.parent / "map_units.csv", index=False)
    edit_toml(keyed, "[soil.codes]\n" + "\n".join(f'"{c}" = "{g}"' for c, g in GROUPS.items()),
              'attributes = "map_units.csv"\nattributes_key = "mukey"')
    return folders[0], keyed


def _comparable(frame: pd.DataFrame) -> pd.DataFrame:
    return frame.reset_index(drop=True)


def test_keys_with_a_2000_row_table_give_the_typed_codes_results_exactly(twin_projects):
    typed, keyed = (load_project(p) for p in twin_projects)
    assert len(keyed.soil.codes) == N_KEYS
    table = pd.read_csv(twin_projects[1].parent / "map_units.csv", dtype=str,
                        keep_default_na=False)
    blank = table["hydrologic_soil_group"] == ""
    assert keyed.soil.keys.derived_groups == blank.sum() > 600
    assert table.loc[blank, "ks_least_transmissive_um_per_s"].ne("").any()
    a, b = run(typed), run(keyed)
    pd.testing.assert_frame_equal(_comparable(a.units), _comparable(b.units), check_exact=True)
    pd.testing.assert_frame_equal(_comparable(a.coverage), _comparable(b.coverage),
                                  check_exact=True)
    assert len(a.storms) == len(b.storms) == 1
    for sa, sb in zip(a.storms, b.storms, strict=True):
        pd.testing.assert_frame_equal(_comparable(sa.subcatchments),
                                      _comparable(sb.subcatchments), check_exact=True)
        pd.testing.assert_frame_equal(_comparable(sa.units), _comparable(sb.units),
                                      check_exact=True)
    # six groups, so a wrong look-up (a key to another group) would move area between units
    assert set(a.units["soil_class"]) == set(GROUPS.values())


def test_per_key_values_rank_above_class_overrides_and_are_recorded(twin_projects):
    keyed = twin_projects[1]
    table = pd.read_csv(keyed.parent / "map_units.csv", dtype=str, keep_default_na=False)
    with rasterio.open(keyed.parent / "soil.tif") as src:
        on_map = set(np.unique(src.read(1)).tolist())
    b_keys = [k for k in table.loc[table["hydrologic_soil_group"] == "B", "mukey"]
              if int(k) in on_map]
    table["ks_mm_per_h"] = ""
    table.loc[table["mukey"] == b_keys[0], "ks_mm_per_h"] = "12.5"
    table.to_csv(keyed.parent / "map_units.csv", index=False)
    (keyed.parent / "over.csv").write_text("soil_class,ks_mm_per_h,suction_head_mm\n"
                                           "B,3.0,120\n")
    edit_toml(keyed, "[method]", '[parameters]\noverrides = "over.csv"\n\n[method]')
    project = load_project(keyed)
    variant = f"B (key {b_keys[0]})"
    assert project.soil.codes[int(b_keys[0])] == variant
    assert project.soil.codes[int(b_keys[1])] == "B"
    result = run(project)
    params = result.parameters[result.parameters["surface"] == "pervious"].set_index(
        "soil_class")
    # the key's own value wins over the soil-class override row (rank 15 above 12) ...
    assert params.loc[[variant], "ks_m_per_s"].iloc[0] == pytest.approx(12.5e-3 / 3600, rel=1e-15)
    # ... the class-wide override still reaches the variant where the key sets nothing ...
    assert params.loc[[variant], "suction_head_m"].iloc[0] == pytest.approx(0.12, rel=1e-15)
    # ... and the other B keys keep the override
    assert params.loc[["B"], "ks_m_per_s"].iloc[0] == pytest.approx(3e-3 / 3600, rel=1e-15)
    sources = result.parameter_sources
    row = sources[(sources["soil_class"] == variant) & (sources["parameter"] == "ks_m_per_s")
                  & (sources["surface"] == "pervious")]
    assert row["source"].tolist() == [f"map_units.csv:key {b_keys[0]} (soil attribute table)"]
    # the report lists the variant in its parameter sheet and what the table gave in its warnings
    page = build_report(result, ReportFigures(), ranking=ponding_ranking(result), caution=CAUTION)
    sheet = page[page.index('id="parameters"'):page.index('id="storms"')]
    assert variant in sheet
    notes = page[page.index('id="warnings"'):]
    assert "map_units.csv: 2000 soil keys in 7 class(es)" in notes
    assert "got their group from the NRCS NEH 630 Ch. 7 (2009) Table 7-1 criteria" in notes


def test_unlisted_keys_stop_the_run_or_count_as_nodata(twin_projects, capsys):
    keyed = twin_projects[1]
    table = pd.read_csv(keyed.parent / "map_units.csv", dtype=str, keep_default_na=False)
    project = load_project(keyed)
    units = run(project).units
    used = units.groupby("soil_class")["area_m2"].sum()
    # drop every key of group A that lies on the map
    dropped = table[table["hydrologic_soil_group"].isin(["A"])]
    table.drop(dropped.index).to_csv(keyed.parent / "map_units.csv", index=False)
    code, out, err = run_cli(capsys, ["check", str(keyed)])
    assert code == 2
    assert "holds keys" in err and "map_units.csv does not list" in err
    assert "unlisted_keys" in err
    edit_toml(keyed, 'attributes_key = "mukey"',
              'attributes_key = "mukey"\nunlisted_keys = "nodata"')
    edit_toml(keyed, "max_fraction = 0.25", "max_fraction = 1.0")
    project = load_project(keyed)
    result = run(project)
    assert any("count as nodata" in w for w in result.warnings), result.warnings
    units_nodata = result.units
    assert "A" not in set(units_nodata["soil_class"]) or (
        units_nodata.groupby("soil_class")["area_m2"].sum()["A"] < used["A"])
    # under the dominant rule the A area went to other units; the total stays the same
    assert units_nodata["area_m2"].sum() == pytest.approx(units["area_m2"].sum(), rel=1e-12)
    assert used.get("A", 0) > 0


def test_cover_keys_with_a_table_set_class_and_per_key_values(tmp_path):
    project = make_project(tmp_path / "cover")
    keys = np.full((10, 10), 11, dtype=np.int16)
    keys[:, 5:] = 12
    write_geotiff(project.parent / "cover.tif", keys, origin=(X0, Y0 + 100.0), crs=CRS)
    (project.parent / "cover_units.csv").write_text(
        "land_key,cover_class,depression_storage_mm,survey_note\n"
        "11,open_space_good,4.0,lawn\n12,woods_good,,wood\n")
    edit_toml(project, '[cover.codes]\n"5" = "open_space_good"',
              'attributes = "cover_units.csv"\nattributes_key = "land_key"')
    loaded = load_project(project)
    assert loaded.cover.codes == {11: "open_space_good", 12: "woods_good"}
    assert loaded.cover.keys.unused == ("survey_note",)
    result = run(loaded)
    params = result.parameters[result.parameters["surface"] == "pervious"]
    lawn = params[params["cover_class"] == "open_space_good"]
    wood = params[params["cover_class"] == "woods_good"]
    # the key's value (4 mm) replaces the cover table's 5 mm; the woods keep the table's value
    assert lawn["depression_storage_m"].tolist() == [pytest.approx(0.004, rel=1e-15)]
    assert wood["depression_storage_m"].iloc[0] != pytest.approx(0.004)
    sources = result.parameter_sources
    row = sources[(sources["cover_class"] == "open_space_good")
                  & (sources["parameter"] == "depression_storage_m")
                  & (sources["surface"] == "pervious")]
    assert row["source"].tolist() == ["cover_units.csv:key 11 (cover attribute table)"]


PAM = """<PAMDataset>
  <PAMRasterBand band="1">
    <GDALRasterAttributeTable tableType="thematic">
      <FieldDefn index="0"><Name>Value</Name><Type>0</Type><Usage>5</Usage></FieldDefn>
      <FieldDefn index="1"><Name>Count</Name><Type>0</Type><Usage>1</Usage></FieldDefn>
      <FieldDefn index="2"><Name>hydrologic_soil_group</Name><Type>2</Type><Usage>0</Usage>
      </FieldDefn>
      <Row index="0"><F>101</F><F>50</F><F>C</F></Row>
      <Row index="1"><F>202</F><F>50</F><F>D</F></Row>
    </GDALRasterAttributeTable>
  </PAMRasterBand>
</PAMDataset>
"""


def _keyed_tiny(folder: Path) -> Path:
    project = make_project(folder)
    keys = np.full((10, 10), 101, dtype=np.int32)
    keys[:, 5:] = 202
    write_geotiff(project.parent / "soil.tif", keys, origin=(X0, Y0 + 100.0), crs=CRS,
                  nodata=-1)
    return project


def test_the_rasters_own_table_is_read_from_gdals_side_file(tmp_path):
    # The side file follows GDAL's PAM layout (PAMDataset/PAMRasterBand/GDALRasterAttributeTable,
    # FieldDefn Name/Type/Usage with usage 5 = the value column, Row/F cells): GDAL's raster
    # attribute table documentation (gdal.org, GDALRasterAttributeTable).
    project = _keyed_tiny(tmp_path / "pam")
    (project.parent / "soil.tif.aux.xml").write_text(PAM)
    edit_toml(project, '[soil.codes]\n"1" = "A"\n"2" = "B"\n', 'attributes = "raster"\n')
    loaded = load_project(project)
    assert loaded.soil.codes == {101: "C", 202: "D"}
    assert loaded.soil.keys.unused == ("Count",)
    units = run(loaded).units
    assert units.set_index("subcatchment_id")["soil_class"].to_dict() == {"S1": "C", "S2": "D"}


def test_a_geopackage_attribute_table_is_read_by_its_layer(tmp_path):
    project = _keyed_tiny(tmp_path / "gpkg")
    table = pd.DataFrame({"mukey": [101, 202], "hydrologic_soil_group": ["B", "A"]})
    pyogrio.write_dataframe(table, project.parent / "survey.gpkg", layer="map_units")
    edit_toml(project, '[soil.codes]\n"1" = "A"\n"2" = "B"\n',
              'attributes = "survey.gpkg"\nattributes_layer = "map_units"\n'
              'attributes_key = "mukey"\n')
    loaded = load_project(project)
    assert loaded.soil.codes == {101: "B", 202: "A"}
    assert loaded.input_files()["soil attribute table"] == project.parent / "survey.gpkg"


def test_a_cover_tables_impervious_share_splits_the_units(tmp_path):
    project = make_project(tmp_path / "share")
    keys = np.full((10, 10), 11, dtype=np.int16)
    keys[:, 5:] = 12
    write_geotiff(project.parent / "cover.tif", keys, origin=(X0, Y0 + 100.0), crs=CRS)
    (project.parent / "cover_units.csv").write_text(
        "key,cover_class,impervious_percent\n11,residential_quarter_acre,52.5\n"
        "12,residential_quarter_acre,52.5\n")
    edit_toml(project, '[cover.codes]\n"5" = "open_space_good"', 'attributes = "cover_units.csv"')
    result = run(load_project(project))
    params = result.parameters
    share = (params.loc[params["surface"] == "impervious", "area_m2"].sum()
             / params["area_m2"].sum())
    # 52.5 % from the table instead of TR-55 Table 2-2a's 38 % for 1/4 acre lots
    assert share == pytest.approx(0.525, rel=1e-12)
    sources = result.parameter_sources
    rows = sources[sources["parameter"] == "impervious_fraction"]
    assert set(rows["source"]) == {"cover_units.csv:key 11 (+1 more with the same values) "
                                   "(cover attribute table)"}
    # keys of one class that disagree are an error naming the row
    (project.parent / "cover_units.csv").write_text(
        "key,cover_class,impervious_percent\n11,residential_quarter_acre,52.5\n"
        "12,residential_quarter_acre,40\n")
    with pytest.raises(GisrunError, match=r"cover_units\.csv:line 3: sets other values"):
        load_project(project)


def test_texture_classification_takes_the_tables_group_over_the_textures(tmp_path):
    project = _keyed_tiny(tmp_path / "texture")
    (project.parent / "units.csv").write_text(
        "key,texture,hydrologic_soil_group\n101,loam,\n202,sandy loam,C\n")
    edit_toml(project, 'classification = "hydrologic_soil_group"', 'classification = "texture"')
    edit_toml(project, '[soil.codes]\n"1" = "A"\n"2" = "B"\n', 'attributes = "units.csv"\n')
    result = run(load_project(project))
    params = result.parameters[result.parameters["surface"] == "pervious"].set_index(
        "soil_class")
    # loam keeps its TR-55 (1986) App. A group B; sandy loam (A by texture) takes the table's C
    assert params.loc[["loam"], "hydrologic_soil_group"].tolist() == ["B"]
    assert params.loc[["sandy loam"], "hydrologic_soil_group"].tolist() == ["C"]
    # Green-Ampt stays that of the texture: Rawls et al. (1983) sandy loam Ks 1.09 cm/h
    assert params.loc[["sandy loam"], "ks_m_per_s"].iloc[0] == pytest.approx(1.09e-2 / 3600,
                                                                             rel=1e-12)
    sources = result.parameter_sources
    cn = sources[(sources["parameter"] == "curve_number") & (sources["soil_class"]
                                                              == "sandy loam")]
    assert any("group C from units.csv" in s for s in cn["source"])


def test_a_linearly_binned_raster_table_gets_its_keys_from_the_binning(tmp_path):
    # GDAL's linear binning (GDALRasterAttributeTable Row0Min / BinSize attributes, no value
    # column): row i holds the values from Row0Min + i * BinSize (GDAL raster attribute table
    # documentation, GetLinearBinning)
    side = tmp_path / "soil.tif.aux.xml"
    side.write_text(
        '<PAMDataset><PAMRasterBand band="1"><GDALRasterAttributeTable Row0Min="100" '
        'BinSize="1" tableType="thematic"><FieldDefn index="0"><Name>hydrologic_soil_group'
        '</Name><Type>2</Type><Usage>0</Usage></FieldDefn><Row index="0"><F>A</F></Row>'
        '<Row index="1"><F>B/D</F></Row></GDALRasterAttributeTable></PAMRasterBand>'
        '</PAMDataset>')
    frame, rows, value = read_attribute_table(side)
    assert value == "value" and rows == ["row 1", "row 2"]
    keyed = keyed_classes(frame, key=value, kind="soil", where=side.name, row_names=rows)
    assert keyed.codes == {100: "A", 101: "B/D"}
