"""Every string option gisrun accepts, in one place, and the one way names are matched.

A choice typed by a user (``"Green-Ampt"``, ``"green ampt"``, ``"GREEN_AMPT"``) goes
through :func:`normalize_name` wherever it is read, so it means the same everywhere;
an unknown one gets the hint from :func:`did_you_mean`, and :func:`choose` does both.

The registries of the project file's fixed choices live here as :class:`Choices`
(:data:`NODATA_RULES`, :data:`COMBINE_RULES`, :data:`DUAL_GROUP_CONDITIONS`,
:data:`UNIT_SYSTEMS`, :data:`LUMPED_PARAMETER_SETS`). Choices that belong to a computing
package have their registry there and are read from it: loss methods ``gisrun.engine.ENGINES``, soil
classifications ``gisrun.parameters.soils.CLASSIFICATIONS``, storm kinds
``gisrun.storm.KINDS``.

Examples
--------
>>> normalize_name(" Green-Ampt ")
'green_ampt'
>>> did_you_mean("hortn", ["green_ampt", "horton"])
"did you mean 'horton'?"
>>> did_you_mean("zzz", ["b", "a"])
"use one of ['a', 'b']"
>>> NODATA_RULES.pick("Dominant", where="x")
'dominant'
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable

from .errors import GisrunError, InputError, OutputError
from .units import SYSTEMS

__all__ = ["check_geopackage_name", "normalize_name", "did_you_mean", "choose", "Choices",
           "NODATA_RULES", "COMBINE_RULES", "DUAL_GROUP_CONDITIONS", "UNIT_SYSTEMS",
           "LUMPED_PARAMETER_SETS", "SERIES_STORES", "IMPERVIOUS_SCALES", "RUNON_TARGETS",
           "RAIN_GRID_FORMATS", "RAIN_TIME_MARKS", "RAIN_VALUES", "GAUGE_WEIGHTINGS",
           "REDUCTION_SCOPES", "CHOICES"]


def normalize_name(text: object) -> str:
    """Lower case, with runs of spaces, dashes and underscores made one ``_``."""
    return "_".join(str(text).strip().lower().replace("-", " ").replace("_", " ").split())


def did_you_mean(value: object, valid: Iterable[str], *, cutoff: float = 0.5) -> str:
    """A hint naming the nearest valid choice, or listing them all when none is near."""
    choices = sorted(dict.fromkeys(str(v) for v in valid))
    near = difflib.get_close_matches(str(value), choices, n=1, cutoff=cutoff)
    return f"did you mean {near[0]!r}?" if near else f"use one of {choices}"


def choose(text: object, valid: Iterable[str], *, where: str, what: str = "choice",
           error: type[GisrunError] = InputError) -> str:
    """The valid name ``text`` means after :func:`normalize_name`, or ``error`` naming it.

    Raises
    ------
    GisrunError
        Of the class ``error``: ``<where>: unknown <what> '<text>'; did you mean ...``.

    Examples
    --------
    >>> choose("Curve Number", ["curve_number", "horton"], where="x")
    'curve_number'
    """
    valid = list(valid)
    key = normalize_name(text)
    if isinstance(text, str) and key in valid:
        return key
    raise error(where, f"unknown {what} {text!r}", did_you_mean(key, valid))


class Choices(tuple[str, ...]):
    """The accepted names of one option (normalized spelling), with its default.

    A tuple of the names, so ``name in NODATA_RULES`` and ``click.Choice(NODATA_RULES)``
    work; :meth:`pick` reads a user's spelling of one.
    """

    what: str
    default: str

    def __new__(cls, names: Iterable[str], *, what: str, default: str) -> Choices:  # noqa: D102
        self = super().__new__(cls, tuple(names))
        if default not in self:
            raise ValueError(f"default {default!r} is not one of {tuple(self)}")
        self.what, self.default = what, default
        return self

    def pick(self, text: object, *, where: str,
             error: type[GisrunError] = InputError) -> str:
        """The choice ``text`` names (see :func:`choose`)."""
        return choose(text, self, where=where, what=self.what, error=error)


#: What happens to subcatchment area without soil data (``[nodata] rule``).
NODATA_RULES = Choices(("error", "dominant", "omit"), what="nodata rule", default="dominant")
#: How a subcatchment's units are run (``[method] combine``).
COMBINE_RULES = Choices(("units", "composite"), what="combine rule", default="units")
#: How dual hydrologic soil groups A/D, B/D, C/D are read (``[soil] dual_group_condition``).
DUAL_GROUP_CONDITIONS = Choices(("drained", "undrained"), what="dual-group condition",
                                default="undrained")
#: Unit systems of inputs and outputs (``[project] units``).
UNIT_SYSTEMS = Choices(tuple(SYSTEMS), what="unit system", default="si")
#: Which lumped parameter sets a run makes (``[method] lumped_parameters``): all three
#: (root searches), the area-weighted set only, or none.
LUMPED_PARAMETER_SETS = Choices(("auto", "solve", "area_weighted", "off"),
                                what="lumped parameters choice", default="auto")
#: What a raster key missing from its attribute table does (``[soil] unlisted_keys``):
#: stop, or count its cells as nodata (then the nodata rule applies).
UNLISTED_KEY_RULES = Choices(("error", "nodata"), what="unlisted key rule", default="error")
#: Where a run's excess-rainfall series go (``[project] series``): the GeoPackage's
#: ``excess_series`` table, a Parquet file beside it, or "auto" (by size, see
#: :data:`gisrun.workflow.series.SERIES_IN_GEOPACKAGE_BELOW`).
SERIES_STORES = Choices(("auto", "geopackage", "parquet"), what="series store", default="auto")
#: What the values of an impervious-share grid are (``[impervious] scale``): no default, the
#: project file must say.
IMPERVIOUS_SCALES = Choices(("percent", "fraction"), what="impervious scale", default="percent")
#: Where disconnected impervious runoff runs on (``[impervious] runon_to``).
RUNON_TARGETS = Choices(("unit", "subcatchment"), what="run-on target", default="unit")
#: How a stack of rain grids is stored (``[[storms]] format`` of a rain grid; inferred from the
#: path when not given).
RAIN_GRID_FORMATS = Choices(("netcdf", "geotiff", "geotiff_folder"), what="rain grid format",
                            default="netcdf")
#: What a rain grid's time marks: the end of its step or the start (``[[storms]] time_marks``).
RAIN_TIME_MARKS = Choices(("end", "start"), what="time mark", default="end")
#: What a rain grid's values are (``[[storms]] rain_is``; inferred from the unit when not given).
RAIN_VALUES = Choices(("depth", "intensity"), what="kind of rain value", default="depth")

#: How rain gauges are weighted over a subcatchment (``[[storms]] weighting`` of ``gauges``).
GAUGE_WEIGHTINGS = Choices(("thiessen", "inverse_distance"), what="gauge weighting",
                           default="thiessen")

#: Whose area a design storm's areal reduction factor is taken at (``[[storms]]
#: areal_reduction.over``): each subcatchment's own, or the whole subcatchment layer's.
REDUCTION_SCOPES = Choices(("subcatchment", "basin"), what="areal reduction scope",
                           default="subcatchment")

#: Every fixed choice above by the name it is known under.
CHOICES: dict[str, Choices] = {
    "nodata_rule": NODATA_RULES, "combine": COMBINE_RULES,
    "dual_group_condition": DUAL_GROUP_CONDITIONS, "units": UNIT_SYSTEMS,
    "lumped_parameters": LUMPED_PARAMETER_SETS, "series": SERIES_STORES,
    "unlisted_keys": UNLISTED_KEY_RULES,
    "impervious_scale": IMPERVIOUS_SCALES, "runon_to": RUNON_TARGETS,
    "rain_grid_format": RAIN_GRID_FORMATS, "time_marks": RAIN_TIME_MARKS,
    "rain_is": RAIN_VALUES, "weighting": GAUGE_WEIGHTINGS, "over": REDUCTION_SCOPES,
}


def check_geopackage_name(path: object, where: str) -> None:
    """Stop when an output path does not end in ``.gpkg``: gisrun writes only GeoPackages.

    Without the check ``result.shp`` silently became a GeoPackage and a name without an
    extension printed GDAL's warnings about a non-conformant file name.

    Raises
    ------
    OutputError
        Naming ``where`` and the path.
    """
    name = str(path)
    if not name.lower().endswith(".gpkg"):
        raise OutputError(f"{where} ({name})", "is not a .gpkg file name, and gisrun writes "
                          "only GeoPackages", "give an output path ending in .gpkg")
