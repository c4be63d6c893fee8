"""The demo's soil map as a soil survey would deliver it: map-unit keys and an attribute table.

Called by ``make_demo.py`` after it has made the soil group map; writes, next to it:

- ``soil_map_units.tif``: the same 10 m grid, each cell holding the key of an invented map unit
  of its group (int32, 0 = nodata); several map units per group, in patches.
- ``soil_map_units.csv``: one row per key: ``map_unit_key``, ``map_unit_name`` (not used by
  gisrun), ``hydrologic_soil_group`` (left blank for every third key, so gisrun derives it),
  ``texture`` (the group's representative texture, so results equal the typed codes),
  ``ks_least_transmissive_um_per_s``, ``restrictive_layer_depth_cm``, ``water_table_depth_cm``
  (invented profiles that the NEH 630 Ch. 7 criteria put in the same group).
- ``gisrun_map_units.toml``: ``gisrun.toml`` with ``[soil]`` reading the keys and the table;
  its results equal those of ``gisrun.toml`` (``tests/test_demo_map_units.py``).

Invented data for the invented town; the profiles are chosen inside the criteria's ranges.
"""

from __future__ import annotations

import csv
import io
from pathlib import Path

import numpy as np
import rasterio
from numpy.typing import NDArray
from scipy.ndimage import gaussian_filter

RNG_STATE = 20240618  # its own generator: the other demo files do not change
KEY_NODATA = 0
UNITS_PER_GROUP = 12
#: Representative textures of gisrun's group defaults (hsg_defaults.csv), so the Green-Ampt
#: values equal those of the typed codes; dual groups and water carry none.
TEXTURES = {"A": "sandy loam", "B": "silt loam", "C": "sandy clay loam", "D": "clay loam"}
#: (Ksat um/s range, impermeable layer cm range, water table cm range) inside each group's
#: NEH 630 Ch. 7 (2009) Table 7-1 criteria (None: none within the profile).
PROFILES = {
    "A": ((15.0, 60.0), None, None),
    "B": ((4.5, 9.5), None, None),
    "C": ((0.6, 3.5), None, None),
    "D": ((0.05, 0.3), (20.0, 45.0), None),
    "B/D": ((4.5, 9.5), None, (15.0, 50.0)),
    "C/D": ((0.6, 3.5), None, (15.0, 50.0)),
}
NAMES = ("Ashby", "Brendle", "Corrow", "Dunmere", "Elsing", "Fallow", "Garth", "Hollin",
         "Inchley", "Joyce", "Kestle", "Lummock")


def _keys(codes: dict[int, str], rng: np.random.Generator) -> dict[int, NDArray[np.int64]]:
    keys = 473_000 + rng.permutation(len(codes) * UNITS_PER_GROUP * 4)
    return {code: np.sort(keys[i * UNITS_PER_GROUP:(i + 1) * UNITS_PER_GROUP])
            for i, code in enumerate(sorted(codes))}


def key_map(soil: NDArray[np.uint8], codes: dict[int, str], nodata: int,
            rng: np.random.Generator) -> tuple[NDArray[np.int32], dict[int, NDArray[np.int64]]]:
    """Each cell's map-unit key: one of its group's keys, in smooth patches."""
    keys = _keys(codes, rng)
    field = gaussian_filter(rng.standard_normal(soil.shape), 4.0)
    lo, hi = np.quantile(field, [0.01, 0.99])
    rank = np.clip(((field - lo) / (hi - lo) * UNITS_PER_GROUP).astype(np.int64), 0,
                   UNITS_PER_GROUP - 1)
    out = np.full(soil.shape, KEY_NODATA, dtype=np.int32)
    for code, own in keys.items():
        cells = soil == code
        out[cells] = own[rank[cells]]
    out[soil == nodata] = KEY_NODATA
    return out, keys


def _range(bounds: tuple[float, float] | None, rng: np.random.Generator) -> str:
    return "" if bounds is None else f"{rng.uniform(*bounds):.2f}"


def table_csv(codes: dict[int, str], keys: dict[int, NDArray[np.int64]],
              rng: np.random.Generator) -> str:
    """The attribute table: a row per key."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(["map_unit_key", "map_unit_name", "hydrologic_soil_group", "texture",
                     "ks_least_transmissive_um_per_s", "restrictive_layer_depth_cm",
                     "water_table_depth_cm"])
    for code, own in keys.items():
        group = codes[code]
        ks, restrictive, table = PROFILES.get(group, (None, None, None))
        for i, key in enumerate(own):
            given = group if (i % 3 or group not in PROFILES) else ""
            name = f"{NAMES[i % len(NAMES)]} {'water' if group == 'water' else 'series'}"
            writer.writerow([int(key), name, given, TEXTURES.get(group, ""), _range(ks, rng),
                             _range(restrictive, rng), _range(table, rng)])
    return buffer.getvalue()


def project_text(typed: str, codes: dict[int, str]) -> str:
    """``gisrun.toml`` with the soil read from the keys and their table."""
    block = "[soil.codes]\n" + "\n".join(f'"{c}" = "{label}"' for c, label in codes.items())
    assert block in typed, "the demo project file changed; update map_units.project_text"
    text = typed.replace('path = "soil_groups.tif"', 'path = "soil_map_units.tif"')
    text = text.replace(block, '# the map-unit keys and their attribute table (a blank group is '
                        'derived from Ksat and\n# depths by the NEH 630 Ch. 7 criteria)\n'
                        'attributes = "soil_map_units.csv"\nattributes_key = "map_unit_key"')
    text = text.replace('output = "output/demo_runoff.gpkg"',
                        'output = "output/demo_map_units.gpkg"')
    return ("# The demo with its soil map as map-unit keys and an attribute table: the same\n"
            "# results as gisrun.toml (written by make_demo.py).\n" + text)


def write_map_units(folder: Path, codes: dict[int, str]) -> None:
    """Write the key raster, its table and the second project file (see the module docstring).

    Reads the soil group map ``soil_groups.tif`` and ``gisrun.toml`` just written.
    """
    with rasterio.open(folder / "soil_groups.tif") as src:
        soil, nodata = src.read(1), int(src.nodata)
        profile = {k: v for k, v in src.profile.items() if k != "photometric"}
    rng = np.random.default_rng(RNG_STATE)
    keys_map, keys = key_map(soil, codes, nodata, rng)
    path = folder / "soil_map_units.tif"
    path.unlink(missing_ok=True)
    with rasterio.open(path, "w", **{**profile, "dtype": "int32", "nodata": KEY_NODATA}) as dst:
        dst.write(keys_map, 1)
        dst.update_tags(DATA="invented demo data for Kestlow Vale; not a real place")
    (folder / "soil_map_units.csv").write_text(table_csv(codes, keys, rng), newline="\n")
    typed = (folder / "gisrun.toml").read_text()
    (folder / "gisrun_map_units.toml").write_text(project_text(typed, codes), newline="\n")
