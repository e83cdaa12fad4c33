"""Bending stress at the clamped root of a layered cantilever, and the fatigue margins on it.

Sign convention: a positive tip deflection x bends the beam so that fibres above the neutral
axis (z > z_n) are in tension; the root curvature is κ = K x/L² with K = φ''(0)L²/φ(L) > 0
(3 for the static shape, λ1² ≈ 3.52 for the bare beam's first mode).  For a unimorph this
means positive x points away from the ceramic.  Heights z are measured from the substrate's
bottom face, as in `harvester.physics.beam`.

Narrow-beam assumption: σ = E (z − z_n) κ is the Euler–Bernoulli beam stress, free to
contract across the width.  A wide strip in cylindrical bending cannot, and its stresses rise
by up to 1/(1 − ν²) ≈ 1.1 (ν ≈ 0.3) for the same curvature (Timoshenko & Woinowsky-Krieger
1959, *Theory of Plates and Shells*, 2nd ed., ch. 1).  The ceramic uses the plane-stress c̄11
either way.

A ceramic with a voltage v across its electrodes carries σ1 = c̄11 ε1 − ē31 E3 on top of the
strain (`ceramic_layer_stresses`).  Sign convention for v: positive in the polarity that a
positive tip deflection produces in open circuit (θ > 0 in `harvester.physics.beam`), so that
in open circuit the field adds to the stress of every layer in the sense of its strain.

Everything else takes plain floats or numpy arrays (one entry per layer, fibre or sample).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from harvester.physics.beam import BeamDesign, BeamProperties, section_layers

# Fallbacks for a ceramic whose material record gives no limits of its own (the records in
# materials/ do, with their sources).  Common practice for poled PZT (memory; see
# harvester/METHODS.md §9): peak tensile strain below ~500 µε, dynamic tensile stress below
# ~20–30 MPa; the fallback takes the lower, conservative end.
CERAMIC_STRAIN_LIMIT = 500e-6
CERAMIC_STRESS_LIMIT_PA = 20e6


def bending_strain(z_m, neutral_axis_m, curvature_per_m):
    """Axial bending strain of a fibre:  ε = (z − z_n) κ  [-] (tension positive).

    Parameters
    ----------
    z_m : fibre height from the substrate's bottom face [m]
    neutral_axis_m : neutral-axis height z_n [m]
    curvature_per_m : bending curvature κ [1/m]

    References
    ----------
    Gere & Goodno (2009), *Mechanics of Materials*, 7th ed., Cengage, §5.4 (longitudinal strains).

    Examples
    --------
    >>> round(float(bending_strain(1e-3, 0.5e-3, 2.0)), 12)
    0.001
    """
    return (np.asarray(z_m, dtype=float) - neutral_axis_m) * curvature_per_m


def bending_stress(modulus_Pa, z_m, neutral_axis_m, curvature_per_m):
    """Axial bending stress of a fibre in a layered beam:  σ = E (z − z_n) κ  [Pa].

    Parameters
    ----------
    modulus_Pa : modulus of the fibre's layer E (plane-stress c̄11 for ceramic) [Pa]
    z_m : fibre height from the substrate's bottom face [m]
    neutral_axis_m : neutral-axis height z_n [m]
    curvature_per_m : bending curvature κ [1/m]

    References
    ----------
    Gere & Goodno (2009), *Mechanics of Materials*, 7th ed., Cengage, §6.2 (composite beams).
    """
    return np.asarray(modulus_Pa, dtype=float) * bending_strain(
        z_m, neutral_axis_m, curvature_per_m
    )


def outer_fibre_strains(bottom_m, top_m, neutral_axis_m, root_curvature_per_deflection_per_m2):
    """Root strain of each layer's bottom and top face per metre of tip deflection [1/m].

        ε_face / x = (z_face − z_n) K/L²

    Parameters
    ----------
    bottom_m, top_m : heights of the layers' faces [m] (floats or arrays over layers)
    neutral_axis_m : neutral-axis height z_n [m]
    root_curvature_per_deflection_per_m2 : φ''(0)/φ(L) = K/L² [1/m²]

    Returns
    -------
    (strain at the bottom faces, strain at the top faces) per unit tip deflection [1/m];
    for x > 0 the face above the neutral axis is the tension face.
    """
    kappa = root_curvature_per_deflection_per_m2
    return (
        bending_strain(bottom_m, neutral_axis_m, kappa),
        bending_strain(top_m, neutral_axis_m, kappa),
    )


def outer_fibre_stresses(
    modulus_Pa, bottom_m, top_m, neutral_axis_m, root_curvature_per_deflection_per_m2
):
    """Root stress of each layer's bottom and top face per metre of tip deflection [Pa/m].

        σ_face / x = E (z_face − z_n) K/L²

    Multiply by a signed tip deflection for the stress; for x > 0 the face above the neutral
    axis is in tension and the one below in compression, for x < 0 the other way round.

    Parameters
    ----------
    modulus_Pa : layer moduli [Pa] (floats or arrays over layers)
    bottom_m, top_m : heights of the layers' faces [m]
    neutral_axis_m : neutral-axis height z_n [m]
    root_curvature_per_deflection_per_m2 : φ''(0)/φ(L) = K/L² [1/m²]

    Returns
    -------
    (stress at the bottom faces, stress at the top faces) per unit tip deflection [Pa/m]

    References
    ----------
    Erturk & Inman (2011), *Piezoelectric Energy Harvesting*, Wiley, ch. 3 (axial strain of a
    layered Euler–Bernoulli beam).
    """
    bottom, top = outer_fibre_strains(
        bottom_m, top_m, neutral_axis_m, root_curvature_per_deflection_per_m2
    )
    modulus = np.asarray(modulus_Pa, dtype=float)
    return modulus * bottom, modulus * top


def ceramic_field_per_volt(design: BeamDesign, neutral_axis_m: float) -> np.ndarray:
    """Field E3 along each ceramic layer's poling per volt across the electrodes  [1/m],
    bottom layer first.

        |E3| = v/h_p (unimorph, bimorph in parallel),  v/(2h_p) (bimorph in series)

    A series bimorph has its layers poled oppositely and the voltage split between them; a
    parallel one has them poled alike with the voltage across each.  Either way, with v > 0 in
    the polarity that a positive tip deflection produces in open circuit, the layer above the
    neutral axis (stretched) sees E3 = −sgn(ē31) |E3| along its poling and the layer below it
    the opposite: the field that D3 = 0 calls for in each.

    Parameters
    ----------
    design : the beam [SI] (ceramic layers, thickness h_p, wiring, ē31)
    neutral_axis_m : z_n from the substrate's bottom face [m]

    References
    ----------
    Erturk & Inman (2009), Smart Mater. Struct. 18:025009 (series and parallel bimorphs).
    """
    ceramics = [lay for lay in section_layers(design) if lay.name == "piezo"]
    across = design.piezo_thickness_m
    if design.piezo_layers == 2 and design.piezo_wiring == "series":
        across *= 2.0
    stretched = np.array([0.5 * (lay.bottom_m + lay.top_m) > neutral_axis_m for lay in ceramics])
    return np.where(stretched, -1.0, 1.0) * np.sign(design.piezo_e31_C_per_m2) / across


def ceramic_layer_stresses(tip_deflection_m, voltage_V, design: BeamDesign,
                           props: BeamProperties) -> tuple[np.ndarray, np.ndarray]:
    """Root stress at the lower and upper face of each ceramic layer for a tip deflection and
    a voltage across the electrodes  [Pa]:

        σ1 = c̄11 (z − z_n) K x/L² − ē31 E3,   E3 = v · `ceramic_field_per_volt`

    (plane stress, σ2 = σ3 = 0, with c̄11 = 1/s11E and ē31 = d31/s11E).  The strain is the
    beam's (a given tip deflection fixes the curvature); the voltage adds a stress that is
    uniform through each layer.  With v = 0 (short circuit) this is `outer_fibre_stresses`
    times x.  In open circuit a uniformly strained layer has D3 = ē31 ε1 + ε̄33S E3 = 0, so
    σ1 = c̄11 ε1/(1 − k31²), k31² = d31²/(s11E ε33T): 13 % more for PZT-5A (k31² = 0.118).

    Parameters
    ----------
    tip_deflection_m : x [m] (float or array)
    voltage_V : v [V], positive in the polarity a positive deflection gives in open circuit
        (float or array, broadcast against x)
    design : the beam [SI]
    props : its derived properties (neutral axis, root curvature per deflection)

    Returns
    -------
    (stress at the lower faces, stress at the upper faces), each of shape
    broadcast(x, v).shape + (ceramic layers,), bottom layer first [Pa]

    References
    ----------
    IEEE Std 176-1987, *IEEE Standard on Piezoelectricity* (constitutive relations).
    Erturk & Inman (2011), *Piezoelectric Energy Harvesting*, Wiley, App. E (plane stress).
    """
    ceramics = [lay for lay in section_layers(design) if lay.name == "piezo"]
    if not ceramics:
        raise ValueError("the beam carries no ceramic layer")
    bottoms = np.array([lay.bottom_m for lay in ceramics])
    tops = np.array([lay.top_m for lay in ceramics])
    per_deflection = outer_fibre_stresses(
        design.piezo_modulus_Pa, bottoms, tops, props.neutral_axis_m,
        props.root_curvature_per_deflection_per_m2,
    )
    x = np.asarray(tip_deflection_m, dtype=float)[..., None]
    field = np.asarray(voltage_V, dtype=float)[..., None] * ceramic_field_per_volt(
        design, props.neutral_axis_m
    )
    piezo = design.piezo_e31_C_per_m2 * field
    return per_deflection[0] * x - piezo, per_deflection[1] * x - piezo


def homogeneous_root_stress(modulus_Pa, thickness_m, tip_deflection_m, length_m):
    """Outer-fibre root stress of a homogeneous cantilever under an end load:  σ = 3Ecδ/L² [Pa].

    c = h/2 is the distance from the neutral axis to the outer fibre; the formula follows
    from M = PL and δ = PL³/(3EI).

    Parameters
    ----------
    modulus_Pa : Young's modulus E [Pa]
    thickness_m : beam thickness h [m]
    tip_deflection_m : tip deflection δ [m]
    length_m : cantilever length L [m]

    References
    ----------
    Young & Budynas (2002), *Roark's Formulas for Stress and Strain*, 7th ed., McGraw-Hill,
    table 8.1 case 1a (cantilever, end load).

    Examples
    --------
    >>> round(homogeneous_root_stress(200e9, 1e-3, 1e-3, 0.1) / 1e6, 6)
    30.0
    """
    return 3.0 * modulus_Pa * 0.5 * thickness_m * tip_deflection_m / length_m**2


def fibre_stress_extremes(stress_per_deflection_Pa_per_m, deflection_min_m, deflection_max_m):
    """Lowest and highest stress of a fibre while the tip moves between two deflections [Pa].

    The fibre stress is linear in the tip deflection, so the extremes sit at the ends of the
    travel: σ_min, σ_max = sorted(s·x_min, s·x_max).

    Parameters
    ----------
    stress_per_deflection_Pa_per_m : s, from `outer_fibre_stresses` [Pa/m]
    deflection_min_m, deflection_max_m : ends of the tip travel [m]

    Returns
    -------
    (σ_min, σ_max) [Pa]
    """
    s = np.asarray(stress_per_deflection_Pa_per_m, dtype=float)
    at_min, at_max = s * deflection_min_m, s * deflection_max_m
    return np.minimum(at_min, at_max), np.maximum(at_min, at_max)


def mean_and_alternating(stress_min_Pa, stress_max_Pa):
    """Midrange and amplitude of a stress cycle:  σ_m = (σ_max + σ_min)/2, σ_a = |σ_max − σ_min|/2.

    Parameters
    ----------
    stress_min_Pa, stress_max_Pa : extremes of the cycle [Pa]

    Returns
    -------
    (σ_m, σ_a) [Pa]

    References
    ----------
    Budynas & Nisbett (2011), *Shigley's Mechanical Engineering Design*, 9th ed., ch. 6
    (midrange and amplitude components; eq. 6–36, number from memory).
    """
    lo = np.asarray(stress_min_Pa, dtype=float)
    hi = np.asarray(stress_max_Pa, dtype=float)
    return 0.5 * (hi + lo), 0.5 * np.abs(hi - lo)


def goodman_safety_factor(alternating_Pa, mean_Pa, endurance_Pa, ultimate_Pa):
    """Fatigue safety factor on the modified Goodman line.

        σ_m ≥ 0:  σ_a/S_e + σ_m/S_ut = 1/n
        σ_m < 0:  n = S_e/σ_a      (a compressive mean does not lower the fatigue strength)

    A cycle with no alternating part and no tensile mean has n = inf.  Check first-cycle
    yield separately (`langer_yield_factor`).  For non-ferrous metals, which have no
    endurance limit, pass the fatigue strength at the design life (10⁷–10⁸ cycles) as S_e.

    Parameters
    ----------
    alternating_Pa : stress amplitude σ_a ≥ 0 [Pa]
    mean_Pa : midrange stress σ_m [Pa], tension positive
    endurance_Pa : endurance limit or fatigue strength S_e at the design life [Pa]; the caller
        decides whether it carries Marin surface, size and reliability factors (Shigley ch. 6)
    ultimate_Pa : ultimate tensile strength S_ut [Pa]

    Returns
    -------
    n [-], float or array

    References
    ----------
    Budynas & Nisbett (2011), *Shigley's Mechanical Engineering Design*, 9th ed., §6–12:
    modified Goodman line (eq. 6–46, number from memory); p. 305 (compressive midrange: failure
    when σ_a = S_e).

    Examples
    --------
    >>> round(float(goodman_safety_factor(100e6, 0.0, 200e6, 400e6)), 12)
    2.0
    """
    sigma_a = np.asarray(alternating_Pa, dtype=float)
    sigma_m = np.asarray(mean_Pa, dtype=float)
    usage = sigma_a / endurance_Pa + np.maximum(sigma_m, 0.0) / ultimate_Pa
    with np.errstate(divide="ignore"):
        n = np.where(usage > 0.0, 1.0 / np.where(usage > 0.0, usage, 1.0), np.inf)
    return n if n.ndim else float(n)


def langer_yield_factor(alternating_Pa, mean_Pa, yield_Pa):
    """First-cycle yield safety factor (Langer line):  n_y = S_y/(σ_a + |σ_m|).

    Parameters
    ----------
    alternating_Pa : stress amplitude σ_a [Pa]
    mean_Pa : midrange stress σ_m [Pa]
    yield_Pa : yield strength S_y (S_yc for a compressive peak) [Pa]

    References
    ----------
    Budynas & Nisbett (2011), *Shigley's Mechanical Engineering Design*, 9th ed., §6–12 (Langer
    line; eq. 6–49, number from memory).

    Examples
    --------
    >>> round(float(langer_yield_factor(40e6, -60e6, 276e6)), 12)  # peak 100 MPa, 6061-T6
    2.76
    """
    peak = np.asarray(alternating_Pa, dtype=float) + np.abs(np.asarray(mean_Pa, dtype=float))
    with np.errstate(divide="ignore"):
        n = np.where(peak > 0.0, yield_Pa / np.where(peak > 0.0, peak, 1.0), np.inf)
    return n if n.ndim else float(n)


@dataclass(frozen=True)
class CeramicCheck:
    """Peak tensile loading of the piezoceramic against its limits."""

    peak_tensile_strain: float  # [-]
    peak_tensile_stress_Pa: float
    strain_limit: float  # [-]
    stress_limit_Pa: float
    strain_utilisation: float  # peak/limit [-]
    stress_utilisation: float  # peak/limit [-]
    passes: bool  # both utilisations ≤ 1


def ceramic_check(
    peak_tensile_strain: float,
    peak_tensile_stress_Pa: float,
    strain_limit: float = CERAMIC_STRAIN_LIMIT,
    stress_limit_Pa: float = CERAMIC_STRESS_LIMIT_PA,
) -> CeramicCheck:
    """Compare the ceramic's peak tensile strain and stress with depoling/cracking limits.

    PZT is weak in tension and fatigues by microcracking; compressive peaks are not checked
    here (the ceramic tolerates an order of magnitude more in compression).  Negative peaks
    (the fibre never goes into tension) count as zero utilisation.

    Parameters
    ----------
    peak_tensile_strain : largest tensile strain over the cycle in any ceramic fibre [-]
    peak_tensile_stress_Pa : largest tensile stress over the cycle in any ceramic fibre [Pa]
    strain_limit : allowable tensile strain [-]; default `CERAMIC_STRAIN_LIMIT`, 500 µε
        (common practice, memory); pass the material's own value when it gives one
    stress_limit_Pa : allowable dynamic tensile stress [Pa]; default `CERAMIC_STRESS_LIMIT_PA`,
        20 MPa (lower end of the common-practice 20–30 MPa, memory); pass the material's own
        value when it gives one

    Returns
    -------
    CeramicCheck

    Examples
    --------
    >>> ceramic_check(250e-6, 30e6).passes
    False
    """
    strain_use = max(peak_tensile_strain, 0.0) / strain_limit
    stress_use = max(peak_tensile_stress_Pa, 0.0) / stress_limit_Pa
    return CeramicCheck(
        peak_tensile_strain=float(peak_tensile_strain),
        peak_tensile_stress_Pa=float(peak_tensile_stress_Pa),
        strain_limit=float(strain_limit),
        stress_limit_Pa=float(stress_limit_Pa),
        strain_utilisation=float(strain_use),
        stress_utilisation=float(stress_use),
        passes=bool(strain_use <= 1.0 and stress_use <= 1.0),
    )
