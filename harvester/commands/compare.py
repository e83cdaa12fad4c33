"""`harvester compare`: the candidate gaps and the magnet-free beam side by side, and which to
build.

Every candidate (each gap of [study].gaps, and the same beam without the fixed magnet) is an
independent task (`GapTask`) run through `run_tasks`: in this process, on a local process pool
or on a Dask cluster, with the same answer from each (every task carries its seed).

The recommendation is the candidate with the most mean power among those that pass every check.
A gap is recommended over the magnet-free beam only where its advantage lies outside both
confidence intervals; where the two cannot be told apart the simpler design (no fixed magnet)
is recommended and the output says how to tighten the comparison.  Behind a bridge
([circuit] interface = "bridge") the candidates are ranked by their DC power instead (with a
[node], by the budget margin, which orders them alike), and a candidate whose node never starts
is never recommended.
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
from harvester.commands.power import (
    TONE_INITIAL_STATES,
    CheckRow,
    DcRow,
    NodeRow,
    OrbitRow,
    predict_power,
)
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
    # over a service temperature range ([environment] temperature = { min, max }): the double
    # well at its coldest and hottest end (the remanence, and with it the barrier, falls
    # steadily with temperature, so a regime that differs between the ends changes inside)
    temperatures_at_ends_K: tuple[float, ...] = ()
    regimes_at_ends: tuple[str, ...] = ()
    barriers_at_ends_J: tuple[float, ...] = ()
    regime_changes_in_range: bool | None = None
    # under a tone: the share of the starts on the high-power orbits (those within half of the
    # best orbit's power, `analysis.basins.high_power_orbits`), the power an up-sweep from rest
    # leaves the beam on at the tone, whether that is on the high-power side, and so whether
    # the high-power orbit needs a lucky start
    high_power_share: float | None = None
    upsweep_power_W: float | None = None
    upsweep_reaches_high_power: bool | None = None
    needs_lucky_start: bool | None = None
    # behind a bridge: DC power (and with a [node] its budget), beside the AC figures
    dc_power_W: float | None = None
    dc_ci95_W: tuple[float, float] | None = None
    budget_margin_W: float | None = None
    node_starts: bool | None = None
    start_share: float | None = None
    dc: DcRow | None = None
    node: NodeRow | None = None

    @property
    def magnet_free(self) -> bool:
        return self.regime == MAGNET_FREE

    @property
    def ranked_power_W(self) -> float:
        """What the candidates are ranked by: the DC power behind a bridge, else the mean
        power."""
        return self.mean_power_W if self.dc_power_W is None else self.dc_power_W

    @property
    def ranked_ci95_W(self) -> tuple[float, float]:
        return self.ci95_W if self.dc_ci95_W is None else self.dc_ci95_W

    @property
    def never_starts(self) -> bool:
        """The case's node never starts on this candidate."""
        return self.node_starts is False

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
    ends = _temperature_ends(loaded, task) if task.gap_m is not None else {}
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
        hop_map=hop_map, warnings=power.warnings + wells.warnings + ends.pop("warnings", ()),
        dc_power_W=power.dc_power_W, dc_ci95_W=power.dc_ci95_W,
        budget_margin_W=power.budget_margin_W,
        node_starts=power.node.node_starts if power.node is not None else None,
        start_share=power.node.start_share if power.node is not None else None,
        dc=power.dc, node=power.node, **hop, **ends, **history)


def _temperature_ends(loaded: LoadedCase, task: GapTask) -> dict:
    """The regime and barrier at both ends of a service temperature range (none without), from
    the coarser force table of a spread's builds (the barrier to about 1e-4 of itself)."""
    from harvester.analysis.tolerances import TEMPERATURE_PATH, case_with
    from harvester.build import SPREAD_REGION_POINTS, build
    from harvester.model import analyse_wells

    window = loaded.case.environment.range_K
    if window is None:
        return {}
    wells = []
    for temperature in window:
        at = LoadedCase(case=case_with(loaded.case, {TEMPERATURE_PATH: temperature}),
                        path=loaded.path)
        wells.append(analyse_wells(build(at, gap_m=task.gap_m, magnet_model=task.magnet_model,
                                         table_points=SPREAD_REGION_POINTS,
                                         with_critical_gap=False).model))
    regimes = tuple(w.regime for w in wells)
    changes = regimes[0] != regimes[1]
    warnings = ()
    if changes:
        warnings = (f"{regimes[0]} at {window[0] - 273.15:.3g} °C but {regimes[1]} at "
                    f"{window[1] - 273.15:.3g} °C: the regime changes inside the service "
                    "temperature range",)
    return dict(temperatures_at_ends_K=tuple(window), regimes_at_ends=regimes,
                barriers_at_ends_J=tuple(w.barrier_J for w in wells),
                regime_changes_in_range=changes, warnings=warnings)


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
    if chosen is not None and chosen.regime_changes_in_range:
        low, high = chosen.temperatures_at_ends_K
        reason += (f"; caution: at this gap the beam is {chosen.regimes_at_ends[0]} at "
                   f"{low - 273.15:.3g} °C and {chosen.regimes_at_ends[1]} at "
                   f"{high - 273.15:.3g} °C (see `harvester spread`)")
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


def interval_words(ci95_W: tuple[float, float]) -> str:
    """A power's 95 % interval in µW, or, where it shows as one value (a tone whose starts all
    settle on one orbit), that every start gave the same power, not an interval like 102–102."""
    low, high = (f"{v * 1e6:.3g}" for v in ci95_W)
    return ("every start settles to the same power" if low == high
            else f"95 % CI {low}–{high} µW")


def _power_text(row: GapRow) -> str:
    dc = " DC" if row.dc_power_W is not None else ""
    text = f"{row.ranked_power_W * 1e6:.3g} µW{dc} ({interval_words(row.ranked_ci95_W)})"
    if row.budget_margin_W is not None:
        text += f", a margin of {row.budget_margin_W * 1e6:.3g} µW over the node"
    return text


def recommend(rows: list[GapRow], broadband: bool = False) -> tuple[int | None, str]:
    """The candidate to build: the most mean power (DC power behind a bridge) among those that
    pass every check and whose node starts, a candidate that needs a lucky start counted with
    the power of the orbit a run-up reaches (`_dependable_power`), but a gap over the
    magnet-free beam only where the intervals separate them (module notes).  Behind a bridge
    with a [node], the text says when even that candidate leaves the node short."""
    best, text = _recommend(rows, broadband)
    if best is not None and not rows[best].needs_lucky_start:
        lucky = [r for r in rows if r.needs_lucky_start and r.passes and not r.never_starts
                 and r.ranked_power_W > rows[best].ranked_power_W]
        if lucky:
            text = text.replace("of the candidates that pass every check", "of the candidates "
                                "that pass every check and that a run-up from rest carries to "
                                "their high-power orbit", 1)
            text += ("; passed over for needing a lucky start (more power over random starts, "
                     "but a run-up from rest leaves the beam on a low-power orbit): "
                     + ", ".join(f"{r.gap_m * 1e3:.4g} mm" for r in lucky))
    if best is not None and rows[best].needs_lucky_start:
        safe = [r for r in rows if r.passes and r.needs_lucky_start is False
                and not r.never_starts and r.mean_power_W is not None]
        left = rows[best].upsweep_power_W
        text += ("; but its high-power orbit needs a lucky start: a machine run up to speed "
                 + ("leaves the beam striking its stops" if left is None else
                    f"leaves it at {left * 1e6:.3g} µW (AC)"))
        if safe:
            other = max(safe, key=lambda r: r.ranked_power_W)
            text += (f"; the best candidate that a run-up carries to its high-power orbit is "
                     f"{'the magnet-free beam' if other.magnet_free else _gap_text(other)}, "
                     f"{_power_text(other)}")
    margin = None if best is None else rows[best].budget_margin_W
    if margin is not None and margin < 0.0:
        text += ("; even so the node is short by "
                 f"{-margin * 1e6:.3g} µW on average: lower its consumption or harvest more")
    return best, text


def _dependable_power(row: GapRow) -> float:
    """The power a candidate can be counted on for [W]: its ranked (DC behind a bridge) mean over
    random starts, or, where its high-power orbit needs a lucky start, the power of the orbit a
    run-up from rest reaches (scaled by the row's DC-to-AC ratio behind a bridge)."""
    if not row.needs_lucky_start:
        return row.ranked_power_W
    if row.upsweep_power_W is None or not row.mean_power_W:
        return 0.0
    return row.upsweep_power_W * row.ranked_power_W / row.mean_power_W


def _recommend(rows: list[GapRow], broadband: bool) -> tuple[int | None, str]:
    checked = [i for i, r in enumerate(rows) if r.passes and r.mean_power_W is not None]
    passing = [i for i in checked if not rows[i].never_starts]
    free = next((i for i, r in enumerate(rows) if r.magnet_free), None)
    if checked and not passing:
        return None, ("the node never starts on any candidate that passes every check: its "
                      "open-circuit voltage stays under the start voltage plus two diode drops; "
                      "lower the store or start voltage, or harvest more")
    if not passing:
        failing = sorted({r.worst_check for r in rows if r.worst_level not in (None, "pass")})
        return None, ("no candidate passes every check (" + ", ".join(failing) + "): change the "
                      "beam, the magnets or the limits")
    # a machine that runs up to speed leaves the beam where the run-up does: a candidate whose
    # high-power orbit needs a lucky start counts with what the run-up gives
    best = max(passing, key=lambda i: _dependable_power(rows[i]))
    r = rows[best]
    what = "DC power" if r.dc_power_W is not None else "mean power"
    if r.magnet_free:
        gaps = [rows[i] for i in passing if not rows[i].magnet_free]
        runner = "; no gap passes every check"
        if gaps:
            second = max(gaps, key=lambda g: g.ranked_power_W)
            runner = (f"; the best gap that passes, {_gap_text(second)}, gives "
                      f"{_power_text(second)}")
        text = (f"leave out the fixed magnet: the magnet-free beam delivers the most {what} "
                f"within every limit, {_power_text(r)}{runner}")
        if broadband:
            text += (" (under broadband excitation the mean power hardly depends on the "
                     "potential)")
        return best, text
    if free is None:
        return best, (f"{_gap_text(r)}: most {what} of the {len(passing)} gaps that pass "
                      f"every check, {_power_text(r)} (the case gives no magnet-free beam to "
                      "compare with)")
    f = rows[free]
    if free not in passing:
        why = ("the node never starts on the magnet-free beam" if f.never_starts and f.passes
               else f"the magnet-free beam fails {f.worst_check} (margin {f.worst_margin:.3g})")
        return best, (f"{_gap_text(r)}: most {what} of the candidates that pass every "
                      f"check, {_power_text(r)}; {why}")
    if r.ranked_ci95_W[0] > f.ranked_ci95_W[1]:
        gain = r.ranked_power_W / f.ranked_power_W if f.ranked_power_W else math.inf
        times = f"{gain:,.0f}" if gain >= 1000 else f"{gain:.3g}"  # 1,270×, not 1.27e+03×
        return best, (f"{_gap_text(r)}: {times}× the magnet-free beam's {what}, "
                      f"{_power_text(r)} against {_power_text(f)}, outside both intervals, and "
                      "every check passes")
    tighten = ("lower --ci (e.g. --ci 0.02)" if broadband else
               "more starts (e.g. --starts 128)")
    return free, (f"leave out the fixed magnet: the best gap, {_gap_text(r)} with "
                  f"{_power_text(r)}, cannot be told apart from the magnet-free beam, "
                  f"{_power_text(f)}, at this ensemble size; to tighten the intervals run with "
                  f"{tighten}")
