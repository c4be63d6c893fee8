"""What ``gisrun run`` prints: a short summary table, or a JSON document."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
from rich.console import Console
from rich.markup import escape
from rich.table import Table

from ..model import BAND_CAUTION, CAUTION, RunResult, StormResult
from ..units import UnitSystem, from_si

__all__ = ["as_dict", "print_summary"]


def _storm_rows(result: RunResult) -> list[dict[str, Any]]:
    """Catchment-wide figures of each storm, area-weighted, in the project's units."""
    return [_storm_row(storm, result.project.units) for storm in result.storms]


def _storm_row(storm: StormResult, system: UnitSystem) -> dict[str, Any]:
    subs = storm.subcatchments
    area = subs["modelled_area_m2"].to_numpy()
    total_area = float(area.sum())

    def mean(col: str) -> float:
        return float((subs[col] * area).sum() / total_area) if total_area else 0.0

    ponded = subs["time_to_ponding_s"].to_numpy()
    return {
        "storm": storm.name,
        f"rain_depth_{system.depth}": from_si(mean("rain_depth_m"), system.depth),
        f"infiltration_depth_{system.depth}": from_si(mean("infiltration_depth_m"),
                                                      system.depth),
        f"runoff_depth_{system.depth}": from_si(mean("runoff_depth_m"), system.depth),
        f"runoff_volume_{system.volume}": from_si(float(subs["runoff_volume_m3"].sum()),
                                                  system.volume),
        "runoff_coefficient": (mean("runoff_depth_m") / mean("rain_depth_m")
                               if mean("rain_depth_m") > 0 else 0.0),
        "subcatchments_ponding": int(np.isfinite(ponded).sum()),
        "earliest_ponding_min": (float(np.nanmin(ponded)) / 60.0
                                 if np.isfinite(ponded).any() else None),
    }


def as_dict(result: RunResult, written: Path) -> dict[str, Any]:
    """A JSON-ready summary of a run."""
    return {
        "output": str(written),
        "excess_series": (str(written.with_name(result.series_file)) if result.series_file
                          else f"{written}:excess_series"),
        "subcatchments": int(len(result.subcatchments)),
        "units": int(result.unit_count),
        "loss_method": result.project.method,
        "unit_system": result.project.units.name,
        "storms": _storm_rows(result),
        "warnings": list(result.warnings),
        "uncertainty": _bands(result),
        "caution": CAUTION,
    }


def _bands(result: RunResult) -> dict[str, Any] | None:
    """What the uncertainty runs did, and their caution (None when there were none)."""
    if result.uncertainty is None:
        return None
    s = result.uncertainty.settings
    return {"samples": s.samples, "seed": s.seed, "percentiles": list(s.percentiles),
            "top_k": s.top_k, "layers": ["runoff_bands", "parameter_sensitivity",
                                         "uncertainty_ranges"], "caution": BAND_CAUTION}


def print_summary(result: RunResult, written: Path) -> None:
    """Print a table of catchment-wide figures per storm and where the output went."""
    console = Console(width=max(Console().width, 132))
    rows = _storm_rows(result)
    table = Table(title=f"{escape(result.project.name)}: {len(result.subcatchments)} "
                        f"subcatchments, {result.unit_count} soil x cover units, "
                        f"method {result.project.method}")
    longest = max(len(str(r["storm"])) for r in rows)
    for key in rows[0]:
        if key == "storm":
            table.add_column("storm", no_wrap=True, min_width=longest)
        else:
            table.add_column(_label(key), justify="right")
    for row in rows:
        table.add_row(*[_fmt(v) for v in row.values()])
    console.print(table)
    for note in result.warnings:
        console.print(f"[yellow]warning:[/yellow] {escape(note)}", highlight=False)
    console.print(f"Output written to {escape(str(written))}", highlight=False)
    if result.series_file is not None:
        series = escape(str(written.with_name(result.series_file)))
        console.print(f"Excess series in {series} (Parquet; pandas.read_parquet reads it)",
                      highlight=False)
    bands = _bands(result)
    if bands is not None:
        pct = "/".join(f"p{p:g}" for p in bands["percentiles"])
        console.print(f"Runoff bands ({pct}) from {bands['samples']} parameter sets (seed "
                      f"{bands['seed']}) in the layers runoff_bands and parameter_sensitivity. "
                      f"{bands['caution']}", highlight=False)


_LABELS = {
    "rain_depth": "rain", "infiltration_depth": "infiltration", "runoff_depth": "runoff",
    "runoff_volume": "runoff volume", "runoff_coefficient": "runoff coefficient",
    "subcatchments_ponding": "subcatchments ponding", "earliest_ponding_min":
    "earliest ponding min",
}


def _label(key: str) -> str:
    """Short column heading with its unit: ``runoff_depth_mm`` -> ``runoff mm``."""
    for stem, text in _LABELS.items():
        if key == stem or (key.startswith(stem + "_") and stem != "earliest_ponding_min"):
            unit = key[len(stem) + 1:]
            return f"{text} {unit}".strip()
    return key


def _fmt(value: Any) -> str:
    if value is None:
        return "-"
    if isinstance(value, float):
        return f"{value:,.3g}" if abs(value) < 1000 else f"{value:,.0f}"
    return str(value)
