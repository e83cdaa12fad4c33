"""Beam physics against handbook values, published worked examples and independent solutions
of the same boundary-value problem built from general-purpose libraries (scipy)."""

from __future__ import annotations

import math
import time
from dataclasses import replace

import numpy as np
import pytest
import scipy.linalg
from scipy.integrate import quad, solve_bvp
from scipy.optimize import brentq

from harvester.physics.beam import (
    BeamDesign,
    beam_properties,
    composite_section,
    first_mode_eigenvalue,
    frequency_equation,
    mode_shape,
    rayleigh_lumped,
)

VACUUM_PERMITTIVITY = 8.8541878128e-12  # CODATA 2018 [F/m]


def erturk_inman_2009_bimorph(wiring: str = "series") -> BeamDesign:
    """PZT-5A bimorph on brass with a 12 g tip mass: Erturk & Inman (2009), Smart Mater. Struct.
    18:025009, case study (memory, values as listed in methods.md §2).  ē31 and ε̄33S are
    derived from d31 and ε33T by the plane-stress reduction of methods.md §1."""
    c11 = 66e9
    d31 = -190e-12
    return BeamDesign(
        length_m=50.8e-3,
        width_m=31.8e-3,
        substrate_thickness_m=0.14e-3,
        substrate_modulus_Pa=105e9,
        substrate_density_kg_m3=9000.0,
        piezo_layers=2,
        piezo_thickness_m=0.26e-3,
        piezo_modulus_Pa=c11,
        piezo_density_kg_m3=7800.0,
        piezo_e31_C_per_m2=d31 * c11,  # ē31 = d31/s11E = d31 c̄11
        piezo_permittivity_F_per_m=1800 * VACUUM_PERMITTIVITY - d31**2 * c11,  # ε33T − d31²/s11E
        piezo_wiring=wiring,
        tip_mass_kg=12e-3,
    )


def steel_strip(tip_mass_ratio: float = 0.0, rotary_inertia_ratio: float = 0.0) -> BeamDesign:
    """A homogeneous strip (invented dimensions) with tip loads given as ratios R and J."""
    length, width, thickness, density = 0.06, 0.012, 0.4e-3, 7800.0
    beam_mass = density * width * thickness * length
    return BeamDesign(
        length_m=length,
        width_m=width,
        substrate_thickness_m=thickness,
        substrate_modulus_Pa=200e9,
        substrate_density_kg_m3=density,
        tip_mass_kg=tip_mass_ratio * beam_mass,
        tip_rotary_inertia_kg_m2=rotary_inertia_ratio * beam_mass * length**2,
    )


# -- frequency equation ------------------------------------------------------------------


def test_bare_cantilever_first_root():
    # Clamped-free Euler–Bernoulli beam, 1 + cos λ cosh λ = 0 (Blevins 1979, Formulas for
    # Natural Frequency and Mode Shape, table 8-1): λ1 = 1.87510407
    assert first_mode_eigenvalue(0.0) == pytest.approx(1.87510407, rel=1e-8)


def test_bare_cantilever_second_root():
    # Blevins 1979, table 8-1: λ2 = 4.69409113 (checks the characteristic function past λ1)
    root = brentq(frequency_equation, 4.0, 5.0, args=(0.0, 0.0), xtol=1e-14)
    assert root == pytest.approx(4.69409113, rel=1e-8)


def test_unit_tip_mass_ratio():
    # R = 1: λ1² = 1.557298 (Math. Probl. Eng. 2017, art. 1568019, Table 1)
    assert first_mode_eigenvalue(1.0) ** 2 == pytest.approx(1.557298, rel=1e-5)


def test_heavy_tip_reaches_the_lumped_limit():
    # A tip mass that dwarfs the beam makes Rayleigh's static-shape quotient exact:
    # λ1⁴ → 3/(R + 33/140) (Lobontiu 2005, Mechanical Design of Microresonators, eqs 3.150–3.152)
    r = 1000.0
    assert first_mode_eigenvalue(r) ** 4 == pytest.approx(3.0 / (r + 33.0 / 140.0), rel=1e-6)


def test_negative_ratios_are_rejected():
    with pytest.raises(ValueError):
        first_mode_eigenvalue(-0.1)
    with pytest.raises(ValueError):
        first_mode_eigenvalue(0.0, -1.0)


def _finite_element_eigenvalue(
    tip_mass_ratio: float, rotary_inertia_ratio: float, elements: int = 40
) -> float:
    """λ1 from Hermite-cubic beam elements with consistent mass (Przemieniecki 1968, Theory of
    Matrix Structural Analysis, McGraw-Hill, ch. 11 (memory)), EI = m = L = 1, tip mass and
    rotary inertia added to the last node; solved as the largest eigenvalue of M x = μ K x
    (μ = 1/ω²) with scipy.linalg.eigh, which stays well conditioned for heavy tips."""
    h = 1.0 / elements
    k_e = (
        np.array(
            [
                [12, 6 * h, -12, 6 * h],
                [6 * h, 4 * h * h, -6 * h, 2 * h * h],
                [-12, -6 * h, 12, -6 * h],
                [6 * h, 2 * h * h, -6 * h, 4 * h * h],
            ]
        )
        / h**3
    )
    m_e = (
        h
        / 420
        * np.array(
            [
                [156, 22 * h, 54, -13 * h],
                [22 * h, 4 * h * h, 13 * h, -3 * h * h],
                [54, 13 * h, 156, -22 * h],
                [-13 * h, -3 * h * h, -22 * h, 4 * h * h],
            ]
        )
    )
    size = 2 * (elements + 1)
    stiffness, mass = np.zeros((size, size)), np.zeros((size, size))
    for e in range(elements):
        dofs = slice(2 * e, 2 * e + 4)
        stiffness[dofs, dofs] += k_e
        mass[dofs, dofs] += m_e
    mass[-2, -2] += tip_mass_ratio
    mass[-1, -1] += rotary_inertia_ratio
    flexibility_eigenvalues = scipy.linalg.eigh(mass[2:, 2:], stiffness[2:, 2:], eigvals_only=True)
    return float(flexibility_eigenvalues[-1] ** -0.25)


@pytest.mark.parametrize("r", [0.0, 0.3, 1.0, 10.0, 1000.0])
@pytest.mark.parametrize("j", [0.0, 0.01, 1.0, 100.0, 1e4])
def test_rotary_inertia_against_finite_elements(r, j):
    # Independent discretisation of the same problem; 40 elements converge to ~1e-9 here.
    assert first_mode_eigenvalue(r, j) == pytest.approx(_finite_element_eigenvalue(r, j), rel=1e-6)


def _collocation_mode(tip_mass_ratio: float, rotary_inertia_ratio: float):
    """Euler–Bernoulli eigenproblem ψ'''' = λ⁴ψ, ψ(0) = ψ'(0) = 0, ψ''(1) = λ⁴Jψ'(1),
    ψ'''(1) = −λ⁴Rψ(1), ψ(1) = 1, solved with scipy.integrate.solve_bvp (λ as unknown
    parameter), started from the static shape."""
    r, j = tip_mass_ratio, rotary_inertia_ratio

    def rhs(x, y, p):
        return np.vstack([y[1], y[2], y[3], p[0] ** 4 * y[0]])

    def boundary(ya, yb, p):
        lam4 = p[0] ** 4
        return np.array(
            [ya[0], ya[1], yb[2] - lam4 * j * yb[1], yb[3] + lam4 * r * yb[0], yb[0] - 1.0]
        )

    x = np.linspace(0.0, 1.0, 21)
    static = np.vstack([(3 * x**2 - x**3) / 2, (6 * x - 3 * x**2) / 2, 3 - 3 * x, -3 + 0 * x])
    guess = (3.0 / (r + 0.24 + 3.0 * j)) ** 0.25
    solution = solve_bvp(rhs, boundary, x, static, p=[guess], tol=1e-10, max_nodes=100_000)
    assert solution.status == 0
    return solution


@pytest.mark.parametrize(("r", "j"), [(0.0, 0.0), (0.5, 0.05), (1.0, 0.2), (2.0, 1.0), (10.0, 5.0)])
def test_exact_mode_against_collocation(r, j):
    reference = _collocation_mode(r, j)
    lam = first_mode_eigenvalue(r, j)
    assert lam == pytest.approx(reference.p[0], rel=1e-8)
    assert float(mode_shape(1.0, lam, r, derivative=1)) == pytest.approx(
        reference.sol(1.0)[1], rel=1e-8
    )
    assert float(mode_shape(0.0, lam, r, derivative=2)) == pytest.approx(
        reference.sol(0.0)[2], rel=1e-8
    )
    xi = np.linspace(0.0, 1.0, 11)
    np.testing.assert_allclose(mode_shape(xi, lam, r), reference.sol(xi)[0], rtol=1e-7, atol=1e-10)


# -- modal quantities ---------------------------------------------------------------------


def test_rayleigh_lumped_error_for_bare_beam():
    # k = 3EI/L³ with m_eff = (33/140) mL overestimates the bare cantilever's first frequency
    # by 1.47 % (Lobontiu 2005, Mechanical Design of Microresonators, eqs 3.150–3.152);
    # quoted to 0.01 %.
    design = steel_strip()
    k, m_eff = rayleigh_lumped(design)
    exact = beam_properties(design).short_circuit_frequency_Hz
    lumped = math.sqrt(k / m_eff) / (2.0 * math.pi)
    assert 100.0 * (lumped / exact - 1.0) == pytest.approx(1.47, abs=0.01)


def test_bare_beam_modal_mass_is_a_quarter_of_the_beam():
    # The unit-∫φ² cantilever mode has φ(L) = 2 (Blevins 1979, table 8-1 normalisation;
    # Erturk & Inman 2008, J. Intell. Mater. Syst. Struct. 19:1311), so in the tip coordinate
    # the modal mass is mL/4 and the forcing mass mL·∫φ/φ(L) = 0.7830 mL/2.
    design = steel_strip()
    props = beam_properties(design)
    beam_mass = props.mass_per_length_kg_per_m * design.length_m
    assert props.effective_mass_kg == pytest.approx(beam_mass / 4.0, rel=1e-10)
    assert props.forcing_mass_kg / beam_mass == pytest.approx(0.7830 / 2.0, rel=1e-4)


@pytest.mark.parametrize("r", [0.0, 0.1, 0.5, 1.0, 5.0, 10.0])
def test_forcing_factor_matches_erturk_inman_fit(r):
    # Correction factor of the lumped base-excitation model, μ1 = m_f/M in the tip coordinate,
    # against the curve fit of Erturk & Inman 2008 (J. Intell. Mater. Syst. Struct. 19:1311)
    # (memory): μ1 = (R² + 0.603R + 0.08955)/(R² + 0.4637R + 0.05718).  Tolerance 0.2 %: the
    # fit's coefficients carry four figures and the fit itself is approximate.
    props = beam_properties(steel_strip(tip_mass_ratio=r))
    fit = (r**2 + 0.603 * r + 0.08955) / (r**2 + 0.4637 * r + 0.05718)
    assert props.forcing_mass_kg / props.effective_mass_kg == pytest.approx(fit, rel=2e-3)


def test_forcing_factor_of_bare_beam():
    # μ1(0) = 1.566 (Erturk & Inman 2008, J. Intell. Mater. Syst. Struct. 19:1311; memory)
    props = beam_properties(steel_strip())
    assert props.forcing_mass_kg / props.effective_mass_kg == pytest.approx(1.566, abs=5e-4)


@pytest.mark.parametrize(("r", "j"), [(0.0, 0.0), (0.7, 0.0), (0.7, 0.3), (20.0, 2.0)])
def test_modal_stiffness_equals_strain_energy(r, j):
    # Rayleigh's principle (Rayleigh 1877, The Theory of Sound, vol. 1; Meirovitch 1967,
    # Analytical Methods in Vibrations, Macmillan): for the exact mode, ω² times the
    # kinetic-energy mass (including the tip's I_t ψ'(L)²) equals the strain-energy stiffness
    # (EI/L³)∫ψ''² dξ.
    design = replace(erturk_inman_2009_bimorph(), tip_mass_kg=0.0)
    ei, m, _ = composite_section(design)
    beam_mass = m * design.length_m
    design = replace(
        design,
        tip_mass_kg=r * beam_mass,
        tip_rotary_inertia_kg_m2=j * beam_mass * design.length_m**2,
    )
    props = beam_properties(design)
    lam = props.eigenvalue
    curvature_energy, _ = quad(
        lambda xi: float(mode_shape(xi, lam, r, derivative=2)) ** 2,
        0.0,
        1.0,
        epsabs=0.0,
        epsrel=1e-12,
    )
    strain_stiffness = ei / design.length_m**3 * curvature_energy
    assert props.tip_stiffness_N_per_m == pytest.approx(strain_stiffness, rel=1e-9)


def test_erturk_inman_2009_bimorph_frequencies():
    # Erturk & Inman (2009), Smart Mater. Struct. 18:025009 (memory, methods.md §2):
    # series bimorph with a 12 g tip mass, f_sc ≈ 45.6 Hz, f_oc ≈ 48.4 Hz; within 1 %.
    props = beam_properties(erturk_inman_2009_bimorph())
    assert props.short_circuit_frequency_Hz == pytest.approx(45.6, rel=0.01)
    assert props.open_circuit_frequency_Hz == pytest.approx(48.4, rel=0.01)


def test_wiring_changes_coupling_and_capacitance_but_not_frequencies():
    # Series vs parallel bimorph (Erturk & Inman 2009, Smart Mater. Struct. 18:025009, eqs for
    # ϑ and C_p; memory): parallel has twice the coupling and four times the capacitance, so
    # θ²/C_p and the open-circuit frequency do not depend on the wiring.
    series = beam_properties(erturk_inman_2009_bimorph("series"))
    parallel = beam_properties(erturk_inman_2009_bimorph("parallel"))
    assert parallel.coupling_N_per_V == pytest.approx(2.0 * series.coupling_N_per_V, rel=1e-12)
    assert parallel.capacitance_F == pytest.approx(4.0 * series.capacitance_F, rel=1e-12)
    assert parallel.open_circuit_frequency_Hz == pytest.approx(
        series.open_circuit_frequency_Hz, rel=1e-12
    )


def test_beam_without_ceramic_has_no_electrical_stiffening():
    props = beam_properties(steel_strip(tip_mass_ratio=0.5))
    assert props.coupling_N_per_V == 0.0
    assert props.capacitance_F == 0.0
    assert props.open_circuit_frequency_Hz == props.short_circuit_frequency_Hz


# -- cross-section ------------------------------------------------------------------------


def test_symmetric_bimorph_closed_form():
    # EI = (2b/3)[E_s h_s³/8 + E_p((h_p + h_s/2)³ − h_s³/8)] (Erturk & Inman 2009, Smart Mater.
    # Struct. 18:025009; methods.md §1); neutral axis on the substrate's mid-plane.
    d = erturk_inman_2009_bimorph()
    b, h_s, h_p = d.width_m, d.substrate_thickness_m, d.piezo_thickness_m
    e_s, e_p = d.substrate_modulus_Pa, d.piezo_modulus_Pa
    closed = (2 * b / 3) * (e_s * h_s**3 / 8 + e_p * ((h_p + h_s / 2) ** 3 - h_s**3 / 8))
    ei, m, z_n = composite_section(d)
    assert ei == pytest.approx(closed, rel=1e-12)
    assert z_n == pytest.approx(h_s / 2, rel=1e-12)
    assert m == pytest.approx(b * (9000.0 * h_s + 2 * 7800.0 * h_p), rel=1e-12)


def test_homogeneous_section():
    # Rectangular section: EI = E b h³/12 (any strength-of-materials text, e.g. Gere & Goodno
    # 2009, Mechanics of Materials, appendix D).
    d = steel_strip()
    ei, m, z_n = composite_section(d)
    h = d.substrate_thickness_m
    assert ei == pytest.approx(200e9 * d.width_m * h**3 / 12, rel=1e-12)
    assert z_n == pytest.approx(h / 2, rel=1e-12)
    assert m == pytest.approx(7800.0 * d.width_m * h, rel=1e-12)


def test_unimorph_two_layer_formula():
    # Flexural rigidity of two bonded layers in the closed form of the transformed-section
    # method (Gere & Goodno 2009, Mechanics of Materials, 7th ed., §6.2; written out from
    # memory), algebraically independent of the layer sum:
    # EI = (b/12)[E1²h1⁴ + E2²h2⁴ + 2E1E2h1h2(2h1² + 3h1h2 + 2h2²)]/(E1h1 + E2h2)
    d = BeamDesign(
        0.05,
        0.01,
        0.3e-3,
        105e9,
        9000.0,
        piezo_layers=1,
        piezo_thickness_m=0.2e-3,
        piezo_modulus_Pa=61e9,
        piezo_density_kg_m3=7750.0,
        piezo_e31_C_per_m2=-10.4,
        piezo_permittivity_F_per_m=13.3e-9,
    )
    b, e1, h1, e2, h2 = 0.01, 105e9, 0.3e-3, 61e9, 0.2e-3
    closed = (
        (b / 12)
        * (
            e1**2 * h1**4
            + e2**2 * h2**4
            + 2 * e1 * e2 * h1 * h2 * (2 * h1**2 + 3 * h1 * h2 + 2 * h2**2)
        )
        / (e1 * h1 + e2 * h2)
    )
    assert composite_section(d)[0] == pytest.approx(closed, rel=1e-12)


def test_beam_properties_is_fast():
    # Requirement: called on start-up of a command that must answer in < 2 s; budget 5 ms.
    design = erturk_inman_2009_bimorph()
    beam_properties(design)
    start = time.perf_counter()
    for _ in range(50):
        beam_properties(design)
    assert (time.perf_counter() - start) / 50 < 5e-3
