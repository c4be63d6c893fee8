"""Area-weighted composite parameters: one row per subcatchment.

Used for ``[method] combine = "composite"``: each subcatchment is run as one
unit with parameters averaged over its soil x cover parts.

Weighting rules
---------------
Each method module declares how each of its parameters is weighted
(``Parameter.composite``, :mod:`gisrun.engine.declare`); today:

Curve number
    Area-weighted arithmetic mean over the whole subcatchment, impervious parts
    at 98 (TR-55 1986, ch. 2, composite curve number; note that TR-55 averages
    curve numbers, not runoff, which understates runoff from mixed areas at small
    depths).
Conductivity and every rate (``ks_m_per_s``, Horton ``f0`` and ``fc``,
constant-loss rate, phi-index)
    Area-weighted arithmetic mean over the whole subcatchment, impervious parts
    counting as 0. This keeps the area-mean infiltration capacity once every
    part is ponded (common practice, gisrun's choice; a geometric mean, used for
    the spread of conductivity within one soil, would be 0 with any impervious
    part).
Suction head, moisture deficit, Horton decay and recovery constants
    Arithmetic mean weighted by pervious area only: they describe the soil, and
    impervious parts have none (gisrun's choice). 0 when nothing is pervious.
Depths (depression storage, initial loss) and ``initial_abstraction_ratio``
    Area-weighted arithmetic mean over the whole subcatchment (keeps the
    stored volume).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..engine import PARAMETERS
from ..errors import ParameterError
from .overrides import PARAMETER_COLUMNS

__all__ = ["composite_parameters", "PERVIOUS_AREA_WEIGHTED"]

#: Columns weighted by pervious area only (declared ``composite="pervious_area"``).
PERVIOUS_AREA_WEIGHTED: tuple[str, ...] = tuple(
    c for c in PARAMETER_COLUMNS if PARAMETERS[c].composite == "pervious_area")


def composite_parameters(unit_params: pd.DataFrame) -> pd.DataFrame:
    """Average unit parameters to one row per subcatchment.

    Parameters
    ----------
    unit_params : DataFrame
        The ``params`` frame of :func:`gisrun.parameters.assign_parameters`.

    Returns
    -------
    DataFrame
        ``subcatchment_id``, ``soil_class``/``cover_class``/``surface`` set to
        ``"composite"``, ``area_m2`` (m2), ``impervious_fraction`` (-), every SI
        parameter column, ``loss_method`` and ``antecedent_condition``; in the
        order subcatchments first appear.

    Raises
    ------
    ParameterError
        If the parts of one subcatchment have different loss methods.

    Examples
    --------
    >>> df = pd.DataFrame({"subcatchment_id": ["S", "S"], "surface": ["pervious", "impervious"],
    ...                    "area_m2": [3.0, 1.0], "curve_number": [74.0, 98.0]})
    >>> float(composite_parameters(df)["curve_number"].iloc[0])
    80.0
    """
    groups = unit_params.groupby("subcatchment_id", sort=False)
    rows = [_one(sid, part) for sid, part in groups]
    return pd.DataFrame(rows).reset_index(drop=True)


def _one(sid: object, part: pd.DataFrame) -> dict[str, object]:
    area = part["area_m2"].to_numpy(float)
    total = area.sum()
    perv_area = np.where(part["surface"].to_numpy() == "pervious", area, 0.0)
    row: dict[str, object] = {
        "subcatchment_id": sid, "soil_class": "composite", "cover_class": "composite",
        "surface": "composite", "area_m2": total,
        "impervious_fraction": 1.0 - perv_area.sum() / total if total > 0 else 0.0,
    }
    for col in PARAMETER_COLUMNS:
        if col not in part.columns:
            continue
        weights = perv_area if col in PERVIOUS_AREA_WEIGHTED else area
        values = part[col].to_numpy(float)
        row[col] = float(np.dot(weights, values) / weights.sum()) if weights.sum() > 0 else 0.0
    for col in ("loss_method", "antecedent_condition"):
        if col in part.columns:
            distinct = part[col].unique()
            if len(distinct) > 1:
                raise ParameterError(
                    f"subcatchment {sid}",
                    f"its parts have different {col} values {list(distinct)}",
                    "give the subcatchment one loss method or use combine = 'units'")
            row[col] = distinct[0]
    return row
