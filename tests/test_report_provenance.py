"""The report's provenance table: file names of the checksums are shown as they are."""

from __future__ import annotations

import re
from html import unescape

from test_cellgrid import tiny_project

from gisrun import run
from gisrun.present.report_tables import provenance_section


def test_checksummed_file_names_keep_their_underscores(tmp_path):
    """Defect: the provenance table turned every underscore of a key into a space, so the
    checksum of soil_groups.tif was listed under "sha256:soil groups.tif", a file that does not
    exist. Only the key's own words are spaced; the file name is kept as written."""
    toml = tiny_project(tmp_path / "p")
    (tmp_path / "p" / "soil.tif").rename(tmp_path / "p" / "soil_groups.tif")
    toml.write_text(toml.read_text().replace('path = "soil.tif"', 'path = "soil_groups.tif"'))
    result = run(toml)
    html = provenance_section(result, ["rasters/runoff_depth_mm_uniform_60mm.tif"])
    cells = [unescape(c) for c in re.findall(r"<td[^>]*>(.*?)</td>", html)]
    digest = result.checksums["soil_groups.tif"]
    assert cells[cells.index(digest) - 1] == "sha256:soil_groups.tif"
    assert "time step min" in cells and "unit system" in cells  # the keys' own words spaced
    assert "rasters/runoff_depth_mm_uniform_60mm.tif" in html
