"""How a loss method declares its parameters: one :class:`Parameter` per SI column.

Every method module lists its parameters in ``PARAMETERS``. Everything that
knows about parameters is derived from those declarations: the columns the
engine reads and their ranges (:meth:`Parameter.read`), the override columns
and their unit aliases (:mod:`gisrun.parameters.overrides`), the range check of
override values, the composite weighting (:mod:`gisrun.parameters.composite`),
the shipped defaults (:mod:`gisrun.parameters.defaults`, by ``default``) and
the lumped parameters handed on to other models (:mod:`gisrun.parameters.equivalent`:
which parameter is solved for, its bounds, the rows of the ``lumped_parameters``
table and the columns of its per-method CSV files, in declaration order).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from ..errors import ParameterError

__all__ = ["Parameter", "DEPRESSION_STORAGE", "Weighting", "read_column", "PARAMETER_FRAME"]

#: The name used for the unit parameter frame in error messages.
PARAMETER_FRAME = "unit parameters"

FloatArray = NDArray[np.float64]

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
    equivalent : bool
        The one parameter of its method solved for when a subcatchment is lumped
        into one pervious unit beside its impervious share (its *equivalent*
        value); the method's other parameters keep their area-weighted values.
    at_most : str, optional
        Column of the same unit whose value bounds this one from above (Horton
        ``fc <= f0``); the search for an equivalent value stays below it, and
        a search of that column stays above this one's value.
    then_lower : str, optional
        Column of the same method lowered next when no value of this one gives a
        lumped set enough runoff (at its lowest it still gives too little, or the
        runoff jumps past the target at a value): this one is held where its
        runoff falls short and the next is searched below its area-weighted
        value (constant loss: rate, then initial loss, then depression storage).
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
    equivalent: bool = False
    at_most: str | None = None
    then_lower: str | None = None

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


def read_column(
    frame: pd.DataFrame,
    name: str,
    *,
    default: float | None = None,
    low: float | None = None,
    high: float | None = None,
    low_open: bool = False,
) -> FloatArray:
    """Read one SI parameter column as float64 and check its range.

    Parameters
    ----------
    frame : DataFrame
        The unit parameter frame.
    name : str
        Column name (``"ks_m_per_s"``).
    default : float, optional
        Value used when the column is absent or a cell is empty; without it a
        missing column or empty cell is an error.
    low, high : float, optional
        Allowed range (inclusive; ``low`` exclusive when ``low_open``).

    Returns
    -------
    ndarray of float64, shape (len(frame),)

    Raises
    ------
    ParameterError
        Missing column, non-numeric, empty or out-of-range value (names the
        column, row and value).
    """
    if name not in frame.columns:
        if default is None:
            raise ParameterError(f"{PARAMETER_FRAME}:{name}", "column is missing",
                                 "add the column (SI units) or choose another loss method")
        return np.full(len(frame), float(default))
    try:
        values = pd.to_numeric(frame[name], errors="raise").to_numpy(dtype=np.float64, copy=True)
    except (ValueError, TypeError):
        raise ParameterError(f"{PARAMETER_FRAME}:{name}", "holds values that are not numbers",
                             "give numbers in SI units") from None
    if default is not None:
        values[np.isnan(values)] = default
    bad = ~np.isfinite(values)
    if low is not None:
        bad |= (values <= low) if low_open else (values < low)
    if high is not None:
        bad |= values > high
    if bad.any():
        pos = int(np.flatnonzero(bad)[0])
        limits = _describe_range(low, high, low_open)
        raise ParameterError(f"{PARAMETER_FRAME}:{name}:row {frame.index[pos]!r}",
                             f"value {float(values[pos])!r} is empty or outside {limits}",
                             "correct the value or its parameter table entry")
    return values


def _describe_range(low: float | None, high: float | None, low_open: bool) -> str:
    lo = "(-inf" if low is None else ("(" if low_open else "[") + repr(low)
    hi = "inf)" if high is None else repr(high) + "]"
    return f"{lo}, {hi}"
