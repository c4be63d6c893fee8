"""One self-contained HTML report of a run (compute only: returns text, opens no file).

Images are embedded as base64 ``data:`` URIs, the style sheet and the one small
script of the interactive map are inline, so the file opens offline and can be
mailed as one attachment (no external script, tile, font or link). Sections
(their ``id`` in brackets): caution [``caution``], inputs [``inputs``], method
[``method``], parameter sheet [``parameters``], storms with a hyetograph figure
[``storms``], summary table with the runoff coefficient [``summary``], the
interactive subcatchment map [``explore``], maps and plots [``maps``],
ponding-first rankings overall and within each method [``ranking``], the
impervious shares and what disconnected impervious area did [``impervious``], the
runoff bands from the parameter ranges [``bands``], the lumping difference per
subcatchment [``lumping``], mass balance [``mass-balance``], warnings
[``warnings``] and the run's provenance [``provenance``].

Numbers are written for people (thousands separators, no scientific notation,
units in the headers in the run's unit system); every table wraps to the page
(a 1300 px window holds the widest) and an empty table is a sentence instead.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import pandas as pd

from ..model import RunResult
from .bands import bands_section
from .disconnection import disconnection_section
from .explore import explore_section
from .html import anchor, esc, image, section
from .layers import REPORT_TOP
from .lumping import lumping_section
from .parameter_sheet import parameter_sheet
from .report_tables import (
    inputs_section,
    mass_balance_section,
    method_counts_section,
    provenance_section,
    ranking_section,
    storms_table,
    summary_section,
)

__all__ = ["SECTIONS", "ReportFigures", "SubcatchmentPlot", "build_report", "REPORT_TOP",
           "plot_anchor", "CONTENT_POLICY"]

#: Section ids in report order.
SECTIONS = ("caution", "inputs", "method", "parameters", "storms", "summary", "explore", "maps",
            "ranking", "impervious", "bands", "lumping", "mass-balance", "warnings",
            "provenance")

_TITLES = {"mass-balance": "mass balance", "explore": "map", "parameters": "parameter sheet",
           "bands": "how sure"}

_STYLE = """
body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;margin:2em auto;max-width:76em;
color:#222;line-height:1.4;padding:0 1em}
h1{font-size:1.6em}h2{border-bottom:2px solid #3b528b;padding-bottom:.2em;margin-top:2em}
.table-wrap{max-width:100%;overflow-x:auto}
table{border-collapse:collapse;font-size:.85em;margin:.6em 0;max-width:100%}
th,td{border:1px solid #ccc;padding:.25em .5em;vertical-align:top;overflow-wrap:anywhere}
th{background:#eef1f7;font-weight:600;text-align:left}td.r{white-space:nowrap}
.r{text-align:right;font-variant-numeric:tabular-nums}
.caution{background:#fff4e0;border-left:6px solid #d55e00;padding:.8em 1em}
figure{margin:1em 0}figure img{max-width:100%;border:1px solid #ddd}
figcaption,.small{font-size:.85em;color:#555}nav a{margin-right:1em}
.mono{font-family:ui-monospace,monospace;font-size:.85em;word-break:break-all}
.explore{display:flex;flex-wrap:wrap;gap:1em;align-items:flex-start}
#explore-map{position:relative;flex:1 1 38em;max-width:100%}
#explore-svg{width:100%;height:auto;border:1px solid #ddd;background:#fff}
#explore-svg path.sc{stroke:#fff;stroke-width:.6;cursor:pointer}
#explore-svg path.sc:hover{stroke:#000;stroke-width:2}
#explore-svg path.hatch{fill:url(#hatch);stroke:none}
#explore-tip{position:absolute;background:#fff;border:1px solid #888;padding:.3em .5em;
font-size:.85em;pointer-events:none;box-shadow:0 1px 4px rgba(0,0,0,.3)}
#explore-panel{flex:1 1 26em;min-width:0;max-width:100%;border-left:4px solid #3b528b;
padding-left:1em}
.legend{font-size:.85em;margin:.4em 0}.key{margin-right:1em;white-space:nowrap}
.key i{display:inline-block;width:1em;height:1em;margin-right:.3em;vertical-align:-.15em;
border:1px solid #999}
.key i.hatch{background:repeating-linear-gradient(45deg,#fff 0 3px,#222 3px 4px)}
svg.split{max-width:100%;height:auto}
"""


@dataclass(frozen=True)
class SubcatchmentPlot:
    """One embedded plot of one subcatchment under one storm."""

    subcatchment_id: str
    storm: str
    caption: str
    png: bytes


@dataclass
class ReportFigures:
    """PNG bytes to embed, with captions: hyetographs, maps per storm, subcatchment plots."""

    hyetograph: bytes | None = None
    per_storm: dict[str, list[tuple[str, bytes]]] = field(default_factory=dict)
    plots: list[SubcatchmentPlot] = field(default_factory=list)
    #: Band-width maps and tornado figures of an uncertainty run, with captions.
    uncertainty: list[tuple[str, bytes]] = field(default_factory=list)


#: The report loads nothing from outside itself: only inline style and script, data: images.
CONTENT_POLICY = ("default-src 'none'; img-src data:; style-src 'unsafe-inline'; "
                  "script-src 'unsafe-inline'")

#: Rows of each ranking shown per storm.


def plot_anchor(plot: SubcatchmentPlot) -> str:
    """The id of a subcatchment plot in the report (the interactive map links to it)."""
    return anchor("plot", plot.subcatchment_id, plot.storm)


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
    plots: dict[str, list[tuple[str, str]]] = {}
    for plot in figures.plots:
        plots.setdefault(plot.subcatchment_id, []).append((plot.caption, plot_anchor(plot)))
    subs, units = (ranking + (pd.DataFrame(), pd.DataFrame()))[:2]
    bodies = {
        "caution": f'<p class="caution"><strong>{esc(caution)}</strong></p>',
        "inputs": inputs_section(result),
        "method": method_counts_section(result),
        "parameters": parameter_sheet(result),
        "storms": storms_table(result) + (image(figures.hyetograph, "Rain intensity of each "
                                                "storm (hyetograph)") if figures.hyetograph
                                          else ""),
        "summary": summary_section(result),
        "explore": explore_section(result, plots),
        "maps": _maps(figures),
        "ranking": ranking_section(result, (subs, units), top),
        "impervious": disconnection_section(result, top),
        "bands": bands_section(result, figures.uncertainty, top),
        "lumping": lumping_section(result, top),
        "mass-balance": mass_balance_section(result),
        "warnings": _warnings(result),
        "provenance": provenance_section(result, list(files)),
    }
    titles = {"caution": "Caution", "inputs": "Inputs", "method": "Loss method",
              "parameters": "Parameter sheet: the values used", "storms": "Storms",
              "summary": "Summary per storm", "explore": "Subcatchment map (interactive)",
              "maps": "Maps and plots", "ranking": "Which subcatchments pond first",
              "impervious": "Impervious area and disconnection",
              "bands": "How sure: runoff bands from the parameter ranges",
              "lumping": "Lumping difference per subcatchment", "mass-balance": "Mass balance",
              "warnings": "Warnings", "provenance": "Provenance"}
    nav = "".join(f'<a href="#{s}">{_TITLES.get(s, s)}</a>' for s in SECTIONS)
    parts = [
        "<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
        f'<meta http-equiv="Content-Security-Policy" content="{CONTENT_POLICY}">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{esc(project.name)}: runoff report</title><style>{_STYLE}</style></head><body>",
        f"<h1>{esc(project.name)}: infiltration and runoff</h1>", f"<nav>{nav}</nav>",
        *(section(s, titles[s], bodies[s]) for s in SECTIONS),
        f'<p class="caution small">{esc(caution)}</p>', "</body></html>",
    ]
    return "\n".join(parts)


def _maps(figures: ReportFigures) -> str:
    if not figures.per_storm and not figures.plots:
        return "<p>No maps were made for this run.</p>"
    parts = ["<p>Every storm's maps share one set of classes per quantity, so a colour means "
             "the same on each. Hatching marks subcatchments using a loss method other than the "
             "most used one.</p>"]
    storms = list(dict.fromkeys([*figures.per_storm, *(p.storm for p in figures.plots)]))
    for storm in storms:
        parts.append(f"<h3>{esc(storm)}</h3>")
        parts += [image(png, caption) for caption, png in figures.per_storm.get(storm, [])]
        parts += [image(p.png, p.caption, ident=plot_anchor(p)) for p in figures.plots
                  if p.storm == storm]
    return "\n".join(parts)


def _warnings(result: RunResult) -> str:
    if not result.warnings:
        return "<p>None.</p>"
    return "<ul>" + "".join(f"<li>{esc(w)}</li>" for w in result.warnings) + "</ul>"
