"""Areal rain from a gridded rainfall product vs reading the rain stack once.

Inputs (invented, made on demand in ``benchmarks/scratch/rain_grid_polygons<M>/``): the
benchmark subcatchments of ``make_inputs.make_subcatchments`` (``--polygons``, default 100,000,
tiling 200 x 200 km in EPSG:32617) and a CF NetCDF rain stack on a 1 km grid over the same
extent, every 5 minutes for 24 hours (288 steps, float32, intensity in mm/h).

It measures, interleaved (``--repeat`` rounds, the fastest of each kept):

- read: ``RainStack.read_steps`` over every block of steps (the stored values, then widened to
  float64 and made depths in metres in one pass; nothing else done with them: the floor is the
  stack read once as the program uses its values), for the stack stored plain and deflated
  (zlib 4, shuffle, one step per chunk, as rainfall products are usually shipped);
- stored: ``RainStack.read_stored`` over every block, the values as xarray decodes them
  (float32, mm/h), shown beside the read: the areal rain reads these and makes the depths as
  it keeps the used cells;
- areal: the rain per subcatchment for every step, the way a run makes it: the stack read,
  checked and its used cells kept once (``gisrun.storm.gridded.grid_rain_mix``), then each
  chunk's columns (``mix.subset(rows).columns()``) for the chunks a run of these subcatchments
  is cut into (``plan_chunks`` with ``chunk_size_for_budget`` of the default 1500 MB budget,
  one storm of areal rain), each dropped once made, as a run drops it once the chunk has run
  (reading included; the compiled kernels of ``gisrun.storm.mix_kernels``); its first call in
  the process, which also loads the kernels from numba's cache (or compiles them, in a fresh
  install), is timed apart before the rounds;
- whole: ``grid_areal_depth(weights, stack)``, every column at once (the whole matrix, as the
  areal rain was made before it was made by chunks), for comparison;
- the areal rain's two parts, to show where its time goes: keep, ``grid_rain_mix`` alone (the
  stack read, checked and its used cells kept by series), and columns, the chunks' columns
  from a mix made before the round (``mix.subset(rows).columns()`` per chunk);
- weights: ``gisrun.grid.rain_weights.rain_grid_weights`` (made once per run, shown apart).

Target: areal within 2x read; memory bounded by the run's budget (the areal call's peak traced
memory is printed beside the whole matrix's). ``--clock cpu`` times both by the process's CPU
time instead of the wall clock (both sides run on one thread): steadier on a shared machine,
where the wall clock of a fraction of a second depends on who else runs. Peak memory by
``tracemalloc`` (numpy's arrays included), and the process's peak resident size.

Command line::

    python benchmarks/bench_rain_grid.py                    # 100,000 subcatchments
    python benchmarks/bench_rain_grid.py --polygons 10000 --repeat 2
    python benchmarks/bench_rain_grid.py --repeat 10 --clock cpu
"""

from __future__ import annotations

import argparse
import os
import resource
import sys
import time
import tracemalloc
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import xarray as xr
from pyproj import CRS

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from make_inputs import CRS as BENCH_CRS  # noqa: E402
from make_inputs import NORTH_M, WEST_M, make_subcatchments  # noqa: E402

from gisrun.grid.rain_weights import rain_grid_weights  # noqa: E402
from gisrun.io.rain_grid import RainGridSettings, open_rain_grid  # noqa: E402
from gisrun.storm.gridded import grid_areal_depth, grid_rain_mix, steps_per_block  # noqa: E402
from gisrun.workflow.chunks import chunk_size_for_budget, plan_chunks  # noqa: E402

EXTENT_CELLS, CELL_M = 20_000, 10.0  # the large benchmark set's extent: 200 km
RAIN_CELL_M, STEP_MIN, HOURS = 1000.0, 5, 24


def write_rain(path: Path, *, deflate: bool) -> Path:
    """An invented storm: a rain cell drifting across the extent, 1 km, 5-min, 24 h (mm/h).

    ``deflate``: compressed as rainfall products are usually shipped (zlib level 4 with
    shuffle, chunks of one step); otherwise stored plain (the cheapest stack to read).
    """
    if path.exists():
        return path
    n = int(EXTENT_CELLS * CELL_M / RAIN_CELL_M)
    steps = HOURS * 60 // STEP_MIN
    x = WEST_M + RAIN_CELL_M * (np.arange(n) + 0.5)
    y = NORTH_M - RAIN_CELL_M * (np.arange(n) + 0.5)
    rng = np.random.default_rng(3)
    values = np.empty((steps, n, n), dtype=np.float32)
    gx, gy = np.meshgrid(np.arange(n), np.arange(n))
    for k in range(steps):
        cx, cy = n * k / steps, n / 2 + n / 4 * np.sin(k / 40)
        peak = 40 * np.exp(-((gx - cx) ** 2 + (gy - cy) ** 2) / (2 * (n / 6) ** 2))
        values[k] = peak * rng.uniform(0.8, 1.2, size=(n, n))
    minutes = STEP_MIN * (np.arange(steps) + 1.0)
    ds = xr.Dataset(
        {"rain_rate": (("time", "y", "x"), values, {"units": "mm h-1", "grid_mapping": "crs"})},
        coords={"time": ("time", minutes, {"units": "minutes since 2026-07-01 00:00:00",
                                           "standard_name": "time"}),
                "y": ("y", y, {"standard_name": "projection_y_coordinate", "units": "m"}),
                "x": ("x", x, {"standard_name": "projection_x_coordinate", "units": "m"})})
    ds["crs"] = ((), 0, CRS(BENCH_CRS).to_cf())
    path.parent.mkdir(parents=True, exist_ok=True)
    encoding = {"rain_rate": {"zlib": True, "complevel": 4, "shuffle": True,
                              "chunksizes": (1, n, n)}} if deflate else {}
    ds.to_netcdf(path.with_suffix(".partial.nc"), encoding=encoding)
    path.with_suffix(".partial.nc").rename(path)
    return path


def read_once(stack, how: str = "read_steps") -> int:
    """Read every block of the stack (``how``: the RainStack method); returns the values read."""
    k, values, read = steps_per_block(stack), 0, getattr(stack, how)
    for first in range(0, stack.steps, k):
        values += read(first, min(first + k, stack.steps)).size
    return values


def areal_by_chunks(weights, stack, chunks) -> int:
    """The areal rain as a run makes it: the mix, then each chunk's columns; values made."""
    return chunk_columns(grid_rain_mix(weights, stack)[0], chunks)


def chunk_columns(mix, chunks) -> int:
    """Each chunk's columns of ``mix``, each dropped once made; values made."""
    made = 0
    for rows in chunks:
        made += mix.subset(rows).columns().size
    return made


CLOCKS = {"wall": time.perf_counter, "cpu": time.process_time}
clock = CLOCKS["wall"]


def timed(fn, *args, **kwargs):
    t0 = clock()
    out = fn(*args, **kwargs)
    return clock() - t0, out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--polygons", type=int, default=100_000)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--clock", choices=sorted(CLOCKS), default="wall")
    args = parser.parse_args(argv)
    global clock
    clock = CLOCKS[args.clock]
    folder = HERE / "scratch" / f"rain_grid_polygons{args.polygons}"
    gpkg = folder / "subcatchments.gpkg"
    if not gpkg.exists():
        make_subcatchments(folder, n_polygons=args.polygons, n_cells=EXTENT_CELLS, cell_m=CELL_M)
    subs = gpd.read_file(gpkg, layer="subcatchments", engine="pyogrio")
    stacks = {kind: open_rain_grid(RainGridSettings(write_rain(
        folder / f"rain_1km_5min_24h_{kind}.nc", deflate=kind == "deflate")))
        for kind in ("plain", "deflate")}
    t_weights, weights = timed(rain_grid_weights, subs.geometry, subs["subcatchment_code"],
                               stacks["plain"])
    size = chunk_size_for_budget(1500, stacks["plain"].steps, 1, areal_storms=1)
    chunks = plan_chunks(subs.geometry, size)
    t_first = timed(areal_by_chunks, weights, stacks["plain"], chunks)[0]
    whole = grid_areal_depth(weights, stacks["plain"])
    mix = grid_rain_mix(weights, stacks["plain"])[0]
    same = all(np.array_equal(mix.subset(rows).columns(), whole[:, rows]) for rows in chunks)
    del whole
    times: dict[str, list[float]] = {}
    load = [os.getloadavg()[0]]
    for _ in range(args.repeat):  # interleaved, the fastest of each kept
        for kind, stack in stacks.items():
            times.setdefault(f"read {kind}", []).append(timed(read_once, stack)[0])
            times.setdefault(f"stored {kind}", []).append(
                timed(read_once, stack, "read_stored")[0])
            times.setdefault(f"areal {kind}", []).append(
                timed(areal_by_chunks, weights, stack, chunks)[0])
            times.setdefault(f"whole {kind}", []).append(
                timed(grid_areal_depth, weights, stack)[0])
            times.setdefault(f"keep {kind}", []).append(
                timed(grid_rain_mix, weights, stack)[0])
        times.setdefault("columns", []).append(timed(chunk_columns, mix, chunks)[0])
    del mix
    load.append(os.getloadavg()[0])
    peak = {}
    for name, call in (("areal", lambda: areal_by_chunks(weights, stacks["plain"], chunks)),
                       ("whole", lambda: grid_areal_depth(weights, stacks["plain"]))):
        tracemalloc.start()
        call()
        peak[name] = tracemalloc.get_traced_memory()[1]
        tracemalloc.stop()
    print(f"chunks: {len(chunks)} of up to {size} subcatchments; each chunk's columns equal the "
          f"whole matrix's, to the bit: {same}")
    best = {name: min(values) for name, values in times.items()}
    _report(args, stacks["plain"], weights, (t_weights, t_first), best, peak)
    print(f"machine load (1-minute average, {os.cpu_count()} cores) before and after the rounds: "
          f"{load[0]:.2f}, {load[1]:.2f}")
    return 0


def _report(args, stack, weights, once, best, peak) -> None:
    t_weights, t_first = once
    rows = [(f"{what}, {kind} NetCDF", best[f"{what.split()[0]} {kind}"], call)
            for kind in ("plain", "deflate")
            for what, call in (("read the stack once", "RainStack.read_steps, every block"),
                               ("stored values only", "RainStack.read_stored, every block"),
                               ("areal rain, all steps, by chunks",
                                "grid_rain_mix, then mix.subset(rows).columns() per chunk"),
                               ("whole matrix at once", "grid_areal_depth(weights, stack)"))]
    rows += [(f"  of which keep, {kind} NetCDF", best[f"keep {kind}"],
              "grid_rain_mix(weights, stack): read, check, keep used cells by series")
             for kind in ("plain", "deflate")]
    rows.append(("  of which columns, every chunk", best["columns"],
                 "mix.subset(rows).columns() per chunk, from a mix made before"))
    rows.append(("weights (once per run)", t_weights,
                 "rain_grid_weights(subcatchments.geometry, ids, stack)"))
    rows.append(("first areal call in the process, plain", t_first,
                 "as areal, kernels loaded from numba's cache or compiled"))
    print(f"times: {args.clock} clock, fastest of {args.repeat} interleaved rounds")
    print(f"{args.polygons:,} subcatchments; rain grid {stack.width} x {stack.height} cells of "
          f"1 km, {stack.steps} steps of {stack.step_s / 60:g} min; {weights.matrix.nnz:,} "
          f"weights; block of {steps_per_block(stack)} steps")
    print(pd.DataFrame(rows, columns=["what", "seconds", "call"]).to_string(index=False))
    for kind in ("plain", "deflate"):
        read, areal = best[f"read {kind}"], best[f"areal {kind}"]
        print(f"{kind} NetCDF: areal rain / read once {areal / read:.2f} (target <= 2); "
              f"areal rain / stored values only {areal / best[f'stored {kind}']:.2f}; "
              f"whole matrix / read once {best[f'whole {kind}'] / read:.2f}; "
              f"(weights + areal rain) / read once {(t_weights + areal) / read:.2f}")
    result_mb = 8 * stack.steps * weights.matrix.shape[0] / 2**20
    print(f"peak traced memory: areal by chunks {peak['areal'] / 2**20:.0f} MB, whole matrix "
          f"{peak['whole'] / 2**20:.0f} MB (the matrix alone {result_mb:.0f} MB; the default "
          f"budget 1500 MB); process peak resident "
          f"{resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.0f} MB")


if __name__ == "__main__":
    raise SystemExit(main())
