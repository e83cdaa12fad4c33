"""Beam physics against handbook values, published worked examples and independent solutions
of the same boundary-value problem built from general-purpose libraries (scipy)."""

from __future__ import annotations

import math
import time
from dataclasses import replace
from typing import NamedTuple

import numpy as np
import pytest
import scipy.linalg
from scipy.integrate import dblquad, quad, solve_bvp, tplquad
from scipy.optimize import brentq

from harvester.build import magnet_shape, tip_inertia
from harvester.case.schema import TipMagnet
from harvester.materials import find_material
from harvester.physics.beam import (
    BeamDesign,
    beam_properties,
    composite_section,
    euler_buckling_load,
    first_mode_eigenvalue,
    foreshortening_coefficient,
    frequency_equation,
    mode_shape,
    rayleigh_lumped,
    single_mode_buckling_load,
)

VACUUM_PERMITTIVITY = 8.8541878128e-12  # CODATA 2018 [F/m]


def erturk_inman_2009_bimorph(wiring: str = "series") -> BeamDesign:
    """PZT-5A bimorph on brass with a 12 g tip mass: Erturk & Inman (2009), Smart Mater. Struct.
    18:025009, case study (memory; values as listed in harvester/METHODS.md §2).  ē31 and ε̄33S
    are derived from d31 and ε33T by the plane-stress reduction of Erturk & Inman (2011),
    Piezoelectric Energy Harvesting, Wiley, App. E."""
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


def steel_strip(
    tip_mass_ratio: float = 0.0, rotary_inertia_ratio: float = 0.0, offset_ratio: float = 0.0
) -> BeamDesign:
    """A homogeneous strip (invented dimensions) with a tip body given as ratios R, J and ε."""
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
        tip_mass_offset_m=offset_ratio * length,
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


class FiniteElementMode(NamedTuple):
    """First mode of the discretised beam, tip deflection scaled to 1, in units EI = m = L = 1."""

    eigenvalue: float  # λ1
    modal_mass: float  # vᵀ M v, in units of mL
    forcing_mass: float  # vᵀ M r, r the rigid translation of the base, in units of mL
    tip_slope: float  # ψ'(1)


def _finite_element_mode(
    tip_mass_ratio: float,
    rotary_inertia_ratio: float,
    offset_ratio: float = 0.0,
    elements: int = 40,
) -> FiniteElementMode:
    """First mode from Hermite-cubic beam elements with consistent mass (Przemieniecki 1968,
    Theory of Matrix Structural Analysis, McGraw-Hill, ch. 11 (memory)), EI = m = L = 1.
    The tip body is rigid with mass R and rotary inertia J about its centre, which lies ε
    beyond the last node: its mass matrix is carried to the node's (w, θ) as Tᵀ diag(R, J) T,
    T = [[1, ε], [0, 1]] (the rigid link from the node to the body's centre, which moves
    w + εθ and turns θ; offset-mass transformation of Cook, Malkus, Plesha & Witt 2002,
    Concepts and Applications of Finite Element Analysis, 4th ed., Wiley (memory)).  Solved as
    the largest eigenvalue of M x = μ K x (μ = 1/ω²) with scipy.linalg.eigh, which stays well
    conditioned for heavy tips."""
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
    rigid_link = np.array([[1.0, offset_ratio], [0.0, 1.0]])
    body = np.diag([tip_mass_ratio, rotary_inertia_ratio])
    mass[-2:, -2:] += rigid_link.T @ body @ rigid_link
    flexibility, vectors = scipy.linalg.eigh(mass[2:, 2:], stiffness[2:, 2:])
    mode = np.concatenate([[0.0, 0.0], vectors[:, -1]])
    mode /= mode[-2]
    base_translation = np.tile([1.0, 0.0], elements + 1)
    return FiniteElementMode(
        eigenvalue=float(flexibility[-1] ** -0.25),
        modal_mass=float(mode @ mass @ mode),
        forcing_mass=float(mode @ mass @ base_translation),
        tip_slope=float(mode[-1]),
    )


@pytest.mark.parametrize("r", [0.0, 0.3, 1.0, 10.0, 1000.0])
@pytest.mark.parametrize("j", [0.0, 0.01, 1.0, 100.0, 1e4])
def test_rotary_inertia_against_finite_elements(r, j):
    # Independent discretisation of the same problem; 40 elements converge to ~1e-9 here.
    assert first_mode_eigenvalue(r, j) == pytest.approx(
        _finite_element_mode(r, j).eigenvalue, rel=1e-6
    )


@pytest.mark.parametrize(
    ("r", "j", "eps"),
    [
        (0.05, 0.0, 0.2),
        (0.5, 0.0, 0.1),
        (1.0, 0.01, 0.2),
        (0.3, 0.05, 0.05),
        (5.0, 0.5, 0.2),
        (50.0, 2.0, 0.15),
        (1000.0, 10.0, 0.2),
    ],
)
def test_offset_tip_body_against_finite_elements(r, j, eps):
    # The same discretisation with the rigid offset body at the tip node (Przemieniecki 1968;
    # Cook et al. 2002, see `_finite_element_mode`): eigenvalue, modal and forcing mass in
    # the tip coordinate and the tip slope agree to 1e-7 (40 elements converge to ~1e-8).
    design = steel_strip(r, j, eps)
    props = beam_properties(design)
    beam_mass = props.mass_per_length_kg_per_m * design.length_m
    reference = _finite_element_mode(r, j, eps)
    assert props.eigenvalue == pytest.approx(reference.eigenvalue, rel=1e-7)
    assert props.effective_mass_kg / beam_mass == pytest.approx(reference.modal_mass, rel=1e-7)
    assert props.forcing_mass_kg / beam_mass == pytest.approx(reference.forcing_mass, rel=1e-7)
    assert props.slope_per_deflection_per_m * design.length_m == pytest.approx(
        reference.tip_slope, rel=1e-7
    )


def _collocation_mode(
    tip_mass_ratio: float, rotary_inertia_ratio: float, offset_ratio: float = 0.0
):
    """Euler–Bernoulli eigenproblem ψ'''' = λ⁴ψ, ψ(0) = ψ'(0) = 0, ψ(1) = 1 with a rigid tip
    body (mass R, rotary inertia J about its centre, centre ε beyond the tip):
    ψ''(1) = λ⁴[(J + Rε²)ψ'(1) + Rεψ(1)], ψ'''(1) = −λ⁴R[ψ(1) + εψ'(1)] (the natural
    boundary conditions of Hamilton's principle with the body's kinetic energy
    ½R(ψ + εψ')² + ½Jψ'², Meirovitch 1967, Analytical Methods in Vibrations, Macmillan,
    memory), solved with scipy.integrate.solve_bvp (λ as unknown parameter), started from the
    static shape."""
    r, j, eps = tip_mass_ratio, rotary_inertia_ratio, offset_ratio

    def rhs(x, y, p):
        return np.vstack([y[1], y[2], y[3], p[0] ** 4 * y[0]])

    def boundary(ya, yb, p):
        lam4 = p[0] ** 4
        moment = yb[2] - lam4 * ((j + r * eps * eps) * yb[1] + r * eps * yb[0])
        shear = yb[3] + lam4 * r * (yb[0] + eps * yb[1])
        return np.array([ya[0], ya[1], moment, shear, yb[0] - 1.0])

    x = np.linspace(0.0, 1.0, 21)
    static = np.vstack([(3 * x**2 - x**3) / 2, (6 * x - 3 * x**2) / 2, 3 - 3 * x, -3 + 0 * x])
    guess = (3.0 / (r + 0.24 + 3.0 * (j + r * eps + r * eps * eps))) ** 0.25
    solution = solve_bvp(rhs, boundary, x, static, p=[guess], tol=1e-10, max_nodes=100_000)
    assert solution.status == 0
    return solution


@pytest.mark.parametrize(
    ("r", "j", "eps"),
    [
        (0.0, 0.0, 0.0),
        (0.5, 0.05, 0.0),
        (1.0, 0.2, 0.0),
        (2.0, 1.0, 0.0),
        (10.0, 5.0, 0.0),
        (0.5, 0.0, 0.1),
        (1.0, 0.02, 0.2),
        (2.0, 0.5, 0.15),
        (10.0, 1.0, 0.2),
    ],
)
def test_exact_mode_against_collocation(r, j, eps):
    reference = _collocation_mode(r, j, eps)
    lam = first_mode_eigenvalue(r, j, eps)
    assert lam == pytest.approx(reference.p[0], rel=1e-8)
    assert float(mode_shape(1.0, lam, r, derivative=1, offset_ratio=eps)) == pytest.approx(
        reference.sol(1.0)[1], rel=1e-8
    )
    assert float(mode_shape(0.0, lam, r, derivative=2, offset_ratio=eps)) == pytest.approx(
        reference.sol(0.0)[2], rel=1e-8
    )
    xi = np.linspace(0.0, 1.0, 11)
    np.testing.assert_allclose(
        mode_shape(xi, lam, r, offset_ratio=eps), reference.sol(xi)[0], rtol=1e-7, atol=1e-10
    )
    # modal and forcing mass of the collocated mode: mL∫ψ² + body's kinetic energy, mL∫ψ + body
    tip_slope = reference.sol(1.0)[1]
    shape_squared, _ = quad(lambda s: reference.sol(s)[0] ** 2, 0.0, 1.0, epsabs=0.0, epsrel=1e-11)
    shape_area, _ = quad(lambda s: reference.sol(s)[0], 0.0, 1.0, epsabs=0.0, epsrel=1e-11)
    modal = shape_squared + r * (1.0 + eps * tip_slope) ** 2 + j * tip_slope**2
    forcing = shape_area + r * (1.0 + eps * tip_slope)
    design = steel_strip(r, j, eps)
    props = beam_properties(design)
    beam_mass = props.mass_per_length_kg_per_m * design.length_m
    assert props.effective_mass_kg / beam_mass == pytest.approx(modal, rel=1e-8)
    assert props.forcing_mass_kg / beam_mass == pytest.approx(forcing, rel=1e-8)


@pytest.mark.parametrize(
    ("r", "j", "eps"), [(0.0, 0.0, 0.0), (1.0, 0.2, 0.0), (2.0, 0.5, 0.15), (10.0, 1.0, 0.2)]
)
def test_foreshortening_against_collocation(r, j, eps):
    # The tip of an inextensible beam moves ½∫w'² dx towards the clamp, and an end load P does
    # the work P·½∫w'² through it (Timoshenko & Gere 1961, Theory of Elastic Stability, ch. 2,
    # energy method, memory): α L = ½∫ψ'² dξ and the Rayleigh–Ritz load ∫EIψ''²/∫ψ'² of the
    # collocated mode (`_collocation_mode`, solve_bvp to 1e-10), rel 1e-8 and 1e-7.
    reference = _collocation_mode(r, j, eps)
    stretch, _ = quad(lambda s: reference.sol(s)[1] ** 2, 0.0, 1.0, epsabs=0.0, epsrel=1e-12)
    bending, _ = quad(lambda s: reference.sol(s)[2] ** 2, 0.0, 1.0, epsabs=0.0, epsrel=1e-12)
    design = steel_strip(r, j, eps)
    props = beam_properties(design)
    length = design.length_m
    alpha = foreshortening_coefficient(props.eigenvalue, r, length, offset_ratio=eps)
    assert alpha * length == pytest.approx(0.5 * stretch, rel=1e-8)
    assert props.foreshortening_per_m == pytest.approx(alpha, rel=1e-12)
    estimate = single_mode_buckling_load(props.tip_stiffness_N_per_m, alpha)
    ei = props.bending_stiffness_N_m2
    assert estimate == pytest.approx(ei / length**2 * bending / stretch, rel=1e-7)


def test_static_shape_buckling_estimate():
    # Cantilever column, Euler's case: P_cr = π²EI/(4L²) (Timoshenko & Gere 1961, Theory of
    # Elastic Stability, §2.1).  The energy method with the end-load curve ψ = (3ξ² − ξ³)/2
    # (k = 3EI/L³, α = ½∫ψ'² = 3/(5L)) gives 2.5 EI/L², 10/π² − 1 = +1.32 % (same book, ch. 2,
    # memory).  A heavy tip takes the exact mode to that shape: α L → 0.6 (R = 10⁶, rel 1e-6).
    design = steel_strip()
    ei, _, _ = composite_section(design)
    length = design.length_m
    p_cr = euler_buckling_load(ei, length)
    assert p_cr == pytest.approx(math.pi**2 * ei / (4 * length**2), rel=1e-15)
    estimate = single_mode_buckling_load(3 * ei / length**3, 3 / (5 * length))
    assert estimate == pytest.approx(2.5 * ei / length**2, rel=1e-14)
    assert estimate / p_cr - 1 == pytest.approx(0.0132, abs=5e-5)
    heavy = first_mode_eigenvalue(1e6)
    assert foreshortening_coefficient(heavy, 1e6, length) * length == pytest.approx(0.6, rel=1e-6)


@pytest.mark.parametrize("r", [0.0, 0.16, 1.0, 5.0, 100.0])
def test_single_mode_buckling_estimate_with_the_exact_mode(r):
    # Rayleigh–Ritz with the first vibration mode, k_b/(2α), bounds π²EI/(4L²) from above
    # (Timoshenko & Gere 1961, ch. 2, energy method, memory).  This mode gives +7.80 % for
    # the bare beam, +4.46 % at R = 0.16, +2.09 % at R = 1, +1.48 % at R = 5 and +1.33 % at
    # R = 100, tending to the static shape's +1.32 %: within about 2 % from R = 1 on (the demo
    # beams carry R = 0.16–5.2).
    design = steel_strip(r)
    props = beam_properties(design)
    estimate = single_mode_buckling_load(props.tip_stiffness_N_per_m, props.foreshortening_per_m)
    p_cr = euler_buckling_load(props.bending_stiffness_N_m2, design.length_m)
    assert p_cr < estimate < 1.08 * p_cr
    if r >= 1.0:
        assert estimate < 1.021 * p_cr


@pytest.mark.parametrize("lam", [0.4, 1.0, 1.6, 1.87])
@pytest.mark.parametrize(("r", "j"), [(0.0, 0.0), (0.5, 0.02), (10.0, 3.0)])
def test_zero_offset_is_the_classical_equation(lam, r, j):
    # ε = 0 must give back the classical tip-mass-and-inertia equation (Erturk & Inman 2011,
    # Piezoelectric Energy Harvesting, Wiley, ch. 3), here written in plain trig functions.
    c, s, ch, sh = math.cos(lam), math.sin(lam), math.cosh(lam), math.sinh(lam)
    classical = (
        1
        + c * ch
        + lam * r * (c * sh - s * ch)
        - lam**3 * j * (ch * s + sh * c)
        + lam**4 * r * j * (1 - c * ch)
    )
    assert frequency_equation(lam, r, j, 0.0) == pytest.approx(classical, rel=1e-12, abs=1e-12)


@pytest.mark.parametrize(("r", "j"), [(0.3, 0.0), (1.0, 0.05), (10.0, 1.0)])
def test_small_offset_limit(r, j):
    # e → 0 is continuous and its first-order effect is the eigenvalue perturbation of the
    # self-adjoint problem (Rayleigh's quotient is stationary at the mode; Meirovitch 1967,
    # Analytical Methods in Vibrations, Macmillan; memory): the offset adds ε[[0, R], [R, 0]]
    # + O(ε²) to the tip mass matrix, so with the ε = 0 mode (ψ(1) = 1)
    #     d(λ⁴)/dε |0 = −λ⁴ · 2Rψ'(1) / (∫ψ² dξ + R + Jψ'(1)²).
    lam0 = first_mode_eigenvalue(r, j)
    slope = float(mode_shape(1.0, lam0, r, derivative=1))
    shape_squared, _ = quad(
        lambda s: float(mode_shape(s, lam0, r)) ** 2, 0.0, 1.0, epsabs=0.0, epsrel=1e-12
    )
    predicted = -(lam0**4) * 2.0 * r * slope / (shape_squared + r + j * slope**2)
    h = 1e-5
    lam4 = [first_mode_eigenvalue(r, j, k * h) ** 4 for k in (0, 1, 2)]
    one_sided = (-3.0 * lam4[0] + 4.0 * lam4[1] - lam4[2]) / (2.0 * h)  # O(h²) difference
    assert one_sided == pytest.approx(predicted, rel=1e-6)
    # and a vanishing offset leaves every modal quantity where the classical model has it
    classical = beam_properties(steel_strip(r, j))
    tiny = beam_properties(steel_strip(r, j, 1e-12))
    for name in (
        "eigenvalue",
        "effective_mass_kg",
        "forcing_mass_kg",
        "slope_per_deflection_per_m",
        "root_curvature_per_deflection_per_m2",
    ):
        assert getattr(tiny, name) == pytest.approx(getattr(classical, name), rel=1e-10)


@pytest.mark.parametrize("gyration_ratio", [0.0, 0.05, 0.1])
@pytest.mark.parametrize("eps", [0.05, 0.2])
def test_heavy_offset_body_on_a_nearly_massless_beam(gyration_ratio, eps):
    # A body much heavier than the beam (R = 10⁶) vibrates on the beam's static tip
    # flexibility: w = PL³/(3EI) + ML²/(2EI), θ = PL²/(2EI) + ML/EI (Roark's Formulas for
    # Stress and Strain, 7th ed., table 8.1, cantilever with end load and with end moment;
    # memory).  Two degrees of freedom (w, θ) at the tip with the body's mass matrix about the
    # tip, R[[1, ε], [ε, ε² + g²]] (g its radius of gyration over L); the beam's own mass
    # shifts λ1⁴ by O(1/R).
    r = 1e6
    flexibility = np.array([[1.0 / 3.0, 0.5], [0.5, 1.0]])
    body = r * np.array([[1.0, eps], [eps, eps**2 + gyration_ratio**2]])
    mu = scipy.linalg.eigh(body, np.linalg.inv(flexibility), eigvals_only=True)[-1]
    lam = first_mode_eigenvalue(r, r * gyration_ratio**2, eps)
    assert lam**4 == pytest.approx(1.0 / mu, rel=1e-5)


def test_offset_must_lie_beyond_the_tip():
    with pytest.raises(ValueError):
        first_mode_eigenvalue(1.0, 0.0, -0.1)
    with pytest.raises(ValueError):
        first_mode_eigenvalue(1.0, 0.0, math.nan)
    with pytest.raises(ValueError):
        replace(steel_strip(1.0), tip_mass_offset_m=-1e-3)


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


@pytest.mark.parametrize(
    ("r", "j", "eps"),
    [
        (0.0, 0.0, 0.0),
        (0.7, 0.0, 0.0),
        (0.7, 0.3, 0.0),
        (20.0, 2.0, 0.0),
        (0.7, 0.0, 0.1),
        (0.7, 0.3, 0.2),
        (20.0, 2.0, 0.2),
    ],
)
def test_modal_stiffness_equals_strain_energy(r, j, eps):
    # Rayleigh's principle (Rayleigh 1877, The Theory of Sound, vol. 1; Meirovitch 1967,
    # Analytical Methods in Vibrations, Macmillan): for the exact mode, ω² times the
    # kinetic-energy mass (including the tip body's M_t(ψ(L) + eψ'(L))² + I_c ψ'(L)²) equals
    # the strain-energy stiffness (EI/L³)∫ψ''² dξ.
    design = replace(erturk_inman_2009_bimorph(), tip_mass_kg=0.0)
    ei, m, _ = composite_section(design)
    beam_mass = m * design.length_m
    design = replace(
        design,
        tip_mass_kg=r * beam_mass,
        tip_rotary_inertia_kg_m2=j * beam_mass * design.length_m**2,
        tip_mass_offset_m=eps * design.length_m,
    )
    props = beam_properties(design)
    lam = props.eigenvalue
    curvature_energy, _ = quad(
        lambda xi: float(mode_shape(xi, lam, r, derivative=2, offset_ratio=eps)) ** 2,
        0.0,
        1.0,
        epsabs=0.0,
        epsrel=1e-12,
    )
    strain_stiffness = ei / design.length_m**3 * curvature_energy
    assert props.tip_stiffness_N_per_m == pytest.approx(strain_stiffness, rel=1e-9)


def test_erturk_inman_2009_bimorph_frequencies():
    # Erturk & Inman (2009), Smart Mater. Struct. 18:025009, case study (memory):
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
    # Struct. 18:025009); neutral axis on the substrate's mid-plane.
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


# -- tip body of a case -------------------------------------------------------------------


@pytest.mark.parametrize(
    "shape",
    [
        {"block": ("5 mm", "10 mm", "5 mm")},
        {"block": ("8 mm", "6 mm", "3 mm")},
        {"disc": {"diameter": "6 mm", "length": "4 mm"}},
    ],
)
@pytest.mark.parametrize("extra_mass", ["0 g", "0.5 g"])
def test_tip_body_by_direct_integration(shape, extra_mass):
    # Centre of mass and rotary inertia from their definitions (Meriam & Kraige 2012,
    # Engineering Mechanics: Dynamics, 7th ed., Wiley, appendix B; memory), integrated with
    # scipy over the magnet (inner face on the beam tip, x along the axis, z along the
    # deflection) plus the extra mass as a point at the tip, about the combined centre.
    spec = TipMagnet(material="NdFeB-N42", extra_mass=extra_mass, **shape)
    magnet = magnet_shape(spec)
    density = find_material("NdFeB-N42", "magnet").get("density")
    mass, offset, inertia = tip_inertia(spec, magnet)

    if "block" in shape:
        axial, width, depth = magnet.axial_m, magnet.width_m, magnet.deflection_m

        def integral(f):
            value, _ = dblquad(
                lambda z, x: density * width * f(x, z),
                0.0,
                axial,
                -depth / 2,
                depth / 2,
                epsabs=0.0,
                epsrel=1e-12,
            )
            return value
    else:
        radius, length = magnet.diameter_m / 2, magnet.length_m

        def integral(f):
            value, _ = tplquad(
                lambda phi, rho, x: density * rho * f(x, rho * math.sin(phi)),
                0.0,
                length,
                0.0,
                radius,
                0.0,
                2.0 * math.pi,
                epsabs=0.0,
                epsrel=1e-12,
            )
            return value

    extra = spec.extra_mass
    total = integral(lambda x, z: 1.0) + extra
    centre = integral(lambda x, z: x) / total  # the extra mass sits at x = 0
    about_centre = integral(lambda x, z: (x - centre) ** 2 + z**2) + extra * centre**2
    assert mass == pytest.approx(total, rel=1e-10)
    assert offset == pytest.approx(centre, rel=1e-10)
    assert inertia == pytest.approx(about_centre, rel=1e-9)
