"""Engine throughput against a plain numpy streaming pass, measured in one run.

Runs every loss method on ``--units`` units (all parameter sets distinct, so
no de-duplication helps) through a ``--steps`` step storm and prints

* throughput in unit-steps per second, and
* the ratio of engine time to one numpy streaming pass ``a * 1.0001 + b`` over a
  float64 array of the same size (units x steps), timed in the same run.

Target: Green-Ampt within 10 passes. Usage::

    python benchmarks/bench_engine.py [--units 100000] [--steps 288] [--repeat 2]
                                      [--methods green_ampt ...]
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

try:
    from gisrun.engine import ENGINES, run_losses
except ImportError:  # run from a checkout without installing
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    from gisrun.engine import ENGINES, run_losses

TARGET_PASSES = 10.0


def make_units(n: int, rng: np.random.Generator) -> pd.DataFrame:
    """Distinct, plausible SI parameters for every method (invented for the benchmark)."""
    mm_h = 1e-3 / 3600.0
    return pd.DataFrame({
        "ks_m_per_s": rng.uniform(0.5, 30.0, n) * mm_h,
        "suction_head_m": rng.uniform(0.05, 0.3, n),
        "moisture_deficit": rng.uniform(0.1, 0.4, n),
        "depression_storage_m": rng.uniform(0.0, 5e-3, n),
        "horton_f0_m_per_s": rng.uniform(50.0, 120.0, n) * mm_h,
        "horton_fc_m_per_s": rng.uniform(1.0, 10.0, n) * mm_h,
        "horton_decay_per_s": rng.uniform(2.0, 5.0, n) / 3600.0,
        "horton_recovery_per_s": rng.uniform(0.0, 0.5, n) / 86400.0,
        "curve_number": rng.uniform(55.0, 98.0, n),
        "initial_loss_m": rng.uniform(0.0, 0.02, n),
        "constant_loss_m_per_s": rng.uniform(0.5, 10.0, n) * mm_h,
        "phi_index_m_per_s": rng.uniform(0.5, 10.0, n) * mm_h,
    })


def make_storm(n_steps: int, dt_s: float) -> np.ndarray:
    """A peaked storm of 100 mm with a dry tail (invented shape)."""
    t = (np.arange(n_steps) + 0.5) / n_steps
    shape = np.exp(-((t - 0.4) / 0.08) ** 2) + 0.05 * (t < 0.7)
    return 0.1 * shape / shape.sum()


def best_time(fn, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--units", type=int, default=100_000)
    parser.add_argument("--steps", type=int, default=288)
    parser.add_argument("--repeat", type=int, default=2, help="timed runs per method (best kept)")
    parser.add_argument("--dt-s", type=float, default=300.0)
    parser.add_argument("--methods", nargs="+", choices=sorted(ENGINES), default=list(ENGINES),
                        help="loss methods to time (default: all)")
    args = parser.parse_args()

    rng = np.random.default_rng(20240601)
    units = make_units(args.units, rng)
    rain = make_storm(args.steps, args.dt_s)
    a = rng.random((args.steps, args.units))
    b = rng.random((args.steps, args.units))
    unit_steps = args.units * args.steps
    print(f"{args.units} units x {args.steps} steps = {unit_steps:.3g} unit-steps "
          "(all parameter sets distinct; de-duplication off)")
    ratios = {}
    for name in args.methods:
        # interleave the reference pass with the engine runs so that both see the same load
        stream_s, engine_s = [], []
        for _ in range(max(1, args.repeat)):
            stream_s.append(best_time(lambda: a * 1.0001 + b, 3))
            engine_s.append(best_time(
                lambda name=name: run_losses(units, rain, args.dt_s, method=name,
                                             deduplicate=False), 1))
        ratios[name] = min(engine_s) / min(stream_s)
        print(f"{name:14s} {min(engine_s):7.2f} s  {unit_steps / min(engine_s):10.3g} "
              f"unit-steps/s  streaming pass {min(stream_s) * 1e3:6.1f} ms  "
              f"ratio {ratios[name]:6.1f}")
    if "green_ampt" in ratios:
        verdict = "meets" if ratios["green_ampt"] <= TARGET_PASSES else "misses"
        print(f"green_ampt ratio {ratios['green_ampt']:.1f} {verdict} the target of "
              f"{TARGET_PASSES:.0f} streaming passes")


if __name__ == "__main__":
    main()
