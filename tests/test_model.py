"""Reduced model: wells, barrier, frequencies, force fit and critical gap against closed forms."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from harvester.build import (
    BARRIER_TOLERANCE,
    FORCE_TOLERANCE,
    WELL_TOLERANCE,
    critical_gap,
    exact_barrier,
    exact_well,
    fit_odd_polynomial,
    fit_table,
    fit_window,
)
from harvester.model import (
    PiezoCircuit,
    ReducedModel,
    analyse_wells,
    equivalent_cubic,
    nondimensional_groups,
    stable_equilibria,
    well_stiffness,
)
from harvester.physics import magnets as mag

MU0 = 4e-7 * math.pi  # vacuum permeability [H/m] (CODATA; 4π×10⁻⁷ to 1e-9 relative)


def _duffing(k1: float, k3: float, m: float = 0.01) -> ReducedModel:
    return ReducedModel(mass_kg=m, damping_N_s_per_m=0.01, stiffness=(k1, k3),
                        forcing_mass_kg=m, linear_stiffness_N_per_m=abs(k1) * 3)


@pytest.mark.parametrize("k1, k3", [(-1.0, 1.0), (-40.0, 4e6), (-250.0, 3e7)])
def test_double_well_closed_forms(k1, k3):
    # Double well m ẍ + k1 x + k3 x³ = 0 (e.g. Kovacic & Brennan 2011, The Duffing Equation,
    # Wiley, ch. 1): wells ±√(−k1/k3), barrier k1²/(4k3), well frequency √2·√(−k1/m)
    model = _duffing(k1, k3)
    wells = analyse_wells(model)
    x0 = math.sqrt(-k1 / k3)
    assert wells.regime == "bistable"
    assert wells.wells_m == pytest.approx((-x0, x0), rel=1e-12)
    assert wells.barrier_J == pytest.approx(k1 * k1 / (4 * k3), rel=1e-12)
    omega0 = math.sqrt(-k1 / model.mass_kg)
    assert wells.well_frequency_Hz == pytest.approx(math.sqrt(2) * omega0 / (2 * math.pi),
                                                    rel=1e-12)
    groups = nondimensional_groups(model)
    assert groups["x0_m"] == pytest.approx(x0, rel=1e-12)
    assert groups["delta"] == pytest.approx(0.01 / (model.mass_kg * omega0), rel=1e-12)


def _unequal(k0: float, k1: float, k2: float, k3: float, m: float = 0.01) -> ReducedModel:
    return ReducedModel(mass_kg=m, damping_N_s_per_m=0.01, stiffness=(k1, k3), forcing_mass_kg=m,
                        even_stiffness=(k0, k2))


@pytest.mark.parametrize("k2", [2e3, -5e3, 1.2e4])
def test_quadratic_cubic_wells_and_barriers(k2):
    # F = k1 x + k2 x² + k3 x³ with k1 < 0 < k3 (exact algebra): F = x (k3 x² + k2 x + k1), so
    # the saddle is 0 and the wells are the roots of k3 x² + k2 x + k1 = 0 (quadratic formula);
    # U = k1x²/2 + k2x³/3 + k3x⁴/4, the barrier from each well U(0) − U(x_w); a well's
    # frequency √(F'(x_w)/m)/2π with F' = k1 + 2k2 x + 3k3 x².  Compared to 1e-12: the roots are
    # polished by Newton steps, so only rounding separates them.
    k1, k3 = -40.0, 4e6
    model = _unequal(0.0, k1, k2, k3)
    wells = analyse_wells(model)
    root = math.sqrt(k2 * k2 - 4 * k3 * k1)
    left, right = (-k2 - root) / (2 * k3), (-k2 + root) / (2 * k3)

    def u(x):
        return k1 * x**2 / 2 + k2 * x**3 / 3 + k3 * x**4 / 4

    def hz(x):
        return math.sqrt((k1 + 2 * k2 * x + 3 * k3 * x * x) / model.mass_kg) / (2 * math.pi)

    assert wells.regime == "bistable" and model.is_bistable and not model.is_symmetric
    assert wells.saddle_m == pytest.approx(0.0, abs=1e-15)
    assert wells.wells_m == pytest.approx((left, right), rel=1e-12)
    assert wells.barriers_J == pytest.approx((-u(left), -u(right)), rel=1e-10)
    assert wells.barrier_J == pytest.approx(min(-u(left), -u(right)), rel=1e-10)
    assert wells.well_frequencies_Hz == pytest.approx((hz(left), hz(right)), rel=1e-12)
    assert model.potential_energy(right) == pytest.approx(u(right), rel=1e-12)


def _cubic_roots(p: float, q: float) -> list[float]:
    """The three real roots of t³ + p t + q = 0 (4p³ + 27q² < 0) by Viète's trigonometric form:
    t_k = 2√(−p/3) cos(⅓ arccos((3q/2p)√(−3/p)) − 2πk/3) (Abramowitz & Stegun 1964, Handbook of
    Mathematical Functions, 3.8.2; equation number from memory)."""
    theta = math.acos(3 * q / (2 * p) * math.sqrt(-3 / p)) / 3
    return sorted(2 * math.sqrt(-p / 3) * math.cos(theta - 2 * math.pi * k / 3) for k in range(3))


@pytest.mark.parametrize("applied_N", [0.02, -0.03])
def test_constant_force_shifts_the_equilibria(applied_N):
    # A constant force F0 on the tip (gravity along the deflection, say) moves the equilibria of
    # k1 x + k3 x³ to the roots of k1 x + k3 x³ = F0; in the model it is the term k0 = −F0 of
    # the restoring force.  Outer roots: the wells; middle root: the saddle; barriers
    # U(x_s) − U(x_w) with U = k1x²/2 + k3x⁴/4 − F0 x.
    k1, k3, m = -40.0, 4e6, 0.01
    model = ReducedModel(mass_kg=m, damping_N_s_per_m=0.01, stiffness=(k1, k3), forcing_mass_kg=m,
                         even_stiffness=(-applied_N,))
    left, saddle, right = _cubic_roots(k1 / k3, -applied_N / k3)

    def u(x):
        return k1 * x**2 / 2 + k3 * x**4 / 4 - applied_N * x

    wells = analyse_wells(model)
    assert wells.regime == "bistable"
    assert wells.saddle_m == pytest.approx(saddle, rel=1e-10)
    assert wells.wells_m == pytest.approx((left, right), rel=1e-12)
    assert wells.barriers_J == pytest.approx((u(saddle) - u(left), u(saddle) - u(right)),
                                             rel=1e-9)
    # the force pushes the beam towards its own side: that well is the deeper one
    deeper = np.argmax(wells.barriers_J)
    assert (deeper == 1) == (applied_N > 0)


def test_strong_constant_force_leaves_one_well():
    # k1 x + k3 x³ = F0 has one real root once 4p³ + 27q² > 0 (p = k1/k3, q = −F0/k3; the
    # discriminant of the depressed cubic, Abramowitz & Stegun 1964, 3.8.2, memory): the beam
    # is monostable, resting at that root
    k1, k3, applied = -40.0, 4e6, 0.2
    model = ReducedModel(mass_kg=0.01, damping_N_s_per_m=0.01, stiffness=(k1, k3),
                         forcing_mass_kg=0.01, even_stiffness=(-applied,))
    p, q = k1 / k3, -applied / k3
    assert 4 * p**3 + 27 * q * q > 0.0
    # Cardano's formula for the one real root
    root = np.cbrt(-q / 2 + math.sqrt(q * q / 4 + p**3 / 27)) + np.cbrt(
        -q / 2 - math.sqrt(q * q / 4 + p**3 / 27))
    wells = analyse_wells(model)
    assert wells.regime == "monostable" and not model.is_bistable
    assert wells.wells_m == pytest.approx((root,), rel=1e-12)


def test_hardening_oscillator_is_monostable():
    # k1 > 0, k3 > 0: single equilibrium at 0, small-oscillation frequency √(k1/m)/2π
    model = _duffing(100.0, 1e6, m=0.004)
    wells = analyse_wells(model)
    assert wells.regime == "monostable"
    assert wells.wells_m == (0.0,)
    assert wells.barrier_J == 0.0
    assert wells.well_frequency_Hz == pytest.approx(math.sqrt(100.0 / 0.004) / (2 * math.pi))


def test_quintic_wells_from_the_quadratic_in_x_squared():
    # F = k1 x + k3 x³ + k5 x⁵ = 0 → x² = (−k3 + √(k3² − 4 k1 k5))/(2 k5) (quadratic formula)
    k1, k3, k5 = -2.0, 1.0, 0.5
    y = (-k3 + math.sqrt(k3 * k3 - 4 * k1 * k5)) / (2 * k5)
    assert stable_equilibria((k1, k3, k5)) == pytest.approx((-math.sqrt(y), math.sqrt(y)))


def _quintic_well_and_barrier(k1: float, k3: float, k5: float) -> tuple[float, float]:
    """Well and barrier of F = k1 x + k3 x³ + k5 x⁵ (exact algebra: the quadratic formula in
    x², and U = k1 x²/2 + k3 x⁴/4 + k5 x⁶/6 integrated term by term)."""
    y = (-k3 + math.sqrt(k3 * k3 - 4 * k1 * k5)) / (2 * k5)
    return math.sqrt(y), -(k1 * y / 2 + k3 * y * y / 4 + k5 * y**3 / 6)


def test_fit_recovers_an_exact_quintic():
    # An exactly representable force must come back to round-off, with the fewest terms that
    # meet the tolerances: the cubic alone misses this well by ~9 % (the quintic term is a
    # third of the cubic one there), so three terms.
    k1, k3, k5 = -40.0, 4e6, 1.2e11
    well, barrier = _quintic_well_and_barrier(k1, k3, k5)
    x = fit_table(8e-3, well)
    stiffness, fit = fit_odd_polynomial(x, k1 * x + k3 * x**3 + k5 * x**5, k1, well, barrier)
    assert fit.terms == 3 and fit.meets_tolerances
    assert stiffness == pytest.approx((k1, k3, k5), rel=1e-9)
    assert abs(fit.well_error) < 1e-9 and abs(fit.barrier_error) < 1e-9
    assert fit.rms_error < 1e-12 and fit.max_error < 1e-12 and fit.window_m == 8e-3


def test_fit_of_a_monostable_cubic_keeps_two_terms():
    # hardening k1 x + k3 x³ (k1 > 0): no well, only the force criterion; exact in two terms
    x = fit_table(5e-3, None)
    stiffness, fit = fit_odd_polynomial(x, 30.0 * x + 2e6 * x**3, 30.0)
    assert fit.terms == 2 and fit.meets_tolerances and fit.well_error is None
    assert stiffness == pytest.approx((30.0, 2e6), rel=1e-9)


# Repelling coaxial point dipoles, lateral offset x, no rotation (from the dipole energy of
# Yung, Landecker & Villani 1998, Magn. Electr. Sep. 9:39):
#     U_mag = μ0 m² (2d² − x²)/(4π (d² + x²)^(5/2)),  U''_mag(0) = −3 μ0 m²/(π d⁵),
# on a beam of tip stiffness k_b: U = k_b x²/2 + U_mag, F = dU/dx.
DIPOLE_MOMENT = 1.3 * 5e-3 * 10e-3 * 5e-3 / MU0  # B_r V/μ0 [A·m²], an invented 5×10×5 mm block
BEAM_STIFFNESS = 160.0
CENTRES = 12e-3  # below d_c = (3 μ0 m²/(π k_b))^(1/5) ≈ 13.8 mm: bistable


def _dipole_potential(x):
    c = MU0 * DIPOLE_MOMENT**2 / (4 * math.pi)
    return BEAM_STIFFNESS * x**2 / 2 + c * (2 * CENTRES**2 - x**2) / (CENTRES**2 + x**2) ** 2.5


def _dipole_force(x):
    c = MU0 * DIPOLE_MOMENT**2 / (4 * math.pi)
    r2 = CENTRES**2 + x**2
    # d/dx of (2d² − x²) r^(−5) = −2x r^(−5) − 5x (2d² − x²) r^(−7)
    return BEAM_STIFFNESS * x + c * (-2 * x / r2**2.5 - 5 * x * (2 * CENTRES**2 - x**2) / r2**3.5)


def test_dipole_pair_well_barrier_and_fit():
    from scipy.optimize import brentq, minimize_scalar

    k1 = BEAM_STIFFNESS - 3 * MU0 * DIPOLE_MOMENT**2 / (math.pi * CENTRES**5)
    assert k1 < 0.0
    # the well as the minimum of the closed-form potential (independent of the force routine)
    well_ref = minimize_scalar(_dipole_potential, bounds=(1e-4, 10e-3), method="bounded",
                               options={"xatol": 1e-12}).x
    barrier_ref = float(_dipole_potential(0.0) - _dipole_potential(well_ref))
    well = exact_well(_dipole_force, reach=10e-3)
    assert well == pytest.approx(well_ref, rel=1e-6)
    assert well == pytest.approx(brentq(_dipole_force, 0.5 * well_ref, 1.5 * well_ref,
                                        xtol=1e-15), rel=1e-12)
    barrier = exact_barrier(_dipole_force, well)
    assert barrier == pytest.approx(barrier_ref, rel=1e-9)

    x = fit_table(15e-3, well)  # a window beyond two wells, as for a generous travel limit
    stiffness, fit = fit_odd_polynomial(x, _dipole_force(x), k1, well, barrier)
    assert fit.meets_tolerances and fit.window_m == pytest.approx(15e-3, rel=1e-15)
    # check the selected polynomial against the closed forms directly, not via `fit`
    model = ReducedModel(mass_kg=0.01, damping_N_s_per_m=0.0, stiffness=stiffness,
                         forcing_mass_kg=0.01)
    wells = analyse_wells(model)
    assert wells.regime == "bistable"
    assert max(wells.wells_m) == pytest.approx(well_ref, rel=WELL_TOLERANCE)
    assert wells.barrier_J == pytest.approx(barrier_ref, rel=BARRIER_TOLERANCE)
    inner = np.linspace(0.0, 2 * well_ref, 401)
    exact = _dipole_force(inner)
    assert np.max(np.abs(model.restoring_force(inner) - exact)) <= (
        FORCE_TOLERANCE * np.max(np.abs(exact)))


def test_fit_window_is_the_travel_within_the_small_deflection_reach():
    # the window is the travel limit (the motion's range), at most 0.4 L (project rule for the
    # small-deflection beam model), all of 0.4 L without a limit; a well beyond the travel
    # (beam on its stop) still gets two wells of window
    length = 0.06
    assert fit_window(length, 0.012, 0.004) == 0.012
    assert fit_window(length, 0.05, 0.004) == pytest.approx(0.024, rel=1e-15)
    assert fit_window(length, math.inf, None) == pytest.approx(0.024, rel=1e-15)
    assert fit_window(length, 0.003, 0.004) == 0.008


def test_built_demo_fit_reaches_the_travel_limit():
    # the demo's travel limit is an input (not a check value): the fit must span all of it and
    # the reduced model keep it, since 20 mm < 0.4 × 120 mm
    from harvester.build import build
    from harvester.case.load import load_case

    built = build(load_case(Path(__file__).parents[1] / "cases" / "pump-skid-psd.toml"))
    travel = built.model.travel_limit_m
    assert built.fit.window_m == travel and built.fit.x_m[-1] == travel
    assert built.fit.meets_tolerances and built.model.notes == ()


def test_equivalent_cubic_matches_the_barrier():
    # pure cubic: k3 itself, bit for bit, so the Melnikov groups are the textbook ones
    # (Guckenheimer & Holmes 1983, §4.5; ΔU = k1²/(4 k3), Kovacic & Brennan 2011, ch. 1)
    assert equivalent_cubic(_duffing(-40.0, 4e6)) == 4e6
    # quintic: k3_eq = k1²/(4 ΔU) with ΔU from the closed form above, x0 = √(−k1/k3_eq)
    k1, k3, k5 = -40.0, 4e6, 1.2e11
    _, barrier = _quintic_well_and_barrier(k1, k3, k5)
    model = ReducedModel(mass_kg=0.01, damping_N_s_per_m=0.01, stiffness=(k1, k3, k5),
                         forcing_mass_kg=0.01)
    assert equivalent_cubic(model) == pytest.approx(k1 * k1 / (4 * barrier), rel=1e-12)
    assert nondimensional_groups(model)["x0_m"] == pytest.approx(
        math.sqrt(-k1 * 4 * barrier / (k1 * k1)), rel=1e-12)
    assert nondimensional_groups(model)["omega0_rad_per_s"] == pytest.approx(
        math.sqrt(-k1 / 0.01), rel=1e-15)


def test_coupling_is_referred_to_the_well_stiffness():
    # θ²/(C F'(x_w)); for k1 x + k3 x³ F'(x_w) = −2 k1 (Kovacic & Brennan 2011, ch. 1), for
    # the quintic F'(x_w) = k1 + 3 k3 x_w² + 5 k5 x_w⁴ (exact algebra)
    piezo = PiezoCircuit(coupling_N_per_V=2e-3, capacitance_F=40e-9)
    cubic = ReducedModel(mass_kg=0.01, damping_N_s_per_m=0.01, stiffness=(-40.0, 4e6),
                         forcing_mass_kg=0.01, transducer=piezo)
    assert nondimensional_groups(cubic)["coupling_k2"] == pytest.approx(
        4e-6 / (40e-9 * 80.0), rel=1e-12)
    k1, k3, k5 = -40.0, 4e6, 1.2e11
    well, _ = _quintic_well_and_barrier(k1, k3, k5)
    quintic = ReducedModel(mass_kg=0.01, damping_N_s_per_m=0.01, stiffness=(k1, k3, k5),
                           forcing_mass_kg=0.01, transducer=piezo)
    slope = k1 + 3 * k3 * well**2 + 5 * k5 * well**4
    assert well_stiffness(quintic) == pytest.approx(slope, rel=1e-12)
    assert nondimensional_groups(quintic)["coupling_k2"] == pytest.approx(
        4e-6 / (40e-9 * slope), rel=1e-12)
    assert well_stiffness(_duffing(100.0, 1e6)) == 100.0


def test_bistable_without_a_cubic_term():
    # k1 x + k5 x⁵ with k1 < 0 < k5: wells at (−k1/k5)^(1/4) (exact algebra), no k3 needed
    model = ReducedModel(mass_kg=0.01, damping_N_s_per_m=0.01, stiffness=(-40.0, 0.0, 1e11),
                         forcing_mass_kg=0.01)
    assert model.is_bistable
    assert nondimensional_groups(model)["x0_m"] > 0.0
    assert max(analyse_wells(model).wells_m) == pytest.approx((40.0 / 1e11) ** 0.25, rel=1e-12)


def test_critical_gap_matches_the_coaxial_dipole_closed_form():
    # Two repelling coaxial dipoles without rotation: onset of bistability where
    # k_b + U''(0) = 0, d_c = (3 μ0 m_a m_b/(π k_b))^(1/5) centre to centre (from the dipole
    # energy of Yung, Landecker & Villani 1998)
    block = mag.Block(axial_m=5e-3, width_m=10e-3, deflection_m=5e-3, remanence_T=1.3)
    moment = block.remanence_T * 5e-3 * 10e-3 * 5e-3 / MU0
    k_beam = 160.0
    centre = (3 * MU0 * moment * moment / (math.pi * k_beam)) ** 0.2
    expected_gap = centre - 5e-3  # two half-lengths between centres and faces
    assert critical_gap(k_beam, block, block, slope=0.0, magnet_model="dipole") == pytest.approx(
        expected_gap, rel=1e-6)


@pytest.mark.parametrize("slope, axial, half_height", [(25.0, 5e-3, 1.5e-3), (60.0, 8e-3, 5e-3)])
def test_tip_deflection_at_travel_moves_the_corner_by_the_travel(slope, axial, half_height):
    # Plane geometry of the tip magnet's section turned by ψ = s·x: its outer corner moves
    # x + a sin ψ + h (cos ψ − 1) from its place at rest; at the returned deflection that is the
    # travel, and the tip itself stops short of it
    from harvester.build import tip_deflection_at_travel
    from harvester.physics.magnets import Block

    tip = Block(axial_m=axial, width_m=8e-3, deflection_m=2 * half_height, remanence_T=1.2)
    travel = 10e-3
    x = tip_deflection_at_travel(travel, tip, slope)
    psi = slope * x
    corner = x + axial * math.sin(psi) + half_height * (math.cos(psi) - 1.0)
    assert corner == pytest.approx(travel, rel=1e-9)
    assert x < travel


def test_critical_gap_with_the_end_load_for_coaxial_dipoles():
    # The coaxial dipole energy of Yung, Landecker & Villani (1998) with the centre distance
    # d + α x² (the foreshortened tip, Timoshenko & Gere 1961, ch. 2, memory), no rotation:
    # U''(0) = −(3 μ0 m²/π)(1/d⁵ + α/d⁴), the second term being −2αP with the axial push
    # P = 6 μ0 m²/(4π d⁴) of the same paper; neutral where k_b(d⁵/(1 + αd)) = 3 μ0 m²/π.
    from scipy.optimize import brentq

    block = mag.Block(axial_m=5e-3, width_m=10e-3, deflection_m=5e-3, remanence_T=1.3)
    moment = block.remanence_T * 5e-3 * 10e-3 * 5e-3 / MU0
    k_beam, alpha = 160.0, 12.0  # α = 0.6/L for a 50 mm beam
    centre = brentq(lambda d: k_beam * d**5 / (1 + alpha * d) - 3 * MU0 * moment**2 / math.pi,
                    1e-3, 1.0, xtol=1e-15, rtol=1e-14)
    gap = critical_gap(k_beam, block, block, slope=0.0, magnet_model="dipole",
                       foreshortening_per_m=alpha)
    assert gap == pytest.approx(centre - 5e-3, rel=1e-6)
    assert gap > critical_gap(k_beam, block, block, slope=0.0, magnet_model="dipole")


_STRIP_WITH_BLOCKS = """
title = "steel strip with two blocks (test geometry)"
[beam]
length = "50 mm"
width = "10 mm"
substrate = {{ material = "spring-steel-1095", thickness = "0.25 mm" }}
[tip_magnet]
material = "NdFeB-N42"
block = ["5 mm", "10 mm", "5 mm"]
[fixed_magnet]
material = "NdFeB-N42"
block = ["5 mm", "10 mm", "5 mm"]
gap = "{gap}"
[losses]
damping_ratio = 0.01
[excitation]
tone = {{ frequency = "10 Hz", amplitude = "0.1 g" }}
"""


def _strip_with_blocks(gap: str, tmp_path: Path):
    from harvester.build import build
    from harvester.case.load import parse_case

    return build(parse_case(_STRIP_WITH_BLOCKS.format(gap=gap), tmp_path / "strip.toml"))


def test_built_design_carries_the_end_load_and_the_buckling_load(tmp_path):
    # P_cr = π²EI/(4L²) (Timoshenko & Gere 1961, Theory of Elastic Stability, §2.1) with
    # EI = E b h³/12 of the strip; P is the pair's push at rest; k1 = k_b + U''(0) includes the
    # softening −2αP (the foreshortened tip, Timoshenko & Gere 1961, ch. 2, memory), rel 1e-4
    # (the difference quotient behind the stiffness at rest); the critical gap is the
    # foreshortened one.
    from harvester.build import critical_gap
    from harvester.materials import find_material

    built = _strip_with_blocks("12 mm", tmp_path)
    modulus = find_material("spring-steel-1095", "substrate").youngs_modulus_Pa
    ei = modulus * 10e-3 * 0.25e-3**3 / 12
    assert built.buckling_load_N == pytest.approx(math.pi**2 * ei / (4 * 0.05**2), rel=1e-12)
    pair = dict(tip=built.tip, fixed=built.fixed, gap_m=12e-3,
                slope_per_deflection_per_m=built.beam.slope_per_deflection_per_m)
    push = float(mag.magnet_axial_load(0.0, **pair))
    assert built.axial_force_N == push
    assert built.buckling_load_ratio == pytest.approx(push / built.buckling_load_N, rel=1e-15)
    alpha = built.beam.foreshortening_per_m
    k_beam = built.model.linear_stiffness_N_per_m
    unloaded = k_beam + mag.magnet_stiffness_at_rest(**pair)
    assert built.model.k1 - unloaded == pytest.approx(-2 * alpha * push, rel=1e-4)
    slope = built.beam.slope_per_deflection_per_m
    assert built.critical_gap_m == critical_gap(k_beam, built.tip, built.fixed, slope, "exact",
                                                alpha)
    assert built.critical_gap_m > critical_gap(k_beam, built.tip, built.fixed, slope)


def test_force_table_tends_to_the_unloaded_one(tmp_path):
    # U_total(x; α) = ½ k_b x² + U(−α x², x): as α → 0 the restoring force F = dU_total/dx
    # approaches the one without foreshortening, with the first-order term
    # ∂F/∂α = −d(x² P(x))/dx = −2x P − x² P' (P the axial push at x), rel 1e-5 (forward
    # difference in α, step 1e-4/m).  Far apart (gaps of 40 and 100 mm, P ~ d⁻⁴ for dipoles,
    # Yung, Landecker & Villani 1998) the table differs from the unloaded force by less than
    # the softening at rest, 2αP/k_b, of its size, and fades with the push.
    from harvester.build import restoring_force

    built = _strip_with_blocks("12 mm", tmp_path)
    k_beam = built.model.linear_stiffness_N_per_m
    slope = built.beam.slope_per_deflection_per_m
    args = (k_beam, built.tip, built.fixed, built.gap_m, slope, "exact")
    x = np.array([1e-3, 4e-3, 8e-3])
    step = 1e-4
    first_order = (restoring_force(x, *args, step) - restoring_force(x, *args, 0.0)) / step
    pair = dict(tip=built.tip, fixed=built.fixed, gap_m=built.gap_m,
                slope_per_deflection_per_m=slope)
    h = 1e-7
    push = mag.magnet_axial_load(x, **pair)
    push_slope = (mag.magnet_axial_load(x + h, **pair) - mag.magnet_axial_load(x - h, **pair)) / (
        2 * h)
    np.testing.assert_allclose(first_order, -2 * x * push - x**2 * push_slope, rtol=1e-5)

    differences = []
    for gap in ("40 mm", "100 mm"):
        far = _strip_with_blocks(gap, tmp_path)
        unloaded = restoring_force(far.fit.x_m, k_beam, far.tip, far.fixed, far.gap_m, slope,
                                   "exact")
        differences.append(np.max(np.abs(far.fit.force_N - unloaded)) / np.max(np.abs(unloaded)))
        softening = 2 * far.beam.foreshortening_per_m * far.axial_force_N / k_beam
        assert 0.0 < differences[-1] < softening
    assert differences[1] < differences[0] / 10  # P ~ d⁻⁴: (45/105)⁴ = 1/30


def test_reduced_and_magnet_free_designs_carry_no_or_zero_end_load(tmp_path):
    from harvester.build import build
    from harvester.case.load import load_case, parse_case

    reduced = build(load_case(Path(__file__).parent / "data" / "unit-double-well.toml"))
    assert reduced.axial_force_N is None and reduced.buckling_load_N is None
    assert reduced.buckling_load_ratio is None
    text = _STRIP_WITH_BLOCKS.format(gap="12 mm")
    magnet_free = text[: text.index("[fixed_magnet]")] + text[text.index("[losses]"):]
    bare = build(parse_case(magnet_free, tmp_path / "bare.toml"))
    assert bare.axial_force_N == 0.0 and bare.buckling_load_ratio == 0.0


def test_wells_warns_above_half_the_buckling_load(tmp_path):
    # Beyond P/P_cr = 0.5 an imperfection's bending is amplified 1/(1 − P/P_cr) > 2 times
    # (Timoshenko & Gere 1961, ch. 1, beam-columns, memory): the warning names the push.
    from dataclasses import replace

    from harvester.commands.statics import wells_warnings

    built = _strip_with_blocks("12 mm", tmp_path)
    below = replace(built, axial_force_N=0.49 * built.buckling_load_N)
    above = replace(built, axial_force_N=0.51 * built.buckling_load_N)
    assert not any("buckling load" in w for w in wells_warnings(below))
    assert any("51 % of the beam's buckling load" in w for w in wells_warnings(above))
