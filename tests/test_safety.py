"""Safety checks of a predicted response against Roark, Shigley, Blevins, scipy and plane geometry.

Designs are built by hand here (never the demo cases).  Where a check needs the static end-load
shape (Roark, Shigley), the root curvature per unit tip deflection is set to K/L² with K = 3.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from harvester.analysis.safety import (
    CLEARANCE_WARNING_FRACTION,
    Check,
    ResponseEnvelope,
    omitted_checks,
    open_circuit_voltage_swing,
    safety_checks,
    static_envelope,
    worst_margin,
)
from harvester.build import Built
from harvester.case.schema import Limits
from harvester.materials import Material, find_material
from harvester.model import CoilCircuit, PiezoCircuit, ReducedModel
from harvester.physics.beam import BeamDesign, beam_properties
from harvester.physics.magnets import Block, Disc, tip_body_reach, tip_body_travel

PSI = 6894.757293168361  # [Pa]: 1 lbf/in² with lbf = 0.45359237 kg × 9.80665 m/s² (exact)
INCH = 0.0254  # [m] (exact)

# Al 6061-T6, ASM Handbook Vol. 2 (1990): S_y 276 MPa, S_ut 310 MPa,
# fatigue strength 96.5 MPa at 5e8 cycles (R. R. Moore).
AL_6061 = Material(
    key="al",
    name="Al 6061-T6",
    kind="substrate",
    description="",
    values={
        "youngs_modulus": 68.9e9,
        "density": 2700.0,
        "yield_strength": 276e6,
        "ultimate_strength": 310e6,
        "fatigue_strength": 96.5e6,
    },
    sources={},
    fatigue_cycles=5e8,
)
# PZT tensile limits: 500 µε and 20 MPa (common practice, memory; harvester/METHODS.md §9).
PZT_LIMITS = Material(
    key="pzt",
    name="PZT",
    kind="piezo",
    description="",
    values={"max_tensile_strain": 500e-6, "max_tensile_stress": 20e6},
    sources={
        "max_tensile_strain": "common practice (memory)",
        "max_tensile_stress": "common practice (memory)",
    },
)


def _built(
    design, *, curvature_factor=None, slope=None, tip=None, fixed=None, gap=None, transducer="auto"
):
    """A Built of a hand-made beam; K/L² and φ'(L)/φ(L) overridable for closed-form checks."""
    props = beam_properties(design)
    if curvature_factor is not None:
        props = replace(
            props, root_curvature_per_deflection_per_m2=curvature_factor / design.length_m**2
        )
    if slope is not None:
        props = replace(props, slope_per_deflection_per_m=slope)
    if transducer == "auto":
        transducer = (
            PiezoCircuit(props.coupling_N_per_V, props.capacitance_F)
            if design.piezo_layers
            else None
        )
    model = ReducedModel(
        mass_kg=props.effective_mass_kg,
        damping_N_s_per_m=0.0,
        stiffness=(props.tip_stiffness_N_per_m,),
        forcing_mass_kg=props.forcing_mass_kg,
        transducer=transducer,
    )
    return _as_built(model, props, design, tip=tip, fixed=fixed, gap=gap)


def _as_built(model, props=None, design=None, *, tip=None, fixed=None, gap=None):
    return Built(
        model=model,
        beam=props,
        beam_design=design,
        tip=tip,
        fixed=fixed,
        gap_m=gap,
        fit=None,
        critical_gap_m=None,
        magnet_model="exact",
    )


def _by_name(checks):
    return {c.name: c for c in checks}


# -- root stress through the safety path ---------------------------------------------------


def test_homogeneous_root_stress_is_roark():
    # Cantilever with end load: σ = 3Ecδ/L², c = h/2 (Young & Budynas 2002, Roark's Formulas for
    # Stress and Strain, 7th ed., table 8.1 case 1a).  At rest, Langer's peak σa + |σm| is the
    # root stress; fully reversed, the Goodman value σa + σm·Se/Sut is σa.
    e, h, length, delta = 68.9e9, 0.5e-3, 0.08, 2e-3
    built = _built(BeamDesign(length, 0.01, h, e, 2700.0), curvature_factor=3.0)
    roark = 3.0 * e * (h / 2) * delta / length**2
    at_rest = _by_name(
        safety_checks(built, Limits(), ResponseEnvelope(delta, delta), substrate=AL_6061)
    )
    assert at_rest["substrate yield (Langer)"].value == pytest.approx(roark, rel=1e-12)
    reversed_ = _by_name(
        safety_checks(built, Limits(), ResponseEnvelope(-delta, delta), substrate=AL_6061)
    )
    assert reversed_["substrate fatigue (Goodman)"].value == pytest.approx(roark, rel=1e-12)


def test_bare_beam_first_mode_root_stress():
    # Exact first mode of a bare cantilever: root curvature per tip deflection λ1²/L² with
    # λ1² = 3.51601527 (Blevins 1979, Formulas for Natural Frequency and Mode Shape, table 8-1),
    # so σ = E c λ1² δ/L² at the outer fibre.
    e, h, length, delta = 190e9, 0.3e-3, 0.05, 1e-3
    built = _built(BeamDesign(length, 0.01, h, e, 7900.0))
    checks = _by_name(
        safety_checks(built, Limits(), ResponseEnvelope(delta, delta), substrate=AL_6061)
    )
    expected = e * (h / 2) * 3.51601527 * delta / length**2
    assert checks["substrate yield (Langer)"].value == pytest.approx(expected, rel=1e-8)


# -- Goodman and Langer -----------------------------------------------------------------------


def _stress_per_deflection(e, h, length):
    return 3.0 * e * (h / 2) / length**2  # Roark table 8.1 case 1a per unit δ [Pa/m]


def test_goodman_limiting_cases():
    # Modified Goodman σa/Se + σm/Sut = 1/n (Budynas & Nisbett 2011, Shigley's MED, 9th ed.,
    # §6–12): fully reversed n = Se/σa; static n = Sut/σm; the line passes through
    # (σm, σa) = (Sut/2, Se/2) with n = 1.  Al 6061-T6 strengths (ASM Handbook Vol. 2, 1990).
    e, h, length = 68.9e9, 0.5e-3, 0.08
    built = _built(BeamDesign(length, 0.01, h, e, 2700.0), curvature_factor=3.0)
    s = _stress_per_deflection(e, h, length)
    s_e, s_ut = 96.5e6, 310e6

    def goodman(x_min, x_max):
        checks = safety_checks(built, Limits(), ResponseEnvelope(x_min, x_max), substrate=AL_6061)
        return _by_name(checks)["substrate fatigue (Goodman)"]

    sigma = 40e6
    assert goodman(-sigma / s, sigma / s).margin == pytest.approx(s_e / sigma, rel=1e-12)
    assert goodman(sigma / s, sigma / s).margin == pytest.approx(s_ut / sigma, rel=1e-12)
    on_line = goodman((s_ut - s_e) / 2 / s, (s_ut + s_e) / 2 / s)
    assert on_line.margin == pytest.approx(1.0, rel=1e-12)
    assert on_line.value == pytest.approx(on_line.limit, rel=1e-12)  # value = Se/n
    # a tensile mean governs on the tension face; the compressed face has n = Se/σa
    assert "upper face of the substrate" in on_line.basis


def test_shigley_cam_follower_spring_through_the_safety_path():
    # Budynas & Nisbett (2011), Shigley's MED, 9th ed., Example 6–11 (pp. 311–312): steel leaf
    # spring, cantilever 32 in × 2 in × 1/4 in, E = 30 Mpsi, cam stroke 2 in on a preload
    # deflection δ of 2 in or 5 in; Sut = 150 kpsi, Sy = 127 kpsi, Se = 28 kpsi fully corrected.
    # Published stresses: σa = 10.99 kpsi, σm = 10.99(1 + δ) kpsi (δ in inches).  From those:
    # Goodman n = 1/(σa/Se + σm/Sut) = 1.633 (δ = 2), 1.202 (δ = 5); Langer
    # n_y = Sy/(σa + σm) = 2.889, 1.651.  Tolerance 1e-3: the published stresses carry four digits.
    spring = Material(
        key="spring",
        name="spring steel (Shigley Ex. 6–11)",
        kind="substrate",
        description="",
        values={
            "yield_strength": 127e3 * PSI,
            "ultimate_strength": 150e3 * PSI,
            "fatigue_strength": 28e3 * PSI,
        },
        sources={},
        fatigue_cycles=1e6,
    )
    design = BeamDesign(32 * INCH, 2 * INCH, 0.25 * INCH, 30e6 * PSI, 7850.0)
    built = _built(design, curvature_factor=3.0)
    limits = Limits(safety_factor=1.5)
    expected = {2.0: (1.633, 2.889, "pass"), 5.0: (1.202, 1.651, "warn")}
    for preload, (n_goodman, n_langer, level) in expected.items():
        envelope = ResponseEnvelope(preload * INCH, (preload + 2.0) * INCH)
        checks = _by_name(safety_checks(built, limits, envelope, substrate=spring))
        goodman, langer = checks["substrate fatigue (Goodman)"], checks["substrate yield (Langer)"]
        assert goodman.margin == pytest.approx(n_goodman, rel=1e-3)
        assert langer.margin == pytest.approx(n_langer, rel=1e-3)
        assert langer.value / PSI / 1e3 == pytest.approx(10.99 * (2.0 + preload), rel=1e-3)
        assert goodman.level == level  # 1.633 ≥ 1.5 passes, 1.202 < 1.5 warns
        assert langer.level == "pass"


def _unimorph(substrate_Pa, substrate_m, ceramic_Pa, ceramic_m, length_m=0.05):
    return BeamDesign(
        length_m,
        0.01,
        substrate_m,
        substrate_Pa,
        7800.0,
        piezo_layers=1,
        piezo_thickness_m=ceramic_m,
        piezo_modulus_Pa=ceramic_Pa,
        piezo_density_kg_m3=7800.0,
        piezo_e31_C_per_m2=-10.4,
        piezo_permittivity_F_per_m=13.3e-9,
    )


def _one_material_unimorph(modulus, substrate_m=0.3e-3, ceramic_m=0.2e-3):
    # Equal moduli: the section is one strip of thickness h_s + h_p, so its outer faces are
    # Roark's outer fibres (table 8.1 case 1a) with c = (h_s + h_p)/2.
    return _unimorph(modulus, substrate_m, modulus, ceramic_m)


def test_goodman_takes_the_other_well_when_it_puts_the_substrate_in_tension():
    # A thin substrate under a thick ceramic of the same modulus lies wholly below the neutral
    # axis (z_n = 0.25 mm, substrate 0–0.1 mm): about the positive well (2–3 mm) both its faces
    # are compressed and Goodman gives n = Se/σa (Shigley's MED, 9th ed., §6–12, p. 305).  The
    # beam can equally cycle about the mirror-image well (−3…−2 mm), where the lower face
    # (Roark's outer fibre of the 0.5 mm strip, table 8.1 case 1a) carries a tensile mean:
    # n = 1/(σa/Se + σm/Sut) (modified Goodman, same section), which is lower and governs.
    modulus, length = 61e9, 0.05  # the helper's length
    design = _one_material_unimorph(modulus, substrate_m=0.1e-3, ceramic_m=0.4e-3)
    built = _built(design, curvature_factor=3.0)
    preload, stroke = 2e-3, 1e-3
    s = _stress_per_deflection(modulus, 0.5e-3, length)
    amplitude, mean = s * stroke / 2, s * (preload + stroke / 2)
    positive_well_alone = 96.5e6 / amplitude
    either_well = 1.0 / (amplitude / 96.5e6 + mean / 310e6)
    for envelope in (
        ResponseEnvelope(preload, preload + stroke),
        ResponseEnvelope(-preload - stroke, -preload),
    ):
        goodman = _by_name(
            safety_checks(built, Limits(), envelope, substrate=AL_6061, ceramic=PZT_LIMITS)
        )["substrate fatigue (Goodman)"]
        assert goodman.margin == pytest.approx(either_well, rel=1e-12)
        assert goodman.value == pytest.approx(amplitude + mean * 96.5e6 / 310e6, rel=1e-12)
        assert "lower face of the substrate" in goodman.basis
    assert either_well < 0.5 * positive_well_alone  # 4.06 against 10.5


def test_unequal_wells_check_the_rest_in_each_well_not_a_mirror_image():
    # With unequal wells the beam cannot do about one well what it does about the other, so no
    # mirror image is checked; the beam at rest in each well is.  Same strip as above (one
    # material, 0.5 mm, the substrate below the neutral axis: Roark table 8.1 case 1a stress
    # σ = E c · 3x/L² at the lower face, c = 0.25 mm); a force k1 x + k2 x² + k3 x³ with wells
    # at −8 mm and +2.5 mm (k3 x² + k2 x + k1 = k3 (x + 8 mm)(x − 2.5 mm)).  About the right
    # well (2–3 mm) the lower face is compressed: Goodman n = Se/σa = 10.5 (Shigley's MED, 9th
    # ed., §6–12, p. 305).  At rest in the left well it carries a steady tension σm = E c 3·8mm/L²
    # with no swing: n = Sut/σm = 2.12, which governs; the mirror of the envelope (4.06) is not
    # what the checks report.
    modulus, length = 61e9, 0.05
    design = _one_material_unimorph(modulus, substrate_m=0.1e-3, ceramic_m=0.4e-3)
    symmetric = _built(design, curvature_factor=3.0)
    k3 = 1e6
    model = replace(symmetric.model, stiffness=(-k3 * 8e-3 * 2.5e-3, k3),
                    even_stiffness=(0.0, k3 * (8e-3 - 2.5e-3)))
    built = replace(symmetric, model=model)
    s = _stress_per_deflection(modulus, 0.5e-3, length)
    envelope = ResponseEnvelope(2e-3, 3e-3)
    goodman = _by_name(safety_checks(built, Limits(), envelope, substrate=AL_6061,
                                     ceramic=PZT_LIMITS))["substrate fatigue (Goodman)"]
    assert goodman.margin == pytest.approx(310e6 / (s * 8e-3), rel=1e-9)
    assert "at rest in the left well" in goodman.basis and "−x_max" not in goodman.basis
    assert "lower face of the substrate" in goodman.basis
    alone = _by_name(safety_checks(replace(built, model=replace(model, even_stiffness=(0.0, 1.0))),
                                   Limits(), envelope, substrate=AL_6061, ceramic=PZT_LIMITS))
    assert alone["substrate fatigue (Goodman)"].margin != pytest.approx(goodman.margin, rel=0.1)


def test_unimorph_with_the_neutral_axis_in_the_ceramic_is_checked_in_either_well():
    # Transformed section (Gere & Goodno 2009, Mechanics of Materials, 7th ed., §6.2):
    # z_n = Σ E_i h_i z̄_i / Σ E_i h_i = 0.1244 mm, inside the ceramic (0.1–0.29 mm).  Root
    # stress σ = E (z − z_n) κ with κ = 3x/L² (Roark table 8.1 case 1a shape).  About the
    # positive well (x = 2.7…5.6 mm) the whole substrate is compressed and the ceramic's upper
    # face is stretched; about the mirror-image well the substrate's lower face is stretched.
    # Every check must read the same for the envelope and its mirror image, and the substrate
    # checks must be those of the lower face in tension (modified Goodman and Langer, Shigley's
    # MED, 9th ed., §6–12), worse than the positive well alone (Goodman n = Se/σa, p. 305).
    # Brass-like substrate 0.1 mm (110 GPa) under 0.19 mm of PZT-5A (c̄11 = 61.0 GPa, Erturk &
    # Inman 2011, App. E), 60 mm long.
    design = _unimorph(110e9, 0.1e-3, 61e9, 0.19e-3, length_m=0.06)
    built = _built(design, curvature_factor=3.0)
    e_s, h_s, e_p, h_p, length = 110e9, 0.1e-3, 61e9, 0.19e-3, 0.06
    z_n = (e_s * h_s * h_s / 2 + e_p * h_p * (h_s + h_p / 2)) / (e_s * h_s + e_p * h_p)
    assert h_s < z_n < h_s + h_p
    x_lo, x_hi = 2.7e-3, 5.6e-3
    kappa = 3.0 / length**2
    bottom = -e_s * z_n * kappa  # substrate lower face, stress per unit x [Pa/m]
    amplitude, mean = abs(bottom) * (x_hi - x_lo) / 2, abs(bottom) * (x_hi + x_lo) / 2
    goodman_either = 1.0 / (amplitude / 96.5e6 + mean / 310e6)
    goodman_positive_alone = 96.5e6 / amplitude
    langer_either = 276e6 / (amplitude + mean)
    ceramic_strain = (h_s + h_p - z_n) * kappa * x_hi  # upper ceramic face, positive well

    limits = Limits(safety_factor=1.5)
    given, mirror = ResponseEnvelope(x_lo, x_hi), ResponseEnvelope(-x_hi, -x_lo)
    a = safety_checks(built, limits, given, substrate=AL_6061, ceramic=PZT_LIMITS)
    b = safety_checks(built, limits, mirror, substrate=AL_6061, ceramic=PZT_LIMITS)
    assert [c.name for c in a] == [c.name for c in b]
    for one, other in zip(a, b, strict=True):
        assert one.value == pytest.approx(other.value, rel=1e-12)
        assert one.margin == pytest.approx(other.margin, rel=1e-12)
        assert one.level == other.level
    checks = _by_name(a)
    goodman = checks["substrate fatigue (Goodman)"]
    assert goodman.margin == pytest.approx(goodman_either, rel=1e-9)
    assert goodman.margin < 0.6 * goodman_positive_alone  # 3.09 against 5.84
    assert "lower face of the substrate" in goodman.basis and "either well" in goodman.basis
    assert checks["substrate yield (Langer)"].margin == pytest.approx(langer_either, rel=1e-9)
    assert checks["ceramic tensile strain"].value == pytest.approx(ceramic_strain, rel=1e-9)
    assert "upper face of the ceramic" in checks["ceramic tensile strain"].basis


@pytest.mark.parametrize("n, level", [(0.9, "fail"), (1.2, "warn"), (2.0, "pass")])
def test_goodman_thresholds(n, level):
    # Fully reversed bending gives n = Se/σa (Shigley's MED, 9th ed., §6–12); fail below 1,
    # warn below the case's safety factor (1.5 here), pass above.
    e, h, length = 68.9e9, 0.5e-3, 0.08
    built = _built(BeamDesign(length, 0.01, h, e, 2700.0), curvature_factor=3.0)
    amplitude = 96.5e6 / n / _stress_per_deflection(e, h, length)
    checks = safety_checks(
        built, Limits(safety_factor=1.5), ResponseEnvelope(-amplitude, amplitude), substrate=AL_6061
    )
    goodman = _by_name(checks)["substrate fatigue (Goodman)"]
    assert goodman.margin == pytest.approx(n, rel=1e-12)
    assert goodman.level == level


# -- ceramic ---------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "strain, strain_level, stress_level",
    [
        (200e-6, "pass", "pass"),
        (300e-6, "pass", "warn"),
        (400e-6, "warn", "fail"),
        (600e-6, "fail", "fail"),
    ],
)
def test_ceramic_peak_tension_against_limits(strain, strain_level, stress_level):
    # Roark strain ε = 3cδ/L² at the outer fibre; σ = E ε.  Limits 500 µε and 20 MPa (common
    # practice, memory); fail above the limit, warn above limit/1.5.  With E = 61 GPa (c̄11 of
    # PZT-5A, Erturk & Inman 2011 App. E) 20 MPa is 328 µε, so the stress limit governs.
    modulus, length, c = 61e9, 0.05, 0.25e-3
    built = _built(_one_material_unimorph(modulus), curvature_factor=3.0)
    delta = strain * length**2 / (3.0 * c)
    checks = _by_name(
        safety_checks(
            built,
            Limits(safety_factor=1.5),
            ResponseEnvelope(0.0, delta),
            substrate=AL_6061,
            ceramic=PZT_LIMITS,
        )
    )
    assert checks["ceramic tensile strain"].value == pytest.approx(strain, rel=1e-12)
    assert checks["ceramic tensile strain"].margin == pytest.approx(500e-6 / strain, rel=1e-12)
    assert checks["ceramic tensile stress"].value == pytest.approx(modulus * strain, rel=1e-12)
    assert checks["ceramic tensile strain"].level == strain_level
    assert checks["ceramic tensile stress"].level == stress_level


def test_ceramic_compressed_in_one_well_is_stretched_in_the_other():
    # Both ceramic faces lie above the neutral axis (z_n = 0.25 mm, ceramic 0.3–0.5 mm), so
    # −2…−1 mm compresses the whole layer (sign convention of physics/stress.py); the mirror-image
    # well stretches its upper face, Roark's outer fibre of the 0.5 mm strip: ε = 3cδ/L² =
    # 3 × 0.25 mm × 2 mm/(50 mm)² = 600 µε (table 8.1 case 1a), above the 500 µε limit.
    built = _built(_one_material_unimorph(61e9), curvature_factor=3.0)
    checks = _by_name(
        safety_checks(
            built, Limits(), ResponseEnvelope(-2e-3, -1e-3), substrate=AL_6061, ceramic=PZT_LIMITS
        )
    )
    strain = checks["ceramic tensile strain"]
    assert strain.value == pytest.approx(600e-6, rel=1e-12)
    assert strain.level == "fail"
    assert "upper face of the ceramic (mirrored envelope)" in strain.basis


def test_ceramic_without_limits_takes_the_common_practice_defaults():
    # 500 µε and 20 MPa (common practice, memory; harvester/METHODS.md §9), named in the basis.
    bare = Material(key="pzt", name="PZT", kind="piezo", description="", values={}, sources={})
    built = _built(_one_material_unimorph(61e9), curvature_factor=3.0)
    checks = _by_name(
        safety_checks(built, Limits(), ResponseEnvelope(0.0, 1e-3), substrate=AL_6061, ceramic=bare)
    )
    assert checks["ceramic tensile strain"].limit == 500e-6
    assert checks["ceramic tensile stress"].limit == 20e6
    assert "common-practice default" in checks["ceramic tensile stress"].basis


def test_ceramic_takes_the_material_files_own_limits():
    # materials/pzt-5a.toml gives 25 MPa and 500 µε (common practice, memory: 20–30 MPa); the
    # check uses them, not the 20 MPa fallback.  Roark ε = 3cδ/L² (table 8.1 case 1a) with
    # c = 0.25 mm, δ = 1 mm, L = 50 mm: 300 µε, σ = 61 GPa × 300 µε = 18.3 MPa.
    pzt_5a = find_material("PZT-5A", "piezo")
    built = _built(_one_material_unimorph(61e9), curvature_factor=3.0)
    checks = _by_name(
        safety_checks(
            built, Limits(), ResponseEnvelope(0.0, 1e-3), substrate=AL_6061, ceramic=pzt_5a
        )
    )
    stress = checks["ceramic tensile stress"]
    assert stress.limit == pytest.approx(25e6, rel=1e-12)
    assert stress.value == pytest.approx(18.3e6, rel=1e-12)
    assert stress.margin == pytest.approx(25 / 18.3, rel=1e-12)
    assert "PZT-5A: common practice" in stress.basis


def _irregular_deflection(t):
    """Two tones and an offset: a tip motion with no simple period [m]."""
    return 2e-3 * np.sin(2 * np.pi * 21 * t) + 0.9e-3 * np.sin(2 * np.pi * 57 * t + 0.4) + 1e-3


def _irregular_velocity(t):
    return 2e-3 * 2 * np.pi * 21 * np.cos(
        2 * np.pi * 21 * t
    ) + 0.9e-3 * 2 * np.pi * 57 * np.cos(2 * np.pi * 57 * t + 0.4)


def test_ceramic_stress_takes_the_peak_voltage():
    # σ1 = c̄11 ε1 − ē31 E3 (IEEE Std 176-1987 constitutive relations; plane stress, Erturk &
    # Inman 2011, App. E): a unimorph layer (h_p = 0.2 mm, ē31 = −10.4 C/m²) with 20 V across it
    # adds |ē31| v/h_p = 1.04 MPa in the polarity that stretches it, on top of Roark's outer
    # fibre (ε = 3cδ/L² = 300 µε, σ = 61 GPa × 300 µε = 18.3 MPa, table 8.1 case 1a).  The
    # strain is the deflection's and does not change; 0 V is the short-circuit answer.
    built = _built(_one_material_unimorph(61e9), curvature_factor=3.0)
    short, zero, charged = (
        _by_name(
            safety_checks(
                built,
                Limits(),
                ResponseEnvelope(0.0, 1e-3, peak_voltage_V=volts),
                substrate=AL_6061,
                ceramic=PZT_LIMITS,
            )
        )
        for volts in (None, 0.0, 20.0)
    )
    stress = "ceramic tensile stress"
    assert short[stress].value == pytest.approx(18.3e6, rel=1e-12)
    assert zero[stress].value == short[stress].value
    assert charged[stress].value == pytest.approx(18.3e6 + 10.4 * 20.0 / 0.2e-3, rel=1e-12)
    assert charged["ceramic tensile strain"].value == short["ceramic tensile strain"].value
    assert "short-circuited" in short[stress].basis
    assert "20 V" in charged[stress].basis and "IEEE Std 176-1987" in charged[stress].basis
    with pytest.raises(ValueError, match="peak_voltage_V"):
        ResponseEnvelope(0.0, 1e-3, peak_voltage_V=-1.0)


@pytest.mark.parametrize("time_constant_periods", [0.1, 1.0, 10.0])
def test_open_circuit_swing_bounds_the_voltage_on_a_resistor(time_constant_periods):
    # C_p v̇ + v/R_l = θ ẋ (Erturk & Inman 2009, Smart Mater. Struct. 18:025009), integrated by
    # scipy's solve_ivp for an irregular x(t) from v = 0: |v| stays within the open-circuit
    # swing θ(x_max − x_min)/C_p whatever R_l C_p (the bound the ResponseEnvelope's
    # peak_voltage_V may take), and reaches more than a quarter of it (0.32–0.56 here).
    theta, capacitance, period = 3.1e-4, 27e-9, 1 / 21

    tau = time_constant_periods * period
    t = np.linspace(0.0, 0.5, 100_001)
    solution = solve_ivp(
        lambda time, v: (theta * _irregular_velocity(time) - capacitance * v / tau) / capacitance,
        (0.0, 0.5), [0.0], t_eval=t, rtol=1e-10, atol=1e-9, method="DOP853",
    )
    x = _irregular_deflection(t)
    swing = open_circuit_voltage_swing(theta, capacitance, float(x.min()), float(x.max()))
    peak = float(np.abs(solution.y[0]).max())
    assert 0.25 * swing < peak <= swing


# -- open-circuit voltage --------------------------------------------------------------------


def test_open_circuit_voltage_against_direct_integration():
    # Open circuit C_p v̇ = θ ẋ (Erturk & Inman 2009, Smart Mater. Struct. 18:025009, with
    # R_l → ∞), integrated by scipy's solve_ivp (reference library) for an irregular x(t).
    theta, capacitance = 3.1e-4, 27e-9

    t = np.linspace(0.0, 0.5, 200_001)
    solution = solve_ivp(
        lambda time, v: theta * _irregular_velocity(time) / capacitance,
        (0.0, 0.5),
        [0.0],
        t_eval=t,
        rtol=1e-11,
        atol=1e-9,
        method="DOP853",
    )
    v = solution.y[0]
    x = _irregular_deflection(t)
    swing = open_circuit_voltage_swing(theta, capacitance, float(x.min()), float(x.max()))
    assert swing == pytest.approx(float(v.max() - v.min()), rel=1e-6)
    assert swing == pytest.approx(theta * (x.max() - x.min()) / capacitance, rel=1e-14)


def _reduced_piezo(theta=2e-4, capacitance=20e-9):
    model = ReducedModel(
        mass_kg=0.01,
        damping_N_s_per_m=0.01,
        stiffness=(-40.0, 4e6),
        forcing_mass_kg=0.01,
        transducer=PiezoCircuit(coupling_N_per_V=theta, capacitance_F=capacitance),
    )
    return _as_built(model)


def test_reduced_case_gives_travel_and_voltage_only():
    # Voltage swing θ(x_max − x_min)/C_p = 2e-4 × 10e-3 / 20e-9 = 100 V (open circuit
    # C_p v̇ = θ ẋ, Erturk & Inman 2009): above a 50 V case limit (fail), and above the 60 V
    # DC ES1 limit (IEC 62368-1, memory), which the basis names.  Travel 5 mm against 4 mm:
    # margin 0.8, fail.
    built = _reduced_piezo()
    limits = Limits(safety_factor=1.5, travel="4 mm", max_voltage="50 V")
    envelope = ResponseEnvelope(-5e-3, 5e-3)
    checks = _by_name(safety_checks(built, limits, envelope))
    assert set(checks) == {"tip travel", "open-circuit voltage"}
    assert checks["tip travel"].margin == pytest.approx(0.8, rel=1e-12)
    assert checks["tip travel"].level == "fail"
    assert checks["open-circuit voltage"].value == pytest.approx(100.0, rel=1e-12)
    assert checks["open-circuit voltage"].limit == 50.0
    assert checks["open-circuit voltage"].level == "fail"
    assert "touch hazard" in checks["open-circuit voltage"].basis
    omitted = " | ".join(omitted_checks(built, limits, envelope))
    assert "substrate fatigue (Goodman)" in omitted and "magnet clearance" in omitted


def test_touch_hazard_without_a_case_limit():
    # 50 V swing against the 60 V DC ES1 limit (IEC 62368-1, memory), which stands in for a
    # missing [limits].max_voltage: margin 1.2, below the safety factor 1.5, so a warning by
    # the same rule as every strength check.
    built = _reduced_piezo()
    envelope = ResponseEnvelope(0.0, 5e-3)
    checks = _by_name(safety_checks(built, Limits(), envelope))
    assert set(checks) == {"open-circuit voltage"}
    assert checks["open-circuit voltage"].value == pytest.approx(50.0, rel=1e-12)
    assert checks["open-circuit voltage"].limit == 60.0
    assert checks["open-circuit voltage"].margin == pytest.approx(1.2, rel=1e-12)
    assert checks["open-circuit voltage"].level == "warn"
    omitted = " | ".join(omitted_checks(built, Limits(), envelope))
    assert "no [limits].travel" in omitted


def test_one_quantity_has_one_verdict():
    # the same value against the same limit gets the same level whichever limit it is: a case
    # limit of 60 V and the 60 V touch-hazard limit (IEC 62368-1, memory) at margin 1.04 and
    # 0.501 (fail below 1, warn below the safety factor, pass above: Shigley ch. 6 usage)
    built = _reduced_piezo()
    for stroke, level in ((60 / 1.04 / 1e4, "warn"), (60 / 0.501 / 1e4, "fail")):
        envelope = ResponseEnvelope(0.0, stroke)
        given = _by_name(safety_checks(built, Limits(max_voltage="60 V"), envelope))
        default = _by_name(safety_checks(built, Limits(), envelope))
        assert [c.level for c in given.values()] == [c.level for c in default.values()] == [
            level]


def test_static_envelope_sits_in_the_well():
    # Wells of m ẍ + k1 x + k3 x³ at ±sqrt(−k1/k3) (Kovacic & Brennan 2011, The Duffing
    # Equation, ch. 1): sqrt(40/4e6) = 3.162 mm; at rest the stroke, and so the open-circuit
    # swing, is zero.
    built = _reduced_piezo()
    envelope = static_envelope(built)
    assert envelope.x_min_m == envelope.x_max_m == pytest.approx(math.sqrt(40 / 4e6), rel=1e-9)
    checks = _by_name(safety_checks(built, Limits(travel="3 mm"), envelope))
    assert checks["tip travel"].level == "fail"
    assert checks["open-circuit voltage"].value == 0.0


def test_coil_beam_has_no_ceramic_checks_and_names_what_it_skips():
    # A coil's EMF Bl·ẋ needs the velocity, which the envelope does not carry; a value given by
    # the dynamics is checked against the 60 V DC ES1 limit (IEC 62368-1, memory) when the case
    # gives no [limits].max_voltage: 70 V is beyond it, a failure.
    no_yield = replace(
        AL_6061, values={k: v for k, v in AL_6061.values.items() if k != "yield_strength"}
    )
    built = _built(
        BeamDesign(0.06, 0.01, 0.4e-3, 68.9e9, 2700.0),
        transducer=CoilCircuit(flux_linkage_V_s_per_m=2.0, resistance_ohm=100.0, inductance_H=0.0),
    )
    envelope = ResponseEnvelope(-1e-3, 1e-3)
    names = [c.name for c in safety_checks(built, Limits(), envelope, substrate=no_yield)]
    assert names == ["substrate fatigue (Goodman)"]
    omitted = " | ".join(omitted_checks(built, Limits(), envelope, substrate=no_yield))
    for skipped in (
        "substrate yield (Langer)",
        "ceramic tensile strain",
        "magnet clearance",
        "open-circuit voltage",
    ):
        assert skipped in omitted
    given = ResponseEnvelope(-1e-3, 1e-3, peak_open_circuit_voltage_V=70.0)
    touch = _by_name(safety_checks(built, Limits(), given, substrate=no_yield))
    assert touch["open-circuit voltage"].level == "fail"
    assert touch["open-circuit voltage"].margin == pytest.approx(60 / 70)


def test_beam_design_needs_its_materials():
    piezo = _built(_one_material_unimorph(61e9))
    with pytest.raises(ValueError, match="substrate"):
        safety_checks(piezo, Limits(), ResponseEnvelope(0.0, 1e-3))
    with pytest.raises(ValueError, match="ceramic"):
        safety_checks(piezo, Limits(), ResponseEnvelope(0.0, 1e-3), substrate=AL_6061)


def test_envelope_rejects_reversed_extremes():
    with pytest.raises(ValueError, match="exceeds"):
        ResponseEnvelope(2e-3, 1e-3)


# -- magnet clearance (real harvester.physics.magnets.clearance) ------------------------------


def _clearance_closed_form(x, slope, axial, half_height, gap):
    # Plane geometry: the tip block (inner face at the tip, deflected by x, turned by ψ = s·x)
    # has its corner (axial, −half height) at e1 = a cos ψ + h sin ψ; while that corner faces
    # the fixed block's flat face at e1 = a + g, the clearance is a + g − a cos ψ − h sin ψ.
    psi = slope * x
    return gap + axial * (1.0 - math.cos(psi)) - half_height * math.sin(psi)


@pytest.mark.parametrize(
    "x_min, x_max, level",
    [
        (0.0, 1.5e-3, "pass"),
        (-1e-3, 2.1e-3, "warn"),
        (-2.1e-3, 1e-3, "warn"),  # the mirror image: the same clearance
        (0.0, 2.6e-3, "fail"),
    ],
)
def test_magnet_clearance_over_the_stroke(x_min, x_max, level):
    # Tip block 5 × 10 × 10 mm facing a 5 × 10 × 20 mm block across 1 mm, slope 100 /m: the
    # turning corner closes the gap as |x| grows (the clearance is even in x).  Closed form
    # (above): 0.309 mm at 1.5 mm (pass), 0.068 mm at 2.1 mm (< 10 % of the gap: warn); at 2.6 mm
    # the corner would sit −0.117 mm inside the fixed block (touching: fail).
    tip = Block(axial_m=5e-3, width_m=10e-3, deflection_m=10e-3, remanence_T=1.3)
    fixed = Block(axial_m=5e-3, width_m=10e-3, deflection_m=20e-3, remanence_T=1.3)
    gap, slope = 1e-3, 100.0
    built = _built(
        BeamDesign(0.05, 0.01, 0.4e-3, 68.9e9, 2700.0), slope=slope, tip=tip, fixed=fixed, gap=gap
    )
    checks = _by_name(
        safety_checks(built, Limits(), ResponseEnvelope(x_min, x_max), substrate=AL_6061)
    )
    clearance = checks["magnet clearance"]
    assert clearance.level == level
    assert clearance.limit == pytest.approx(CLEARANCE_WARNING_FRACTION * gap, rel=1e-15)
    expected = _clearance_closed_form(max(abs(x_min), abs(x_max)), slope, 5e-3, 5e-3, gap)
    if expected > 0.0:
        assert clearance.value == pytest.approx(expected, rel=1e-9)
    else:
        assert clearance.value <= 0.0


# -- governing check -------------------------------------------------------------------------


def test_worst_margin_ranks_level_before_margin():
    checks = [
        Check("a", 1.0, 2.0, "Pa", 2.0, "pass", "-"),
        Check("b", 1.0, 0.1, "m", 0.4, "warn", "-"),
        Check("c", 1.0, 0.9, "Pa", 0.9, "fail", "-"),
        Check("d", 1.0, 0.5, "V", 0.5, "fail", "-"),
    ]
    assert worst_margin(checks).name == "d"
    assert worst_margin(checks[:2]).name == "b"
    with pytest.raises(ValueError):
        worst_margin([])


def test_reaching_the_travel_limit_is_a_strike_on_the_stop():
    # a deflection equal to the travel limit means the tip strikes its stop: margin exactly 1
    # would read as a near miss, but it is a failure (definition of [limits].travel)
    built = _reduced_piezo()
    at_stop = _by_name(safety_checks(built, Limits(travel="5 mm"), ResponseEnvelope(-5e-3, 5e-3)))[
        "tip travel"
    ]
    assert at_stop.margin == pytest.approx(1.0, rel=1e-12) and at_stop.level == "fail"
    short = _by_name(
        safety_checks(
            built, Limits(travel="5 mm", safety_factor=1.5), ResponseEnvelope(-4e-3, 4e-3)
        )
    )["tip travel"]
    assert short.level == "warn"  # margin 1.25 < 1.5


# -- tip travel of the tip body -------------------------------------------------------------


def _tip_corner_reach(x, slope, axial, half_height):
    # Plane geometry: the tip magnet's section (inner face centred on the tip, turned by
    # ψ = s·x) has its outer far corner at e3 = x + a sin ψ + h cos ψ for x > 0.
    psi = slope * x
    return x + axial * math.sin(psi) + half_height * math.cos(psi)


def test_travel_is_how_far_the_outer_corner_of_the_tip_magnet_moves():
    # Tip block 5 × 8 × 3 mm, slope 25 /m, stroke 2.7…5.6 mm: the outer corner reaches
    # 5.6 + 5 sin 0.14 + 1.5 cos 0.14 = 7.783 mm (closed form above) from the axis, having
    # moved 7.783 − 1.5 = 6.283 mm from its place at rest: past a 6 mm limit that the beam tip
    # alone (5.6 mm) would clear.  The mirror image moves as far.
    tip = Block(axial_m=5e-3, width_m=8e-3, deflection_m=3e-3, remanence_T=1.2)
    built = _built(BeamDesign(0.06, 0.01, 0.3e-3, 110e9, 8530.0), slope=25.0, tip=tip)
    expected = _tip_corner_reach(5.6e-3, 25.0, 5e-3, 1.5e-3) - 1.5e-3
    for envelope in (ResponseEnvelope(2.7e-3, 5.6e-3), ResponseEnvelope(-5.6e-3, -2.7e-3)):
        travel = _by_name(safety_checks(built, Limits(travel="6 mm"), envelope, substrate=AL_6061))[
            "tip travel"
        ]
        assert travel.value == pytest.approx(expected, rel=1e-12)
        assert travel.margin == pytest.approx(6e-3 / expected, rel=1e-12)
        assert travel.level == "fail"
        assert "outer corner" in travel.basis


@pytest.mark.parametrize(
    "magnet, axial, half_height",
    [
        (Block(axial_m=5e-3, width_m=8e-3, deflection_m=3e-3, remanence_T=1.2), 5e-3, 1.5e-3),
        (Disc(diameter_m=6e-3, length_m=4e-3, remanence_T=1.2), 4e-3, 3e-3),
    ],
)
def test_tip_body_reach_against_plane_geometry(magnet, axial, half_height):
    # closed form above; the section of a disc in the bending plane is length × diameter
    x = np.array([-4e-3, 0.0, 1e-3, 4e-3])
    reach = tip_body_reach(x, magnet, 30.0)
    expected = [_tip_corner_reach(abs(v), 30.0, axial, half_height) for v in x]
    np.testing.assert_allclose(reach, expected, rtol=1e-12)
    np.testing.assert_allclose(tip_body_travel(x, magnet, 30.0),
                               np.array(expected) - half_height, rtol=1e-12, atol=1e-18)


# -- wording of the Goodman check -----------------------------------------------------------


def test_goodman_basis_names_its_assumptions_and_rounds_a_vanishing_mean():
    # Fully reversed bending, n = Se/σa (Shigley's MED, 9th ed., §6–12), with a mean of 1e-9 of
    # the amplitude: printed as σm = 0.  Se is the specimen value (no Marin factors, Shigley
    # ch. 6); the stresses are narrow-beam, a wide strip being up to 1/(1 − ν²) higher
    # (Timoshenko & Woinowsky-Krieger 1959, Theory of Plates and Shells, ch. 1).
    e, h, length = 68.9e9, 0.5e-3, 0.08
    built = _built(BeamDesign(length, 0.01, h, e, 2700.0), curvature_factor=3.0)
    delta = 1e-3
    goodman = _by_name(
        safety_checks(
            built, Limits(), ResponseEnvelope(-delta, delta * (1 + 2e-9)), substrate=AL_6061
        )
    )["substrate fatigue (Goodman)"]
    sigma_a = _stress_per_deflection(e, h, length) * delta
    assert goodman.margin == pytest.approx(96.5e6 / sigma_a, rel=1e-6)
    assert "σm = 0 MPa" in goodman.basis
    assert "no Marin" in goodman.basis and "1/(1 − ν²)" in goodman.basis
    preloaded = _by_name(
        safety_checks(built, Limits(), ResponseEnvelope(0.0, 2 * delta), substrate=AL_6061)
    )["substrate fatigue (Goodman)"]
    assert f"σm = {sigma_a / 1e6:.3g} MPa" in preloaded.basis


def test_goodman_points_out_fatigue_data_that_a_year_outlives():
    # 6061-T6 data at 5e8 cycles (ASM Handbook Vol. 2, 1990): at 20 cycles/s that is
    # 5e8/20/86400 = 289 days, less than a year; at 10 cycles/s, 579 days.  Aluminium has no
    # endurance limit (Shigley ch. 6), so the shorter life is pointed out.
    built = _built(BeamDesign(0.08, 0.01, 0.5e-3, 68.9e9, 2700.0), curvature_factor=3.0)
    for rate, days, short in ((20.0, 289, True), (10.0, 579, False)):
        envelope = ResponseEnvelope(-1e-3, 1e-3, cycles_per_second=rate)
        goodman = _by_name(safety_checks(built, Limits(), envelope, substrate=AL_6061))[
            "substrate fatigue (Goodman)"]
        assert f"≈ {days} days" in goodman.basis
        assert ("less than a year" in goodman.basis) is short
