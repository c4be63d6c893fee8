"""The report's tables: inputs, storms, summary, rankings, mass balance and provenance.

Each function returns an HTML fragment. Numbers are shown by
:func:`gisrun.present.display.display_frame` (thousands separators, no scientific
notation, units in the headers in the run's unit system); a table with no rows
becomes a sentence.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..model import RunResult
from ..project import CoverSource, SoilSource
from .display import display_frame, human, method_name
from .html import esc, table
from .layers import run_info
from .reduction import reduction_line

__all__ = ["inputs_section", "storms_table", "summary_section", "ranking_section",
           "mass_balance_section", "provenance_section", "method_counts_section",
           "catchment_rows"]


def inputs_section(result: RunResult) -> str:
    """What was read: files, CRS, settings, and the subcatchments with missing raster data."""
    p = result.project
    rows = [("project file", p.path.name), ("subcatchments", f"{p.subcatchments.path.name} "
             f"({human(len(result.subcatchments))} polygons, id field {p.subcatchments.id_field})"),
            ("subcatchment CRS", result.subcatchments.crs.name),
            (f"soil {p.soil.kind}", f"{_named(p.soil)} ({p.soil.classification})"),
            (f"cover {p.cover.kind}" if p.cover else "cover raster",
             _named(p.cover) if p.cover else "none"),
            ("parameter overrides", p.overrides.name if p.overrides else "none"),
            ("unit system", p.units.name), ("time step", f"{human(p.time_step_s / 60)} min"),
            ("nodata rule", f"{p.nodata_rule} (max share {p.max_nodata_fraction:.0%})")]
    cov = result.coverage[result.coverage["nodata_fraction"] > 0]
    frame = display_frame(cov.assign(nodata_fraction=cov["nodata_fraction"] * 100)
                          .rename(columns={"nodata_fraction": "nodata_share_pct"}), p.units)
    frame = frame.rename(columns={"nodata share pct": "nodata share (%)"})
    body = table(pd.DataFrame(rows, columns=["input", "value"]))
    if frame.empty:
        return body + "<p>Every subcatchment is wholly covered by soil and cover data.</p>"
    return body + ("<p>Subcatchments with nodata or outside-raster area (filled by the nodata "
                   "rule):</p>" + table(frame))


def _named(source: SoilSource | CoverSource) -> str:
    """The file, and for a polygon layer its layer and class field."""
    if not source.is_polygons:
        return source.path.name
    layer = f", layer {source.layer}" if source.layer else ""
    return (f"{source.path.name}{layer}, class field {source.class_field}: unit areas by "
            "exact polygon intersection")


def method_counts_section(result: RunResult) -> str:
    """The default method, how units were combined, units and subcatchments per method."""
    p = result.project
    subs = result.subcatchment_methods["loss_method"].astype(str).value_counts()
    rows = [{"method": method_name(m), "subcatchments": int(subs.get(m, 0)), "unit_parts": int(n)}
            for m, n in result.method_counts.items()]
    text = (f"<p>Default loss method <strong>{esc(method_name(p.method))}</strong>, units "
            f"combined as <strong>{esc(p.combine)}</strong>.</p>")
    methods = result.subcatchment_methods
    other = methods[methods["loss_method"] != p.method]
    if len(other):
        chosen = ", ".join(f"{method_name(m)}: {', '.join(map(str, g['subcatchment_id']))}"
                           for m, g in other.groupby("loss_method"))
        text += f"<p>Subcatchments with a method of their own: {esc(chosen)}.</p>"
    return text + table(display_frame(pd.DataFrame(rows)))


def storms_table(result: RunResult) -> str:
    """Each storm's duration, depth and peak intensity."""
    rows = [{"storm": s.name, "duration_s": s.hyetograph.duration_s,
             "total_depth_m": s.hyetograph.total_depth_m,
             "peak_intensity_m_per_s": s.hyetograph.peak_intensity_m_per_s}
            for s in result.storms]
    return (table(display_frame(pd.DataFrame(rows), result.project.units))
            + reductions(result) + rain_sources(result))


def reductions(result: RunResult) -> str:
    """One line per storm reduced for area: the factors, relation, area, AEP and source."""
    lines = [reduction_line(s.name, s.hyetograph.reduction, result.project.units)
             for s in result.storms if s.hyetograph.reduction is not None]
    if not lines:
        return ""
    return ("<p>Areal reduction of point design depths (each subcatchment's factor is in "
            "<code>areal_reduction_factor</code>):</p><ul>"
            + "".join(f"<li>{esc(line)}</li>" for line in lines) + "</ul>")


def rain_sources(result: RunResult) -> str:
    """For storms of areal rain: each source's subcatchments and share of the basin's rain.

    The share is the source's weight averaged over the subcatchments by area; every weight is
    in the ``rain_weights`` layer.
    """
    area = result.coverage.set_index("subcatchment_id")["area_m2"]
    frames = []
    for storm in result.storms:
        areal = storm.hyetograph.areal
        if areal is None or areal.weights.empty:  # no sources (factors of an areal reduction)
            continue
        w = areal.weights.assign(area=area.reindex(areal.weights["subcatchment_id"]).to_numpy())
        w = w[w["weight"] > 0]
        frames.append(pd.DataFrame({
            "storm": storm.name,
            "source": w.groupby("source_id", sort=True).size().index,
            "subcatchments": w.groupby("source_id", sort=True).size().to_numpy(),
            "share_of_basin": (w["weight"] * w["area"]).groupby(w["source_id"], sort=True)
            .sum().to_numpy() / float(area.sum())}))
    if not frames:
        return ""
    sources = "; ".join(f"{s.name}: {s.hyetograph.areal.source}" for s in result.storms
                        if s.hyetograph.areal is not None and not s.hyetograph.areal.weights.empty)
    return (f"<p>Rain per subcatchment ({esc(sources)}): each source's subcatchments and its "
            "area-weighted share of the basin's rain (every weight is in the "
            "<code>rain_weights</code> layer).</p>"
            + table(display_frame(pd.concat(frames, ignore_index=True), result.project.units)))


def catchment_rows(result: RunResult) -> pd.DataFrame:
    """Catchment-wide figures per storm (SI), area-weighted over the subcatchments."""
    rows = []
    for storm in result.storms:
        s = storm.subcatchments
        area = s["modelled_area_m2"].to_numpy(dtype=float)
        w = area / area.sum() if area.sum() > 0 else area
        rain = float(w @ s["rain_depth_m"])
        runoff = float(w @ s["runoff_depth_m"])
        ponded = s["time_to_ponding_s"].to_numpy(dtype=float)
        rows.append({
            "storm": storm.name, "modelled_area_m2": float(area.sum()), "rain_depth_m": rain,
            "infiltration_depth_m": float(w @ s["infiltration_depth_m"]),
            "storage_depth_m": float(w @ s["storage_depth_m"]), "runoff_depth_m": runoff,
            "runoff_volume_m3": float(s["runoff_volume_m3"].sum()),
            "runoff_coefficient": runoff / rain if rain > 0 else np.nan,
            "subcatchments_ponding": int(np.isfinite(ponded).sum()),
            "earliest_ponding_s": float(np.nanmin(ponded)) if np.isfinite(ponded).any()
            else np.nan,
        })
    return pd.DataFrame(rows)


def summary_section(result: RunResult) -> str:
    """The catchment-wide summary table with the runoff coefficient."""
    frame = display_frame(catchment_rows(result), result.project.units)
    return ("<p>Area-weighted over all subcatchments; runoff coefficient = runoff depth / rain "
            "depth. Per-subcatchment figures: the interactive map below and the GeoPackage.</p>"
            + table(frame))


def _ranking_frame(frame: pd.DataFrame, result: RunResult, keys: list[str]) -> pd.DataFrame:
    if "loss_method" not in frame.columns and "subcatchment_id" in frame.columns:
        methods = result.subcatchment_methods
        frame = frame.merge(methods, on="subcatchment_id", how="left")
    if "ponding_rank_in_method" not in frame.columns and "loss_method" in frame.columns:
        frame = frame.assign(ponding_rank_in_method=frame.groupby("loss_method")[
            "time_to_ponding_s"].rank(method="min").astype("Int64"))
    cols = ["ponding_rank", *keys, "loss_method", "ponding_rank_in_method", "time_to_ponding_s",
            "runoff_depth_m", "runoff_coefficient"]
    out = frame[[c for c in cols if c in frame.columns]].copy()
    if "loss_method" in out.columns:
        out["loss_method"] = out["loss_method"].map(method_name)
    return display_frame(out, result.project.units)


def ranking_section(result: RunResult, ranking: tuple[pd.DataFrame, pd.DataFrame],
                    top: int) -> str:
    """Per storm: the earliest to pond overall and within each method."""
    subs, units = ranking
    parts = [f"<p>Earliest to pond first (top {top} per storm; ties share a rank). Methods "
             "differ in what ponding means (the curve number has no infiltration capacity: its "
             "time is when runoff starts), so each row also has its rank within its method, and "
             "the earliest of each method is listed. The full rankings are the GeoPackage layers "
             "<code>ponding_rank_subcatchments</code> and <code>ponding_rank_units</code>.</p>"]
    for storm in result.storms:
        s = subs[subs["storm"] == storm.name]
        parts.append(f"<h3>{esc(storm.name)}</h3><p>Subcatchments</p>")
        parts.append(table(_ranking_frame(s.head(top), result, ["subcatchment_id"]), left=3,
                           empty="No subcatchment ponds."))
        if "loss_method" in s.columns and s["loss_method"].nunique() > 1:
            firsts = (s.dropna(subset=["time_to_ponding_s"]).sort_values("time_to_ponding_s")
                      .groupby("loss_method", sort=False).head(3))
            parts.append("<p>Earliest three within each method</p>")
            parts.append(table(_ranking_frame(firsts, result, ["subcatchment_id"]), left=3,
                               empty="No subcatchment ponds."))
        if not units.empty and "storm" in units.columns:
            u = units[units["storm"] == storm.name].head(top)
            parts.append("<p>Soil x cover units (pervious parts)</p>")
            parts.append(table(_ranking_frame(u, result, ["subcatchment_id", "soil_class",
                                                          "cover_class"]),
                               left=5, empty="No unit ponds."))
    return "\n".join(parts)


def mass_balance_section(result: RunResult) -> str:
    """The largest mass-balance error of each storm, absolute and in parts per billion."""
    rows = []
    for storm in result.storms:
        s = storm.subcatchments
        err = np.abs(s["mass_balance_error_m"].to_numpy(dtype=float))
        rel = err / np.maximum(s["rain_depth_m"].to_numpy(dtype=float), 1e-12)
        rows.append({"storm": storm.name, "largest_error_m": float(err.max()),
                     "largest_relative_error_ppb": float(rel.max() * 1e9),
                     "within_one_part_per_billion": bool(rel.max() <= 1e-9)})
    frame = display_frame(pd.DataFrame(rows), result.project.units)
    frame = frame.rename(columns={"largest relative error ppb":
                                  "largest relative error (parts per billion)"})
    return ("<p>Per subcatchment, rain = infiltration + runoff + surface storage; a run whose "
            "relative error exceeds one part per billion stops with an error instead of "
            "writing.</p>" + table(frame))


def provenance_section(result: RunResult, files: list[str]) -> str:
    """The run's key facts (version, time, settings, checksums) and the files written."""
    info = run_info(result)
    info = info[info["key"] != "parameter_source"]  # listed with the parameter sheet
    info = info.assign(key=[_plain_key(k) for k in info["key"].astype(str)])
    listed = "".join(f'<li class="mono">{esc(f)}</li>' for f in files)
    return table(info) + (
        f"<p>Files written beside this report:</p><ul>{listed}</ul>" if listed else "")


def _plain_key(key: str) -> str:
    """``time_step_min`` -> ``time step min``; a file name after ``sha256:`` is kept as it is."""
    head, colon, name = key.partition(":")
    return head.replace("_", " ") + colon + name
