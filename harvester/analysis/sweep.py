"""Slow sweeps of a tone's frequency or amplitude: which orbit the beam follows, and where it jumps.

A bistable (or hardening) harvester under a tone has coexisting orbits, and which one it rides
depends on its history: a machine that runs up to speed, or down, carries the beam along one
branch of its response until that branch ends and the beam jumps to another.  The branches end
at saddle-node (fold) bifurcations, so an up-sweep and a down-sweep jump at different
frequencies and enclose a hysteresis loop (Nayfeh & Mook 1979, Nonlinear Oscillations, §4.1).

Method: a staircase of dwells, one beam per path, many paths in one ensemble.  Each path's tone
a(t) = A cos ωt is held for a whole number P of forcing periods at a time (a dwell), and every
dwell continues from the previous dwell's final state.  Each dwell starts at forcing phase
ωt = 0 (the integrator's strobe phase) and ends at it after P whole periods, so the forcing is
continuous in phase across each step of frequency.  After a dwell of P periods at f_k the swept
quantity moves on by the rate times the dwell's duration,

    f_(k+1) = f_k ± R P / f_k          (frequency sweep, R [Hz/s])
    A_(k+1) = A_k ± R_A P / f          (amplitude sweep, R_A [m/s² per s]),

so the staircase follows f = f_0 ± R t, and as the dwells shrink to one period it becomes the
continuous sweep (phase ∫2πf dt): `tests/test_sweep.py` checks the jump of a hardening
oscillator against a chirp integrated by scipy, and that it converges as P falls.

Dwell, step and default rate.  The dwell is the number of periods in which the rate moves the
swept quantity by one step, at least one period.  The step is STEP_BANDWIDTH_FRACTION of the
half-power bandwidth σ/π [Hz] of the beam (σ = c/2m, the amplitude decay rate,
`decay_rate_per_s`), or AMPLITUDE_STEP_FRACTION of the largest amplitude swept.  The default
rate holds each step for SETTLE_DECAYS decay times (R = step · σ / SETTLE_DECAYS), so every
dwell ends within e^(−SETTLE_DECAYS) of the steady state at its frequency: a quasi-static sweep,
slow enough that its result no longer depends on the rate (the command checks this by running
the same sweeps at twice the rate alongside).

Each dwell is tallied over its last WINDOW_PERIODS periods (or, in short dwells, the dwells that
make up the last WINDOW_PERIODS periods): the peak |x|, the swing (x_max − x_min)/2, the mean
load power, the zero crossings and the stroboscopic points, which classify it as in
`harvester.dynamics.orbits` (no crossing: intrawell; crossings and repeating points:
interwell-periodic; crossings and no repetition: chaotic).  A jump is a change of the orbit
that lasts (PERSIST_DECAYS decay times, or to the end of the path: intrawell in one well, in the
other, hopping, or striking the stops; a shorter spell is the transient of the jump), or a
change of the swing by more than JUMP_RATIO between neighbouring windows (a window and the one
at least a step before it) of an intrawell orbit, to a level that holds: a jump between a large
and a small orbit in one well, as on a hardening oscillator's fold (harvester/METHODS.md §11).

References
----------
Nayfeh & Mook (1979), Nonlinear Oscillations, Wiley, §4.1 (jumps of the forced Duffing
oscillator at the folds of its frequency response).
Stanton, Owens & Mann (2012), J. Sound Vib. 331:3617 (harmonic balance of the bistable
harvester's interwell orbit and its hysteresis).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numba
import numpy as np

from harvester.analysis.thresholds import settling_periods
from harvester.dynamics.integrator import FLAG_OK, recommended_steps_per_period, simulate_tone
from harvester.dynamics.orbits import (
    CHAOTIC,
    FLAGGED,
    INTERWELL_PERIODIC,
    INTRAWELL,
    KINDS,
    repeating_period,
)
from harvester.model import ReducedModel, analyse_wells

FREQUENCY = "frequency"
AMPLITUDE = "amplitude"
UP, DOWN = "up", "down"
STOPS = "stops"  # the orbit label of a path that struck its stops

# A step of 5 % of the half-power bandwidth resolves a resonance peak to about 0.3 % of its
# height; smaller steps cost more dwells (one integrator call each) for no visible change.
STEP_BANDWIDTH_FRACTION = 0.05
# The same for amplitude sweeps, as a fraction of the largest amplitude swept.
AMPLITUDE_STEP_FRACTION = 0.005
# Decay times each step is held at the default rate: e^-6 = 0.25 % of a step's transient is
# left when the dwell ends.  More is slower; fewer lets the response lag the sweep.
SETTLE_DECAYS = 6.0
# Periods each dwell is tallied and classified over: enough for orbits of up to MAX_PERIOD
# periods to repeat twice in the window's second half.
WINDOW_PERIODS = 32
MAX_PERIOD = 4
# Largest scaled distance between stroboscopic points p periods apart that still counts as a
# repetition.  Looser than for a fixed tone (1e-3): on a sweep the orbit drifts with the
# frequency, about 0.003 of the well per period at resonance at the default rate; chaotic
# points scatter over the whole well.
SWEEP_TOLERANCE = 0.05
# A change of the orbit that lasts fewer decay times than this (about three default dwells) is
# a transient: the chaotic hopping on the way from one orbit to another, or flicker (chaotic
# hopping that pauses in one well for a while), not an orbit of its own.
PERSIST_DECAYS = 20.0
# Swing ratio between neighbouring windows that counts as a jump between a large and a small
# orbit of one kind.  On a steady branch the neighbouring windows of a default sweep differ by
# at most about 10 % (the steepest flank of a resonance over one step); jumps between the
# branches of a fold are factors of 2 and more.
JUMP_RATIO = 1.5
# Paths that fit in one of the integrator's blocks (8 lanes of SIMD) run on one thread: a
# second thread would have nothing to do, and waking it for each of a sweep's hundreds of short
# calls cost up to 20 ms a call on a busy machine (ten times the call itself).
ONE_THREAD_PATHS = 8
PHASE = 0.0  # forcing phase ωt at the start of every dwell (a(t) = A cos ωt at its crest)


def decay_rate_per_s(model: ReducedModel) -> float:
    """Amplitude decay rate σ [1/s] of the beam's free motion, e^(−σt): σ = c/(2m).

    c is the mechanical damping, plus the circuit's quasi-static damping g²/h for a circuit
    without a lag (a resistive coil); a piezo's or an inductive coil's electrical damping
    depends on the frequency and is left out, so σ errs low (sweeps err slow).  The half-power
    bandwidth of a lightly damped resonance is 2σ [rad/s] = σ/π [Hz].

    >>> decay_rate_per_s(ReducedModel(mass_kg=2.0, damping_N_s_per_m=0.4, stiffness=(100.0,),
    ...                               forcing_mass_kg=2.0))
    0.1

    References
    ----------
    Thomson & Dahleh (1998), Theory of Vibration with Applications, 5th ed., ch. 2 (free
    vibration with viscous damping) and ch. 3 (half-power bandwidth).
    """
    lag, g, h = model.circuit_coefficients()
    c = model.damping_N_s_per_m
    if lag == 0.0 and g and h and math.isfinite(h):
        c += g * g / h
    return c / (2.0 * model.mass_kg)


def frequency_step_Hz(model: ReducedModel) -> float:
    """Staircase step of a frequency sweep [Hz]: STEP_BANDWIDTH_FRACTION of the half-power
    bandwidth σ/π (`decay_rate_per_s`)."""
    return STEP_BANDWIDTH_FRACTION * decay_rate_per_s(model) / math.pi


def amplitude_step_mps2(top_mps2: float) -> float:
    """Staircase step of an amplitude sweep [m/s²]: AMPLITUDE_STEP_FRACTION of the largest
    amplitude swept."""
    return AMPLITUDE_STEP_FRACTION * top_mps2


def default_rate(model: ReducedModel, step: float) -> float:
    """The rate [step unit per s] that holds each step for SETTLE_DECAYS decay times:
    R = step · σ / SETTLE_DECAYS."""
    return step * decay_rate_per_s(model) / SETTLE_DECAYS


@dataclass(frozen=True)
class SweepPlan:
    """One path: what is swept, from where to where, how fast, and where the beam starts."""

    over: str  # FREQUENCY or AMPLITUDE
    start: float  # first value of the swept quantity [Hz] or [m/s²]
    stop: float  # last value
    fixed: float  # the other quantity: amplitude [m/s²] or frequency [Hz]
    rate: float  # |d(swept)/dt| [Hz/s] or [m/s² per s]
    step: float  # staircase step [Hz] or [m/s²]
    well: int = 1  # starts at rest in the well on this side of x = 0 (0: at x = 0)

    @property
    def direction(self) -> str:
        return UP if self.stop >= self.start else DOWN


@dataclass(frozen=True)
class SweptPath:
    """One path's dwells in order (the first is the lead-in at the start value, the last, with
    `hold_periods`, a dwell at the stop value); per-dwell arrays over its tally window."""

    plan: SweepPlan
    decay_rate_per_s: float  # σ of the beam (`decay_rate_per_s`)
    frequency_Hz: np.ndarray
    amplitude_mps2: np.ndarray
    end_s: np.ndarray  # time from the start of the lead-in to the end of each dwell
    elapsed_periods: np.ndarray  # forcing periods from the start, at the end of each dwell
    peak_m: np.ndarray  # largest |x| over the window
    swing_m: np.ndarray  # (x_max − x_min)/2 over the window
    mean_power_W: np.ndarray  # mean load power over the window
    kind: np.ndarray  # index into KINDS, or FLAGGED where the beam struck its stops
    well: np.ndarray  # ±1 for an intrawell orbit of a bistable beam, else 0
    period: np.ndarray  # repeating period of the stroboscopic points (0: none)
    window_periods: np.ndarray  # periods the tallies of each dwell cover

    @property
    def swept(self) -> np.ndarray:
        return self.frequency_Hz if self.plan.over == FREQUENCY else self.amplitude_mps2


@dataclass
class _Tallies:
    """A path's dwells as they come, before the windows are put together."""

    frequency: list
    amplitude: list
    duration: list  # [s]
    elapsed: list
    window: list
    low: list
    high: list
    energy: list  # mean power × window periods
    crossings: list
    strobe_x: list
    strobe_v: list
    flagged: list


def run_sweeps(model: ReducedModel, plans: Sequence[SweepPlan], *,
               lead_in_periods: int | None = None, hold_periods: int = 0,
               window_periods: int = WINDOW_PERIODS,
               progress: Callable[[float, float], None] | None = None) -> list[SweptPath]:
    """Follow one beam along each plan, all plans as one ensemble (module notes).

    Each beam starts at rest in its plan's well, settles for `lead_in_periods` (default
    `settling_periods` at the highest start frequency) at the start value, then steps along
    its staircase; with `hold_periods` it dwells that long at the stop value at the end.  All
    paths share each dwell's length P: the largest whole number of periods in which no path
    moves by more than its step.  A path that strikes its stops (the model's travel limit)
    ends there.

    Parameters
    ----------
    model : the reduced model at its load
    plans : the paths; frequencies [Hz] and amplitudes [m/s²] positive
    progress : callback(done, total) on the share of the sweep time covered
    """
    if not plans:
        return []
    for plan in plans:
        if plan.over not in (FREQUENCY, AMPLITUDE):
            raise ValueError(f"a sweep runs over {FREQUENCY} or {AMPLITUDE}, not {plan.over!r}")
        if not (plan.rate > 0.0 and plan.step > 0.0 and math.isfinite(plan.rate)):
            raise ValueError("a sweep needs a positive rate and step")
        frequencies = (plan.start, plan.stop) if plan.over == FREQUENCY else (plan.fixed,)
        if min(frequencies) <= 0.0:
            raise ValueError("a swept tone needs positive frequencies")
    n = len(plans)
    over_f = np.array([p.over == FREQUENCY for p in plans])
    value = np.array([p.start for p in plans], dtype=float)
    stop = np.array([p.stop for p in plans], dtype=float)
    fixed = np.array([p.fixed for p in plans], dtype=float)
    rate = np.array([p.rate for p in plans], dtype=float)
    step = np.array([p.step for p in plans], dtype=float)
    sign = np.sign(stop - value)
    x = _rest_positions(model, [p.well for p in plans])
    v = np.zeros(n)
    q = np.zeros(n)
    tallies = [_Tallies(*([] for _ in range(12))) for _ in range(n)]
    time = np.zeros(n)
    elapsed = np.zeros(n)
    done = np.zeros(n, dtype=bool)
    total_s = np.abs(stop - value) / rate

    def frequency() -> np.ndarray:
        return np.where(over_f, value, fixed)

    def amplitude() -> np.ndarray:
        return np.where(over_f, fixed, value)

    def dwell(active: np.ndarray, periods: int) -> None:
        window = min(periods, window_periods)
        f, a = frequency()[active], amplitude()[active]
        threads = numba.get_num_threads()
        if active.size <= ONE_THREAD_PATHS:
            numba.set_num_threads(1)
        try:
            ens = simulate_tone(model, a, f, x[active], v[active], q[active],
                                transient_periods=periods - window, strobe_periods=window,
                                steps_per_period=recommended_steps_per_period(model, f),
                                strobe_phase=PHASE)
        finally:
            numba.set_num_threads(threads)
        x[active], v[active], q[active] = ens.x_m, ens.v_mps, ens.q
        elapsed[active] += periods
        for j, i in enumerate(active):
            t = tallies[i]
            t.frequency.append(f[j])
            t.amplitude.append(a[j])
            t.duration.append(periods / f[j])
            t.elapsed.append(elapsed[i])
            t.window.append(window)
            t.low.append(ens.x_min_m[j])
            t.high.append(ens.x_max_m[j])
            t.energy.append(ens.mean_load_power_W[j] * window)
            t.crossings.append(ens.zero_crossings[j])
            t.strobe_x.append(ens.strobe_x_m[j])
            t.strobe_v.append(ens.strobe_v_mps[j])
            t.flagged.append(ens.flag[j] != FLAG_OK)
        done[active[ens.flag != FLAG_OK]] = True

    lead = lead_in_periods
    if lead is None:
        lead = settling_periods(model, float(np.max(frequency())))
    dwell(np.arange(n), lead + window_periods)
    done |= sign == 0.0
    while not done.all():
        active = np.flatnonzero(~done)
        f = frequency()[active]
        periods = int(max(1, math.floor(np.min(step[active] * f / rate[active]))))
        dwell(active, periods)
        at_stop = value[active] == stop[active]
        done[active[at_stop]] = True
        moving = active[~at_stop & ~done[active]]
        dt = periods / frequency()[moving]
        time[moving] += dt
        value[moving] += sign[moving] * rate[moving] * dt
        past = (value[moving] - stop[moving]) * sign[moving] >= 0.0
        value[moving[past]] = stop[moving[past]]
        if progress is not None:
            progress(float(np.mean(np.minimum(time / np.maximum(total_s, 1e-300), 1.0))), 1.0)
    if hold_periods > 0:
        held = np.array([i for i in range(n) if not tallies[i].flagged[-1]], dtype=int)
        if held.size:
            dwell(held, hold_periods + window_periods)
    sigma = decay_rate_per_s(model)
    return [_path(model, plan, tallies[i], window_periods, sigma)
            for i, plan in enumerate(plans)]


def _rest_positions(model: ReducedModel, wells: Sequence[int]) -> np.ndarray:
    """x [m] of the beam at rest in each named well (+1: the well at x > 0)."""
    found = analyse_wells(model)
    if found.regime != "bistable":
        return np.zeros(len(wells))
    low, high = min(found.wells_m), max(found.wells_m)
    return np.array([high if w > 0 else low if w < 0 else 0.0 for w in wells])


def _path(model: ReducedModel, plan: SweepPlan, t: _Tallies, window: int,
          sigma: float) -> SweptPath:
    """Put each dwell's window together (the last `window` periods) and classify it."""
    w = np.array(t.window, dtype=float)
    covered = np.cumsum(w)
    first = np.searchsorted(covered, covered - window, side="right")
    energy = np.concatenate(([0.0], np.cumsum(t.energy)))
    crossings = np.concatenate(([0.0], np.cumsum(t.crossings)))
    count = np.arange(w.size)
    span = covered - np.concatenate(([0.0], covered))[first]
    power = (energy[count + 1] - energy[first]) / span
    crossed = crossings[count + 1] - crossings[first]
    lows, highs = np.asarray(t.low), np.asarray(t.high)
    low = np.array([lows[j:k + 1].min() for j, k in zip(first, count)])
    high = np.array([highs[j:k + 1].max() for j, k in zip(first, count)])
    peak = np.maximum(np.abs(low), np.abs(high))
    xs, vs = np.concatenate(t.strobe_x), np.concatenate(t.strobe_v)
    rows = covered.astype(int)[:, None] - window + np.arange(window)
    f = np.asarray(t.frequency)
    wells = analyse_wells(model)
    bistable = wells.regime == "bistable"
    length = np.full(w.size, max(wells.wells_m)) if bistable else np.where(peak > 0, peak, 1.0)
    period = repeating_period(xs[rows] / length[:, None],
                              vs[rows] / (length * 2.0 * math.pi * f)[:, None],
                              tolerance=SWEEP_TOLERANCE,
                              max_period=max(0, min(MAX_PERIOD, (window - 1) // 2)))
    stays = crossed == 0 if bistable else np.ones(w.size, dtype=bool)
    kind = np.where(stays, KINDS.index(INTRAWELL),
                    np.where(period > 0, KINDS.index(INTERWELL_PERIODIC), KINDS.index(CHAOTIC)))
    flagged = np.asarray(t.flagged)
    kind = np.where(flagged, FLAGGED, kind)
    well = np.where(stays & bistable & ~flagged, np.sign(xs[rows[:, -1]]), 0).astype(np.int64)
    return SweptPath(plan=plan, decay_rate_per_s=sigma, frequency_Hz=f,
                     amplitude_mps2=np.asarray(t.amplitude), end_s=np.cumsum(t.duration),
                     elapsed_periods=np.asarray(t.elapsed), peak_m=peak,
                     swing_m=0.5 * (high - low), mean_power_W=power,
                     kind=kind.astype(np.int64), well=well, period=period,
                     window_periods=span)


# -- reading a path: jumps, the interwell band, values on a grid -------------------------------
@dataclass(frozen=True)
class Jump:
    """A jump of one path: at which dwell, from which orbit to which."""

    direction: str
    index: int  # the first dwell on the new orbit
    frequency_Hz: float
    amplitude_mps2: float
    from_orbit: str  # "intrawell", "interwell-periodic", "chaotic", "stops"; "large …"/"small …"
    to_orbit: str


def _state(path: SweptPath) -> list[tuple]:
    """The coarse orbit of each dwell: ("stops",), ("intrawell", well) or ("hopping",)."""
    out = []
    for kind, well in zip(path.kind, path.well):
        if kind == FLAGGED:
            out.append((STOPS,))
        elif kind == KINDS.index(INTRAWELL):
            out.append((INTRAWELL, int(well)))
        else:
            out.append(("hopping",))
    return out


def _lasting_runs(path: SweptPath, states: list) -> list[tuple[int, int, object]]:
    """Runs (first, last, state) of equal states that last PERSIST_DECAYS decay times or reach
    the end; a shorter run is a transient and joins the lasting run before it."""
    runs: list[list] = []
    start = 0
    for k in range(1, len(states) + 1):
        if k == len(states) or states[k] != states[start]:
            runs.append([start, k - 1, states[start]])
            start = k
    before = np.concatenate(([0.0], path.end_s))
    least = PERSIST_DECAYS / path.decay_rate_per_s if path.decay_rate_per_s > 0 else 0.0
    lasting: list[list] = []
    for i, (first, last, state) in enumerate(runs):
        if lasting and before[last + 1] - before[first] < least and i < len(runs) - 1:
            lasting[-1][1] = last
            continue
        if lasting and lasting[-1][2] == state:
            lasting[-1][1] = last
        else:
            lasting.append([first, last, state])
    return [tuple(r) for r in lasting]


WELL_NAMES = {1: " (x > 0)", -1: " (x < 0)", 0: ""}


def _label(path: SweptPath, first: int, last: int) -> str:
    """The orbit of dwells first..last: "intrawell (x > 0)" and the like, the most common
    hopping kind, or "stops"."""
    kinds = path.kind[first:last + 1]
    if kinds[0] == FLAGGED:
        return STOPS
    if kinds[0] == KINDS.index(INTRAWELL):
        return INTRAWELL + WELL_NAMES[int(path.well[first])]
    hopping = kinds[kinds != KINDS.index(INTRAWELL)]
    return KINDS[int(np.bincount(hopping).argmax())] if hopping.size else CHAOTIC


def _sizes(path: SweptPath, before: tuple, after: tuple) -> tuple[str, str]:
    """"small "/"large " for a jump between two intrawell runs whose swings differ by more than
    JUMP_RATIO (the last window before, the first three after), else ""."""
    if before[2][0] != INTRAWELL or after[2][0] != INTRAWELL:
        return "", ""
    old = path.swing_m[before[1]]
    new = float(np.median(path.swing_m[after[0]:min(after[0] + 3, after[1] + 1)]))
    if max(old, new) < JUMP_RATIO * min(old, new):
        return "", ""
    return ("small ", "large ") if new > old else ("large ", "small ")


def path_jumps(path: SweptPath) -> list[Jump]:
    """The jumps of one path, in order (module notes): changes of the lasting orbit, and
    changes of the swing by more than JUMP_RATIO on one intrawell orbit (the two branches of a
    fold: a single-well beam's orbits are all intrawell)."""
    runs = _lasting_runs(path, _state(path))
    found = []
    for before, after in zip(runs, runs[1:]):
        old, new = _sizes(path, before, after)
        found.append((after[0], old + _label(path, before[0], before[1]),
                      new + _label(path, after[0], after[1])))
    found += _size_jumps(path, runs)
    found.sort()
    return [Jump(direction=path.plan.direction, index=k, frequency_Hz=float(path.frequency_Hz[k]),
                 amplitude_mps2=float(path.amplitude_mps2[k]), from_orbit=a, to_orbit=b)
            for k, a, b in found]


def _size_jumps(path: SweptPath, runs) -> list[tuple[int, str, str]]:
    """(dwell, from, to) where the swing of an intrawell run (per unit forcing, on an
    amplitude sweep) changes by more than JUMP_RATIO between a steady window and the one at
    least a step later, to a level that holds."""
    end = path.elapsed_periods
    intrawell = path.kind == KINDS.index(INTRAWELL)
    decay = 1.0 / path.decay_rate_per_s if path.decay_rate_per_s > 0 else 0.0
    settle = SETTLE_DECAYS * decay
    # the window before: clear of this one, and at least one step of the swept quantity back,
    # so that a steep but steady branch is judged over one step at any rate
    step_periods = path.plan.step * path.frequency_Hz / path.plan.rate
    back = end - np.maximum(path.window_periods, step_periods)
    began = np.concatenate(([0.0], path.end_s[:-1]))
    # steady: on the same intrawell orbit kind for SETTLE_DECAYS already (past a transient)
    since = np.zeros(intrawell.size)
    for k in range(intrawell.size):
        since[k] = since[k - 1] if k and intrawell[k - 1] and intrawell[k] else began[k]
    steady = intrawell & (path.end_s - since >= settle)
    limit = math.log(JUMP_RATIO)
    # on an amplitude sweep the swing grows with the forcing even on one branch: compare the
    # swing per unit forcing, the same on a linear branch at any amplitude
    level = path.swing_m if path.plan.over == FREQUENCY else np.where(
        path.amplitude_mps2 > 0.0, path.swing_m / np.maximum(path.amplitude_mps2, 1e-300), 0.0)
    found = []
    for first, last, state in runs:
        if state[0] != INTRAWELL:
            continue
        previous_sign = 0.0
        for k in range(first + 1, last + 1):
            j = int(np.searchsorted(end, back[k], side="right")) - 1
            while j >= first and not steady[j] and path.end_s[k] - path.end_s[j] < 2 * settle:
                j -= 1  # back past the transient of the jump
            ratio = math.log(max(level[k], 1e-300) / max(level[j], 1e-300))
            # the new level holds for SETTLE_DECAYS within the run
            later = int(np.searchsorted(path.end_s, path.end_s[k] + settle))
            holds = later <= last and intrawell[k:later + 1].all() and abs(math.log(
                max(level[later], 1e-300) / max(level[k], 1e-300))) < limit
            jumped = (j >= first and steady[j] and intrawell[k] and holds and level[j] > 0.0
                      and abs(ratio) > limit)
            sign = math.copysign(1.0, ratio) if jumped else 0.0
            if jumped and sign != previous_sign:
                name = _label(path, k, k)
                old, new = ("small", "large") if ratio > 0 else ("large", "small")
                found.append((k, f"{old} {name}", f"{new} {name}"))
            previous_sign = sign
    return found


@dataclass(frozen=True)
class HeldBand:
    """Where one path holds the large interwell orbit: the swept range, in sweep order."""

    direction: str
    first: int  # dwell indices
    last: int
    frequency_Hz: tuple[float, float]
    amplitude_mps2: tuple[float, float]
    mean_power_W: float  # mean over the band's dwells


def interwell_bands(path: SweptPath) -> list[HeldBand]:
    """The lasting runs of the interwell-periodic orbit along a path (a spell of anything else
    shorter than PERSIST_DECAYS decay times joins the run before it)."""
    states = ["held" if k == KINDS.index(INTERWELL_PERIODIC) else "other" for k in path.kind]
    bands = []
    for first, last, state in _lasting_runs(path, states):
        if state != "held":
            continue
        bands.append(HeldBand(
            direction=path.plan.direction, first=first, last=last,
            frequency_Hz=(float(path.frequency_Hz[first]), float(path.frequency_Hz[last])),
            amplitude_mps2=(float(path.amplitude_mps2[first]),
                            float(path.amplitude_mps2[last])),
            mean_power_W=float(np.mean(path.mean_power_W[first:last + 1]))))
    return bands


def values_at(path: SweptPath, grid: np.ndarray) -> np.ndarray:
    """Index of the path's dwell nearest each grid value of the swept quantity, after the
    lead-in; −1 outside the path's range (or beyond where it struck its stops)."""
    swept = path.swept
    lo, hi = sorted((path.plan.start, path.plan.stop))
    stepping = np.arange(1, swept.size) if swept.size > 1 else np.arange(swept.size)
    if path.kind[-1] == FLAGGED:
        reach = swept[-1]
        lo, hi = (lo, reach) if path.plan.direction == UP else (reach, hi)
    out = np.full(grid.size, -1, dtype=np.int64)
    inside = (grid >= lo - 1e-12 * abs(hi)) & (grid <= hi + 1e-12 * abs(hi))
    if stepping.size:
        nearest = np.abs(swept[stepping][None, :] - grid[inside][:, None]).argmin(axis=1)
        out[inside] = stepping[nearest]
    return out


def upsweep_power(model: ReducedModel, amplitude_mps2: float, start_Hz: float,
                  stop_Hz: float) -> float | None:
    """Mean load power [W] on the orbit an up-sweep carries the beam to: from rest in the well
    at x > 0 at `start_Hz`, up at the default rate to `stop_Hz` under a tone of
    `amplitude_mps2` [m/s²], then held there for `settling_periods` and averaged over
    WINDOW_PERIODS.  None when the beam struck its stops on the way.

    This is what a machine that runs up to speed leaves the harvester on, against the mix of
    orbits that random starts reach at the same tone.
    """
    step = frequency_step_Hz(model)
    plan = SweepPlan(FREQUENCY, start_Hz, stop_Hz, amplitude_mps2, default_rate(model, step),
                     step, 1)
    path = run_sweeps(model, [plan], hold_periods=settling_periods(model, stop_Hz))[0]
    return None if path.kind[-1] == FLAGGED else float(path.mean_power_W[-1])
