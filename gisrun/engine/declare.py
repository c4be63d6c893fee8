"""How a loss method declares its parameters: one :class:`Parameter` per SI column.

Every method module lists its parameters in ``PARAMETERS``. Everything that
knows about parameters is derived from those declarations: the columns the
engine reads and their ranges (:meth:`Parameter.read`), the override columns
and their unit aliases (:mod:`gisrun.parameters.overrides`), the range check of
override values, the composite weighting (:mod:`gisrun.parameters.composite`),
the shipped defaults (:mod:`gisrun.parameters.defaults`, by ``default``) and
the model-input columns (``MODEL_INPUTS`` of each method,
:mod:`gisrun.present.model_inputs`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import pandas as pd

from .base import FloatArray, read_column

__all__ = ["Parameter", "DEPRESSION_STORAGE", "Weighting"]

#: How a parameter is averaged over a subcatchment's parts in a composite:
#: ``"area"``: area-weighted arithmetic mean over the whole subcatchment (impervious parts at
#: their own value); ``"pervious_area"``: arithmetic mean weighted by pervious area only.
Weighting = Literal["area", "pervious_area"]
#: SI units a parameter may have; the override unit aliases follow from it.
Unit = Literal["m/s", "m", "1/s", "-"]


@dataclass(frozen=True)
class Parameter:
    """One SI parameter column of the unit parameter frame, as a method declares it.

    Attributes
    ----------
    column : str
        SI column name (``"ks_m_per_s"``).
    unit : {"m/s", "m", "1/s", "-"}
        Its SI unit; override columns may give it in the published units of that kind.
    low, high : float
        Allowed range, inclusive (``low`` exclusive when ``low_open``).
    positive_when_pervious : bool
        Must also be greater than 0 on a pervious surface (checked on overrides).
    allowed : tuple of float
        When not empty, the only values allowed (a run option such as Ia/S).
    composite : {"area", "pervious_area"}
        How it is area-weighted in a composite (see :data:`Weighting`).
    default : str
        Key of the rule giving its shipped value (:data:`gisrun.parameters.defaults.RULES`).
    impervious : float or str
        Its value on impervious parts, or the key of a rule giving it.
    missing : float, optional
        Value the engine uses when the column is absent or a cell empty.
    in_frame : bool
        A column of the unit parameter frame (False for soil properties that
        only feed another parameter, e.g. the porosities).
    overridable : bool
        Accepted as an override column.
    """

    column: str
    unit: Unit
    default: str
    low: float = 0.0
    high: float = math.inf
    low_open: bool = False
    positive_when_pervious: bool = False
    allowed: tuple[float, ...] = ()
    composite: Weighting = "area"
    impervious: float | str = 0.0
    missing: float | None = None
    in_frame: bool = True
    overridable: bool = True

    def read(self, frame: pd.DataFrame) -> FloatArray:
        """The column from the unit parameter frame as float64, range-checked.

        Raises
        ------
        ParameterError
            Missing column (without ``missing``), not a number, or out of range.
        """
        return read_column(frame, self.column, default=self.missing, low=self.low,
                           high=None if math.isinf(self.high) else self.high,
                           low_open=self.low_open)

    def allowed_text(self) -> str:
        """The allowed values in words, for messages."""
        if self.allowed:
            return "one of " + ", ".join(f"{a:g}" for a in self.allowed)
        if math.isinf(self.high):
            text = (f"greater than {self.low:g}" if self.low_open else
                    "not negative" if self.low == 0 else f"at least {self.low:g}")
        elif self.low_open:
            text = f"greater than {self.low:g} and at most {self.high:g}"
        else:
            text = f"between {self.low:g} and {self.high:g}"
        if self.positive_when_pervious:
            text += ", and greater than 0 on a pervious surface"
        return text


#: Surface storage filled before runoff; shared by every method that holds water on the surface.
DEPRESSION_STORAGE = Parameter(
    "depression_storage_m", "m", default="cover_depression_storage",
    impervious="impervious_depression_storage")
