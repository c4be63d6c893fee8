"""The project file's ``[impervious]`` table -> :class:`~gisrun.project.ImperviousSource`.

::

    [impervious]
    path = "impervious_percent.tif"   # optional: an impervious-share grid
    scale = "percent"                 # required with path: "percent" (0-100) or "fraction"
    crs = "EPSG:32633"                # optional: the grid's CRS when the file has none
    disconnected_fraction = 0.3       # optional, project-wide share of impervious area
    disconnected_field = "roof_share" # optional, per subcatchment (blank: the next source)
    runon_to = "unit"                 # or "subcatchment"
    compare_connected = true          # also run with every impervious area connected

    [impervious.disconnected_by_cover]
    residential_quarter_acre = 0.5

A subcatchment's field ranks above the cover class, which ranks above the project-wide share.
"""

from __future__ import annotations

from ..errors import ProjectFileError
from ..options import IMPERVIOUS_SCALES, RUNON_TARGETS
from ..parameters.soils import check_cover_labels
from ..project import ImperviousSource
from .reader import TableReader

__all__ = ["IMPERVIOUS_KEYS", "read_impervious", "check_impervious_combination"]

#: Keys of the ``[impervious]`` table.
IMPERVIOUS_KEYS = ("path", "scale", "crs", "disconnected_fraction", "disconnected_field",
                   "disconnected_by_cover", "runon_to", "compare_connected")


def read_impervious(table: TableReader, *, present: bool) -> ImperviousSource | None:
    """The checked ``[impervious]`` table, or None when the project has none.

    Raises
    ------
    ProjectFileError
        A grid without its scale (or a scale without a grid), a share outside 0-1, a cover
        class the tables do not know, an unknown run-on target, or a table that says nothing.
    """
    if not present:
        return None
    path = table.path("path", required=False)
    if path is not None and "scale" not in table.data:
        table.fail("scale", "is missing", 'say what the grid holds: scale = "percent" (0-100) '
                   'or "fraction" (0-1)')
    if path is None and "scale" in table.data:
        table.fail("scale", "is given without an impervious grid", "add path = ... or remove it")
    source = ImperviousSource(
        path=path,
        scale=table.choice("scale", IMPERVIOUS_SCALES) if path is not None else None,
        crs=table.string("crs", required=False),
        disconnected_fraction=(table.number("disconnected_fraction", low=0.0, high=1.0)
                               if "disconnected_fraction" in table.data else None),
        disconnected_field=table.string("disconnected_field", required=False),
        disconnected_by_cover=_by_cover(table),
        runon_to=table.choice("runon_to", RUNON_TARGETS),
        compare_connected=table.flag("compare_connected", default=False),
    )
    if source.path is None and not source.disconnects:
        table.fail(None, "names neither an impervious grid nor a disconnected share",
                   "add path and scale, or disconnected_fraction / disconnected_field / "
                   "[impervious.disconnected_by_cover], or remove the table")
    if source.compare_connected and not source.disconnects:
        table.fail("compare_connected", "has no disconnected share to compare with",
                   "state a disconnected share or remove compare_connected")
    return source


def _by_cover(table: TableReader) -> dict[str, float]:
    """``[impervious.disconnected_by_cover]``: cover class -> share 0-1."""
    sub = table.sub("disconnected_by_cover")
    out: dict[str, float] = {}
    for label in sub.data:
        check_cover_labels([label], sub.where(label))
        out[str(label)] = sub.number(label, low=0.0, high=1.0)
    return out


def check_impervious_combination(source: ImperviousSource | None, *, combine: str,
                                 compare_composite: bool, where: str,
                                 uncertainty: bool = False) -> None:
    """Stop on run options that cannot carry run-on from disconnected impervious area.

    A composite run averages each subcatchment into one parameter set, which has no
    impervious part to drain onto a pervious one.

    Raises
    ------
    ProjectFileError
        ``combine = "composite"``, ``compare_composite = true`` or an ``[uncertainty]``
        table (whose samples run each soil x cover part on its own) with a disconnected share.
    """
    if source is None or not source.disconnects:
        return
    if uncertainty:
        at = where.rsplit(":", 1)[0]
        raise ProjectFileError(f"{at}:[uncertainty]", "runs each soil x cover part on its own "
                               "and so cannot carry run-on from disconnected impervious area",
                               "remove [uncertainty] or the disconnected share for this run")
    if combine == "composite":
        raise ProjectFileError(f"{where}.combine", "is 'composite', which runs one averaged "
                               "part per subcatchment and so cannot route disconnected "
                               "impervious runoff onto pervious ground",
                               "use combine = \"units\" or remove the disconnected share")
    if compare_composite:
        raise ProjectFileError(f"{where}.compare_composite", "compares with composite "
                               "parameters, which cannot carry run-on from disconnected "
                               "impervious area", "remove compare_composite or the "
                               "disconnected share")
