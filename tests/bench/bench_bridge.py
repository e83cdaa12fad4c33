"""Benchmark of the rectifier bridge in the ensemble integrator against the resistive kernel.

    python tests/bench/bench_bridge.py [--trajectories 8192] [--periods 48]

One problem: the canonical double well u'' + δu' − u + u³ = γ cos ωτ (δ = 0.25, ω = 1, γ spread
over 0.1–0.4, random initial states), 128 RK4 steps per forcing period, with the piezo circuit
of Erturk, Hoffmann & Inman (2009) and with a coil.  Each transducer is solved working into a
resistor (today's coupled kernel, the baseline measured in the same run) and into a full-wave
bridge with a 0.05 drop per diode, into a store held at a voltage and into a storage capacitor
with a load (the store a state of each trajectory).  The store voltage is set so that the
bridge conducts on part of every cycle.  Rates are RK4 steps (one trajectory, one step) per
second, best of five, the kernels timed in turns so that a change in the machine's load hits
them alike.  Target: every bridge kernel at least 50 % of the resistive coupled kernel's rate.
Then `harvester compare` on the largest demo case as a user runs it, with its bridge and node
(target: under 30 s) and into its resistor (the same case without them), one after the other.
"""

from __future__ import annotations

import argparse
import math
import sys
import tempfile
from pathlib import Path

import numpy as np

from harvester.dynamics.integrator import simulate_tone
from harvester.model import (
    BridgeCircuit,
    CapacitorStore,
    CoilCircuit,
    PiezoCircuit,
    ReducedModel,
    VoltageStore,
)

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_commands import CASES, _study_size, timed  # noqa: E402
from bench_integrator import DELTA, OMEGA, STEPS, best_rates  # noqa: E402

TARGET_SHARE = 0.5  # a bridge kernel keeps at least this share of the resistive kernel's rate
DROP = 0.05  # per diode, in the canonical units
STORE = 0.1  # store voltage, in the canonical units: the bridge conducts on every cycle


def models() -> dict[str, ReducedModel]:
    beam = dict(mass_kg=1.0, damping_N_s_per_m=DELTA, stiffness=(-1.0, 1.0),
                forcing_mass_kg=1.0)
    piezo = PiezoCircuit(0.05, 0.1)
    coil = CoilCircuit(0.5, 1.0, 0.1)
    held = BridgeCircuit(DROP, VoltageStore(STORE))
    capacitor = BridgeCircuit(DROP, CapacitorStore(10.0, 100.0, STORE))
    return {
        "piezo into a resistor (baseline)": ReducedModel(**beam, transducer=piezo,
                                                          load_ohm=200.0),
        "piezo into a bridge, held store": ReducedModel(**beam, transducer=piezo,
                                                         interface=held),
        "piezo into a bridge, capacitor store": ReducedModel(**beam, transducer=piezo,
                                                              interface=capacitor),
        "coil into a resistor (baseline)": ReducedModel(**beam, transducer=coil, load_ohm=1.0),
        "coil into a bridge, held store": ReducedModel(**beam, transducer=coil, interface=held),
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--trajectories", type=int, default=8192)
    parser.add_argument("--periods", type=int, default=48)
    parser.add_argument("--no-command", action="store_true",
                        help="skip the timing of compare on the largest demo")
    args = parser.parse_args()
    n, periods = args.trajectories, args.periods
    rng = np.random.default_rng(0)
    x0, v0 = rng.uniform(-1.5, 1.5, n), rng.uniform(-1.0, 1.0, n)
    gamma = rng.uniform(0.1, 0.4, n)
    f_hz = OMEGA / (2 * math.pi)
    window = min(16, periods)

    def production(model):
        return lambda: simulate_tone(model, gamma, f_hz, x0, v0, transient_periods=periods - window,
                                     strobe_periods=window, steps_per_period=STEPS)

    runs = {name: production(model) for name, model in models().items()}
    for run in runs.values():  # compile and warm each kernel before timing
        run()
    rates = best_rates(runs, float(n * STEPS * periods), repeats=5)
    print(f"{'kernel':<40} {'RK4 steps/s':>14} {'x resistive':>12}")
    for name, rate in rates.items():
        base = rates[f"{name.split(' into ')[0]} into a resistor (baseline)"]
        share = rate / base
        verdict = "" if "baseline" in name else ("  ok" if share >= TARGET_SHARE else "  SLOW")
        print(f"{name:<40} {rate:14.3e} {share:12.2f}{verdict}")
    if args.no_command:
        return
    largest = max(CASES.glob("*.toml"), key=_study_size)
    text = largest.read_text(encoding="utf-8")
    # the same case into its resistor: the file without its [circuit] and [node], beside it so
    # that any data file it names is found
    with tempfile.NamedTemporaryFile("w", suffix=".toml", dir=largest.parent,
                                     encoding="utf-8") as resistive:
        resistive.write(text[:text.index("\n[circuit]")] + "\n")
        resistive.flush()
        for label, case in (("with its bridge and node", largest), ("into its resistor",
                                                                     Path(resistive.name))):
            wall, rss, code = timed([sys.executable, "-m", "harvester", "compare", str(case),
                                     "--format", "json"])
            status = "" if code == 0 else f" (exit {code})"
            print(f"compare {largest.name} ({label}): {wall:.1f} s, peak RSS {rss:.0f} MB"
                  f"{status}")
    print("target: under 30 s with the bridge")


if __name__ == "__main__":
    main()
