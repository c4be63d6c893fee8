"""One internal unit system (SI) and the conversions at the edges.

Inside gisrun every depth is in metres, every time in seconds, every rate in
metres per second and every area in square metres. Values that come in or go
out are converted here and nowhere else. Column names carry their unit as a
suffix (``runoff_depth_mm``, ``time_to_ponding_min``).

Examples
--------
>>> round(to_si(25.4, "mm"), 6)
0.0254
>>> from_si(0.0254, "in")
1.0
>>> unit_system("us").depth
'in'
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike, NDArray

from .errors import InputError
from .units_kernels import DECIMAL_EXPONENT_FLOOR, POWERS_AROUND, round_to_digits

__all__ = [
    "FACTORS_TO_SI",
    "UnitSystem",
    "SI",
    "US",
    "to_si",
    "from_si",
    "unit_system",
    "column",
    "present_frame",
    "si_frame",
    "round_significant",
    "SIGNIFICANT_DIGITS",
    "COORDINATE_LENGTHS_M",
    "coordinate_length_m",
    "RainUnit",
    "rain_unit",
]

#: Multiply a value in the named unit by this factor to get SI.
#: Exact by definition: 1 in = 0.0254 m, 1 ft = 0.3048 m (international yard
#: and pound agreement, 1959); 1 acre = 43,560 ft^2; 1 mile = 5,280 ft.
FACTORS_TO_SI: dict[str, float] = {
    # length / depth -> m
    "m": 1.0,
    "cm": 1e-2,
    "mm": 1e-3,
    "in": 0.0254,
    "ft": 0.3048,
    # time -> s
    "s": 1.0,
    "min": 60.0,
    "h": 3600.0,
    "d": 86400.0,
    # frequency (decay and recovery constants) -> 1/s
    "per_s": 1.0,
    "per_min": 1 / 60.0,
    "per_h": 1 / 3600.0,
    "per_day": 1 / 86400.0,
    # rate -> m/s
    "m_per_s": 1.0,
    "mm_per_h": 1e-3 / 3600.0,
    "cm_per_h": 1e-2 / 3600.0,
    "in_per_h": 0.0254 / 3600.0,
    "um_per_s": 1e-6,
    # area -> m2
    "m2": 1.0,
    "ha": 1e4,
    "km2": 1e6,
    "mi2": (5280 * 0.3048) ** 2,
    "ft2": 0.3048**2,
    "acre": 43560.0 * 0.3048**2,
    # volume -> m3
    "m3": 1.0,
    "ft3": 0.3048**3,
    "acre_ft": 43560.0 * 0.3048**3,
}


def to_si(value: ArrayLike, unit: str) -> NDArray[np.float64] | float:
    """Convert a value from ``unit`` to SI (m, s, m/s, m2, m3).

    Parameters
    ----------
    value : array_like
        Value(s) in ``unit``.
    unit : str
        A key of :data:`FACTORS_TO_SI` (``"mm"``, ``"in_per_h"``, ...).

    Returns
    -------
    float or ndarray
        The value in SI.

    Raises
    ------
    InputError
        If ``unit`` is not known.
    """
    factor = _factor(unit)
    arr = np.asarray(value, dtype=np.float64) * factor
    return float(arr) if arr.ndim == 0 else arr


def from_si(value: ArrayLike, unit: str) -> NDArray[np.float64] | float:
    """Convert a value in SI to ``unit``; the inverse of :func:`to_si`."""
    factor = _factor(unit)
    arr = np.asarray(value, dtype=np.float64) / factor
    return float(arr) if arr.ndim == 0 else arr


def _factor(unit: str) -> float:
    try:
        return FACTORS_TO_SI[unit]
    except KeyError:
        raise InputError(
            f"unit {unit!r}", "is not a known unit", f"use one of {sorted(FACTORS_TO_SI)}"
        ) from None


@dataclass(frozen=True)
class UnitSystem:
    """The units a user reads and writes in; names double as column suffixes."""

    name: str
    depth: str
    rate: str
    area: str
    volume: str
    time: str = "min"


SI = UnitSystem("si", depth="mm", rate="mm_per_h", area="m2", volume="m3")
US = UnitSystem("us", depth="in", rate="in_per_h", area="acre", volume="ft3")
#: The unit systems, by name: the one list of them.
SYSTEMS: dict[str, UnitSystem] = {system.name: system for system in (SI, US)}


def unit_system(name: str) -> UnitSystem:
    """Return the unit system called ``name`` (``"si"`` or ``"us"``).

    Raises
    ------
    InputError
        If the name is neither.
    """
    try:
        return SYSTEMS[name.strip().lower()]
    except (KeyError, AttributeError):
        raise InputError(
            f"units {name!r}", "is not a unit system", f"use one of {sorted(SYSTEMS)}"
        ) from None


def column(quantity: str, unit: str) -> str:
    """Name a column with its unit: ``column("runoff_depth", "mm")`` -> ``runoff_depth_mm``."""
    return f"{quantity}_{unit}"


#: Significant digits of every presented number (output layers, CSVs, report tables).
#: Inside, values stay unrounded SI; only :func:`present_frame` rounds.
SIGNIFICANT_DIGITS = 6

#: SI column suffixes and the unit-system attribute they convert to, longest first; a
#: ``(per_...)`` name is a fixed unit: decay and recovery constants are entered and shown per
#: hour in both systems.
_SUFFIXES: tuple[tuple[str, str], ...] = (
    ("_m_per_s", "rate"),
    ("_per_s", "(per_h)"),
    ("_m2", "area"),
    ("_m3", "volume"),
    ("_m", "depth"),
    ("_s", "time"),
)


def _unit_of(system: UnitSystem, kind: str) -> str:
    return kind.strip("()") if kind.startswith("(") else getattr(system, kind)


with np.errstate(over="ignore"):  # 10 ** k as numpy computes it (inf above 1e308)
    #: 10 ** k for k = 0 ... 400, the powers :func:`round_significant` scales by.
    _POWERS_OF_TEN = 10.0 ** np.arange(0, 401, dtype=np.int64)


def round_significant(values: ArrayLike, digits: int = SIGNIFICANT_DIGITS
                      ) -> NDArray[np.float64]:
    """Round to ``digits`` significant digits; NaN, inf and 0 stay as they are.

    Float noise from unit conversion and summing goes (``0.19999999999999998`` -> ``0.2``).
    One compiled pass (:func:`gisrun.units_kernels.round_to_digits`); returns a new array.

    Examples
    --------
    >>> round_significant([0.19999999999999998, 11.99891012472315, 48557.86650003627]).tolist()
    [0.2, 11.9989, 48557.9]
    """
    x = np.ascontiguousarray(values, dtype=np.float64)
    return round_to_digits(x.reshape(-1), digits, _POWERS_OF_TEN, DECIMAL_EXPONENT_FLOOR,
                           POWERS_AROUND).reshape(x.shape)


def present_frame(frame: pd.DataFrame, system: UnitSystem) -> pd.DataFrame:
    """Convert SI columns of a result frame to ``system``, renaming their suffixes.

    Columns ending in ``_m_per_s``, ``_per_s``, ``_m2``, ``_m3``, ``_m`` or ``_s`` are
    taken as SI rates, frequencies (decay and recovery constants, shown per hour), areas,
    volumes, depths and times; other columns keep their names. Every float column is then
    rounded to :data:`SIGNIFICANT_DIGITS` significant digits (:func:`round_significant`).

    Examples
    --------
    >>> import pandas as pd
    >>> present_frame(pd.DataFrame({"runoff_depth_m": [0.0254], "time_to_ponding_s": [600.0],
    ...                             "decay_per_s": [0.00115], "share": [0.19999999999999998]}),
    ...               US).to_dict("list")
    {'runoff_depth_in': [1.0], 'time_to_ponding_min': [10.0], 'decay_per_h': [4.14], \
'share': [0.2]}
    """
    endings = [(suffix, f"_{_unit_of(system, kind)}", _unit_of(system, kind))
               for suffix, kind in _SUFFIXES]
    columns: dict[Any, Any] = {}
    for name in frame.columns:
        new_name, unit = _renamed(name, endings)
        if unit is not None:
            columns[new_name] = round_significant(
                from_si(frame[name].to_numpy(dtype=np.float64), unit))
        elif frame[name].dtype == np.float64:
            columns[new_name] = round_significant(frame[name].to_numpy())
        else:
            columns[new_name] = frame[name]
    if len(columns) < frame.shape[1]:  # two names became one: keep both, as renaming does
        out = _convert_columns(frame, endings, from_si)
        return out.assign(**{n: round_significant(out[n].to_numpy())
                             for n in out.columns if out[n].dtype == np.float64})
    # Each column made once and taken as it is (no copy of the frame, then of each column).
    return pd.DataFrame(columns, index=frame.index, copy=False)


def si_frame(frame: pd.DataFrame, system: UnitSystem) -> pd.DataFrame:
    """Undo :func:`present_frame`: columns in ``system`` units back to SI names and values.

    Examples
    --------
    >>> import pandas as pd
    >>> si_frame(pd.DataFrame({"runoff_depth_in": [1.0], "time_to_ponding_min": [10.0]}),
    ...          US).to_dict("list")
    {'runoff_depth_m': [0.0254], 'time_to_ponding_s': [600.0]}
    """
    endings = sorted(((f"_{_unit_of(system, kind)}", suffix, _unit_of(system, kind))
                      for suffix, kind in _SUFFIXES), key=lambda t: -len(t[0]))
    return _convert_columns(frame, endings, to_si)


def _renamed(name: object, endings: list[tuple[str, str, str]]) -> tuple[object, str | None]:
    """(new name, unit) of a column by the first ending it matches; (name, None) if none."""
    for ending, new_ending, unit in endings:
        if isinstance(name, str) and name.endswith(ending):
            return name[: -len(ending)] + new_ending, unit
    return name, None


def _convert_columns(frame: pd.DataFrame, endings: list[tuple[str, str, str]],
                     convert: Callable[..., Any]) -> pd.DataFrame:
    """Convert and rename the columns whose name ends in one of ``endings`` (first match wins).

    ``endings`` holds (ending, new ending, unit).
    """
    out = frame.copy()
    renames = {}
    for name in frame.columns:
        for ending, new_ending, unit in endings:
            if isinstance(name, str) and name.endswith(ending):
                out[name] = convert(frame[name].to_numpy(dtype=np.float64), unit)
                renames[name] = name[: -len(ending)] + new_ending
                break
    return out.rename(columns=renames)


#: Unit names as rain products write them (CF/UDUNITS symbols and words) -> (factor to SI,
#: power of length, power of time). A kilogram of rain water per square metre is a millimetre of
#: depth: 1 kg counts as 0.001 m3 (water at 1000 kg/m3; the CF ``precipitation_amount`` in
#: ``kg m-2``; common practice).
_WRITTEN: dict[str, tuple[float, int, int]] = {
    **dict.fromkeys(("m", "meter", "meters", "metre", "metres"), (1.0, 1, 0)),
    **dict.fromkeys(("cm", "centimeter", "centimeters", "centimetre", "centimetres"),
                    (1e-2, 1, 0)),
    **dict.fromkeys(("mm", "millimeter", "millimeters", "millimetre", "millimetres"),
                    (1e-3, 1, 0)),
    **dict.fromkeys(("in", "inch", "inches"), (0.0254, 1, 0)),
    "kg": (1e-3, 3, 0),
    **dict.fromkeys(("s", "sec", "second", "seconds"), (1.0, 0, 1)),
    **dict.fromkeys(("min", "minute", "minutes"), (60.0, 0, 1)),
    **dict.fromkeys(("h", "hr", "hour", "hours"), (3600.0, 0, 1)),
    **dict.fromkeys(("d", "day", "days"), (86400.0, 0, 1)),
}
_TOKEN = re.compile(r"^([a-z]+)(-?[0-9]+)?$")


@dataclass(frozen=True)
class RainUnit:
    """A rain unit read from text: a depth (to m) or an intensity (to m/s)."""

    text: str
    kind: str  # "depth" or "intensity"
    factor: float  # multiply a value in this unit by it for m or m/s


def rain_unit(text: str, where: str) -> RainUnit:
    """Read a rain unit as a file or a project file writes it.

    Symbols and words of length (``m``, ``mm``, ``in``, ``kg`` of water over an area) and time
    (``s``, ``min``, ``h``, ``d``), with powers written as in CF/UDUNITS (``kg m-2 s-1``,
    ``m**-2``, ``m^-2``) and ``/`` for division (``mm/h``).

    Raises
    ------
    InputError
        Naming ``where`` when the text is not a depth or a depth per time.

    Examples
    --------
    >>> rain_unit("kg m-2", "rain.nc").kind, rain_unit("kg m-2", "rain.nc").factor
    ('depth', 0.001)
    >>> u = rain_unit("mm h-1", "rain.nc"); u.kind, u.factor == 1e-3 / 3600
    ('intensity', True)
    >>> rain_unit("mm/hr", "rain.nc").factor == rain_unit("mm hr-1", "rain.nc").factor
    True
    """
    factor, length, time = 1.0, 0, 0
    clean = str(text).strip().lower().replace("**", "").replace("^", "")
    for i, part in enumerate(clean.split("/")):
        for token in re.split(r"[\s*.·]+", part.strip()):
            match = _TOKEN.match(token) if token else None
            if match is None or match.group(1) not in _WRITTEN:
                raise InputError(where, f"rain unit {text!r} is not understood",
                                 "write a depth such as 'mm' or 'kg m-2', or an intensity such "
                                 "as 'mm/h' or 'mm h-1'")
            power = int(match.group(2) or 1) * (-1 if i > 0 else 1)
            f, lp, tp = _WRITTEN[match.group(1)]
            factor, length, time = factor * f**power, length + lp * power, time + tp * power
    if length == 1 and time in (0, -1):
        return RainUnit(str(text), "depth" if time == 0 else "intensity", factor)
    raise InputError(where, f"rain unit {text!r} is neither a depth nor a depth per time",
                     "write a depth such as 'mm' or an intensity such as 'mm/h'")


#: Metres in one unit of a projected coordinate as CF/UDUNITS files write it: the spellings of
#: :data:`FACTORS_TO_SI`'s metre and (international) foot, the kilometre, and the US survey
#: foot (1200/3937 m by its definition).
COORDINATE_LENGTHS_M: dict[str, float] = {
    **dict.fromkeys(("m", "meter", "meters", "metre", "metres"), FACTORS_TO_SI["m"]),
    **dict.fromkeys(("km", "kilometer", "kilometers", "kilometre", "kilometres"),
                    1000.0 * FACTORS_TO_SI["m"]),
    **dict.fromkeys(("ft", "foot", "feet", "international_foot"), FACTORS_TO_SI["ft"]),
    **dict.fromkeys(("us_survey_foot", "us_survey_feet", "us survey foot", "ftus", "ft_us"),
                    1200.0 / 3937.0),
}


def coordinate_length_m(text: object) -> float | None:
    """Metres in one unit of a projected coordinate written ``text`` (``"km"``), or None.

    >>> coordinate_length_m("km"), coordinate_length_m("degrees_east")
    (1000.0, None)
    """
    return COORDINATE_LENGTHS_M.get(str(text).strip().lower()) if text is not None else None
