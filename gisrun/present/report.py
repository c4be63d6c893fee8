"""One self-contained HTML report of a run (compute only: returns text, opens no file).

Images are embedded as base64 ``data:`` URIs and the style sheet is inline, so
the file opens offline and can be mailed as one attachment. Sections (their
``id`` in brackets): caution [``caution``], inputs [``inputs``], method and
parameter sources [``method``], storms with a hyetograph figure [``storms``],
summary table [``summary``], maps and plots [``maps``], ponding-first ranking
[``ranking``], lumping difference per subcatchment [``lumping``], mass balance
[``mass-balance``], warnings [``warnings``] and the run's provenance [``provenance``].
"""

from __future__ import annotations

import base64
import html
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..model import RunResult
from ..units import present_frame
from .layers import run_info
from .lumping import lumping_section

__all__ = ["SECTIONS", "ReportFigures", "build_report"]

#: Section ids in report order.
SECTIONS = ("caution", "inputs", "method", "storms", "summary", "maps", "ranking",
            "lumping", "mass-balance", "warnings", "provenance")

_STYLE = """
body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;margin:2em auto;max-width:70em;
color:#222;line-height:1.4;padding:0 1em}
h1{font-size:1.6em}h2{border-bottom:2px solid #3b528b;padding-bottom:.2em;margin-top:2em}
table{border-collapse:collapse;font-size:.85em;margin:.6em 0}
th,td{border:1px solid #ccc;padding:.25em .5em;text-align:right}
th{background:#eef1f7}td:first-child,th:first-child{text-align:left}
.caution{background:#fff4e0;border-left:6px solid #d55e00;padding:.8em 1em}
figure{margin:1em 0}figure img{max-width:100%;border:1px solid #ddd}
figcaption{font-size:.85em;color:#555}nav a{margin-right:1em}
.mono{font-family:ui-monospace,monospace;font-size:.85em;word-break:break-all}
"""


@dataclass
class ReportFigures:
    """PNG bytes to embed, with captions."""

    hyetograph: bytes | None = None
    per_storm: dict[str, list[tuple[str, bytes]]] = field(default_factory=dict)


#: Rows of each ranking shown per storm.
REPORT_TOP = 10


def build_report(result: RunResult, figures: ReportFigures, *, ranking: tuple[pd.DataFrame, ...],
                 caution: str, files: Sequence[str] = (), top: int = REPORT_TOP) -> str:
    """Build the report as one HTML document.

    Parameters
    ----------
    result : RunResult
        A finished run (:class:`gisrun.model.RunResult`).
    figures : ReportFigures
        Images to embed.
    ranking : (subcatchments, units)
        From :func:`gisrun.present.layers.ponding_ranking` (SI columns).
    caution : str
        The caution text (:data:`gisrun.model.CAUTION`).
    files : sequence of str
        Names of the other files written beside the report, listed under provenance.
    top : int
        Rows of each ranking shown per storm.
    """
    project = result.project
    parts = [
        "<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
        f"<title>{_e(project.name)}: runoff report</title><style>{_STYLE}</style></head><body>",
        f"<h1>{_e(project.name)}: infiltration and runoff</h1>",
        "<nav>" + "".join(f'<a href="#{s}">{s.replace("-", " ")}</a>' for s in SECTIONS) + "</nav>",
        _section("caution", "Caution", f'<p class="caution"><strong>{_e(caution)}</strong></p>'),
        _section("inputs", "Inputs", _inputs(result)),
        _section("method", "Method and parameter sources", _method(result)),
        _section("storms", "Storms", _storms(result, figures.hyetograph)),
        _section("summary", "Summary per storm", _summary(result)),
        _section("maps", "Maps and plots", _maps(figures)),
        _section("ranking", "Which subcatchments pond first", _ranking(result, ranking, top)),
        _section("lumping", "Lumping difference per subcatchment", lumping_section(result, top)),
        _section("mass-balance", "Mass balance", _mass_balance(result)),
        _section("warnings", "Warnings", _warnings(result)),
        _section("provenance", "Provenance", _provenance(result, files)),
        "</body></html>",
    ]
    return "\n".join(parts)


def _e(text: object) -> str:
    return html.escape(str(text))


def _section(sid: str, title: str, body: str) -> str:
    return f'<section id="{sid}"><h2>{_e(title)}</h2>\n{body}\n</section>'


def _table(frame: pd.DataFrame) -> str:
    return frame.to_html(index=False, escape=True, na_rep="-", border=0,
                         float_format=lambda v: f"{v:,.4g}")


def _img(png: bytes, caption: str) -> str:
    data = base64.b64encode(png).decode("ascii")
    return (f'<figure><img alt="{_e(caption)}" src="data:image/png;base64,{data}">'
            f"<figcaption>{_e(caption)}</figcaption></figure>")


def _inputs(result: RunResult) -> str:
    p = result.project
    rows = [("project file", p.path.name), ("subcatchments", f"{p.subcatchments.path.name} "
             f"({len(result.subcatchments)} polygons, id field {p.subcatchments.id_field})"),
            ("subcatchment CRS", result.subcatchments.crs.name),
            ("soil raster", f"{p.soil.path.name} ({p.soil.classification})"),
            ("cover raster", p.cover.path.name if p.cover else "none"),
            ("parameter overrides", p.overrides.name if p.overrides else "none"),
            ("unit system", p.units.name), ("time step", f"{p.time_step_s / 60:g} min"),
            ("nodata rule", f"{p.nodata_rule} (max share {p.max_nodata_fraction:.0%})")]
    cov = present_frame(result.coverage, p.units)
    return _table(pd.DataFrame(rows, columns=["input", "value"])) + (
        "<p>Coverage: subcatchments with nodata or outside-raster area.</p>"
        + _table(cov[cov["nodata_fraction"] > 0]))


def _method(result: RunResult) -> str:
    p = result.project
    methods = pd.Series(result.method_counts, name="count").rename_axis("loss_method")
    text = (f"<p>Default loss method <strong>{_e(p.method)}</strong>, units combined as "
            f"<strong>{_e(p.combine)}</strong>. Units per method:</p>")
    sources = result.parameter_sources
    table = ""
    if {"parameter", "source"} <= set(sources.columns):
        counts = (sources.groupby(["parameter", "source"])["unit_parts"].sum()
                  if "unit_parts" in sources.columns
                  else sources.groupby(["parameter", "source"]).size())
        uses = counts.rename("unit_parts").reset_index()
        table = "<p>Where each parameter came from:</p>" + _table(uses)
    return text + _table(methods.reset_index(name="unit_parts")) + table


def _storms(result: RunResult, hyetograph: bytes | None) -> str:
    system = result.project.units
    rows = []
    for storm in result.storms:
        h = storm.hyetograph
        rows.append({"storm": h.name, "duration_s": h.duration_s, "total_depth_m": h.total_depth_m,
                     "peak_intensity_m_per_s": h.peak_intensity_m_per_s})
    body = _table(present_frame(pd.DataFrame(rows), system))
    if hyetograph:
        body += _img(hyetograph, "Rain intensity of each storm (hyetograph)")
    return body


def _summary(result: RunResult) -> str:
    system = result.project.units
    rows = []
    for storm in result.storms:
        s = storm.subcatchments
        area = s["modelled_area_m2"].to_numpy()
        w = area / area.sum() if area.sum() > 0 else area
        ponded = s["time_to_ponding_s"].to_numpy()
        rows.append({
            "storm": storm.name, "modelled_area_m2": float(area.sum()),
            "rain_depth_m": float(w @ s["rain_depth_m"]),
            "infiltration_depth_m": float(w @ s["infiltration_depth_m"]),
            "runoff_depth_m": float(w @ s["runoff_depth_m"]),
            "runoff_volume_m3": float(s["runoff_volume_m3"].sum()),
            "subcatchments_ponding": int(np.isfinite(ponded).sum()),
            "earliest_ponding_s": float(np.nanmin(ponded)) if np.isfinite(ponded).any() else None,
        })
    return ("<p>Area-weighted over all subcatchments; per-subcatchment figures are in the "
            "GeoPackage.</p>" + _table(present_frame(pd.DataFrame(rows), system)))


def _maps(figures: ReportFigures) -> str:
    if not figures.per_storm:
        return "<p>No maps were made for this run.</p>"
    parts = []
    for storm, images in figures.per_storm.items():
        parts.append(f"<h3>{_e(storm)}</h3>")
        parts += [_img(png, caption) for caption, png in images]
    return "\n".join(parts)


def _ranking(result: RunResult, ranking: tuple[pd.DataFrame, ...], top: int) -> str:
    system = result.project.units
    subs, units = (present_frame(r, system) for r in ranking)
    parts = [f"<p>Earliest to pond first (top {top} per storm; ties share a rank). The full "
             "rankings are the GeoPackage layers <code>ponding_rank_subcatchments</code> and "
             "<code>ponding_rank_units</code>.</p>"]
    for storm in result.storms:
        parts.append(f"<h3>{_e(storm.name)}</h3><p>Subcatchments</p>")
        parts.append(_table(subs[subs["storm"] == storm.name].head(top).drop(columns="storm")))
        parts.append("<p>Soil x cover units (pervious parts)</p>")
        parts.append(_table(units[units["storm"] == storm.name].head(top).drop(columns="storm")))
    return "\n".join(parts)


def _mass_balance(result: RunResult) -> str:
    rows = []
    for storm in result.storms:
        s = storm.subcatchments
        rel = np.abs(s["mass_balance_error_m"]) / np.maximum(s["rain_depth_m"], 1e-12)
        rows.append({"storm": storm.name, "largest_error_m": float(np.abs(
            s["mass_balance_error_m"]).max()), "largest_relative_error": float(rel.max())})
    return ("<p>Per subcatchment, rain = infiltration + runoff + surface storage; a run whose "
            "relative error exceeds 1e-9 stops with an error instead of writing.</p>"
            + _table(present_frame(pd.DataFrame(rows), result.project.units)))


def _warnings(result: RunResult) -> str:
    if not result.warnings:
        return "<p>None.</p>"
    return "<ul>" + "".join(f"<li>{_e(w)}</li>" for w in result.warnings) + "</ul>"


def _provenance(result: RunResult, files: Sequence[str]) -> str:
    info = run_info(result)
    listed = "".join(f"<li class=\"mono\">{_e(f)}</li>" for f in files)
    return _table(info) + (f"<p>Files written beside this report:</p><ul>{listed}</ul>"
                           if listed else "")
