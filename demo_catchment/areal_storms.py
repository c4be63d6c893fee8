"""The demo's areal reduction scenario: ``areal_reduction.toml`` and an invented factor table.

Kestlow Vale is 4.5 km2 in 85 subcatchments of 0.03-0.09 km2. Under the ARR 2019 rules an area
of 1 km2 or less is not reduced, so a factor per subcatchment is 1 everywhere here; a factor for
the whole basin (4.5 km2) is what the town's size allows. The scenario runs a 2-hour design
storm from invented IDF coefficients four ways (as a point depth, per subcatchment and over the
basin with the ARR 2019 short-duration relation, and over the basin with a fixed factor), and
the main project's invented 100-year 24-hour depth over the basin with a factor table invented
for the demo (``storms/invented_area_factors.csv``: **not from any publication**).

Areal reduction gives planning-level estimates only; defer to local codes, agency methods and a
licensed engineer.
"""

from __future__ import annotations

from pathlib import Path

__all__ = ["write_areal_reduction"]

#: The factor table: invented for the demo, shaped like published curves (smaller with area,
#: closer to 1 for longer storms); no publication's values.
FACTOR_TABLE = """\
# Invented areal reduction factors for the Kestlow Vale demo only (not from any publication).
# Use your agency's factors, or a published relation, for real work.
area_km2,duration_min,factor
1,60,0.99
10,60,0.91
1,1440,1.0
10,1440,0.96
"""

_STORMS = """
# [[storms]]: a 2-hour design storm (invented IDF coefficients for the invented town) as a
# point depth, then reduced for area three ways, and the 100-year 24-hour depth of gisrun.toml
# reduced over the basin with an invented factor table.
[[storms]]
name = "block_2h_point"
kind = "alternating_block"
idf = { a = 1200.0, b = 10.0, c = 0.8 }
duration_min = 120
step_min = 5

# ARR 2019 short-duration relation per subcatchment: every subcatchment here is under 1 km2,
# where ARR gives a factor of 1, so this storm equals the point storm (the factor column says 1).
[[storms]]
name = "block_2h_arr_per_subcatchment"
kind = "alternating_block"
idf = { a = 1200.0, b = 10.0, c = 0.8 }
duration_min = 120
step_min = 5
[storms.areal_reduction]
relation = "arr2019_short_duration"
annual_exceedance_probability = 0.01
over = "subcatchment"

# The same relation over the whole basin (4.5 km2: ARR's interpolation between 1 and 10 km2).
[[storms]]
name = "block_2h_arr_basin"
kind = "alternating_block"
idf = { a = 1200.0, b = 10.0, c = 0.8 }
duration_min = 120
step_min = 5
[storms.areal_reduction]
relation = "arr2019_short_duration"
annual_exceedance_probability = 0.01
over = "basin"

# A factor given directly (invented).
[[storms]]
name = "block_2h_fixed_0_95"
kind = "alternating_block"
idf = { a = 1200.0, b = 10.0, c = 0.8 }
duration_min = 120
step_min = 5
areal_reduction = { relation = "fixed_factor", factor = 0.95 }

# The 24-hour 100-year depth over the basin, with the invented factor table (area_km2,
# duration_min, factor; linear in log(area) and duration, never extrapolated).
[[storms]]
name = "nrcs_ii_24h_100yr_140mm_basin"
kind = "nrcs_24h"
distribution = "II"
depth = 140
[storms.areal_reduction]
relation = "factor_table"
table = "storms/invented_area_factors.csv"
over = "basin"
"""


def write_areal_reduction(base: Path, path: Path, table: Path) -> None:
    """``areal_reduction.toml`` (the base project's settings, its own output, the storms above)."""
    text = base.read_text(encoding="utf-8")
    text = text[: text.index("# [[storms]]:")]
    text = text.replace('output = "output/demo_runoff.gpkg"',
                        'output = "output/areal_reduction.gpkg"', 1)
    text = text.replace('demo"\n', 'demo: areal reduction"\n', 1)
    table.write_text(FACTOR_TABLE, encoding="utf-8", newline="\n")
    path.write_text(text + _STORMS.lstrip("\n"), encoding="utf-8", newline="\n")
