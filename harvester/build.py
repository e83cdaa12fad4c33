"""From a validated case to the reduced model: beam + magnets → restoring force → k1, k3, …

The exact restoring force F(x) = k_b x + dU_mag/dx is tabulated over the tip travel and fitted
with odd powers.  k1 is not fitted: it is the exact small-deflection stiffness
k_b + d²U_mag/dx²(0), so the regime (and the critical gap) agree with the physics; the higher
terms are least-squares fitted over ±1.8 wells (or the travel) and the fit error is reported.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from harvester.case.load import LoadedCase
from harvester.case.schema import Case, TipMagnet
from harvester.errors import CaseError
from harvester.materials import find_material
from harvester.model import CoilCircuit, PiezoCircuit, ReducedModel
from harvester.physics import magnets as mag
from harvester.physics.beam import BeamDesign, BeamProperties, beam_properties

FIT_SPAN_WELLS = 1.8  # fit window, in well positions: interwell orbits reach ~1.5 wells
MAX_FIT_TERMS = 4  # k1 … k7
FIT_TOLERANCE = 0.01  # RMS fit error over the window, relative to max |F| there
GRID_POINTS = 241


@dataclass(frozen=True)
class ForceFit:
    """How well the odd polynomial reproduces the exact restoring-force table."""

    window_m: float  # fitted over −window … +window
    rms_error: float  # relative to max |F| in the window
    max_error: float  # relative to max |F| in the window
    x_m: np.ndarray  # the table
    force_N: np.ndarray  # exact restoring force (beam + magnets)


@dataclass(frozen=True)
class Built:
    """The reduced model of a geometry case with everything derived on the way."""

    model: ReducedModel
    beam: BeamProperties | None
    beam_design: BeamDesign | None
    tip: mag.Block | mag.Disc | None
    fixed: mag.Block | mag.Disc | None
    gap_m: float | None
    fit: ForceFit | None
    critical_gap_m: float | None
    magnet_model: str


# --- case → physics inputs ---------------------------------------------------------------------
def magnet_shape(spec: TipMagnet) -> mag.Block | mag.Disc:
    remanence = find_material(spec.material, "magnet").get("remanence")
    if spec.block is not None:
        axial, width, deflection = spec.block
        return mag.Block(axial_m=axial, width_m=width, deflection_m=deflection,
                         remanence_T=remanence)
    return mag.Disc(diameter_m=spec.disc.diameter, length_m=spec.disc.length,
                    remanence_T=remanence)


def tip_inertia(spec: TipMagnet, shape: mag.Block | mag.Disc) -> tuple[float, float, float]:
    """The tip magnet and its mount as one rigid body: mass, centre offset, own rotary inertia.

        M = M_m + M_x,   e = M_m a/(2M),
        I_c = I_m + M_m (a/2 − e)² + M_x e²      (parallel-axis theorem)

    The magnet (mass M_m, axial length a, inertia I_m about its own centre for rotation in the
    bending plane) sits with its inner face on the beam tip, so its centre is a/2 beyond it;
    the extra mass M_x (mount, glue) is a point at the tip itself.

    Parameters
    ----------
    spec : the case's tip magnet (material, shape, extra mass)
    shape : its geometry [m]

    Returns
    -------
    (M [kg], e [m] beyond the tip along the axis, I_c [kg·m²] about the body's own centre)

    References
    ----------
    Meriam & Kraige (2012), *Engineering Mechanics: Dynamics*, 7th ed., Wiley, appendix B
    (block and cylinder moments of inertia, parallel-axis theorem; memory).
    """
    density = find_material(spec.material, "magnet").get("density")
    magnet_mass = density * mag.magnet_volume(shape)
    if isinstance(shape, mag.Block):
        half = shape.axial_m / 2
        own = magnet_mass * (shape.axial_m**2 + shape.deflection_m**2) / 12
    else:
        half = shape.length_m / 2
        own = magnet_mass * (3 * (shape.diameter_m / 2) ** 2 + shape.length_m**2) / 12
    mass = magnet_mass + spec.extra_mass
    offset = magnet_mass * half / mass
    inertia = own + magnet_mass * (half - offset) ** 2 + spec.extra_mass * offset**2
    return mass, offset, inertia


def beam_design(case: Case) -> BeamDesign:
    beam = case.beam
    substrate = find_material(beam.substrate.material, "substrate")
    tip_mass, tip_offset, tip_rotary = tip_inertia(case.tip_magnet, magnet_shape(case.tip_magnet))
    piezo = {}
    if beam.piezo is not None:
        ceramic = find_material(beam.piezo.material, "piezo")
        piezo = dict(
            piezo_layers=beam.piezo.layers,
            piezo_thickness_m=beam.piezo.thickness,
            piezo_modulus_Pa=ceramic.youngs_modulus_Pa,
            piezo_density_kg_m3=ceramic.get("density"),
            piezo_e31_C_per_m2=ceramic.e31_C_per_m2,
            piezo_permittivity_F_per_m=ceramic.permittivity_S_F_per_m,
            piezo_wiring=beam.piezo.wiring,
        )
    return BeamDesign(
        length_m=beam.length,
        width_m=beam.width,
        substrate_thickness_m=beam.substrate.thickness,
        substrate_modulus_Pa=substrate.youngs_modulus_Pa,
        substrate_density_kg_m3=substrate.get("density"),
        tip_mass_kg=tip_mass,
        tip_rotary_inertia_kg_m2=tip_rotary,
        tip_mass_offset_m=tip_offset,
        **piezo,
    )


# --- restoring force ---------------------------------------------------------------------------
def fit_odd_polynomial(x: np.ndarray, force: np.ndarray, k1: float) -> tuple[tuple[float, ...],
                                                                               float, float]:
    """Least-squares k3, k5, … of F(x) − k1 x over the table, fewest terms within tolerance.

    Returns (stiffness, rms_error, max_error), errors relative to max |F| on the table.
    """
    scale = float(np.max(np.abs(x)))
    u = x / scale
    residual = force - k1 * x
    norm = float(np.max(np.abs(force))) or 1.0
    best = None
    for terms in range(2, MAX_FIT_TERMS + 1):
        basis = np.stack([u ** (2 * j + 1) for j in range(1, terms)], axis=1)
        coef, *_ = np.linalg.lstsq(basis, residual, rcond=None)
        error = residual - basis @ coef
        rms = float(np.sqrt(np.mean(error**2))) / norm
        worst = float(np.max(np.abs(error))) / norm
        stiffness = (k1, *(c / scale ** (2 * j + 1) for j, c in enumerate(coef, start=1)))
        best = (tuple(float(k) for k in stiffness), rms, worst)
        if rms <= FIT_TOLERANCE and stiffness[-1] > 0.0:
            break
    return best


def _magnet_kwargs(built_tip, built_fixed, gap_m, slope, model):
    return dict(tip=built_tip, fixed=built_fixed, gap_m=gap_m,
                slope_per_deflection_per_m=slope, model=model)


def restoring_force(x, beam_stiffness, tip, fixed, gap_m, slope, magnet_model):
    """Total restoring force on the tip [N]: beam k_b x minus the magnet force (repulsion)."""
    return beam_stiffness * x - mag.magnet_force(x, **_magnet_kwargs(tip, fixed, gap_m, slope,
                                                                     magnet_model))


def critical_gap(beam_stiffness: float, tip, fixed, slope: float,
                 magnet_model: str = "exact") -> float:
    """Face-to-face gap [m] below which the straight beam loses stability.

    The rest position is unstable when k_b + d²U_mag/dx²(0) < 0 (a pitchfork).  The magnets'
    negative stiffness weakens as the gap opens, so the root is bracketed between a
    near-contact gap (10 µm) and a gap where the magnets are negligible; when even the
    near-contact stiffness cannot beat the beam the answer is 0 (never bistable).
    """
    def margin(gap: float) -> float:
        return beam_stiffness + mag.magnet_stiffness_at_rest(
            **_magnet_kwargs(tip, fixed, gap, slope, magnet_model))

    from scipy.optimize import brentq

    low, high = 1e-5, 1e-3
    while margin(high) < 0.0 and high < 2.0:
        high *= 2.0
    if margin(low) > 0.0:
        return 0.0  # the beam is stiffer than the magnets at any gap
    return float(brentq(margin, low, high, xtol=1e-9, rtol=1e-9))


def build(loaded: LoadedCase, gap_m: float | None = None, magnet_model: str = "exact") -> Built:
    """The reduced model of a case, at the case's gap or at `gap_m` [m]."""
    case = loaded.case
    if case.reduced is not None:
        return Built(model=_reduced_model(case), beam=None, beam_design=None, tip=None,
                     fixed=None, gap_m=None, fit=None, critical_gap_m=None,
                     magnet_model=magnet_model)
    design = beam_design(case)
    props = beam_properties(design)
    k_beam = props.tip_stiffness_N_per_m
    m = props.effective_mass_kg
    damping = 2.0 * case.losses.damping_ratio * math.sqrt(k_beam * m)
    travel = case.limits.travel if case.limits.travel is not None else math.inf
    transducer, load = _transducer(case, props)
    tip = magnet_shape(case.tip_magnet)
    fixed = magnet_shape(case.fixed_magnet) if case.fixed_magnet is not None else None
    common = dict(mass_kg=m, damping_N_s_per_m=damping, forcing_mass_kg=props.forcing_mass_kg,
                  transducer=transducer, load_ohm=load, travel_limit_m=travel,
                  linear_stiffness_N_per_m=k_beam)
    if fixed is None:
        return Built(model=ReducedModel(stiffness=(k_beam,), **common), beam=props,
                     beam_design=design, tip=tip, fixed=None, gap_m=None, fit=None,
                     critical_gap_m=None, magnet_model=magnet_model)
    gap = case.fixed_magnet.gap if gap_m is None else gap_m
    if not gap > 0.0:
        raise CaseError(f"gap {gap * 1e3:g} mm: the magnets would touch or overlap; the gap is "
                        "face to face at rest and must be > 0", key="fixed_magnet.gap")
    slope = props.slope_per_deflection_per_m
    k1 = k_beam + mag.magnet_stiffness_at_rest(**_magnet_kwargs(tip, fixed, gap, slope,
                                                                 magnet_model))
    window = _fit_window(design.length_m, k_beam, tip, fixed, gap, slope, magnet_model, k1)
    x = np.linspace(-window, window, GRID_POINTS)
    force = restoring_force(x, k_beam, tip, fixed, gap, slope, magnet_model)
    stiffness, rms, worst = fit_odd_polynomial(x, force, k1)
    model = ReducedModel(stiffness=stiffness, **common)
    return Built(model=model, beam=props, beam_design=design, tip=tip, fixed=fixed, gap_m=gap,
                 fit=ForceFit(window_m=window, rms_error=rms, max_error=worst, x_m=x,
                              force_N=force),
                 critical_gap_m=critical_gap(k_beam, tip, fixed, slope, magnet_model),
                 magnet_model=magnet_model)


def _fit_window(length, k_beam, tip, fixed, gap, slope, magnet_model, k1) -> float:
    """±1.8 wells for a bistable beam (wells located on the exact force), else 0.25 L."""
    reach = 0.4 * length
    if k1 >= 0.0:
        return 0.25 * length
    x = np.linspace(reach / 400, reach, 400)
    force = restoring_force(x, k_beam, tip, fixed, gap, slope, magnet_model)
    crossing = np.nonzero(force > 0.0)[0]
    if crossing.size == 0:
        raise CaseError(f"at a gap of {gap * 1e3:g} mm the magnets push the tip beyond "
                        f"{reach * 1e3:.3g} mm (0.4 of the beam length) without a well: "
                        "widen the gap or stiffen the beam", key="fixed_magnet.gap")
    well = float(x[crossing[0]])
    return min(FIT_SPAN_WELLS * well, reach)


def _transducer(case: Case, props: BeamProperties):
    load = case.load.resistance if case.load.resistance is not None else math.inf
    if case.beam.piezo is not None:
        return PiezoCircuit(coupling_N_per_V=props.coupling_N_per_V,
                            capacitance_F=props.capacitance_F), load
    if case.beam.coil is not None:
        coil = case.beam.coil
        return CoilCircuit(flux_linkage_V_s_per_m=coil.flux_linkage,
                           resistance_ohm=coil.resistance, inductance_H=coil.inductance), load
    return None, load


def _reduced_model(case: Case) -> ReducedModel:
    r = case.reduced
    transducer = None
    if r.piezo is not None:
        transducer = PiezoCircuit(coupling_N_per_V=r.piezo.coupling,
                                  capacitance_F=r.piezo.capacitance)
    elif r.coil is not None:
        transducer = CoilCircuit(flux_linkage_V_s_per_m=r.coil.flux_linkage,
                                 resistance_ohm=r.coil.resistance,
                                 inductance_H=r.coil.inductance)
    return ReducedModel(
        mass_kg=r.mass,
        damping_N_s_per_m=r.damping,
        stiffness=r.stiffness,
        forcing_mass_kg=r.forcing_mass if r.forcing_mass is not None else r.mass,
        transducer=transducer,
        load_ohm=case.load.resistance if case.load.resistance is not None else math.inf,
        travel_limit_m=case.limits.travel if case.limits.travel is not None else math.inf,
        linear_stiffness_N_per_m=r.linear_stiffness,
    )
