"""One answer to "how much power, and is it safe?" for a case, whatever its excitation.

A tone goes to the ensemble orbit analysis (`tone_power`), a band, PSD table or record to the
Monte Carlo (`random_mean_power`).  Either way the response envelope goes through the stress and
safety checks, and the same beam without magnets is the baseline.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field, replace

import numpy as np

from harvester.analysis.safety import (
    Check,
    ResponseEnvelope,
    assess_safety,
    design_materials,
)
from harvester.analysis.tone_power import linear_matched_load
from harvester.build import Built
from harvester.case.load import LoadedCase
from harvester.model import CoilCircuit, ReducedModel, analyse_wells

TONE_INITIAL_STATES = 32  # ensemble size for the orbit mix under a tone


@dataclass(frozen=True)
class PowerPrediction:
    """Mean power, its spread, the orbit mix, the baseline and the safety checks (SI)."""

    excitation: str  # "tone" | "band" | "psd" | "record"
    load_ohm: float
    load_note: str
    summary: dict  # JSON-ready, keys per the command contract
    envelope: ResponseEnvelope
    checks: tuple[Check, ...]
    omitted: tuple[str, ...]
    sweep: tuple[dict, ...] = ()
    spectrum: dict | None = None
    warnings: tuple[str, ...] = field(default_factory=tuple)

    def to_dict(self) -> dict:
        out = dict(self.summary)
        out.update({
            "excitation": self.excitation,
            "load_ohm": self.load_ohm,
            "load_note": self.load_note,
            "envelope": {"x_min_m": self.envelope.x_min_m, "x_max_m": self.envelope.x_max_m},
            "checks": [check_dict(c) for c in self.checks],
            "omitted_checks": list(self.omitted),
            "sweep": list(self.sweep),
            "spectrum": self.spectrum,
            "warnings": list(self.warnings),
        })
        return out


def check_dict(check: Check) -> dict:
    return {"name": check.name, "level": check.level, "value_SI": check.value,
            "limit_SI": check.limit, "unit": check.unit, "margin": check.margin,
            "basis": check.basis}


def coil_peak_emf(model: ReducedModel, max_speed_mps: float, frequency_Hz: float,
                  broadband: bool) -> float | None:
    """Peak open-circuit coil EMF [V]: Bl · max|ẋ| of the loaded motion, scaled up for the
    electrical damping an open circuit loses.

        EMF = Bl · max|ẋ| · r   (tone),   Bl · max|ẋ| · √r   (broadband),
        r = (c + c_e)/c,   c_e = (Bl)² R/(R² + (ωL_c)²),  R = R_c + R_l

    A resonant velocity amplitude scales as 1/(total damping) (Williams & Yates 1996, Sens.
    Actuators A 52:8); under white excitation the velocity variance does (Caughey 1963, J.
    Acoust. Soc. Am. 35:1706), hence √r.  For a bistable beam these are estimates of the
    unloaded motion, not bounds.  None without a coil.
    """
    t = model.transducer
    if not isinstance(t, CoilCircuit):
        return None
    loop = t.resistance_ohm + model.load_ohm
    omega = 2.0 * math.pi * frequency_Hz
    c_e = 0.0
    if math.isfinite(loop) and loop > 0.0:
        c_e = t.flux_linkage_V_s_per_m**2 * loop / (loop**2 + (omega * t.inductance_H) ** 2)
    c = model.damping_N_s_per_m
    ratio = (c + c_e) / c if c > 0.0 else 1.0
    return abs(t.flux_linkage_V_s_per_m) * max_speed_mps * (math.sqrt(ratio) if broadband
                                                            else ratio)


def operating_frequency_Hz(model: ReducedModel) -> float:
    """The frequency the beam prefers: its well frequency (bistable) or its linear frequency."""
    wells = analyse_wells(model)
    return wells.well_frequency_Hz if wells.well_frequency_Hz > 0 else (
        wells.linear_frequency_Hz or 1.0)


def nominal_load(model: ReducedModel, case_resistance: float | None,
                 psd=None) -> tuple[float, str]:
    """The case's load, or for "matched" the linear optimum at the operating frequency, or
    under a spectrum `psd` the fast estimate's optimum for it (`random_matched_load`)."""
    if case_resistance is not None:
        return case_resistance, "as given in [load]"
    if model.transducer is None:
        return math.inf, "no transducer"
    if psd is not None:
        from harvester.analysis.linearisation import random_matched_load

        return random_matched_load(model, psd)
    f = operating_frequency_Hz(model)
    load = linear_matched_load(model, f)
    return load, f"\"matched\": linear optimum at {f:.3g} Hz"


def predict_power(loaded: LoadedCase, built: Built, *, seed: int = 0,
                  target_relative_half_width: float = 0.05, sweep: bool = True,
                  progress: Callable[[float, float], None] | None = None) -> PowerPrediction:
    """Mean power and safety of the built design under the case's excitation."""
    excitation = loaded.case.excitation
    if excitation is None:
        from harvester.errors import CaseError

        raise CaseError("no [excitation] section: give a tone, band, psd or record",
                        file=str(loaded.path), key="excitation")
    if excitation.kind == "tone":
        return _predict_tone(loaded, built, seed=seed, sweep=sweep, progress=progress)
    return _predict_random(loaded, built, seed=seed, target=target_relative_half_width,
                           progress=progress)


# --- hop thresholds --------------------------------------------------------------------------
DEFAULT_GRID = (0.25, 2.5, 30)  # without [study].frequencies: 0.25–2.5 × the well frequency


@dataclass(frozen=True)
class ThresholdTable:
    rows: tuple[dict, ...]
    load_ohm: float
    load_note: str
    grid_note: str


def study_frequencies(loaded: LoadedCase, model: ReducedModel) -> tuple[np.ndarray, str]:
    """[study].frequencies, or 30 points from 0.25 to 2.5 × the operating frequency."""
    grid = loaded.case.study.frequencies
    if grid is not None:
        return np.linspace(grid.start, grid.stop, grid.count), "[study].frequencies"
    f = operating_frequency_Hz(model)
    low, high, count = DEFAULT_GRID
    return (np.geomspace(low * f, high * f, count),
            f"default: {low:g}–{high:g} × the operating frequency {f:.3g} Hz")


def predict_thresholds(loaded: LoadedCase, built: Built, *, seed: int = 0,
                       progress: Callable[[int, int], None] | None = None) -> ThresholdTable:
    """Melnikov bound and numerical onset/certain hop thresholds over the study frequencies."""
    from harvester.analysis.thresholds import hop_thresholds

    load, note = nominal_load(built.model, loaded.case.load.resistance)
    model = built.model.with_load(load)
    freqs, grid_note = study_frequencies(loaded, model)
    rows = hop_thresholds(model, freqs, seed=seed, progress=progress)
    return ThresholdTable(rows=tuple(r.to_dict() for r in rows), load_ohm=load,
                          load_note=note, grid_note=grid_note)


# --- tone ------------------------------------------------------------------------------------
def _predict_tone(loaded, built, *, seed, sweep, progress) -> PowerPrediction:
    from harvester.analysis.tone_power import matched_load, tone_power, tone_power_sweep

    case = loaded.case
    tone = case.excitation.tone
    model = built.model
    options = dict(seed=seed, n_initial=TONE_INITIAL_STATES)
    if case.load.resistance is None and model.transducer is not None:
        if progress:
            progress(0.0, 1.0)
        result = matched_load(model, tone.amplitude, tone.frequency, **options)
        load, note = result.load_ohm, "\"matched\": searched for the most mean power"
    else:
        load, note = nominal_load(model, case.load.resistance)
        result = tone_power(model.with_load(load), tone.amplitude, tone.frequency, **options)
    model = model.with_load(load)
    rows: tuple[dict, ...] = ()
    grid = case.study.frequencies
    if sweep and grid is not None:
        if progress:
            progress(0.5, 1.0)
        freqs = np.linspace(grid.start, grid.stop, grid.count)
        rows = tuple(tone_sweep_row(r) for r in tone_power_sweep(model, tone.amplitude, freqs,
                                                            **options))
    if progress:
        progress(1.0, 1.0)
    summary = _tone_summary(result)
    envelope = _tone_envelope(model, result)
    return _finish(loaded, built, "tone", load, note, summary, envelope, rows, None,
                   tuple(result.notes))


def _tone_summary(result) -> dict:
    data = result.to_dict()
    mean = result.mean_power_W
    spread = sum(o.share * (o.mean_power_W - mean) ** 2 for o in result.orbits)
    # the orbit mix is a basin estimate from a finite ensemble: each start is one sample of
    # the power a beam started at random gets, so the mean's interval is Student's over them
    from scipy.stats import t as student

    n = TONE_INITIAL_STATES
    half = float(student.ppf(0.975, n - 1)) * math.sqrt(spread * n / (n - 1) / n)
    data["ci95_W"] = [max(mean - half, 0.0), mean + half]
    data["ci95_note"] = (
        f"95 % interval of the orbit mix over {n} random starts (Student's t); a basin "
        f"reached by none of them can still hold up to {100 * 3 / n:.2g} % of starts (rule of "
        "three, 95 %) and is not in the interval")
    data["frequency_Hz"] = result.frequency_Hz
    data["amplitude_mps2"] = result.amplitude_mps2
    return data


def tone_sweep_row(result) -> dict:
    return {"frequency_Hz": result.frequency_Hz, "mean_power_W": result.mean_power_W,
            "linear_power_W": result.linear_power_W, "gain_over_linear": result.gain_over_linear,
            "hop_rate_per_s": result.hop_rate_per_s,
            "dominant_orbit": result.orbits[0].kind if result.orbits else None,
            "flagged_share": result.flagged_share}


def _tone_envelope(model: ReducedModel, result) -> ResponseEnvelope:
    """Deflection range: from the lowest to the highest x of any attractor found, each tracked
    at every step of its members' windows.  The union is conservative: a beam that stays on one
    attractor cycles over part of it.  The travel limit when some starts ran into the stops."""
    lo, hi = math.inf, -math.inf
    if result.flagged_share > 0.0 and math.isfinite(model.travel_limit_m):
        lo, hi = -model.travel_limit_m, model.travel_limit_m
    for orbit in result.orbits:
        lo, hi = min(lo, orbit.x_min_m), max(hi, orbit.x_max_m)
    if lo > hi:  # nothing was seen: the beam at rest
        lo = hi = max(analyse_wells(model).wells_m, default=0.0)
    speed = max((orbit.max_abs_v_mps for orbit in result.orbits), default=0.0)
    return ResponseEnvelope(x_min_m=lo, x_max_m=hi, cycles_per_second=result.frequency_Hz,
                            peak_open_circuit_voltage_V=coil_peak_emf(
                                model, speed, result.frequency_Hz, broadband=False))


# --- random ----------------------------------------------------------------------------------
def _predict_random(loaded, built, *, seed, target, progress) -> PowerPrediction:
    from harvester.analysis.random_power import random_mean_power
    from harvester.case.signals import random_excitation

    excitation = random_excitation(loaded)
    load, note = nominal_load(built.model, loaded.case.load.resistance, excitation.psd)
    model = built.model.with_load(load)
    result = random_mean_power(model, excitation.psd, target_relative_half_width=target,
                               seed=seed, progress=progress)
    summary = result.to_dict()
    summary["fast_estimate"] = fast_estimate(model, excitation.psd)
    # The deflection range of the realisations (tracked at every step): all of it when the
    # beam hops, else the range one beam sees in the well it stays in (realisations that
    # started in the other well mirrored onto it).  The travel limit where some ran into it.
    design = result.design
    hopping = design.hop_rate_per_s.mean > 0.0
    lo, hi = design.x_range_m if hopping or not model.is_bistable else design.well_range_m
    if summary.get("flagged_realisations") and math.isfinite(model.travel_limit_m):
        lo, hi = min(lo, -model.travel_limit_m), max(hi, model.travel_limit_m)
    frequency = operating_frequency_Hz(model)
    envelope = ResponseEnvelope(x_min_m=lo, x_max_m=hi, cycles_per_second=frequency)
    emf = coil_peak_emf(model, design.max_abs_v_mps, frequency, broadband=True)
    if emf is not None:
        envelope = replace(envelope, peak_open_circuit_voltage_V=emf)
    warnings = tuple(excitation.warnings) + tuple(summary.get("warnings") or ())
    return _finish(loaded, built, loaded.case.excitation.kind, load, note, summary, envelope,
                   (), excitation.summary.to_dict(), warnings)


def fast_estimate(model: ReducedModel, psd) -> dict:
    """Statistical-linearisation estimate beside the Monte Carlo (labelled approximate)."""
    from harvester.analysis.linearisation import statistical_linearisation

    estimate = statistical_linearisation(model, psd)
    return {"branches": [b.to_dict() for b in estimate.branches], "method": estimate.method}


def _finish(loaded, built, kind, load, note, summary, envelope, rows, spectrum,
            warnings) -> PowerPrediction:
    substrate, ceramic = design_materials(loaded.case)
    limits = loaded.case.limits
    checks, omitted = assess_safety(built, limits, envelope, substrate=substrate,
                                    ceramic=ceramic)
    return PowerPrediction(excitation=kind, load_ohm=load, load_note=note, summary=summary,
                           envelope=envelope, checks=tuple(checks), omitted=tuple(omitted),
                           sweep=rows, spectrum=spectrum, warnings=tuple(warnings))
