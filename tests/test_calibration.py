"""Calibration from tests: damping from ring-downs, the restoring force from a force–deflection
table, the magnets' remanence and gap, and the calibrated case file."""

from __future__ import annotations

import json
import math
import subprocess
import sys
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from harvester.analysis.calibration import (
    CaseChange,
    calibrate_case,
    calibrated_case_text,
    envelope_damping,
    fit_magnet_pair,
    fit_restoring_force,
    log_decrement,
)
from harvester.build import build, restoring_force
from harvester.case.load import load_case, parse_case
from harvester.case.measurements import ForceDeflection, Ringdown
from harvester.errors import CaseError
from harvester.model import analyse_wells

ROOT = Path(__file__).resolve().parent.parent
GEOMETRY = ROOT / "tests" / "data" / "small-study.toml"


def decaying_sine(zeta: float, f_n: float, *, cycles: float = 40.0, per_cycle: int = 64,
                  offset: float = 0.0) -> Ringdown:
    omega = 2 * math.pi * f_n
    damped = omega * math.sqrt(1 - zeta**2)
    t = np.arange(int(cycles * per_cycle)) * 2 * math.pi / (damped * per_cycle)
    y = offset + 1e-3 * np.exp(-zeta * omega * t) * np.cos(damped * t + 0.4)
    return Ringdown(t, y, "tip_displacement", 1.0 / (t[1] - t[0]), "sine.csv")


def free_decay(mass: float, damping: float, stiffness: tuple[float, ...], x0: float, *,
               quadratic: float = 0.0, cycles: int = 60, per_cycle: int = 64,
               substeps: int = 4) -> Ringdown:
    """Free decay of m ẍ + c ẋ + b|ẋ|ẋ + F(x) = 0 from rest at x0, by classical RK4 in plain
    Python, sampled `per_cycle` times per small-oscillation period about the nearest
    equilibrium."""
    equilibria = [w for w in analyse_wells_of(stiffness) if w * x0 > 0] or [0.0]
    well = equilibria[0]
    slope = sum((2 * j + 1) * k * well ** (2 * j) for j, k in enumerate(stiffness))
    period = 2 * math.pi / math.sqrt(slope / mass)
    dt = period / (per_cycle * substeps)

    def accel(x, v):
        force = sum(k * x ** (2 * j + 1) for j, k in enumerate(stiffness))
        return (-damping * v - quadratic * abs(v) * v - force) / mass

    n = cycles * per_cycle
    out = np.empty(n)
    x, v = x0, 0.0
    for s in range(n * substeps):
        if s % substeps == 0:
            out[s // substeps] = x
        a1 = accel(x, v)
        a2 = accel(x + dt / 2 * v, v + dt / 2 * a1)
        a3 = accel(x + dt / 2 * (v + dt / 2 * a1), v + dt / 2 * a2)
        a4 = accel(x + dt * (v + dt / 2 * a2), v + dt * a3)
        x, v = (x + dt * v + dt * dt / 6 * (a1 + a2 + a3),
                v + dt / 6 * (a1 + 2 * a2 + 2 * a3 + a4))
    t = np.arange(n) * dt * substeps
    return Ringdown(t, out, "tip_displacement", 1.0 / (dt * substeps), "decay.csv")


def analyse_wells_of(stiffness: tuple[float, ...]) -> tuple[float, ...]:
    from harvester.model import stable_equilibria

    return stable_equilibria(stiffness)


# -- damping ----------------------------------------------------------------------------------
def test_log_decrement_of_a_decaying_sine_is_exact():
    # x = e^(−ζω_n t) cos(ω_d t + φ): successive cycle amplitudes fall by e^δ with
    # δ = 2πζ/√(1 − ζ²), and ζ = δ/√(4π² + δ²) (Thomson & Dahleh 1998, Theory of Vibration with
    # Applications, §2.6).  Exact up to the spline's extremum (≈ 1e-7 at 64 samples a cycle).
    for zeta in (0.003, 0.02, 0.1):
        result = log_decrement(decaying_sine(zeta, 19.0, offset=4e-3))
        assert result.decrement == pytest.approx(2 * math.pi * zeta / math.sqrt(1 - zeta**2),
                                                 rel=1e-6)
        assert result.damping_ratio == pytest.approx(zeta, rel=1e-6)
        assert result.natural_frequency_Hz == pytest.approx(19.0, rel=1e-6)


def test_hilbert_envelope_of_a_decaying_sine():
    # The analytic signal of a slowly decaying sine has envelope A e^(−ζω_n t) and phase rate
    # ω_d (Feldman 1994, Mech. Syst. Signal Process. 8:119).  Tolerance 2 %: the discrete
    # Hilbert transform of a finite record ripples near its ends (two cycles are dropped).
    ring = decaying_sine(0.02, 19.0, offset=4e-3)
    result = envelope_damping(ring, log_decrement(ring))
    assert result.damping_ratio == pytest.approx(0.02, rel=0.02)
    assert result.damped_frequency_Hz == pytest.approx(19.0 * math.sqrt(1 - 0.02**2), rel=1e-3)
    assert not result.amplitude_dependent


def test_velocity_squared_damping_shows_as_amplitude_dependent():
    # ẍ + 2ζω ẋ + b|ẋ|ẋ + ω² x = 0: by equal energy loss per cycle the quadratic term acts as a
    # viscous one of ratio (4/(3π)) b X at amplitude X, so ζ_eq(X) = ζ + 4bX/(3π) (Den Hartog
    # 1956, Mechanical Vibrations, 4th ed., §2.9; memory).  Tolerance 15 %: each band averages
    # over its own spread of amplitudes.
    zeta, b = 0.005, 30.0
    omega = 2 * math.pi * 10.0
    ring = free_decay(1.0, 2 * zeta * omega, (omega**2,), 1e-3, quadratic=b, cycles=120)
    result = envelope_damping(ring, log_decrement(ring))
    assert result.amplitude_dependent
    expected = zeta + 4 * b * result.band_amplitude / (3 * math.pi)
    np.testing.assert_allclose(result.band_damping_ratio, expected, rtol=0.15)


def test_a_decay_too_short_is_refused():
    ring = decaying_sine(0.3, 19.0, cycles=3)
    with pytest.raises(CaseError) as exc:
        log_decrement(ring)
    assert "sine.csv" in str(exc.value) and "at least 4" in str(exc.value)


# -- restoring force --------------------------------------------------------------------------
def test_restoring_force_coefficients_and_their_intervals():
    # A table of F = k1 x + k3 x³ (+ k2 x²) with 1 mN of noise: the least-squares estimate is
    # unbiased and its Student's-t interval from s²(AᵀA)⁻¹ covers the truth in 95 % of tables
    # (Björck 1996, Numerical Methods for Least Squares Problems, §1.1); checked over 40 tables
    # (at least 34 covering: binomial, 40 × 0.95 less 2.5 standard deviations); the k2 term,
    # zero here, is called significant in at most 6 (40 × 0.05 plus 2.5 standard deviations).
    x = np.linspace(-6e-3, 6e-3, 41)
    covered = false_alarms = 0
    for seed in range(40):
        noise = 1e-3 * np.random.default_rng(seed).standard_normal(x.size)
        fit = fit_restoring_force(ForceDeflection(x, -40 * x + 4e6 * x**3 + noise, "fd.csv"),
                                  degree=3)
        (lo1, hi1), (lo3, hi3) = fit.odd_ci95
        covered += lo1 <= -40 <= hi1
        assert fit.odd_stiffness[0] == pytest.approx(-40, rel=0.05)
        assert fit.odd_stiffness[1] == pytest.approx(4e6, rel=0.05)
        false_alarms += fit.even_terms_significant
    assert covered >= 34 and false_alarms <= 6
    tilted = fit_restoring_force(ForceDeflection(x, -40 * x + 2e3 * x**2 + 4e6 * x**3, "t.csv"))
    assert tilted.even_terms_significant
    assert tilted.coefficients[2] == pytest.approx(2e3, rel=1e-6)


def test_magnet_pair_fit_recovers_remanence_and_gap():
    # A force–deflection table of the same geometry built with 4 % less remanence and the fixed
    # magnet 0.2 mm further away, with 0.5 mN of load-cell noise and a 1 mN zero offset: the
    # fit returns both within their 95 % intervals (the model is exact here, so only the noise
    # separates them; the remanence to better than 1 %).
    built = build(load_case(GEOMETRY))
    tip = replace(built.tip, remanence_T=0.96 * built.tip.remanence_T)
    fixed = replace(built.fixed, remanence_T=0.96 * built.fixed.remanence_T)
    x = np.linspace(-8e-3, 8e-3, 33)
    force = restoring_force(x, built.beam.tip_stiffness_N_per_m, tip, fixed, built.gap_m + 2e-4,
                            built.beam.slope_per_deflection_per_m, built.magnet_model,
                            built.beam.foreshortening_per_m)
    force = force + 1e-3 + 5e-4 * np.random.default_rng(7).standard_normal(x.size)
    fit = fit_magnet_pair(built, ForceDeflection(x, force, "fd.csv"))
    assert fit.remanence_scale_ci95[0] <= 0.96 <= fit.remanence_scale_ci95[1]
    assert fit.gap_offset_ci95_m[0] <= 2e-4 <= fit.gap_offset_ci95_m[1]
    assert fit.remanence_scale == pytest.approx(0.96, rel=0.01)


# -- the calibrated case ----------------------------------------------------------------------
REDUCED_CASE = '''title = "bench prototype"
notes = """
[reduced] in a note must not be touched: stiffness = "nothing"
"""

[reduced]
mass = "5 g"
stiffness = [
  "-40 N/m",   # k1
  "4e6 N/m^3",
]
damping = "0.01 N*s/m"   # from the data sheet

[load]
resistance = "47 kohm"
'''


def test_case_text_keeps_everything_but_the_calibrated_values(tmp_path):
    changes = [CaseChange("reduced", "damping", '"0.012 N*s/m"', "ring-down r.csv"),
               CaseChange("reduced", "stiffness", '["-38 N/m", "3.9e6 N/m^3"]', "fd.csv"),
               CaseChange("reduced", "forcing_mass", '"5.5 g"', "a note"),
               CaseChange("limits", "travel", '"4 mm"', "a new table")]
    text = calibrated_case_text(REDUCED_CASE, changes)
    assert 'stiffness = "nothing"' in text  # inside the multi-line string
    assert 'damping = "0.012 N*s/m"  # from the data sheet' in text
    assert "# calibrated: ring-down r.csv" in text and '"-40 N/m"' not in text
    case = parse_case(text, tmp_path / "c.toml").case
    assert case.reduced.damping == pytest.approx(0.012)
    assert case.reduced.stiffness == pytest.approx((-38.0, 3.9e6))
    assert case.reduced.forcing_mass == pytest.approx(5.5e-3)
    assert case.limits.travel == pytest.approx(4e-3)
    again = calibrated_case_text(text, changes[:1])
    assert again.count("# calibrated: ring-down r.csv") == 1


def test_record_of_a_known_model_is_recovered(tmp_path):
    # Tests synthesised from a known reduced model (m = 5 g, k1 = −40 N/m, k3 = 4e6 N/m³,
    # c = 0.012 N·s/m): a ring-down about the well (10 % of the well position, by RK4) and a
    # force–deflection table with 1 mN of noise.  The calibrated case has the model's damping
    # and k1, k3 within 5 % (the ring-down's nonlinearity and the table's noise are the only
    # errors: the decrement is exact for a linear oscillator, the fit unbiased).
    mass, c, k = 5e-3, 0.012, (-40.0, 4e6)
    well = math.sqrt(40 / 4e6)
    ring = free_decay(mass, c, k, 1.1 * well)
    x = np.linspace(-6e-3, 6e-3, 41)
    noise = 1e-3 * np.random.default_rng(11).standard_normal(x.size)
    table = ForceDeflection(x, k[0] * x + k[1] * x**3 + noise, "fd.csv")
    case = tmp_path / "bench.toml"
    case.write_text(REDUCED_CASE, encoding="utf-8")
    result = calibrate_case(load_case(case), ringdown=ring, force_deflection=table)
    calibrated = tmp_path / "bench-calibrated.toml"
    calibrated.write_text(result.text, encoding="utf-8")
    model = build(load_case(calibrated)).model
    assert model.damping_N_s_per_m == pytest.approx(c, rel=0.05)
    assert model.stiffness[0] == pytest.approx(k[0], rel=0.05)
    assert model.stiffness[1] == pytest.approx(k[1], rel=0.05)
    assert result.ringdown.log_decrement.cycles >= 20


def test_calibrated_geometry_case_runs_through_the_commands(tmp_path):
    # The calibrated file is a case like any other: `harvester wells` reads it, and the weaker
    # magnets and wider gap move the critical gap and shrink the barrier.
    loaded = load_case(GEOMETRY)
    built = build(loaded)
    tip = replace(built.tip, remanence_T=0.96 * built.tip.remanence_T)
    fixed = replace(built.fixed, remanence_T=0.96 * built.fixed.remanence_T)
    x = np.linspace(-8e-3, 8e-3, 33)
    force = restoring_force(x, built.beam.tip_stiffness_N_per_m, tip, fixed, built.gap_m + 2e-4,
                            built.beam.slope_per_deflection_per_m, built.magnet_model,
                            built.beam.foreshortening_per_m)
    result = calibrate_case(loaded, force_deflection=ForceDeflection(x, force, "fd.csv"))
    path = tmp_path / "calibrated.toml"
    path.write_text(result.text, encoding="utf-8")
    calibrated = build(load_case(path))
    assert calibrated.tip.remanence_T == pytest.approx(0.96 * built.tip.remanence_T, rel=1e-3)
    assert calibrated.gap_m == pytest.approx(built.gap_m + 2e-4, abs=1e-6)
    assert analyse_wells(calibrated.model).barrier_J < analyse_wells(built.model).barrier_J
    run = subprocess.run([sys.executable, "-m", "harvester", "wells", str(path), "--format",
                          "json"], capture_output=True, text=True, timeout=300, cwd=ROOT)
    assert run.returncode == 0, run.stderr
    data = json.loads(run.stdout)
    assert data["critical_gap_m"] < built.critical_gap_m
