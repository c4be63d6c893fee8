"""Overlay race: gisrun's exact overlay against exactextract, tuned and called the default way.

Every contender computes the exact covered area of every subcatchment x soil class on the soil
raster of a set made by ``make_inputs.py`` (partial cells at polygon edges count by their
covered share). Each call runs in a fresh process, so its peak resident memory is its own;
rounds are interleaved (every contender once per round, the order rotating), so a shared
machine's load falls on all of them alike. The ratio gisrun / exactextract is taken within each
round and its median printed.

Contenders (the script prints exactly how each is called):

- ``gisrun``: ``compute_unit_areas`` on the polygons and the soil raster.
- ``exactextract tuned``: exactextract's fastest configuration found: polygons handed over as
  WKB by a small ``FeatureSource`` subclass, a ``RasterSource`` subclass that reads plain
  (unmasked) windows with rasterio, a ``Writer`` subclass that keeps results in lists of numpy
  arrays, ``strategy="raster-sequential"``.
- ``exactextract default``: ``exact_extract(path, GeoDataFrame, ops, output="pandas")``, the
  default strategy (feature-sequential).
- ``rasterstats`` (``--with-rasterstats``, needs the ``bench`` extra): categorical counts of
  cell centres, not exact; slow.

After the first round the results are checked against each other: each subcatchment's covered
area and each (subcatchment, class) area must agree to 1e-8 of the subcatchment's area.

    python benchmarks/bench_overlay.py                       # sets default and edge-heavy, 3 rounds
    python benchmarks/bench_overlay.py --set edge-heavy --once
    python benchmarks/bench_overlay.py --set large --rounds 2
    python benchmarks/bench_overlay.py --set small --once    # a quick look (2000 x 2000 cells)
"""

from __future__ import annotations

import argparse
import importlib
import json
import os
import platform
import resource
import statistics
import subprocess
import sys
import time
from pathlib import Path

import make_inputs as mi
import numpy as np

HERE = Path(__file__).resolve().parent
SETS = {  # name -> make_inputs arguments and the folder the files live in
    "small": dict(n_cells=2000, n_polygons=2000, vertex_spacing_m=11.0),
    "default": dict(n_cells=8000, n_polygons=10_000),
    "many": dict(n_cells=8000, n_polygons=100_000),
    "large": dict(n_cells=20_000, n_polygons=100_000),
    "edge-heavy": dict(mi.EDGE_HEAVY),
}
SOIL_CODES = {code: label for code, (label, _) in mi.SOIL_CLASSES.items()}
EE_OPS = ["unique", "frac", "count"]  # classes, their shares of the covered area, covered cells
CALLS = {
    "gisrun": "compute_unit_areas(gdf, read_class_raster(soil_tif, codes=SOIL_CODES), "
              "soil_codes=SOIL_CODES, nodata_rule='omit', max_nodata_fraction=1.0)",
    "exactextract tuned": f"exact_extract(PlainWindows(soil_tif), WkbFeatures(shapely.to_wkb("
                          f"gdf.geometry.values), crs_wkt), {EE_OPS}, include_cols=['index'], "
                          "strategy='raster-sequential', output=ArrayWriter())",
    "exactextract default": f"exact_extract(str(soil_tif), gdf, {EE_OPS}, "
                            "include_cols=['subcatchment_code'], output='pandas')",
    "rasterstats": "zonal_stats(gdf, str(soil_tif), categorical=True, nodata=255)",
}


def set_folder(name: str) -> Path:
    """Where a set's files live (the plain sets share bench_run.py's folders)."""
    spec = SETS[name]
    if name == "small":
        return HERE / "scratch" / "overlay_small"
    return mi.default_out_dir(spec["n_cells"], spec["n_polygons"],
                              edge_heavy=name == "edge-heavy")


def prepare(name: str) -> mi.InputPaths:
    """Make (or reuse) a set's inputs."""
    return mi.make_inputs(set_folder(name), **SETS[name])


# --- contenders (each runs in a child process) ---

def _load(paths: mi.InputPaths):
    import pyogrio

    return pyogrio.read_dataframe(paths.subcatchments, layer="subcatchments")


def run_gisrun(paths: mi.InputPaths, gdf) -> dict[str, np.ndarray]:
    """gisrun's overlay; areas per (polygon, soil code) and covered area per polygon."""
    from gisrun.grid.overlay import compute_unit_areas
    from gisrun.io.raster import read_class_raster

    gdf = gdf.rename(columns={"subcatchment_code": "subcatchment_id"})
    soil = read_class_raster(paths.soil, codes=SOIL_CODES)
    units, cov, _ = compute_unit_areas(gdf, soil, soil_codes=SOIL_CODES, nodata_rule="omit",
                                       max_nodata_fraction=1.0)
    index = {sid: i for i, sid in enumerate(gdf["subcatchment_id"])}
    code = {label: c for c, label in SOIL_CODES.items()}
    return {"poly": units["subcatchment_id"].map(index).to_numpy(np.int64),
            "code": units["soil_class"].map(code).to_numpy(np.int64),
            "area_m2": units["area_m2"].to_numpy(float),
            "covered_m2": cov["covered_area_m2"].to_numpy(float)}


def _ee_classes():
    """The three small classes of the tuned exactextract call (built on first use)."""
    import rasterio
    from exactextract._exactextract import Feature
    from exactextract.feature import FeatureSource
    from exactextract.raster import RasterSource
    from exactextract.writer import Writer
    from rasterio.windows import Window

    class WkbFeature(Feature):
        def __init__(self, index: int, wkb: bytes) -> None:
            Feature.__init__(self)
            self.index, self.wkb = index, wkb

        def geometry(self) -> bytes:
            return self.wkb

        def get(self, name: str) -> int:
            return self.index

        def fields(self) -> list[str]:
            return ["index"]

    class WkbFeatures(FeatureSource):
        def __init__(self, wkbs, wkt: str) -> None:
            super().__init__()
            self.wkbs, self.wkt = wkbs, wkt

        def count(self) -> int:
            return len(self.wkbs)

        def __iter__(self):
            return (WkbFeature(i, w) for i, w in enumerate(self.wkbs))

        def srs_wkt(self) -> str:
            return self.wkt

    class PlainWindows(RasterSource):
        def __init__(self, path) -> None:
            super().__init__()
            self.ds = rasterio.open(path)

        def res(self):
            return self.ds.res

        def extent(self):
            b = self.ds.bounds
            return (b.left, b.bottom, b.right, b.top)

        def nodata_value(self):
            return int(self.ds.nodata)

        def srs_wkt(self) -> str:
            return self.ds.crs.to_wkt()

        def read_window(self, x0, y0, nx, ny):
            return self.ds.read(1, window=Window(x0, y0, nx, ny))

    class Row(Feature):
        def __init__(self) -> None:
            Feature.__init__(self)
            self.values: dict = {}

        def set(self, name, value) -> None:
            self.values[name] = value

        def get(self, name):
            return self.values[name]

        def fields(self) -> list[str]:
            return list(self.values)

        def geometry(self):
            return None

        def set_geometry(self, geom) -> None:
            pass

    class ArrayWriter(Writer):
        def __init__(self) -> None:
            super().__init__()
            self.row, self.columns = Row(), {}

        def add_operation(self, op) -> None:
            self.columns[op.name] = []

        def add_column(self, name) -> None:
            self.columns[name] = []

        def write(self, feature) -> None:
            feature.copy_to(self.row)
            for name, value in self.row.values.items():
                self.columns[name].append(value)

        def features(self) -> dict:
            return self.columns

    return WkbFeatures, PlainWindows, ArrayWriter


def _ee_result(index, unique, frac, count, cell_m2: float) -> dict[str, np.ndarray]:
    n = np.array([len(u) for u in unique])
    count = np.asarray(count, float)
    return {"poly": np.repeat(np.asarray(index, np.int64), n),
            "code": np.concatenate(unique).astype(np.int64),
            "area_m2": np.concatenate(frac) * np.repeat(count, n) * cell_m2,
            "covered_m2": count[np.argsort(index)] * cell_m2}


def run_ee_tuned(paths: mi.InputPaths, gdf) -> dict[str, np.ndarray]:
    import shapely
    from exactextract import exact_extract

    wkb_features, plain_windows, array_writer = _ee_classes()
    raster = plain_windows(paths.soil)
    cols = exact_extract(raster, wkb_features(shapely.to_wkb(gdf.geometry.values),
                                              gdf.crs.to_wkt()),
                         EE_OPS, include_cols=["index"], strategy="raster-sequential",
                         output=array_writer())
    cell_m2 = abs(raster.ds.res[0] * raster.ds.res[1])
    return _ee_result(cols["index"], cols["unique"], cols["frac"], cols["count"], cell_m2)


def run_ee_default(paths: mi.InputPaths, gdf) -> dict[str, np.ndarray]:
    import rasterio
    from exactextract import exact_extract

    df = exact_extract(str(paths.soil), gdf, EE_OPS, include_cols=["subcatchment_code"],
                       output="pandas")
    with rasterio.open(paths.soil) as src:
        cell_m2 = abs(src.res[0] * src.res[1])
    index = np.arange(len(df))  # one row per feature, in the input order
    return _ee_result(index, df["unique"], df["frac"], df["count"], cell_m2)


def run_rasterstats(paths: mi.InputPaths, gdf) -> None:
    from rasterstats import zonal_stats

    zonal_stats(gdf, str(paths.soil), categorical=True, nodata=255)


IMPORTS = {  # modules a contender needs, imported before its clock and memory baseline start
    "gisrun": ["gisrun.grid.overlay", "gisrun.io.raster"],
    "exactextract tuned": ["exactextract", "rasterio", "shapely"],
    "exactextract default": ["exactextract", "rasterio"],
    "rasterstats": ["rasterstats"],
}
RUNNERS = {"gisrun": run_gisrun, "exactextract tuned": run_ee_tuned,
           "exactextract default": run_ee_default, "rasterstats": run_rasterstats}


def _rss_mb() -> float:
    with open("/proc/self/status", encoding="ascii") as f:
        line = next(x for x in f if x.startswith("VmRSS:"))
    return int(line.split()[1]) / 1024


def _child(contender: str, set_name: str, save: str) -> None:
    paths = mi.InputPaths.in_folder(set_folder(set_name))
    gdf = _load(paths)
    for module in IMPORTS[contender]:
        importlib.import_module(module)
    loaded_mb = _rss_mb()
    cpu0, t0 = _cpu_s(), time.perf_counter()
    result = RUNNERS[contender](paths, gdf)
    seconds, cpu = time.perf_counter() - t0, _cpu_s() - cpu0
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    if save and result is not None:
        np.savez(save, **result)
    print(json.dumps({"seconds": seconds, "cpu_s": cpu, "peak_mb": peak_mb,
                      "loaded_mb": loaded_mb}))


def _cpu_s() -> float:
    """CPU seconds (user + system) this process has used so far."""
    use = resource.getrusage(resource.RUSAGE_SELF)
    return use.ru_utime + use.ru_stime


def measure(contender: str, set_name: str, save: str = "") -> dict[str, float]:
    """One contender on one set in a fresh process: wall and CPU seconds, peak and after-load RSS
    (MB)."""
    proc = subprocess.run([sys.executable, __file__, "--child", contender, set_name, save],
                          capture_output=True, text=True, check=False, cwd=HERE)
    if proc.returncode != 0:
        raise RuntimeError(f"{contender} on {set_name} failed:\n{proc.stderr[-3000:]}")
    return json.loads(proc.stdout.strip().splitlines()[-1])


# --- agreement and the race ---

def agreement(ours: Path, theirs: Path, areas: np.ndarray) -> tuple[float, float]:
    """Largest differences, relative to the subcatchment's area: covered area, unit area."""
    a, b = np.load(ours), np.load(theirs)
    covered = np.max(np.abs(a["covered_m2"] - b["covered_m2"]) / areas)
    n_codes = 256
    key_a, key_b = a["poly"] * n_codes + a["code"], b["poly"] * n_codes + b["code"]
    keys = np.union1d(key_a, key_b)
    per_a = np.zeros(keys.size)
    per_b = np.zeros(keys.size)
    np.add.at(per_a, np.searchsorted(keys, key_a), a["area_m2"])
    np.add.at(per_b, np.searchsorted(keys, key_b), b["area_m2"])
    unit = np.max(np.abs(per_a - per_b) / areas[keys // n_codes])
    return float(covered), float(unit)


def race(set_name: str, contenders: list[str], rounds: int) -> dict[str, list[dict]]:
    """Interleaved rounds; after the first, check every exact contender against gisrun."""
    scratch = HERE / "scratch"
    runs: dict[str, list[dict]] = {c: [] for c in contenders}
    for r in range(rounds):
        order = contenders[r % len(contenders):] + contenders[:r % len(contenders)]
        for c in order:
            save = str(scratch / f"race_{c.replace(' ', '_')}.npz") if r == 0 else ""
            runs[c].append(measure(c, set_name, save))
            print(f"  round {r + 1} {c:22s} {runs[c][-1]['seconds']:8.2f} s wall "
                  f"{runs[c][-1]['cpu_s']:8.2f} s CPU", flush=True)
        if r == 0:
            _check(set_name, contenders, scratch)
    return runs


def _check(set_name: str, contenders: list[str], scratch: Path) -> None:
    import shapely

    areas = shapely.area(_load(mi.InputPaths.in_folder(set_folder(set_name))).geometry.values)
    for c in contenders:
        if c.startswith("exactextract"):
            cov, unit = agreement(scratch / "race_gisrun.npz",
                                  scratch / f"race_{c.replace(' ', '_')}.npz", areas)
            verdict = "agree" if max(cov, unit) <= 1e-8 else "DISAGREE"
            print(f"  gisrun vs {c}: covered area max diff {cov:.1e}, unit area max diff "
                  f"{unit:.1e} of the subcatchment's area: {verdict} (limit 1e-8)")


def report(set_name: str, runs: dict[str, list[dict]]) -> None:
    spec = SETS[set_name]
    print(f"\nset {set_name}: {spec['n_cells']} x {spec['n_cells']} cells, "
          f"{spec['n_polygons']} polygons; {len(runs['gisrun'])} round(s)")
    print(f"  {'contender':22s} {'median s':>9s} {'min s':>8s} {'median CPU s':>13s} "
          f"{'peak RSS MB':>12s} {'after load MB':>14s}")
    for c, rs in runs.items():
        s = [r["seconds"] for r in rs]
        print(f"  {c:22s} {statistics.median(s):9.2f} {min(s):8.2f} "
              f"{statistics.median(r['cpu_s'] for r in rs):13.2f} "
              f"{max(r['peak_mb'] for r in rs):12.0f} {max(r['loaded_mb'] for r in rs):14.0f}")
    for c in runs:
        if c == "gisrun":
            continue
        for what, key in (("wall", "seconds"), ("CPU", "cpu_s")):
            ratios = [a[key] / b[key] for a, b in zip(runs["gisrun"], runs[c], strict=True)]
            print(f"  ratio gisrun / {c}, {what} time: median {statistics.median(ratios):.2f} "
                  f"(rounds {', '.join(f'{x:.2f}' for x in ratios)})")
    if "exactextract tuned" in runs:
        peak = max(r["peak_mb"] for r in runs["gisrun"])
        theirs = max(r["peak_mb"] for r in runs["exactextract tuned"])
        print(f"  peak RSS gisrun / exactextract tuned: {peak:.0f} / {theirs:.0f} MB")


def _machine() -> str:
    cpu = next((line.split(":", 1)[1].strip() for line in open("/proc/cpuinfo", encoding="utf-8")
                if line.startswith("model name")), platform.processor())
    load = ", ".join(f"{x:.1f}" for x in os.getloadavg())
    return (f"{time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}; {cpu}, "
            f"{os.cpu_count()} cores; Python {platform.python_version()}; load average {load}")


def main() -> int:
    if len(sys.argv) > 2 and sys.argv[1] == "--child":
        _child(*sys.argv[2:5])
        return 0
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--set", nargs="+", choices=list(SETS), default=["default", "edge-heavy"],
                        help="input sets to race on (default: default edge-heavy)")
    parser.add_argument("--rounds", type=int, default=3, help="interleaved rounds (default 3)")
    parser.add_argument("--once", action="store_true", help="one round (a quick look)")
    parser.add_argument("--no-default", action="store_true",
                        help="leave out exactextract called the default way")
    parser.add_argument("--with-rasterstats", action="store_true",
                        help="add rasterstats (the bench extra; slow, not exact)")
    opts = parser.parse_args()
    contenders = ["gisrun", "exactextract tuned"]
    contenders += [] if opts.no_default else ["exactextract default"]
    contenders += ["rasterstats"] if opts.with_rasterstats else []
    rounds = 1 if opts.once else opts.rounds
    print(f"machine: {_machine()}")
    for c in contenders:
        print(f"{c}: {CALLS[c]}")
    for name in opts.set:
        paths = prepare(name)
        print(f"\nracing on set {name} ({paths.folder})", flush=True)
        report(name, race(name, contenders, rounds))
    print(f"\nend: load average {', '.join(f'{x:.1f}' for x in os.getloadavg())}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
