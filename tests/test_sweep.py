"""Slow sweeps: the steady response of a linear beam, the folds of harmonic balance, the
continuous sweep as the staircase's limit, and the command's JSON."""

from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

from harvester.analysis.sweep import (
    AMPLITUDE,
    FREQUENCY,
    STOPS,
    SweepPlan,
    amplitude_step_mps2,
    default_rate,
    frequency_step_Hz,
    interwell_bands,
    path_jumps,
    run_sweeps,
    upsweep_power,
)
from harvester.dynamics.orbits import INTERWELL_PERIODIC, INTRAWELL
from harvester.model import CoilCircuit, PiezoCircuit, ReducedModel

ROOT = Path(__file__).resolve().parent.parent
UNIT_WELL = ROOT / "tests" / "data" / "unit-double-well.toml"


def _plans(model, over, low, high, fixed, *, step=None, well=0, rate_factor=1.0):
    """An up and a down path between low and high at the default rate (× rate_factor)."""
    if step is None:
        step = frequency_step_Hz(model) if over == FREQUENCY else amplitude_step_mps2(high)
    rate = rate_factor * default_rate(model, step)
    return [SweepPlan(over, low, high, fixed, rate, step, well),
            SweepPlan(over, high, low, fixed, rate, step, well)]


# -- a linear beam: the sweep is its steady-state response curve ------------------------------
def _receptance(model: ReducedModel, omega: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Steady-state displacement X per unit base acceleration and circuit variable q per unit
    base acceleration of a linear beam with its circuit, by phasors: a q̇ = g ẋ − h q gives
    q = g iωX/(h + iωa), and m ẍ + c ẋ + k x + g q = −m_f a gives
    X = −m_f/(k − mω² + iωc + iω g²/(h + iωa)) (Thomson & Dahleh 1998, Theory of Vibration
    with Applications, ch. 3; with the circuit: Williams & Yates 1996, Sens. Actuators A 52:8,
    Erturk & Inman 2011, Piezoelectric Energy Harvesting, ch. 3)."""
    lag, g, h = model.circuit_coefficients()
    admittance = g / (h + 1j * omega * lag)
    x = -model.forcing_mass_kg / (model.k1 - model.mass_kg * omega**2 + 1j * omega * (
        model.damping_N_s_per_m + g * admittance))
    return x, admittance * 1j * omega * x


@pytest.mark.parametrize("transducer, load", [
    (CoilCircuit(flux_linkage_V_s_per_m=2.0, resistance_ohm=300.0, inductance_H=0.05), 400.0),
    (PiezoCircuit(coupling_N_per_V=2e-3, capacitance_F=50e-9), 1.5e5),
], ids=["coil", "piezo"])
def test_slow_sweep_of_a_linear_beam_is_its_steady_state_response_within_1_percent(transducer,
                                                                                  load):
    # 20 Hz, 1 % mechanical damping; the circuit adds about as much again
    mass, f_n = 0.01, 20.0
    k = mass * (2 * math.pi * f_n) ** 2
    model = ReducedModel(mass_kg=mass, damping_N_s_per_m=2 * 0.01 * math.sqrt(k * mass),
                         stiffness=(k,), forcing_mass_kg=0.012, transducer=transducer,
                         load_ohm=load)
    amplitude = 2.0
    paths = run_sweeps(model, _plans(model, FREQUENCY, 12.0, 30.0, amplitude))
    for path in paths:
        x, q = _receptance(model, 2 * math.pi * path.frequency_Hz)
        swing = amplitude * np.abs(x)
        factor = 1.0 / load if isinstance(transducer, PiezoCircuit) else load
        power = 0.5 * factor * (amplitude * np.abs(q)) ** 2
        # each dwell ends within e^-6 of its steady state; the window's extremes are sampled
        # at the RK4 steps (≥ 128 per period: 0.03 % low at worst): 1 % leaves room for both
        assert path.swing_m == pytest.approx(swing, rel=0.01)
        assert path.mean_power_W == pytest.approx(power, rel=0.01)
        # the resonance is passed: the curve peaks inside the range
        assert 0 < np.argmax(path.swing_m) < path.swing_m.size - 1
        # one orbit all the way: a linear beam never jumps
        assert path_jumps(path) == []
        assert set(path.kind) == {0}


# -- a hardening single well: the jumps at the folds of harmonic balance ---------------------
K1, K3, C, F = 1.0, 0.2, 0.05, 0.1  # m = 1: ω_n = 1, ζ = 0.025; k3 a²/k1 ≈ 1.5 at the peak


def _folds(cubic_coefficients, low: float, high: float) -> list[float]:
    """Where the number of real positive roots z = a² of a cubic in z changes (its discriminant
    changes sign), between low and high of the free variable."""
    def discriminant(s):
        a, b, c, d = cubic_coefficients(s)
        return 18 * a * b * c * d - 4 * b**3 * d + b * b * c * c - 4 * a * c**3 - 27 * a * a * d * d
    grid = np.linspace(low, high, 20001)
    values = discriminant(grid)
    return [brentq(discriminant, grid[i], grid[i + 1])
            for i in np.flatnonzero(np.diff(np.sign(values)))]


def _duffing_cubic(omega, force=F, k1=K1, k3=K3, c=C):
    """First-order harmonic balance of m ẍ + c ẋ + k1 x + k3 x³ = F cos ωt, x = a cos(ωt − φ):
    [(k1 − mω² + ¾k3a²)² + (cω)²] a² = F² (Nayfeh & Mook 1979, Nonlinear Oscillations, §4.1),
    as a cubic in z = a²: (¾k3)² z³ + (3/2)k3(k1 − mω²) z² + ((k1 − mω²)² + (cω)²) z − F²."""
    b0 = k1 - omega**2
    return (0.75 * k3) ** 2, 1.5 * k3 * b0, b0 * b0 + (c * omega) ** 2, -force * force


def test_hardening_oscillator_jumps_at_the_folds_of_harmonic_balance():
    model = ReducedModel(mass_kg=1.0, damping_N_s_per_m=C, stiffness=(K1, K3),
                         forcing_mass_kg=1.0)
    lower, upper = (w / (2 * math.pi) for w in _folds(_duffing_cubic, 0.3, 5.0))
    paths = run_sweeps(model, _plans(model, FREQUENCY, 0.5 / (2 * math.pi),
                                     1.5 / (2 * math.pi), F))
    (up,), (down,) = (path_jumps(p) for p in paths)
    # up: the large branch ends at the upper fold and the beam drops to the small one; down:
    # the small branch ends at the lower fold (Nayfeh & Mook 1979, §4.1).  3 %: the first
    # harmonic's accuracy at k3 a²/k1 ≈ 1.5 and the sweep's lag past a fold
    assert (up.from_orbit, up.to_orbit) == ("large intrawell", "small intrawell")
    assert (down.from_orbit, down.to_orbit) == ("small intrawell", "large intrawell")
    assert up.frequency_Hz == pytest.approx(upper, rel=0.03)
    assert down.frequency_Hz == pytest.approx(lower, rel=0.03)
    # a fold is passed late, not early: the beam lingers on the vanishing branch
    assert up.frequency_Hz >= upper * 0.999 and down.frequency_Hz <= lower * 1.001


def test_amplitude_sweep_jumps_at_the_folds_of_harmonic_balance():
    # at ω = 1.5 ω_n the response against the force is an S-curve: a rising force leaves the
    # small branch where F(a) has its local maximum, a falling one leaves the large branch at
    # its local minimum (the same balance, Nayfeh & Mook 1979, §4.1)
    omega = 1.5
    model = ReducedModel(mass_kg=1.0, damping_N_s_per_m=C, stiffness=(K1, K3),
                         forcing_mass_kg=1.0)
    folds = _folds(lambda f: _duffing_cubic(omega, force=f), 0.05, 1.5)
    assert len(folds) == 2
    # the lower fold sits at 15 % of the top amplitude, where the default steps (0.5 % of the
    # top) are 3.5 % of the force: a quarter of the default rate passes it quasi-statically
    slow = run_sweeps(model, _plans(model, AMPLITUDE, 0.0, 1.5, omega / (2 * math.pi),
                                    rate_factor=0.25))
    (up,), (down,) = (path_jumps(p) for p in slow)
    assert (up.from_orbit, down.from_orbit) == ("small intrawell", "large intrawell")
    assert up.amplitude_mps2 == pytest.approx(max(folds), rel=0.03)
    assert down.amplitude_mps2 == pytest.approx(min(folds), rel=0.03)
    # at the default rate the beam lingers longer on the large branch: it leaves it later
    _, (late,) = (path_jumps(p) for p in run_sweeps(
        model, _plans(model, AMPLITUDE, 0.0, 1.5, omega / (2 * math.pi))))
    assert late.amplitude_mps2 < down.amplitude_mps2


# -- a double well: the interwell branch's hysteresis ----------------------------------------
def test_interwell_branch_jumps_bracket_stanton_harmonic_balance():
    # u'' + δu' − u + u³ = γ cos ωτ; one-harmonic interwell orbit u = A cos(ωτ + φ),
    # A²[(−1 + ¾A² − ω²)² + (δω)²] = γ² (Stanton, Owens & Mann 2012, J. Sound Vib.
    # 331:3617): its large branch ends at the fold ω_SN.  The beam swept up on the interwell
    # orbit leaves it there and drops into a well; swept down in a well, it is thrown onto the
    # interwell orbit only below the fold, where its intrawell orbit ends: the two jumps
    # bracket ω_SN.
    delta, gamma = 0.1, 0.5
    model = ReducedModel(mass_kg=1.0, damping_N_s_per_m=delta, stiffness=(-1.0, 1.0),
                         forcing_mass_kg=1.0)
    fold = max(_folds(lambda w: _duffing_cubic(w, force=gamma, k1=-1.0, k3=1.0, c=delta),
                      0.05, 6.0))
    paths = run_sweeps(model, _plans(model, FREQUENCY, 0.3 / (2 * math.pi),
                                     3.0 / (2 * math.pi), gamma, well=1))
    up, down = ([j for j in path_jumps(p) if INTERWELL_PERIODIC in (j.from_orbit, j.to_orbit)]
                for p in paths)
    leave = next(j for j in up if j.from_orbit == INTERWELL_PERIODIC)
    catch = next(j for j in down if j.to_orbit == INTERWELL_PERIODIC)
    assert catch.frequency_Hz * 2 * math.pi < fold < leave.frequency_Hz * 2 * math.pi
    # the first harmonic places the fold within 3 % of where the up-sweep leaves the orbit
    assert leave.frequency_Hz * 2 * math.pi == pytest.approx(fold, rel=0.03)
    assert leave.to_orbit.startswith(INTRAWELL) and catch.from_orbit.startswith(INTRAWELL)
    # the held ranges are reported in sweep order and contain the jumps' ends
    up_band = max(interwell_bands(paths[0]), key=lambda b: b.last - b.first)
    assert up_band.frequency_Hz[1] * 2 * math.pi > 0.99 * fold


# -- the staircase tends to the continuous sweep ----------------------------------------------
def test_staircase_converges_to_the_continuous_sweep():
    # the hardening oscillator swept up through its fold at a fixed rate R, by a continuous
    # chirp f = f0 + R t (phase 2π∫f dt, integrated by scipy's DOP853: Hairer, Nørsett & Wanner
    # 1993, Solving Ordinary Differential Equations I, §II.10) and by staircases whose
    # dwells shrink from 64 periods to one; where the swing first falls below the geometric
    # mean of the peak and the end of the sweep marks the jump
    model = ReducedModel(mass_kg=1.0, damping_N_s_per_m=C, stiffness=(K1, K3),
                         forcing_mass_kg=1.0)
    f0, f1 = 0.9 / (2 * math.pi), 1.3 / (2 * math.pi)
    rate = 20 * default_rate(model, frequency_step_Hz(model))
    lead = 200  # periods at f0 before the sweep, as the staircase's lead-in
    t0, t1 = lead / f0, lead / f0 + (f1 - f0) / rate

    def rates(t, y):
        tau = max(t - t0, 0.0)
        phase = 2 * math.pi * (f0 * min(t, t0) + f0 * tau + 0.5 * rate * tau * tau)
        return [y[1], -C * y[1] - K1 * y[0] - K3 * y[0] ** 3 - F * math.cos(phase)]

    sol = solve_ivp(rates, (0.0, t1), [0.0, 0.0], method="DOP853", rtol=1e-9, atol=1e-12,
                    dense_output=True)
    t = np.linspace(t0, t1, 400_000)
    x = sol.sol(t)[0]
    cycle = np.floor(f0 * (t - t0) + 0.5 * rate * (t - t0) ** 2).astype(int)
    count = cycle.max()
    swing = np.array([np.ptp(x[cycle == i]) / 2 for i in range(count)])
    frequency = f0 + rate * (np.array([t[cycle == i].mean() for i in range(count)]) - t0)
    threshold = math.sqrt(swing.max() * swing[-1])
    beyond = frequency > frequency[np.argmax(swing)]
    chirp_jump = frequency[np.flatnonzero(beyond & (swing < threshold))[0]]
    errors = []
    for dwell in (64, 16, 1):
        step = dwell * rate / f0  # a dwell of `dwell` periods at f0
        (path,) = run_sweeps(model, [SweepPlan(FREQUENCY, f0, f1, F, rate, step, 0)],
                             lead_in_periods=lead, window_periods=1)
        beyond = path.frequency_Hz > path.frequency_Hz[np.argmax(path.swing_m)]
        jump = path.frequency_Hz[np.flatnonzero(beyond & (path.swing_m < threshold))[0]]
        errors.append(abs(jump / chirp_jump - 1.0))
        # within about a step of the staircase (its frequency lags f0 + R t by up to a step)
        assert errors[-1] <= 1.5 * step / chirp_jump + 2e-3
    # one period per dwell: the chirp itself, to its cycle resolution
    assert errors[-1] < 2e-3 and errors[-1] < errors[0] / 5


# -- the stops, and an up-sweep's arrival -----------------------------------------------------
def test_a_sweep_that_reaches_the_stops_ends_there():
    # a linear beam under a rising tone strikes its stops where its steady amplitude
    # m_f A/|k − mω² + icω| reaches the travel (Thomson & Dahleh 1998, ch. 3)
    model = ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.1, stiffness=(1.0,),
                         forcing_mass_kg=1.0, travel_limit_m=2.0)
    omega = 0.8
    strike = 2.0 * abs(complex(1.0 - omega**2, 0.1 * omega))
    up, _ = run_sweeps(model, _plans(model, AMPLITUDE, 0.0, 2.0, omega / (2 * math.pi)))
    (jump,) = path_jumps(up)
    assert jump.to_orbit == STOPS
    assert jump.amplitude_mps2 == pytest.approx(strike, rel=0.02)
    assert up.amplitude_mps2[-1] == jump.amplitude_mps2


def test_upsweep_arrives_on_the_linear_steady_state():
    # a linear beam has one steady state at each frequency: the run-up arrives on it
    model = ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.1, stiffness=(1.0,),
                         forcing_mass_kg=1.0,
                         transducer=CoilCircuit(1.0, 1.0, 0.0), load_ohm=1.0)
    f = 1.2 / (2 * math.pi)
    x, q = _receptance(model, np.array([2 * math.pi * f]))
    assert upsweep_power(model, 0.3, 0.5 * f, f) == pytest.approx(
        0.5 * 1.0 * (0.3 * abs(q[0])) ** 2, rel=0.01)


# -- the command ------------------------------------------------------------------------------
def test_sweep_command_json_carries_rows_jumps_and_the_rate():
    result = subprocess.run(
        [sys.executable, "-m", "harvester", "sweep", str(UNIT_WELL), "--from", "0.1 Hz", "--to",
         "0.35 Hz", "--amplitude", "0.5 m/s^2", "--format", "json"],
        capture_output=True, text=True, timeout=300, cwd=ROOT)
    assert result.returncode == 0, result.stderr
    data = json.loads(result.stdout)
    assert {r["direction"] for r in data["rows"]} == {"up", "down"}
    assert set(data["rows"][0]) == {"direction", "frequency_Hz", "amplitude_mps2", "peak_m",
                                    "mean_power_W", "interwell_share", "orbit"}
    assert data["jumps"] and all(set(j) == {"direction", "frequency_Hz", "amplitude_mps2",
                                            "from", "to"} for j in data["jumps"])
    # the default rate holds each step for 6 decay times of e^(-δt/2), δ = 0.25 (Thomson &
    # Dahleh 1998, ch. 2): R = step · (δ/2)/6
    assert data["rate_Hz_per_s"] == pytest.approx(data["step_Hz"] * 0.125 / 6, rel=1e-9)
    assert "twice the rate" in data["rate_note"]
    assert data["amplitude_mps2"] == [0.5, 0.5]
    for rate, says in (("3 Hz", "per unit of time"), ("1e-9 Hz/s", "forcing periods")):
        bad = subprocess.run([sys.executable, "-m", "harvester", "sweep", str(UNIT_WELL),
                              "--from", "0.1 Hz", "--to", "0.35 Hz", "--amplitude", "0.5 m/s^2",
                              "--rate", rate], capture_output=True, text=True, timeout=300,
                             cwd=ROOT)
        assert bad.returncode == 2 and "--rate" in bad.stderr and says in bad.stderr
