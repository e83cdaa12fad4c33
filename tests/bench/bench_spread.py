"""Wall time of `harvester spread` on the quick-start demo, against one build in this process.

Run:  python tests/bench/bench_spread.py [--samples 500] [--workers 2] [--gap "10.3 mm"]

The spread runs as a user runs it (a fresh process, warm numba cache): `--samples` builds of
cases/oscillating-conveyor-coil.toml on `--workers` local processes, each with its statics,
the hop onset at the tone's frequency, the power of the orbit the beam at rest settles on and
its checks, plus the reference power and every check (the full orbit mix and the Miner life)
on the default subsample of 20 builds.  The baseline, measured in the same run, is one build
evaluated in this process (median of five, after a warm-up): the ideal wall time is
samples × baseline / workers, and the ratio says what the process start-up, the one-at-a-time
runs, the subsample and the executor add.  Target (2 cores): 500 builds in under 60 s.
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]  # tests/bench/ → the repository
CASE = ROOT / "cases" / "oscillating-conveyor-coil.toml"
TARGET_S = 60.0


def one_build_s(gap_m: float | None) -> float:
    """Median wall time of one sampled build (the nominal one) in this process [s]."""
    from harvester.analysis.tolerances import resolve_tolerances
    from harvester.case.load import load_case
    from harvester.commands.spread import SampleTask, _nominal_load, evaluate_sample

    loaded = load_case(CASE)
    tolerances = resolve_tolerances(loaded)
    probe = SampleTask(case_path=str(CASE), gap_m=gap_m,
                       paths=tuple(t.path for t in tolerances),
                       values=tuple(t.nominal for t in tolerances), seed=0,
                       load_ohm=_nominal_load(loaded, gap_m, "exact"))
    hint = evaluate_sample(probe).onset_mps2
    task = SampleTask(**{**probe.__dict__, "onset_hint_mps2": hint})
    times = []
    for _ in range(6):
        start = time.perf_counter()
        evaluate_sample(task)
        times.append(time.perf_counter() - start)
    return statistics.median(times[1:])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--samples", type=int, default=500)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--gap", default="10.3 mm")
    args = parser.parse_args()
    from harvester.units import to_si

    base = one_build_s(to_si(args.gap, "length"))
    argv = [sys.executable, "-m", "harvester", "spread", str(CASE), "--samples",
            str(args.samples), "--workers", str(args.workers), "--gap", args.gap,
            "--format", "json"]
    start = time.perf_counter()
    done = subprocess.run(argv, capture_output=True, text=True, cwd=ROOT)
    wall = time.perf_counter() - start
    if done.returncode:
        sys.exit(done.stderr)
    ideal = args.samples * base / args.workers
    print(f"one build in this process (baseline): {base:.3f} s")
    print(f"spread, {args.samples} builds on {args.workers} workers: {wall:.1f} s wall "
          f"(target < {TARGET_S:g} s: {'met' if wall < TARGET_S else 'MISSED'})")
    print(f"ratio to samples × baseline / workers ({ideal:.1f} s): {wall / ideal:.2f}")


if __name__ == "__main__":
    main()
