"""The HTML report: every section, self-contained (no external references), opens offline."""

from __future__ import annotations

import base64
import shutil
import subprocess
from html.parser import HTMLParser
from pathlib import Path

import matplotlib.image as mpimg
import numpy as np
import pytest

from gisrun import CAUTION, run
from gisrun.present import maps
from gisrun.present.layers import ponding_ranking
from gisrun.present.report import SECTIONS, ReportFigures, build_report


class Collect(HTMLParser):
    def __init__(self):
        super().__init__()
        self.ids, self.refs, self.tags, self.text = set(), [], [], []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        for name, value in attrs:
            if name == "id":
                self.ids.add(value)
            if name in ("src", "href", "srcset", "action", "data") and value:
                self.refs.append(value)

    def handle_data(self, data):
        self.text.append(data)


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    from test_cellgrid import tiny_project

    folder = tmp_path_factory.mktemp("report")
    result = run(tiny_project(folder / "p"))
    storm = result.storms[0]
    hyeto = maps.figure_png(maps.hyetograph_plot(
        [(storm.name, storm.hyetograph.time_s / 60, storm.hyetograph.intensity_m_per_s * 3.6e6)],
        rate_unit="mm/h"))
    figures = ReportFigures(hyetograph=hyeto, per_storm={storm.name: [("a map", hyeto)]})
    text = build_report(result, figures, ranking=ponding_ranking(result), caution=CAUTION,
                        files=["rasters/x.tif"])
    path = folder / "report.html"
    path.write_text(text, encoding="utf-8")
    return result, text, path


def test_every_section_present_and_nothing_external(report):
    _, text, _ = report
    parsed = Collect()
    parsed.feed(text)
    assert set(SECTIONS) <= parsed.ids
    for ref in parsed.refs:
        assert ref.startswith(("#", "data:image/png;base64,")), ref
    assert "http://" not in text and "https://" not in text
    assert "<link" not in text and "@import" not in text and "url(" not in text
    assert "<script" not in text


def test_images_are_embedded_pngs(report):
    _, text, _ = report
    parsed = Collect()
    parsed.feed(text)
    images = [r for r in parsed.refs if r.startswith("data:image/png")]
    assert len(images) >= 2
    png = base64.b64decode(images[0].split(",", 1)[1])
    assert png[:4] == b"\x89PNG"


def test_caution_provenance_ranking_and_storms_are_in_the_text(report):
    result, text, _ = report
    parsed = Collect()
    parsed.feed(text)
    body = " ".join(parsed.text)
    assert CAUTION in body
    assert result.started_utc in body and "sha256:gisrun.toml" in body
    earliest = result.storms[0].subcatchments.sort_values("time_to_ponding_s").iloc[0]
    assert earliest["subcatchment_id"] in body
    assert "uniform_60mm" in body


def test_renders_in_headless_chromium(report, tmp_path):
    browser = next((b for b in ("/usr/bin/chromium", shutil.which("chromium") or "")
                    if b and Path(b).exists()), None)
    if browser is None:
        pytest.skip("no chromium binary")
    _, _, path = report
    shot = tmp_path / "shot.png"
    subprocess.run([browser, "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
                    "--disable-background-networking", "--disable-component-update",
                    "--disable-sync", f"--user-data-dir={tmp_path / 'profile'}",
                    f"--screenshot={shot}", "--window-size=1200,900", path.as_uri()],
                   check=True, timeout=120, capture_output=True)
    image = mpimg.imread(shot)
    assert len(np.unique(image.reshape(-1, image.shape[-1]), axis=0)) > 20


def test_lumping_section_lists_subcatchments_largest_difference_first(report):
    result, text, _ = report
    assert 'id="lumping"' in text and "Lumping difference per subcatchment" in text
    from gisrun.present.lumping import lumping_differences

    diffs = lumping_differences(result)
    assert len(diffs) == len(result.subcatchments)
    sizes = diffs["lumped_difference_m"].abs().to_numpy()
    assert (np.diff(sizes) <= 0).all()  # largest first
    section = text[text.index('id="lumping"'):text.index('id="mass-balance"')]
    order = [section.index(f"<td>{sid}</td>") for sid in diffs["subcatchment_id"]]
    assert order == sorted(order)
