"""The operating point of a design: the frequency it prefers, the load it works into, and the
deflection envelope (and open-circuit voltage) that its safety checks see."""

from __future__ import annotations

import math

import numpy as np

from harvester.analysis.safety import ResponseEnvelope, open_circuit_voltage_swing
from harvester.analysis.tone_power import linear_matched_load
from harvester.case.spectra import AccelerationPSD
from harvester.model import CoilCircuit, PiezoCircuit, ReducedModel, analyse_wells


def operating_frequency_Hz(model: ReducedModel) -> float:
    """The frequency the beam prefers: its well frequency (bistable) or its linear frequency."""
    wells = analyse_wells(model)
    return wells.well_frequency_Hz if wells.well_frequency_Hz > 0 else (
        wells.linear_frequency_Hz or 1.0)


def is_linear(model: ReducedModel) -> bool:
    """True for k1 > 0 and no higher terms: a linear oscillator, whose response is exact."""
    return model.k1 > 0.0 and not any(model.stiffness[1:])


def nominal_load(model: ReducedModel, case_resistance: float | None,
                 psd: AccelerationPSD | None = None) -> tuple[float, str]:
    """The case's load, or for "matched" the optimum for the excitation: under a spectrum
    `psd` the fast estimate's (`random_matched_load`, exact for a linear beam), else the
    linear optimum at the operating frequency."""
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


def tone_matched_load(model: ReducedModel, frequency_Hz: float) -> tuple[float, str]:
    """The load [Ω] that takes the most power from a linear harvester under a tone: the
    magnitude of the source impedance seen from the terminals (`linear_matched_load`, maximum
    power transfer to a resistance), exact for a linear beam."""
    if model.transducer is None:
        return math.inf, "no transducer"
    return (linear_matched_load(model, frequency_Hz),
            f"\"matched\": the exact optimum of the linear beam at {frequency_Hz:.4g} Hz")


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


def piezo_voltage_bound(model: ReducedModel, x_min_m: float, x_max_m: float) -> float | None:
    """The largest |v| [V] a piezo can carry over a stroke under any resistive load: the
    open-circuit swing θ(x_max − x_min)/C_p (`open_circuit_voltage_swing`), which the ceramic
    stress check adds as its field term.  None without a piezo."""
    t = model.transducer
    if not isinstance(t, PiezoCircuit):
        return None
    return open_circuit_voltage_swing(t.coupling_N_per_V, t.capacitance_F, x_min_m, x_max_m)


def tone_envelope(model: ReducedModel, result) -> ResponseEnvelope:
    """Deflection range under a tone: from the lowest to the highest x of any attractor found,
    each tracked at every step of its members' windows.  The union is conservative: a beam that
    stays on one attractor cycles over part of it.  The travel limit when some starts ran into
    the stops."""
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
                                model, speed, result.frequency_Hz, broadband=False),
                            peak_voltage_V=piezo_voltage_bound(model, lo, hi))


def random_envelope(model: ReducedModel, result, flagged: bool) -> ResponseEnvelope:
    """Deflection range under random excitation (tracked at every step): all of it when the
    beam hops, else the range one beam sees in the well it stays in (realisations that started
    in the other well mirrored onto it).  The travel limit where some ran into it."""
    design = result.design
    hopping = design.hop_rate_per_s.mean > 0.0
    lo, hi = design.x_range_m if hopping or not model.is_bistable else design.well_range_m
    if flagged and math.isfinite(model.travel_limit_m):
        lo, hi = min(lo, -model.travel_limit_m), max(hi, model.travel_limit_m)
    frequency = operating_frequency_Hz(model)
    return ResponseEnvelope(x_min_m=lo, x_max_m=hi, cycles_per_second=frequency,
                            peak_open_circuit_voltage_V=coil_peak_emf(
                                model, design.max_abs_v_mps, frequency, broadband=True),
                            peak_voltage_V=piezo_voltage_bound(model, lo, hi))


def study_grid(grid, model: ReducedModel, default: tuple[float, float, int]
               ) -> tuple[np.ndarray, str]:
    """The case's [study].frequencies, or `default` (low, high, count) × the operating
    frequency on a geometric grid."""
    if grid is not None:
        return np.linspace(grid.start, grid.stop, grid.count), "[study].frequencies"
    f = operating_frequency_Hz(model)
    low, high, count = default
    return (np.geomspace(low * f, high * f, count),
            f"default: {low:g}–{high:g} × the operating frequency {f:.3g} Hz")
