"""The report's lumping section: how far area-weighted parameters miss gisrun's runoff.

Compute only: returns HTML text for :mod:`gisrun.present.report`. Per
subcatchment, the storm where the area-weighted lumped set (one pervious unit
beside the impervious share, parameters averaged by area) is furthest from
gisrun's per-unit runoff, largest difference first, with the fitted set's
root-mean-square difference over all storms beside it.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..model import RunResult
from .display import display_frame
from .html import table

__all__ = ["lumping_section", "lumping_differences"]

_ALL_STORMS = "all storms"
_SET_ROW = "impervious_fraction"  # one row per set: the runoff columns repeat on every row

def lumping_differences(result: RunResult) -> pd.DataFrame:
    """Per subcatchment, the area-weighted set's largest difference (SI), largest first.

    Columns ``subcatchment_id``, ``loss_method``, ``storm``, ``runoff_depth_m``,
    ``lumped_runoff_depth_m``, ``lumped_difference_m``, ``relative_difference``
    and, when the run fitted a set, ``fitted_rms_difference_m``.
    """
    table = result.lumped_parameters
    if table.empty:
        return pd.DataFrame()
    sets = table[table["parameter"].astype(str) == _SET_ROW]
    storm = sets["storm"].astype(str)
    aw = sets[(sets["basis"].astype(str) == "area_weighted") & (storm != _ALL_STORMS)]
    aw = aw.assign(size=aw["lumped_difference_m"].abs())
    worst = aw.sort_values("size", ascending=False, kind="stable").drop_duplicates(
        "subcatchment_id")
    out = worst[["subcatchment_id", "loss_method", "storm", "runoff_depth_m",
                 "lumped_runoff_depth_m", "lumped_difference_m"]].astype(
        {"loss_method": str, "storm": str})
    depth = out["runoff_depth_m"].to_numpy(float)
    out["relative_difference"] = np.divide(out["lumped_difference_m"].to_numpy(float), depth,
                                           out=np.full(len(out), np.nan), where=depth > 0)
    fitted = sets[(sets["basis"].astype(str) == "fitted") & (storm == _ALL_STORMS)]
    if len(fitted):
        rms = fitted.set_index("subcatchment_id")["lumped_difference_m"]
        out["fitted_rms_difference_m"] = rms.reindex(out["subcatchment_id"]).to_numpy()
    return out.reset_index(drop=True)

def lumping_section(result: RunResult, top: int) -> str:
    """HTML of the lumping section: the first ``top`` rows of :func:`lumping_differences`."""
    frame = lumping_differences(result)
    if frame.empty:
        return ("<p>No lumped parameters were made for this run (<code>[method] "
                "lumped_parameters = \"off\"</code>, or units combined as a composite).</p>")
    shown = display_frame(frame.head(top), result.project.units)
    text = (f"<p>Running each subcatchment as one pervious unit with area-weighted parameters "
            f"beside its impervious share, against gisrun's per-unit runoff: the storm where "
            f"the difference (lumped minus gisrun) is largest, largest first (top {top} of "
            f"{len(frame)}). The equivalent and fitted sets that remove it are in the "
            "GeoPackage layer <code>lumped_parameters</code> and the "
            "<code>lumped_&lt;method&gt;.csv</code> files.</p>")
    return text + table(shown)
