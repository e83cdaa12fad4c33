"""Throughput of the random-excitation Monte Carlo and the time it needs for a ±5 % interval.

Run:  python tests/bench/bench_random.py [--case cases/fan-housing-coil.toml] [--realisations 32]

Uses the demo case's reduced model and band excitation.  Prints, after a warm-up that compiles
the integrator (cached on disk afterwards):
- realisation-seconds per wall-second: simulated seconds × realisations over wall time, for the
  design and its magnet-free baseline run side by side, as `harvester power` runs them;
- the same for the integrator alone (excitation synthesis excluded), to show where time goes;
- wall time to a ±5 % confidence interval, with the run length it chose;
- peak resident memory of this process.
Targets: ±5 % in < 10 s, peak memory < 1 GB on 2 cores.
"""

from __future__ import annotations

import argparse
import math
import resource
import time
from pathlib import Path

import numba
import numpy as np

from harvester.analysis.random_power import random_mean_power
from harvester.build import build
from harvester.case.load import load_case
from harvester.case.signals import band_psd
from harvester.dynamics.excitation import acceleration_blocks
from harvester.dynamics.integrator import advance_with_input, new_input_stats

ROOT = Path(__file__).resolve().parents[2]  # tests/bench/ → the repository


def demo_model_and_band(case_path: Path):
    loaded = load_case(case_path)
    band = loaded.case.excitation.band
    if band is None:
        raise SystemExit(f"{case_path} has no band excitation")
    return build(loaded).model, band_psd(band.low, band.high, band.rms)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--case", type=Path, default=ROOT / "cases" / "fan-housing-coil.toml")
    parser.add_argument("--realisations", type=int, default=32)
    args = parser.parse_args()
    model, psd = demo_model_and_band(args.case)
    n = args.realisations
    print(f"case {args.case.name}: {psd.source}; numba threads {numba.get_num_threads()}")

    random_mean_power(model, psd, realisations=n, duration_s=0.5)  # compile / load the cache

    duration = 20.0
    start = time.perf_counter()
    fixed = random_mean_power(model, psd, realisations=n, duration_s=duration)
    wall = time.perf_counter() - start
    simulated = (fixed.transient_s + fixed.design.averaging_time_s) * n * 2  # with baseline
    print(
        f"Monte Carlo (design + baseline): {simulated / wall:,.0f} realisation-s per wall-s "
        f"(step {fixed.step_s:.3g} s, {n} realisations)"
    )

    dt = fixed.step_s
    steps = 4096
    stream = acceleration_blocks(psd, dt, steps, n, np.random.default_rng(0), 0.1)
    blocks = [next(stream) for _ in range(8)]
    state = np.zeros((n, 3))
    stats = new_input_stats(n)
    start = time.perf_counter()
    for accel in blocks:
        advance_with_input(model, state, accel, dt, stats)
    wall = time.perf_counter() - start
    print(
        f"integrator alone: {len(blocks) * steps * dt * n / wall:,.0f} realisation-s per "
        f"wall-s ({len(blocks) * steps * n / wall / 1e6:.1f} M steps/s)"
    )

    start = time.perf_counter()
    result = random_mean_power(model, psd, realisations=n, target_relative_half_width=0.05)
    wall = time.perf_counter() - start
    d = result.to_dict()
    print(
        f"±5 % interval: {wall:.2f} s wall; averaged {d['averaging_time_s']:.3g} s after "
        f"{d['transient_s']:.3g} s transient; P = {1e6 * d['mean_power_W']:.4g} µW "
        f"[{1e6 * d['ci95_W'][0]:.4g}, {1e6 * d['ci95_W'][1]:.4g}], baseline "
        f"{1e6 * d['linear_power_W']:.4g} µW, hops {d['hop_rate_per_s']:.3g}/s, "
        f"target reached: {d['target_reached']}"
    )
    for warning in d["warnings"]:
        print(f"  warning: {warning}")
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    verdict = "ok" if wall < 10.0 and peak_mb < 1024.0 else "over target"
    print(f"peak RSS {peak_mb:.0f} MB; target < 10 s and < 1024 MB: {verdict}")
    if not math.isfinite(d["mean_power_W"]):
        raise SystemExit("non-finite power")


if __name__ == "__main__":
    main()
