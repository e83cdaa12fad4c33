"""Hop thresholds: the Melnikov bound and the numerical onset/certain amplitudes."""

import json
import math
from dataclasses import replace

import numpy as np
import pytest

from harvester.analysis.melnikov import circuit_melnikov_work, homoclinic_orbit
from harvester.analysis.thresholds import (
    HOPS,
    RUNG,
    STAGE_RUNGS,
    STOP_BEFORE_HOP,
    TOP_MULTIPLE,
    frequency_bands,
    hop_thresholds,
    melnikov_threshold,
    scan_ceiling,
    settling_periods,
)
from harvester.dynamics.integrator import (
    FLAG_TRAVEL,
    recommended_steps_per_period,
    simulate_tone,
)
from harvester.model import CoilCircuit, PiezoCircuit, ReducedModel

CANONICAL = ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.25, stiffness=(-1.0, 1.0),
                         forcing_mass_kg=1.0)
OMEGA_HZ = 1.0 / (2.0 * math.pi)
WELL_HZ = math.sqrt(2.0) / (2.0 * math.pi)  # its wells' small-oscillation frequency √(−2k1/m)


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
    # without a travel limit nothing can strike: the row is a plain "hops" row
    assert row.status == HOPS and row.stop_mps2 is None
    assert row.certain_mps2 <= row.scan_top_mps2 <= scan_ceiling(CANONICAL, OMEGA_HZ)


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


def test_a_stop_just_beyond_the_well_is_struck_before_any_hop():
    # The canonical double well (x_w = 1, k_w = F'(x_w) = 2, m = m_f = 1, c = 0.25) with its stop
    # 0.05 beyond the well, shaken at the well's resonance ω = √2.  Linearised about the well
    # its steady swing is m_f A/|k_w − mω² + icω| (receptance of the damped single-degree-of-
    # freedom oscillator: Thomson & Dahleh 1998, Theory of Vibration with Applications, ch. 3),
    # so it reaches the stop at A = 0.05·0.25√2 = 0.0177 m/s², far below any hop (the Melnikov
    # bound there is 0.247).  At resonance the swing from rest grows to the steady one without
    # overshoot (the free motion added by the start cancels the forced one at t = 0 and
    # decays).  Tolerance: the well's quadratic term (F(1 + y) = 2y + 3y² + y³) pulls the swing
    # towards the saddle; to second order its outward peak is a − αa²/(3ω_w²) with α = 3,
    # ω_w² = 2 (mean drift −αa²/(2ω_w²) plus second harmonic αa²/(6ω_w²): Landau & Lifshitz,
    # Mechanics, §28 (memory)), so reaching a = 0.05 takes 2.5 % more forcing, and the
    # bisection reports the top of a 0.5 % bracket: 1 ≤ stop/A ≤ 1.04.
    room = 0.05
    model = replace(CANONICAL, travel_limit_m=1.0 + room)
    (row,) = hop_thresholds(model, [WELL_HZ], n_initial=12)
    linear = room * abs(complex(2.0 - 2.0, 0.25 * math.sqrt(2.0)))
    assert linear <= row.stop_mps2 <= 1.04 * linear
    assert row.status == STOP_BEFORE_HOP and row.flagged
    assert row.onset_mps2 is None and row.certain_mps2 is None
    # the scan ends at the strike (within one stage of rungs), long before the beam at rest
    # would hop were there no stops
    (free,) = hop_thresholds(CANONICAL, [WELL_HZ], n_initial=12)
    assert row.stop_mps2 < row.scan_top_mps2 <= row.stop_mps2 * RUNG**STAGE_RUNGS
    assert row.scan_top_mps2 < free.melnikov_mps2 <= free.onset_mps2


def test_no_threshold_is_reported_at_or_beyond_the_stop_strike():
    # δ = 0.25, ω = 1 (the canonical check above: from rest the beam hops between γ = 0.18 and
    # 0.3).  Stops at 1.3 are struck by the swing in the well before the beam at rest hops: the
    # onset it would have without stops must not be reported.  Stops at 1.5 leave room for the
    # hop: the onset is the same trajectory's as without stops, and "certain" and
    # "interwell exists" stay below the strike too.
    # At ω = 1.3 with stops at 1.45 the swing in the well strikes them near γ = 0.31, and hopping
    # comes back above that in a narrow window (near γ = 0.55 the beam at rest hops without
    # reaching 1.45, seen here): a hop beyond the strike, which must not be reported either.
    (free,) = hop_thresholds(CANONICAL, [OMEGA_HZ], n_initial=12)
    (tight,) = hop_thresholds(replace(CANONICAL, travel_limit_m=1.3), [OMEGA_HZ], n_initial=12)
    (wide,) = hop_thresholds(replace(CANONICAL, travel_limit_m=1.5), [OMEGA_HZ], n_initial=12)
    (window,) = hop_thresholds(replace(CANONICAL, travel_limit_m=1.45), [1.3 / (2 * math.pi)],
                               n_initial=12)
    assert window.status == STOP_BEFORE_HOP and window.onset_mps2 is None
    for row in (tight, wide, window):
        assert row.stop_mps2 is not None
        assert all(v is None or v < row.stop_mps2 for v in (
            row.onset_mps2, row.certain_mps2, row.interwell_exists_mps2))
    assert tight.stop_mps2 < free.onset_mps2
    assert tight.onset_mps2 is None and tight.status == STOP_BEFORE_HOP
    assert wide.onset_mps2 == free.onset_mps2 < wide.stop_mps2 and wide.status == HOPS
    # the strike is real: the beam at rest, shaken at the reported stop amplitude, is flagged
    band = 2.0 ** float(frequency_bands([OMEGA_HZ])[0])
    rest = simulate_tone(replace(CANONICAL, travel_limit_m=1.3), tight.stop_mps2, OMEGA_HZ, 1.0,
                         0.0, transient_periods=settling_periods(CANONICAL, 2 * band),
                         strobe_periods=16, steps_per_period=recommended_steps_per_period(
                             CANONICAL, band, per_fast_period=32))
    assert rest.flag[0] == FLAG_TRAVEL


def test_scan_ceiling_is_a_multiple_of_the_push_across_the_well():
    # Canonical double well: the largest push towards the saddle, max −F(x) on (0, x_w), is
    # (2/(3√3))|k1| x_w = 0.3849 at x = x_w/√3 (elementary calculus of k1 x + k3 x³); the
    # dynamic stiffness of the linearised well |k_w − mω² + icω| (Thomson & Dahleh 1998, Theory
    # of Vibration with Applications, ch. 3) is |1 + 0.25i| at ω = 1 and 0.25√2 at ω = √2.
    # The barrier force comes from 257 samples: 1e-4.
    assert scan_ceiling(CANONICAL, OMEGA_HZ) == pytest.approx(
        TOP_MULTIPLE * abs(1 + 0.25j), rel=1e-12)
    assert scan_ceiling(CANONICAL, WELL_HZ) == pytest.approx(
        TOP_MULTIPLE * 2 / (3 * math.sqrt(3)), rel=1e-4)
    # with a travel limit the swing is measured to the far stop, x_w + travel
    assert scan_ceiling(replace(CANONICAL, travel_limit_m=1.5), OMEGA_HZ) == pytest.approx(
        TOP_MULTIPLE * 2.5 * abs(1 + 0.25j), rel=1e-12)
