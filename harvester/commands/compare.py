"""`harvester compare`: the candidate gaps and the magnet-free beam side by side, and which to
build.

Every candidate (each gap of [study].gaps, and the same beam without the fixed magnet) is an
independent task (`GapTask`) run through `run_tasks`: in this process, on a local process pool
or on a Dask cluster, with the same answer from each (every task carries its seed).

The recommendation is the candidate with the most mean power among those that pass every check.
A gap is recommended over the magnet-free beam only where its advantage lies outside both
confidence intervals; where the two cannot be told apart the simpler design (no fixed magnet)
is recommended and the output says how to tighten the comparison.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace

import numpy as np

from harvester.case.load import LoadedCase
from harvester.commands.hop import (
    HopRow,
    HopSettings,
    hop_model,
    study_frequencies,
    threshold_rows,
)
from harvester.commands.power import TONE_INITIAL_STATES, CheckRow, OrbitRow, predict_power
from harvester.commands.records import Record

MAGNET_FREE = "magnet-free"
# Without a [study] frequency grid that starts below the tone, the up-sweep that tells whether a
# machine running up to speed reaches the high-power orbit starts at this fraction of the tone.
UPSWEEP_START_FRACTION = 0.5


@dataclass(frozen=True)
class GapTask:
    """Everything one worker needs to evaluate one candidate (plain, picklable values)."""

    case_path: str
    gap_m: float | None  # None: the same beam without the fixed magnet
    seed: int = 0
    magnet_model: str = "exact"
    target_relative_half_width: float = 0.05
    tone_starts: int = TONE_INITIAL_STATES
    hop_map: bool = True  # thresholds over [study].frequencies as well


@dataclass(frozen=True)
class GapRow(Record):
    """One candidate: a gap, or the magnet-free beam (`gap_m` None, regime "magnet-free")."""

    gap_m: float | None
    regime: str  # "bistable" | "monostable" | "magnet-free"
    critical_gap_m: float | None
    wells_m: tuple[float, ...]
    barrier_J: float
    well_frequency_Hz: float
    linear_frequency_Hz: float | None
    k1_N_per_m: float
    k3_N_per_m3: float
    force_coefficients_SI: tuple[float, ...]  # k0, k1, k2, …: F(x) = Σ_p k_p x^p
    fit_window_m: float | None
    mean_power_W: float
    ci95_W: tuple[float, float]
    gain_ratio: float | None  # over the magnet-free candidate
    hop_rate_per_s: float
    interwell_share: float | None
    rms_voltage_V: float | None
    load_ohm: float
    load_note: str
    orbits: tuple[OrbitRow, ...]
    onset_mps2: float | None  # tone: at its frequency; random: the lowest inside the band
    onset_frequency_Hz: float | None
    melnikov_mps2: float | None
    stop_mps2: float | None
    hop_status: str | None
    x_min_m: float
    x_max_m: float
    checks: tuple[CheckRow, ...]
    omitted_checks: tuple[str, ...]
    worst_check: str | None  # the governing check's short name
    worst_level: str | None
    worst_margin: float | None
    hop_map: tuple[HopRow, ...]  # thresholds over [study].frequencies (for the note)
    warnings: tuple[str, ...]
    # under a tone: the share of the starts on the high-power orbits (those within half of the
    # best orbit's power, `analysis.basins.high_power_orbits`), the power an up-sweep from rest
    # leaves the beam on at the tone, whether that is on the high-power side, and so whether
    # the high-power orbit needs a lucky start
    high_power_share: float | None = None
    upsweep_power_W: float | None = None
    upsweep_reaches_high_power: bool | None = None
    needs_lucky_start: bool | None = None

    @property
    def magnet_free(self) -> bool:
        return self.regime == MAGNET_FREE

    @property
    def passes(self) -> bool:
        return bool(self.checks) and all(c.level == "pass" for c in self.checks)


@dataclass(frozen=True)
class CompareResult(Record):
    """`harvester compare`: every candidate, the recommended gap and why."""

    rows: tuple[GapRow, ...]  # the magnet-free beam first, then the gaps in order
    recommended_gap_m: float | None  # None: leave out the fixed magnet, or nothing passes
    recommended_candidate: str | None  # "gap" | "magnet-free" | None when nothing passes
    recommendation: str
    hop_settings: HopSettings

    @property
    def recommended_index(self) -> int | None:
        for i, row in enumerate(self.rows):
            if self.recommended_candidate == MAGNET_FREE and row.magnet_free:
                return i
            if (self.recommended_candidate == "gap" and not row.magnet_free
                    and row.gap_m == self.recommended_gap_m):
                return i
        return None


def evaluate_gap(task: GapTask) -> GapRow:
    """Statics, hop thresholds, mean power and safety checks of one candidate."""
    from harvester.build import build
    from harvester.case.load import load_case
    from harvester.commands.statics import wells_of

    loaded = load_case(task.case_path)
    if task.gap_m is None:
        loaded = LoadedCase(case=loaded.case.model_copy(update={"fixed_magnet": None}),
                            path=loaded.path)
    built = build(loaded, gap_m=task.gap_m, magnet_model=task.magnet_model)
    wells = wells_of(built)
    power = predict_power(loaded, built, seed=task.seed, sweep=False, baseline=False,
                          target_relative_half_width=task.target_relative_half_width,
                          tone_starts=task.tone_starts)
    hop: dict = {"onset_mps2": None, "onset_frequency_Hz": None, "melnikov_mps2": None,
                 "stop_mps2": None, "hop_status": None}
    hop_map: tuple[HopRow, ...] = ()
    if wells.regime == "bistable":
        hop, hop_map = _thresholds(loaded, built, task)
    worst = power.worst
    history = _history(loaded, built.model.with_load(power.load_ohm), power)
    return GapRow(
        gap_m=task.gap_m, regime=MAGNET_FREE if task.gap_m is None else wells.regime,
        critical_gap_m=wells.critical_gap_m, wells_m=wells.wells_m, barrier_J=wells.barrier_J,
        well_frequency_Hz=wells.well_frequency_Hz, linear_frequency_Hz=wells.linear_frequency_Hz,
        k1_N_per_m=wells.k1_N_per_m, k3_N_per_m3=wells.k3_N_per_m3,
        force_coefficients_SI=wells.force_coefficients_SI, fit_window_m=wells.fit_window_m,
        mean_power_W=power.mean_power_W, ci95_W=power.ci95_W, gain_ratio=None,
        hop_rate_per_s=power.hop_rate_per_s, interwell_share=power.interwell_share,
        rms_voltage_V=power.rms_voltage_V, load_ohm=power.load_ohm, load_note=power.load_note,
        orbits=power.orbits, x_min_m=power.x_min_m, x_max_m=power.x_max_m,
        checks=power.checks, omitted_checks=power.omitted_checks,
        worst_check=worst.short_name if worst else None,
        worst_level=worst.level if worst else None,
        worst_margin=worst.margin if worst else None,
        hop_map=hop_map, warnings=power.warnings + wells.warnings, **hop, **history)


def _history(loaded: LoadedCase, model, power) -> dict:
    """Under a tone: how many starts reach the high-power orbits, and whether a machine that
    runs up to speed (an up-sweep from rest, `analysis.sweep.upsweep_power`) does."""
    from harvester.analysis.basins import HIGH_POWER_FRACTION, high_power_share

    excitation = loaded.case.excitation
    if excitation is None or excitation.kind != "tone" or not power.orbits:
        return {}
    from harvester.analysis.sweep import upsweep_power

    tone = excitation.tone
    grid = loaded.case.study.frequencies
    start = grid.start if grid is not None and grid.start < tone.frequency else (
        UPSWEEP_START_FRACTION * tone.frequency)
    reached = upsweep_power(model, tone.amplitude, start, tone.frequency)
    best = max(o.mean_power_W for o in power.orbits)
    reaches = reached is not None and reached >= HIGH_POWER_FRACTION * best
    return {"high_power_share": high_power_share(power.orbits), "upsweep_power_W": reached,
            "upsweep_reaches_high_power": reaches, "needs_lucky_start": not reaches}


def _thresholds(loaded: LoadedCase, built, task: GapTask) -> tuple[dict, tuple[HopRow, ...]]:
    """Thresholds at the tone's frequency (or, for random excitation, the lowest onset inside
    the band) and, for the note, over [study].frequencies; the same settings as `hop`."""
    model, _ = hop_model(loaded, built)
    settings = HopSettings(seed=task.seed)
    freqs = study_frequencies(loaded, model)[0] if task.hop_map else np.empty(0)
    excitation = loaded.case.excitation
    tone = excitation.tone if excitation is not None else None
    asked = np.concatenate([freqs, [tone.frequency]]) if tone is not None else freqs
    if not asked.size:
        return {"onset_mps2": None, "onset_frequency_Hz": None, "melnikov_mps2": None,
                "stop_mps2": None, "hop_status": None}, ()
    rows = threshold_rows(model, asked, settings)
    hop_map = rows[: freqs.size]
    if tone is not None:
        chosen = rows[-1]
    else:
        band = excitation.band if excitation is not None else None
        inside = [r for r in hop_map if r.onset_mps2 is not None and (
            band is None or band.low <= r.frequency_Hz <= band.high)]
        chosen = min(inside, key=lambda r: r.onset_mps2) if inside else None
    if chosen is None:
        return {"onset_mps2": None, "onset_frequency_Hz": None, "melnikov_mps2": None,
                "stop_mps2": None, "hop_status": "no-hop-in-scan"}, hop_map
    return {"onset_mps2": chosen.onset_mps2, "onset_frequency_Hz": chosen.frequency_Hz,
            "melnikov_mps2": chosen.melnikov_mps2, "stop_mps2": chosen.stop_mps2,
            "hop_status": chosen.status}, hop_map


def candidate_gaps(loaded: LoadedCase) -> list[float]:
    """[study].gaps, or the case's own gap when no study is given."""
    gaps = list(loaded.case.study.gaps)
    if not gaps and loaded.case.fixed_magnet is not None:
        gaps = [loaded.case.fixed_magnet.gap]
    return sorted(set(gaps))


def has_magnet_free_candidate(loaded: LoadedCase) -> bool:
    """A geometry case always knows its beam without magnets; a [reduced] case only when it
    gives `linear_stiffness`."""
    reduced = loaded.case.reduced
    return reduced is None or reduced.linear_stiffness is not None


def compare_result(loaded: LoadedCase, *, seed: int = 0, magnet_model: str = "exact",
                   target_relative_half_width: float = 0.05,
                   tone_starts: int = TONE_INITIAL_STATES, hop_map: bool = True,
                   workers: int | None = None, cluster: str | None = None,
                   progress: Callable[[int, int], None] | None = None) -> CompareResult:
    """Evaluate the magnet-free beam and every candidate gap, and recommend one."""
    from harvester.commands.executor import run_tasks
    from harvester.errors import CaseError

    gaps = candidate_gaps(loaded)
    if not gaps:
        raise CaseError("nothing to compare: give [study].gaps (or a [fixed_magnet] gap)",
                        file=str(loaded.path), key="study.gaps")
    if loaded.case.excitation is None:
        raise CaseError("no [excitation] section: give a tone, band, psd or record",
                        file=str(loaded.path), key="excitation")
    candidates: list[float | None] = ([None] if has_magnet_free_candidate(loaded) else [])
    tasks = [GapTask(case_path=str(loaded.path), gap_m=g, seed=seed, magnet_model=magnet_model,
                     target_relative_half_width=target_relative_half_width,
                     tone_starts=tone_starts, hop_map=hop_map) for g in candidates + gaps]
    rows = run_tasks(evaluate_gap, tasks, workers=workers, cluster=cluster, progress=progress)
    rows = with_gains(rows)
    excitation = loaded.case.excitation
    pick, reason = recommend(rows, broadband=excitation.kind != "tone")
    chosen = rows[pick] if pick is not None else None
    return CompareResult(
        rows=tuple(rows),
        recommended_gap_m=None if chosen is None or chosen.magnet_free else chosen.gap_m,
        recommended_candidate=None if chosen is None else (
            MAGNET_FREE if chosen.magnet_free else "gap"),
        recommendation=reason, hop_settings=HopSettings(seed=seed))


def with_gains(rows: list[GapRow]) -> list[GapRow]:
    """Each candidate's mean power over the magnet-free candidate's (one baseline for all)."""
    free = next((r for r in rows if r.magnet_free), None)
    if free is None or not free.mean_power_W:
        return rows
    return [replace(r, gain_ratio=r.mean_power_W / free.mean_power_W) for r in rows]


def _gap_text(row: GapRow) -> str:
    return f"{row.gap_m * 1e3:.4g} mm ({row.regime})"


def _power_text(row: GapRow) -> str:
    low, high = row.ci95_W
    if f"{low * 1e6:.3g}" == f"{high * 1e6:.3g}":  # a tone whose starts all end alike
        return f"{row.mean_power_W * 1e6:.3g} µW (every start settles to the same power)"
    return f"{row.mean_power_W * 1e6:.3g} µW (95 % CI {low * 1e6:.3g}–{high * 1e6:.3g})"


def recommend(rows: list[GapRow], broadband: bool = False) -> tuple[int | None, str]:
    """The candidate to build: the most mean power among those that pass every check, but a
    gap over the magnet-free beam only where the intervals separate them (module notes)."""
    passing = [i for i, r in enumerate(rows) if r.passes and r.mean_power_W is not None]
    free = next((i for i, r in enumerate(rows) if r.magnet_free), None)
    if not passing:
        failing = sorted({r.worst_check for r in rows if r.worst_level not in (None, "pass")})
        return None, ("no candidate passes every check (" + ", ".join(failing) + "): change the "
                      "beam, the magnets or the limits")
    best = max(passing, key=lambda i: rows[i].mean_power_W)
    r = rows[best]
    if r.magnet_free:
        gaps = [rows[i] for i in passing if not rows[i].magnet_free]
        runner = "; no gap passes every check"
        if gaps:
            second = max(gaps, key=lambda g: g.mean_power_W)
            runner = (f"; the best gap that passes, {_gap_text(second)}, gives "
                      f"{_power_text(second)}")
        text = (f"leave out the fixed magnet: the magnet-free beam delivers the most mean power "
                f"within every limit, {_power_text(r)}{runner}")
        if broadband:
            text += (" (under broadband excitation the mean power hardly depends on the "
                     "potential)")
        return best, text
    if free is None:
        return best, (f"{_gap_text(r)}: most mean power of the {len(passing)} gaps that pass "
                      f"every check, {_power_text(r)} (the case gives no magnet-free beam to "
                      "compare with)")
    f = rows[free]
    if free not in passing:
        return best, (f"{_gap_text(r)}: most mean power of the candidates that pass every "
                      f"check, {_power_text(r)}; the magnet-free beam fails {f.worst_check} "
                      f"(margin {f.worst_margin:.3g})")
    if r.ci95_W[0] > f.ci95_W[1]:
        gain = r.mean_power_W / f.mean_power_W if f.mean_power_W else math.inf
        times = f"{gain:,.0f}" if gain >= 1000 else f"{gain:.3g}"  # 1,270×, not 1.27e+03×
        return best, (f"{_gap_text(r)}: {times}× the magnet-free beam's mean power, "
                      f"{_power_text(r)} against {_power_text(f)}, outside both intervals, and "
                      "every check passes")
    tighten = ("lower --ci (e.g. --ci 0.02)" if broadband else
               "more starts (e.g. --starts 128)")
    return free, (f"leave out the fixed magnet: the best gap, {_gap_text(r)} with "
                  f"{_power_text(r)}, cannot be told apart from the magnet-free beam, "
                  f"{_power_text(f)}, at this ensemble size; to tighten the intervals run with "
                  f"{tighten}")
