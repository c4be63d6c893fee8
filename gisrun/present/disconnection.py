"""The report's impervious-area section: where the shares came from, and what disconnection did.

Compute only: returns HTML text for :mod:`gisrun.present.report`. Per storm, the
runoff volume of the run beside the volume of impervious runoff run onto
pervious ground; when the run compared (``[impervious] compare_connected``), the
runoff with every impervious area connected, the difference, and the
subcatchments where disconnection saves the most.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..model import RunResult
from ..project import ImperviousSource
from .display import display_frame, human
from .html import esc, table

__all__ = ["disconnection_section", "disconnection_totals"]


def disconnection_totals(result: RunResult) -> pd.DataFrame:
    """One row per storm (SI): runoff volume, run-on volume and, when compared, connected runoff.

    Columns ``storm``, ``runoff_volume_m3``, ``runon_volume_m3`` and, with
    ``compare_connected``, ``connected_runoff_volume_m3``, ``difference_volume_m3``
    (runoff minus connected runoff) and ``difference_pct`` (of the connected runoff).
    """
    rows = []
    for storm in result.storms:
        subs = storm.subcatchments
        area = subs["modelled_area_m2"].to_numpy(float)
        row = {"storm": storm.name, "runoff_volume_m3": float(subs["runoff_volume_m3"].sum())}
        if "runon_depth_m" in subs.columns:
            row["runon_volume_m3"] = float((subs["runon_depth_m"].to_numpy(float) * area).sum())
        if "connected_runoff_depth_m" in subs.columns:
            connected = float((subs["connected_runoff_depth_m"].to_numpy(float) * area).sum())
            row["connected_runoff_volume_m3"] = connected
            row["difference_volume_m3"] = row["runoff_volume_m3"] - connected
            row["difference_pct"] = (100.0 * row["difference_volume_m3"] / connected
                                     if connected > 0 else np.nan)
        rows.append(row)
    return pd.DataFrame(rows)


def disconnection_section(result: RunResult, top: int) -> str:
    """HTML of the section (a sentence when the project has no ``[impervious]`` table)."""
    source = result.project.impervious
    if source is None:
        return ("<p>Impervious shares come from each cover class's tabulated percent; no "
                "impervious area is stated as disconnected (no <code>[impervious]</code> "
                "table).</p>")
    parts = [f"<p>{esc(_settings(source))}</p>"]
    if not source.disconnects:
        return parts[0]
    units = result.project.units
    parts.append("<p>Runoff of disconnected impervious area runs onto pervious ground, step by "
                 "step, and soaks in there by that ground's own loss method; curve-number units "
                 "below 30 % impervious use TR-55's composite curve number for unconnected "
                 "impervious area instead (warnings name those outside its limits).</p>")
    parts.append(table(display_frame(disconnection_totals(result), units), left=1))
    if source.compare_connected:
        parts.append(_largest_savings(result, top))
    return "\n".join(parts)


def _settings(source: ImperviousSource) -> str:
    where = (f"Impervious shares measured on {source.path.name} ({source.scale}), area-weighted "
             "over each unit" if source.path is not None else
             "Impervious shares from each cover class's tabulated percent")
    stated = []
    if source.disconnected_field:
        stated.append(f"per subcatchment from the field {source.disconnected_field}")
    if source.disconnected_by_cover:
        stated.append("by cover class (" + ", ".join(
            f"{k} {human(v)}" for k, v in source.disconnected_by_cover.items()) + ")")
    if source.disconnected_fraction is not None:
        stated.append(f"project-wide {human(source.disconnected_fraction)}")
    if not stated:
        return where + "; no impervious area is stated as disconnected."
    return (where + "; share of impervious area disconnected " + ", then ".join(stated)
            + f"; run-on to the pervious ground of the same {source.runon_to}.")


def _largest_savings(result: RunResult, top: int) -> str:
    frames = []
    for storm in result.storms:
        subs = storm.subcatchments
        frames.append(pd.DataFrame({
            "subcatchment_id": subs["subcatchment_id"], "storm": storm.name,
            "runoff_depth_m": subs["runoff_depth_m"],
            "connected_runoff_depth_m": subs["connected_runoff_depth_m"],
            "disconnection_difference_m": subs["disconnection_difference_m"]}))
    frame = pd.concat(frames, ignore_index=True).sort_values(
        "disconnection_difference_m", kind="stable").head(top)
    return (f"<p>Subcatchments where disconnection lowers runoff the most (runoff minus the "
            f"runoff with every impervious area connected; top {top}):</p>"
            + table(display_frame(frame, result.project.units)))
