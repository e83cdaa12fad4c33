"""`harvester sweep`: follow the beam through a slow sweep of the tone's frequency or amplitude.

The beam starts at rest in a well (the one at x > 0 unless told otherwise), settles at the start
value and is carried up, down or both ways by the staircase of `analysis.sweep`.  The answer is
what it does along the way: the peak deflection, the mean load power and whether it crosses
between the wells, the jumps from one orbit to another, and the range over which it holds the
large interwell orbit on the way up and on the way down.

The same sweeps run alongside at twice the rate, in the same ensemble (the integrator's blocks
hold eight paths for the price of one): where their jumps agree within a step, the result does
not depend on the rate, and the output says so.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from harvester.analysis.sweep import path_jumps
from harvester.case.load import LoadedCase
from harvester.commands.records import Record
from harvester.errors import CaseError

SWEEP_ROWS = 41  # rows over the swept range when the case's [study] grid does not cover it
CURVE_POINTS = 240  # points per direction in the curves the figure draws
DEFAULT_AMPLITUDE_TOP = 2.0  # without [study].amplitudes: sweep from 0 to this × the tone's
# Longest sweep the command integrates, in forcing periods of one path (about a minute of work
# on 2 cores); the default sweeps of the demos take 10⁴–10⁵.
MAX_SWEEP_PERIODS = 5_000_000
STARTS = {"positive": (1,), "negative": (-1,), "both": (1, -1)}
START_WORDS = {1: "at rest in the well at x > 0", -1: "at rest in the well at x < 0",
               0: "at rest at x = 0"}


@dataclass(frozen=True)
class SweepPoint(Record):
    """The sweep at one value of the swept quantity, one direction (the mean over the paths)."""

    direction: str  # "up" | "down"
    frequency_Hz: float
    amplitude_mps2: float
    peak_m: float | None  # largest |x| over the window (None: the path struck its stops)
    mean_power_W: float | None
    interwell_share: float | None  # of the paths: crossing between the wells
    orbit: str | None  # the most common orbit among the paths


@dataclass(frozen=True)
class JumpRow(Record):
    """A jump from one orbit to another (JSON keys `from` and `to`)."""

    direction: str
    frequency_Hz: float
    amplitude_mps2: float
    from_: str  # "intrawell", "interwell-periodic", "chaotic", "stops"; "large …"/"small …"
    to: str

    def to_json(self) -> dict:
        out = super().to_json()
        out["from"] = out.pop("from_")
        out["to"] = out.pop("to")
        return out


@dataclass(frozen=True)
class HeldRow(Record):
    """A range over which a path holds the large interwell orbit, in sweep order."""

    direction: str
    frequency_Hz: tuple[float, float]
    amplitude_mps2: tuple[float, float]
    mean_power_W: float  # along the range


@dataclass(frozen=True)
class SweepCurve(Record):
    """One direction at CURVE_POINTS values, for a figure."""

    direction: str
    frequency_Hz: tuple[float, ...]
    amplitude_mps2: tuple[float, ...]
    mean_power_W: tuple[float | None, ...]
    peak_m: tuple[float | None, ...]


@dataclass(frozen=True)
class SweepResult(Record):
    """`harvester sweep`: the rows along each direction, the jumps, the interwell ranges."""

    over: str  # "frequency" | "amplitude"
    direction: str  # "up" | "down" | "both"
    start: str  # where each path starts
    frequency_Hz: tuple[float, float]  # swept range, low to high (or the fixed frequency twice)
    amplitude_mps2: tuple[float, float]
    rate_Hz_per_s: float | None  # a frequency sweep's rate
    rate_mps2_per_s: float | None  # an amplitude sweep's rate
    step_Hz: float | None  # the staircase step
    step_mps2: float | None
    rate_note: str
    doubled_rate_shift_Hz: float | None  # largest move of a jump at twice the rate
    doubled_rate_shift_mps2: float | None
    gap_m: float | None
    load_ohm: float
    load_note: str
    rows: tuple[SweepPoint, ...]
    jumps: tuple[JumpRow, ...]
    interwell_held: tuple[HeldRow, ...]
    curves: tuple[SweepCurve, ...]
    warnings: tuple[str, ...] = ()


def tone_of(loaded: LoadedCase, frequency_Hz: float | None,
            amplitude_mps2: float | None) -> tuple[float | None, float | None]:
    """The tone to sweep about: the options, else the case's [excitation] tone."""
    excitation = loaded.case.excitation
    tone = excitation.tone if excitation is not None else None
    if frequency_Hz is None and tone is not None:
        frequency_Hz = tone.frequency
    if amplitude_mps2 is None and tone is not None:
        amplitude_mps2 = tone.amplitude
    return frequency_Hz, amplitude_mps2


def _need(value: float | None, option: str, loaded: LoadedCase, what: str) -> float:
    if value is None:
        raise CaseError(f"no tone to take the {what} from: give {option} (or an [excitation] "
                        "tone)", file=str(loaded.path), key="excitation")
    return value


def swept_range(loaded: LoadedCase, model, over: str, tone_amplitude: float | None,
                start: float | None, stop: float | None) -> tuple[float, float, np.ndarray]:
    """(low, high, row grid) of the swept quantity: the options, else the [study] grid, else
    the defaults (frequency: 0.25–2.5 × the operating frequency; amplitude: 0 to twice the
    tone's)."""
    from harvester.analysis.sweep import FREQUENCY
    from harvester.commands.hop import study_frequencies

    if over == FREQUENCY:
        grid = study_frequencies(loaded, model)[0]
    else:
        study = loaded.case.study.amplitudes
        if study is not None:
            grid = np.linspace(study.start, study.stop, study.count)
        else:
            top = DEFAULT_AMPLITUDE_TOP * _need(tone_amplitude, "--amplitude", loaded,
                                                "amplitude")
            grid = np.linspace(0.0, top, SWEEP_ROWS)
    low = float(grid.min()) if start is None else start
    high = float(grid.max()) if stop is None else stop
    low, high = min(low, high), max(low, high)
    if not high > low:
        raise CaseError(f"the sweep needs a range: from {low:g} to {high:g} is empty",
                        file=str(loaded.path), key="--from/--to")
    inside = grid[(grid >= low) & (grid <= high)]
    if inside.size < 2 or start is not None or stop is not None:
        inside = np.linspace(low, high, SWEEP_ROWS)
    return low, high, inside


def sweep_result(loaded: LoadedCase, *, over: str = "frequency", direction: str = "both",
                 rate: float | None = None, frequency_Hz: float | None = None,
                 amplitude_mps2: float | None = None, start: float | None = None,
                 stop: float | None = None, well: str = "positive", gap_m: float | None = None,
                 load_ohm: float | None = None, magnet_model: str = "exact",
                 progress: Callable[[float, float], None] | None = None) -> SweepResult:
    """`harvester sweep`: slow sweeps of the case's design (module notes).

    rate : [Hz/s] or [m/s² per s]; None for the default (`analysis.sweep.default_rate`)
    start, stop : the swept range [Hz] or [m/s²]; None for the [study] grid's or the default
    well : "positive", "negative" or "both": where the beam starts at rest
    load_ohm : the load [Ω]; None for the one `hop` uses
    """
    from harvester.analysis.sweep import (
        AMPLITUDE,
        DOWN,
        FREQUENCY,
        UP,
        SweepPlan,
        amplitude_step_mps2,
        decay_rate_per_s,
        default_rate,
        frequency_step_Hz,
        run_sweeps,
    )
    from harvester.build import build
    from harvester.commands.hop import hop_model

    if over not in (FREQUENCY, AMPLITUDE):
        raise CaseError(f"--over {over!r}: expected frequency or amplitude", key="--over")
    if direction not in (UP, DOWN, "both"):
        raise CaseError(f"--direction {direction!r}: expected up, down or both",
                        key="--direction")
    if well not in STARTS:
        raise CaseError(f"--start {well!r}: expected one of {', '.join(STARTS)}", key="--start")
    if rate is not None and not (rate > 0.0 and math.isfinite(rate)):
        raise CaseError(f"--rate {rate:g}: the rate must be positive", key="--rate")
    built = build(loaded, gap_m=gap_m, magnet_model=magnet_model)
    model, load_note = hop_model(loaded, built)
    if load_ohm is not None:
        model, load_note = model.with_load(load_ohm), "as chosen for the candidate"
    frequency_Hz, amplitude_mps2 = tone_of(loaded, frequency_Hz, amplitude_mps2)
    low, high, grid = swept_range(loaded, model, over, amplitude_mps2, start, stop)
    if over == FREQUENCY:
        fixed = _need(amplitude_mps2, "--amplitude", loaded, "amplitude")
        step = frequency_step_Hz(model)
        if low <= 0.0:
            raise CaseError(f"the frequencies must be positive, got {low:g} Hz",
                            key="--from")
    else:
        fixed = _need(frequency_Hz, "--frequency", loaded, "frequency")
        step = amplitude_step_mps2(high)
        if low < 0.0:
            raise CaseError(f"the amplitudes must not be negative, got {low:g} m/s²",
                            key="--from")
    chosen = default_rate(model, step) if rate is None else rate
    # forcing periods of one path: ∫f dt over the sweep
    periods = ((high**2 - low**2) / (2.0 * chosen) if over == FREQUENCY
               else (high - low) / chosen * fixed)
    if periods > MAX_SWEEP_PERIODS:
        raise CaseError(f"the sweep would take {periods:.2g} forcing periods (at most "
                        f"{MAX_SWEEP_PERIODS:.0e}); give a faster rate, at least "
                        f"{chosen * periods / MAX_SWEEP_PERIODS:.3g} "
                        f"{'Hz/s' if over == FREQUENCY else 'm/s² per s'}", key="--rate")
    wells = STARTS[well] if model.is_bistable else (0,)
    directions = (UP, DOWN) if direction == "both" else (direction,)
    plans = [SweepPlan(over, *((low, high) if d == UP else (high, low)), fixed, r, step, w)
             for r in (chosen, 2.0 * chosen) for d in directions for w in wells]
    paths = run_sweeps(model, plans, progress=progress)
    main, doubled = paths[:len(plans) // 2], paths[len(plans) // 2:]
    note = _rate_note(main, doubled, step, chosen, decay_rate_per_s(model), rate is None)
    f_range = (low, high) if over == FREQUENCY else (fixed, fixed)
    a_range = (fixed, fixed) if over == FREQUENCY else (low, high)
    return SweepResult(
        over=over, direction=direction,
        start=" and ".join(START_WORDS[w] for w in wells),
        frequency_Hz=f_range, amplitude_mps2=a_range,
        rate_Hz_per_s=chosen if over == FREQUENCY else None,
        rate_mps2_per_s=chosen if over == AMPLITUDE else None,
        step_Hz=step if over == FREQUENCY else None,
        step_mps2=step if over == AMPLITUDE else None, rate_note=note.text,
        doubled_rate_shift_Hz=note.shift if over == FREQUENCY else None,
        doubled_rate_shift_mps2=note.shift if over == AMPLITUDE else None,
        gap_m=gap_m if gap_m is not None else _case_gap(loaded),
        load_ohm=model.load_ohm, load_note=load_note,
        rows=tuple(_rows(main, grid, directions)),
        jumps=tuple(_jump_rows(main)), interwell_held=tuple(_held_rows(main)),
        curves=tuple(_curves(main, np.linspace(low, high, CURVE_POINTS), directions)),
        warnings=tuple(_warnings(main)))


def _case_gap(loaded: LoadedCase) -> float | None:
    magnet = loaded.case.fixed_magnet
    return magnet.gap if magnet is not None else None


@dataclass(frozen=True)
class _RateNote:
    text: str
    shift: float | None  # largest move of a jump at twice the rate (None: other jumps)


def _rate_note(main, doubled, step: float, rate: float, sigma: float,
               default: bool) -> _RateNote:
    """What the rate is and whether the result depends on it, from the same paths at twice
    the rate (`_rate_shift`)."""
    from harvester.analysis.sweep import FREQUENCY, SETTLE_DECAYS

    unit = "Hz" if main[0].plan.over == FREQUENCY else "m/s²"
    if default:
        text = (f"default rate: each step of {step:.3g} {unit} is held for {SETTLE_DECAYS:g} "
                f"decay times of the beam's free motion (σ = {sigma:.3g} 1/s), a quasi-static "
                "sweep")
    else:
        text = (f"rate as given: each step of {step:.3g} {unit} lasts {step / rate * sigma:.2g}"
                f" decay times of the beam's free motion (σ = {sigma:.3g} 1/s)")
    shift, structure, landing = _rate_shift(main, doubled)
    jumps = any(path_jumps(p) for p in main + doubled)
    if not structure:
        return _RateNote(text + "; at twice the rate the beam jumped between other kinds of "
                         "orbit (it passes a chaotic band or a basin boundary on the way), "
                         + (f"the nearest jumps up to {shift:.3g} {unit} apart"
                            if math.isfinite(shift) else "at other places")
                         + ": the history matters here", None)
    if not jumps:
        text += "; at twice the rate the beam follows the same orbits, without a jump either"
    elif shift <= 2.0 * step:
        text += (f"; at twice the rate every jump left its orbit within {shift:.3g} {unit} of "
                 "where it does here, so the result does not depend on the rate")
    else:
        # the passage through a saddle-node is delayed by a time that scales as the rate to
        # the power 2/3 (Haberman 1979, SIAM J. Appl. Math. 37:69, memory): from the move
        # between R and 2R, the delay at R is move/(2^(2/3) − 1)
        text += (f"; at twice the rate the jumps moved by up to {shift:.3g} {unit}: near a fold "
                 "the beam lingers on the vanishing orbit, longer the faster the sweep, so "
                 f"these jumps lie up to about {shift / (2.0 ** (2.0 / 3.0) - 1.0):.2g} {unit} "
                 "beyond the steady folds (the delay grows as the rate to the power 2/3)")
    if not landing:
        text += ("; where a jump passes through chaotic hopping, the well or orbit it lands on "
                 "differs between the rates: the landing is a matter of chance there")
    return _RateNote(text, shift)


def _kind(label: str) -> str:
    """An orbit label without its size and well: "large intrawell (x > 0)" → "intrawell"."""
    return label.split(" (")[0].removeprefix("large ").removeprefix("small ")


def _rate_shift(main, doubled) -> tuple[float, bool, bool]:
    """How the jumps of each path compare with its twin's at twice the rate: the largest move
    of a jump, whether both made the same kinds of jump in the same order (if not, the move
    is the largest distance from a jump of either to the nearest of the other, ∞ when one
    jumps and the other does not), and whether they landed on the same orbits (wells and
    sizes too).  Leaving a chaotic band is left out of the moves: a chaotic spell ends after
    a random time, so where it ends says nothing about the rate."""
    from harvester.analysis.sweep import FREQUENCY
    from harvester.dynamics.orbits import CHAOTIC

    shift, structure, landing = 0.0, True, True
    for a, b in zip(main, doubled):
        ja, jb = path_jumps(a), path_jumps(b)
        landing &= [(j.from_orbit, j.to_orbit) for j in ja] == [(j.from_orbit, j.to_orbit)
                                                                 for j in jb]
        same = [(_kind(j.from_orbit), _kind(j.to_orbit)) for j in ja] == [
            (_kind(j.from_orbit), _kind(j.to_orbit)) for j in jb]
        structure &= same
        value = ((lambda j: j.frequency_Hz) if a.plan.over == FREQUENCY
                 else (lambda j: j.amplitude_mps2))
        if same:
            shift = max([shift] + [abs(value(x) - value(y)) for x, y in zip(ja, jb)
                                   if _kind(x.from_orbit) != CHAOTIC])
            continue
        xa, xb = ([value(j) for j in js if _kind(j.from_orbit) != CHAOTIC] for js in (ja, jb))
        if not xa or not xb:
            shift = math.inf if xa or xb else shift
            continue
        shift = max(shift, max(min(abs(x - y) for y in xb) for x in xa),
                    max(min(abs(x - y) for x in xa) for y in xb))
    return shift, structure, landing


def _rows(paths, grid: np.ndarray, directions) -> list[SweepPoint]:
    """Each direction's paths at the grid values, in sweep order: the mean over the paths that
    got there (a path that struck its stops ends there)."""
    from harvester.analysis.sweep import FREQUENCY, STOPS, UP, values_at
    from harvester.dynamics.orbits import CHAOTIC, FLAGGED, INTERWELL_PERIODIC, KINDS

    rows = []
    for direction in directions:
        mine = [p for p in paths if p.plan.direction == direction]
        picks = [values_at(p, grid) for p in mine]
        plan = mine[0].plan
        order = range(grid.size) if direction == UP else range(grid.size - 1, -1, -1)
        for g in order:
            value = float(grid[g])
            frequency, amplitude = ((value, plan.fixed) if plan.over == FREQUENCY
                                    else (plan.fixed, value))
            hits = [(p, k[g]) for p, k in zip(mine, picks) if k[g] >= 0]
            if not hits:
                rows.append(SweepPoint(direction, frequency, amplitude, None, None, None, STOPS))
                continue
            kinds = [int(p.kind[k]) for p, k in hits]
            hopping = (KINDS.index(INTERWELL_PERIODIC), KINDS.index(CHAOTIC))
            common = max(set(kinds), key=kinds.count)
            rows.append(SweepPoint(
                direction=direction, frequency_Hz=frequency, amplitude_mps2=amplitude,
                peak_m=float(np.mean([p.peak_m[k] for p, k in hits])),
                mean_power_W=float(np.mean([p.mean_power_W[k] for p, k in hits])),
                interwell_share=float(np.mean([k in hopping for k in kinds])),
                orbit=STOPS if common == FLAGGED else KINDS[common]))
    return rows


def _jump_rows(paths) -> list[JumpRow]:
    return [JumpRow(direction=j.direction, frequency_Hz=j.frequency_Hz,
                    amplitude_mps2=j.amplitude_mps2, from_=j.from_orbit, to=j.to_orbit)
            for p in paths for j in path_jumps(p)]


def _held_rows(paths) -> list[HeldRow]:
    from harvester.analysis.sweep import interwell_bands

    return [HeldRow(direction=b.direction, frequency_Hz=b.frequency_Hz,
                    amplitude_mps2=b.amplitude_mps2, mean_power_W=b.mean_power_W)
            for p in paths for b in interwell_bands(p)]


def _curves(paths, grid: np.ndarray, directions) -> list[SweepCurve]:
    curves = []
    for direction in directions:
        rows = _rows(paths, grid, (direction,))
        curves.append(SweepCurve(
            direction=direction, frequency_Hz=tuple(r.frequency_Hz for r in rows),
            amplitude_mps2=tuple(r.amplitude_mps2 for r in rows),
            mean_power_W=tuple(r.mean_power_W for r in rows),
            peak_m=tuple(r.peak_m for r in rows)))
    return curves


def _warnings(paths) -> list[str]:
    from harvester.analysis.sweep import STOPS

    out = []
    for p in paths:
        for j in path_jumps(p):
            if j.to_orbit == STOPS:
                where = (f"{j.frequency_Hz:.4g} Hz" if p.plan.over == "frequency"
                         else f"{j.amplitude_mps2:.4g} m/s²")
                out.append(f"the {p.plan.direction}-sweep strikes the stops at {where}; the "
                           "path ends there")
    return out
