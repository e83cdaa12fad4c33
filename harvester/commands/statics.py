"""The static answers: the parsed design and its derived properties (`check`) and the double
well at a gap (`wells`)."""

from __future__ import annotations

import math
from dataclasses import dataclass, fields

import numpy as np

from harvester.build import (
    AXIAL_LOAD_WARNING_RATIO,
    BARRIER_TOLERANCE,
    FORCE_TOLERANCE,
    WELL_TOLERANCE,
    Built,
    build,
)
from harvester.case.load import LoadedCase
from harvester.case.schema import case_si_dict
from harvester.commands.records import Record
from harvester.model import analyse_wells, nondimensional_groups
from harvester.physics import magnets as mag

TOUCH_HAZARD_WARNING = "open-circuit piezo voltage can exceed 60 V under shock: insulate the " \
    "electrodes"
MAGNET_WARNING = ("strong magnets: pinch hazard when assembling, keep away from implants and "
                  "magnetic media")


@dataclass(frozen=True)
class WellsResult(Record):
    """The static double well of a design at one gap (`harvester wells`)."""

    regime: str  # "bistable" | "monostable"
    gap_m: float | None  # face to face at rest; None for a [reduced] case
    critical_gap_m: float | None
    wells_m: tuple[float, ...]  # bistable: (left, right) either side of the saddle
    barrier_J: float  # the lower of the two barriers
    barriers_J: tuple[float, ...]  # from the left well and from the right well
    saddle_m: float | None  # the barrier top between the wells (0 for equal wells)
    well_frequency_Hz: float  # the lower of the two wells' frequencies
    well_frequencies_Hz: tuple[float, ...]  # small oscillation in the left and right well
    linear_frequency_Hz: float | None  # the same beam without magnets
    effective_mass_kg: float
    forcing_mass_kg: float
    damping_N_s_per_m: float
    k1_N_per_m: float
    k3_N_per_m3: float
    stiffness_SI: tuple[float, ...]  # k1, k3, k5, … of the odd part of the restoring force
    stiffness_units: tuple[str, ...]  # the SI unit of each term
    force_coefficients_SI: tuple[float, ...]  # k0, k1, k2, k3, …: F(x) = Σ_p k_p x^p
    force_coefficient_units: tuple[str, ...]  # N, N/m, N/m^2, …
    nondimensional: dict  # u'' + δu' − u + u³ = γ cos ωτ scales (empty when monostable)
    magnet_model: str | None  # "exact" | "dipole"; None without magnets
    fit_window_m: float | None  # the force fit's half-width
    fit_terms_count: int | None
    fit_well_error_fraction: float | None
    fit_barrier_error_fraction: float | None
    fit_rms_error_fraction: float | None
    fit_max_error_fraction: float | None
    fit_inner_max_error_fraction: float | None
    axial_force_N: float | None  # the magnets' push on the tip towards the clamp, at rest
    buckling_load_N: float | None  # π²EI/(4L²) of the cantilever under an end load
    buckling_load_ratio: float | None  # the push over the buckling load
    warnings: tuple[str, ...] = ()


def wells_of(built: Built) -> WellsResult:
    """The double well of a built design."""
    model = built.model
    wells = analyse_wells(model)
    fit = built.fit
    return WellsResult(
        regime=wells.regime,
        gap_m=built.gap_m,
        critical_gap_m=built.critical_gap_m,
        wells_m=tuple(wells.wells_m),
        barrier_J=wells.barrier_J,
        barriers_J=tuple(wells.barriers_J),
        saddle_m=wells.saddle_m,
        well_frequency_Hz=wells.well_frequency_Hz,
        well_frequencies_Hz=tuple(wells.well_frequencies_Hz),
        linear_frequency_Hz=wells.linear_frequency_Hz,
        effective_mass_kg=model.mass_kg,
        forcing_mass_kg=model.forcing_mass_kg,
        damping_N_s_per_m=model.damping_N_s_per_m,
        k1_N_per_m=model.k1,
        k3_N_per_m3=model.k3,
        stiffness_SI=tuple(model.stiffness),
        stiffness_units=tuple("N/m" if j == 0 else f"N/m^{2 * j + 1}"
                              for j in range(len(model.stiffness))),
        force_coefficients_SI=tuple(model.force_coefficients),
        force_coefficient_units=tuple("N" if p == 0 else "N/m" if p == 1 else f"N/m^{p}"
                                      for p in range(len(model.force_coefficients))),
        nondimensional=nondimensional_groups(model),
        magnet_model=built.magnet_model if built.fixed is not None else None,
        fit_window_m=fit.window_m if fit else None,
        fit_terms_count=fit.terms if fit else None,
        fit_well_error_fraction=fit.well_error if fit else None,
        fit_barrier_error_fraction=fit.barrier_error if fit else None,
        fit_rms_error_fraction=fit.rms_error if fit else None,
        fit_max_error_fraction=fit.max_error if fit else None,
        fit_inner_max_error_fraction=fit.inner_max_error if fit else None,
        axial_force_N=built.axial_force_N,
        buckling_load_N=built.buckling_load_N,
        buckling_load_ratio=built.buckling_load_ratio,
        warnings=tuple(wells_warnings(built)),
    )


def wells_warnings(built: Built) -> list[str]:
    """What an engineer must know about the double well: a loose force fit, magnets that touch
    in the well, wells beyond the stops."""
    notes = list(built.model.notes)
    fit = built.fit
    if fit is not None and not fit.meets_tolerances:
        found = f"force within two wells {100 * fit.inner_max_error:.2g} %"
        if fit.well_error is not None:
            found = (f"well {100 * fit.well_error:+.2g} %, barrier "
                     f"{100 * fit.barrier_error:+.2g} %, " + found)
        kind = "odd polynomial" if built.model.is_symmetric else "polynomial"
        notes.append(f"the {kind} ({fit.terms} terms) misses the exact restoring force "
                     f"over ±{fit.window_m * 1e3:.3g} mm: {found} (tolerances "
                     f"{100 * WELL_TOLERANCE:g} %, {100 * BARRIER_TOLERANCE:g} %, "
                     f"{100 * FORCE_TOLERANCE:g} %); treat the coefficients as approximate")
    wells = analyse_wells(built.model)
    outer = max((abs(w) for w in wells.wells_m), default=0.0)
    if built.fixed is not None and built.tip is not None and wells.wells_m:
        touch = mag.clearance(np.asarray(wells.wells_m), tip=built.tip, fixed=built.fixed,
                              gap_m=built.gap_m,
                              slope_per_deflection_per_m=built.beam.slope_per_deflection_per_m,
                              offset_m=built.offset_m)
        if float(np.min(touch)) <= 0.0:
            notes.append("the magnets touch in the well: widen the gap")
    if math.isfinite(built.model.travel_limit_m) and outer > built.model.travel_limit_m:
        notes.append("the wells lie beyond [limits].travel: the beam rests against its stop")
    ratio = built.buckling_load_ratio
    if ratio is not None and ratio > AXIAL_LOAD_WARNING_RATIO:
        notes.append(f"the magnets push the tip towards the clamp with "
                     f"{built.axial_force_N:.3g} N, {100 * ratio:.0f} % of the beam's buckling "
                     f"load π²EI/(4L²) = {built.buckling_load_N:.3g} N: a crooked strip or a "
                     "tilted magnet bends it 1/(1 − P/P_cr) times more, and the single-mode "
                     "softening is approximate; widen the gap or stiffen the beam")
    return notes


def wells_result(loaded: LoadedCase, gap_m: float | None = None,
                 magnet_model: str = "exact") -> WellsResult:
    """`harvester wells`: the double well at the case's gap or at `gap_m` [m]."""
    return wells_of(build(loaded, gap_m=gap_m, magnet_model=magnet_model))


@dataclass(frozen=True)
class DesignProperties(Record):
    """Derived beam, transducer and magnet properties (None where the design has none)."""

    bending_stiffness_N_m2: float | None = None
    mass_per_length_kg_per_m: float | None = None
    neutral_axis_m: float | None = None
    tip_mass_kg: float | None = None
    tip_mass_ratio: float | None = None
    rotary_inertia_ratio: float | None = None
    tip_mass_offset_ratio: float | None = None
    eigenvalue: float | None = None
    short_circuit_frequency_Hz: float | None = None
    open_circuit_frequency_Hz: float | None = None
    tip_stiffness_N_per_m: float | None = None
    static_stiffness_N_per_m: float | None = None
    slope_per_deflection_per_m: float | None = None
    root_curvature_per_deflection_per_m2: float | None = None
    coupling_N_per_V: float | None = None
    capacitance_F: float | None = None
    tip_magnet_moment_A_m2: float | None = None
    fixed_magnet_moment_A_m2: float | None = None
    magnet_stiffness_at_rest_N_per_m: float | None = None


@dataclass(frozen=True)
class DataFileSummary(Record):
    """A data file the case names, read and checked: what it holds."""

    key: str  # where the case names it, e.g. "excitation.psd.file"
    file: str
    content: str  # "psd" | "record"
    frequency_range_Hz: tuple[float, float]
    rms_mps2: float
    duration_s: float | None  # a record's length
    sample_rate_Hz: float | None  # a record's sampling rate
    rows_count: int


@dataclass(frozen=True)
class CheckResult(Record):
    """`harvester check`: the parsed design in SI, its derived properties and its double well."""

    design: dict  # the case as validated, every key with its SI unit suffix
    derived: DesignProperties
    wells: WellsResult
    data_files: tuple[DataFileSummary, ...]
    warnings: tuple[str, ...]


def design_properties(built: Built) -> DesignProperties:
    values: dict = {}
    if built.beam is not None:
        names = {f.name for f in fields(DesignProperties)}
        values = {name: getattr(built.beam, name) for name in names
                  if hasattr(built.beam, name)}
        values["tip_mass_kg"] = built.beam_design.tip_mass_kg
    if built.tip is not None:
        values["tip_magnet_moment_A_m2"] = mag.dipole_moment(built.tip)
    if built.fixed is not None:
        values["fixed_magnet_moment_A_m2"] = mag.dipole_moment(built.fixed)
        values["magnet_stiffness_at_rest_N_per_m"] = built.model.k1 - (
            built.model.linear_stiffness_N_per_m or 0.0)
    return DesignProperties(**values)


def data_file_summaries(loaded: LoadedCase) -> tuple[DataFileSummary, ...]:
    """Read and check every data file the case names (raises CaseError on a bad one)."""
    from harvester.case.signals import describe_data_files

    return tuple(DataFileSummary(**entry) for entry in describe_data_files(loaded))


def check_result(loaded: LoadedCase, magnet_model: str = "exact") -> CheckResult:
    """`harvester check`: the parsed design, its derived properties and data files."""
    built = build(loaded, magnet_model=magnet_model)
    case = loaded.case
    wells = wells_of(built)
    warnings = list(wells.warnings)
    if case.fixed_magnet is not None:
        warnings.append(MAGNET_WARNING)
    if case.has_piezo:
        warnings.append(TOUCH_HAZARD_WARNING)
    design = case_si_dict(case)
    if case.load.resistance is None:
        design["load"] = {"resistance": "matched"}
    return CheckResult(design=design, derived=design_properties(built), wells=wells,
                       data_files=data_file_summaries(loaded), warnings=tuple(warnings))
