"""How a design storm's areal reduction is shown: one line of words, and a column per storm.

Areal reduction gives planning-level estimates only; defer to local codes, agency methods and a
licensed engineer.
"""

from __future__ import annotations

import pandas as pd

from ..storm import RELATIONS, AppliedReduction
from ..units import US, UnitSystem, from_si

__all__ = ["reduction_line", "reduction_column", "FACTOR_COLUMN"]

#: The column of each storm's subcatchment results holding the factor applied to its rain.
FACTOR_COLUMN = "areal_reduction_factor"


def _range(low: float, high: float, digits: int = 4) -> str:
    low_text, high_text = f"{low:.{digits}g}", f"{high:.{digits}g}"
    return low_text if low_text == high_text else f"{low_text}-{high_text}"


def reduction_line(name: str, applied: AppliedReduction, system: UnitSystem,
                   *, source: bool = True) -> str:
    """One line on a storm's areal reduction: factors, relation, area, AEP, duration, source.

    Areas are shown in km2 (mi2 in US customary units).
    """
    unit = "mi2" if system == US else "km2"
    area = from_si(applied.area_m2, unit)
    whose = ("each subcatchment's own area" if applied.over == "subcatchment"
             else "the whole subcatchment layer's area")
    where = (f"at {whose}, {_range(area.min(), area.max())} {unit}"
             if RELATIONS[applied.relation].by_area else "the same everywhere")
    aep = ("" if applied.annual_exceedance_probability is None
           else f", AEP {applied.annual_exceedance_probability:g}")
    text = (f"{name}: areal reduction factor {_range(applied.factor.min(), applied.factor.max())} "
            f"({applied.relation}, {where}{aep}, duration {applied.duration_s / 60:g} min)")
    return f"{text}; source: {applied.source}" if source else text


def reduction_column(applied: AppliedReduction | None, ids: pd.Series) -> pd.Series | None:
    """Each subcatchment's factor in the order of ``ids`` (None when the storm was not reduced).

    Raises
    ------
    KeyError
        An id the reduction has no factor for (the storm was reduced for another layer).
    """
    if applied is None:
        return None
    factors = pd.Series(applied.factor, index=list(applied.subcatchment_ids))
    return pd.Series(factors.loc[ids.astype(str).to_numpy()].to_numpy(), index=ids.index,
                     name=FACTOR_COLUMN)
