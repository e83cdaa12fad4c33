"""Wall time and peak memory of whole commands on the demo cases, against a bare interpreter.

Run:  python bench/bench_commands.py [--repeat 3]

Each command runs as a user runs it (a fresh process, warm numba cache after the first run);
the baseline is `python -c pass` measured in the same run, so the ratio says how much of the
wait is ours.  Targets: `wells` < 2 s; `hop` (30 frequencies) < 5 s; `power` (±5 % CI) < 10 s;
`note` (largest demo) < 20 s; peak memory < 1 GB.
"""

from __future__ import annotations

import argparse
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
CASES = ROOT / "cases"

COMMANDS = [
    ("wells", ["wells", str(CASES / "pump-skid-piezo.toml")]),
    ("check", ["check", str(CASES / "fan-housing-coil.toml")]),
]
OPTIONAL = [
    ("hop", ["hop", str(CASES / "pump-skid-piezo.toml")]),
    ("power (tone)", ["power", str(CASES / "pump-skid-piezo.toml")]),
    ("power (band)", ["power", str(CASES / "fan-housing-coil.toml")]),
]


def timed(argv: list[str]) -> tuple[float, float, int]:
    """Wall seconds, peak RSS [MB] of the child, exit code."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    start = time.perf_counter()
    done = subprocess.run(argv, capture_output=True, text=True, cwd=ROOT)
    wall = time.perf_counter() - start
    after = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    return wall, max(after, before) / 1024.0, done.returncode


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    base = min(timed([sys.executable, "-c", "pass"])[0] for _ in range(args.repeat))
    print(f"{'command':<16} {'best wall [s]':>13} {'x bare python':>14} {'peak RSS [MB]':>14}")
    print(f"{'python -c pass':<16} {base:13.3f} {1.0:14.1f}")
    with tempfile.TemporaryDirectory() as out:
        note = [("note", ["note", str(CASES / "pump-skid-piezo.toml"), "--out", out])]
        for label, argv in COMMANDS + OPTIONAL + note:
            runs = [timed([sys.executable, "-m", "harvester", *argv, "--format", "json"]
                          if label != "note" else [sys.executable, "-m", "harvester", *argv])
                    for _ in range(args.repeat)]
            if any(code == 2 and label not in ("wells", "check") for _, _, code in runs):
                print(f"{label:<16} {'(command not available)':>13}")
                continue
            best = min(r[0] for r in runs)
            print(f"{label:<16} {best:13.3f} {best / base:14.1f} {max(r[1] for r in runs):14.0f}")


if __name__ == "__main__":
    main()
