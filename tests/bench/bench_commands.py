"""Wall time and peak memory of whole commands on the demo cases, against a bare interpreter.

Run:  python tests/bench/bench_commands.py [--repeat 3]

Each command runs as a user runs it (a fresh process, warm numba cache after the first run);
the baseline is `python -c pass` measured in the same run, so the ratio says how much of the
wait is ours.  Targets: `wells` < 2 s; `hop` (30 frequencies) < 5 s; `power` (±5 % CI) < 10 s;
`note` (largest demo) < 20 s; peak memory < 1 GB.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]  # tests/bench/ → the repository
CASES = ROOT / "cases"

COMMANDS = [
    ("wells", ["wells", str(CASES / "pump-skid-piezo.toml")]),
    ("check", ["check", str(CASES / "fan-housing-coil.toml")]),
]
OPTIONAL = [
    ("hop", ["hop", str(CASES / "pump-skid-piezo.toml")]),
    ("power (tone)", ["power", str(CASES / "pump-skid-piezo.toml")]),
    ("power (band)", ["power", str(CASES / "fan-housing-coil.toml")]),
    ("compare", ["compare", str(CASES / "pump-skid-piezo.toml")]),
]


def timed(argv: list[str]) -> tuple[float, float, int]:
    """Wall seconds, peak RSS [MB] of that child process alone, exit code."""
    start = time.perf_counter()
    child = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                             cwd=ROOT)
    _, status, usage = os.wait4(child.pid, 0)
    wall = time.perf_counter() - start
    child.returncode = os.waitstatus_to_exitcode(status)
    return wall, usage.ru_maxrss / 1024.0, child.returncode


def _study_size(case: Path) -> int:
    """Candidate gaps × study frequencies of a case (0 when it has no study)."""
    import tomllib

    study = tomllib.loads(case.read_text(encoding="utf-8")).get("study", {})
    return len(study.get("gaps", [])) * study.get("frequencies", {}).get("count", 1)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    base = min(timed([sys.executable, "-c", "pass"])[0] for _ in range(args.repeat))
    print(f"{'command':<34} {'best wall [s]':>13} {'x bare python':>14} {'peak RSS [MB]':>14}")
    print(f"{'python -c pass':<34} {base:13.3f} {1.0:14.1f}")
    with tempfile.TemporaryDirectory() as out:
        largest = max(CASES.glob("*.toml"), key=_study_size)
        note = [(f"note ({largest.name})", ["note", str(largest), "--out", out])]
        for label, argv in COMMANDS + OPTIONAL + note:
            json_out = [] if argv[0] == "note" else ["--format", "json"]
            runs = [timed([sys.executable, "-m", "harvester", *argv, *json_out])
                    for _ in range(args.repeat)]
            if any(code != 0 for _, _, code in runs):
                print(f"{label:<16} failed (exit {[code for _, _, code in runs]})")
                continue
            best = min(r[0] for r in runs)
            print(f"{label:<34} {best:13.3f} {best / base:14.1f} {max(r[1] for r in runs):14.0f}")


if __name__ == "__main__":
    main()
