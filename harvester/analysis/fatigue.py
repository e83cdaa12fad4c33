"""Fatigue of the substrate over the service life: rainflow counting, Goodman, Basquin, Miner.

A bistable beam sits pre-bent in a well and may snap through millions of times; under random
excitation its root stress is bimodal (rattling in a well, swinging between wells), and the
spectral shortcuts for Gaussian stress do not hold.  So the damage is counted on the simulated
stress history itself:

1. the turning points of the tip deflection x(t) (`harvester.dynamics.history`), each root
   fibre's stress being σ = s·x;
2. rainflow cycles of x (ASTM E1049-85 §5.4.4, three-point method), each cycle scaled to the
   fibre: amplitude σ_a = |s|·range/2, mean σ_m = s·mean;
3. each cycle's mean corrected by Goodman to a fully reversed amplitude
   S = σ_a/(1 − σ_m/S_ut) (σ_m > 0; a compressive mean is taken as zero);
4. the cycles to failure at S on the Basquin line S = S_f′(2N)^b through two S–N points of the
   material, the long-life one reduced by the Marin factors;
5. Miner's sum D = Σ n_i/N_i per second of record, the worst fibre governing.

Under random excitation a record of minutes misses the rarer, larger peaks that years of service
meet.  Their damage is estimated from the narrow-band (within-a-well) part of the record: its
cycle amplitudes are taken as Rayleigh with the same mean square (E[S²] = 2σ² for a Rayleigh
amplitude), and the expected damage rate of amplitudes above the largest one simulated,

    ν (√2 σ)^m Γ(1 + m/2, S_max²/(2σ²)) / C,       N S^m = C,

is added (the upper incomplete gamma function; with S_max = 0 it is the narrow-band formula of
Miles 1954).  Snap-through cycles are bounded by the wells and are counted as simulated.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import rainflow
from scipy.optimize import brentq
from scipy.special import gamma, gammaincc

from harvester.analysis.random_power import (
    FORCING_STEPS_PER_PERIOD,
    MAX_STEPS_PER_BLOCK,
    RESOLUTION_PER_BANDWIDTH,
    TRANSIENT_DECAY_TIMES,
    _decay_time_s,
    _default_step_s,
    _initial_state,
)
from harvester.analysis.safety import Check, fatigue_life_check, substrate_fibres
from harvester.analysis.thresholds import settling_periods
from harvester.analysis.tone_power import _initial_states
from harvester.build import Built
from harvester.case.schema import YEAR_S, Limits, Tone
from harvester.case.spectra import AccelerationPSD
from harvester.dynamics.excitation import acceleration_blocks
from harvester.dynamics.history import (
    FLAG_OK,
    TurningPoints,
    new_turning_points,
    record_turning_points,
    tone_turning_points,
)
from harvester.dynamics.integrator import recommended_steps_per_period
from harvester.materials import Material
from harvester.model import ReducedModel, analyse_wells

HOUR_S = 3600.0

# Tone: every start is followed to its own steady orbit; the worst orbit governs, since a beam
# may stay on it for life.  More periods sample a chaotic orbit better, at a linear cost.
TONE_STARTS = 32  # as many starts as the power's orbit mix
TONE_PERIODS = 128
# Random: realisations side by side, each starting at rest in a well (alternately).  The record
# is long enough for this many cycles at the operating frequency over all realisations and at
# least `MIN_RECORD_DECAY_TIMES` decay times each, but at most `MAX_RECORD_STEPS` steps each:
# a longer record counts more of the rare large cycles that dominate the damage (and leaves
# less to the tail estimate), at a linear cost in time.
REALISATIONS = 8
RECORD_CYCLES = 20_000
MIN_RECORD_DECAY_TIMES = 40.0
MAX_RECORD_STEPS = 600_000
# The fatigue-strength factor n (the factor on every stress that would use the design life up)
# is found to this relative tolerance.
STRESS_FACTOR_RTOL = 1e-6


# -- handbook functions ----------------------------------------------------------------------


def rainflow_cycles(reversals) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Rainflow cycles of a load history: (range, mean, count) arrays, count 1 or ½.

    The three-point method of ASTM E1049-85 §5.4.4: with X the range of the latest two
    reversals and Y the one before, a Y no greater than X is counted, as a half cycle if it
    holds the starting point, else as a full cycle whose two points are discarded; the ranges
    left at the end are half cycles.  Points that are not reversals are dropped first.

    Parameters
    ----------
    reversals : the history, or only its turning points (any unit)

    Returns
    -------
    (range, mean, count), one entry per counted cycle, in the history's unit

    References
    ----------
    ASTM E1049-85 (reapproved 2017), Standard Practices for Cycle Counting in Fatigue
    Analysis, §5.4.4 and Table X1.  Counting by the `rainflow` package (PyPI).

    Examples
    --------
    >>> rng, mean, n = rainflow_cycles([-2, 1, -3, 5, -1, 3, -4, 4, -2])
    >>> sorted(zip(rng.tolist(), n.tolist()))[:3]
    [(3.0, 0.5), (4.0, 0.5), (4.0, 1.0)]
    """
    cycles = np.array([c[:3] for c in rainflow.extract_cycles(np.asarray(reversals, dtype=float))],
                      dtype=float).reshape(-1, 3)
    return cycles[:, 0], cycles[:, 1], cycles[:, 2]


def goodman_equivalent_amplitude(alternating_Pa, mean_Pa, ultimate_Pa):
    """Fully reversed stress amplitude with the same life as a cycle with a mean (Goodman):

        S = σ_a / (1 − σ_m/S_ut)      σ_m > 0
        S = σ_a                       σ_m ≤ 0   (a compressive mean is not taken as a help)

    and S = inf for a tensile mean at or beyond S_ut.

    Parameters
    ----------
    alternating_Pa : stress amplitude σ_a ≥ 0 [Pa]
    mean_Pa : midrange stress σ_m [Pa], tension positive
    ultimate_Pa : ultimate tensile strength S_ut [Pa]

    References
    ----------
    Budynas & Nisbett (2011), *Shigley's Mechanical Engineering Design*, 9th ed., §6–12
    (modified Goodman line; the same line `goodman_safety_factor` uses).

    Examples
    --------
    >>> float(goodman_equivalent_amplitude(100e6, 200e6, 400e6)) / 1e6
    200.0
    """
    sigma_a = np.asarray(alternating_Pa, dtype=float)
    tension = np.maximum(np.asarray(mean_Pa, dtype=float), 0.0) / ultimate_Pa
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        s = np.where(tension < 1.0, sigma_a / np.maximum(1.0 - tension, 1e-300), np.inf)
    s = np.where(sigma_a > 0.0, s, 0.0)
    return s if s.ndim else float(s)


@dataclass(frozen=True)
class BasquinLine:
    """An S–N line S = S_f′ (2N)^b, equally N S^m = C with m = −1/b, C = ½ S_f′^m."""

    fatigue_coefficient_Pa: float  # S_f′
    exponent: float  # b < 0

    def __post_init__(self) -> None:
        if not (self.fatigue_coefficient_Pa > 0.0 and self.exponent < 0.0):
            raise ValueError("a Basquin line needs S_f′ > 0 and b < 0 (strength falls with life)")

    @property
    def slope_m(self) -> float:
        """m = −1/b of N S^m = C [-]."""
        return -1.0 / self.exponent

    @property
    def constant_C(self) -> float:
        """C = ½ S_f′^m of N S^m = C [Pa^m]."""
        return 0.5 * self.fatigue_coefficient_Pa**self.slope_m


def basquin_line(points, marin_factor: float = 1.0) -> BasquinLine:
    """The Basquin line S = S_f′(2N)^b through two S–N points, the longer-life strength first
    multiplied by the Marin factors k_a k_b k_e (the short-life point is not; Shigley ch. 6):

        b = ln(S₂/S₁)/ln(N₂/N₁),   S_f′ = S₁/(2N₁)^b.

    The line is extended beyond both points without an endurance limit: conservative for
    steels, whose endurance limit the larger cycles of a variable history erode anyway.

    Parameters
    ----------
    points : ((N₁, S₁), (N₂, S₂)), cycles [-] and fatigue strength [Pa], N₁ < N₂, S₁ > S₂
    marin_factor : product of the Marin factors on the long-life strength S₂ [-]

    References
    ----------
    Basquin (1910), Proc. ASTM 10:625.  Budynas & Nisbett (2011), *Shigley's Mechanical
    Engineering Design*, 9th ed., §6–7 (S–N line through 10³ and 10⁶ cycles) and §6–9 (Marin
    factors).

    Examples
    --------
    >>> line = basquin_line(((1e3, 900e6), (1e6, 450e6)))
    >>> round(line.exponent, 6)
    -0.100343
    """
    (n1, s1), (n2, s2) = points
    s2 = s2 * marin_factor
    if not (0.0 < n1 < n2 and s1 > s2 > 0.0):
        raise ValueError(f"S–N points must fall with life: got {points} (Marin {marin_factor})")
    b = math.log(s2 / s1) / math.log(n2 / n1)
    return BasquinLine(s1 / (2.0 * n1) ** b, b)


def basquin_cycles(amplitude_Pa, line: BasquinLine):
    """Cycles to failure at a fully reversed amplitude on a Basquin line:

        N = ½ (S/S_f′)^(1/b)        (inf for S = 0, 0 for S = inf)

    Parameters
    ----------
    amplitude_Pa : S ≥ 0 [Pa]
    line : the S–N line

    References
    ----------
    Basquin (1910), Proc. ASTM 10:625; Budynas & Nisbett (2011), *Shigley's Mechanical
    Engineering Design*, 9th ed., §6–7.

    Examples
    --------
    >>> line = basquin_line(((1e3, 900e6), (1e6, 450e6)))
    >>> round(float(basquin_cycles(450e6, line)))
    1000000
    """
    s = np.asarray(amplitude_Pa, dtype=float)
    with np.errstate(divide="ignore", over="ignore"):
        n = 0.5 * (s / line.fatigue_coefficient_Pa) ** (1.0 / line.exponent)
    return n if n.ndim else float(n)


def miner_damage(amplitude_Pa, count, line: BasquinLine) -> float:
    """Palmgren–Miner damage sum D = Σ n_i/N_i of cycles on a Basquin line [-]; failure at 1.

    Parameters
    ----------
    amplitude_Pa : fully reversed amplitude S_i of each cycle [Pa] (Goodman-corrected)
    count : n_i, cycles at S_i (½ for a rainflow half cycle) [-]
    line : the S–N line

    References
    ----------
    Miner (1945), J. Appl. Mech. 12:A159; Palmgren (1924), Z. VDI 68:339.

    Examples
    --------
    >>> line = basquin_line(((1e3, 900e6), (1e6, 450e6)))
    >>> round(miner_damage([450e6], [2.5e5], line), 12)
    0.25
    """
    with np.errstate(divide="ignore"):
        share = np.asarray(count, dtype=float) / basquin_cycles(amplitude_Pa, line)
    return float(np.sum(share))


def rayleigh_tail_damage_rate(cycle_rate_per_s: float, rms_Pa: float, threshold_Pa: float,
                              line: BasquinLine) -> float:
    """Expected damage per second [1/s] from the cycles above a threshold amplitude when the
    amplitudes are Rayleigh-distributed (narrow-band Gaussian stress of RMS σ):

        ν ∫_{S₀}^∞ (S/σ²) e^(−S²/2σ²) S^m/C dS = ν (√2 σ)^m Γ(1 + m/2) Q(1 + m/2, S₀²/2σ²)/C

    with Q the regularised upper incomplete gamma function, N S^m = C the S–N line.  With
    S₀ = 0 it is the narrow-band damage rate of Miles (1954).

    Parameters
    ----------
    cycle_rate_per_s : ν, cycles per second (ν₀⁺, the mean up-crossing rate, for narrow band)
    rms_Pa : σ, RMS of the stress about its mean [Pa]
    threshold_Pa : S₀ ≥ 0 [Pa]
    line : the S–N line

    References
    ----------
    Miles (1954), J. Aeronaut. Sci. 21:753; Wirsching & Light (1980), J. Struct. Div. ASCE
    106:1593.

    Examples
    --------
    >>> line = BasquinLine(1e9, -1 / 3)  # m = 3
    >>> rate = rayleigh_tail_damage_rate(1.0, 1e7, 0.0, line)
    >>> round(rate * line.constant_C / ((2 ** 0.5 * 1e7) ** 3 * math.gamma(2.5)), 12)
    1.0
    """
    if not (rms_Pa > 0.0 and cycle_rate_per_s > 0.0):
        return 0.0
    m = line.slope_m
    scale = math.sqrt(2.0) * rms_Pa
    shape = 1.0 + 0.5 * m
    tail = float(gammaincc(shape, (threshold_Pa / scale) ** 2))
    return cycle_rate_per_s * math.exp(m * math.log(scale) + math.log(gamma(shape))
                                       - math.log(line.constant_C)) * tail


def fatigue_life(damage_per_hour: float) -> float:
    """Life [years] at a steady damage rate: 1/(D per hour × hours per Julian year).

    Examples
    --------
    >>> round(fatigue_life(1.0 / 8766.0), 12)
    1.0
    """
    if damage_per_hour <= 0.0:
        return math.inf
    return 1.0 / (damage_per_hour * YEAR_S / HOUR_S)


# -- the stress history of a design ----------------------------------------------------------


@dataclass(frozen=True)
class DeflectionCycles:
    """Rainflow cycles of the tip deflection of several trajectories (SI)."""

    range_m: np.ndarray
    mean_m: np.ndarray
    count: np.ndarray  # 1 or ½
    trajectory: np.ndarray  # index of the trajectory each cycle came from
    duration_s: np.ndarray  # per trajectory: time over which its reversals were recorded

    @property
    def snap_through(self) -> np.ndarray:
        """Cycles whose two ends lie on opposite sides of x = 0 [bool]."""
        return np.abs(self.mean_m) < 0.5 * self.range_m


def deflection_cycles(record: TurningPoints, *, mirror_one_well: bool) -> DeflectionCycles:
    """Rainflow-count each trajectory's reversals; with `mirror_one_well`, a trajectory that
    stayed below x = 0 throughout is mirrored (x ↦ −x), so that every beam that stays in one
    well loads the fibres as in the positive well (the other well is the mirrored fibres')."""
    parts = []
    for i in range(record.n):
        x = record.reversals(i)
        if mirror_one_well and x.size and np.all(x < 0.0):
            x = -x
        rng, mean, count = rainflow_cycles(x)
        parts.append((rng, mean, count, np.full(rng.size, i)))
    columns = [np.concatenate([p[k] for p in parts]) for k in range(4)]
    return DeflectionCycles(*columns[:3], columns[3].astype(np.int64), record.time_s.copy())


@dataclass(frozen=True)
class FatigueLife:
    """Miner damage of the substrate over the service life, from a simulated stress history.

    Damage rates are per hour of service; the life is in Julian years (365.25 d).
    """

    damage_per_hour: float  # counted + tail, worst fibre (and, under a tone, worst orbit)
    counted_damage_per_hour: float  # from the simulated cycles
    tail_damage_per_hour: float  # estimated for amplitudes beyond the simulated peak
    life_years: float
    design_life_years: float
    margin: float  # life / design life
    stress_factor: float  # factor on every stress that would use the design life up exactly
    design_damage: float  # Miner sum over the design life [-]
    cycles_counted: float  # rainflow cycles (½ per half cycle) over all trajectories
    simulated_duration_s: float  # record time summed over the trajectories
    trajectories: int
    flagged: int  # trajectories stopped at the travel limit or diverged
    failing_share: float  # share of trajectories whose damage rate uses the design life up
    where: str  # the governing fibre
    peak_amplitude_Pa: float  # largest Goodman-equivalent amplitude simulated there
    fatigue_coefficient_Pa: float  # S_f′ of the Basquin line (Marin factors applied)
    basquin_exponent: float  # b
    marin_factor: float  # k_a k_b k_e on the long-life strength
    excitation: str  # "tone" | "random"
    tail_basis: str  # how the tail was estimated (or why there is none)

    def to_dict(self) -> dict:
        return dict(self.__dict__)


def life_from_cycles(cycles: DeflectionCycles, stress_Pa_per_m: np.ndarray,
                     where: tuple[str, ...], line: BasquinLine, ultimate_Pa: float,
                     design_life_s: float, *, pooled: bool, tail: bool,
                     separate_snap_through: bool) -> dict:
    """Damage rates of every fibre (σ = s·x) from deflection cycles, and the governing one.

    pooled : True for realisations of one random process (damage summed over all of them per
        total time); False for trajectories on different orbits (each its own rate, the worst
        governs)
    tail : add the Rayleigh tail beyond the largest simulated amplitude (module notes), fitted
        to the narrow-band cycles: all of them, or with `separate_snap_through` those that do
        not cross x = 0

    Returns the fields of `FatigueLife` that the cycles decide (a dict).
    """
    s = np.asarray(stress_Pa_per_m, dtype=float)[:, None]

    def rates(scale: float):
        amplitude = goodman_equivalent_amplitude(scale * np.abs(s) * 0.5 * cycles.range_m,
                                                 scale * s * cycles.mean_m, ultimate_Pa)
        with np.errstate(divide="ignore"):
            damage = cycles.count / basquin_cycles(amplitude, line)
        per = np.zeros((s.shape[0], cycles.duration_s.size))
        for j in range(s.shape[0]):
            per[j] = np.bincount(cycles.trajectory, damage[j], cycles.duration_s.size)
        each = per / np.maximum(cycles.duration_s, 1e-300)
        counted = per.sum(axis=1, keepdims=True) / max(cycles.duration_s.sum(), 1e-300) \
            if pooled else each
        extra = np.zeros((s.shape[0], 1))
        if tail and amplitude.shape[1]:
            narrow = ~cycles.snap_through if separate_snap_through else np.ones_like(
                cycles.count, dtype=bool)
            n = cycles.count[narrow]
            rate = n.sum() / max(cycles.duration_s.sum(), 1e-300)
            for j in range(s.shape[0]):
                rms = math.sqrt(np.sum(n * amplitude[j, narrow] ** 2) / (2.0 * n.sum())) \
                    if n.sum() > 0 else 0.0
                extra[j] = rayleigh_tail_damage_rate(rate, rms, float(amplitude[j].max()), line)
        return counted, extra, amplitude, each

    counted, extra, amplitude, each = rates(1.0)
    total = counted + extra
    j, k = np.unravel_index(int(np.argmax(total)), total.shape)
    worst = float(total[j, k])
    design_damage = worst * design_life_s
    margin = 1.0 / design_damage if design_damage > 0.0 else math.inf
    per_trajectory = (each + extra).max(axis=0)
    return dict(
        damage_per_hour=worst * HOUR_S,
        counted_damage_per_hour=float(counted[j, k]) * HOUR_S,
        tail_damage_per_hour=float(extra[j, 0]) * HOUR_S,
        life_years=fatigue_life(worst * HOUR_S),
        design_life_years=design_life_s / YEAR_S,
        margin=margin,
        stress_factor=_stress_factor(lambda n: float(np.max(sum(rates(n)[:2]))) * design_life_s,
                                     design_damage, line),
        design_damage=design_damage,
        cycles_counted=float(cycles.count.sum()),
        simulated_duration_s=float(cycles.duration_s.sum()),
        trajectories=int(cycles.duration_s.size),
        failing_share=float(np.mean(per_trajectory * design_life_s >= 1.0)),
        where=where[j],
        peak_amplitude_Pa=float(amplitude[j].max()) if amplitude.shape[1] else 0.0,
    )


def _stress_factor(design_damage_at, damage_at_one: float, line: BasquinLine) -> float:
    """n with design_damage_at(n) = 1: every stress × n uses the design life up exactly."""
    if not damage_at_one > 0.0:
        return math.inf
    if not math.isfinite(damage_at_one):
        return 0.0
    guess = damage_at_one ** (-1.0 / line.slope_m)  # exact for zero means and no tail

    def excess(log_n: float) -> float:
        damage = design_damage_at(math.exp(log_n))
        if math.isnan(damage):  # a mean stress at or past S_ut: Goodman has no life left
            damage = math.inf
        return math.log(max(min(damage, 1e300), 1e-300))

    lo, hi = math.log(guess) - 1.0, math.log(guess) + 1.0
    while excess(lo) > 0.0:
        lo -= 2.0
    while excess(hi) < 0.0:
        hi += 2.0
    return math.exp(brentq(excess, lo, hi, xtol=STRESS_FACTOR_RTOL))


# -- the life of a design under its excitation -----------------------------------------------


def substrate_fatigue_life(built: Built, limits: Limits, model: ReducedModel,
                           excitation: Tone | AccelerationPSD, *, substrate: Material,
                           seed: int = 0) -> tuple[FatigueLife, Check]:
    """Miner life of the substrate under the case's excitation, and its safety check.

    Under a tone, `TONE_STARTS` starts (the power's orbit-mix starts) each settle on their
    orbit and are recorded over `TONE_PERIODS` periods; the worst orbit governs (a beam can
    stay on it for life) and `failing_share` says how many starts end on an orbit that uses
    the design life up.  Under a PSD, `REALISATIONS` independent sample paths are recorded
    after the power's transient and pooled, with the Rayleigh tail added (module notes).

    Parameters
    ----------
    built : the built design (needs a beam section: not a [reduced] case)
    limits : the case's [limits]: design_life [s], marin, safety_factor
    model : the reduced model with its load, as the power prediction ran it
    excitation : the case's tone (frequency [Hz], amplitude [m/s²]) or its one-sided PSD
    substrate : the substrate's material record, with two S–N points (`Material.sn_points`)
    seed : seed of the starts or sample paths

    Returns
    -------
    (FatigueLife, Check) — the check is `harvester.analysis.safety.fatigue_life_check`'s
    """
    if built.beam is None or built.beam_design is None:
        raise ValueError("a [reduced] case has no beam section to take root stresses from")
    points = substrate.sn_points
    if points is None:
        raise ValueError(f"material {substrate.name!r} gives one S–N point; add "
                         "short_life_fatigue_strength (with cycles) to its file")
    line = basquin_line(points, limits.marin.product)
    where, stress = substrate_fibres(built)
    if isinstance(excitation, AccelerationPSD):
        record = random_record(model, excitation, seed)
        cycles = deflection_cycles(record, mirror_one_well=True)
        kind, pooled, tail = "random", True, True
    else:
        record = _tone_record(model, excitation, seed)
        cycles = deflection_cycles(record, mirror_one_well=False)
        kind, pooled, tail = "tone", False, False
    bistable = model.is_bistable
    fields = life_from_cycles(cycles, stress, where, line, substrate.get("ultimate_strength"),
                              limits.design_life, pooled=pooled, tail=tail,
                              separate_snap_through=bistable)
    if tail:
        part = "the within-well cycles (snap-through cycles are bounded by the wells and " \
               "counted as simulated)" if bistable else "all cycles"
        tail_basis = (f"Rayleigh tail beyond the largest simulated amplitude, fitted to {part} "
                      "(E[S²] = 2σ²), ν(√2σ)^m Γ(1 + m/2, S_max²/2σ²)/C (Miles 1954)")
    else:
        tail_basis = ("none: a steady orbit repeats; a chaotic one is sampled over "
                      f"{TONE_PERIODS} periods and its rarer, larger swings are not extrapolated")
    life = FatigueLife(**fields, flagged=int(np.sum(record.flag != FLAG_OK)),
                       fatigue_coefficient_Pa=line.fatigue_coefficient_Pa,
                       basquin_exponent=line.exponent, marin_factor=limits.marin.product,
                       excitation=kind, tail_basis=tail_basis)
    return life, fatigue_life_check(life, limits.safety_factor, substrate, points)


def _tone_record(model: ReducedModel, tone: Tone, seed: int) -> TurningPoints:
    states = _initial_states(model, tone.amplitude, TONE_STARTS, seed)
    return tone_turning_points(model, tone.amplitude, tone.frequency, states,
                               transient_periods=settling_periods(model, tone.frequency),
                               periods=TONE_PERIODS,
                               steps_per_period=recommended_steps_per_period(model,
                                                                             tone.frequency))


def random_record(model: ReducedModel, psd: AccelerationPSD, seed: int = 0, *,
                  realisations: int = REALISATIONS, cycles: float = RECORD_CYCLES,
                  max_steps: int = MAX_RECORD_STEPS) -> TurningPoints:
    """Reversals of independent sample paths of base acceleration of one-sided PSD `psd`.

    Each realisation starts at rest in a well (alternately), runs the power Monte Carlo's
    transient and is then recorded for `cycles` cycles at the small-oscillation frequency over
    all realisations, or `MIN_RECORD_DECAY_TIMES` decay times if longer, but at most
    `max_steps` steps; with the Monte Carlo's step, line spacing and forcing cut-off
    (`harvester.analysis.random_power`), so that both see the same process.
    """
    decay = _decay_time_s(model)
    dt = _default_step_s([model])
    wells = analyse_wells(model)
    frequency = wells.well_frequency_Hz or wells.linear_frequency_Hz or 1.0 / decay
    duration = max(MIN_RECORD_DECAY_TIMES * decay, cycles / (realisations * frequency))
    duration = min(duration, max_steps * dt)
    # few long blocks: each call of the parallel kernel waits for its slowest thread
    steps = MAX_STEPS_PER_BLOCK
    stream = acceleration_blocks(psd, dt, steps, realisations, np.random.default_rng(seed),
                                 RESOLUTION_PER_BANDWIDTH / (math.pi * decay),
                                 1.0 / (FORCING_STEPS_PER_PERIOD * dt))
    record = new_turning_points(_initial_state(model, realisations))
    for _ in range(int(math.ceil(TRANSIENT_DECAY_TIMES * decay / (steps * dt)))):
        record_turning_points(model, record, next(stream), dt, keep=False)
    for _ in range(int(math.ceil(duration / (steps * dt)))):
        record_turning_points(model, record, next(stream), dt)
        if np.all(record.full | (record.flag != FLAG_OK)):
            break
    return record
