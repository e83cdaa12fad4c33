"""Orbit classification, attractors and the largest Lyapunov exponent on published double wells."""

import math

import numpy as np
import pytest
from scipy.optimize import brentq

from harvester.dynamics.integrator import simulate_tone
from harvester.dynamics.lyapunov import largest_lyapunov_exponent
from harvester.dynamics.orbits import (
    CHAOTIC,
    INTERWELL_PERIODIC,
    INTRAWELL,
    KINDS,
    basin_samples,
    classify_orbits,
    find_attractors,
)
from harvester.model import PiezoCircuit, ReducedModel


def canonical(delta: float = 0.25) -> ReducedModel:
    """u'' + δu' − u + u³ = γ cos ωτ as a reduced model: m = 1, k1 = −1, k3 = 1, time in units
    of 1/ω0 (so frequency_Hz = ω/2π and exponents are per unit time).  Forcing enters as −a,
    a phase shift of π that changes no attractor."""
    return ReducedModel(mass_kg=1.0, damping_N_s_per_m=delta, stiffness=(-1.0, 1.0),
                        forcing_mass_kg=1.0)


def erturk_hoffmann_inman() -> ReducedModel:
    """Erturk, Hoffmann & Inman (2009), Appl. Phys. Lett. 94:254102 (memory):
    x'' + 2ζx' − ½x(1 − x²) − χv = f cos Ωτ,  v' + λv + κx' = 0,  ζ = 0.01, χ = 0.05,
    κ = 0.5, λ = 0.05.  With w = −v this is the reduced model m = 1, c = 2ζ, k1 = −½, k3 = ½
    and a piezo circuit C w' = θx' − w/R with θ = χ, θ/C = κ, 1/(RC) = λ."""
    theta = 0.05
    capacitance = theta / 0.5
    return ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.02, stiffness=(-0.5, 0.5),
                        forcing_mass_kg=1.0, transducer=PiezoCircuit(theta, capacitance),
                        load_ohm=1.0 / (0.05 * capacitance))


OMEGA_HZ = 1.0 / (2.0 * math.pi)
ERTURK_HZ = 0.8 / (2.0 * math.pi)


def test_canonical_small_forcing_is_period_one_intrawell_with_exponent_minus_half_delta():
    # δ = 0.25, ω = 1, γ = 0.18: period-1 orbits inside the wells (common practice in textbooks
    # on chaos).  The beam at rest in a well stays on the small orbit, whose
    # Floquet multipliers are complex, so the largest exponent is −δ/2 (the Jacobian's trace
    # is −δ).
    model = canonical()
    states = basin_samples(model, 16, seed=3)
    ens = simulate_tone(model, 0.18, OMEGA_HZ, states[:, 0], states[:, 1],
                        transient_periods=200, strobe_periods=32)
    classes = classify_orbits(model, ens)
    assert np.all(classes.kind == KINDS.index(INTRAWELL))
    assert np.all(classes.period == 1)
    assert classes.well[0] == 1
    attractors = find_attractors(model, ens, classes)
    assert sum(a.share for a in attractors) == pytest.approx(1.0)
    assert {a.well for a in attractors} == {-1, 1}
    lyap = largest_lyapunov_exponent(model, 0.18, OMEGA_HZ, 1.0, 0.0, transient_periods=100,
                                     periods=400)
    assert lyap.exponent_per_s[0] == pytest.approx(-0.125, abs=0.002)


@pytest.mark.parametrize("gamma, exponent", [(0.3, 0.12), (0.4, 0.15)])
def test_canonical_strange_attractor(gamma, exponent):
    # δ = 0.25, ω = 1: γ = 0.3 and 0.4 give a chaotic strange attractor with largest exponent
    # ≈ +0.12 and +0.15 per unit time (common practice, memory; ±0.025 for that and for the
    # finite averaging time)
    model = canonical()
    states = basin_samples(model, 8, seed=1)
    ens = simulate_tone(model, gamma, OMEGA_HZ, states[:, 0], states[:, 1],
                        transient_periods=100, strobe_periods=64)
    classes = classify_orbits(model, ens)
    assert np.all(classes.kind == KINDS.index(CHAOTIC))
    attractors = find_attractors(model, ens, classes)
    assert [a.kind for a in attractors] == [CHAOTIC]
    assert attractors[0].hop_rate_per_s > 0.0
    lyap = largest_lyapunov_exponent(model, gamma, OMEGA_HZ, states[:4, 0], states[:4, 1],
                                     transient_periods=100, periods=1000)
    assert np.mean(lyap.exponent_per_s) == pytest.approx(exponent, abs=0.025)


def erturk_from_rest(forcing, transient_periods, strobe_periods):
    """The Erturk–Hoffmann–Inman beam started at rest in the positive well, classified."""
    model = erturk_hoffmann_inman()
    ens = simulate_tone(model, forcing, ERTURK_HZ, 1.0, 0.0, transient_periods=transient_periods,
                        strobe_periods=strobe_periods)
    return model, ens, classify_orbits(model, ens)


def test_erturk_hoffmann_inman_chaos_at_low_forcing():
    # Erturk, Hoffmann & Inman (2009), Appl. Phys. Lett. 94:254102 (memory): Ω = 0.8,
    # f = 0.083 gives chaotic motion from rest in a well
    model, _, classes = erturk_from_rest(0.083, 400, 64)
    assert classes.kind[0] == KINDS.index(CHAOTIC)
    lyap = largest_lyapunov_exponent(model, 0.083, ERTURK_HZ, 1.0, 0.0, transient_periods=400,
                                     periods=600)
    assert lyap.exponent_per_s[0] > 0.03


def test_erturk_hoffmann_inman_large_interwell_orbit():
    # same paper (memory): f = 0.115 gives a large period-1 interwell orbit of amplitude ≈ 1.85
    # (±2 %); it crosses the barrier twice per forcing period
    _, ens, classes = erturk_from_rest(0.115, 800, 32)
    assert classes.kind[0] == KINDS.index(INTERWELL_PERIODIC)
    assert classes.period[0] == 1
    assert ens.max_abs_x_m[0] == pytest.approx(1.85, rel=0.02)
    assert ens.hops[0] == pytest.approx(2 * 32, abs=1)
    assert ens.mean_load_power_W[0] > 0.0


def one_harmonic_intrawell(gamma, omega, delta):
    """Harmonic balance for a small orbit about the well u = 1 (Stanton, Owens & Mann 2012,
    J. Sound Vib. 331:3617): u = u0 + A cos(ωτ + φ), u0² = 1 − (3/2)A²,
    A²[(2 − (15/4)A² − ω²)² + (δω)²] = γ²; the smallest root is the small orbit."""
    def residual(a):
        return a * a * ((2.0 - 3.75 * a * a - omega**2) ** 2 + (delta * omega) ** 2) - gamma**2

    grid = np.linspace(1e-6, 0.4, 4001)
    values = residual(grid)
    first = np.nonzero(np.sign(values[1:]) != np.sign(values[:-1]))[0][0]
    amplitude = brentq(residual, grid[first], grid[first + 1])
    return amplitude, math.sqrt(1.0 - 1.5 * amplitude**2)


@pytest.mark.parametrize("gamma, omega, delta", [(0.02, 0.8, 0.25), (0.05, 1.0, 0.25),
                                                 (0.05, 0.6, 0.1), (0.03, 1.2, 0.25)])
def test_small_intrawell_orbits_match_harmonic_balance(gamma, omega, delta):
    # mean and first harmonic from 8 strobe phases of the settled orbit, against one-harmonic
    # balance (Stanton, Owens & Mann 2012) within 3 % (amplitude) and 0.1 % (centre)
    amplitude, centre = one_harmonic_intrawell(gamma, omega, delta)
    phases = 2.0 * math.pi * np.arange(8) / 8
    samples = np.array([
        simulate_tone(canonical(delta), gamma, omega / (2 * math.pi), 1.0, 0.0,
                      transient_periods=150, strobe_periods=2, strobe_phase=ph).strobe_x_m[0, -1]
        for ph in phases])
    spectrum = np.fft.rfft(samples) / samples.size
    assert 2.0 * abs(spectrum[1]) == pytest.approx(amplitude, rel=0.03)
    assert spectrum[0].real == pytest.approx(centre, rel=1e-3)


def test_flagged_trajectories_are_left_out_of_attractors():
    model = ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.25, stiffness=(-1.0, 1.0),
                         forcing_mass_kg=1.0, travel_limit_m=1.3)
    ens = simulate_tone(model, np.array([0.05, 0.4]), OMEGA_HZ, 1.0, 0.0,
                        transient_periods=50, strobe_periods=16)
    classes = classify_orbits(model, ens)
    assert list(classes.kind) == [KINDS.index(INTRAWELL), -1]
    attractors = find_attractors(model, ens, classes)
    assert len(attractors) == 1 and attractors[0].share == pytest.approx(0.5)


def tilted(applied: float = 0.3, delta: float = 0.01) -> ReducedModel:
    """The canonical double well pushed by a constant force F0: u'' + δu' − u + u³ = F0, i.e. a
    restoring force with k0 = −F0.  For F0 = 0.3 the equilibria, roots of u³ − u − F0 = 0, are
    −0.834 and 1.138 (wells) and −0.304 (saddle)."""
    return ReducedModel(mass_kg=1.0, damping_N_s_per_m=delta, stiffness=(-1.0, 1.0),
                        forcing_mass_kg=1.0, even_stiffness=(-applied,))


def test_intrawell_orbit_about_a_shifted_saddle():
    # Unforced and damped, the energy ½u'² + U(u) (U = u⁴/4 − u²/2 − F0 u) never rises
    # (Lyapunov's direct method, e.g. Guckenheimer & Holmes 1983, §1.8 (memory)), so a start at
    # rest with U below U(saddle) stays in its well for good.  Started at u = −0.1, between the
    # saddle −0.304 and the right well 1.138, the beam swings through u = 0 every cycle but
    # never past the saddle: intrawell, right well — counted about the saddle, not about 0.
    model = tilted()
    saddle = brentq(lambda u: u**3 - u - 0.3, -0.6, 0.0)
    energy = lambda u: u**4 / 4 - u**2 / 2 - 0.3 * u  # noqa: E731
    assert energy(-0.1) < energy(saddle)
    ens = simulate_tone(model, 0.0, OMEGA_HZ, -0.1, 0.0, transient_periods=0, strobe_periods=40)
    classes = classify_orbits(model, ens)
    assert ens.x_min_m[0] < 0.0 < ens.x_max_m[0]  # x changes sign ...
    assert ens.x_min_m[0] > saddle  # ... but stays right of the saddle
    assert ens.zero_crossings[0] == 0
    assert KINDS[classes.kind[0]] == INTRAWELL and classes.well[0] == 1


def test_basin_samples_start_at_rest_in_each_unequal_well():
    # the first two starts are the beam at rest in the right and the left well, the roots of
    # u³ − u − F0 = 0 (bracketed by brentq); the others spread about the saddle
    model = tilted()
    left = brentq(lambda u: u**3 - u - 0.3, -1.5, -0.6)
    right = brentq(lambda u: u**3 - u - 0.3, 0.6, 1.5)
    saddle = brentq(lambda u: u**3 - u - 0.3, -0.6, 0.0)
    states = basin_samples(model, 400, seed=4)
    assert states[0, 0] == pytest.approx(right, rel=1e-12)
    assert states[1, 0] == pytest.approx(left, rel=1e-12)
    assert np.all(states[:2, 1] == 0.0)
    reach = 1.5 * max(right - saddle, saddle - left)
    assert np.all(np.abs(states[2:, 0] - saddle) <= reach)
    assert np.mean(states[2:, 0]) == pytest.approx(saddle, abs=0.1 * reach)
