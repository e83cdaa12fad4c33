"""Time of a 200 × 200 basin map and of an up-and-down frequency sweep, against the yardstick.

Run:  python tests/bench/bench_sweeps.py [--case cases/oscillating-conveyor-coil.toml]

The case's design under its tone (a demo with a tone and a [study] frequency grid):

* `basin_map` with 200 × 200 starts (one ensemble through `simulate_tone`, then the orbit
  classes and attractors): wall time, RK4 steps per second, and that rate against the blocked
  yardstick of `bench_integrator.py` measured in the same run;
* `sweep_result`: up and down over the study's frequencies at the default rate, with the
  twins at twice the rate (as `harvester sweep` runs it): wall time.

Targets (2 cores): the basin map in under 10 s, the sweep in under 20 s.  A busy machine slows
everything alike, so each wall time is also given at the yardstick's rate of the figures in
DEVELOPERS.md (REFERENCE_YARDSTICK): wall × (yardstick rate now / reference rate), which is what
the target is held to.
"""

from __future__ import annotations

import argparse
import math
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_commands import CASES  # noqa: E402
from bench_integrator import DELTA, OMEGA, STEPS, blocked_yardstick_rk4  # noqa: E402

# blocked yardstick, steps/s, 2 cores, as recorded in DEVELOPERS.md (2026-12-02)
REFERENCE_YARDSTICK = 3.7e9
BASIN_TARGET_S, SWEEP_TARGET_S = 10.0, 20.0


def yardstick_rate(n: int = 8192, periods: int = 24, repeats: int = 5) -> float:
    """Steps per second of the blocked yardstick on the canonical double well, best of
    `repeats` (after a warm-up that compiles or loads it)."""
    rng = np.random.default_rng(0)
    x0, v0 = rng.uniform(-1.5, 1.5, n), rng.uniform(-1.0, 1.0, n)
    gamma = rng.uniform(0.1, 0.4, n)
    dt = 2.0 * math.pi / (OMEGA * STEPS)
    phase_cos = np.cos(OMEGA * dt * 0.5 * np.arange(2 * STEPS + 1))
    blocked_yardstick_rk4(x0[:8].copy(), v0[:8].copy(), gamma[:8], phase_cos, dt, DELTA, STEPS, 1)
    best = math.inf
    for _ in range(repeats):
        start = time.perf_counter()
        blocked_yardstick_rk4(x0.copy(), v0.copy(), gamma, phase_cos, dt, DELTA, STEPS, periods)
        best = min(best, time.perf_counter() - start)
    return n * STEPS * periods / best


def best_of(run, repeats: int) -> float:
    best = math.inf
    for _ in range(repeats):
        start = time.perf_counter()
        run()
        best = min(best, time.perf_counter() - start)
    return best


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--case", type=Path, default=CASES / "oscillating-conveyor-coil.toml")
    parser.add_argument("--repeat", type=int, default=2)
    args = parser.parse_args()

    from harvester.analysis.basins import (
        GRID_POINTS,
        TRANSIENT_DECAYS,
        WINDOW_PERIODS,
        basin_map,
    )
    from harvester.analysis.thresholds import settling_periods
    from harvester.build import build
    from harvester.case.load import load_case
    from harvester.commands.hop import hop_model
    from harvester.commands.sweep import sweep_result
    from harvester.dynamics.integrator import recommended_steps_per_period

    loaded = load_case(args.case)
    tone = loaded.case.excitation.tone
    model, _ = hop_model(loaded, build(loaded))
    basin_map(model, tone.amplitude, tone.frequency, points=8)  # compile or load the kernels
    yard = yardstick_rate()
    load = yard / REFERENCE_YARDSTICK
    print(f"case {args.case.name}: tone {tone.frequency:g} Hz, {tone.amplitude:.3g} m/s²")
    print(f"blocked yardstick now {yard:.3g} steps/s; reference {REFERENCE_YARDSTICK:.3g} "
          f"(this run at {100 * load:.0f} % of it)")

    periods = (settling_periods(model, tone.frequency, e_folds=TRANSIENT_DECAYS)
               + WINDOW_PERIODS)
    steps = GRID_POINTS**2 * periods * recommended_steps_per_period(model, tone.frequency)
    wall = best_of(lambda: basin_map(model, tone.amplitude, tone.frequency), args.repeat)
    scaled = wall * load
    print(f"basin map {GRID_POINTS} × {GRID_POINTS}: {wall:.2f} s wall, {steps:.3g} RK4 steps, "
          f"{steps / wall:.3g} steps/s = {steps / wall / yard:.2f}× the yardstick; at the "
          f"reference rate {scaled:.2f} s ({'met' if scaled < BASIN_TARGET_S else 'NOT met'}: "
          f"< {BASIN_TARGET_S:g} s)")

    wall = best_of(lambda: sweep_result(loaded), args.repeat)
    scaled = wall * load
    grid = loaded.case.study.frequencies
    print(f"sweep up and down {grid.start:g}–{grid.stop:g} Hz (with the twins at twice the "
          f"rate): {wall:.2f} s wall; at the reference rate {scaled:.2f} s "
          f"({'met' if scaled < SWEEP_TARGET_S else 'NOT met'}: < {SWEEP_TARGET_S:g} s)")


if __name__ == "__main__":
    main()
