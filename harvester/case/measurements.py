"""Test records of a built prototype, read into SI arrays with checks.

Four kinds of file, each a CSV as in `harvester.case.signals` (commas, semicolons, tabs or
spaces between values; `#` comment lines and blank lines skipped):

* a response record from a shaker test: time, base acceleration, and the tip displacement, the
  tip velocity or the transducer's voltage across a known load (`read_response_record`);
* a ring-down (free decay) record: time and one response column (`read_ringdown`);
* a static force–deflection table: tip deflection and the force that holds the tip there
  (`read_force_deflection`);
* a stepped-sine table about one well: each step's frequency, base-acceleration amplitude,
  tip-displacement (or tip-velocity) amplitude and, optionally, the response's phase
  (`read_stepped_sine`).

A header row names the columns and may give each one's unit in brackets or parentheses,
`time [s], base_acceleration [g], tip_displacement [mm], voltage [V]`, or after an underscore,
`t_s, accel_g, x_mm`.  Units can also come as arguments (the command line's options), keyed by
the column's name; a file without a header takes its column names as an argument too.  Time
defaults to seconds and frequency to hertz; every other column needs a unit, because a measured
"0.3" could be g or m/s² (and a phase degrees or radians).  In an acceleration `g` is gravity.

Every defect is a `CaseError` naming the file, the row or column and what would be accepted, or
a warning carried on the record: NaN rows, time not increasing, gaps, uneven sampling, a
constant signal and clipping are checked as for excitation records (`signals.check_sampling`,
`signals.check_signal`).
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from harvester.case.signals import (
    MIN_RECORD_ROWS,
    Table,
    _unit_scale,
    check_sampling,
    check_signal,
    read_table,
    reject_nan_rows,
)
from harvester.errors import CaseError

TIME = "time"
BASE_ACCELERATION = "base_acceleration"
TIP_DISPLACEMENT = "tip_displacement"
TIP_VELOCITY = "tip_velocity"
VOLTAGE = "voltage"
DEFLECTION = "deflection"
FORCE = "force"
FREQUENCY = "frequency"
PHASE = "phase"
RESPONSES = (TIP_DISPLACEMENT, TIP_VELOCITY, VOLTAGE)
STEP_RESPONSES = (TIP_DISPLACEMENT, TIP_VELOCITY, VOLTAGE)

# accepted header names of each column (after lower-casing; spaces and hyphens read as "_")
ALIASES = {
    TIME: ("time", "t"),
    BASE_ACCELERATION: ("base_acceleration", "acceleration", "accel", "base"),
    TIP_DISPLACEMENT: ("tip_displacement", "displacement", "tip_deflection", "x"),
    TIP_VELOCITY: ("tip_velocity", "velocity"),
    VOLTAGE: ("voltage", "load_voltage"),
    DEFLECTION: ("deflection", "tip_deflection", "displacement", "x"),
    FORCE: ("force", "f"),
    FREQUENCY: ("frequency", "freq"),
    PHASE: ("phase",),
}
DIMENSION = {
    TIME: "time",
    BASE_ACCELERATION: "acceleration",
    TIP_DISPLACEMENT: "length",
    TIP_VELOCITY: "velocity",
    VOLTAGE: "voltage",
    DEFLECTION: "length",
    FORCE: "force",
    FREQUENCY: "frequency",
    PHASE: "angle",
}
DEFAULT_UNITS = {TIME: "s", FREQUENCY: "Hz"}
# a phase's unit, in radians: pint reads any dimensionless unit ("%", "ppm") as an angle, so the
# angle units are listed
ANGLE_UNITS = {"deg": math.pi / 180.0, "degree": math.pi / 180.0, "degrees": math.pi / 180.0,
               "°": math.pi / 180.0, "rad": 1.0, "radian": 1.0, "radians": 1.0}

MIN_RINGDOWN_ROWS = 64  # a few cycles at the least sampling that resolves a decaying sine
MIN_FORCE_ROWS = 8  # a cubic with even terms and a force offset has five coefficients
# a receptance fit has three or four unknowns (frequency, damping, level, phase offset) and
# needs steps on both flanks of the resonance
MIN_SWEEP_ROWS = 8

_BRACKETED = re.compile(r"^(?P<name>[^\[\(]+?)\s*[\[\(](?P<unit>[^\]\)]*)[\]\)]$")


@dataclass(frozen=True)
class ResponseRecord:
    """A shaker test in SI: the base acceleration and the response, uniformly sampled.

    At least one of displacement, velocity and voltage is present; the voltage comes with the
    load it was measured across.  The tip displacement is the deflection relative to the clamp
    (the model's x), not an absolute motion.
    """

    time_s: np.ndarray
    base_acceleration_mps2: np.ndarray
    tip_displacement_m: np.ndarray | None
    tip_velocity_mps: np.ndarray | None
    voltage_V: np.ndarray | None
    load_ohm: float | None
    sample_rate_Hz: float
    source: str = ""
    warnings: tuple[str, ...] = ()

    @property
    def duration_s(self) -> float:
        return float(self.time_s[-1] - self.time_s[0])


@dataclass(frozen=True)
class Ringdown:
    """A free decay in SI: time and one response (displacement [m], velocity [m/s] or
    voltage [V], as `quantity` says)."""

    time_s: np.ndarray
    response: np.ndarray
    quantity: str  # TIP_DISPLACEMENT | TIP_VELOCITY | VOLTAGE
    sample_rate_Hz: float
    source: str = ""
    warnings: tuple[str, ...] = ()


@dataclass(frozen=True)
class ForceDeflection:
    """A static force–deflection table in SI: the force [N] that holds the tip at each
    deflection [m] (the restoring force F(x) of the model), rows in the file's order."""

    deflection_m: np.ndarray
    force_N: np.ndarray
    source: str = ""


@dataclass(frozen=True)
class SteppedSine:
    """A stepped-sine test in SI: at each step (frequency increasing) the base-acceleration
    amplitude and the tip-displacement amplitude (from a velocity: V/ω) and, where measured,
    the phase [rad] of the tip displacement against the base acceleration as the file gave
    it (from a velocity: less π/2).  A table of the load's voltage holds it in `voltage_V`
    (its phase in `phase_rad`) and no tip displacement until a model's circuit turns one into
    the other (`analysis.calibration.tip_from_voltage`).  Amplitudes are both peak or both
    RMS: only their ratio enters the fit."""

    frequency_Hz: np.ndarray
    base_acceleration_mps2: np.ndarray
    tip_displacement_m: np.ndarray | None
    phase_rad: np.ndarray | None
    source: str = ""
    measured: str = TIP_DISPLACEMENT  # the response column: one of STEP_RESPONSES
    voltage_V: np.ndarray | None = None  # the load's voltage, where that was measured
    sweep_rate_Hz_per_s: float | None = None  # read from a swept time record: its fastest rate

    @property
    def receptance_m_per_mps2(self) -> np.ndarray:
        """|X/A| [m/(m/s²)] per step, or X/A as a complex number where the phase is known."""
        ratio = self.tip_displacement_m / self.base_acceleration_mps2
        return ratio if self.phase_rad is None else ratio * np.exp(1j * self.phase_rad)


def read_response_record(
    path: str | Path,
    *,
    units: Mapping[str, str] | None = None,
    columns: Sequence[str] | None = None,
    load_ohm: float | None = None,
    key: str = "record",
) -> ResponseRecord:
    """Read a shaker test record (time, base acceleration, and tip displacement, tip velocity
    or voltage) into SI [s, m/s², m, m/s, V], checked.

    Parameters
    ----------
    path : the CSV file
    units : unit of each column by name (e.g. {"tip_displacement": "mm"}), for a header that
        gives none
    columns : the column names in order, for a file without a header row
    load_ohm : the load resistance the voltage was measured across [Ω]; required with a
        voltage column
    key : what the file is called in messages (an option name)

    Errors: as `signals.read_record_csv` (NaN rows, fewer than 256 rows, time not increasing,
    gaps, uneven sampling, a constant or clipped signal), and unknown, repeated or missing
    columns, a column without a unit, a voltage without its load.
    """
    file = str(path)
    required = (TIME, BASE_ACCELERATION)
    table, names = _read_named(path, key, columns, required + RESPONSES, allow_nan=True)
    _check_names(names, required, RESPONSES, file, key)
    if VOLTAGE in names and not (load_ohm is not None and load_ohm > 0.0):
        raise CaseError(
            f"a voltage column needs the load resistance it was measured across (got "
            f"{load_ohm!r}); give it, e.g. \"47 kohm\"",
            file=file,
            key=key,
        )
    series, sample_rate, warnings = _sampled(table, names, units, file, key, MIN_RECORD_ROWS)
    return ResponseRecord(
        time_s=series[TIME],
        base_acceleration_mps2=series[BASE_ACCELERATION],
        tip_displacement_m=series.get(TIP_DISPLACEMENT),
        tip_velocity_mps=series.get(TIP_VELOCITY),
        voltage_V=series.get(VOLTAGE),
        load_ohm=load_ohm if VOLTAGE in names else None,
        sample_rate_Hz=sample_rate,
        source=Path(path).name,
        warnings=tuple(warnings),
    )


def read_ringdown(
    path: str | Path,
    *,
    units: Mapping[str, str] | None = None,
    columns: Sequence[str] | None = None,
    key: str = "ringdown",
) -> Ringdown:
    """Read a free-decay record (time and one of tip displacement, tip velocity, voltage) into
    SI, checked as `read_response_record` does, with at least 64 rows."""
    file = str(path)
    table, names = _read_named(path, key, columns, (TIME,) + RESPONSES, allow_nan=True)
    _check_names(names, (TIME,), RESPONSES, file, key, only_one=True)
    series, sample_rate, warnings = _sampled(table, names, units, file, key, MIN_RINGDOWN_ROWS)
    quantity = next(n for n in names if n in RESPONSES)
    return Ringdown(
        time_s=series[TIME],
        response=series[quantity],
        quantity=quantity,
        sample_rate_Hz=sample_rate,
        source=Path(path).name,
        warnings=tuple(warnings),
    )


def read_force_deflection(
    path: str | Path,
    *,
    units: Mapping[str, str] | None = None,
    columns: Sequence[str] | None = None,
    key: str = "force_deflection",
) -> ForceDeflection:
    """Read a static force–deflection table (deflection, force) into SI [m, N].

    Rows may come in any order (loading and unloading); at least 8 finite rows are needed,
    over more than one deflection.
    """
    file = str(path)
    table, names = _read_named(path, key, columns or (DEFLECTION, FORCE), (DEFLECTION, FORCE),
                               allow_nan=False)
    _check_names(names, (DEFLECTION, FORCE), (), file, key)
    if len(table.values) < MIN_FORCE_ROWS:
        raise CaseError(
            f"{len(table.values)} row(s); a force–deflection table needs at least "
            f"{MIN_FORCE_ROWS} to fit a restoring force",
            file=file,
            key=key,
        )
    values = {n: table.values[:, i] * _scale(n, i, table, units, file, key)
              for i, n in enumerate(names)}
    if np.ptp(values[DEFLECTION]) == 0.0:
        raise CaseError(
            f"every row is at the deflection {table.values[0, names.index(DEFLECTION)]:g}; "
            "expected a range of deflections",
            file=file,
            key=key,
        )
    return ForceDeflection(values[DEFLECTION], values[FORCE], source=Path(path).name)


def read_stepped_sine(
    path: str | Path,
    *,
    units: Mapping[str, str] | None = None,
    columns: Sequence[str] | None = None,
    key: str = "sweep",
) -> SteppedSine:
    """Read a stepped-sine table (frequency, base-acceleration amplitude, tip-displacement,
    tip-velocity or load-voltage amplitude, and optionally the phase of the response against
    the base acceleration) into SI [Hz, m/s², m or V, rad].

    One row per step, in increasing frequency (sort a down-sweep: at the low level such a test
    runs at, up and down agree), at least 8 rows, every amplitude positive.  Frequency defaults
    to Hz; the phase needs its unit (deg or rad).  A velocity amplitude V becomes X = V/ω and
    its phase φ − π/2.

    A file with a time column is a time record of the test instead (time, base acceleration
    and one response, read and checked as `read_response_record`), stepped or slowly swept:
    `steps_from_record` reads the steps from it.
    """
    file = str(path)
    accepted = (FREQUENCY, BASE_ACCELERATION) + STEP_RESPONSES + (PHASE,)
    _, names = _read_named(path, key, columns, accepted + (TIME,), allow_nan=True)
    if TIME in names:
        # the voltage's load matters only when the voltage becomes the tip's motion, at the
        # tested load (analysis.calibration.tip_from_voltage); here it is a placeholder
        record = read_response_record(path, units=units, columns=columns, load_ohm=math.inf,
                                      key=key)
        return steps_from_record(record, key=key)
    table, names = _read_named(path, key, columns, accepted, allow_nan=False)
    present = [n for n in names if n in STEP_RESPONSES]
    if len(present) != 1:  # checked first: a phase column is not a response
        raise CaseError(
            f"expected one response column, {' or '.join(STEP_RESPONSES)} (columns: "
            f"{', '.join(names)})",
            file=file,
            key=key,
        )
    _check_names(names, (FREQUENCY, BASE_ACCELERATION), STEP_RESPONSES + (PHASE,), file, key)
    rows = len(table.values)
    if rows < MIN_SWEEP_ROWS:
        raise CaseError(
            f"{rows} row(s); a stepped-sine fit needs at least {MIN_SWEEP_ROWS} steps, several "
            "of them within the resonance's half-power band",
            file=file,
            key=key,
        )
    values = {n: table.values[:, i] * _scale(n, i, table, units, file, key)
              for i, n in enumerate(names)}
    frequency = values[FREQUENCY]
    step = np.diff(frequency)
    if np.any(step <= 0.0):
        i = int(np.nonzero(step <= 0.0)[0][0]) + 1
        raise CaseError(
            f"column {names.index(FREQUENCY) + 1} (frequency), row {table.lines[i]}: "
            f"{frequency[i]:g} Hz does not increase (previous row {frequency[i - 1]:g} Hz); "
            "list the steps in increasing frequency",
            file=file,
            key=key,
        )
    for name in (FREQUENCY, BASE_ACCELERATION, present[0]):
        bad = np.nonzero(values[name] <= 0.0)[0]
        if bad.size:
            i = int(bad[0])
            raise CaseError(
                f"row {table.lines[i]}: {name.replace('_', ' ')} "
                f"{table.values[i, names.index(name)]:g} is not positive; expected amplitudes "
                "(peak or RMS) and frequencies > 0",
                file=file,
                key=key,
            )
    response = values[present[0]]
    phase = values.get(PHASE)
    if present[0] == VOLTAGE:
        return SteppedSine(frequency, values[BASE_ACCELERATION], None, phase,
                           source=Path(path).name, measured=VOLTAGE, voltage_V=response)
    if present[0] == TIP_VELOCITY:
        response = response / (2.0 * math.pi * frequency)
        phase = None if phase is None else phase - 0.5 * math.pi
    return SteppedSine(frequency, values[BASE_ACCELERATION], response, phase,
                       source=Path(path).name, measured=present[0])


# a time record is cut into windows of this many forcing cycles: more average the noise down,
# fewer follow a swept sine more closely
WINDOW_CYCLES = 10
# consecutive windows whose frequencies agree this closely (relative) are one step
SAME_STEP = 1e-3
# a record is stepped when most of its steps span at least this many windows; a step's first
# half is left to settle
STEPPED_WINDOWS = 3


def steps_from_record(record: ResponseRecord, *, key: str = "sweep") -> SteppedSine:
    """The steps of a stepped or slowly swept sine from its time record, as a tracking filter
    reads them.

    The base acceleration's phase φ(t) is that of its analytic signal (Hilbert transform),
    cut every `WINDOW_CYCLES` cycles; in each window a straight line φ0 + ωt fitted to φ
    gives the frequency, and the projections 2⟨y e^(−i(φ0 + ωt))⟩ of the base and of the
    response (less its mean: the well's offset) give their amplitudes and the response's
    phase against the base.  Windows of one frequency (within `SAME_STEP`) form a step: in a
    stepped record the step's second half is averaged (its first half is the transient);
    in a swept one every window is a step, at the frequency it swept through, and
    `sweep_rate_Hz_per_s` is kept so the fit can judge whether the sweep was slow enough.
    A velocity becomes a displacement as in a table (V/ω, phase − π/2).

    References
    ----------
    Bendat & Piersol (2010), *Random Data*, 4th ed., Wiley, ch. 13 (the Hilbert transform
    and the analytic signal); Ewins (2000), *Modal Testing*, 2nd ed., §3.7 (stepped and
    slowly swept sine excitation; memory).
    """
    from scipy.signal import hilbert

    t = record.time_s
    base = record.base_acceleration_mps2 - np.mean(record.base_acceleration_mps2)
    quantity, response = next((n, v) for n, v in ((TIP_DISPLACEMENT, record.tip_displacement_m),
                                                 (TIP_VELOCITY, record.tip_velocity_mps),
                                                 (VOLTAGE, record.voltage_V)) if v is not None)
    phase = np.maximum.accumulate(np.unwrap(np.angle(hilbert(base))))
    cycles = int((phase[-1] - phase[0]) / (2.0 * math.pi * WINDOW_CYCLES))
    # the analytic signal is poor within a few cycles of the record's ends: the first and the
    # last window are left out
    edges = np.searchsorted(phase, phase[0] + 2.0 * math.pi * WINDOW_CYCLES
                            * np.arange(1, cycles))
    if edges.size < 3:
        raise CaseError(f"a time record of {cycles * WINDOW_CYCLES} forcing cycles; reading "
                        f"steps from it needs at least {3 * WINDOW_CYCLES}", file=record.source,
                        key=key)
    windows = []  # (frequency [Hz], base amplitude, complex response against the base)
    for i0, i1 in zip(edges[:-1], edges[1:]):
        slope, offset = np.polyfit(t[i0:i1], phase[i0:i1], 1)
        turn = np.exp(-1j * (offset + slope * t[i0:i1]))
        b = 2.0 * np.mean(base[i0:i1] * turn)
        y = 2.0 * np.mean((response[i0:i1] - np.mean(response[i0:i1])) * turn)
        windows.append((slope / (2.0 * math.pi), abs(b), y / b))
    groups: list[list[tuple]] = [[windows[0]]]
    for w in windows[1:]:
        if abs(w[0] - groups[-1][0][0]) <= SAME_STEP * w[0]:
            groups[-1].append(w)
        else:
            groups.append([w])
    stepped = np.median([len(g) for g in groups]) >= STEPPED_WINDOWS
    if stepped:
        kept = [g[len(g) // 2:] for g in groups if len(g) >= 2]
        rows = [(np.mean([w[0] for w in g]), np.mean([w[1] for w in g]),
                 np.mean([w[2] for w in g])) for g in kept]
        rate = None
    else:
        rows = windows
        f = np.array([w[0] for w in windows])
        mid = np.array([0.5 * (t[i0] + t[i1]) for i0, i1 in zip(edges[:-1], edges[1:])])
        rate = float(np.max(np.abs(np.diff(f) / np.diff(mid))))
    rows.sort(key=lambda r: r[0])
    f = np.array([r[0] for r in rows])
    keep = np.concatenate(([True], np.diff(f) > 0.0))
    f, amplitude = f[keep], np.array([r[1] for r in rows])[keep]
    ratio = np.array([r[2] for r in rows])[keep]
    if f.size < MIN_SWEEP_ROWS:
        raise CaseError(f"{f.size} step(s) read from the time record; a stepped-sine fit needs "
                        f"at least {MIN_SWEEP_ROWS}", file=record.source, key=key)
    magnitude, angle = np.abs(ratio), np.angle(ratio)
    if quantity == TIP_VELOCITY:
        magnitude, angle = magnitude / (2.0 * math.pi * f), angle - 0.5 * math.pi
    if quantity == VOLTAGE:
        return SteppedSine(f, amplitude, None, angle, source=record.source, measured=VOLTAGE,
                           voltage_V=magnitude * amplitude, sweep_rate_Hz_per_s=rate)
    return SteppedSine(f, amplitude, magnitude * amplitude, angle, source=record.source,
                       measured=quantity, sweep_rate_Hz_per_s=rate)


def unit_options(text: str | None, key: str = "--units") -> dict[str, str]:
    """Column units given as `name=unit,name=unit` (a command line's option) by column name,
    the names read as in a header row (`tip_displacement=mm,accel=g`).

    >>> unit_options("accel=g, x=mm")
    {'base_acceleration': 'g', 'tip_displacement': 'mm', 'deflection': 'mm'}
    """
    if not text or not text.strip():
        return {}
    found: dict[str, str] = {}
    for item in text.split(","):
        name, equals, unit = item.partition("=")
        if not equals or not name.strip() or not unit.strip():
            raise CaseError(f"{item.strip()!r}: expected name=unit, e.g. "
                            "\"tip_displacement=mm,base_acceleration=g\"", key=key)
        named = [c for c in ALIASES if _normalise(name) in ALIASES[c]]
        if not named:
            raise CaseError(f"{name.strip()!r} names no column; expected one of "
                            f"{', '.join(ALIASES)}", key=key)
        found.update((c, unit.strip()) for c in named)  # "x": a record's or a table's
    return found


def column_options(text: str | None, key: str = "--columns") -> tuple[str, ...] | None:
    """Column names in order, given as `time,accel,x` for a file without a header row."""
    if not text or not text.strip():
        return None
    return tuple(name.strip() for name in text.split(",") if name.strip())


# -- columns and units ------------------------------------------------------------------------
def _read_named(
    path: str | Path,
    key: str,
    columns: Sequence[str] | None,
    accepted: tuple[str, ...],
    allow_nan: bool,
) -> tuple[Table, tuple[str, ...]]:
    """The table and its column names (among `accepted`): from the header row when there is
    one (then `columns`, if given, must agree), else `columns`."""
    file = str(path)
    given = tuple(_given_name(c, accepted, file, key) for c in columns) if columns else None
    table = read_table(path, key, given, allow_nan=allow_nan)
    if table.header is None:
        return table, given
    names = tuple(_header_column(field, i, accepted, file, key)[0]
                  for i, field in enumerate(table.header))
    if given is not None and set(given) != set(names):
        raise CaseError(
            f"the header row names the columns {', '.join(names)} but {', '.join(given)} were "
            "given; leave the column names to the header",
            file=file,
            key=key,
        )
    return table, names


def _normalise(name: str) -> str:
    return re.sub(r"[\s\-]+", "_", name.strip().lower())


def _canonical(name: str, accepted: tuple[str, ...]) -> str | None:
    """The column among `accepted` that `name` (normalised) is an alias of, or None."""
    return next((c for c in accepted if name in ALIASES[c]), None)


def _given_name(name: str, accepted: tuple[str, ...], file: str, key: str) -> str:
    canonical = _canonical(_normalise(name), accepted)
    if canonical is None:
        raise CaseError(f"column name {name!r} is not one of {', '.join(accepted)}",
                        file=file, key=key)
    return canonical


def _header_column(
    field: str, index: int, accepted: tuple[str, ...], file: str, key: str
) -> tuple[str, str | None]:
    """(column name, unit or None) of one header field: `name [unit]`, `name (unit)`,
    `name_unit` or a bare name, the name one of the aliases of an `accepted` column."""
    text = field.strip()
    match = _BRACKETED.match(text)
    if match:
        canonical = _canonical(_normalise(match["name"]), accepted)
        if canonical is not None:
            return canonical, match["unit"].strip() or None
    else:
        name = _normalise(text)
        canonical = _canonical(name, accepted)
        if canonical is not None:
            return canonical, None
        aliases = sorted(((a, c) for c in accepted for a in ALIASES[c]), key=lambda p: -len(p[0]))
        for alias, canonical in aliases:
            if name.startswith(alias + "_") and len(name) > len(alias) + 1:
                return canonical, text[len(alias) + 1:]
    raise CaseError(
        f"column {index + 1}: header {field!r} names no column of this file; expected one of "
        f"{', '.join(accepted)}, with its unit in brackets, e.g. '{accepted[-1]} "
        f"[{_example(accepted[-1])}]'",
        file=file,
        key=key,
    )


def _check_names(
    names: tuple[str, ...],
    required: tuple[str, ...],
    responses: tuple[str, ...],
    file: str,
    key: str,
    only_one: bool = False,
) -> None:
    """Every required column present, each name once, at least one (or, with `only_one`,
    exactly one) of `responses`, and nothing else."""
    for name in names:
        if names.count(name) > 1:
            raise CaseError(f"column {name!r} appears twice", file=file, key=key)
        if name not in required and name not in responses:
            allowed = ", ".join(required + responses)
            raise CaseError(
                f"column {name!r} does not belong in this file; expected {allowed}",
                file=file,
                key=key,
            )
    missing = [n for n in required if n not in names]
    if missing:
        raise CaseError(
            f"no {', '.join(missing)} column (columns: {', '.join(names)})", file=file, key=key
        )
    present = [n for n in names if n in responses]
    if responses and (not present or (only_one and len(present) > 1)):
        wanted = "one" if only_one else "at least one"
        raise CaseError(
            f"expected {wanted} of the columns {', '.join(responses)} (columns: "
            f"{', '.join(names)})",
            file=file,
            key=key,
        )


def _scale(
    name: str, index: int, table: Table, units: Mapping[str, str] | None, file: str, key: str
) -> float:
    """SI value of one unit of column `name`: its unit from the header, the arguments or the
    default; a unit given twice must agree."""
    in_header = (_header_column(table.header[index], index, (name,), file, key)[1]
                 if table.header else None)
    given = (units or {}).get(name)
    if in_header and given and _unit_of(in_header, index, name, file, key) != \
            _unit_of(given, index, name, file, key):
        raise CaseError(
            f"column {index + 1} ({name}): the header says {in_header!r} but {given!r} was given",
            file=file,
            key=key,
        )
    unit = in_header or given or DEFAULT_UNITS.get(name)
    if unit is None:
        raise CaseError(
            f"column {index + 1} ({name}) has no unit; give it in the header, e.g. "
            f"'{name} [{_example(name)}]', or as an option",
            file=file,
            key=key,
        )
    return _unit_of(unit, index, name, file, key)


def _unit_of(unit: str, index: int, name: str, file: str, key: str) -> float:
    """SI value of one `unit` of column `name`; an angle in deg or rad."""
    if DIMENSION[name] != "angle":
        return _unit_scale(unit, DIMENSION[name], file, key)
    scale = ANGLE_UNITS.get(unit.strip().lower())
    if scale is None:
        raise CaseError(
            f"column {index + 1} ({name}): unit {unit!r} is not an angle; expected deg or rad",
            file=file,
            key=key,
        )
    return scale


def _example(name: str) -> str:
    return {BASE_ACCELERATION: "g", TIP_DISPLACEMENT: "mm", TIP_VELOCITY: "mm/s",
            VOLTAGE: "V", DEFLECTION: "mm", FORCE: "mN", FREQUENCY: "Hz",
            PHASE: "deg"}.get(name, "s")


def _sampled(
    table: Table,
    names: tuple[str, ...],
    units: Mapping[str, str] | None,
    file: str,
    key: str,
    min_rows: int,
) -> tuple[dict[str, np.ndarray], float, list[str]]:
    """Columns of a sampled record in SI by name, its sample rate [Hz] and the warnings."""
    reject_nan_rows(table, file, key)
    if len(table.values) < min_rows:
        raise CaseError(
            f"{len(table.values)} samples; this record needs at least {min_rows}",
            file=file,
            key=key,
        )
    series = {n: table.values[:, i] * _scale(n, i, table, units, file, key)
              for i, n in enumerate(names)}
    order = (TIME,) + tuple(n for n in names if n != TIME)
    if names[0] != TIME:  # the checks read the time from column 0
        table = Table(table.values[:, [names.index(n) for n in order]], table.lines, None)
        names = order
    median, warnings = check_sampling(series[TIME], table, file, key)
    for i, name in enumerate(names[1:], start=1):
        warnings += check_signal(series[name], table, i, name.replace("_", " "), file, key)
    return series, 1.0 / median, warnings
