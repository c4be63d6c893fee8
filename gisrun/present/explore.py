"""The report's interactive subcatchment map: inline SVG and a small inline script.

Everything is inside the one HTML file (no external script, tile or font), so it
works offline. Each subcatchment is an SVG path coloured by the runoff depth of
the chosen storm, in the run's shared classes; subcatchments whose method differs
from the most used one are hatched. Hovering shows the id, method, runoff depth,
runoff coefficient and time to ponding; clicking opens that subcatchment's panel
(its numbers under every storm, its loss parameters, a small figure of what
became of the rain, and links to its infiltration plots). Without script the map
still shows, and every polygon links to its panel below the map.
"""

from __future__ import annotations

import json
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import geopandas as gpd
import numpy as np
import pandas as pd
from matplotlib.colors import to_hex
from shapely.geometry import MultiPolygon, Polygon
from shapely.geometry.base import BaseGeometry

from ..model import RunResult
from ..units import from_si
from .classes import MISSING_COLOUR, run_classes
from .display import display_frame, human, method_name
from .html import esc, table
from .model_inputs import lumped_layer

__all__ = ["explore_section", "MAX_INTERACTIVE", "SVG_WIDTH"]

#: Above this many subcatchments the map is left out (the GeoPackage holds every figure).
MAX_INTERACTIVE = 3000
SVG_WIDTH = 1000.0

_SCRIPT = """
(function () {
  var data = JSON.parse(document.getElementById('explore-data').textContent);
  var svg = document.getElementById('explore-svg');
  var tip = document.getElementById('explore-tip');
  var panel = document.getElementById('explore-panel');
  var pick = document.getElementById('explore-storm');
  var storm = 0;
  function line(parent, label, value) {
    var div = document.createElement('div');
    var b = document.createElement('b');
    b.textContent = label;
    div.appendChild(b);
    div.appendChild(document.createTextNode(' ' + value));
    parent.appendChild(div);
  }
  function paint() {
    svg.querySelectorAll('path.sc').forEach(function (p) {
      var k = data.subs[+p.getAttribute('data-k')].s[storm][3];
      p.setAttribute('fill', k < 0 ? data.missing : data.colours[k]);
    });
  }
  function hover(ev) {
    var p = ev.target.closest('path.sc');
    if (!p) { return; }
    var d = data.subs[+p.getAttribute('data-k')];
    var s = d.s[storm];
    tip.textContent = '';
    line(tip, 'subcatchment', d.id);
    line(tip, 'method', d.m);
    line(tip, 'runoff depth', s[0] + ' ' + data.depth);
    line(tip, 'runoff coefficient', s[1]);
    line(tip, 'time to ponding', s[2]);
    var box = svg.getBoundingClientRect();
    tip.style.left = (ev.clientX - box.left + 14) + 'px';
    tip.style.top = (ev.clientY - box.top + 14) + 'px';
    tip.hidden = false;
  }
  function open(ev) {
    var p = ev.target.closest('path.sc');
    if (!p) { return; }
    ev.preventDefault();
    var src = document.getElementById(p.getAttribute('data-panel'));
    panel.textContent = '';
    panel.appendChild(src.content.cloneNode(true));
    panel.hidden = false;
    panel.setAttribute('data-open', data.subs[+p.getAttribute('data-k')].id);
  }
  svg.addEventListener('mouseover', hover);
  svg.addEventListener('mousemove', hover);
  svg.addEventListener('mouseleave', function () { tip.hidden = true; });
  svg.addEventListener('click', open);
  pick.addEventListener('change', function () { storm = +pick.value; paint(); });
  pick.disabled = false;
  paint();
})();
"""


def _ring(coords: Sequence[tuple[float, ...]], to_svg: tuple[float, float, float]) -> str:
    x0, y1, scale = to_svg
    pts = " ".join(f"{(x - x0) * scale:.1f},{(y1 - y) * scale:.1f}" for x, y, *_ in coords)
    return f"M{pts}Z"


def _path(geom: BaseGeometry | None, to_svg: tuple[float, float, float]) -> str:
    if geom is None or geom.is_empty:
        return ""
    polys = geom.geoms if isinstance(geom, MultiPolygon) else [geom]
    rings = []
    for poly in polys:
        if isinstance(poly, Polygon):
            rings.append(_ring(poly.exterior.coords, to_svg))
            rings += [_ring(r.coords, to_svg) for r in poly.interiors]
    return "".join(rings)


def _storm_values(result: RunResult, ids: pd.Series) -> list[list[list[object]]]:
    """Per subcatchment, per storm: [runoff depth, coefficient, time to ponding, class]."""
    classes = run_classes(result).runoff_depth
    depth = result.project.units.depth
    per_storm = []
    for storm in result.storms:
        s = storm.subcatchments.set_index("subcatchment_id").reindex(ids)
        runoff = np.asarray(from_si(s["runoff_depth_m"].to_numpy(float), depth))
        k = classes.index(runoff)
        ponding = s["time_to_ponding_s"].to_numpy(float) / 60.0
        per_storm.append([[human(r), human(c), f"{human(p)} min" if np.isfinite(p)
                           else "does not pond", int(i)]
                          for r, c, p, i in zip(runoff, s["runoff_coefficient"], ponding, k,
                                                strict=True)])
    return [[per_storm[j][i] for j in range(len(per_storm))] for i in range(len(ids))]


def _split_figure(rows: pd.DataFrame, depth_unit: str) -> str:
    """A small SVG bar per storm: infiltration, storage and runoff adding up to the rain."""
    colours = {"infiltration": "#e69f00", "storage": "#999999", "runoff": "#56b4e9"}
    top = max(float(rows["rain"].max()), 1e-12)
    bars = []
    for i, r in enumerate(rows.itertuples()):
        y, x = 22 + i * 26, 170.0
        bars.append(f'<text x="0" y="{y + 13}" font-size="12">{esc(r.storm)}</text>')
        for name in ("infiltration", "storage", "runoff"):
            w = 300.0 * max(float(getattr(r, name)), 0.0) / top
            bars.append(f'<rect x="{x:.1f}" y="{y}" width="{w:.1f}" height="18" '
                        f'fill="{colours[name]}"><title>{name}: {human(getattr(r, name))} '
                        f"{esc(depth_unit)}</title></rect>")
            x += w
        bars.append(f'<text x="{x + 6:.1f}" y="{y + 13}" font-size="12">rain '
                    f"{human(r.rain)} {esc(depth_unit)}</text>")
    legend = " ".join(f'<tspan fill="{c}">&#9632;</tspan> {n}' for n, c in colours.items())
    height = 30 + 26 * len(rows)
    return (f'<svg class="split" viewBox="0 0 640 {height}" width="640" height="{height}" '
            f'role="img"><text x="0" y="12" font-size="12">{legend}</text>{"".join(bars)}</svg>')


def _columns_to_rows(frame: pd.DataFrame, name: str) -> pd.DataFrame:
    """Columns become rows: a narrow table for the side panel.

    The first column is ``name``, then one column per row of ``frame`` (named by its
    index, or ``value`` for a single unnamed row).
    """
    out = frame.T
    if not isinstance(frame.index, pd.RangeIndex) or len(frame) != 1:
        out.columns = [str(c) for c in frame.index]
    else:
        out.columns = ["value"]
    return out.rename_axis(name).reset_index()


_PANEL_COLUMNS = ["storm", "rain_depth_m", "infiltration_depth_m", "storage_depth_m",
                  "runoff_depth_m", "runoff_volume_m3", "runoff_coefficient", "time_to_ponding_s",
                  "peak_excess_intensity_m_per_s"]


def _panel(result: RunResult, sid: str, k: int, plots: Mapping[str, Sequence[tuple[str, str]]],
           rows: _PanelRows) -> str:
    system = result.project.units
    frame = rows.storms.get(sid, rows.no_storm)
    shown = rows.shown.get(sid, rows.no_shown)
    numbers = table(_columns_to_rows(shown.set_index("storm"), "figure"))
    depth = pd.DataFrame({"storm": frame["storm"]}).assign(**{
        n: from_si(frame[c].to_numpy(float), system.depth) for n, c in (
            ("rain", "rain_depth_m"), ("infiltration", "infiltration_depth_m"),
            ("storage", "storage_depth_m"), ("runoff", "runoff_depth_m"))})
    mi = rows.parameters.get(sid)
    links = "".join(f'<li><a href="#{esc(a)}">{esc(c)}</a></li>' for c, a in plots.get(sid, ()))
    return (f'<template id="panel-{k}"><h3>{esc(sid)}</h3>{numbers}'
            f"<p>What became of the rain ({esc(system.depth)}):</p>"
            f"{_split_figure(depth, system.depth)}"
            f"<p>Loss parameters, area-weighted over the subcatchment's units "
            f"({esc(method_name(rows.methods.get(sid, result.project.method)))}):</p>"
            f"{table(mi) if mi is not None else ''}"
            + (f"<p>Plots of this subcatchment:</p><ul>{links}</ul>" if links else "")
            + "</template>")


@dataclass(frozen=True)
class _PanelRows:
    """The run's rows converted and split by subcatchment once; each panel looks its own up.

    ``storms``: a subcatchment's rows under every storm, in storm order, with a ``storm``
    column; ``shown``: the same rows' panel columns as display text; ``parameters``: its
    area-weighted lumped parameters (one storm's rows) as display text; ``methods``: its loss
    method. Filtering and
    formatting the whole tables once per panel made the section quadratic in the number of
    subcatchments; every step here works row by row, so the text is the same.
    """

    storms: dict[str, pd.DataFrame]
    shown: dict[str, pd.DataFrame]
    parameters: dict[str, pd.DataFrame]
    methods: dict[str, str]
    no_storm: pd.DataFrame
    no_shown: pd.DataFrame

    @classmethod
    def of(cls, result: RunResult) -> _PanelRows:
        """Convert and split ``result``'s storm rows and area-weighted parameter rows."""
        whole = pd.concat([storm.subcatchments.drop(columns=["mass_balance_error_m"],
                                                    errors="ignore").assign(storm=storm.name)
                           for storm in result.storms], ignore_index=True)
        key = whole.pop("subcatchment_id").astype(str).to_numpy()
        shown = display_frame(whole[[c for c in _PANEL_COLUMNS if c in whole.columns]],
                              result.project.units)
        methods = result.subcatchment_methods
        return cls(_split(whole, key), _split(shown, key), _area_weighted_parameters(result),
                   {str(sid): str(m) for sid, m in zip(methods["subcatchment_id"],
                                                       methods["loss_method"], strict=True)},
                   whole.iloc[:0], shown.iloc[:0])


def _split(frame: pd.DataFrame, key: np.ndarray) -> dict[str, pd.DataFrame]:
    """Rows of ``frame`` by ``key`` (row order kept), each with a fresh range index."""
    return {str(sid): rows.reset_index(drop=True)
            for sid, rows in frame.groupby(key, sort=False)}


def _area_weighted_parameters(result: RunResult) -> dict[str, pd.DataFrame]:
    """Each subcatchment's area-weighted lumped parameters (its first storm's rows), as text."""
    rows = result.lumped_parameters
    rows = rows[rows["basis"] == "area_weighted"]
    if rows.empty:
        return {}
    key = rows["subcatchment_id"].astype(str).to_numpy()
    first = rows.groupby(key, sort=False)["storm"].transform("first")
    rows, key = rows[rows["storm"] == first], key[(rows["storm"] == first).to_numpy()]
    shown = lumped_layer(rows, result.project.units)
    shown = shown[["surface", "parameter", "value", "unit"]].assign(
        value=[human(v) for v in shown["value"]])
    return _split(shown, key)


def _legend(result: RunResult) -> str:
    classes = run_classes(result).runoff_depth
    items = "".join(f'<span class="key"><i style="background:{to_hex(c)}"></i>{esc(t)}</span>'
                    for c, t in zip(classes.colours(), classes.labels(), strict=True))
    return (f'<div class="legend">runoff depth ({esc(result.project.units.depth)}): {items}'
            f'<span class="key"><i class="hatch"></i>hatched: not the most used method</span>'
            "</div>")


def explore_section(result: RunResult, plots: Mapping[str, Sequence[tuple[str, str]]]) -> str:
    """The interactive map section's HTML (SVG, data, panels and the inline script).

    ``plots`` maps a subcatchment id to (caption, anchor id) of its plots in the report.
    """
    gdf: gpd.GeoDataFrame = result.subcatchments
    if len(gdf) > MAX_INTERACTIVE:
        return (f"<p>The interactive map is left out above {human(MAX_INTERACTIVE)} "
                "subcatchments; every figure is in the GeoPackage.</p>")
    x0, y0, x1, y1 = gdf.total_bounds
    scale = SVG_WIDTH / max(x1 - x0, 1e-9)
    height = (y1 - y0) * scale
    geoms = gdf.geometry.simplify((x1 - x0) / 2000.0, preserve_topology=True)
    ids = gdf["subcatchment_id"].astype(str)
    methods = result.subcatchment_methods.set_index("subcatchment_id")["loss_method"].reindex(ids)
    common = methods.value_counts().index[0] if methods.notna().any() else ""
    classes = run_classes(result).runoff_depth
    colours = [to_hex(c) for c in classes.colours()]
    values = _storm_values(result, ids)
    paths, hatch = [], []
    for k, (sid, geom, method) in enumerate(zip(ids, geoms, methods, strict=True)):
        d = _path(geom, (x0, y1, scale))
        first = values[k][0][3] if values[k] else -1
        fill = colours[first] if first >= 0 else MISSING_COLOUR
        paths.append(f'<path class="sc" data-k="{k}" data-panel="panel-{k}" fill="{fill}" '
                     f'd="{d}"><title>{esc(sid)}</title></path>')
        if isinstance(method, str) and method != common:
            hatch.append(f'<path class="hatch" d="{d}"/>')
    data = {"depth": result.project.units.depth, "missing": MISSING_COLOUR, "colours": colours,
            "subs": [{"id": sid, "m": method_name(m) if isinstance(m, str) else "-", "s": v}
                     for sid, m, v in zip(ids, methods, values, strict=True)]}
    options = "".join(f'<option value="{j}">{esc(s.name)}</option>'
                      for j, s in enumerate(result.storms))
    svg = (f'<svg id="explore-svg" viewBox="0 0 {SVG_WIDTH:.0f} {height:.0f}" role="img" '
           f'aria-label="subcatchments"><defs><pattern id="hatch" width="8" height="8" '
           f'patternUnits="userSpaceOnUse" patternTransform="rotate(45)"><line x1="0" y1="0" '
           f'x2="0" y2="8" stroke="#222" stroke-width="1.2"/></pattern></defs>'
           f'{"".join(paths)}<g pointer-events="none">{"".join(hatch)}</g></svg>')
    rows = _PanelRows.of(result)
    panels = "".join(_panel(result, sid, k, plots, rows) for k, sid in enumerate(ids))
    payload = json.dumps(data, separators=(",", ":")).replace("</", "<\\/")
    return (f'<p>Hover over a subcatchment for its figures under the chosen storm; click it to '
            f'open its numbers, parameters and plots. Storm: <select id="explore-storm" '
            f"disabled>{options}</select></p>{_legend(result)}"
            f'<div class="explore"><div id="explore-map">{svg}<div id="explore-tip" hidden>'
            f'</div></div><div id="explore-panel" hidden></div></div>{panels}'
            f'<script type="application/json" id="explore-data">{payload}</script>'
            f"<script>{_SCRIPT}</script>")
