"""`harvester trace`: a shaker record of the built prototype against the model's prediction.

The record (time, base acceleration, and the tip displacement, tip velocity or voltage across a
load) is read by `case.measurements.read_response_record`; `analysis.measured.trace_record`
finds the forcing, section, hops, orbit class, correlation dimension, Lyapunov exponent and
power in it and the model's prediction of each for the forcing it found.  This module runs that
on the case's model at the tested load and assembles the answer: per quantity the measured
value with its 95 % interval, the prediction with its interval, their difference and whether
the intervals meet.  The forcing's "prediction" is the excitation the case plans, so its rows
say whether the test ran at the site's excitation rather than whether the model holds.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path

from harvester.case.load import LoadedCase
from harvester.commands.power import OrbitRow
from harvester.commands.records import Record
from harvester.errors import CaseError

FORCING_KINDS = ("tone", "random", "auto")
# (name, unit suffix) of each compared quantity, in the order of the table; the JSON keys of
# one are `analysis.measured.Twin.to_dict`'s
QUANTITIES = (("forcing_frequency", "Hz"), ("forcing_amplitude", "mps2"), ("hop_rate", "per_s"),
              ("orbit", ""), ("correlation", "dimension"), ("lyapunov", "per_s"),
              ("mean_power", "W"))
PLANNED = ("forcing_frequency", "forcing_amplitude")  # compared with the plan, not the model
# Rosenstein's estimate from a short, noisy section against Benettin's on the noise-free model:
# two estimators, and the first reads low on a few hundred points (Rosenstein et al. 1993,
# Physica D 65:117, report 10–30 % on records of this length), so agreement is a hint only.
INDICATIVE = ("lyapunov",)


@dataclass(frozen=True)
class TraceRecord(Record):
    """A shaker record against the model.  Per quantity: measured, `predicted_` twin, the
    measured 95 % interval (`_ci95_`), the prediction's interval, the difference (measured −
    predicted), whether the two intervals meet (`_inside_interval`) and a note."""

    source: str
    case_file: str
    forcing_kind: str  # "tone" | "random"
    duration_s: float
    sample_rate_Hz: float
    load_ohm: float | None  # the load the model ran at (and the voltage was measured across)
    forcing_frequency_Hz: float | None
    predicted_forcing_frequency_Hz: float | None  # the case's planned tone
    forcing_frequency_ci95_Hz: tuple[float, float] | None
    predicted_forcing_frequency_interval_Hz: tuple[float, float] | None
    forcing_frequency_difference_Hz: float | None
    forcing_frequency_inside_interval: bool | None
    forcing_frequency_note: str
    forcing_amplitude_mps2: float | None  # a tone's amplitude, or a random signal's RMS
    predicted_forcing_amplitude_mps2: float | None  # the case's planned excitation
    forcing_amplitude_ci95_mps2: tuple[float, float] | None
    predicted_forcing_amplitude_interval_mps2: tuple[float, float] | None
    forcing_amplitude_difference_mps2: float | None
    forcing_amplitude_inside_interval: bool | None
    forcing_amplitude_note: str
    hop_rate_per_s: float | None
    predicted_hop_rate_per_s: float | None
    hop_rate_ci95_per_s: tuple[float, float] | None
    predicted_hop_rate_interval_per_s: tuple[float, float] | None
    hop_rate_difference_per_s: float | None
    hop_rate_inside_interval: bool | None
    hop_rate_note: str
    orbit: str | None  # "intrawell" | "interwell-periodic" | "chaotic"
    predicted_orbit: str | None  # the class with the largest share of the predicted mix
    orbit_inside_interval: bool | None  # the measured class is among the predicted ones
    orbit_note: str
    correlation_dimension: float | None  # of the section (Grassberger & Procaccia 1983)
    predicted_correlation_dimension: float | None
    correlation_ci95_dimension: tuple[float, float] | None  # local slopes over the range
    predicted_correlation_interval_dimension: tuple[float, float] | None
    correlation_difference_dimension: float | None
    correlation_inside_interval: bool | None
    correlation_note: str
    lyapunov_per_s: float | None  # largest exponent (Rosenstein et al. 1993)
    predicted_lyapunov_per_s: float | None  # Benettin et al. 1980 on the model
    lyapunov_ci95_per_s: tuple[float, float] | None
    predicted_lyapunov_interval_per_s: tuple[float, float] | None
    lyapunov_difference_per_s: float | None
    lyapunov_inside_interval: bool | None
    lyapunov_note: str
    mean_power_W: float | None  # into the load, from the voltage
    predicted_mean_power_W: float | None
    mean_power_ci95_W: tuple[float, float] | None
    predicted_mean_power_interval_W: tuple[float, float] | None
    mean_power_difference_W: float | None
    mean_power_inside_interval: bool | None
    mean_power_note: str
    model_agrees: bool | None  # every response quantity compared agrees (not the indicative)
    disagreeing: tuple[str, ...]  # keys of the response quantities that do not
    indicative: tuple[str, ...]  # keys whose agreement is a hint only
    hop_count: int | None
    well_time_share: tuple[float, float] | None  # time below and above the saddle
    orbit_period_count: int | None  # periods after which the section repeats (0: never)
    section_points_count: int
    scaling_range_ratio: tuple[float, float] | None  # radii, per well position (section units)
    predicted_scaling_range_ratio: tuple[float, float] | None
    predicted_orbits: tuple[OrbitRow, ...]
    method: str
    warnings: tuple[str, ...]  # about the record
    notes: tuple[str, ...]


@dataclass(frozen=True)
class TraceStudy:
    """The answer and what it was computed from, for the trace note's figures."""

    answer: TraceRecord
    result: object  # analysis.measured.TraceResult
    response: object  # case.measurements.ResponseRecord
    model: object  # the ReducedModel at the tested load
    title: str


def trace_study(loaded: LoadedCase, record_path: str | Path, *, load_ohm: float | None = None,
                forcing: str | None = None, units: Mapping[str, str] | None = None,
                columns: Sequence[str] | None = None, phase_rad: float = 0.0, seed: int = 0,
                starts: int = 32, magnet_model: str = "exact") -> TraceStudy:
    """Trace a shaker record against the case's model.

    Parameters
    ----------
    loaded : the case of the tested design (its model, load and planned excitation)
    record_path : the record CSV (`read_response_record`: header names and units, or
        `units` and `columns`)
    load_ohm : the load the prototype was tested with [Ω]; default the case's `[load]`
        resistance (required when that is "matched" and there is a transducer)
    forcing : "tone", "random" or "auto"; default the kind of the case's `[excitation]`
        (a tone, else random; "auto" without one)
    phase_rad : forcing phase of the section [rad]
    seed, starts : the prediction's seed and, under a tone, its number of starts
    """
    from harvester.analysis.measured import trace_record
    from harvester.build import build
    from harvester.case.measurements import read_response_record

    case = loaded.case
    kind = forcing or _case_forcing(loaded)
    if kind not in FORCING_KINDS:
        raise CaseError(f"forcing {kind!r}; expected one of {', '.join(FORCING_KINDS)}",
                        key="--forcing")
    built = build(loaded, magnet_model=magnet_model)
    load = load_ohm if load_ohm is not None else case.load.resistance
    if load is None and built.model.transducer is not None:
        raise CaseError("the case's load is \"matched\": give the load the prototype was "
                        "tested with, e.g. --load \"47 kohm\"", file=str(loaded.path),
                        key="load.resistance")
    model = built.model.with_load(load) if load is not None else built.model
    response = read_response_record(record_path, units=units, columns=columns, load_ohm=load,
                                    key="record")
    frequency, amplitude, planned_kind = _planned(loaded)
    result = trace_record(response, model, kind=kind, phase_rad=phase_rad, seed=seed,
                          n_initial=starts, planned_frequency_Hz=frequency,
                          planned_amplitude_mps2=amplitude, planned_kind=planned_kind)
    answer = _answer(result, response, loaded, load)
    return TraceStudy(answer, result, response, model, case.title or loaded.path.stem)


def _case_forcing(loaded: LoadedCase) -> str:
    excitation = loaded.case.excitation
    if excitation is None:
        return "auto"
    return "tone" if excitation.kind == "tone" else "random"


def _planned(loaded: LoadedCase) -> tuple[float | None, float | None, str | None]:
    """The case's planned excitation: (tone frequency [Hz], tone amplitude or random RMS
    [m/s²], "tone" | "random"), or Nones without an `[excitation]`."""
    excitation = loaded.case.excitation
    if excitation is None:
        return None, None, None
    if excitation.kind == "tone":
        return excitation.tone.frequency, excitation.tone.amplitude, "tone"
    from harvester.case.signals import random_excitation

    return None, random_excitation(loaded).summary.rms_mps2, "random"


def _answer(result, response, loaded: LoadedCase, load: float | None) -> TraceRecord:
    twins = {}
    for twin in result.twins:
        twins.update(twin.to_dict())
    measured = result.measured
    compared = [t for t in result.twins if t.name not in PLANNED + INDICATIVE
                and t.inside_interval is not None]
    disagreeing = tuple(t.key for t in compared if not t.inside_interval)
    hops = measured.hops
    section = measured.section
    corr, predicted_corr = measured.correlation, result.predicted_correlation
    orbits = tuple(OrbitRow(**(o.to_dict() if hasattr(o, "to_dict") else o))
                   for o in result.predicted_orbits)
    return TraceRecord(
        source=response.source, case_file=loaded.path.name, forcing_kind=measured.forcing.kind,
        duration_s=response.duration_s, sample_rate_Hz=response.sample_rate_Hz,
        load_ohm=load if load is not None and math.isfinite(load) else None, **twins,
        model_agrees=None if not compared else not disagreeing, disagreeing=disagreeing,
        indicative=tuple(t.key for t in result.twins
                         if t.name in INDICATIVE and t.inside_interval is not None),
        hop_count=hops.count if hops else None,
        well_time_share=hops.time_share if hops else None,
        orbit_period_count=measured.period if section is not None else None,
        section_points_count=0 if section is None else int(section.time_s.size),
        scaling_range_ratio=corr.scaling_range if corr else None,
        predicted_scaling_range_ratio=predicted_corr.scaling_range if predicted_corr else None,
        predicted_orbits=orbits, method=result.method, warnings=response.warnings,
        notes=measured.notes + result.notes)
