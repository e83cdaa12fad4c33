"""Hop thresholds: the Melnikov bound and the numerical onset/certain amplitudes."""

import json
import math

import numpy as np
import pytest

from harvester.analysis.melnikov import circuit_melnikov_work, homoclinic_orbit
from harvester.analysis.thresholds import (
    frequency_bands,
    hop_thresholds,
    melnikov_threshold,
    settling_periods,
)
from harvester.dynamics.integrator import recommended_steps_per_period, simulate_tone
from harvester.model import CoilCircuit, PiezoCircuit, ReducedModel

CANONICAL = ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.25, stiffness=(-1.0, 1.0),
                         forcing_mass_kg=1.0)
OMEGA_HZ = 1.0 / (2.0 * math.pi)


def gh_bound(delta: float, omega: float) -> float:
    """γ_M = 4δ cosh(πω/2)/(3√2 π ω): Guckenheimer & Holmes (1983), Nonlinear Oscillations,
    Dynamical Systems, and Bifurcations of Vector Fields, §4.5."""
    return 4.0 * delta * math.cosh(0.5 * math.pi * omega) / (3.0 * math.sqrt(2.0) * math.pi * omega)


def test_melnikov_check_value():
    # Guckenheimer & Holmes (1983) §4.5: δ = 0.25, ω = 1 → γ_M = 0.18825
    assert melnikov_threshold(CANONICAL, OMEGA_HZ) == pytest.approx(0.18825, abs=5e-6)


def test_melnikov_in_physical_units():
    # the scales of harvester/METHODS.md §4: γ = m_f a/(m x0 ω0²), δ = c/(m ω0), ω = 2πf/ω0,
    # for a beam with k1 = −60 N/m, k3 = 6e6 N/m³, m = 10 g, m_f = 12 g, c = 0.03 N·s/m
    model = ReducedModel(mass_kg=0.01, damping_N_s_per_m=0.03, stiffness=(-60.0, 6.0e6),
                         forcing_mass_kg=0.012)
    omega0, x0 = math.sqrt(6000.0), math.sqrt(1e-5)
    for f in (5.0, 12.0, 30.0):
        gamma = gh_bound(0.03 / (0.01 * omega0), 2 * math.pi * f / omega0)
        expected = gamma * 0.01 * x0 * omega0**2 / 0.012
        assert melnikov_threshold(model, f) == pytest.approx(expected, rel=1e-12)


def test_melnikov_in_the_erturk_scaling():
    # Erturk, Hoffmann & Inman (2009), Appl. Phys. Lett. 94:254102 scaling (memory):
    # x'' + 2ζx' − ½x(1 − x²) = f cos Ωτ  →  f_M = (2√2 ζ/(3πΩ)) cosh(πΩ/√2), no circuit
    zeta = 0.01
    model = ReducedModel(mass_kg=1.0, damping_N_s_per_m=2 * zeta, stiffness=(-0.5, 0.5),
                         forcing_mass_kg=1.0)
    for big_omega in (0.5, 0.8, 1.2):
        expected = 2 * math.sqrt(2) * zeta / (3 * math.pi * big_omega) * math.cosh(
            math.pi * big_omega / math.sqrt(2))
        assert melnikov_threshold(model, big_omega / (2 * math.pi)) == pytest.approx(
            expected, rel=1e-12)


def test_resistive_coil_adds_its_viscous_damping():
    # A coil without inductance is a viscous damper (Bl)²/(R_c + R_l) (harvester/METHODS.md
    # §2), so the bound is Guckenheimer & Holmes's with δ = (c + (Bl)²/(R_c + R_l))/(m ω0)
    model = ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.1, stiffness=(-1.0, 1.0),
                         forcing_mass_kg=1.0, transducer=CoilCircuit(0.6, 1.0, 0.0),
                         load_ohm=2.0)
    delta = 0.1 + 0.36 / 3.0
    assert melnikov_threshold(model, OMEGA_HZ) == pytest.approx(gh_bound(delta, 1.0), rel=1e-8)


def test_piezo_circuit_limits():
    # RC ≪ 1/ω0: the piezo is the damper θ²R (C → 0 in harvester/METHODS.md §2), whose work
    # along the canonical homoclinic orbit is θ²R ∫v² dt = θ²R·4/3 (Guckenheimer & Holmes
    # 1983 §4.5, u_h = √2 sech t); RC ≫ 1/ω0 (open circuit) it dissipates nothing, and in
    # between it dissipates less than the damper
    theta = 0.2

    def work(capacitance, load):
        model = ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.1, stiffness=(-1.0, 1.0),
                             forcing_mass_kg=1.0, transducer=PiezoCircuit(theta, capacitance),
                             load_ohm=load)
        return circuit_melnikov_work(model, homoclinic_orbit(model))

    assert work(1e-6, 3.0) == pytest.approx(4 / 3 * theta**2 * 3.0, rel=1e-4)
    assert work(1.0, 1e6) < 1e-5
    assert 0.0 < work(1.0, 1.0) < 4 / 3 * theta**2 * 1.0


def test_numerical_thresholds_of_the_canonical_double_well():
    # δ = 0.25, ω = 1 (common practice in textbooks on chaos): γ = 0.18 leaves
    # period-1 intrawell orbits, γ = 0.3 is a strange attractor that hops.  So the onset lies in
    # (0.18, 0.3]; it cannot be below the Melnikov bound 0.188 (no tangle there, and at this
    # damping no large interwell orbit); certain ≥ onset.
    rows = hop_thresholds(CANONICAL, [OMEGA_HZ], seed=0, n_initial=24)
    row = rows[0]
    assert not row.flagged
    assert row.melnikov_mps2 == pytest.approx(0.18825, abs=5e-6)
    assert row.melnikov_mps2 <= row.onset_mps2 <= 0.3
    assert row.onset_mps2 <= row.certain_mps2 <= 0.4
    # the onset is the beam's at rest in a well: the rest state itself is interwell there, and
    # an interwell attractor (reached from some start) exists no later than that
    assert row.interwell_exists_mps2 <= row.onset_mps2 * 2 ** 0.25
    well = 1.0  # √(−k1/k3)
    band = 2.0 ** float(frequency_bands([OMEGA_HZ])[0])  # the settings of its octave band
    rest = simulate_tone(CANONICAL, row.onset_mps2, OMEGA_HZ, well, 0.0,
                         transient_periods=settling_periods(CANONICAL, 2 * band),
                         strobe_periods=16, steps_per_period=recommended_steps_per_period(
                             CANONICAL, band, per_fast_period=32))
    assert rest.zero_crossings[0] > 0


def test_frequencies_are_bisected_together_and_reproducibly():
    # with the shared step and transient fixed, a frequency's thresholds do not depend on which
    # other frequencies share its ensembles
    freqs = np.array([0.8, 1.2]) / (2 * math.pi)
    settings = dict(seed=4, n_initial=12, steps_per_period=128, transient_periods=64)
    calls = []
    together = hop_thresholds(CANONICAL, freqs, **settings,
                              progress=lambda done, total: calls.append((done, total)))
    again = hop_thresholds(CANONICAL, freqs, **settings)
    alone = hop_thresholds(CANONICAL, freqs[1:], **settings)
    assert [r.to_dict() for r in together] == [r.to_dict() for r in again]
    assert together[1].onset_mps2 == alone[0].onset_mps2
    assert together[1].certain_mps2 == alone[0].certain_mps2
    assert [d for d, _ in calls] == list(range(1, len(calls) + 1))
    assert calls[-1][0] == calls[-1][1]
    keys = {"frequency_Hz", "melnikov_mps2", "onset_mps2", "certain_mps2"}
    assert keys <= set(json.loads(json.dumps(together[0].to_dict())))


def test_default_settings_depend_only_on_the_frequency_band():
    # each frequency takes the step and transient of its own octave band, so with the default
    # settings its thresholds are the same whatever else is asked for (two bands here)
    freqs = np.array([0.13, 0.3])
    together = hop_thresholds(CANONICAL, freqs, seed=4, n_initial=12)
    alone = hop_thresholds(CANONICAL, freqs[1:], seed=4, n_initial=12)
    assert together[1].to_dict() == alone[0].to_dict()
    assert list(frequency_bands([0.13, 0.3, 1.0, 1.99, 2.0])) == [-3, -2, 0, 0, 1]


def test_monostable_has_no_thresholds():
    model = ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.1, stiffness=(1.0, 1.0),
                         forcing_mass_kg=1.0)
    (row,) = hop_thresholds(model, [0.2])
    assert row.flagged and row.melnikov_mps2 is None and row.onset_mps2 is None
    assert melnikov_threshold(model, 0.2) is None


def test_no_homoclinic_orbit_gives_no_melnikov_bound():
    # F = −x + 1.2x³ − 0.3x⁵: a stable well at x² = 1.18 but U(x)/x² = −½ + 0.3x² − 0.05x⁴ < 0
    # for every x (negative discriminant), so U never climbs back to U(0): no homoclinic orbit,
    # hence no Melnikov bound (Guckenheimer & Holmes 1983 §4.5 needs one)
    model = ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.1, stiffness=(-1.0, 1.2, -0.3),
                         forcing_mass_kg=1.0)
    assert model.is_bistable
    assert melnikov_threshold(model, 0.2) is None
