"""Mean load power under random base acceleration, by Monte Carlo, with a confidence interval.

An ensemble of independent realisations of the excitation (spectral representation, Shinozuka &
Deodatis 1991, Appl. Mech. Rev. 44:191) drives the compiled RK4 ensemble integrator.  After a
transient each realisation's time-averaged load power P_i is one independent sample, so the mean
and its 95 % confidence interval follow from Student's t over realisations:

    P̄ ± t_(0.975, n−1) s/√n.

The run is lengthened block by block until the half-width is below the requested share of P̄
(default ±5 %) for the design and for its magnet-free baseline, or until the cap.

Reference results (tests): under white base acceleration of one-sided PSD G, a beam damped by
c_m and a resistive transducer c_e collects P = m_f² G c_e/(4 m (c_m + c_e)) whatever its
potential (Caughey 1963; Daqaq 2012, Nonlinear Dyn. 69:1063; Halvorsen 2008, J.
Microelectromech. Syst. 17:1061), and never more than m_f² G/(4m).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy.stats import t as student_t

from harvester.case.spectra import AccelerationPSD, psd_variance
from harvester.dynamics.excitation import acceleration_blocks, represented_variance
from harvester.dynamics.integrator import (
    FLAG_DIVERGED,
    FLAG_OK,
    InputStats,
    advance_with_input,
    fastest_frequency_rad_s,
    new_input_stats,
    restarted_input_stats,
)
from harvester.model import CoilCircuit, PiezoCircuit, ReducedModel, analyse_wells, rest_well

STEPS_PER_FAST_PERIOD = 40  # RK4 steps per period of the fastest motion (integrator's measure)
# RK4 reads the input at half steps and weights it like Simpson's rule; forcing content above
# 1/(5 dt) is integrated with a visible bias (input power ~1 % low at 1/(2.3 dt) in the white-
# noise check), so it is cut: far above every resonance it barely moves the beam.
FORCING_STEPS_PER_PERIOD = 5
TRANSIENT_DECAY_TIMES = 5.0  # discard this many amplitude decay times 2m/c before averaging
# average at least this many decay times before the stopping rule may end the run: a rule that
# stops as soon as the interval looks narrow favours runs whose spread is underestimated
MIN_AVERAGING_DECAY_TIMES = 20.0
RESOLUTION_PER_BANDWIDTH = 0.25  # synthesis line spacing as a share of the half-power bandwidth
DEFAULT_STEP_BUDGET = 400_000  # RK4 steps per realisation and model before the cap
MAX_STEPS_PER_BLOCK = 8192  # bounds the input block held in memory


@dataclass(frozen=True)
class Estimate:
    """An ensemble mean with its 95 % confidence interval (Student's t over realisations)."""

    mean: float
    ci95: tuple[float, float]

    @property
    def relative_half_width(self) -> float:
        """Upper half-width over the mean (the lower end may be cut at a physical floor)."""
        half = self.ci95[1] - self.mean
        return half / abs(self.mean) if self.mean != 0.0 else math.inf


@dataclass(frozen=True)
class EnsembleSummary:
    """What one model's ensemble did over the averaging window."""

    power_W: Estimate
    hop_rate_per_s: Estimate
    rms_circuit: float  # V (piezo) or A (coil); 0 without a transducer
    well_share: tuple[float, float]  # share of time right and left of the saddle x_s
    input_power_W: Estimate
    max_abs_x_m: float
    x_range_m: tuple[float, float]  # lowest and highest x of any realisation
    # the same with each realisation's range mirrored onto x > 0 where it lay mostly below 0:
    # the range one beam sees while it stays in one well (the potential is odd-symmetric); with
    # unequal wells, which are not mirror images, the x range itself
    well_range_m: tuple[float, float]
    max_abs_v_mps: float  # largest |ẋ| of any realisation
    averaging_time_s: float  # per realisation (the longest)
    flagged: int  # realisations stopped at the travel limit or diverged
    diverged: int


@dataclass(frozen=True)
class RandomPowerResult:
    """Mean power under random excitation for a design and its magnet-free baseline."""

    design: EnsembleSummary
    baseline: EnsembleSummary | None
    transducer: str  # "piezo" | "coil" | "none"
    load_ohm: float
    realisations: int
    step_s: float
    transient_s: float
    seed: int
    target_relative_half_width: float
    target_reached: bool
    warnings: tuple[str, ...]
    method: str

    @property
    def mean_power_W(self) -> float:
        return self.design.power_W.mean

    @property
    def trusted(self) -> bool:
        """False when any realisation diverged or passed the travel limit (see warnings)."""
        return self.design.flagged == 0 and (self.baseline is None or self.baseline.flagged == 0)

    @property
    def orbits(self) -> list[dict]:
        """One entry for the dominant behaviour: under random excitation the response does not
        settle on separate attractors, so the whole ensemble is one "chaotic" (hopping, settled
        hops seen) or "intrawell" (no settled hop in any realisation) entry."""
        kind = "chaotic" if self.design.hop_rate_per_s.mean > 0.0 else "intrawell"
        return [{"kind": kind, "share": 1.0, "mean_power_W": self.design.power_W.mean}]

    def to_dict(self) -> dict:
        d = self.design
        out = {
            "mean_power_W": d.power_W.mean,
            "ci95_W": list(d.power_W.ci95),
            "hop_rate_per_s": d.hop_rate_per_s.mean,
            "hop_rate_ci95_per_s": list(d.hop_rate_per_s.ci95),
        }
        if self.transducer == "coil":
            out["rms_current_A"] = d.rms_circuit
            out["rms_voltage_V"] = (
                d.rms_circuit * self.load_ohm if math.isfinite(self.load_ohm) else None
            )
        else:
            out["rms_voltage_V"] = d.rms_circuit
        b = self.baseline
        out.update(
            linear_power_W=b.power_W.mean if b else None,
            linear_ci95_W=list(b.power_W.ci95) if b else None,
            linear_hop_rate_per_s=b.hop_rate_per_s.mean if b else None,
            well_share={"positive": d.well_share[0], "negative": d.well_share[1]},
            x_min_m=d.x_range_m[0],
            x_max_m=d.x_range_m[1],
            max_abs_v_mps=d.max_abs_v_mps,
            orbits=self.orbits,
            input_power_W=d.input_power_W.mean,
            max_abs_x_m=d.max_abs_x_m,
            realisations=self.realisations,
            averaging_time_s=d.averaging_time_s,
            transient_s=self.transient_s,
            step_s=self.step_s,
            seed=self.seed,
            # no power (no transducer) has no relative width; JSON has no infinity
            relative_half_width=(
                d.power_W.relative_half_width
                if math.isfinite(d.power_W.relative_half_width)
                else None
            ),
            target_relative_half_width=self.target_relative_half_width,
            target_reached=self.target_reached,
            flagged_realisations=d.flagged,
            trusted=self.trusted,
            warnings=list(self.warnings),
            method=self.method,
        )
        return out


def random_mean_power(
    model: ReducedModel,
    psd: AccelerationPSD,
    *,
    target_relative_half_width: float = 0.05,
    realisations: int = 32,
    seed: int = 0,
    duration_s: float | None = None,
    max_duration_s: float | None = None,
    step_s: float | None = None,
    transient_s: float | None = None,
    baseline: bool | ReducedModel = True,
    progress: Callable[[float, float], None] | None = None,
) -> RandomPowerResult:
    """Monte Carlo mean load power [W] under a base-acceleration PSD, with a 95 % CI.

    Parameters
    ----------
    model : the reduced model
    psd : one-sided base-acceleration PSD [(m/s²)²/Hz]
    target_relative_half_width : stop when the CI half-width is below this share of the mean
        power (design and baseline) [-]
    realisations : independent sample paths run side by side (≥ 2) [-]
    seed : seed of the numpy Generator; the same seed gives the same result
    duration_s : a fixed averaging time per realisation [s] instead of the automatic one
    max_duration_s : cap on the averaging time per realisation [s]; by default
        400 000 steps; hitting it gives a warning
    step_s : RK4 step [s]; by default 1/40 of the fastest period the integrator sees.  Forcing
        content above 1/(5 step_s) is not simulated (reported when it is over 1 % of the
        variance)
    transient_s : time discarded before averaging [s]; by default 5 decay times 2m/c.  With
        no power to converge (open circuit, no transducer) the automatic run averages 20 decay
        times
    baseline : also run the magnet-free beam on the same paths: True for
        `model.without_magnets()` at the model's load, or the baseline model itself (the
        magnet-free beam at a load of its own)
    progress : called after each block with (time averaged so far, expected total) [s]

    Returns
    -------
    RandomPowerResult; `to_dict()` gives the JSON keys of `harvester power`.
    """
    if realisations < 2:
        raise ValueError("a confidence interval needs at least two realisations")
    warnings: list[str] = []
    models = [model]
    if isinstance(baseline, ReducedModel):
        models.append(baseline)
    elif baseline:
        try:
            models.append(model.without_magnets())
        except ValueError as exc:
            warnings.append(f"no magnet-free baseline: {exc}")
    decay = max(_decay_time_s(m) for m in models)
    dt = step_s if step_s is not None else _default_step_s(models)
    transient = transient_s if transient_s is not None else TRANSIENT_DECAY_TIMES * decay
    steps_per_block = min(MAX_STEPS_PER_BLOCK, max(64, int(math.ceil(decay / dt))))
    cap = max_duration_s if max_duration_s is not None else DEFAULT_STEP_BUDGET * dt
    if duration_s is not None:
        cap = duration_s
    resolution = RESOLUTION_PER_BANDWIDTH / (math.pi * decay)
    top = 1.0 / (FORCING_STEPS_PER_PERIOD * dt)
    kept = represented_variance(psd, dt, resolution, top) / psd_variance(psd)
    if kept < 0.99:
        warnings.append(
            f"{100 * (1 - kept):.2g} % of the excitation variance lies above {top:.4g} Hz "
            "and is not simulated"
        )

    rng = np.random.default_rng(seed)
    stream = acceleration_blocks(psd, dt, steps_per_block, realisations, rng, resolution, top)
    states = [_initial_state(m, realisations) for m in models]
    stats = [new_input_stats(realisations, m) for m in models]

    def advance() -> None:
        accel = next(stream)
        for m, state, s in zip(models, states, stats):
            advance_with_input(m, state, accel, dt, s)

    for _ in range(int(math.ceil(transient / (steps_per_block * dt)))):
        advance()
    # tallies restart after the transient; the flags and settled wells carry on
    stats = [restarted_input_stats(s) for s in stats]

    elapsed = 0.0
    while True:
        advance()
        elapsed += steps_per_block * dt
        summaries = [_summarise(m, s) for m, s in zip(models, stats)]
        # a load that takes no power (open circuit, no transducer) has nothing to converge
        widths = [
            s.power_W.relative_half_width for m, s in zip(models, summaries) if _load_takes_power(m)
        ] or [0.0]
        done = (
            duration_s is None
            and elapsed >= MIN_AVERAGING_DECAY_TIMES * decay
            and all(w <= target_relative_half_width for w in widths)
        )
        expected = (
            cap
            if duration_s is not None
            else min(cap, elapsed * max(1.0, max(widths) / target_relative_half_width) ** 2)
        )
        if progress is not None:
            progress(elapsed, max(expected, elapsed))
        # once every realisation of the design has stopped its result cannot improve
        all_stopped = bool(np.all(stats[0].flag != FLAG_OK))
        if done or elapsed >= cap or all_stopped:
            break
    target_reached = all(w <= target_relative_half_width for w in widths)
    if not target_reached and duration_s is None and not all_stopped:
        warnings.append(
            f"stopped at the cap of {cap:.4g} s per realisation with the CI at "
            f"±{100 * max(widths):.3g} % (target ±{100 * target_relative_half_width:g} %)"
        )
    for name, s in zip(("design", "magnet-free baseline"), summaries):
        if s.flagged:
            warnings.append(
                f"{name}: {s.flagged} of {realisations} realisations left the trusted range "
                f"({s.diverged} diverged, the rest passed the travel limit "
                f"{model.travel_limit_m:g} m); "
                + (
                    f"the statistics use the {realisations - s.flagged} that stayed in range"
                    if realisations - s.flagged >= 2
                    else "the statistics use them up to where they stopped"
                )
            )
    return RandomPowerResult(
        design=summaries[0],
        baseline=summaries[1] if len(summaries) > 1 else None,
        transducer=_transducer_kind(model),
        load_ohm=model.load_ohm,
        realisations=realisations,
        step_s=dt,
        transient_s=transient,
        seed=seed,
        target_relative_half_width=target_relative_half_width,
        target_reached=target_reached,
        warnings=tuple(warnings),
        method=(
            f"Monte Carlo: {realisations} independent spectral-representation sample paths "
            "(Shinozuka & Deodatis 1991) through RK4 with step "
            f"{dt:.3g} s; {transient:.3g} s transient discarded, then {elapsed:.4g} s averaged "
            "per realisation; 95 % CI from Student's t over realisations; hops counted when "
            "the beam settles in the other well; orbits: one entry for the dominant behaviour"
        ),
    )


def random_dc_samples(
    model: ReducedModel,
    psd: AccelerationPSD,
    voltages: np.ndarray,
    *,
    realisations: int = 32,
    seed: int = 0,
    target_relative_half_width: float = 0.05,
    floor_W: float = 0.0,
    max_duration_s: float | None = None,
    progress: Callable[[float, float], None] | None = None,
):
    """DC results (`harvester.analysis.node.DcSamples`) of a model behind a bridge
    (`ReducedModel.interface`) under a base-acceleration PSD [(m/s²)²/Hz], at each store
    voltage of `voltages` [V] held constant, by Monte Carlo.

    The same `realisations` sample paths drive every voltage (common random numbers, so that
    the voltages compare without the paths' own scatter).  After 5 decay times of the beam
    alone, 2m/c (a bridge damps less than any resistor, so the beam sets the time), each
    realisation's mean over the run is one sample; the run stops once the 95 % interval of the
    largest mean DC power is within `target_relative_half_width` of it (or of `floor_W` [W],
    where the DC power is smaller: a power that small decides nothing, and its relative
    interval would take hours to close), after at least 20 decay times, or at the step budget
    (`max_duration_s`, by default 400 000 steps).  A realisation that leaves the trusted range
    counts as delivering nothing.
    """
    from harvester.analysis.node import DcSamples

    volts = np.atleast_1d(np.asarray(voltages, dtype=float))
    k = volts.size
    decay = _decay_time_s(model.with_interface(None).with_load(math.inf))
    dt = _default_step_s([model])
    steps_per_block = min(MAX_STEPS_PER_BLOCK, max(64, int(math.ceil(decay / dt))))
    block_s = steps_per_block * dt
    cap = max_duration_s if max_duration_s is not None else DEFAULT_STEP_BUDGET * dt
    resolution = RESOLUTION_PER_BANDWIDTH / (math.pi * decay)
    stream = acceleration_blocks(psd, dt, steps_per_block, realisations,
                                 np.random.default_rng(seed), resolution,
                                 1.0 / (FORCING_STEPS_PER_PERIOD * dt))
    state = np.tile(_initial_state(model, realisations), (k, 1))
    stats = new_input_stats(k * realisations, model, store_V=np.repeat(volts, realisations))

    def advance() -> None:
        advance_with_input(model, state, np.tile(next(stream), (k, 1)), dt, stats)

    for _ in range(int(math.ceil(TRANSIENT_DECAY_TIMES * decay / block_s))):
        advance()
    stats = restarted_input_stats(stats)
    elapsed = 0.0
    while True:
        advance()
        elapsed += block_s
        time = np.maximum(stats.time_total_s, 1e-300)
        power = np.where(stats.flag == FLAG_OK, stats.dc_energy_J / time, 0.0)
        power = power.reshape(k, realisations)
        best = int(np.argmax(power.mean(axis=1)))
        estimate = mean_with_ci(power[best], floor=0.0)
        scale = max(estimate.mean, floor_W)
        width = (estimate.ci95[1] - estimate.mean) / scale if scale > 0.0 else 0.0
        if progress is not None:
            progress(elapsed, max(elapsed, min(cap, elapsed * max(
                1.0, width / target_relative_half_width) ** 2)))
        if ((elapsed >= MIN_AVERAGING_DECAY_TIMES * decay and width <= target_relative_half_width)
                or elapsed >= cap or np.all(stats.flag != FLAG_OK)):
            break
    flagged = (stats.flag != FLAG_OK).reshape(k, realisations)

    def rows(total: np.ndarray) -> np.ndarray:
        return np.where(flagged, 0.0, (total / time).reshape(k, realisations))

    return DcSamples(
        store_V=volts, power_W=power, current_A=rows(stats.charge_C),
        conduction_share=rows(stats.conduction_time_s), diode_loss_W=rows(stats.diode_loss_J),
        flagged=flagged, samples="realisations",
        method=(f"Monte Carlo: {realisations} spectral-representation sample paths (Shinozuka "
                f"& Deodatis 1991), the same through each store voltage, RK4 with step "
                f"{dt:.3g} s; {TRANSIENT_DECAY_TIMES * decay:.3g} s transient, then "
                f"{elapsed:.4g} s averaged; 95 % interval over the realisations (Student's t)"))


def mean_with_ci(
    samples: np.ndarray, confidence: float = 0.95, floor: float = -math.inf
) -> Estimate:
    """Sample mean and its two-sided confidence interval x̄ ± t_(1−α/2, n−1) s/√n for
    independent samples (Student 1908, Biometrika 6:1), the lower end raised to `floor` for a
    quantity that cannot go below it (a power, a rate)."""
    x = np.asarray(samples, dtype=float)
    n = x.size
    mean = float(x.mean())
    if n < 2:
        return Estimate(mean, (floor, math.inf))
    half = float(student_t.ppf(0.5 + 0.5 * confidence, n - 1) * x.std(ddof=1) / math.sqrt(n))
    return Estimate(mean, (max(mean - half, floor), mean + half))


def _summarise(model: ReducedModel, s: InputStats) -> EnsembleSummary:
    """Statistics over the realisations still in range (if two or more are), else over all
    that averaged at all: a realisation stopped early has a short, noisy average that would
    keep the interval wide however long the others run."""
    ran = s.time_total_s > 0.0
    in_range = ran & (s.flag == FLAG_OK)
    if np.count_nonzero(in_range) >= 2:
        ran = in_range
    if not np.any(ran):  # every realisation was stopped in the transient: nothing to average
        nothing = Estimate(0.0, (0.0, 0.0))
        return EnsembleSummary(
            nothing,
            nothing,
            0.0,
            (0.0, 0.0),
            nothing,
            float(np.max(s.max_abs_x_m)),
            *_ranges(s, model.is_symmetric),
            0.0,
            s.n,
            int(np.sum(s.flag == FLAG_DIVERGED)),
        )
    time = s.time_total_s[ran]
    total = float(np.sum(time))
    x_range, well_range, speed = _ranges(s, model.is_symmetric)
    return EnsembleSummary(
        power_W=mean_with_ci(s.energy_load_J[ran] / time, floor=0.0),
        hop_rate_per_s=mean_with_ci(s.hops[ran] / time, floor=0.0),
        rms_circuit=(
            math.sqrt(float(np.mean(s.q2_time[ran] / time)))
            if model.transducer is not None
            else 0.0
        ),
        well_share=(
            float(np.sum(s.time_in_well_pos_s[ran])) / total,
            float(np.sum(s.time_in_well_neg_s[ran])) / total,
        ),
        input_power_W=mean_with_ci(s.input_work_J[ran] / time),
        max_abs_x_m=float(np.max(s.max_abs_x_m)),
        x_range_m=x_range,
        well_range_m=well_range,
        max_abs_v_mps=speed,
        averaging_time_s=float(np.max(time)),
        flagged=int(np.sum(s.flag != FLAG_OK)),
        diverged=int(np.sum(s.flag == FLAG_DIVERGED)),
    )


def _ranges(s: InputStats, mirror: bool) -> tuple[tuple[float, float], tuple[float, float],
                                                 float]:
    """(x range, one-well x range, largest |ẋ|) over the realisations that took a step
    (`EnsembleSummary`; the one-well range mirrors ranges that lay mostly below 0 only with
    `mirror`, for mirror-image wells); ((0, 0), (0, 0), 0) when none did."""
    ran = s.x_min_m <= s.x_max_m
    if not np.any(ran):
        return (0.0, 0.0), (0.0, 0.0), 0.0
    low, high = s.x_min_m[ran], s.x_max_m[ran]
    below = (low + high < 0.0) & mirror
    well_low = np.where(below, -high, low)
    well_high = np.where(below, -low, high)
    return ((float(low.min()), float(high.max())),
            (float(well_low.min()), float(well_high.max())),
            float(np.max(s.max_abs_v_mps[ran])))


def _initial_state(model: ReducedModel, n: int) -> np.ndarray:
    """At rest, alternately in the right and left well (the rest position when monostable), so
    a symmetric design starts with the stationary share of time in each well."""
    state = np.zeros((n, 3))
    wells = analyse_wells(model)
    if wells.regime == "bistable":
        left, right = wells.wells_m
        state[:, 0] = np.where(np.arange(n) % 2 == 0, right, left)
    else:
        state[:, 0] = rest_well(wells)
    return state


def electrical_damping(model: ReducedModel, omega: float) -> float:
    """Equivalent viscous damping [N·s/m] of the circuit at ω: Re[g²/(iωa + h)]."""
    a, g, h = model.circuit_coefficients()
    if g == 0.0 or math.isinf(h):
        return 0.0
    return g * g * h / (h * h + (omega * a) ** 2)


def _decay_time_s(model: ReducedModel) -> float:
    """Amplitude decay time 2m/(c + c_e) [s], c_e taken at the small-oscillation frequency."""
    wells = analyse_wells(model)
    omega = 2.0 * math.pi * wells.well_frequency_Hz
    damping = model.damping_N_s_per_m + electrical_damping(model, omega)
    return 2.0 * model.mass_kg / damping


def _default_step_s(models: list[ReducedModel]) -> float:
    """1/40 of the period of the fastest motion any of the models can make [s]."""
    fast_Hz = max(fastest_frequency_rad_s(m) for m in models) / (2.0 * math.pi)
    return 1.0 / (STEPS_PER_FAST_PERIOD * fast_Hz)


def _load_takes_power(model: ReducedModel) -> bool:
    return model.transducer is not None and 0.0 < model.load_ohm < math.inf


def _transducer_kind(model: ReducedModel) -> str:
    if isinstance(model.transducer, PiezoCircuit):
        return "piezo"
    if isinstance(model.transducer, CoilCircuit):
        return "coil"
    return "none"
