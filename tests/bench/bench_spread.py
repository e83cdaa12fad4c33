"""Wall time of `harvester spread` on the quick-start demo, against one build in this process.

Run:  python tests/bench/bench_spread.py [--samples 500] [--workers 2] [--gap "10.3 mm"]

The spread runs as a user runs it (a fresh process, warm numba cache): `--samples` builds of
cases/oscillating-conveyor-coil.toml on `--workers` local processes, each with its statics,
the hop onset at the tone's frequency, the power of the orbit the beam at rest settles on and
its checks, plus the reference power and every check (the full orbit mix and the Miner life)
on the default subsample of 20 builds.  The baseline, measured in the same run, is the mean
time of one sampled build in this process on one thread (as each worker runs): the ideal wall
time is samples × baseline / workers, and the ratio says what the process start-up, the
one-at-a-time runs, the subsample and the executor add.  On a busy machine the wall time says
little; the CPU time of the command and its worker processes, divided by the workers, is what
it takes on cores of its own, and the target is judged on the smaller of the two.  Target
(2 cores): 500 builds in under 60 s.  The ratio is printed beside the vector width numba's
loops get on this CPU (`bench_integrator`).
"""

from __future__ import annotations

import argparse
import resource
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]  # tests/bench/ → the repository
CASE = ROOT / "cases" / "oscillating-conveyor-coil.toml"
TARGET_S = 60.0
BASELINE_BUILDS = 24  # sampled builds timed for the baseline: their mean to about 10 %


def one_build_s(gap_m: float | None, count: int = BASELINE_BUILDS) -> float:
    """Mean wall time of one sampled build in this process on one numba thread, as a pool
    worker runs it [s]: the first `count` builds the spread itself draws (seed 0), after a
    warm-up on the nominal one."""
    import numba

    from harvester.analysis.tolerances import draw_values, resolve_tolerances, sample_seeds
    from harvester.case.load import load_case
    from harvester.commands.spread import SampleTask, _nominal_load, evaluate_sample

    numba.set_num_threads(1)
    loaded = load_case(CASE)
    tolerances = resolve_tolerances(loaded)
    probe = SampleTask(case_path=str(CASE), gap_m=gap_m,
                       paths=tuple(t.path for t in tolerances),
                       values=tuple(t.nominal for t in tolerances), seed=0,
                       load_ohm=_nominal_load(loaded, gap_m, "exact"))
    hint = evaluate_sample(probe).onset_mps2
    tasks = [SampleTask(**{**probe.__dict__, "onset_hint_mps2": hint, "values": tuple(v),
                           "seed": int(s)})
             for v, s in zip(draw_values(tolerances, count, 0), sample_seeds(count, 0))]
    start = time.perf_counter()
    for task in tasks:
        evaluate_sample(task)
    return (time.perf_counter() - start) / count


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--samples", type=int, default=500)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--gap", default="10.3 mm")
    args = parser.parse_args()
    from harvester.units import to_si

    sys.path.insert(0, str(Path(__file__).resolve().parent))
    from bench_integrator import vector_width

    target, width = vector_width()
    base = one_build_s(to_si(args.gap, "length"))
    argv = [sys.executable, "-m", "harvester", "spread", str(CASE), "--samples",
            str(args.samples), "--workers", str(args.workers), "--gap", args.gap,
            "--format", "json"]
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    start = time.perf_counter()
    done = subprocess.run(argv, capture_output=True, text=True, cwd=ROOT)
    wall = time.perf_counter() - start
    after = resource.getrusage(resource.RUSAGE_CHILDREN)  # the pool's processes included
    cpu = (after.ru_utime + after.ru_stime) - (before.ru_utime + before.ru_stime)
    if done.returncode:
        sys.exit(done.stderr)
    ideal = args.samples * base / args.workers
    alone = cpu / args.workers  # the wall time with the cores to itself
    print(f"one sampled build in this process, one thread (baseline): {base:.3f} s")
    print(f"spread, {args.samples} builds on {args.workers} workers: {wall:.1f} s wall, "
          f"{cpu:.1f} CPU-s, {alone:.1f} s on {args.workers} otherwise idle cores "
          f"(target < {TARGET_S:g} s: {'met' if min(wall, alone) < TARGET_S else 'MISSED'})")
    print(f"ratio to samples × baseline / workers ({ideal:.1f} s): {wall / ideal:.2f} wall, "
          f"{alone / ideal:.2f} on idle cores [{target}; compiled loops use {width}-bit "
          "vectors]")


if __name__ == "__main__":
    main()
