"""Runoff bands in the output: the layers and the report section (no figures drawn here).

Layers (when the project has ``[uncertainty]``):

``runoff_bands``
    One polygon per subcatchment and storm: the chosen percentiles of runoff
    depth, volume and time to ponding, the band width (highest minus lowest
    percentile of depth), the probability of ponding, the share of samples in
    which it is among the first ``k`` to pond, and the parameter that moves its
    runoff most.
``parameter_sensitivity``
    Per storm, subcatchment and sampled parameter: runoff depth at the run's
    values and with the parameter at each end of its range, the swing, and its
    rank (1 moves the runoff most).
``uncertainty_ranges``
    What was sampled: each draw, its parameter, distribution and the source of
    its range.

Parameters are named without a unit (``ks``, ``suction_head``, ``horton_fc``), as in the
``lumped_parameters`` layer: the values these layers give are runoff depths in the run's
units, and the SI column names inside (``ks_m_per_s``) would claim a unit nothing here is in.
"""

from __future__ import annotations

import geopandas as gpd
import pandas as pd

from ..model import BAND_CAUTION, RunResult, StormResult
from ..uncertainty.spread import SPREADS
from ..units import present_frame
from .display import display_frame, header
from .html import esc, image, table
from .model_inputs import parameter_name

__all__ = ["BAND_LAYERS", "band_builders", "bands_layer", "sensitivity_layer",
           "ranges_layer", "bands_section", "band_width_label"]

#: The layers of an uncertainty run, in output order.
BAND_LAYERS = ("runoff_bands", "parameter_sensitivity", "uncertainty_ranges")


def band_builders(result: RunResult) -> dict[str, object]:
    """Layer name -> function building it; empty when the run made no bands."""
    if result.uncertainty is None:
        return {}
    return {"runoff_bands": lambda: bands_layer(result),
            "parameter_sensitivity": lambda: sensitivity_layer(result),
            "uncertainty_ranges": lambda: ranges_layer(result)}


def bands_layer(result: RunResult) -> gpd.GeoDataFrame:
    """The bands as polygons, one per subcatchment and storm, in the run's units."""
    bands = present_frame(result.uncertainty.bands, result.project.units)
    bands = bands.assign(most_influential_parameter=[
        None if pd.isna(v) else parameter_name(str(v))
        for v in bands["most_influential_parameter"]])
    geoms = result.subcatchments[["subcatchment_id", "geometry"]]
    layer = bands.merge(geoms, on="subcatchment_id", how="left")
    cols = ["storm", "subcatchment_id", *[c for c in bands.columns
                                          if c not in ("storm", "subcatchment_id")], "geometry"]
    return gpd.GeoDataFrame(layer[cols], geometry="geometry", crs=result.subcatchments.crs)


def sensitivity_layer(result: RunResult) -> pd.DataFrame:
    """The one-at-a-time table in the run's units, with the parameter in words."""
    table_ = present_frame(result.uncertainty.sensitivity, result.project.units)
    words = table_["parameter"].map({c: s.what for c, s in SPREADS.items()})
    return table_.assign(parameter=[parameter_name(str(v)) for v in table_["parameter"]],
                         parameter_description=words.to_numpy(dtype=object))


def ranges_layer(result: RunResult) -> pd.DataFrame:
    """Each draw: parameter, distribution, where its range came from."""
    draws = result.uncertainty.draws
    names = [parameter_name(str(v)) for v in draws["parameter"]]
    return draws.assign(
        draw=[f"{n}|{d.split('|', 1)[1]}" if "|" in d else n
              for n, d in zip(names, draws["draw"].astype(str), strict=True)],
        parameter=names)


def band_width_label(result: RunResult) -> str:
    """``"p90 - p10 runoff depth (mm)"`` for the run's percentiles and unit."""
    p = result.uncertainty.settings.percentiles
    return f"p{p[-1]:g} - p{p[0]:g} runoff depth ({result.project.units.depth})"


def bands_section(result: RunResult, images: list[tuple[str, bytes]], top: int) -> str:
    """The report section: what was sampled, how to read the band, the tables and figures."""
    unc = result.uncertainty
    if unc is None:
        return ("<p>No uncertainty runs: add an <code>[uncertainty]</code> table to the "
                "project file for runoff bands from the published parameter ranges.</p>")
    s = unc.settings
    pct = ", ".join(f"{p:g}" for p in s.percentiles)
    parts = [
        f'<p class="caution">{esc(BAND_CAUTION)}</p>',
        f"<p>{s.samples} parameter sets drawn by Latin hypercube (seed {s.seed}) from the "
        "ranges below and run through the same engine; each subcatchment's figures are the "
        f"{esc(pct)}th percentiles over the sets. Read a band as: with the loss parameters "
        f"anywhere in their published spread, the runoff lies between the p{s.percentiles[0]:g} "
        f"and p{s.percentiles[-1]:g} figures in {s.percentiles[-1] - s.percentiles[0]:g} % of "
        "the sets. The probability of ponding is the share of "
        f"sets in which the subcatchment ponds; the first-to-pond share is how often it is "
        f"among the first {s.top_k} to pond.</p>",
        "<h3>What was sampled</h3>",
        table(_draws(result), empty="Nothing: no part of the run has a parameter range."),
    ]
    for storm in result.storms:
        parts.append(f"<h3>{esc(storm.name)}</h3>")
        parts.append(f"<p>The run's first {s.top_k} to pond, and how often each stays among "
                     f"the first {s.top_k} over the parameter sets:</p>")
        parts.append(table(_first_rows(result, storm, s.top_k), left=1,
                           empty="No subcatchment ponds in the run."))
        parts.append(f"<p>The {top} widest bands:</p>")
        parts.append(table(_storm_rows(result, storm.name, top), left=1))
    parts += [image(png, caption) for caption, png in images]
    return "\n".join(parts)


def _draws(result: RunResult) -> pd.DataFrame:
    draws = result.uncertainty.draws
    return pd.DataFrame({
        "parameter": [SPREADS[c].what for c in draws["parameter"]],
        "applies to": [d.split("|", 1)[1] for d in draws["draw"]],
        "distribution": draws["distribution"].to_numpy(),
        "range from": draws["range_source"].to_numpy(),
    })


def _first_rows(result: RunResult, storm: StormResult, k: int) -> pd.DataFrame:
    """The run's own first ``k`` to pond, with ponding probability and first-to-pond share."""
    subs = storm.subcatchments.dropna(subset=["time_to_ponding_s"]).sort_values(
        "time_to_ponding_s", kind="stable").head(k)
    bands = result.uncertainty.bands
    bands = bands[bands["storm"] == storm.name].set_index("subcatchment_id")
    ids = subs["subcatchment_id"].to_numpy(dtype=object)
    frame = pd.DataFrame({
        "subcatchment_id": ids,
        "time_to_ponding_s": subs["time_to_ponding_s"].to_numpy(),
        "ponding_probability": bands["ponding_probability"].reindex(ids).to_numpy(),
        "first_to_pond_share": bands["first_to_pond_share"].reindex(ids).to_numpy(),
    })
    return display_frame(frame, result.project.units)


def _storm_rows(result: RunResult, storm: str, top: int) -> pd.DataFrame:
    """The widest bands of one storm, with ponding probability and first-to-pond share."""
    bands = result.uncertainty.bands
    rows = bands[bands["storm"] == storm].sort_values("runoff_depth_band_m", ascending=False,
                                                       kind="stable").head(top)
    keep = [c for c in rows.columns if c.startswith("runoff_depth_p")]
    keep += ["runoff_depth_band_m", "ponding_probability", "first_to_pond_share",
             "most_influential_parameter"]
    shown = display_frame(rows[["subcatchment_id", *keep]].reset_index(drop=True),
                          result.project.units)
    lead = header("most_influential_parameter")
    shown[lead] = [SPREADS[c].what if c in SPREADS else "-" for c in
                   rows["most_influential_parameter"].fillna("")]
    return shown

