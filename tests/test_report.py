"""The HTML report: every section, self-contained (nothing external), opens offline, numbers
written for people, tables that fit a 1300 px window, a parameter sheet of the methods used,
and an interactive subcatchment map that answers a hover and a click in headless Chromium
with networking off.
"""

from __future__ import annotations

import base64
import re
from html.parser import HTMLParser

import matplotlib.image as mpimg
import numpy as np
import pytest
from browser_helpers import probe, screenshot
from report_helpers import methods_project
from test_cellgrid import tiny_project

from gisrun import CAUTION, run
from gisrun.present.display import human, method_name
from gisrun.present.explore import explore_section
from gisrun.present.layers import ponding_ranking
from gisrun.present.report import CONTENT_POLICY, SECTIONS, ReportFigures, build_report
from gisrun.write.extras import ExtrasOptions, write_deliverables

#: End-to-end runs (and, for the report, a headless browser): `pytest -m "not slow"` skips them.
pytestmark = pytest.mark.slow


class Collect(HTMLParser):
    """Ids, references, scripts, visible text, and per table its header and body rows."""

    def __init__(self):
        super().__init__()
        self.ids, self.refs, self.tags, self.text, self.scripts = set(), [], [], [], []
        self.tables, self._skip, self._section, self._cell = [], 0, None, None
        self.metas, self.h3_in = [], {}

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags.append(tag)
        if "id" in a:
            self.ids.add(a["id"])
        for name in ("src", "href", "srcset", "action", "data"):
            if a.get(name):
                self.refs.append(a[name])
        if tag == "meta":
            self.metas.append(a)
        if tag == "section":
            self._section = a.get("id")
        if tag == "script":
            self.scripts.append(a)
        if tag in ("script", "style", "template"):
            self._skip += 1
        if tag == "table" and not self._skip:
            self.tables.append({"section": self._section, "head": [], "rows": []})
        if tag == "tr" and self.tables and not self._skip:
            self.tables[-1]["rows"].append([])
        if tag in ("td", "th") and self.tables and not self._skip:
            self._cell = tag
        if tag == "h3" and not self._skip:
            self._cell = "h3"

    def handle_endtag(self, tag):
        if tag in ("script", "style", "template"):
            self._skip -= 1
        if tag in ("td", "th", "h3"):
            self._cell = None

    def handle_data(self, data):
        if self._skip:
            return
        self.text.append(data)
        if self._cell == "h3":
            self.h3_in.setdefault(self._section, []).append(data)
        elif self._cell == "th":
            self.tables[-1]["head"].append(data)
        elif self._cell == "td":
            self.tables[-1]["rows"][-1].append(data)

    def body_rows(self, section):
        return [t for t in self.tables if t["section"] == section]


def parsed(text):
    out = Collect()
    out.feed(text)
    return out


def write_report(folder, units="si"):
    result = run(methods_project(folder / "p", units=units))
    out = folder / "files"
    out.mkdir()
    options = ExtrasOptions(rasters=False, model_inputs=False, plot_subcatchments=("S3",))
    made = write_deliverables(result, out, options=options)
    return result, made.report.read_text(encoding="utf-8"), made.report


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    return write_report(tmp_path_factory.mktemp("report"))


@pytest.fixture(scope="module")
def us_report(tmp_path_factory):
    return write_report(tmp_path_factory.mktemp("report_us"), units="us")


def test_every_section_present_and_nothing_external(report):
    _, text, _ = report
    page = parsed(text)
    assert set(SECTIONS) <= page.ids
    for ref in page.refs:
        assert ref.startswith(("#", "data:image/png;base64,")), ref
    assert "http://" not in text and "https://" not in text
    assert "<link" not in text and "@import" not in text and "url(" not in text.replace(
        "url(#hatch)", "")
    assert all("src" not in s for s in page.scripts)  # inline script only
    assert {"http-equiv": "Content-Security-Policy", "content": CONTENT_POLICY} in page.metas


def test_images_are_embedded_pngs(report):
    _, text, _ = report
    images = [r for r in parsed(text).refs if r.startswith("data:image/png")]
    assert len(images) >= 4
    assert base64.b64decode(images[0].split(",", 1)[1])[:4] == b"\x89PNG"


def test_caution_provenance_ranking_and_storms_are_in_the_text(report):
    result, text, _ = report
    body = " ".join(parsed(text).text)
    assert CAUTION in body
    assert result.started_utc in body and "sha256:gisrun.toml" in body
    assert "drizzle" in body and "heavy" in body


#: A number written as mantissa and exponent (``4.509e+06``, ``1E-9``), not part of a word
#: (checksums are hexadecimal words).
SCIENTIFIC = re.compile(r"(?<![\w.])\d+(\.\d+)?[eE][+-]?\d+(?!\w)")


def test_no_number_in_scientific_notation(report, us_report):
    """Defect: numbers like ``4.509e+06`` (and tiny mass-balance errors) in the tables."""
    for _, text, _ in (report, us_report):
        body = " ".join(parsed(text).text)
        found = SCIENTIFIC.search(body)
        assert found is None, body[found.start() - 40:found.end() + 20]


def test_no_empty_tables(report):
    """Defect: the coverage table printed its headers with no rows."""
    result, text, _ = report
    assert (result.coverage["nodata_fraction"] == 0).all()  # nothing to list here
    for table in parsed(text).tables:
        assert table["rows"][1:], table["head"]
    assert "wholly covered" in text


def cell(table, row_key, column):
    """The cell of ``column`` in the row whose first cells are ``row_key`` (text or tuple)."""
    key = (row_key,) if isinstance(row_key, str) else tuple(row_key)
    head = [h.strip() for h in table["head"]]
    for row in table["rows"][1:]:
        if tuple(row[:len(key)]) == key:
            return row[head.index(column)]
    raise AssertionError(f"{row_key!r} not in {table}")


def test_summary_has_the_runoff_coefficient_in_run_units(report, us_report):
    """Defect: the runoff coefficient was missing from the summary; units follow the run."""
    for (result, text, _), depth in ((report, "mm"), (us_report, "in")):
        summary = parsed(text).body_rows("summary")[0]
        heavy = result.storms[1].subcatchments
        area = heavy["modelled_area_m2"]
        expected = (heavy["runoff_depth_m"] * area).sum() / (heavy["rain_depth_m"] * area).sum()
        assert cell(summary, "heavy", "runoff coefficient") == human(expected)
        assert f"runoff depth ({depth})" in summary["head"]
    us_head = parsed(us_report[1]).body_rows("summary")[0]["head"]
    assert "modelled area (acre)" in us_head and "runoff volume (ft³)" in us_head


def test_parameter_sheet_lists_exactly_the_methods_used_in_display_units(report, tmp_path):
    """Defect: ~100 source rows for methods nobody used, in internal SI names, no values."""
    result, text, _ = report
    page = parsed(text)
    assert page.h3_in["parameters"] == ["Green-Ampt", "Horton", "curve number"]
    sheet = page.body_rows("parameters")
    assert len(sheet) == 3
    ga = sheet[0]
    assert "conductivity Ks (mm/h)" in ga["head"] and "sources" in ga["head"]
    p = result.parameters
    row = p[(p.loss_method == "green_ampt") & (p.soil_class == "A")
            & (p.cover_class == "open_space_good") & (p.surface == "pervious")].iloc[0]
    shown = cell(ga, ("A", "open_space_good", "pervious"), "conductivity Ks (mm/h)")
    assert shown == human(row["ks_m_per_s"] * 3.6e6)
    assert "decay constant (1/h)" in sheet[1]["head"]  # Horton per hour, as published
    sheet_text = text[text.index('id="parameters"'):text.index('id="storms"')]
    assert "ks_m_per_s" not in sheet_text and "phi-index" not in sheet_text
    # a run with one method lists that method only
    one = run(tiny_project(tmp_path / "one"))
    page = parsed(build_report(one, ReportFigures(), ranking=ponding_ranking(one),
                               caution=CAUTION))
    assert page.h3_in["parameters"] == ["Green-Ampt"]


def test_rankings_name_the_method_and_rank_within_it(report):
    """Defect: the ponding ranking did not say which method each subcatchment used."""
    tables = parsed(report[1]).body_rows("ranking")
    first = tables[0]
    assert {"method", "rank within method"} <= set(first["head"])
    methods = {r[first["head"].index("method")] for r in first["rows"][1:]}
    assert methods == {"Green-Ampt", "Horton", "curve number"}


PROBE = """
window.addEventListener('load', function () { setTimeout(function () {
  var out = {};
  var p = document.querySelector('#explore-svg path.sc[data-k="2"]');
  var r = p.getBoundingClientRect();
  var at = {bubbles: true, cancelable: true, clientX: r.left + r.width / 2,
            clientY: r.top + r.height / 2};
  var tip = document.getElementById('explore-tip');
  out.tipBefore = tip.hidden;
  p.dispatchEvent(new MouseEvent('mouseover', at));
  out.tip = tip.innerText; out.tipHidden = tip.hidden;
  out.fill = p.getAttribute('fill');
  var pick = document.getElementById('explore-storm');
  pick.value = '1'; pick.dispatchEvent(new Event('change'));
  out.fillHeavy = p.getAttribute('fill');
  p.dispatchEvent(new MouseEvent('mouseover', at));
  out.tipHeavy = tip.innerText;
  p.dispatchEvent(new MouseEvent('click', at));
  var panel = document.getElementById('explore-panel');
  out.panel = panel.innerText; out.panelHidden = panel.hidden;
  out.panelLinks = Array.from(panel.querySelectorAll('a')).map(function (a) {
    return a.getAttribute('href'); });
  out.tables = Array.from(document.querySelectorAll('table')).map(function (t) {
    var wrap = t.parentNode;
    return [Math.ceil(t.getBoundingClientRect().right), wrap.scrollWidth, wrap.clientWidth]; });
  out.page = document.documentElement.scrollWidth;
  window.gisrunProbe(out);
}, 0); });
"""


def test_interactive_map_answers_hover_and_click_offline(report, tmp_path):
    """Hover shows id, method, runoff depth, coefficient and time to ponding; a click opens
    the subcatchment's numbers and plots. Chromium runs with networking off, and the page's
    content policy blocks anything external: no violation may be reported."""
    result, _, path = report
    seen = probe(path, PROBE, tmp_path)
    assert seen["violations"] == []
    assert seen["tipBefore"] and not seen["tipHidden"]
    assert seen["tip"].split("\n")[:2] == ["subcatchment S3", "method curve number"]
    assert "runoff depth 0 mm" in seen["tip"] and "does not pond" in seen["tip"]
    heavy = result.storms[1].subcatchments.set_index("subcatchment_id").loc["S3"]
    assert f"runoff depth {human(heavy['runoff_depth_m'] * 1000)} mm" in seen["tipHeavy"]
    assert f"runoff coefficient {human(heavy['runoff_coefficient'])}" in seen["tipHeavy"]
    assert f"time to ponding {human(heavy['time_to_ponding_s'] / 60)} min" in seen["tipHeavy"]
    assert seen["fill"] != seen["fillHeavy"]  # the storm choice recolours the map
    assert not seen["panelHidden"] and seen["panel"].startswith("S3")
    assert "runoff coefficient" in seen["panel"] and "curve number" in seen["panel"]
    assert seen["panelLinks"] == ["#plot-s3-drizzle", "#plot-s3-heavy"]


def test_every_table_fits_a_1300_px_window(report, us_report, tmp_path):
    """Defect: the summary table was wider than a 1300 px window (last column cut off).
    Measured in Chromium at 1300 px, with the map's side panel open."""
    for k, (_, _, path) in enumerate((report, us_report)):
        work = tmp_path / str(k)
        work.mkdir()
        seen = probe(path, PROBE, work, width=1300)
        assert len(seen["tables"]) >= 10
        for right, scroll, client in seen["tables"]:
            assert right <= 1300 and scroll <= client
        assert seen["page"] <= 1300


def test_renders_in_headless_chromium_and_is_not_blank(report, tmp_path):
    _, _, path = report
    image = mpimg.imread(screenshot(path, tmp_path / "shot.png"))
    assert image.shape[1] == 1300
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


def test_each_panel_holds_its_own_subcatchment_under_every_storm(report):
    """The panels are built from the run's rows split once by subcatchment: each panel must
    still show its own subcatchment's runoff depth under every storm, in storm order, and its
    own method, never a neighbour's."""
    result = report[0]
    section = explore_section(result, {})
    panels = re.findall(r'<template id="panel-(\d+)"><h3>([^<]+)</h3>(.*?)</template>', section)
    assert len(panels) == len(result.subcatchments)
    methods = result.subcatchment_methods.set_index("subcatchment_id")["loss_method"]
    for k, sid, body in panels:
        assert result.subcatchments["subcatchment_id"].astype(str).iloc[int(k)] == sid
        depths = [human(s.subcatchments.set_index("subcatchment_id").loc[sid, "runoff_depth_m"]
                        * 1000) for s in result.storms]
        row = re.search(r"<td>runoff depth \(mm\)</td>(.*?)</tr>", body).group(1)
        assert re.findall(r"<td[^>]*>([^<]*)</td>", row) == depths
        assert f"({method_name(methods[sid])})" in body
