"""Benchmark of the ensemble integrator and the hop-threshold computation.

    python tests/bench/bench_integrator.py [--trajectories 8192] [--periods 48] [--target avx2]

One problem, one accuracy: the canonical double well u'' + δu' − u + u³ = γ cos ωτ (δ = 0.25,
ω = 1, γ spread over 0.1–0.4, random initial states), 128 RK4 steps per forcing period.  It is
solved by

* the production integrator (`simulate_tone`, strobe sampling and power tallies on), on the
  uncoupled model and on the same beam with a piezo circuit (three states);
* the blocked yardstick: the same RK4 for the two-state equation in its fastest plain form
  (cache-sized blocks, SIMD across trajectories, cos from a table) — the ceiling the coupled
  production kernel is held to (target: at least 50 % of its step rate);
* a plain compiled RK4 kernel, one trajectory per parallel iteration with its time loop
  inside and cos evaluated at every stage (what a first compiled version looks like);
* the same RK4 vectorised over trajectories with numpy (time loop in Python);
* scipy's `solve_ivp` (RK45) per trajectory, at the loosest tolerance whose error over ten
  periods is no larger than the fixed-step RK4's.

Rates are RK4 steps (one trajectory, one step) per second; for solve_ivp, the RK4 steps that
would cover the same time.  The coupled production kernel is also timed on a run that is all
transient (RK4 steps only) and on one that is all window (RK4 steps and the per-step tallies).
Each ratio is printed with the vector width of the code compiled for the target CPU: the host's
by default, or with `--target avx2` a CPU without AVX-512 (Haswell: AVX2, sixteen 256-bit
registers), compiled afresh into a new numba cache in a child process.  The compiled kernels
are timed in turns, best of seven each, so that a change in the machine's load hits them
alike.  Then the hop thresholds of an invented demo-size beam at 30 frequencies (wall time and
peak memory in this process), and `harvester hop` on a demo case as a user runs it (wall time
and peak RSS of the child process).
"""

from __future__ import annotations

import argparse
import math
import os
import re
import resource
import subprocess
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

import numba
import numpy as np
from llvmlite import binding as llvm
from numba import njit, prange
from scipy.integrate import solve_ivp

from harvester.analysis.thresholds import hop_thresholds
from harvester.dynamics.integrator import simulate_tone
from harvester.model import PiezoCircuit, ReducedModel

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_commands import CASES, timed  # noqa: E402

DEMO_CASE = CASES / "pump-skid-piezo.toml"

DELTA, OMEGA, STEPS = 0.25, 1.0, 128

# compile targets a run can ask for: numba reads the CPU name and features from the environment
# (an empty feature list means the named CPU's own)
TARGETS = {"avx2": {"NUMBA_CPU_NAME": "haswell", "NUMBA_CPU_FEATURES": ""}}


def _probe(a, b):
    for i in range(a.size):
        a[i] = a[i] * b[i] + a[i]


def vector_width() -> tuple[str, int]:
    """The target CPU with its widest SIMD registers, and the vector width [bits] numba's loops
    get on it (read from the assembly of a small loop compiled for that target, uncached)."""
    name = numba.config.CPU_NAME or llvm.get_host_cpu_name()
    features = numba.config.CPU_FEATURES
    if features is None:
        features = llvm.get_host_cpu_features().flatten()
    probe = njit(_probe)
    probe(np.ones(64), np.ones(64))
    asm = next(iter(probe.inspect_asm().values()))
    used = max((bits for reg, bits in (("zmm", 512), ("ymm", 256), ("xmm", 128))
                if re.search(rf"v\w*pd\s.*%{reg}", asm)), default=64)
    if "+avx512f" in features:
        isa = "AVX-512, 512-bit registers"
    elif "+avx2" in features or (not features and name in ("haswell", "broadwell", "skylake")):
        isa = "AVX2, 256-bit registers"
    else:
        isa = "features " + (features or "of the named CPU")
    return f"{name} ({isa})", used


@njit(parallel=True, cache=True)
def yardstick_rk4(x0, v0, gamma, omega, delta, steps_per_period, periods):
    """Plain compiled RK4 for u'' + δu' − u + u³ = γ cos ωt, one trajectory per iteration."""
    for i in prange(x0.size):
        x, v, g, w = x0[i], v0[i], gamma[i], omega[i]
        dt = 2.0 * math.pi / (w * steps_per_period)
        t = 0.0
        for _ in range(steps_per_period * periods):
            f0 = g * math.cos(w * t)
            fm = g * math.cos(w * (t + 0.5 * dt))
            f1 = g * math.cos(w * (t + dt))
            k1x, k1v = v, -delta * v + x - x * x * x + f0
            xs, vs = x + 0.5 * dt * k1x, v + 0.5 * dt * k1v
            k2x, k2v = vs, -delta * vs + xs - xs * xs * xs + fm
            xs, vs = x + 0.5 * dt * k2x, v + 0.5 * dt * k2v
            k3x, k3v = vs, -delta * vs + xs - xs * xs * xs + fm
            xs, vs = x + dt * k3x, v + dt * k3v
            k4x, k4v = vs, -delta * vs + xs - xs * xs * xs + f1
            x += dt / 6.0 * (k1x + 2 * k2x + 2 * k3x + k4x)
            v += dt / 6.0 * (k1v + 2 * k2v + 2 * k3v + k4v)
            t += dt
        x0[i], v0[i] = x, v


@njit(parallel=True, fastmath=True, cache=True)
def blocked_yardstick_rk4(x0, v0, gamma, phase_cos, dt, delta, steps_per_period, periods):
    """The fastest plain form of the same RK4: blocks of 256 trajectories that stay in cache,
    parallel over blocks, time loop outside, the loop over a block's trajectories innermost (SIMD),
    the forcing read from a per-step cos table (all trajectories share ω).  No circuit, no
    tallies, no strobe: the ceiling a production kernel is measured against."""
    n = x0.size
    block = 256
    for b in prange((n + block - 1) // block):
        lo = b * block
        hi = min(n, lo + block)
        x = x0[lo:hi].copy()
        v = v0[lo:hi].copy()
        g = gamma[lo:hi].copy()
        for _ in range(periods):
            for s in range(steps_per_period):
                c0 = phase_cos[2 * s]
                cm = phase_cos[2 * s + 1]
                c1 = phase_cos[2 * s + 2]
                for i in range(hi - lo):
                    xi = x[i]
                    vi = v[i]
                    gi = g[i]
                    k1x = vi
                    k1v = -delta * vi + xi - xi * xi * xi + gi * c0
                    xs = xi + 0.5 * dt * k1x
                    vs = vi + 0.5 * dt * k1v
                    k2x = vs
                    k2v = -delta * vs + xs - xs * xs * xs + gi * cm
                    xs = xi + 0.5 * dt * k2x
                    vs = vi + 0.5 * dt * k2v
                    k3x = vs
                    k3v = -delta * vs + xs - xs * xs * xs + gi * cm
                    xs = xi + dt * k3x
                    vs = vi + dt * k3v
                    k4x = vs
                    k4v = -delta * vs + xs - xs * xs * xs + gi * c1
                    x[i] = xi + dt / 6.0 * (k1x + 2.0 * k2x + 2.0 * k3x + k4x)
                    v[i] = vi + dt / 6.0 * (k1v + 2.0 * k2v + 2.0 * k3v + k4v)
        x0[lo:hi] = x
        v0[lo:hi] = v


def numpy_rk4(x, v, gamma, omega, periods):
    """The same RK4, vectorised over trajectories with numpy."""
    dt = 2.0 * np.pi / (omega * STEPS)

    def rate(t, x, v):
        return v, -DELTA * v + x - x**3 + gamma * np.cos(omega * t)

    t = np.zeros_like(x)
    for _ in range(STEPS * periods):
        k1 = rate(t, x, v)
        k2 = rate(t + 0.5 * dt, x + 0.5 * dt * k1[0], v + 0.5 * dt * k1[1])
        k3 = rate(t + 0.5 * dt, x + 0.5 * dt * k2[0], v + 0.5 * dt * k2[1])
        k4 = rate(t + dt, x + dt * k3[0], v + dt * k3[1])
        x = x + dt / 6 * (k1[0] + 2 * k2[0] + 2 * k3[0] + k4[0])
        v = v + dt / 6 * (k1[1] + 2 * k2[1] + 2 * k3[1] + k4[1])
        t = t + dt
    return x, v


def duffing(t, y, gamma):
    return [y[1], -DELTA * y[1] + y[0] - y[0] ** 3 + gamma * math.cos(OMEGA * t)]


def best_rate(run, steps: float, repeats: int = 7) -> float:
    return best_rates({"": run}, steps, repeats)[""]


def best_rates(runs: dict, steps: float, repeats: int = 7) -> dict:
    """Steps per second of each run, best of `repeats`, the runs taken in turns."""
    best = dict.fromkeys(runs, math.inf)
    for _ in range(repeats):
        for name, run in runs.items():
            start = time.perf_counter()
            run()
            best[name] = min(best[name], time.perf_counter() - start)
    return {name: steps / seconds for name, seconds in best.items()}


def solve_ivp_tolerance() -> float:
    """Loosest RK45 rtol whose error after 10 periods (γ = 0.18, periodic, no chaos) does not
    exceed that of 128-step RK4 (both against DOP853 at rtol 1e-12)."""
    t_end = 10 * 2 * math.pi / OMEGA
    ref = solve_ivp(duffing, (0, t_end), [1.0, 0.0], args=(0.18,), method="DOP853",
                    rtol=1e-12, atol=1e-14).y[:, -1]
    x, v = numpy_rk4(np.array([1.0]), np.array([0.0]), np.array([0.18]), np.array([OMEGA]), 10)
    rk4_error = abs(x[0] - ref[0])
    for rtol in (1e-5, 1e-6, 1e-7, 1e-8, 1e-9, 1e-10):
        y = solve_ivp(duffing, (0, t_end), [1.0, 0.0], args=(0.18,), method="RK45", rtol=rtol,
                      atol=rtol * 1e-2).y[:, -1]
        if abs(y[0] - ref[0]) <= rk4_error:
            return rtol
    return 1e-10


def demo_beam() -> ReducedModel:
    """An invented demo-size bistable beam: 10 g effective mass, wells at ±3.2 mm, 17 Hz well
    frequency, 25 Hz without magnets, 1 % damping, PZT-like coupling on a matched load."""
    mass = 0.01
    k_linear = mass * (2 * math.pi * 25.0) ** 2
    return ReducedModel(mass_kg=mass, damping_N_s_per_m=2 * 0.01 * math.sqrt(k_linear * mass),
                        stiffness=(-60.0, 6.0e6), forcing_mass_kg=0.012,
                        transducer=PiezoCircuit(8e-4, 5e-8), load_ohm=1.6e5,
                        travel_limit_m=0.015, linear_stiffness_N_per_m=k_linear)


def run_for_target(target: str) -> None:
    """This benchmark again in a child process compiled for `target`, with a fresh cache."""
    with tempfile.TemporaryDirectory(prefix=f"numba-{target}-") as cache:
        env = {**os.environ, **TARGETS[target], "NUMBA_CACHE_DIR": cache}
        args = [a for a in sys.argv[1:] if a not in ("--target", target)]
        subprocess.run([sys.executable, __file__, *args], env=env, check=True)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--trajectories", type=int, default=8192)
    parser.add_argument("--periods", type=int, default=48)
    parser.add_argument("--target", choices=("host", *TARGETS), default="host",
                        help="compile for this CPU (in a child process with a fresh cache)")
    args = parser.parse_args()
    if args.target != "host":
        run_for_target(args.target)
        return
    n, periods = args.trajectories, args.periods
    target, width = vector_width()
    rng = np.random.default_rng(0)
    x0, v0 = rng.uniform(-1.5, 1.5, n), rng.uniform(-1.0, 1.0, n)
    gamma = rng.uniform(0.1, 0.4, n)
    omega = np.full(n, OMEGA)
    f_hz = OMEGA / (2 * math.pi)
    canonical = ReducedModel(mass_kg=1.0, damping_N_s_per_m=DELTA, stiffness=(-1.0, 1.0),
                             forcing_mass_kg=1.0)
    # the same beam with the piezo circuit of Erturk, Hoffmann & Inman (2009)
    coupled = ReducedModel(mass_kg=1.0, damping_N_s_per_m=DELTA, stiffness=(-1.0, 1.0),
                           forcing_mass_kg=1.0, transducer=PiezoCircuit(0.05, 0.1),
                           load_ohm=200.0)
    # the coupled beam with a 4-term odd force, like the demo models' fitted magnet force
    # (the extra terms are small, so the motion stays that of the canonical well)
    coupled_fitted = ReducedModel(mass_kg=1.0, damping_N_s_per_m=DELTA,
                                  stiffness=(-1.0, 1.0, 1e-3, 1e-5), forcing_mass_kg=1.0,
                                  transducer=PiezoCircuit(0.05, 0.1), load_ohm=200.0)
    steps = float(n * STEPS * periods)
    window = min(16, periods)

    def production(model, window=window):
        return lambda: simulate_tone(model, gamma, f_hz, x0, v0, transient_periods=periods - window,
                                     strobe_periods=window, steps_per_period=STEPS)

    def yardstick():
        yardstick_rk4(x0.copy(), v0.copy(), gamma, omega, DELTA, STEPS, periods)

    dt = 2.0 * math.pi / (OMEGA * STEPS)
    phase_cos = np.cos(OMEGA * dt * 0.5 * np.arange(2 * STEPS + 1))

    def blocked():
        blocked_yardstick_rk4(x0.copy(), v0.copy(), gamma, phase_cos, dt, DELTA, STEPS, periods)

    for warm in (production(canonical), production(coupled), production(coupled_fitted)):
        warm()
    yardstick_rk4(x0[:8].copy(), v0[:8].copy(), gamma[:8], omega[:8], DELTA, STEPS, 1)
    blocked_yardstick_rk4(x0[:8].copy(), v0[:8].copy(), gamma[:8], phase_cos, dt, DELTA, STEPS, 1)

    rates = best_rates({
        "production simulate_tone, uncoupled": production(canonical),
        "production simulate_tone, piezo-coupled": production(coupled),
        "production simulate_tone, piezo-coupled, 4-term force": production(coupled_fitted),
        "  piezo-coupled, all transient (RK4 steps only)": production(coupled, 1),
        "  piezo-coupled, all window (RK4 steps and tallies)": production(coupled, periods - 1),
        "blocked yardstick (cache blocks, SIMD, cos table)": blocked,
        "yardstick compiled RK4 (plain kernel)": yardstick,
    }, steps)
    n_np, p_np = min(n, 2048), 2
    rates["numpy-vectorised RK4"] = best_rate(
        lambda: numpy_rk4(x0[:n_np], v0[:n_np], gamma[:n_np], omega[:n_np], p_np),
        float(n_np * STEPS * p_np), repeats=1)
    rtol = solve_ivp_tolerance()
    n_ivp, p_ivp = 8, 10
    t_end = p_ivp * 2 * math.pi / OMEGA
    rates[f"solve_ivp RK45 per trajectory (rtol {rtol:g})"] = best_rate(
        lambda: [solve_ivp(duffing, (0, t_end), [x0[i], v0[i]], args=(gamma[i],), method="RK45",
                           rtol=rtol, atol=rtol * 1e-2) for i in range(n_ivp)],
        float(n_ivp * STEPS * p_ivp), repeats=1)

    print(f"problem: u'' + {DELTA}u' - u + u^3 = gamma cos t, {n} trajectories, "
          f"{STEPS} RK4 steps per period, {periods} periods ({window} in the window); "
          f"{numba.get_num_threads()} threads")
    print(f"target: {target}; compiled loops use {width}-bit vectors")
    yard = rates["blocked yardstick (cache blocks, SIMD, cos table)"]
    ivp = rates[f"solve_ivp RK45 per trajectory (rtol {rtol:g})"]
    for name, rate in rates.items():
        print(f"  {name:55s} {rate:10.3g} steps/s  {rate / yard:6.2f}x blocked yardstick "
              f"({width}-bit)  {rate / ivp:9.0f}x vs solve_ivp")
    share = rates["production simulate_tone, piezo-coupled"] / yard
    print(f"  target: the coupled production kernel at >= 50 % of the blocked yardstick: "
          f"{100 * share:.0f} % with {width}-bit vectors ({'met' if share >= 0.5 else 'NOT met'});"
          f" with a 4-term force "
          f"(8 more multiply-adds per step): "
          f"{100 * rates['production simulate_tone, piezo-coupled, 4-term force'] / yard:.0f} %")

    model = demo_beam()
    freqs = np.linspace(5.0, 40.0, 30)
    for label in ("first call", "second call"):
        tracemalloc.start()
        start = time.perf_counter()
        rows = hop_thresholds(model, freqs, seed=0)
        wall = time.perf_counter() - start
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        print(f"hop thresholds, demo beam, {freqs.size} frequencies ({label}): {wall:.2f} s, "
              f"peak traced memory {peak / 2**20:.1f} MiB")
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    flagged = sum(r.flagged for r in rows)
    print(f"  process max RSS {rss:.0f} MiB; {flagged} of {len(rows)} rows flagged")

    # the command as a user runs it: a fresh process, warm numba cache after the first run
    runs = [timed([sys.executable, "-m", "harvester", "hop", str(DEMO_CASE), "--format", "json"])
            for _ in range(3)]
    if any(code != 0 for *_, code in runs):
        print(f"harvester hop {DEMO_CASE.name} failed (exit {[r[2] for r in runs]})")
        return
    wall = min(r[0] for r in runs[1:])
    print(f"harvester hop {DEMO_CASE.name} (30 frequencies, warm cache, best of 2): "
          f"{wall:.2f} s ({'met' if wall < 5.0 else 'NOT met'}: < 5 s), "
          f"peak RSS {max(r[1] for r in runs):.0f} MB (target < 1024 MB)")


if __name__ == "__main__":
    main()
