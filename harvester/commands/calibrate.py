"""`harvester calibrate`: a calibrated case file from tests on the built prototype.

A ring-down gives the damping (`analysis.calibration.fit_ringdown`), a static force–deflection
table the restoring force: its coefficients for a `[reduced]` case, the magnets' effective
remanence and the gap for a geometry case.  A low-level stepped sine about a well gives the
in-well frequency and the total damping at the tested load (`fit_receptance`): less the
ring-down's damping, the transducer's coupling; the frequency checks the magnet fit, or sets
the remanence where there is no force table (`calibrate_from_sweep`).  The answer lists every
value the tests change (before, after, 95 % interval, source), the fits behind them, the
tolerances the fits leave, and the calibrated case's text, which the command line writes
beside the case (or where `--out` says).  The calibrated case is an ordinary case: every other
command reads it.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path

from harvester.case.load import LoadedCase
from harvester.commands.records import Record
from harvester.errors import CaseError

CALIBRATED_SUFFIX = "-calibrated"  # default output: beside the case, <stem>-calibrated.toml


@dataclass(frozen=True)
class ChangeRow(Record):
    """One case value the tests set, in the SI unit beside it."""

    key: str  # case path: "losses.damping_ratio", "fixed_magnet.gap", "reduced.stiffness[1]"
    previous_SI: float | None  # the case's value before (None: it gave none)
    value_SI: float
    ci95_SI: tuple[float, float]
    standard_error_SI: float
    unit_SI: str  # "" for a ratio
    source: str  # the test it came from


@dataclass(frozen=True)
class BandRow(Record):
    """The damping and frequency over one stretch of a ring-down's Hilbert envelope."""

    amplitude_SI: float  # mean envelope, in the ring-down's unit (RingdownRow.unit_SI)
    damping_ratio: float
    frequency_Hz: float


@dataclass(frozen=True)
class RingdownRow(Record):
    """Damping from a free decay: the log decrement (adopted) and the Hilbert envelope."""

    source: str
    quantity: str  # "tip_displacement" | "tip_velocity" | "voltage"
    unit_SI: str  # of the band amplitudes
    damping_ratio: float  # ζ of the decay, at its own frequency
    damping_ci95_ratio: tuple[float, float]
    natural_frequency_Hz: float
    damped_frequency_Hz: float
    cycles_count: int
    envelope_damping_ratio: float
    envelope_damping_ci95_ratio: tuple[float, float]
    amplitude_dependent: bool
    bands: tuple[BandRow, ...]
    damping_N_s_per_m: float  # c = 2 m ζ ω_n with the model's effective mass


@dataclass(frozen=True)
class CoefficientRow(Record):
    """One term k_j x^j of a fitted restoring force."""

    power_exponent: int
    value_SI: float
    ci95_SI: tuple[float, float]
    standard_error_SI: float
    unit_SI: str  # N, N/m, N/m², N/m³, …


@dataclass(frozen=True)
class StiffnessRow(Record):
    """The polynomial restoring force through a force–deflection table ([reduced] cases)."""

    source: str
    coefficients: tuple[CoefficientRow, ...]
    residual_rms_N: float
    even_terms_significant: bool


@dataclass(frozen=True)
class MagnetRow(Record):
    """Effective remanence and gap that reproduce a force–deflection table (geometry cases)."""

    source: str
    remanence_scale_ratio: float  # both magnets' remanence × this
    remanence_scale_ci95_ratio: tuple[float, float]
    tip_remanence_T: float
    fixed_remanence_T: float
    gap_offset_m: float  # built − nominal
    gap_offset_ci95_m: tuple[float, float]
    gap_m: float
    remanence_gap_correlation: float
    force_offset_N: float  # the load cell's reading at zero deflection
    residual_rms_N: float


@dataclass(frozen=True)
class SweepRow(Record):
    """A stepped sine about a well: the receptance fit, the damping split and the verdicts."""

    source: str
    rows_count: int
    half_power_rows_count: int  # steps inside the half-power band
    phase_read_as: str  # "lead", "lag" (the file's sign turned) or "" (no phase column)
    well_frequency_Hz: float  # at the tested load
    well_frequency_ci95_Hz: tuple[float, float]
    total_damping_ratio: float
    total_damping_ci95_ratio: tuple[float, float]
    misfit_ratio: float  # RMS misfit ÷ the peak receptance
    response_level_ratio: float  # the fit's m_f/m ÷ the model's
    response_level_ci95_ratio: tuple[float, float]
    largest_amplitude_m: float  # the test's largest tip amplitude
    backbone_shift_Hz: float | None  # the model's well at the largest amplitude
    load_ohm: float
    total_damping_N_s_per_m: float
    mechanical_damping_N_s_per_m: float | None  # the ring-down's
    electrical_damping_N_s_per_m: float | None
    electrical_damping_ci95_N_s_per_m: tuple[float, float] | None
    reactance_ratio: float | None  # ω L_c/(R_c + R_l), or ω R_l C_p
    flux_linkage_V_s_per_m: float | None  # a coil's Bl at the tested load
    flux_linkage_ci95_V_s_per_m: tuple[float, float] | None
    predicted_flux_linkage_V_s_per_m: float | None  # the case's
    coupling_N_per_V: float | None  # a piezo's θ (C_p the model's)
    coupling_ci95_N_per_V: tuple[float, float] | None
    predicted_coupling_N_per_V: float | None
    mechanical_well_frequency_Hz: float  # less the circuit's stiffness
    mechanical_well_frequency_ci95_Hz: tuple[float, float]
    predicted_well_frequency_Hz: float
    predicted_well_frequency_interval_Hz: tuple[float, float] | None
    predicted_from: str
    well_frequency_agrees: bool
    remanence_scale_ratio: float | None  # where the sweep sets the magnets (no force table)
    remanence_scale_ci95_ratio: tuple[float, float] | None
    remanence_scale_per_gap_per_m: float | None  # how it moves with the gap it assumes


@dataclass(frozen=True)
class SweepStepRow(Record):
    """One step of the stepped sine: the measured tip amplitude beside the calibrated model's
    and the design's (linearised about the tested well), and the phases of the tip against the
    base acceleration where the table gives one."""

    frequency_Hz: float
    base_amplitude_mps2: float
    measured_amplitude_m: float
    predicted_amplitude_m: float  # the calibrated case
    design_amplitude_m: float  # the case as given
    measured_phase_rad: float | None
    predicted_phase_rad: float


@dataclass(frozen=True)
class ToleranceRow(Record):
    """A `[tolerances]` entry the fits imply: one standard deviation of a case value."""

    key: str
    sd_SI: float
    unit_SI: str
    entry: str  # as written, e.g. '{ sd = "0.0086 mm" }'
    note: str


@dataclass(frozen=True)
class CalibrateResult(Record):
    """The calibration of a case from tests, and the calibrated case file."""

    case_file: str
    out_file: str
    changes: tuple[ChangeRow, ...]
    ringdown: RingdownRow | None
    stiffness: StiffnessRow | None
    magnets: MagnetRow | None
    sweep: SweepRow | None
    sweep_steps: tuple[SweepStepRow, ...]  # measured against predicted, per step
    tolerances: tuple[ToleranceRow, ...]
    tolerances_written_as: str  # "table", "comments" (no [tolerances] in the schema) or ""
    warnings: tuple[str, ...]
    case_text: str  # the calibrated case file


def default_out(loaded: LoadedCase) -> Path:
    """Where the calibrated case goes by default: beside the case (its data-file paths stay
    valid), named `<stem>-calibrated.toml`."""
    path = loaded.path
    return path.with_name(f"{path.stem}{CALIBRATED_SUFFIX}{path.suffix}")


def calibrate_result(loaded: LoadedCase, *, ringdown: str | Path | None = None,
                     force_deflection: str | Path | None = None,
                     sweep: str | Path | None = None, sweep_load_ohm: float | None = None,
                     out: str | Path | None = None, units: Mapping[str, str] | None = None,
                     magnet_model: str = "exact") -> CalibrateResult:
    """Read the test files, calibrate the case (`calibrate_case`) and assemble the answer; the
    text is checked by reading it back at `out` (default `default_out`).

    Parameters
    ----------
    loaded : the case of the tested design
    ringdown : a free-decay CSV (time and one response; `read_ringdown`)
    force_deflection : a static force–deflection CSV (`read_force_deflection`)
    sweep : a stepped-sine table about a well (`read_stepped_sine`)
    sweep_load_ohm : the load the sweep ran with [Ω] (default the case's)
    out : the calibrated case's path
    units : column units by name, for files whose header gives none
    """
    from harvester.analysis.calibration import calibrate_case
    from harvester.case.measurements import (
        read_force_deflection,
        read_ringdown,
        read_stepped_sine,
    )

    if ringdown is None and force_deflection is None and sweep is None:
        raise CaseError("nothing to calibrate from: give --ringdown, --force-deflection "
                        "and/or --sweep", file=str(loaded.path))
    target = Path(out) if out is not None else default_out(loaded)
    ring = read_ringdown(ringdown, units=units, key="ringdown") if ringdown else None
    table = (read_force_deflection(force_deflection, units=units, key="force_deflection")
             if force_deflection else None)
    steps = read_stepped_sine(sweep, units=units, key="sweep") if sweep else None
    try:
        calibration = calibrate_case(loaded, ringdown=ring, force_deflection=table,
                                     sweep=steps, sweep_load_ohm=sweep_load_ohm,
                                     out_path=target, magnet_model=magnet_model)
    except CaseError as exc:
        if not (exc.key or "").endswith(".file") or exc.file != str(target):
            raise
        message = str(exc).removeprefix(f"{exc.file}: {exc.key}: ")
        raise CaseError(f"{message}; the case names its data files relative to itself: write "
                        "the calibrated case beside it (the default) or copy the file next to "
                        "the output", file=str(target), key=exc.key) from None
    units_of = {v.path: v.unit for v in calibration.values}
    return CalibrateResult(
        case_file=str(loaded.path), out_file=str(target),
        changes=tuple(ChangeRow(v.path, v.previous, v.value, v.ci95, v.standard_error, v.unit,
                                v.source) for v in calibration.values),
        ringdown=_ringdown_row(calibration, ring),
        stiffness=_stiffness_row(calibration.stiffness),
        magnets=_magnet_row(calibration.magnets),
        sweep=_sweep_row(calibration.sweep),
        sweep_steps=tuple(SweepStepRow(**vars(step)) for step in calibration.sweep_steps),
        tolerances=tuple(ToleranceRow(t.path, t.sd, units_of.get(t.path, ""), t.entry, t.note)
                         for t in calibration.tolerances),
        tolerances_written_as=calibration.tolerances_written_as,
        warnings=(ring.warnings if ring else ()) + calibration.warnings,
        case_text=calibration.text)


SI_OF_QUANTITY = {"tip_displacement": "m", "tip_velocity": "m/s", "voltage": "V"}


def _ringdown_row(calibration, ring) -> RingdownRow | None:
    fit = calibration.ringdown
    if fit is None:
        return None
    d, e = fit.log_decrement, fit.envelope
    return RingdownRow(
        source=fit.source, quantity=ring.quantity, unit_SI=SI_OF_QUANTITY[ring.quantity],
        damping_ratio=d.damping_ratio, damping_ci95_ratio=d.damping_ratio_ci95,
        natural_frequency_Hz=d.natural_frequency_Hz,
        damped_frequency_Hz=d.damped_frequency_Hz, cycles_count=d.cycles,
        envelope_damping_ratio=e.damping_ratio, envelope_damping_ci95_ratio=e.damping_ratio_ci95,
        amplitude_dependent=e.amplitude_dependent,
        bands=tuple(BandRow(float(a), float(z), float(f)) for a, z, f in
                    zip(e.band_amplitude, e.band_damping_ratio, e.band_frequency_Hz)),
        damping_N_s_per_m=calibration.damping_N_s_per_m)


POWER_UNITS = ("N", "N/m", "N/m²", "N/m³", "N/m⁴", "N/m⁵", "N/m⁶", "N/m⁷")  # k_0 … k_7


def _stiffness_row(fit) -> StiffnessRow | None:
    if fit is None:
        return None
    rows = tuple(CoefficientRow(j, k, ci, se, POWER_UNITS[j]) for j, (k, ci, se) in
                 enumerate(zip(fit.coefficients, fit.ci95, fit.standard_errors)))
    return StiffnessRow(fit.source, rows, fit.residual_rms_N, fit.even_terms_significant)


def _magnet_row(fit) -> MagnetRow | None:
    if fit is None:
        return None
    return MagnetRow(
        source=fit.source, remanence_scale_ratio=fit.remanence_scale,
        remanence_scale_ci95_ratio=fit.remanence_scale_ci95,
        tip_remanence_T=fit.tip_remanence_T, fixed_remanence_T=fit.fixed_remanence_T,
        gap_offset_m=fit.gap_offset_m, gap_offset_ci95_m=fit.gap_offset_ci95_m, gap_m=fit.gap_m,
        remanence_gap_correlation=fit.remanence_gap_correlation,
        force_offset_N=fit.force_offset_N, residual_rms_N=fit.residual_rms_N)


def _sweep_row(fit) -> SweepRow | None:
    if fit is None:
        return None
    r = fit.receptance
    coil, piezo = fit.coupling_unit == "V·s/m", fit.coupling_unit == "N/V"
    return SweepRow(
        source=r.source, rows_count=r.rows, half_power_rows_count=r.half_power_rows,
        phase_read_as=r.phase_read_as, well_frequency_Hz=r.well_frequency_Hz,
        well_frequency_ci95_Hz=r.well_frequency_ci95_Hz, total_damping_ratio=r.damping_ratio,
        total_damping_ci95_ratio=r.damping_ratio_ci95, misfit_ratio=r.misfit_ratio,
        response_level_ratio=fit.level_ratio, response_level_ci95_ratio=fit.level_ci95_ratio,
        largest_amplitude_m=r.peak_displacement_m, backbone_shift_Hz=fit.backbone_shift_Hz,
        load_ohm=fit.load_ohm, total_damping_N_s_per_m=fit.damping.total_N_s_per_m,
        mechanical_damping_N_s_per_m=fit.damping.mechanical_N_s_per_m,
        electrical_damping_N_s_per_m=fit.damping.electrical_N_s_per_m,
        electrical_damping_ci95_N_s_per_m=fit.damping.electrical_ci95_N_s_per_m,
        reactance_ratio=fit.reactance_ratio,
        flux_linkage_V_s_per_m=fit.coupling if coil else None,
        flux_linkage_ci95_V_s_per_m=fit.coupling_ci95 if coil else None,
        predicted_flux_linkage_V_s_per_m=fit.model_coupling if coil else None,
        coupling_N_per_V=fit.coupling if piezo else None,
        coupling_ci95_N_per_V=fit.coupling_ci95 if piezo else None,
        predicted_coupling_N_per_V=fit.model_coupling if piezo else None,
        mechanical_well_frequency_Hz=fit.mechanical_well_frequency_Hz,
        mechanical_well_frequency_ci95_Hz=fit.mechanical_well_frequency_ci95_Hz,
        predicted_well_frequency_Hz=fit.predicted_well_frequency_Hz,
        predicted_well_frequency_interval_Hz=fit.predicted_well_frequency_interval_Hz,
        predicted_from=fit.predicted_from, well_frequency_agrees=fit.well_frequency_agrees,
        remanence_scale_ratio=fit.remanence_scale,
        remanence_scale_ci95_ratio=fit.remanence_scale_ci95,
        remanence_scale_per_gap_per_m=fit.remanence_scale_per_gap_per_m)
