"""Read the project file's ``[uncertainty]`` table into :class:`UncertaintySettings`.

::

    [uncertainty]
    samples = 100                # parameter sets drawn (Latin hypercube), 2 or more
    seed = 20261203              # the same seed gives the same bands
    percentiles = [10, 50, 90]   # the band's percentiles, ascending, in (0, 100)
    top_k = 10                   # length of the ponding-first list whose stability is counted
    sensitivity_subcatchments = ["KV-003"]   # tornado figures for these (else the largest)

Absent table: no uncertainty runs.
"""

from __future__ import annotations

from typing import Any

from ..errors import ProjectFileError
from ..project import UncertaintySettings
from .reader import TableReader

__all__ = ["UNCERTAINTY_KEYS", "uncertainty_settings", "MAX_SAMPLES"]

#: Keys of ``[uncertainty]``.
UNCERTAINTY_KEYS = ("samples", "seed", "percentiles", "top_k", "sensitivity_subcatchments")
#: Most samples a run may ask for (each is an engine run over the distinct unit parts).
MAX_SAMPLES = 100_000


def uncertainty_settings(table: TableReader, *, present: bool, combine: str
                         ) -> UncertaintySettings | None:
    """The settings, or None when the project has no ``[uncertainty]`` table.

    Raises
    ------
    ProjectFileError
        A key of the wrong type or out of range, percentiles not ascending, or
        uncertainty asked for with ``[method] combine = "composite"``.
    """
    if not present:
        return None
    if combine != "units":
        table.fail(None, "needs [method] combine = \"units\" (the published ranges belong to "
                   "each soil's parts, not to a subcatchment's composite)",
                   "remove [uncertainty] or set combine = \"units\"")
    samples = table.number("samples", low=2, high=MAX_SAMPLES)
    seed = table.number("seed", default=0, low=0, high=2**32 - 1)
    top_k = table.number("top_k", default=10, low=1, high=1_000_000)
    for key, value in (("samples", samples), ("seed", seed), ("top_k", top_k)):
        if value != int(value):
            table.fail(key, f"is {value!r}", "give a whole number")
    return UncertaintySettings(
        samples=int(samples), seed=int(seed), percentiles=_percentiles(table),
        top_k=int(top_k), sensitivity_subcatchments=_ids(table))


def _percentiles(table: TableReader) -> tuple[float, ...]:
    value: Any = table.data.get("percentiles", [10, 50, 90])
    numbers = isinstance(value, list) and value and all(
        isinstance(v, int | float) and not isinstance(v, bool) for v in value)
    if not numbers or not all(0 < v < 100 for v in value):
        table.fail("percentiles", f"must be a list of numbers between 0 and 100, got {value!r}",
                   "write e.g. percentiles = [10, 50, 90]")
    if any(b <= a for a, b in zip(value, value[1:], strict=False)):
        table.fail("percentiles", f"{value!r} are not in ascending order",
                   "list each percentile once, smallest first")
    return tuple(float(v) for v in value)


def _ids(table: TableReader) -> tuple[str, ...]:
    value = table.data.get("sensitivity_subcatchments", [])
    if not isinstance(value, list) or not all(isinstance(v, str | int) for v in value):
        raise ProjectFileError(table.where("sensitivity_subcatchments"),
                               f"must be a list of subcatchment ids, got {value!r}",
                               'write e.g. sensitivity_subcatchments = ["S1", "S2"]')
    return tuple(str(v) for v in value)
