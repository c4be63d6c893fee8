"""Uncertainty runs against one run's engine time, and peak memory against the run's budget.

Generates the benchmark inputs (``make_inputs.py``; by default the 100,000-subcatchment set on
8000 x 8000 cells that ``bench_run.py`` uses), then runs in child processes, one after the other:

- the plain run (``gisrun.run``, rows handed to sinks that drop them, nothing written): the loss
  engine's time summed over its chunks (``steps.run_losses``) and the peak memory;
- the same run with ``[uncertainty] samples = N`` (default 100): the time spent in the
  uncertainty work (``workflow.bands.chunk_uncertainty`` in every chunk: distinct parts and
  ranges; ``workflow.bands.combine_uncertainty`` after the last: the run-wide engine runs of every
  sample and of the one-at-a-time sets, and each chunk's bands), its own engine time, and the
  peak memory. The overlay and the parameter assignment are the run's own (shared).

It prints the ratio the target is stated in: uncertainty time / the plain run's engine time
(target <= 20 for 100 samples), and peak memory / ``[project] memory_budget_mb`` (target <= 1).
``--repeat`` interleaves plain and uncertainty runs and prints each pair's ratio.

``--areal`` gives the storm an areal reduction per subcatchment (an invented factor table,
linear in log area from 1 at 0.0001 km2 to 0.5 at 10,000 km2), so every subcatchment of a
different area gets a rain series of its own: the storm is then areal rain, and the bands run
one row per (part, rain column), the case with the least sharing. The plain run then runs the
same areal storm, so the ratio is against that run's engine time.

    python benchmarks/bench_uncertainty.py                        # 8000 cells, 100,000 polygons
    python benchmarks/bench_uncertainty.py --polygons 10000 --samples 100   # a quicker look
    python benchmarks/bench_uncertainty.py --polygons 10000 --areal         # rain per subcatchment
"""

from __future__ import annotations

import argparse
import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from make_inputs import default_out_dir, make_inputs  # noqa: E402

MEASURE = """
import sys, time
import gisrun
import gisrun.workflow.bands as bands
import gisrun.workflow.chunks as chunks
import gisrun.workflow.pipeline as pipeline
import gisrun.workflow.steps as steps

spent = {"engine": 0.0, "bands": 0.0}

def timed(fn, key):
    def wrapper(*args, **kwargs):
        start = time.perf_counter()
        try:
            return fn(*args, **kwargs)
        finally:
            spent[key] += time.perf_counter() - start
    return wrapper

steps.run_losses = timed(steps.run_losses, "engine")  # the run's own loss engine, every chunk
chunks.chunk_uncertainty = timed(bands.chunk_uncertainty, "bands")  # every chunk's parts
pipeline.combine_uncertainty = timed(bands.combine_uncertainty, "bands")  # samples and bands
drop = lambda *args: None
t = time.perf_counter()
result = gisrun.run(sys.argv[1], series_sink=drop, unit_sink=drop, keep_loss=False, cells=False)
wall = time.perf_counter() - t
with open("/proc/self/status") as status:
    peak_mb = next(int(l.split()[1]) for l in status if l.startswith("VmHWM")) / 1024
bands_rows = 0 if result.uncertainty is None else len(result.uncertainty.bands)
print("MEASURED", wall, peak_mb, spent["engine"], spent["bands"], bands_rows,
      result.project.memory_budget_mb)
"""


def measured(project: Path) -> dict[str, float]:
    """Run the project in a child process; its wall time, peak memory and the timed parts."""
    out = subprocess.run([sys.executable, "-c", MEASURE, str(project)], capture_output=True,
                         text=True, check=True)
    line = [x for x in out.stdout.splitlines() if x.startswith("MEASURED")][-1].split()
    keys = ("wall_s", "peak_mb", "engine_s", "bands_s", "band_rows", "budget_mb")
    return dict(zip(keys, map(float, line[1:]), strict=True))


def with_uncertainty(project: Path, samples: int) -> Path:
    """A copy of the project file beside it that asks for ``samples`` uncertainty samples."""
    target = project.with_name(f"{project.stem}_uncertainty_{samples}.toml")
    text = project.read_text()
    target.write_text(text + f"\n[uncertainty]\nsamples = {samples}\nseed = 20261203\n")
    return target


#: The invented factor table of ``--areal`` (area, duration, factor; linear in log area).
FACTORS = "".join(f"{10.0 ** e:g},{d},{1.0 - 0.0625 * (e + 4):g}\n"
                  for e in range(-4, 5) for d in (1, 2000))


def with_areal_reduction(project: Path) -> Path:
    """A copy of the project file whose storm takes a factor per subcatchment (by its area)."""
    table = project.with_name("bench_area_factors.csv")
    table.write_text("area_km2,duration_min,factor\n" + FACTORS)
    target = project.with_name("gisrun_areal.toml")
    text = project.read_text()
    assert "depth = 90\n" in text, "the benchmark storm changed: update with_areal_reduction"
    target.write_text(text.replace("depth = 90\n", 'depth = 90\nareal_reduction = { relation = '
                                   '"factor_table", table = "bench_area_factors.csv", '
                                   'over = "subcatchment" }\n'))
    return target


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cells", type=int, default=8000)
    parser.add_argument("--polygons", type=int, default=100_000)
    parser.add_argument("--samples", type=int, default=100)
    parser.add_argument("--repeat", type=int, default=1)
    parser.add_argument("--areal", action="store_true",
                        help="an areal reduction per subcatchment: rain per subcatchment")
    args = parser.parse_args(argv)
    paths = make_inputs(default_out_dir(args.cells, args.polygons), n_cells=args.cells,
                        n_polygons=args.polygons)
    project = with_areal_reduction(paths.project) if args.areal else paths.project
    banded = with_uncertainty(project, args.samples)
    print(f"called as: python benchmarks/bench_uncertainty.py --cells {args.cells} "
          f"--polygons {args.polygons} --samples {args.samples} --repeat {args.repeat}"
          + (" --areal" if args.areal else ""))
    print(f"{'run':>12} {'wall s':>8} {'peak MB':>8} {'engine s':>9} {'bands s':>8} "
          f"{'bands/engine':>13} {'peak/budget':>12}")
    for _ in range(args.repeat):
        plain = measured(project)
        unc = measured(banded)
        for name, r in (("plain", plain), (f"{args.samples} samples", unc)):
            ratio = r["bands_s"] / plain["engine_s"] if plain["engine_s"] else float("nan")
            print(f"{name:>12} {r['wall_s']:>8.1f} {r['peak_mb']:>8.0f} {r['engine_s']:>9.2f} "
                  f"{r['bands_s']:>8.2f} {ratio:>13.2f} {r['peak_mb'] / r['budget_mb']:>12.2f}")
    print("bands/engine: time of the uncertainty work (distinct parts and ranges in every chunk, "
          "the run-wide sample and one-at-a-time runs, each chunk's bands) over the plain run's "
          "loss-engine time (target <= 20 for 100 samples); peak/budget: "
          "peak resident memory over [project] memory_budget_mb (target <= 1)")


if __name__ == "__main__":
    main()
