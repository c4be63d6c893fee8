"""The demo's impervious-percent grid and its disconnected-roof scenario (invented data).

Called by ``make_demo.py`` after its other files are written; it writes

- ``impervious_percent.tif``: impervious percent (0-100, float32, -1 = nodata) on the
  5 m land-cover grid: each cover class's typical share with invented lot-to-lot variation;
- ``disconnected_roofs.toml``: ``gisrun.toml`` plus an ``[impervious]`` table: the
  shares from the grid, and most house roofs spilling onto their lawns (a roof
  disconnection scheme), compared with every roof connected.

Its random numbers come from a generator of their own, so the other demo files do not change.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import rasterio
from numpy.typing import NDArray
from rasterio.transform import from_origin
from scipy.ndimage import gaussian_filter

#: A fixed state of this script's own random-number generator.
IMPERVIOUS_RNG_STATE = 20241203
IMPERVIOUS_NODATA = -1.0
#: Typical impervious percent per demo cover code, and how far lots stray from it (invented).
TYPICAL_PERCENT = {1: (96.0, 3.0), 2: (38.0, 9.0), 3: (25.0, 7.0), 4: (85.0, 6.0),
                   5: (2.0, 2.0), 6: (0.0, 0.5), 7: (1.0, 1.0), 8: (1.5, 1.0)}
#: Share of the impervious area of each housing cover whose roofs spill onto lawns (invented).
DISCONNECTED_BY_COVER = {"residential_quarter_acre": 0.6, "residential_half_acre": 0.7}

_SCENARIO = """
# Disconnected roofs: the same town with most house roofs spilling onto their lawns. Written
# by make_demo.py from gisrun.toml; run it with
#     gisrun run demo_catchment/disconnected_roofs.toml
# [impervious]: each unit's impervious share comes from the impervious-percent grid (mean over
# the unit's area) instead of the cover table; the shares of impervious area below drain onto
# the pervious part of the same unit and soak in there. compare_connected runs the storms
# again with every roof connected, and the report shows the difference.
[impervious]
path = "impervious_percent.tif"
scale = "percent"
runon_to = "unit"
compare_connected = true

[impervious.disconnected_by_cover]
{shares}
"""


def impervious_percent(cover: NDArray[np.uint8], cover_nodata: int) -> NDArray[np.float32]:
    """Invented impervious percent per cover cell: the class's typical share, varied smoothly."""
    rng = np.random.default_rng(IMPERVIOUS_RNG_STATE)
    noise = gaussian_filter(rng.standard_normal(cover.shape), 3.0)
    noise /= max(float(noise.std()), 1e-12)
    out = np.full(cover.shape, IMPERVIOUS_NODATA, dtype=np.float64)
    for code, (mean, spread) in TYPICAL_PERCENT.items():
        here = cover == code
        out[here] = np.clip(mean + spread * noise[here], 0.0, 100.0)
    out[cover == cover_nodata] = IMPERVIOUS_NODATA
    return np.round(out, 1).astype(np.float32)


def write_impervious(path: Path, percent: NDArray[np.float32], frame: tuple, cell_m: float,
                     crs: str) -> None:
    """Tiled, compressed float32 GeoTIFF of impervious percent."""
    west, north, cols, rows = frame
    profile = dict(driver="GTiff", width=cols, height=rows, count=1, dtype="float32", crs=crs,
                   transform=from_origin(west, north, cell_m, cell_m), nodata=IMPERVIOUS_NODATA,
                   tiled=True, blockxsize=256, blockysize=256, compress="deflate", zlevel=9)
    path.unlink(missing_ok=True)
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(percent, 1)
        dst.update_tags(DATA="invented demo data for Kestlow Vale; not a real place",
                        UNITS="percent impervious, 0-100")


def write_scenario(base: Path, path: Path) -> None:
    """``disconnected_roofs.toml``: the base project file, its own output, plus [impervious]."""
    text = base.read_text(encoding="utf-8")
    text = text.replace('output = "output/demo_runoff.gpkg"',
                        'output = "output/disconnected_roofs.gpkg"', 1)
    text = text.replace('demo"\n', 'demo: disconnected roofs"\n', 1)
    shares = "\n".join(f"{cover} = {share}" for cover, share in DISCONNECTED_BY_COVER.items())
    path.write_text(text + _SCENARIO.format(shares=shares), encoding="utf-8", newline="\n")
