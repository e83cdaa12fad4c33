"""Synthesise the tests of an invented prototype of the conveyor harvester (no measurements).

Run from the repository with harvester installed:

    python cases/make_prototype_test.py

The scenario: prototype CV-1 of `oscillating-conveyor-coil.toml` (drawn with the case's 9.75 mm
gap) was built in an invented workshop and tested in an invented vibration lab.  Its tip
deflection (relative to the clamp) is read by a laser triangulation sensor, the shaker table's
acceleration by an accelerometer, and the coil's voltage across the node's 750 Ω input.  The
built beam differs from the drawing, as built beams do: its damping is 30 % above the design
value (adhesive, clamp), its magnets' remanence 4 % below the handbook figure for the grade,
and the spacer left the fixed magnet 0.10 mm further away than drawn.  The script rewrites, in
`prototype-test/` next to it:

- ``ringdown.csv``: a free decay in the right-hand well after a small pluck, coil open,
  3 s at 2 kHz (time [s], tip displacement [mm]);
- ``force-deflection.csv``: the static force that holds the tip at each deflection, −8 … 8 mm
  in 0.5 mm steps, from a micrometer stage and a load cell with a 0.8 mN zero offset
  (deflection [mm], force [mN]);
- ``shaker-14Hz.csv``: 50 s of a 14 Hz, 0.4 g tone with 1 % second harmonic from the shaker,
  sampled at 400 Hz (time [s], base acceleration [g], tip displacement [mm], voltage [V]): a
  level at which the prototype hops between its wells irregularly (chaotic), while the design
  as drawn would stay in one well;
- ``sweep.csv``: a low-level stepped sine about the right-hand well, coil across the node's
  750 Ω, 0.005 g from 13 to 21 Hz in 0.2 Hz steps (frequency [Hz], base acceleration [g],
  tip displacement [mm], phase [deg]): each step settles for 60 cycles, and 40 more, sampled
  64 times a cycle, give the amplitudes and the phase of the tip against the table by
  projection on the drive's cosine and sine (the analyser's tracking filter);
- ``conveyor-calibrated.toml``: what `harvester calibrate` makes of the design case from the
  ring-down, the force–deflection table and the stepped sine
  (`harvester.commands.calibrate.calibrate_result`).

The responses come from the design's own reduced model built with the "true" values above,
integrated with the circuit by classical RK4 (the coil's circuit, with a time constant far
below a step, in its quasi-static limit); the force table from the exact magnet force of that
geometry, the tip foreshortened as the beam bends (as in the model).  Sensor noise (2 µm,
3 mg, 2 mV, 0.3 mN RMS; 0.3 mg for the stepped sine's low-noise reference accelerometer) comes
from numpy Generators with the fixed seed below, so the files are the same on every run.  They
are illustrations, never a check value in a test.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from harvester.analysis.calibration import CaseChange, calibrated_case_text
from harvester.build import build, restoring_force
from harvester.case.load import load_case, parse_case
from harvester.model import ReducedModel, analyse_wells
from harvester.units import STANDARD_GRAVITY

HERE = Path(__file__).resolve().parent
DESIGN = HERE / "oscillating-conveyor-coil.toml"
OUT = HERE / "prototype-test"
CALIBRATED = OUT / "conveyor-calibrated.toml"
SEED = 20241203

# the prototype as built
DAMPING_SHARE = 1.30  # × the design's damping ratio
REMANENCE_SHARE = 0.96
GAP_OFFSET_M = 0.10e-3
LOAD_OHM = 750.0  # the node's input, as in the design case

RINGDOWN = dict(duration_s=3.0, sample_rate_Hz=2000.0, pluck_m=0.5e-3)
FORCE_TABLE_M = np.arange(-8.0, 8.25, 0.5) * 1e-3
LOAD_CELL = dict(offset_N=0.8e-3, noise_N=0.3e-3)
TONE = dict(frequency_Hz=14.0, amplitude_g=0.4, second_harmonic=0.01, duration_s=50.0,
            sample_rate_Hz=400.0, settle_s=5.0)
NOISE = dict(displacement_m=2e-6, acceleration_g=3e-3, voltage_V=2e-3)
SUBSTEPS = 8  # RK4 steps per sample of the shaker record (about 190 per well period)
# the stepped sine: low enough that the beam stays linear about its well (the model's
# backbone moves the well frequency by 0.03 % at the resonance's 0.06 mm)
SWEEP = dict(low_Hz=13.0, high_Hz=21.0, step_Hz=0.2, amplitude_g=0.005, settle_cycles=60,
             cycles=40, per_cycle=64, substeps=2, reference_noise_g=0.3e-3)


def prototype_case_text() -> str:
    """The design case with the prototype's true damping, remanence and gap."""
    design = load_case(DESIGN)
    built = build(design)
    remanence = REMANENCE_SHARE * built.tip.remanence_T
    gap = built.gap_m + GAP_OFFSET_M
    truth = "the invented prototype as built"
    damping = DAMPING_SHARE * design.case.losses.damping_ratio
    changes = [CaseChange("losses", "damping_ratio", f"{damping:.6g}", truth),
               CaseChange("tip_magnet", "remanence", f'"{remanence:.6g} T"', truth),
               CaseChange("fixed_magnet", "remanence", f'"{remanence:.6g} T"', truth),
               CaseChange("fixed_magnet", "gap", f'"{1e3 * gap:.6g} mm"', truth)]
    return calibrated_case_text(DESIGN.read_text(encoding="utf-8"), changes)


def integrate(model: ReducedModel, drive, x0: float, duration_s: float, sample_rate_Hz: float,
              substeps: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Times [s], tip deflection [m] and circuit variable of the reduced model under base
    acceleration drive(t) [m/s²], from rest at x0, by classical RK4 in plain Python with
    `substeps` steps per sample (the compiled integrator keeps tallies, not time histories).
    Arrays of x0 and sample rates (with one duration × rate) run that many trajectories at
    once, each with its own step: the arrays' second axis.
    A circuit whose time constant is shorter than a step (the coil's L/R, 17 µs) is taken in
    its quasi-static limit q = g ẋ/h, as the compiled integrator takes it."""
    lag, coupling, loss = model.circuit_coefficients()
    m, c, mf = model.mass_kg, model.damping_N_s_per_m, model.forcing_mass_kg
    k = model.stiffness
    dt = 1.0 / (sample_rate_Hz * substeps)
    gain = 0.0
    if coupling and lag / loss < np.min(dt):
        gain, lag, c = coupling / loss, 0.0, c + coupling**2 / loss
        coupling = 0.0

    def rates(t, x, v, q):
        force, power, x2 = 0.0, x, x * x
        for kj in k:
            force += kj * power
            power = power * x2  # not in place: x may be an array
        accel = (-c * v - force - coupling * q - mf * drive(t)) / m
        return v, accel, (coupling * v - loss * q) / lag if lag else 0.0

    n = int(round(np.max(duration_s * sample_rate_Hz)))
    x_out, q_out = np.empty((n,) + np.shape(x0)), np.empty((n,) + np.shape(x0))
    x, v, q, t = x0, 0.0, 0.0, 0.0
    for i in range(n):
        x_out[i], q_out[i] = x, q + gain * v
        for _ in range(substeps):
            k1 = rates(t, x, v, q)
            k2 = rates(t + dt / 2, x + dt / 2 * k1[0], v + dt / 2 * k1[1], q + dt / 2 * k1[2])
            k3 = rates(t + dt / 2, x + dt / 2 * k2[0], v + dt / 2 * k2[1], q + dt / 2 * k2[2])
            k4 = rates(t + dt, x + dt * k3[0], v + dt * k3[1], q + dt * k3[2])
            x += dt / 6 * (k1[0] + 2 * k2[0] + 2 * k3[0] + k4[0])
            v += dt / 6 * (k1[1] + 2 * k2[1] + 2 * k3[1] + k4[1])
            q += dt / 6 * (k1[2] + 2 * k2[2] + 2 * k3[2] + k4[2])
            t += dt
    return np.divide.outer(np.arange(n), sample_rate_Hz), x_out, q_out


def stepped_sine(model: ReducedModel, well_m: float):
    """A stepped sine about the well at `well_m` (`SWEEP`): the step frequencies [Hz], and the
    sample times [s], base acceleration [g] and tip deflection [m] of each step's measured
    cycles (columns), every step from rest in the well at once (`integrate`), noise-free."""
    frequency = np.arange(SWEEP["low_Hz"], SWEEP["high_Hz"] + 1e-9, SWEEP["step_Hz"])
    omega = 2.0 * math.pi * frequency
    amplitude = SWEEP["amplitude_g"] * STANDARD_GRAVITY
    cycles, per_cycle = SWEEP["cycles"], SWEEP["per_cycle"]
    t, x, _ = integrate(model, lambda time_s: amplitude * np.cos(omega * time_s),
                        np.full(frequency.size, well_m),
                        (SWEEP["settle_cycles"] + cycles) / frequency, per_cycle * frequency,
                        SWEEP["substeps"])
    kept = slice(t.shape[0] - cycles * per_cycle, None)
    return frequency, t[kept], amplitude * np.cos(omega * t[kept]) / STANDARD_GRAVITY, x[kept]


def tracked(frequency: np.ndarray, time_s: np.ndarray, base_g: np.ndarray, tip_m: np.ndarray,
            rng: np.random.Generator):
    """Base-acceleration amplitudes [g], tip amplitudes [m] and phases [deg] of the tip
    against the table of each step (`stepped_sine`), read as an analyser's tracking filter
    does: sensor noise on the samples, then projection on e^(−iωt) over whole cycles."""
    base_g = base_g + SWEEP["reference_noise_g"] * rng.standard_normal(base_g.shape)
    tip_m = tip_m + NOISE["displacement_m"] * rng.standard_normal(tip_m.shape)
    turn = np.exp(-2j * math.pi * frequency * time_s)
    base, tip = 2.0 * np.mean(base_g * turn, axis=0), 2.0 * np.mean(tip_m * turn, axis=0)
    return np.abs(base), np.abs(tip), np.degrees(np.angle(tip / base))


def write_table(name: str, comments: list[str], header: str, columns, formats) -> None:
    lines = [f"# {c}" for c in comments] + [header]
    lines += [",".join(f % v for f, v in zip(formats, row)) for row in zip(*columns)]
    (OUT / name).write_text("\n".join(lines) + "\n", encoding="utf-8")


def main() -> None:
    from harvester.commands.calibrate import calibrate_result

    OUT.mkdir(exist_ok=True)
    rng = np.random.default_rng(SEED)
    truth = build(parse_case(prototype_case_text(), DESIGN))
    model = truth.model.with_load(LOAD_OHM)
    well = max(analyse_wells(model).wells_m)
    scenario = ("invented prototype CV-1 of cases/oscillating-conveyor-coil.toml "
                "(make_prototype_test.py)")

    open_coil = ReducedModel(mass_kg=model.mass_kg, damping_N_s_per_m=model.damping_N_s_per_m,
                             stiffness=model.stiffness, forcing_mass_kg=model.forcing_mass_kg)
    t, x, _ = integrate(open_coil, lambda _: 0.0, well + RINGDOWN["pluck_m"],
                        RINGDOWN["duration_s"], RINGDOWN["sample_rate_Hz"], 2)
    x = x + NOISE["displacement_m"] * rng.standard_normal(x.size)
    write_table("ringdown.csv", [scenario, "free decay in the right-hand well after a pluck, "
                                 "coil open; laser triangulation sensor"],
                "time [s], tip_displacement [mm]", (t, 1e3 * x), ("%.4f", "%.4f"))

    force = restoring_force(FORCE_TABLE_M, truth.beam.tip_stiffness_N_per_m, truth.tip,
                            truth.fixed, truth.gap_m, truth.beam.slope_per_deflection_per_m,
                            truth.magnet_model, truth.beam.foreshortening_per_m)
    force = force + LOAD_CELL["offset_N"] + LOAD_CELL["noise_N"] * rng.standard_normal(force.size)
    write_table("force-deflection.csv", [scenario, "micrometer stage and load cell, coil open, "
                                         "magnets in place"],
                "deflection [mm], force [mN]", (1e3 * FORCE_TABLE_M, 1e3 * force),
                ("%.2f", "%.3f"))

    omega = 2.0 * math.pi * TONE["frequency_Hz"]
    amplitude = TONE["amplitude_g"] * STANDARD_GRAVITY
    harmonic = TONE["second_harmonic"]

    def base(time_s):
        return amplitude * (np.cos(omega * time_s) + harmonic * np.cos(2 * omega * time_s + 1.0))

    settle = TONE["settle_s"]
    t, x, current = integrate(model, base, well, settle + TONE["duration_s"],
                              TONE["sample_rate_Hz"], SUBSTEPS)
    kept = t >= settle
    t, x, current = t[kept], x[kept], current[kept]
    a = base(t) / STANDARD_GRAVITY + NOISE["acceleration_g"] * rng.standard_normal(t.size)
    x = x + NOISE["displacement_m"] * rng.standard_normal(t.size)
    v = LOAD_OHM * current + NOISE["voltage_V"] * rng.standard_normal(t.size)
    write_table("shaker-14Hz.csv", [scenario, f"{TONE['frequency_Hz']:g} Hz, "
                                    f"{TONE['amplitude_g']:g} g tone on an electrodynamic "
                                    f"shaker; coil across {LOAD_OHM:g} ohm"],
                "time [s], base_acceleration [g], tip_displacement [mm], voltage [V]",
                (t - settle, a, 1e3 * x, v), ("%.5f", "%.4f", "%.4f", "%.4f"))

    frequency, *samples = stepped_sine(model, well)
    amplitude_g, displacement_m, phase_deg = tracked(frequency, *samples, rng)
    write_table("sweep.csv", [scenario, f"stepped sine about the right-hand well, "
                              f"{SWEEP['amplitude_g']:g} g, coil across {LOAD_OHM:g} ohm; "
                              "amplitudes and phase of the tip against the table from the "
                              "analyser's tracking filter"],
                "frequency [Hz], base_acceleration [g], tip_displacement [mm], phase [deg]",
                (frequency, amplitude_g, 1e3 * displacement_m, phase_deg),
                ("%.2f", "%.6f", "%.6f", "%.2f"))

    result = calibrate_result(load_case(DESIGN), ringdown=OUT / "ringdown.csv",
                              force_deflection=OUT / "force-deflection.csv",
                              sweep=OUT / "sweep.csv", out=CALIBRATED)
    CALIBRATED.write_text(result.case_text, encoding="utf-8")


if __name__ == "__main__":
    main()
