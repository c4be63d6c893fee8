"""A run with an impervious-share grid: shares reach the results and parameter_sources."""

from __future__ import annotations

import numpy as np
import pandas as pd
from bad_inputs_helpers import make_project, write_raster
from numpy.testing import assert_allclose

from gisrun.workflow.pipeline import run


def _run(folder):
    return run(folder / "gisrun.toml", keep_loss=True, cells=False)


def _with_grid(folder, values, scale="percent", cover=None):
    write_raster(folder / "imp.tif", np.asarray(values, dtype=np.float64))
    if cover is not None:
        text = (folder / "gisrun.toml").read_text().replace('"5" = "open_space_good"',
                                                            f'"5" = "{cover}"')
        (folder / "gisrun.toml").write_text(text)
    with open(folder / "gisrun.toml", "a") as f:
        f.write(f'\n[impervious]\npath = "imp.tif"\nscale = "{scale}"\n')


def test_grid_equal_to_the_cover_table_changes_nothing(tmp_path):
    """A grid of 85 % under commercial cover (TR-55 1986 Table 2-2a: 85 % impervious) gives the
    same results, to the bit, as the cover table's share."""
    plain, gridded = tmp_path / "plain", tmp_path / "grid"
    for folder in (plain, gridded):
        make_project(folder)
        text = (folder / "gisrun.toml").read_text().replace('"5" = "open_space_good"',
                                                            '"5" = "commercial"')
        (folder / "gisrun.toml").write_text(text)
    _with_grid(gridded, np.full((10, 10), 85.0))
    a, b = _run(plain), _run(gridded)
    pd.testing.assert_frame_equal(a.storms[0].subcatchments, b.storms[0].subcatchments)
    pd.testing.assert_frame_equal(a.parameters, b.parameters)


def test_shares_from_the_grid_reach_the_subcatchments(tmp_path):
    """West half (S1, columns 0-4) at 20 %, east half (S2) at 60 % as fractions: the
    subcatchments' impervious fraction is their grid mean, and the sources say where from."""
    folder = tmp_path / "p"
    make_project(folder)
    values = np.where(np.arange(10)[None, :] < 5, 0.2, 0.6) + np.zeros((10, 1))
    _with_grid(folder, values, scale="fraction")
    result = _run(folder)
    subs = result.storms[0].subcatchments.set_index("subcatchment_id")
    assert_allclose(subs.loc[["S1", "S2"], "impervious_fraction"], [0.2, 0.6], rtol=1e-9)
    sources = result.parameter_sources
    rows = sources[sources["parameter"] == "impervious_fraction"]
    assert len(rows) and rows["source"].str.contains(r"impervious grid imp\.tif").all()
    assert rows["unit_parts"].sum() == len(result.units)
