"""Static answers: the derived design (`check`) and the double-well analysis (`wells`)."""

from __future__ import annotations

import math

from harvester.build import (
    AXIAL_LOAD_WARNING_RATIO,
    BARRIER_TOLERANCE,
    FORCE_TOLERANCE,
    WELL_TOLERANCE,
    Built,
    build,
)
from harvester.case.load import LoadedCase
from harvester.model import analyse_wells, nondimensional_groups
from harvester.physics import magnets as mag

VOLTAGE_TOUCH_HAZARD_V = 60.0  # ES1 limit for DC voltage, IEC 62368-1 (memory)


def wells_payload(built: Built) -> dict:
    """JSON-ready static double-well analysis of a built design (keys as in design.md)."""
    model = built.model
    wells = analyse_wells(model)
    payload = {
        "regime": wells.regime,
        "gap_m": built.gap_m,
        "critical_gap_m": built.critical_gap_m,
        "wells_m": list(wells.wells_m),
        "barrier_J": wells.barrier_J,
        "well_frequency_Hz": wells.well_frequency_Hz,
        "linear_frequency_Hz": wells.linear_frequency_Hz,
        "effective_mass_kg": model.mass_kg,
        "forcing_mass_kg": model.forcing_mass_kg,
        "damping_N_s_per_m": model.damping_N_s_per_m,
        "k1_N_per_m": model.k1,
        "k3_N_per_m3": model.k3,
        "stiffness_terms_SI": list(model.stiffness),
        "nondimensional": nondimensional_groups(model),
        "magnet_model": built.magnet_model if built.fixed is not None else None,
    }
    if built.fit is not None:
        payload["fit_window_m"] = built.fit.window_m
        payload["fit_rms_error"] = built.fit.rms_error
        payload["fit_max_error"] = built.fit.max_error
        payload["fit_inner_max_error"] = built.fit.inner_max_error
        payload["fit_well_error"] = built.fit.well_error
        payload["fit_barrier_error"] = built.fit.barrier_error
        payload["fit_terms"] = built.fit.terms
    return payload


def wells_warnings(built: Built) -> list[str]:
    notes = list(built.model.notes)
    fit = built.fit
    if fit is not None and not fit.meets_tolerances:
        found = f"force within two wells {100 * fit.inner_max_error:.2g} %"
        if fit.well_error is not None:
            found = (f"well {100 * fit.well_error:+.2g} %, barrier "
                     f"{100 * fit.barrier_error:+.2g} %, " + found)
        notes.append(f"the odd polynomial ({fit.terms} terms) misses the exact restoring force "
                     f"over ±{fit.window_m * 1e3:.3g} mm: {found} (tolerances "
                     f"{100 * WELL_TOLERANCE:g} %, {100 * BARRIER_TOLERANCE:g} %, "
                     f"{100 * FORCE_TOLERANCE:g} %); treat the coefficients as approximate")
    if built.fixed is not None and built.tip is not None:
        wells = analyse_wells(built.model)
        outer = max(wells.wells_m) if wells.wells_m else 0.0
        touch = mag.clearance(outer, tip=built.tip, fixed=built.fixed, gap_m=built.gap_m,
                              slope_per_deflection_per_m=built.beam.slope_per_deflection_per_m)
        if float(touch) <= 0.0:
            notes.append("the magnets touch in the well: widen the gap")
    if math.isfinite(built.model.travel_limit_m):
        wells = analyse_wells(built.model)
        if wells.wells_m and max(wells.wells_m) > built.model.travel_limit_m:
            notes.append("the wells lie beyond [limits].travel: the beam rests against its stop")
    ratio = built.buckling_load_ratio
    if ratio is not None and ratio > AXIAL_LOAD_WARNING_RATIO:
        notes.append(f"the magnets push the tip towards the clamp with "
                     f"{built.axial_force_N:.3g} N, {100 * ratio:.0f} % of the beam's buckling "
                     f"load π²EI/(4L²) = "
                     f"{built.buckling_load_N:.3g} N: a crooked strip or a tilted magnet bends "
                     "it 1/(1 − P/P_cr) times more, and the single-mode softening is "
                     "approximate; widen the gap or stiffen the beam")
    return notes


def wells_report(loaded: LoadedCase, gap_m: float | None = None,
                 magnet_model: str = "exact") -> tuple[dict, list[str]]:
    built = build(loaded, gap_m=gap_m, magnet_model=magnet_model)
    return wells_payload(built), wells_warnings(built)


def check_report(loaded: LoadedCase, magnet_model: str = "exact") -> tuple[dict, list[str]]:
    """The parsed design in SI and the derived beam, transducer and magnet properties."""
    built = build(loaded, magnet_model=magnet_model)
    case = loaded.case
    derived: dict = {}
    if built.beam is not None:
        b = built.beam
        derived.update({
            "bending_stiffness_N_m2": b.bending_stiffness_N_m2,
            "mass_per_length_kg_per_m": b.mass_per_length_kg_per_m,
            "neutral_axis_m": b.neutral_axis_m,
            "tip_mass_kg": built.beam_design.tip_mass_kg,
            "tip_mass_ratio": b.tip_mass_ratio,
            "rotary_inertia_ratio": b.rotary_inertia_ratio,
            "tip_mass_offset_ratio": b.tip_mass_offset_ratio,
            "eigenvalue": b.eigenvalue,
            "short_circuit_frequency_Hz": b.short_circuit_frequency_Hz,
            "open_circuit_frequency_Hz": b.open_circuit_frequency_Hz,
            "effective_mass_kg": b.effective_mass_kg,
            "forcing_mass_kg": b.forcing_mass_kg,
            "tip_stiffness_N_per_m": b.tip_stiffness_N_per_m,
            "static_stiffness_N_per_m": b.static_stiffness_N_per_m,
            "slope_per_deflection_per_m": b.slope_per_deflection_per_m,
            "root_curvature_per_deflection_per_m2": b.root_curvature_per_deflection_per_m2,
            "coupling_N_per_V": b.coupling_N_per_V,
            "capacitance_F": b.capacitance_F,
        })
    if built.tip is not None:
        derived["tip_magnet_moment_A_m2"] = mag.dipole_moment(built.tip)
    if built.fixed is not None:
        derived["fixed_magnet_moment_A_m2"] = mag.dipole_moment(built.fixed)
        derived["magnet_stiffness_at_rest_N_per_m"] = built.model.k1 - (
            built.model.linear_stiffness_N_per_m or 0.0)
    derived.update(wells_payload(built))
    warnings = wells_warnings(built)
    if case.fixed_magnet is not None:
        warnings.append("strong magnets: pinch hazard when assembling, keep away from implants "
                        "and magnetic media")
    if case.has_piezo:
        warnings.append(f"open-circuit piezo voltage can exceed {VOLTAGE_TOUCH_HAZARD_V:g} V "
                        "under shock: insulate the electrodes")
    return {"design": case.model_dump(mode="json", by_alias=True), "derived": derived}, warnings
