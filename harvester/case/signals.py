"""Excitation files and bands from a case, read into SI spectra and records with checks.

Every defect is either a `CaseError` (one line naming the file, the row, the value and what is
expected) or a warning carried on the result; nothing doubtful is used silently.  Row numbers are
line numbers in the file, as an editor shows them.

CSV layout: two columns separated by commas, semicolons, tabs or spaces; lines starting with `#`
and blank lines are skipped; a first line that is not numeric is taken as a header.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from harvester.case.load import LoadedCase
from harvester.case.spectra import (
    AccelerationPSD,
    AccelerationRecord,
    SpectrumSummary,
    flat_band_psd,
    summarise_psd,
    welch_psd,
)
from harvester.errors import CaseError
from harvester.units import UnitError, to_si

MIN_PSD_ROWS = 2
MIN_RECORD_ROWS = 256  # Welch with eight averages of 32-sample segments, the least useful record
JITTER_WARNING = 1e-3  # relative deviation of a time step from the median: flagged above this
JITTER_ERROR = 1e-2  # above this the record is not uniformly sampled and must be resampled
GAP_FACTOR = 1.5  # a step this many times the median is a gap
CLIP_RUN = 3  # this many equal samples in a row at the record's extreme value look clipped
CLIP_ERROR_SHARE = 0.01  # above this share of clipped samples the spectrum is not trustworthy

_SPLIT = re.compile(r"[,;\t ]+")


@dataclass(frozen=True)
class RandomExcitation:
    """A case's random excitation as a one-sided PSD in SI, what it looks like, what was noticed."""

    psd: AccelerationPSD
    summary: SpectrumSummary
    warnings: tuple[str, ...] = ()


def random_excitation(loaded: LoadedCase) -> RandomExcitation | None:
    """The case's `[excitation]` band, PSD table or record as a PSD (a record through Welch's
    method); None when the excitation is a tone or absent.  Raises CaseError on bad data."""
    excitation = loaded.case.excitation
    if excitation is None or excitation.kind == "tone":
        return None
    file = str(loaded.path)
    warnings: tuple[str, ...] = ()
    if excitation.kind == "band":
        b = excitation.band
        psd = band_psd(b.low, b.high, b.rms, file=file)
    elif excitation.kind == "psd":
        spec = excitation.psd
        path = loaded.data_file(spec.file, "excitation.psd.file")
        psd = read_psd_csv(path, frequency_unit=spec.frequency_unit, psd_unit=spec.psd_unit,
                           interpolation=spec.interpolation)
    else:
        spec = excitation.record
        path = loaded.data_file(spec.file, "excitation.record.file")
        record = read_record_csv(
            path, time_unit=spec.time_unit, acceleration_unit=spec.acceleration_unit
        )
        psd, warnings = welch_psd(record), record.warnings
    return RandomExcitation(psd, summarise_psd(psd), warnings)


def band_psd(
    low_Hz: float,
    high_Hz: float,
    rms_mps2: float,
    *,
    file: str | None = None,
    key: str = "excitation.band",
) -> AccelerationPSD:
    """Flat one-sided PSD of a band [low, high] Hz with the given RMS [m/s²], checked."""
    values = {"low": low_Hz, "high": high_Hz, "rms": rms_mps2}
    for name, value in values.items():
        if not math.isfinite(value):
            raise CaseError(f"{name} = {value!r} is not a finite number", file=file, key=key)
    if low_Hz < 0.0:
        raise CaseError(f"low = {low_Hz:g} Hz; expected ≥ 0 Hz", file=file, key=key)
    if high_Hz <= low_Hz:
        raise CaseError(
            f"high = {high_Hz:g} Hz is not above low = {low_Hz:g} Hz", file=file, key=key
        )
    if rms_mps2 <= 0.0:
        raise CaseError(f"rms = {rms_mps2:g} m/s²; expected > 0", file=file, key=key)
    return flat_band_psd(low_Hz, high_Hz, rms_mps2)


def read_psd_csv(
    path: str | Path,
    *,
    frequency_unit: str = "Hz",
    psd_unit: str = "g^2/Hz",
    interpolation: str = "auto",
    key: str = "excitation.psd",
) -> AccelerationPSD:
    """Read a one-sided acceleration PSD table (frequency, G) into SI [Hz, (m/s²)²/Hz].

    Rejected: unreadable file, rows without two numbers, NaN or infinite values, negative or
    non-increasing frequencies, negative PSD values, fewer than two rows, an all-zero PSD.
    `interpolation` between rows: "loglog", "linear" or "auto" (`table_interpolation`).
    """
    file = str(path)
    f_scale = _unit_scale(frequency_unit, "frequency", file, key)
    g_scale = _unit_scale(psd_unit, "acceleration PSD", file, key)
    table = read_table(path, key, ("frequency", "PSD"))
    rows, lines = table.values, table.lines
    if len(rows) < MIN_PSD_ROWS:
        raise CaseError(
            f"{len(rows)} data row(s); a PSD table needs at least {MIN_PSD_ROWS}",
            file=file,
            key=key,
        )
    f = rows[:, 0] * f_scale
    g = rows[:, 1] * g_scale
    for i in range(len(f)):
        if f[i] < 0.0:
            raise CaseError(
                f"row {lines[i]}: frequency {rows[i, 0]:g} is negative; expected ≥ 0",
                file=file,
                key=key,
            )
        if i and f[i] <= f[i - 1]:
            raise CaseError(
                f"row {lines[i]}: frequency {rows[i, 0]:g} does not increase (previous row "
                f"{rows[i - 1, 0]:g}); expected strictly increasing frequencies",
                file=file,
                key=key,
            )
        if g[i] < 0.0:
            raise CaseError(
                f"row {lines[i]}: PSD {rows[i, 1]:g} is negative; expected ≥ 0",
                file=file,
                key=key,
            )
    if not np.any(g > 0.0):
        raise CaseError("every PSD value is zero; expected some excitation", file=file, key=key)
    if interpolation == "auto":
        interpolation = table_interpolation(f)
    return AccelerationPSD(f, g, source=Path(path).name, interpolation=interpolation)


DENSE_TABLE_ROWS = 32  # a table with this many evenly spaced rows is taken as an estimate


def table_interpolation(frequency_Hz: np.ndarray) -> str:
    """"linear" for a dense, evenly spaced table (an estimate such as Welch's, whose bins are
    averages: log-log segments between neighbouring bins of a narrow line under-count its
    area), else "loglog" (a test profile given by its corners, straight in dB/octave; common
    practice in random-vibration test specifications)."""
    spacing = np.diff(np.asarray(frequency_Hz, dtype=float))
    even = spacing.size > 0 and float(spacing.max()) <= 1.01 * float(spacing.min())
    return "linear" if even and frequency_Hz.size >= DENSE_TABLE_ROWS else "loglog"


def read_record_csv(
    path: str | Path,
    *,
    time_unit: str = "s",
    acceleration_unit: str = "g",
    key: str = "excitation.record",
) -> AccelerationRecord:
    """Read a measured base-acceleration record (time, a) into SI [s, m/s²], checked.

    Errors: unreadable file, rows without two numbers, NaN rows, fewer than 256 rows, time not
    increasing, gaps (a step > 1.5 × the median step), sampling uneven by more than 1 %, a
    constant signal, more than 1 % of samples clipped.  Warnings (carried on the record):
    sampling uneven by 0.1–1 % (treated as uniform at the median rate), clipping (runs of three
    or more samples at the record's extreme value) below 1 % of the samples.
    """
    file = str(path)
    t_scale = _unit_scale(time_unit, "time", file, key)
    a_scale = _unit_scale(acceleration_unit, "acceleration", file, key)
    table = read_table(path, key, ("time", "acceleration"), allow_nan=True)
    reject_nan_rows(table, file, key)
    rows = table.values
    if len(rows) < MIN_RECORD_ROWS:
        raise CaseError(
            f"{len(rows)} samples; a record needs at least {MIN_RECORD_ROWS} for a spectrum",
            file=file,
            key=key,
        )
    t = rows[:, 0] * t_scale
    a = rows[:, 1] * a_scale
    median, warnings = check_sampling(t, table, file, key)
    warnings += check_signal(a, table, 1, "acceleration", file, key)
    return AccelerationRecord(
        time_s=t,
        acceleration_mps2=a,
        sample_rate_Hz=1.0 / median,
        source=Path(path).name,
        warnings=tuple(warnings),
    )


def reject_nan_rows(table: Table, file: str, key: str) -> None:
    """CaseError naming the first row of `table` that holds a NaN or an infinity."""
    rows, lines = table.values, table.lines
    nan_rows = np.nonzero(~np.all(np.isfinite(rows), axis=1))[0]
    if nan_rows.size:
        first = nan_rows[0]
        raise CaseError(
            f"row {lines[first]}: {_row_text(rows[first])} is not a number "
            f"({nan_rows.size} such row(s)); fill or cut them and resample the record",
            file=file,
            key=key,
        )


def check_sampling(t: np.ndarray, table: Table, file: str, key: str) -> tuple[float, list[str]]:
    """The median time step [s] of a record's times `t` [s] (column 0 of `table`), and warnings.

    Errors: time not increasing, gaps (a step > 1.5 × the median step), sampling uneven by more
    than 1 %.  Warning: sampling uneven by 0.1–1 % (treated as uniform at the median rate).
    """
    rows, lines = table.values, table.lines
    step = np.diff(t)
    bad = np.nonzero(step <= 0.0)[0]
    if bad.size:
        i = bad[0] + 1
        raise CaseError(
            f"row {lines[i]}: time {rows[i, 0]:g} does not increase (previous row "
            f"{rows[i - 1, 0]:g}); expected strictly increasing times",
            file=file,
            key=key,
        )
    median = float(np.median(step))
    gaps = np.nonzero(step > GAP_FACTOR * median)[0]
    if gaps.size:
        i = gaps[0]
        raise CaseError(
            f"rows {lines[i]}–{lines[i + 1]}: gap of {step[i]:.4g} s in a record sampled every "
            f"{median:.4g} s ({gaps.size} gap(s)); expected uniform sampling without gaps",
            file=file,
            key=key,
        )
    warnings: list[str] = []
    deviation = np.abs(step - median) / median
    worst = int(np.argmax(deviation))
    if deviation[worst] > JITTER_ERROR:
        raise CaseError(
            f"row {lines[worst + 1]}: time step {step[worst]:.4g} s differs by "
            f"{100 * deviation[worst]:.2g} % from the median {median:.4g} s; expected uniform "
            f"sampling (within {100 * JITTER_ERROR:g} %): resample the record",
            file=file,
            key=key,
        )
    if deviation[worst] > JITTER_WARNING:
        warnings.append(
            f"{file}: sampling uneven by up to {100 * deviation[worst]:.2g} % (row "
            f"{lines[worst + 1]}); treated as uniform at {1.0 / median:.6g} Hz"
        )
    return median, warnings


def check_signal(
    values: np.ndarray, table: Table, column: int, name: str, file: str, key: str
) -> list[str]:
    """Warnings about one sampled signal (column `column` of `table`, `values` in SI).

    Errors: a constant signal, more than 1 % of the samples clipped (runs of three or more
    samples at the signal's extreme value).  Warning: clipping below that share.
    """
    rows, lines = table.values, table.lines
    if np.ptp(values) == 0.0:
        raise CaseError(
            f"the {name} is constant ({rows[0, column]:g}); expected a vibration record",
            file=file,
            key=key,
        )
    clipped, first_run = _clipped_samples(values)
    if not clipped:
        return []
    message = (
        f"{clipped} sample(s) of the {name} ({100 * clipped / values.size:.2g} %) sit in runs of "
        f"{CLIP_RUN} or more at the extreme value {rows[first_run, column]:g} (first at row "
        f"{lines[first_run]}): the sensor or recorder probably clipped"
    )
    if clipped > CLIP_ERROR_SHARE * values.size:
        raise CaseError(
            message + f"; more than {100 * CLIP_ERROR_SHARE:g} % clipped cannot give a "
            "trustworthy result",
            file=file,
            key=key,
        )
    return [f"{file}: {message}; peaks above it are missing"]


def _unit_scale(unit: str, dimension: str, file: str, key: str) -> float:
    try:
        return to_si(f"1 {unit}", dimension)
    except UnitError as exc:
        raise CaseError(f"unit {unit!r}: {exc}", file=file, key=key) from None


@dataclass(frozen=True)
class Table:
    """Rows of numbers from a CSV file: their values, the file line of each row, and the header
    row's fields (split at its commas, semicolons or tabs, else at its spaces), if it had one."""

    values: np.ndarray  # (rows, columns)
    lines: list[int]
    header: tuple[str, ...] | None


def read_table(
    path: str | Path, key: str, names: tuple[str, ...] | None, allow_nan: bool = False
) -> Table:
    """Rows of len(`names`) numbers and their line numbers; NaN is kept only when `allow_nan`.

    With `names` None the header row is required and its fields set the number of columns.
    """
    file = str(path)
    try:
        text = Path(path).read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise CaseError("file not found", file=file, key=key) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise CaseError(
            f"cannot read the file ({exc.__class__.__name__})", file=file, key=key
        ) from None
    values: list[tuple[float, ...]] = []
    lines: list[int] = []
    header: tuple[str, ...] | None = None
    header_allowed = True
    for number, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if not line or line.startswith("#"):
            continue
        fields = [p for p in _SPLIT.split(line) if p]
        try:
            row = tuple(float(p) for p in fields)
        except ValueError:
            titles = _header_fields(line)
            if header_allowed and _is_header(titles, len(names) if names else len(titles)):
                header_allowed = False
                header = titles
                continue
            expected = names or header
            raise CaseError(
                f"row {number}: {_clip_text(line)!r} is not {_count(expected)} numbers "
                f"({', '.join(expected) if expected else 'no header row names the columns'})",
                file=file,
                key=key,
            ) from None
        if names is None and header is None:
            raise CaseError(
                f"row {number}: no header row before the data; name the columns in a first "
                "row, e.g. 'time [s], base_acceleration [g], tip_displacement [mm]'",
                file=file,
                key=key,
            )
        expected = names or header
        if len(row) != len(expected):
            raise CaseError(
                f"row {number}: {len(row)} value(s) in {_clip_text(line)!r}; expected "
                f"{_count(expected)} columns ({', '.join(expected)})",
                file=file,
                key=key,
            )
        if not allow_nan and not all(math.isfinite(v) for v in row):
            raise CaseError(
                f"row {number}: {_clip_text(line)!r} is not finite; expected {_count(expected)} "
                f"finite numbers ({', '.join(expected)})",
                file=file,
                key=key,
            )
        header_allowed = False
        values.append(row)
        lines.append(number)
    width = len(names or header or ())
    return Table(np.array(values, dtype=float).reshape(-1, width), lines, header)


def _count(names: tuple[str, ...] | None) -> str:
    n = len(names or ())
    return {2: "two", 3: "three", 4: "four", 5: "five"}.get(n, str(n))


def _header_fields(line: str) -> tuple[str, ...]:
    separator = r"[,;\t]" if re.search(r"[,;\t]", line) else r"\s+"
    return tuple(p.strip() for p in re.split(separator, line) if p.strip())


def _is_header(fields: tuple[str, ...], width: int) -> bool:
    return 1 <= len(fields) <= max(4, 2 * width) and all(
        any(c.isalpha() for c in p) for p in fields
    )


def _clip_text(line: str, width: int = 40) -> str:
    return line if len(line) <= width else line[: width - 1] + "…"


def _row_text(row: np.ndarray) -> str:
    return "(" + ", ".join(f"{v:g}" for v in row) + ")"


def _clipped_samples(a: np.ndarray) -> tuple[int, int]:
    """Number of samples in runs of ≥ CLIP_RUN equal values at the maximum or minimum, and the
    index where the first such run starts (−1 if none)."""
    at_extreme = (a == a.max()) | (a == a.min())
    same_as_previous = np.concatenate([[False], a[1:] == a[:-1]])
    count, first, run = 0, -1, 0
    for i in np.nonzero(at_extreme)[0]:
        run = run + 1 if i > 0 and at_extreme[i - 1] and same_as_previous[i] else 1
        if run == CLIP_RUN:
            count += CLIP_RUN
            if first < 0:
                first = int(i) - CLIP_RUN + 1
        elif run > CLIP_RUN:
            count += 1
    return count, first


def describe_data_files(loaded: LoadedCase) -> list[dict]:
    """Read and check every data file the case names and say what each holds: the key that
    names it, the file, its content, frequency range [Hz], RMS [m/s²], a record's duration [s]
    and sample rate [Hz], and its rows.  Raises CaseError on a bad file, as any command
    that reads it would."""
    excitation = loaded.case.excitation
    if excitation is None or excitation.kind not in ("psd", "record"):
        return []
    if excitation.kind == "psd":
        spec = excitation.psd
        key = "excitation.psd.file"
        psd = read_psd_csv(loaded.data_file(spec.file, key), frequency_unit=spec.frequency_unit,
                           psd_unit=spec.psd_unit, interpolation=spec.interpolation)
        summary = summarise_psd(psd)
        return [{"key": key, "file": spec.file, "content": "psd",
                 "frequency_range_Hz": summary.frequency_range_Hz, "rms_mps2": summary.rms_mps2,
                 "duration_s": None, "sample_rate_Hz": None,
                 "rows_count": int(psd.frequency_Hz.size)}]
    spec = excitation.record
    key = "excitation.record.file"
    record = read_record_csv(loaded.data_file(spec.file, key), time_unit=spec.time_unit,
                             acceleration_unit=spec.acceleration_unit)
    summary = summarise_psd(welch_psd(record))
    a = record.acceleration_mps2
    return [{"key": key, "file": spec.file, "content": "record",
             "frequency_range_Hz": summary.frequency_range_Hz,
             "rms_mps2": float(np.sqrt(np.mean((a - a.mean()) ** 2))),
             "duration_s": float(record.time_s[-1] - record.time_s[0]),
             "sample_rate_Hz": record.sample_rate_Hz, "rows_count": int(a.size)}]
