"""Shape a run's results into the output layers and tables, in the project's units.

Pure data shaping: SI frames in, frames with unit-suffixed columns out
(:func:`gisrun.units.present_frame`). Writing them is :mod:`gisrun.io.geopackage`'s job.

Layers of the output GeoPackage:

``runoff_<storm>``
    One polygon layer per storm, one feature per subcatchment.
``subcatchment_results``
    The same figures for every storm in one table (column ``storm``).
``excess_series``
    Long table: subcatchment, storm, step end time, rain, infiltration and
    excess depth in the step and as intensities; left out when the run wrote
    them to a Parquet file beside the GeoPackage (``RunResult.series_file``,
    named in ``run_info``).
``unit_results``, ``unit_parameters``, ``parameter_sources``, ``coverage``
    Per soil x cover unit results and parameters, where each parameter came
    from, and nodata / outside-raster area per subcatchment.
``ponding_rank_subcatchments``, ``ponding_rank_units``
    Subcatchments and units ordered by time to ponding under each storm
    (earliest first; those that never pond last, rank empty).
``lumped_parameters``
    Per subcatchment, loss method, basis (area-weighted, equivalent, fitted) and
    storm: the parameters of one pervious unit beside the impervious share, the
    runoff they give and the difference from gisrun's runoff
    (:func:`gisrun.present.model_inputs.lumped_layer`); left out when the run
    made none.
``rain_weights``
    For storms whose rain differs between subcatchments (gauges, a rain grid): each source's
    weight in each subcatchment's areal rain (storm, source id, subcatchment id, weight);
    left out when no storm has such rain.
``runoff_bands``, ``parameter_sensitivity``, ``uncertainty_ranges``
    With ``[uncertainty]``: percentiles of each subcatchment's figures over the
    parameter sets, the one-at-a-time sensitivity and what was sampled
    (:mod:`gisrun.present.bands`).
``run_info``
    What was run: version, time, method, storms, units, input checksums,
    warnings and the caution.
"""

from __future__ import annotations

from collections.abc import Callable

import geopandas as gpd
import numpy as np
import pandas as pd

from .._version import __version__
from ..aggregate import soil_shares
from ..model import BAND_CAUTION, CAUTION, RunResult, StormResult
from ..storm.areal import WEIGHT_COLUMNS
from ..units import UnitSystem, present_frame
from .bands import band_builders
from .display import human
from .model_inputs import lumped_layer
from .reduction import FACTOR_COLUMN, reduction_column, reduction_line

__all__ = [
    "build_layers", "layer_builders", "run_info", "storm_layer_name", "layer_name", "series_layer",
    "lumped_parameters_layer", "ponding_ranking", "subcatchment_table", "UNIT_LAYERS",
    "rain_weights_layer",
]


#: Rows of each ranking the report shows per storm (a streamed run keeps that many in memory).
REPORT_TOP = 10

#: Layers with one row per unit (and storm); a streamed run writes them chunk by chunk.
UNIT_LAYERS = ("unit_results", "unit_parameters", "ponding_rank_units")


def layer_name(text: str) -> str:
    """A GeoPackage-safe layer name: letters, digits and ``_``, not starting with a digit.

    Examples
    --------
    >>> layer_name("runoff 10-yr/24 h")
    'runoff_10_yr_24_h'
    """
    safe = "".join(ch if ch.isalnum() else "_" for ch in text.strip().lower())
    safe = "_".join(part for part in safe.split("_") if part)
    return safe if safe and not safe[0].isdigit() else f"l_{safe}"


def storm_layer_name(storm_name: str) -> str:
    """Name of the polygon layer of one storm (``runoff_<storm>``)."""
    return layer_name(f"runoff_{storm_name}")


def subcatchment_table(result: RunResult, storm: StormResult,
                       shares: pd.DataFrame | None = None) -> pd.DataFrame:
    """Subcatchment results of one storm with polygon area and soil shares (SI columns).

    A storm reduced for area (``[[storms]] areal_reduction``) also gets each subcatchment's
    factor (:data:`gisrun.present.reduction.FACTOR_COLUMN`). ``shares``: the run's
    :func:`gisrun.aggregate.soil_shares` when the caller has them (the same for every storm).
    """
    subs = storm.subcatchments.merge(
        result.coverage, on="subcatchment_id", how="left", suffixes=("", "_coverage")
    )
    factor = reduction_column(storm.hyetograph.reduction, subs["subcatchment_id"])
    if factor is not None:
        subs.insert(1, FACTOR_COLUMN, factor)
    if shares is None:
        shares = soil_shares(result.units, subs["subcatchment_id"])
    return subs.merge(shares, on="subcatchment_id", how="left")


def build_layers(result: RunResult) -> dict[str, pd.DataFrame]:
    """All output layers of a :class:`gisrun.model.RunResult`, in output units."""
    return {name: make() for name, make in layer_builders(result).items()}


def layer_builders(result: RunResult, *, skip: tuple[str, ...] = ()
                   ) -> dict[str, Callable[[], pd.DataFrame]]:
    """Layer name -> a function building it, so a writer holds one large layer at a time.

    The storms' polygon layers are named by their ``layer_name``; the unit
    layers are left out when the run streamed its unit rows into the output.
    """
    system = result.project.units
    rankings: list[tuple[pd.DataFrame, pd.DataFrame]] = []
    made_shares: list[pd.DataFrame] = []

    def ranking(which: int) -> pd.DataFrame:
        if not rankings:
            rankings.append(ponding_ranking(result))
        return present_frame(rankings[0][which], system)

    def shares() -> pd.DataFrame:  # the soil shares, made once for every storm's table
        if not made_shares:
            made_shares.append(soil_shares(result.units, result.subcatchments["subcatchment_id"]))
        return made_shares[0]

    builders: dict[str, Callable[[], pd.DataFrame]] = {
        storm.layer_name: _storm_layer(result, storm, shares) for storm in result.storms}
    builders.update({
        "subcatchment_results": lambda: _all_storms(result, "subcatchments", shares()),
        "excess_series": lambda: _all_storms(result, "series"),
        "unit_results": lambda: _all_storms(result, "units"),
        "unit_parameters": lambda: present_frame(result.parameters, system),
        "parameter_sources": lambda: result.parameter_sources,
        "coverage": lambda: present_frame(result.coverage, system),
        "ponding_rank_subcatchments": lambda: ranking(0),
        "ponding_rank_units": lambda: ranking(1),
        "lumped_parameters": lambda: lumped_parameters_layer(result),
        "rain_weights": lambda: rain_weights_layer(result),
        **band_builders(result),
        "run_info": lambda: run_info(result),
    })
    if all(storm.hyetograph.areal is None for storm in result.storms):
        skip = (*skip, "rain_weights")
    if result.parameters is None:  # the unit rows were streamed into the output by the run
        skip = (*skip, *UNIT_LAYERS)
    if result.series_file is not None:  # the series went to a Parquet file beside it
        skip = (*skip, "excess_series")
    if result.lumped_parameters.empty:  # not made ([method] lumped_parameters, composite)
        skip = (*skip, "lumped_parameters")
    return {name: make for name, make in builders.items() if name not in skip}


def _storm_layer(result: RunResult, storm: StormResult, shares: Callable[[], pd.DataFrame]
                 ) -> Callable[[], pd.DataFrame]:
    """A function building one storm's polygon layer (one feature per subcatchment)."""
    def make() -> pd.DataFrame:
        geoms = result.subcatchments[["subcatchment_id", "geometry"]]
        table = present_frame(subcatchment_table(result, storm, shares()),
                              result.project.units)
        layer = geoms.merge(table, on="subcatchment_id", how="left")
        return gpd.GeoDataFrame(layer, geometry="geometry", crs=result.subcatchments.crs)
    return make


def _all_storms(result: RunResult, kind: str, shares: pd.DataFrame | None = None
                ) -> pd.DataFrame:
    """Every storm's subcatchment results, series or unit results in one table, storm first."""
    system = result.project.units
    frames = []
    for storm in result.storms:
        if kind == "subcatchments":
            frames.append(present_frame(subcatchment_table(result, storm, shares), system)
                          .assign(storm=storm.name))
        elif kind == "series":
            frames.append(series_layer(storm.series, storm.name, system))
        else:
            frames.append(present_frame(storm.units, system).assign(storm=storm.name))
    return _storm_first(pd.concat(frames, ignore_index=True))


def rain_weights_layer(result: RunResult) -> pd.DataFrame:
    """Each rain source's weight in each subcatchment's areal rain, storm first."""
    frames = [storm.hyetograph.areal.weights.assign(storm=storm.name)
              for storm in result.storms if storm.hyetograph.areal is not None]
    columns = ["storm", *WEIGHT_COLUMNS]
    if not frames:
        return pd.DataFrame({c: [] for c in columns})
    return pd.concat(frames, ignore_index=True)[columns]


def lumped_parameters_layer(result: RunResult) -> pd.DataFrame:
    """The lumped parameter table in the project's units (long form, the canonical one).

    The run keeps it in SI (:attr:`gisrun.model.RunResult.lumped_parameters`, built
    by :mod:`gisrun.parameters.equivalent`); this converts it.
    """
    return lumped_layer(result.lumped_parameters, result.project.units)


def series_layer(series: pd.DataFrame, storm_name: str, system: UnitSystem) -> pd.DataFrame:
    """One storm's excess-rainfall series as written: storm first, output units.

    ``storm`` is a categorical of one name (no column of millions of copies of it).
    """
    storm = pd.Categorical.from_codes(np.zeros(len(series), dtype=np.int8),
                                      categories=[storm_name])
    presented = present_frame(series, system)
    if "storm" in presented.columns:
        return _storm_first(presented.assign(storm=storm))
    presented.insert(0, "storm", storm)  # a frame of its own: no copy of the values
    return presented


def ponding_ranking(result: RunResult) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Subcatchments and units ordered by time to ponding under each storm (SI columns).

    Returns
    -------
    subcatchments, units : DataFrame
        ``storm``, ``ponding_rank`` (1 = earliest, ties share a rank;
        empty where it never ponds),
        ids (``subcatchment_id``; units also ``soil_class``, ``cover_class``),
        ``time_to_ponding_s``, ``runoff_depth_m``, ``runoff_coefficient`` and
        ``area_m2`` / ``modelled_area_m2``; subcatchments also ``loss_method``
        and ``ponding_rank_in_method`` (the rank among those with the same
        method: methods differ in what "ponding" means, so compare within a
        method). The unit ranking keeps the columns a streamed run ranks inside
        its output file. Impervious unit parts are left out of the unit ranking
        (they have no infiltration capacity to exceed).
    """
    subs, units = [], []
    methods = result.subcatchment_methods
    for storm in result.storms:
        s = storm.subcatchments[["subcatchment_id", "time_to_ponding_s", "runoff_depth_m",
                                 "runoff_coefficient", "modelled_area_m2"]]
        s = s.merge(methods, on="subcatchment_id", how="left")
        subs.append(_ranked(s, storm.name, ["subcatchment_id"]))
        if storm.units is None:  # streamed run: the unit ranking is made in the output file
            continue
        u = storm.units[storm.units["surface"] != "impervious"]
        keys = ["subcatchment_id", "soil_class", "cover_class"]
        u = u[[*keys, "time_to_ponding_s", "runoff_depth_m", "runoff_coefficient", "area_m2"]]
        units.append(_ranked(u, storm.name, keys))
    return (pd.concat(subs, ignore_index=True),
            pd.concat(units, ignore_index=True) if units else pd.DataFrame())


def _ranked(frame: pd.DataFrame, storm: str, keys: list[str]) -> pd.DataFrame:
    out = frame.sort_values(["time_to_ponding_s", *keys], na_position="last", kind="stable")
    rank = out["time_to_ponding_s"].rank(method="min").astype("Int64")  # ties share a rank
    out = out.assign(storm=storm, ponding_rank=rank)
    columns = ["storm", "ponding_rank", *frame.columns]
    if "loss_method" in frame.columns:
        within = out.groupby("loss_method", sort=False)["time_to_ponding_s"].rank(method="min")
        out = out.assign(ponding_rank_in_method=within.astype("Int64"))
        columns.append("ponding_rank_in_method")
    return out[columns].reset_index(drop=True)


def _storm_first(frame: pd.DataFrame) -> pd.DataFrame:
    cols = ["storm", *[c for c in frame.columns if c != "storm"]]
    return frame[cols]


def _area_rows(result: RunResult) -> list[tuple[str, str]]:
    """How the subcatchments' ground areas were measured (``coverage.area_method``)."""
    if "area_method" not in result.coverage.columns:
        return []
    counts = result.coverage["area_method"].value_counts()
    name = result.subcatchments.crs.name if result.subcatchments.crs is not None else "?"
    why = {"planar": f"planar in {name} (areal scale error within 0.1 %)",
           "ellipsoidal": "ellipsoidal (pyproj Geod; geographic CRS or areal scale error above "
                          "0.1 %)"}
    return [("area_method", f"{why.get(str(m), m)}: {n} subcatchment(s)")
            for m, n in counts.items()]


def _series_rows(result: RunResult) -> list[tuple[str, str]]:
    """Where the excess series are when they are not this GeoPackage's ``excess_series``."""
    if result.series_file is None:
        return []
    return [("excess_series_file", result.series_file),
            ("excess_series_format", "Parquet, beside this GeoPackage; read it with "
             f"pandas.read_parquet(\"{result.series_file}\") (same columns as an "
             "excess_series table)")]


def _uncertainty_rows(result: RunResult) -> list[tuple[str, str]]:
    if result.uncertainty is None:
        return []
    s = result.uncertainty.settings
    return [("uncertainty_samples", str(s.samples)), ("uncertainty_seed", str(s.seed)),
            ("uncertainty_percentiles", ", ".join(f"{p:g}" for p in s.percentiles)),
            ("uncertainty_top_k", str(s.top_k)),
            ("uncertainty_sampling", "Latin hypercube, independent draws (gisrun.uncertainty)"),
            ("uncertainty_caution", BAND_CAUTION)]


def run_info(result: RunResult) -> pd.DataFrame:
    """Key-value table describing the run (provenance), one row per fact."""
    project = result.project
    rows: list[tuple[str, str]] = [
        ("gisrun_version", __version__),
        ("started_utc", result.started_utc),
        ("project_name", project.name),
        ("project_file", project.path.name),
        ("unit_system", project.units.name),
        ("time_step_min", f"{project.time_step_s / 60:g}"),
        ("loss_method", project.method),
        ("combine", project.combine),
        ("subcatchment_id_field", project.subcatchments.id_field),
        ("subcatchment_crs", result.subcatchments.crs.to_string()),
        ("soil_classification", project.soil.classification),
        ("dual_group_condition", project.soil.dual_group_condition),
        ("initial_saturation", f"{project.soil.initial_saturation:g}"),
        ("nodata_rule", project.nodata_rule),
        ("max_nodata_fraction", f"{project.max_nodata_fraction:g}"),
        ("subcatchment_count", str(len(result.subcatchments))),
        ("unit_count", str(result.unit_count)),
        *_area_rows(result),
        *_series_rows(result),
    ]
    depth_unit = project.units.depth
    for storm in result.storms:
        h = storm.hyetograph
        depth = present_frame(pd.DataFrame({"d_m": [h.total_depth_m]}), project.units).iloc[0, 0]
        rows.append(("storm", f"{h.name}: {human(depth)} {depth_unit} over "
                              f"{human(h.duration_s / 60)} min"))
        if h.reduction is not None:
            rows.append(("areal_reduction", reduction_line(h.name, h.reduction, project.units)))
        if h.areal is not None:
            start = f", from {h.areal.start}" if h.areal.start else ""
            rows.append(("areal_rain", f"{h.name}: {h.areal.source}{start} (basin mean above; "
                                       "each subcatchment its own rain)"))
    for name, digest in result.checksums.items():
        rows.append((f"sha256:{name}", digest))
    if "source" in result.parameter_sources.columns:
        for source in pd.unique(result.parameter_sources["source"].astype(str)):
            rows.append(("parameter_source", source))
    for note in result.warnings:
        rows.append(("warning", note))
    rows += _uncertainty_rows(result)
    rows.append(("caution", CAUTION))
    return pd.DataFrame(rows, columns=["key", "value"])

