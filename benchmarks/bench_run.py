"""End-to-end benchmark: a whole run against the I/O floor, and peak memory across raster sizes.

For each raster size it generates inputs (``make_inputs.py``), then measures in one go:

- the I/O floor: reading both rasters once, block by block, plus writing the run's outputs
  once: the GeoPackage's layers (read back into memory first, untimed) and, when the run wrote
  one, the Parquet series file with the run's encoding, one row group at a time as the run
  writes it (each read back untimed before it is written), so the floor's memory does not grow
  with the series;
- ``gisrun run`` in a child process: wall time and peak resident memory, and the bytes per
  value of its series file;
- the same run with a second storm, to show what one more storm costs, split into the loss
  engine's time per storm and the time spent writing that storm's rows to the outputs.

``--workers N`` then runs the same project on a local dask cluster of N worker processes
(``gisrun run --workers N``) and compares its outputs with the single process's, every
GeoPackage layer and the series file, exactly (``compare_outputs.py``); it prints identical or
the first difference, the wall-clock time, the CPU time of the process tree (the run process
plus the workers it reaped) and the tree's peak memory (``process_tree.py``: the summed RSS of
the tree sampled every 0.5 s, and the sum of each process's own high-water mark).
``--no-second-storm`` leaves out the two-storm run.

It prints the ratios the targets are stated in: run time / I/O floor (target <= 3), peak memory
(target < 2 GB) and its growth from the smallest to the largest raster (target within 20 %).

``--second-storm`` measures only what a second storm costs: the one-storm and the two-storm run
in turn, ``--rounds`` times (interleaved; the fastest of each kept), and the floor of writing one
storm's rows (every layer with rows per storm, and its series, timed layer by layer). It prints
the second storm's wall time over (its engine time + that floor) (target at most 1.2).

    python benchmarks/bench_run.py                       # 8000 and 20000 cells, 100,000 polygons
    python benchmarks/bench_run.py --cells 2000 4000 --polygons 2000   # quick look
    python benchmarks/bench_run.py --second-storm --cells 8000 --rounds 2
    # the million-subcatchment step (one command line):
    python benchmarks/bench_run.py --cells 40000 --polygons 1000000 --clock cpu --workers 2
        --no-second-storm
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import time
from pathlib import Path

import pyarrow.parquet as pq
import rasterio

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from compare_outputs import compare_outputs  # noqa: E402
from make_inputs import make_inputs  # noqa: E402
from process_tree import TreeSampler  # noqa: E402

# Peak memory is the child's own high-water mark (VmHWM). ru_maxrss is not used: on Linux it
# keeps the RSS of the parent image the child was forked from.
MEASURE = """
import os, sys, time
clock = time.process_time if os.environ.get('BENCH_CLOCK') == 'cpu' else time.perf_counter
import gisrun.io.geopackage as output
import gisrun.io.series_file as series_file
import gisrun.workflow.steps as steps
from gisrun.cli.main import main

spent = {"engine": 0.0, "append": 0.0}

def timed(fn, key):
    def wrapper(*args, **kwargs):
        start = clock()
        try:
            return fn(*args, **kwargs)
        finally:
            spent[key] += clock() - start
    return wrapper

steps.run_losses = timed(steps.run_losses, "engine")  # the loss engine, every chunk
output.append_table = timed(output.append_table, "append")  # rows streamed into the output
series_file.SeriesFile.write = timed(series_file.SeriesFile.write, "append")  # and the series
t, cpu, true_wall, before = clock(), time.process_time(), time.perf_counter(), os.times()
code = main(sys.argv[1:])
wall, cpu, true_wall = clock() - t, time.process_time() - cpu, time.perf_counter() - true_wall
after = os.times()  # children: the dask worker processes, once they are reaped
children = (after.children_user + after.children_system
            - before.children_user - before.children_system)
with open("/proc/self/status") as status:
    peak_mb = next(int(l.split()[1]) for l in status if l.startswith("VmHWM")) / 1024
print("MEASURED", code, wall, peak_mb, spent["engine"], spent["append"], cpu, true_wall, children)
"""

FLOOR_WRITE = """
import os, sys, time, pathlib, pyogrio, pyarrow.parquet as pq
clock = time.process_time if os.environ.get('BENCH_CLOCK') == 'cpu' else time.perf_counter
source, target = sys.argv[1:3]
SLICE = 1_000_000  # rows read back (untimed) and written at a time: memory stays bounded
series = pathlib.Path(source).with_suffix(".series.parquet")
spent_cpu, spent = 0.0, 0.0
for name, _ in pyogrio.list_layers(source):
    n, begin = pyogrio.read_info(source, layer=name)["features"], 0.0
    for k in range(0, max(n, 1), SLICE):
        frame = pyogrio.read_dataframe(source, layer=name, skip_features=k, max_features=SLICE)
        start, cpu = clock(), time.process_time()
        pyogrio.write_dataframe(frame, target, layer=name, driver="GPKG", use_arrow=True,
                                append=k > 0)
        begin += clock() - start
        spent_cpu += time.process_time() - cpu
        del frame
    spent += begin
    print("LAYER", name, begin)
if series.exists():  # the run's encoding (gisrun.io.series_file), row group by row group
    source_file, writer, begin = pq.ParquetFile(series), None, 0.0
    for k in range(source_file.num_row_groups):
        group = source_file.read_row_group(k)  # read back, untimed
        start, cpu = clock(), time.process_time()
        writer = writer or pq.ParquetWriter(
            target + ".series.parquet", group.schema, compression="zstd", compression_level=3,
            use_dictionary=["storm", "subcatchment_id", "time_end_min"])
        writer.write_table(group, row_group_size=max(len(group), 1))  # as the run does
        begin += clock() - start
        spent_cpu += time.process_time() - cpu
        del group
    start, cpu = clock(), time.process_time()
    writer.close()
    begin += clock() - start
    spent_cpu += time.process_time() - cpu
    spent += begin
    print("LAYER excess_series", begin)
print("FLOORCPU", spent_cpu)
print("FLOOR", spent)
"""

#: The layers a storm adds rows to (its series, in the GeoPackage or the Parquet file, its unit
#: results and rankings, its polygon layer ``runoff_<storm>`` and its subcatchment rows).
STORM_ROW_LAYERS = ("excess_series", "unit_results", "ponding_rank_units",
                    "subcatchment_results", "ponding_rank_subcatchments")


def clock() -> float:
    """Wall time, or this process's CPU time with ``--clock cpu`` (steadier on a shared machine)."""
    return time.process_time() if os.environ.get("BENCH_CLOCK") == "cpu" else time.perf_counter()


def read_rasters_once(paths: list[Path]) -> tuple[float, float]:
    """Time and CPU time of reading the rasters once, block by block."""
    start, cpu = clock(), time.process_time()
    for path in paths:
        with rasterio.open(path) as src:
            for _, window in src.block_windows(1):
                src.read(1, window=window)
    return clock() - start, time.process_time() - cpu


def write_geopackage_once(source: Path, target: Path) -> tuple[float, dict[str, float], float]:
    """Time writing the run's layers once (read back first, untimed), in a child process.

    Returns the total, the time of each layer and the total CPU time.
    """
    target.unlink(missing_ok=True)
    proc = subprocess.run([sys.executable, "-c", FLOOR_WRITE, str(source), str(target)],
                          capture_output=True, text=True, check=True)
    target.unlink(missing_ok=True)
    Path(f"{target}.series.parquet").unlink(missing_ok=True)
    layers = {ln.split()[1]: float(ln.split()[2]) for ln in proc.stdout.splitlines()
              if ln.startswith("LAYER")}
    cpu = next(float(ln.split()[1]) for ln in proc.stdout.splitlines()
               if ln.startswith("FLOORCPU"))
    return float(proc.stdout.split()[-1]), layers, cpu


def measured_run(project: Path, output: Path, extra: list[str] | None = None) -> dict:
    """Run ``gisrun run`` in a child process; its times, peak memory and its process tree's.

    ``wall_s`` is by the chosen clock (the child's own CPU time with ``--clock cpu``);
    ``tree_cpu_s`` adds the CPU time of the processes it started and reaped (dask workers);
    ``tree_*`` figures come from sampling the child and its descendants (process_tree.py).
    """
    args = ["run", str(project), "--output", str(output), "--overwrite", "--quiet", "--no-extras",
            *(extra or [])]
    proc = subprocess.Popen([sys.executable, "-c", MEASURE, *args], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)
    sampler = TreeSampler(proc.pid).start()
    stdout, stderr = proc.communicate()
    tree = sampler.stop()
    line = [ln for ln in stdout.splitlines() if ln.startswith("MEASURED")]
    if proc.returncode != 0 or not line:
        raise SystemExit(f"gisrun run failed:\n{stdout}\n{stderr}")
    _, code, wall, peak, engine, append, cpu, true_wall, children = line[-1].split()
    if int(code) != 0:
        raise SystemExit(f"gisrun run exited {code}:\n{stderr}")
    return {"wall_s": float(wall), "peak_mb": float(peak), "engine_s": float(engine),
            "append_s": float(append), "cpu_s": float(cpu), "true_wall_s": float(true_wall),
            "tree_cpu_s": float(cpu) + float(children), "sampled_tree_cpu_s": tree.cpu_s,
            "tree_peak_rss_mb": tree.peak_rss_mb, "tree_sum_hwm_mb": tree.sum_hwm_mb,
            "tree_processes": len(tree.processes)}


def with_second_storm(project: Path) -> Path:
    text = project.read_text()
    twin = project.with_name("gisrun_two_storms.toml")
    block = text[text.index("[[storms]]"):]
    second = block.replace('name = "', 'name = "second_', 1)
    twin.write_text(text + "\n" + second.replace("depth = 90", "depth = 60"))
    return twin


def storm_rows_floor(layer_s: dict[str, float]) -> float:
    """The floor's time for writing one storm's rows (its layers in a one-storm output)."""
    return sum(t for name, t in layer_s.items()
               if name in STORM_ROW_LAYERS or name.startswith("runoff_"))


def bytes_per_value(output: Path) -> float | None:
    """Size of the run's Parquet series file per stored value (None without one)."""
    series = output.with_suffix(".series.parquet")
    if not series.exists():
        return None
    meta = pq.ParquetFile(series).metadata
    values = meta.num_columns - 3  # storm, subcatchment_id, time_end_min are the keys
    return series.stat().st_size / (meta.num_rows * values)


def on_cluster(project: Path, output: Path, workers: int) -> dict:
    """The same run on a local dask cluster of ``workers`` processes, compared with ``output``.

    Its output goes to ``dask/`` beside ``output`` under the same file names, so that the
    outputs can be equal byte for byte where they hold file names.
    """
    twin = output.parent / "dask" / output.name
    twin.parent.mkdir(exist_ok=True)
    run = measured_run(project, twin, ["--workers", str(workers)])
    start = time.perf_counter()
    compared, differences = compare_outputs(output, twin)
    return {"workers": workers, **{f"dask_{k}": v for k, v in run.items()},
            "dask_compared": compared, "dask_differences": differences,
            "dask_identical": not differences, "compare_s": time.perf_counter() - start}


def single_run(project: Path, output: Path, *, reuse: bool) -> dict:
    """The single-process run, or with ``reuse`` the figures saved by an earlier one.

    Every measured single-process run saves its figures in ``bench_single_run.json`` beside its
    output, so that a long benchmark whose later part failed can resume without running it again.
    """
    saved = output.parent / "bench_single_run.json"
    if reuse and saved.exists() and output.exists():
        run = json.loads(saved.read_text())
        print(f"single process: reusing the run measured earlier ({saved}) and its output",
              flush=True)
        return run
    run = measured_run(project, output)
    saved.write_text(json.dumps(run))
    return run


def bench(n_cells: int, n_polygons: int, *, workers: int | None = None,
          second_storm: bool = True, reuse_single: bool = False) -> dict:
    paths = make_inputs(n_cells=n_cells, n_polygons=n_polygons)
    out_dir = Path(paths.project).parent
    output = out_dir / "bench_output.gpkg"
    run = single_run(Path(paths.project), output, reuse=reuse_single)
    print(f"{n_cells} cells: single process: {json.dumps(run)}", flush=True)
    read_s, read_cpu = read_rasters_once([Path(paths.soil), Path(paths.cover)])
    write_s, layer_s, write_cpu = write_geopackage_once(output, out_dir / "floor_copy.gpkg")
    print(f"{n_cells} cells: floor: read {read_s:.1f} s ({read_cpu:.1f} CPU s), write "
          f"{write_s:.1f} s ({write_cpu:.1f} CPU s): {json.dumps(layer_s)}", flush=True)
    cluster = on_cluster(Path(paths.project), output, workers) if workers else {}
    if cluster:
        print(f"{n_cells} cells: {workers} dask workers: {json.dumps(cluster)}", flush=True)
    two = (measured_run(with_second_storm(Path(paths.project)), out_dir / "bench_output2.gpkg")
           if second_storm else None)
    floor = read_s + write_s
    rows_floor = storm_rows_floor(layer_s)
    return {**cluster, "run_true_wall_s": run["true_wall_s"],
            "run_tree_peak_rss_mb": run["tree_peak_rss_mb"], **_second_storm_figures(
                run, two, rows_floor),
        "series_bytes_per_value": bytes_per_value(output),
        "run_cpu_s": run["cpu_s"], "io_floor_cpu_s": read_cpu + write_cpu,
        "cpu_ratio_to_io_floor": run["cpu_s"] / (read_cpu + write_cpu),
        "cells": n_cells, "polygons": n_polygons, "run_s": run["wall_s"],
        "peak_mb": run["peak_mb"], "read_floor_s": read_s, "write_floor_s": write_s,
        "io_floor_s": floor, "ratio_to_io_floor": run["wall_s"] / floor,
        "read_floor_cpu_s": read_cpu, "write_floor_cpu_s": write_cpu,
    }


def _second_storm_figures(run: dict, two: dict | None, rows_floor: float) -> dict:
    """What the second storm added (NaN without the two-storm run)."""
    nan = float("nan")
    if two is None:
        return {"second_storm_s": nan, "engine_s_per_storm": run["engine_s"],
                "second_storm_rows_s": nan, "storm_rows_floor_s": rows_floor,
                "second_storm_beyond_rows_floor_s": nan, "peak_mb_two_storms": nan}
    return {"second_storm_s": two["wall_s"] - run["wall_s"],
            "engine_s_per_storm": two["engine_s"] / 2,
            "second_storm_rows_s": two["append_s"] - run["append_s"],
            "storm_rows_floor_s": rows_floor,
            "second_storm_beyond_rows_floor_s": two["wall_s"] - run["wall_s"] - rows_floor,
            "peak_mb_two_storms": two["peak_mb"]}


def second_storm(n_cells: int, n_polygons: int, rounds: int) -> dict:
    """What a second storm adds, over its engine time plus the floor of writing its rows."""
    paths = make_inputs(n_cells=n_cells, n_polygons=n_polygons)
    project = Path(paths.project)
    out_dir, twin = project.parent, with_second_storm(project)
    ones, twos = [], []
    for _ in range(rounds):  # interleaved, so a busy spell on a shared machine hits both
        ones.append(measured_run(project, out_dir / "bench_output.gpkg"))
        twos.append(measured_run(twin, out_dir / "bench_output2.gpkg"))
    _, layer_s, _ = write_geopackage_once(out_dir / "bench_output.gpkg",
                                          out_dir / "floor_copy.gpkg")
    one, two = (min(runs, key=lambda r: r["wall_s"]) for runs in (ones, twos))
    added = two["wall_s"] - one["wall_s"]
    engine = two["engine_s"] - one["engine_s"]
    rows_floor = storm_rows_floor(layer_s)
    return {"cells": n_cells, "polygons": n_polygons, "rounds": rounds,
            "one_storm_s": [r["wall_s"] for r in ones], "two_storms_s": [r["wall_s"] for r in twos],
            "second_storm_s": added, "second_storm_engine_s": engine,
            "storm_rows_floor_s": rows_floor,
            "storm_rows_floor_by_layer_s": {k: v for k, v in layer_s.items()
                                            if k in STORM_ROW_LAYERS or k.startswith("runoff_")},
            "second_storm_rows_s": two["append_s"] - one["append_s"],
            "ratio": added / (engine + rows_floor)}


def print_second_storm(r: dict) -> None:
    print(f"{r['cells']} x {r['cells']} cells, {r['polygons']} polygons, {r['rounds']} round(s): "
          f"one storm {min(r['one_storm_s']):.1f} s, two storms {min(r['two_storms_s']):.1f} s "
          f"(fastest of {', '.join(f'{t:.1f}' for t in r['one_storm_s'])} / "
          f"{', '.join(f'{t:.1f}' for t in r['two_storms_s'])})")
    layers = ", ".join(f"{k} {v:.1f}" for k, v in r["storm_rows_floor_by_layer_s"].items())
    print(f"second storm {r['second_storm_s']:.1f} s; "
          f"its engine {r['second_storm_engine_s']:.1f} s;"
          f" writing its rows at the floor {r['storm_rows_floor_s']:.1f} s ({layers}); its rows "
          f"in the run {r['second_storm_rows_s']:.1f} s")
    print(f"second storm / (engine + rows floor) = {r['ratio']:.2f} (target <= 1.2)")


def print_cluster(r: dict) -> None:
    """The dask run's figures beside the single process's."""
    print(f"{r['cells']} cells, {r['workers']} dask workers: wall-clock {r['dask_true_wall_s']:.1f}"
          f" s (single process {r['run_true_wall_s']:.1f} s); CPU time of the process tree "
          f"{r['dask_tree_cpu_s']:.1f} s (the run process {r['dask_cpu_s']:.1f} s + the workers "
          f"it reaped; sampled from /proc: {r['dask_sampled_tree_cpu_s']:.1f} s; single process "
          f"{r['run_cpu_s']:.1f} s); peak memory of the tree ({r['dask_tree_processes']} "
          f"processes): {r['dask_tree_peak_rss_mb']:.0f} MB summed RSS sampled every 0.5 s, "
          f"{r['dask_tree_sum_hwm_mb']:.0f} MB sum of each process's own peak (VmHWM); the run "
          f"process alone {r['dask_peak_mb']:.0f} MB (single process {r['peak_mb']:.0f} MB)")
    verdict = ("identical" if r["dask_identical"]
               else "DIFFERENT: " + "; ".join(r["dask_differences"]))
    print(f"{r['cells']} cells: outputs of the dask run against the single process "
          f"({len(r['dask_compared'])} layers and files, compared in {r['compare_s']:.0f} s): "
          f"{verdict}")


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cells", type=int, nargs="+", default=[8000, 20000])
    parser.add_argument("--polygons", type=int, default=100_000)
    parser.add_argument("--json", action="store_true", help="print the figures as JSON")
    parser.add_argument("--second-storm", action="store_true",
                        help="measure only what a second storm costs (see above)")
    parser.add_argument("--rounds", type=int, default=1, help="rounds of --second-storm")
    parser.add_argument("--clock", choices=["wall", "cpu"], default="wall",
                        help="time everything by wall clock or by each process's CPU time")
    parser.add_argument("--workers", type=int, default=None, metavar="N",
                        help="after the single-process run, the same run on a local dask "
                        "cluster of N workers (gisrun run --workers N), its outputs compared "
                        "with the single process's exactly")
    parser.add_argument("--no-second-storm", action="store_true",
                        help="leave out the two-storm run (saves a whole run on large sets)")
    parser.add_argument("--reuse-single", action="store_true",
                        help="take the single-process run's figures and output from an earlier "
                        "invocation (bench_single_run.json beside the output) instead of running "
                        "it again: to resume a long benchmark whose later part failed")
    args = parser.parse_args(argv)
    os.environ["BENCH_CLOCK"] = args.clock  # read by the child processes too
    print(f"times are {'CPU' if args.clock == 'cpu' else 'wall-clock'} seconds")
    if args.second_storm:
        found = [second_storm(n, args.polygons, args.rounds) for n in args.cells]
        for r in found:
            print(json.dumps(r, indent=2) if args.json else "", end="")
            if not args.json:
                print_second_storm(r)
        return
    rows = [bench(n, args.polygons, workers=args.workers, second_storm=not args.no_second_storm,
                  reuse_single=args.reuse_single) for n in args.cells]
    if args.json:
        print(json.dumps(rows, indent=2))
        return
    print(f"{'cells':>7} {'polygons':>9} {'run s':>8} {'floor s':>8} {'run/floor':>10} "
          f"{'peak MB':>8} {'+1 storm s':>11} {'engine s':>9} {'its rows s':>11} "
          f"{'rows floor s':>13} {'+1 - floor':>11}")
    for r in rows:
        print(f"{r['cells']:>7} {r['polygons']:>9} {r['run_s']:>8.1f} {r['io_floor_s']:>8.1f} "
              f"{r['ratio_to_io_floor']:>10.2f} {r['peak_mb']:>8.0f} {r['second_storm_s']:>11.1f} "
              f"{r['engine_s_per_storm']:>9.1f} {r['second_storm_rows_s']:>11.1f} "
              f"{r['storm_rows_floor_s']:>13.1f} {r['second_storm_beyond_rows_floor_s']:>11.1f}")
    for r in rows:
        print(f"{r['cells']} cells: CPU time of the run {r['run_cpu_s']:.1f} s, of the floor "
              f"{r['io_floor_cpu_s']:.1f} s (reading {r['read_floor_cpu_s']:.1f}, writing "
              f"{r['write_floor_cpu_s']:.1f}), ratio {r['cpu_ratio_to_io_floor']:.2f}; "
              f"wall-clock time of the run {r['run_true_wall_s']:.1f} s")
        if "workers" in r:
            print_cluster(r)
        if r["series_bytes_per_value"] is not None:
            print(f"{r['cells']} cells: series file {r['series_bytes_per_value']:.2f} bytes per "
                  "value (target <= 10)")
    growth = rows[-1]["peak_mb"] / rows[0]["peak_mb"] - 1
    print(f"peak memory growth from {rows[0]['cells']} to {rows[-1]['cells']} cells: "
          f"{growth:+.0%} (target within 20 %); largest peak {rows[-1]['peak_mb']:.0f} MB "
          "(target < 2000 MB); run/floor target <= 3")
    print("+1 storm: what a second storm adds to the run; engine: loss-engine time per storm; "
          "its rows: time spent writing the second storm's rows (series and unit tables); "
          "rows floor: writing one storm's rows once in the I/O floor; +1 - floor: what the "
          "second storm adds beyond that floor (target: no more than engine s)")


if __name__ == "__main__":
    main()
