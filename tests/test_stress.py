"""Root stress and fatigue margins against Roark, Shigley and a published Goodman example."""

from __future__ import annotations

import numpy as np
import pytest

from harvester.physics.beam import (
    BeamDesign,
    beam_properties,
    composite_section,
    first_mode_eigenvalue,
    section_layers,
)
from harvester.physics.stress import (
    ceramic_check,
    ceramic_field_per_volt,
    ceramic_layer_stresses,
    fibre_stress_extremes,
    goodman_safety_factor,
    homogeneous_root_stress,
    langer_yield_factor,
    mean_and_alternating,
    outer_fibre_strains,
    outer_fibre_stresses,
)

PSI = 6894.757293168361  # [Pa]: 1 lbf/in² with lbf = 0.45359237 kg × 9.80665 m/s² (exact)
INCH = 0.0254  # [m] (exact)
VACUUM_PERMITTIVITY = 8.8541878128e-12  # CODATA 2018 [F/m]
# PZT-5A (Erturk & Inman 2011, Piezoelectric Energy Harvesting, Wiley, App. E)
S11E, D31, EPS33T = 16.4e-12, -171e-12, 1700 * VACUUM_PERMITTIVITY


def _layer_arrays(design: BeamDesign):
    layers = section_layers(design)
    return (
        np.array([lay.modulus_Pa for lay in layers]),
        np.array([lay.bottom_m for lay in layers]),
        np.array([lay.top_m for lay in layers]),
    )


def test_layer_formula_reduces_to_roark_on_a_homogeneous_beam():
    # Cantilever with end load: σ = 3Ecδ/L² (Young & Budynas 2002, Roark's Formulas for Stress and
    # Strain, 7th ed., table 8.1 case 1a); the static deflection shape has root curvature
    # κ = 3δ/L² (K = 3, from the same case's deflection curve).
    design = BeamDesign(0.08, 0.01, 0.5e-3, 190e9, 8000.0)
    _, _, z_n = composite_section(design)
    moduli, bottoms, tops = _layer_arrays(design)
    deflection = 2e-3
    bottom, top = outer_fibre_stresses(moduli, bottoms, tops, z_n, 3.0 / design.length_m**2)
    roark = homogeneous_root_stress(190e9, 0.5e-3, deflection, 0.08)
    assert top[0] * deflection == pytest.approx(roark, rel=1e-12)
    assert bottom[0] * deflection == pytest.approx(-roark, rel=1e-12)


def test_unimorph_of_one_material_is_a_homogeneous_beam():
    # Equal moduli in both layers: the section is a single strip of thickness h_s + h_p, and the
    # outer fibres follow Roark's σ = 3Ecδ/L² (table 8.1 case 1a) with c = (h_s + h_p)/2.
    design = BeamDesign(
        0.05,
        0.01,
        0.3e-3,
        70e9,
        2700.0,
        piezo_layers=1,
        piezo_thickness_m=0.2e-3,
        piezo_modulus_Pa=70e9,
        piezo_density_kg_m3=2700.0,
        piezo_permittivity_F_per_m=1e-8,
    )
    _, _, z_n = composite_section(design)
    moduli, bottoms, tops = _layer_arrays(design)
    bottom, top = outer_fibre_stresses(moduli, bottoms, tops, z_n, 3.0 / design.length_m**2)
    roark = homogeneous_root_stress(70e9, 0.5e-3, 1.0, 0.05)
    assert top[-1] == pytest.approx(roark, rel=1e-12)
    assert bottom[0] == pytest.approx(-roark, rel=1e-12)


def test_bonded_interface_strain_is_continuous_and_stress_jumps_by_the_modulus_ratio():
    # Perfect bonding with plane sections (Gere & Goodno 2009, Mechanics of Materials, 7th ed.,
    # §6.2 composite beams): strain is linear through the depth, stress jumps by E_p/E_s.
    design = BeamDesign(
        0.05,
        0.01,
        0.14e-3,
        105e9,
        9000.0,
        piezo_layers=2,
        piezo_thickness_m=0.26e-3,
        piezo_modulus_Pa=66e9,
        piezo_density_kg_m3=7800.0,
        piezo_e31_C_per_m2=-12.5,
        piezo_permittivity_F_per_m=13.5e-9,
    )
    props = beam_properties(design)
    moduli, bottoms, tops = _layer_arrays(design)
    kappa = props.root_curvature_per_deflection_per_m2
    strain_bottom, strain_top = outer_fibre_strains(bottoms, tops, props.neutral_axis_m, kappa)
    stress_bottom, stress_top = outer_fibre_stresses(
        moduli, bottoms, tops, props.neutral_axis_m, kappa
    )
    # layers are ordered ceramic, substrate, ceramic
    assert strain_top[1] == pytest.approx(strain_bottom[2], rel=1e-12)
    assert stress_bottom[2] / stress_top[1] == pytest.approx(66e9 / 105e9, rel=1e-12)
    # symmetric bimorph: equal and opposite outer ceramic fibres
    assert stress_top[2] == pytest.approx(-stress_bottom[0], rel=1e-12)


@pytest.mark.parametrize("r", [0.0, 0.01, 0.1, 1.0, 10.0, 100.0, 1000.0])
def test_exact_mode_root_curvature_factor(r):
    # K = φ''(0)L²/φ(L) lies between 3 (static shape, heavy tip) and λ1² = 3.5160 (bare beam,
    # Blevins 1979 table 8-1); see harvester/METHODS.md §9.
    length = 0.05
    beam_mass = 7800.0 * 0.01 * 0.3e-3 * length
    design = BeamDesign(length, 0.01, 0.3e-3, 200e9, 7800.0, tip_mass_kg=r * beam_mass)
    k_factor = beam_properties(design).root_curvature_per_deflection_per_m2 * length**2
    assert 3.0 <= k_factor <= 3.52
    if r == 0.0:
        assert k_factor == pytest.approx(first_mode_eigenvalue(0.0) ** 2, rel=1e-10)
        assert k_factor == pytest.approx(3.51601527, rel=1e-8)  # Blevins 1979: λ1² = 3.51601527
    if r == 1000.0:
        assert k_factor == pytest.approx(3.0, rel=1e-3)


def test_shigley_cam_follower_spring():
    # Budynas & Nisbett (2011), Shigley's Mechanical Engineering Design, 9th ed., Example 6–11:
    # steel cantilever 32 in long, 1/4 in thick (E = 30 Mpsi), total travel 2 in on top of a
    # preload deflection δ. Root stress per inch K = 10.99 kpsi, σ_a = K, σ_m = K(1 + δ):
    # 11, 33 and 65.9 kpsi for δ = 0, 2, 5 in.
    per_inch = homogeneous_root_stress(30e6 * PSI, 0.25 * INCH, 1.0 * INCH, 32 * INCH)
    assert per_inch / PSI / 1e3 == pytest.approx(10.99, abs=0.005)
    preload = np.array([0.0, 2.0, 5.0]) * INCH
    lo, hi = fibre_stress_extremes(per_inch / INCH, preload, preload + 2.0 * INCH)
    mean, alternating = mean_and_alternating(lo, hi)
    np.testing.assert_allclose(alternating / PSI / 1e3, 10.99, atol=0.005)
    np.testing.assert_allclose(mean / PSI / 1e3, [11.0, 33.0, 65.9], atol=0.05)


def test_extremes_follow_the_sign_of_the_fibre():
    # A fibre on the compression side (negative stress per deflection) sees its most negative
    # stress at the largest positive deflection (linear elasticity).
    lo, hi = fibre_stress_extremes(np.array([2e9, -2e9]), -1e-3, 3e-3)
    np.testing.assert_allclose(lo, [-2e6, -6e6])
    np.testing.assert_allclose(hi, [6e6, 2e6])


# -- fatigue -----------------------------------------------------------------------------


def test_goodman_limiting_cases():
    # Modified Goodman σ_a/S_e + σ_m/S_ut = 1/n (Budynas & Nisbett 2011, Shigley's MED, 9th ed.,
    # §6–12, eq. 6–46, number from memory): fully reversed n = S_e/σ_a; static n = S_ut/σ_m;
    # the line passes through (S_ut/2, S_e/2) with n = 1.
    s_e, s_ut = 96.5e6, 310e6  # Al 6061-T6 (ASM Handbook Vol. 2, 1990)
    assert goodman_safety_factor(40e6, 0.0, s_e, s_ut) == pytest.approx(s_e / 40e6, rel=1e-14)
    assert goodman_safety_factor(0.0, 100e6, s_e, s_ut) == pytest.approx(s_ut / 100e6, rel=1e-14)
    assert goodman_safety_factor(s_e / 2, s_ut / 2, s_e, s_ut) == pytest.approx(1.0, rel=1e-14)


def test_goodman_compressive_mean():
    # Shigley's MED, 9th ed., §6–12 (p. 305): with a compressive midrange stress, fatigue failure
    # occurs when σ_a = S_e, so n = S_e/σ_a whatever the mean.
    n = goodman_safety_factor(np.array([40e6, 40e6]), np.array([-50e6, -200e6]), 96.5e6, 310e6)
    np.testing.assert_allclose(n, 96.5e6 / 40e6, rtol=1e-14)


def test_goodman_worked_example():
    # Brown (2005), Marks' Calculations for Machine Design, McGraw-Hill, ch. 7, Example 3 (SI),
    # step 13: τ_a = 27.8 MPa, τ_m = 278.0 MPa, S_e = 43.2 MPa, S_us = 422.1 MPa give n = 0.77;
    # with S_e doubled to 86.4 MPa, n = 1.02.
    assert goodman_safety_factor(27.8e6, 278.0e6, 43.2e6, 422.1e6) == pytest.approx(0.77, abs=5e-3)
    assert goodman_safety_factor(27.8e6, 278.0e6, 86.4e6, 422.1e6) == pytest.approx(1.02, abs=5e-3)


def test_goodman_without_any_load_is_infinite():
    assert goodman_safety_factor(0.0, -10e6, 96.5e6, 310e6) == np.inf


def test_langer_first_cycle_yield():
    # Langer line σ_a + σ_m = S_y (Shigley's MED, 9th ed., §6–12), compressive peaks by |σ_m|.
    n = langer_yield_factor(np.array([100e6, 50e6, 0.0]), np.array([0.0, -150e6, 0.0]), 276e6)
    np.testing.assert_allclose(n, [2.76, 1.38, np.inf], rtol=1e-14)


def test_ceramic_check_against_common_practice_limits():
    # PZT: peak tensile strain ≲ 500 µε, dynamic tensile stress ≲ 20–30 MPa (common practice,
    # memory; harvester/METHODS.md §9).
    below = ceramic_check(499e-6, 19e6)
    assert below.passes
    assert below.strain_utilisation == pytest.approx(499 / 500, rel=1e-14)
    assert not ceramic_check(501e-6, 19e6).passes
    assert not ceramic_check(100e-6, 21e6).passes
    assert ceramic_check(100e-6, 21e6, stress_limit_Pa=30e6).passes
    compressed = ceramic_check(-300e-6, -20e6)
    assert compressed.passes and compressed.strain_utilisation == 0.0


# -- ceramic under a voltage ---------------------------------------------------------------


def _pzt_5a_beam(layers: int, wiring: str = "series") -> BeamDesign:
    """PZT-5A layers on brass, the geometry of Erturk & Inman (2009), Smart Mater. Struct.
    18:025009 (memory), with the plane-stress constants c̄11 = 1/s11E, ē31 = d31/s11E,
    ε̄33S = ε33T − d31²/s11E (Erturk & Inman 2011, App. E) and a 12 g tip mass."""
    return BeamDesign(
        50.8e-3,
        31.8e-3,
        0.14e-3,
        105e9,
        9000.0,
        piezo_layers=layers,
        piezo_thickness_m=0.26e-3,
        piezo_modulus_Pa=1 / S11E,
        piezo_density_kg_m3=7750.0,
        piezo_e31_C_per_m2=D31 / S11E,
        piezo_permittivity_F_per_m=EPS33T - D31**2 / S11E,
        piezo_wiring=wiring,
        tip_mass_kg=12e-3,
    )


@pytest.mark.parametrize(
    ("layers", "wiring"), [(1, "series"), (2, "series"), (2, "parallel")],
    ids=["unimorph", "series bimorph", "parallel bimorph"],
)
def test_open_circuit_raises_the_stress_by_the_coupling_factor(layers, wiring):
    # Open circuit, v = θx/C_p (Erturk & Inman 2009, Smart Mater. Struct. 18:025009, R_l → ∞):
    # each layer's field is the one that D3 = ē31 ε1 + ε̄33S E3 = 0 calls for at its electrode's
    # mean strain, ε̄ = (z_c − z_n) ψ'(L) x/L (z_c its mid-plane; ∫₀ᴸ w'' = w'(L)), so
    # σ1 = c̄11 ε̄ − ē31 E3 = c̄11 ε̄/(1 − k31²), k31² = d31²/(s11E ε33T) (IEEE Std 176-1987
    # constitutive relations; plane stress, Erturk & Inman 2011, App. E).  z_n from the
    # transformed section (Gere & Goodno 2009, Mechanics of Materials, §6.2): h_s/2 for the
    # symmetric bimorph.  The relation is an identity of the constants, so to rounding (1e-9),
    # far inside 1 %; the field adds tension to the stretched layer, compression to the other.
    design = _pzt_5a_beam(layers, wiring)
    props = beam_properties(design)
    h_s, h_p = design.substrate_thickness_m, design.piezo_thickness_m
    if layers == 1:
        e_s, e_p = design.substrate_modulus_Pa, design.piezo_modulus_Pa
        z_n = (e_s * h_s * h_s / 2 + e_p * h_p * (h_s + h_p / 2)) / (e_s * h_s + e_p * h_p)
        mid_planes = np.array([h_s + h_p / 2])
    else:
        z_n = h_s / 2
        mid_planes = np.array([-h_p / 2, h_s + h_p / 2])
    assert props.neutral_axis_m == pytest.approx(z_n, rel=1e-12)
    x = 2e-3
    volts = props.coupling_N_per_V * x / props.capacitance_F
    mean_strain = (mid_planes - z_n) * props.slope_per_deflection_per_m * x / design.length_m
    short = ceramic_layer_stresses(x, 0.0, design, props)
    opened = ceramic_layer_stresses(x, volts, design, props)
    k31_squared = D31**2 / (S11E * EPS33T)
    assert 1 / (1 - k31_squared) == pytest.approx(1.134, abs=1e-3)
    for face in (0, 1):
        added = opened[face] - short[face]
        elastic = design.piezo_modulus_Pa * mean_strain
        np.testing.assert_allclose((elastic + added) / elastic, 1 / (1 - k31_squared), rtol=1e-9)
        assert np.all(np.sign(added) == np.sign(mean_strain))


def test_zero_voltage_leaves_the_short_circuit_stress():
    # v = 0: σ1 = c̄11 ε1, the layer stress of `outer_fibre_stresses` times x to the last bit
    # (Gere & Goodno 2009, §6.2), for a deflection of either sign.
    design = _pzt_5a_beam(2, "parallel")
    props = beam_properties(design)
    moduli, bottoms, tops = _layer_arrays(design)
    bottom, top = outer_fibre_stresses(
        moduli, bottoms, tops, props.neutral_axis_m, props.root_curvature_per_deflection_per_m2
    )
    ceramic = [0, 2]
    x = np.array([-3e-3, 1.5e-3])
    lower, upper = ceramic_layer_stresses(x, 0.0, design, props)
    assert np.array_equal(lower, bottom[ceramic] * x[:, None])
    assert np.array_equal(upper, top[ceramic] * x[:, None])


def test_field_per_volt_follows_the_wiring():
    # Series bimorph: the layers, poled oppositely, share v (|E3| = v/2h_p); parallel: each
    # carries v (|E3| = v/h_p) (Erturk & Inman 2009, Smart Mater. Struct. 18:025009).  Either way
    # the stretched (upper) layer's field lies along its poling for ē31 < 0 and the lower
    # layer's against it; a unimorph's layer sees v/h_p.
    h_p = 0.26e-3
    for wiring, across in (("series", 2 * h_p), ("parallel", h_p)):
        design = _pzt_5a_beam(2, wiring)
        z_n = beam_properties(design).neutral_axis_m
        np.testing.assert_allclose(ceramic_field_per_volt(design, z_n), [-1 / across, 1 / across],
                                   rtol=1e-15)
    unimorph = _pzt_5a_beam(1)
    z_n = beam_properties(unimorph).neutral_axis_m
    np.testing.assert_allclose(ceramic_field_per_volt(unimorph, z_n), [1 / h_p], rtol=1e-15)
