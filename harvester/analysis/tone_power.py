"""Mean power under a base-acceleration tone, against the same beam without magnets.

A bistable beam under a tone can end on several attractors (small or large intrawell orbits,
large interwell orbits, chaotic hopping) depending on where it starts.  The power it delivers is
reported as that orbit mix: each attractor's mean load power and its share of an ensemble of
initial states (a basin estimate), and the share-weighted mean.  The baseline is the magnet-free
beam's exact linear steady state (`linear_tone_power`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import minimize_scalar

from harvester.analysis.thresholds import settling_periods
from harvester.dynamics.integrator import (
    FLAG_OK,
    length_scale_m,
    recommended_steps_per_period,
    simulate_tone,
)
from harvester.dynamics.lyapunov import largest_lyapunov_exponent
from harvester.dynamics.orbits import (
    CHAOTIC,
    INTERWELL_PERIODIC,
    basin_samples,
    classify_orbits,
    find_attractors,
)
from harvester.model import (
    CoilCircuit,
    PiezoCircuit,
    ReducedModel,
    analyse_wells,
    well_stiffness,
)

LYAPUNOV_PERIODS = 300  # periods over which a chaotic-looking attractor's exponent is averaged


@dataclass(frozen=True)
class OrbitShare:
    """One attractor under the tone: its kind, basin share and mean load power."""

    kind: str  # "intrawell" | "interwell-periodic" | "chaotic"
    share: float  # fraction of the initial states that end here
    mean_power_W: float
    period: int  # in forcing periods (0: none found)
    well: int  # +1/−1 for an intrawell orbit of a bistable beam, else 0
    hop_rate_per_s: float
    max_abs_x_m: float
    x_min_m: float  # lowest and highest deflection over the members' windows
    x_max_m: float
    max_abs_v_mps: float  # largest tip speed over the members' windows
    lyapunov_per_s: float | None  # largest Lyapunov exponent, where it was computed

    def to_dict(self) -> dict:
        return {"kind": self.kind, "share": self.share, "mean_power_W": self.mean_power_W,
                "period": self.period, "well": self.well,
                "hop_rate_per_s": self.hop_rate_per_s, "max_abs_x_m": self.max_abs_x_m,
                "x_min_m": self.x_min_m, "x_max_m": self.x_max_m,
                "max_abs_v_mps": self.max_abs_v_mps,
                "lyapunov_per_s": self.lyapunov_per_s}


@dataclass(frozen=True)
class TonePower:
    """Mean power under a tone at one frequency, share-weighted over the attractors."""

    frequency_Hz: float
    amplitude_mps2: float
    load_ohm: float
    mean_power_W: float
    hop_rate_per_s: float
    rms_voltage_V: float | None  # piezo
    rms_current_A: float | None  # coil
    linear_power_W: float | None  # same beam without magnets, same load
    orbits: tuple[OrbitShare, ...]
    flagged_share: float  # initial states whose trajectory was flagged (travel limit, divergence)
    notes: tuple[str, ...] = ()

    @property
    def gain_over_linear(self) -> float | None:
        """Mean power over the magnet-free beam's power (> 1 where bistable wins)."""
        if not self.linear_power_W:
            return None
        return self.mean_power_W / self.linear_power_W

    def to_dict(self) -> dict:
        out = {"frequency_Hz": self.frequency_Hz, "amplitude_mps2": self.amplitude_mps2,
               "load_ohm": self.load_ohm, "mean_power_W": self.mean_power_W,
               "hop_rate_per_s": self.hop_rate_per_s}
        if self.rms_voltage_V is not None:
            out["rms_voltage_V"] = self.rms_voltage_V
        if self.rms_current_A is not None:
            out["rms_current_A"] = self.rms_current_A
        out.update({"linear_power_W": self.linear_power_W,
                    "gain_over_linear": self.gain_over_linear,
                    "orbits": [o.to_dict() for o in self.orbits],
                    "flagged_share": self.flagged_share, "notes": list(self.notes)})
        return out


def linear_tone_power(model: ReducedModel, amplitude_mps2: float | np.ndarray,
                      frequency_Hz: float | np.ndarray) -> np.ndarray:
    """Steady-state mean load power [W] of a linear reduced model under a tone.

    With X the displacement phasor and q = g·iωX/(h + iωa_c) the circuit's,

        X = −m_f A / (k − mω² + iωc + iω g²/(h + iωa_c)),   P = ½ · load_factor · |q|²,

    load_factor = 1/R_l (piezo) or R_l (coil).  For a resistive coil at resonance this is
    P = m ζ_e A²/(4 ζ_T² ω_n) (Williams & Yates 1996, Sens. Actuators A 52:8).

    Parameters
    ----------
    model : a linear model (one stiffness term k1 > 0, e.g. `model.without_magnets()`; a
        constant force k0 only moves its rest position)
    amplitude_mps2 : base-acceleration amplitude A [m/s²]
    frequency_Hz : forcing frequency [Hz]
    """
    if (len(model.stiffness) > 1 and any(model.stiffness[1:])) or any(model.even_stiffness[1:]):
        raise ValueError("linear_tone_power needs a linear model (k1 only)")
    omega = 2.0 * math.pi * np.asarray(frequency_Hz, dtype=float)
    lag, g, h = model.circuit_coefficients()
    t = model.transducer
    if t is None or math.isinf(h) or math.isinf(model.load_ohm):
        return np.zeros_like(omega * np.asarray(amplitude_mps2, dtype=float))
    admittance = g / (h + 1j * omega * lag)  # q per unit velocity
    dynamic = (model.k1 - model.mass_kg * omega**2 + 1j * omega * model.damping_N_s_per_m
               + 1j * omega * g * admittance)
    displacement = -model.forcing_mass_kg * np.asarray(amplitude_mps2, dtype=float) / dynamic
    q = admittance * 1j * omega * displacement
    load_factor = 1.0 / model.load_ohm if isinstance(t, PiezoCircuit) else model.load_ohm
    return 0.5 * load_factor * np.abs(q) ** 2


def tone_power_sweep(model: ReducedModel, amplitude_mps2: float,
                     frequencies_Hz: np.ndarray, *, seed: int = 0, n_initial: int = 32,
                     transient_periods: int | None = None, average_periods: int = 64,
                     steps_per_period: int | None = None,
                     confirm_chaos: bool = True) -> list[TonePower]:
    """Mean power under a tone of `amplitude_mps2` [m/s²] at each frequency [Hz], one ensemble
    for all frequencies × `n_initial` initial states (`basin_samples`, reproducible by `seed`).

    Each frequency's trajectories are classified (`classify_orbits`) and grouped into
    attractors (`find_attractors`).  With `confirm_chaos`, every member of an attractor that
    looks chaotic (hops, never repeats) gets its largest Lyapunov exponent; members with a
    positive one stay chaotic, the others are long-period or still settling orbits and are
    reported as interwell-periodic with period 0.  Averages run over `average_periods` after
    `transient_periods` (default `settling_periods` at the highest frequency).  Each orbit's
    `share` is its fraction of the initial states; the mean power, hop rate and RMS circuit
    variable are share-weighted, with flagged states counting as zero.
    """
    freqs = np.atleast_1d(np.asarray(frequencies_Hz, dtype=float))
    if transient_periods is None:
        transient_periods = settling_periods(model, float(freqs.max()))
    if steps_per_period is None:
        steps_per_period = recommended_steps_per_period(model, freqs)
    states = _initial_states(model, amplitude_mps2, n_initial, seed)
    n_s = states.shape[0]
    ens = simulate_tone(model, amplitude_mps2, np.repeat(freqs, n_s),
                        np.tile(states[:, 0], freqs.size), np.tile(states[:, 1], freqs.size),
                        np.tile(states[:, 2], freqs.size), transient_periods=transient_periods,
                        strobe_periods=average_periods, steps_per_period=steps_per_period)
    classes = classify_orbits(model, ens)
    groups = [find_attractors(model, ens, classes, np.arange(k * n_s, (k + 1) * n_s))
              for k in range(freqs.size)]
    exponent = _chaos_exponents(model, ens, groups, steps_per_period) if confirm_chaos else {}
    linear = _linear_baseline(model, amplitude_mps2, freqs)
    results = []
    for k, f in enumerate(freqs):
        orbits = []
        for a in groups[k]:
            if a.kind != CHAOTIC or not exponent:
                orbits.append(_orbit_share(ens, a.kind, a.members, n_s, a.period, a.well, None))
                continue
            lam = np.array([exponent[i] for i in a.members])
            for kind, part in ((CHAOTIC, lam > 0.0), (INTERWELL_PERIODIC, lam <= 0.0)):
                if part.any():
                    orbits.append(_orbit_share(ens, kind, a.members[part], n_s, 0, 0,
                                               float(np.mean(lam[part]))))
        orbits.sort(key=lambda o: -o.share)
        members = slice(k * n_s, (k + 1) * n_s)
        flagged_share = float(np.mean(ens.flag[members] != FLAG_OK))
        results.append(_summary(model, amplitude_mps2, float(f), tuple(orbits), flagged_share,
                                linear[k], ens.mean_square_q[members], classes.kind[members]))
    return results


def tone_power(model: ReducedModel, amplitude_mps2: float, frequency_Hz: float,
               **options) -> TonePower:
    """Mean power under one tone; see `tone_power_sweep` for the method and options."""
    return tone_power_sweep(model, amplitude_mps2, np.array([frequency_Hz]), **options)[0]


def linear_matched_load(model: ReducedModel, frequency_Hz: float) -> float:
    """The load [Ω] that a linear harvester would want at `frequency_Hz`: the magnitude of the
    transducer's source impedance seen from its terminals, with the beam's motion in it.

        Z_m = c + i(ωm − k/ω)                     (mechanical impedance, force/velocity)
        piezo: R = 1/|iωC_p + θ²/Z_m|             coil: R = |R_c + iωL_c + (Bl)²/Z_m|

    k is the small-oscillation stiffness about the rest position (`model.well_stiffness`).  A
    resistive load takes the most power from a linear source at R = |Z_source| (maximum power
    transfer to a resistance).  At resonance with weak coupling these are 1/(ωC_p) (Erturk &
    Inman 2011, Piezoelectric Energy Harvesting, ch. 5) and R_c + (Bl)²/c (Williams & Yates
    1996, Sens. Actuators A 52:8, with the coil resistance in series).
    """
    t = model.transducer
    omega = 2.0 * math.pi * frequency_Hz
    mechanical = complex(max(model.damping_N_s_per_m, 1e-300),
                         omega * model.mass_kg - well_stiffness(model) / omega)
    if isinstance(t, PiezoCircuit):
        return 1.0 / abs(complex(0.0, omega * t.capacitance_F)
                         + t.coupling_N_per_V**2 / mechanical)
    if isinstance(t, CoilCircuit):
        return abs(complex(t.resistance_ohm, omega * t.inductance_H)
                   + t.flux_linkage_V_s_per_m**2 / mechanical)
    return math.inf


# The search for the matched load runs on a larger ensemble than the reported result: the
# orbit mix's power steps with each start that changes attractor, and with few starts two
# distant loads can swap places from one seed to the next.
MATCH_GRID_POINTS = 41  # loads across the search bounds (10 per decade over 4 decades)
MATCH_MIN_STARTS = 128


def matched_load(model: ReducedModel, amplitude_mps2: float, frequency_Hz: float, *,
                 bounds_ohm: tuple[float, float] | None = None, **options) -> TonePower:
    """The load resistance [Ω] that maximises the mean power under a tone, and that power.

    A scan over log R (`MATCH_GRID_POINTS` loads across `bounds_ohm`, each with at least
    `MATCH_MIN_STARTS` starts) picks the best neighbourhood, then `scipy.optimize.
    minimize_scalar` (bounded Brent) refines log R to about 1 %; the result is evaluated at
    that load with the caller's options.  Where the orbit mix changes with the load the power
    is not smooth in R and the optimum is the best of that neighbourhood.  Default bounds:
    1/100 to 100 × the linear matched load (`linear_matched_load`).
    """
    if model.transducer is None:
        raise ValueError("a model without a transducer has no load to match")
    reference = linear_matched_load(model, frequency_Hz)
    lo, hi = bounds_ohm if bounds_ohm is not None else (reference / 100.0, reference * 100.0)
    search = dict(options)
    search["n_initial"] = max(MATCH_MIN_STARTS, int(options.get("n_initial", 0)))
    cache: dict[float, float] = {}

    def evaluate(log_r: float) -> float:
        if log_r not in cache:
            cache[log_r] = -tone_power(model.with_load(10.0**log_r), amplitude_mps2,
                                       frequency_Hz, **search).mean_power_W
        return cache[log_r]

    grid = np.linspace(math.log10(lo), math.log10(hi), MATCH_GRID_POINTS)
    best = int(np.argmin([evaluate(g) for g in grid]))
    a, b = grid[max(best - 1, 0)], grid[min(best + 1, grid.size - 1)]
    minimize_scalar(evaluate, bounds=(a, b), method="bounded", options={"xatol": 0.004})
    return tone_power(model.with_load(10.0 ** min(cache, key=evaluate)), amplitude_mps2,
                      frequency_Hz, **options)


def _initial_states(model: ReducedModel, amplitude_mps2: float, n: int, seed: int) -> np.ndarray:
    if analyse_wells(model).regime == "bistable":
        return basin_samples(model, n, seed)
    scale = length_scale_m(model, amplitude_mps2)
    if math.isfinite(model.travel_limit_m):
        scale = min(scale, 0.5 * model.travel_limit_m / 1.5)
    return basin_samples(model, n, seed, length_m=scale)


def _chaos_exponents(model: ReducedModel, ens, groups, steps_per_period: int) -> dict:
    """Largest Lyapunov exponent [1/s] of every member of a chaotic-looking attractor,
    continued from its final state, keyed by trajectory index."""
    members = [i for attractors in groups for a in attractors if a.kind == CHAOTIC
               for i in a.members]
    if not members:
        return {}
    r = np.array(members)
    est = largest_lyapunov_exponent(model, ens.amplitude_mps2[r], ens.frequency_Hz[r],
                                    ens.x_m[r], ens.v_mps[r], ens.q[r], transient_periods=8,
                                    periods=LYAPUNOV_PERIODS, steps_per_period=steps_per_period,
                                    strobe_phase=ens.strobe_phase)
    return dict(zip(members, est.exponent_per_s.tolist()))


def _orbit_share(ens, kind: str, members: np.ndarray, n_states: int, period: int, well: int,
                 lyapunov: float | None) -> OrbitShare:
    """Share of the initial states in `members` and their mean power, hop rate and reach."""
    time_s = np.maximum(ens.averaging_time_s[members], 1e-300)
    return OrbitShare(kind=kind, share=members.size / n_states,
                      mean_power_W=float(np.mean(ens.mean_load_power_W[members])),
                      period=period, well=well,
                      hop_rate_per_s=float(np.mean(ens.hops[members] / time_s)),
                      max_abs_x_m=float(np.max(ens.max_abs_x_m[members])),
                      x_min_m=float(np.min(ens.x_min_m[members])),
                      x_max_m=float(np.max(ens.x_max_m[members])),
                      max_abs_v_mps=float(np.max(ens.max_abs_v_mps[members])),
                      lyapunov_per_s=lyapunov)


def _linear_baseline(model: ReducedModel, amplitude_mps2: float,
                     freqs: np.ndarray) -> list[float | None]:
    if model.linear_stiffness_N_per_m is None:
        return [None] * freqs.size
    power = linear_tone_power(model.without_magnets(), amplitude_mps2, freqs)
    return [float(p) for p in np.atleast_1d(power)]


def _summary(model: ReducedModel, amplitude_mps2: float, frequency_Hz: float,
             orbits: tuple[OrbitShare, ...], flagged_share: float, linear: float | None,
             mean_square_q: np.ndarray, kind: np.ndarray) -> TonePower:
    """Share-weighted power, hop rate and RMS circuit variable; flagged states count as zero."""
    mean_power = sum(o.share * o.mean_power_W for o in orbits)
    hop_rate = sum(o.share * o.hop_rate_per_s for o in orbits)
    rms = math.sqrt(float(np.sum(mean_square_q[kind >= 0])) / kind.size)
    t = model.transducer
    notes = []
    if flagged_share > 0.0:
        notes.append(f"{100 * flagged_share:.0f} % of the initial states left the trusted range "
                     "(travel limit or divergence); their power is not counted")
    return TonePower(
        frequency_Hz=frequency_Hz, amplitude_mps2=float(amplitude_mps2),
        load_ohm=float(model.load_ohm), mean_power_W=float(mean_power),
        hop_rate_per_s=float(hop_rate),
        rms_voltage_V=rms if isinstance(t, PiezoCircuit) else None,
        rms_current_A=rms if isinstance(t, CoilCircuit) else None,
        linear_power_W=linear, orbits=orbits, flagged_share=flagged_share, notes=tuple(notes),
    )
