"""Candidate-gap study: one row per gap (statics, hop thresholds, mean power, safety) and the
recommended gap — the gap with the most mean power among those that pass every check.

Each gap × seed is an independent task (`GapTask`) run through `run_tasks`, so the study runs
the same in this process, on a local process pool or on a Dask cluster; every task carries its
own seed, so the answer does not depend on which executor ran it.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

# Hop maps for the note use a lighter bisection than `harvester hop` (a map is read by eye):
# 12 initial states per point and 4 bisections of the 2^(1/4) ladder (thresholds to about 1 %).
MAP_INITIAL_STATES = 12
MAP_BISECTIONS = 4


@dataclass(frozen=True)
class GapTask:
    """Everything one worker needs to evaluate one candidate gap (plain, picklable values)."""

    case_path: str
    gap_m: float
    seed: int = 0
    magnet_model: str = "exact"
    target_relative_half_width: float = 0.05
    hop_map: bool = True  # thresholds over [study].frequencies as well


def evaluate_gap(task: GapTask) -> dict:
    """Statics, hop thresholds, mean power and safety checks of one gap (JSON-ready, SI keys)."""
    from harvester.analysis.prediction import (
        check_dict,
        nominal_load,
        predict_power,
        study_frequencies,
    )
    from harvester.analysis.statics import wells_payload, wells_warnings
    from harvester.analysis.thresholds import hop_thresholds
    from harvester.build import build
    from harvester.case.load import load_case

    loaded = load_case(task.case_path)
    built = build(loaded, gap_m=task.gap_m, magnet_model=task.magnet_model)
    statics = wells_payload(built)
    prediction = predict_power(loaded, built, seed=task.seed, sweep=False,
                               target_relative_half_width=task.target_relative_half_width)
    summary = prediction.summary
    row = {
        "gap_m": task.gap_m,
        "seed": task.seed,
        "regime": statics["regime"],
        "critical_gap_m": statics["critical_gap_m"],
        "wells_m": statics["wells_m"],
        "barrier_J": statics["barrier_J"],
        "well_frequency_Hz": statics["well_frequency_Hz"],
        "linear_frequency_Hz": statics["linear_frequency_Hz"],
        "k1_N_per_m": statics["k1_N_per_m"],
        "k3_N_per_m3": statics["k3_N_per_m3"],
        "stiffness_terms_SI": statics["stiffness_terms_SI"],
        "fit_window_m": statics.get("fit_window_m"),
        "mean_power_W": summary.get("mean_power_W"),
        "ci95_W": summary.get("ci95_W"),
        "linear_power_W": summary.get("linear_power_W"),
        "hop_rate_per_s": summary.get("hop_rate_per_s"),
        "rms_voltage_V": summary.get("rms_voltage_V"),
        "orbits": summary.get("orbits"),
        "load_ohm": prediction.load_ohm,
        "load_note": prediction.load_note,
        "x_min_m": prediction.envelope.x_min_m,
        "x_max_m": prediction.envelope.x_max_m,
        "checks": [check_dict(c) for c in prediction.checks],
        "omitted_checks": list(prediction.omitted),
        "warnings": list(prediction.warnings) + wells_warnings(built),
    }
    linear = row["linear_power_W"]
    row["gain_over_linear"] = (row["mean_power_W"] / linear) if linear else None
    # hop thresholds: at the tone's frequency (if any) and over the study grid for the map
    model = built.model.with_load(prediction.load_ohm if math.isfinite(prediction.load_ohm)
                                  else nominal_load(built.model, None)[0])
    tone = loaded.case.excitation.tone if loaded.case.excitation is not None else None
    freqs = np.empty(0)
    if task.hop_map:
        freqs, _ = study_frequencies(loaded, model)
    asked = np.concatenate([freqs, [tone.frequency]]) if tone is not None else freqs
    if asked.size:
        rows = [r.to_dict() for r in hop_thresholds(
            model, asked, seed=task.seed, n_initial=MAP_INITIAL_STATES,
            bisection_steps=MAP_BISECTIONS)]
        row["hop_map"] = rows[: freqs.size]
        if tone is not None:
            row["onset_mps2"] = rows[-1]["onset_mps2"]
            row["melnikov_mps2"] = rows[-1]["melnikov_mps2"]
            row["onset_note"] = rows[-1]["note"]
        else:
            row.update(_lowest_onset(rows[: freqs.size], loaded))
    row["worst"] = _worst(row["checks"])
    return row


def _lowest_onset(rows: list[dict], loaded) -> dict:
    """For random excitation: the lowest tonal onset inside the excitation's band."""
    band = loaded.case.excitation.band if loaded.case.excitation is not None else None
    inside = [r for r in rows if r["onset_mps2"] is not None and (
        band is None or band.low <= r["frequency_Hz"] <= band.high)]
    if not inside:
        return {"onset_mps2": None, "onset_frequency_Hz": None, "melnikov_mps2": None}
    best = min(inside, key=lambda r: r["onset_mps2"])
    return {"onset_mps2": best["onset_mps2"], "onset_frequency_Hz": best["frequency_Hz"],
            "melnikov_mps2": best["melnikov_mps2"], "onset_note": best["note"]}


def _worst(checks: list[dict]) -> dict | None:
    order = {"fail": 0, "warn": 1, "pass": 2}
    if not checks:
        return None
    worst = min(checks, key=lambda c: (order[c["level"]], c["margin"]))
    return {"name": worst["name"], "level": worst["level"], "margin": worst["margin"]}


@dataclass(frozen=True)
class Comparison:
    """The candidate-gap table and the recommendation."""

    rows: tuple[dict, ...]  # sorted by gap
    recommended: int | None  # index into rows
    reason: str

    def to_dict(self) -> dict:
        return {"rows": list(self.rows),
                "recommended_gap_m": (self.rows[self.recommended]["gap_m"]
                                      if self.recommended is not None else None),
                "recommendation": self.reason}


def candidate_gaps(loaded) -> list[float]:
    """[study].gaps, or the case's own gap when no study is given."""
    gaps = list(loaded.case.study.gaps)
    if not gaps and loaded.case.fixed_magnet is not None:
        gaps = [loaded.case.fixed_magnet.gap]
    return sorted(set(gaps))


def compare_gaps(loaded, *, seed: int = 0, magnet_model: str = "exact",
                 target_relative_half_width: float = 0.05, hop_map: bool = True,
                 workers: int | None = None, cluster: str | None = None,
                 progress: Callable[[int, int], None] | None = None) -> Comparison:
    """Evaluate every candidate gap and recommend one."""
    from harvester.analysis.executor import run_tasks
    from harvester.errors import CaseError

    gaps = candidate_gaps(loaded)
    if not gaps:
        raise CaseError("nothing to compare: give [study].gaps (or a [fixed_magnet] gap)",
                        file=str(loaded.path), key="study.gaps")
    tasks = [GapTask(case_path=str(loaded.path), gap_m=g, seed=seed, magnet_model=magnet_model,
                     target_relative_half_width=target_relative_half_width, hop_map=hop_map)
             for g in gaps]
    rows = run_tasks(evaluate_gap, tasks, workers=workers, cluster=cluster, progress=progress)
    excitation = loaded.case.excitation
    index, reason = recommend(rows, broadband=excitation is not None and excitation.kind != "tone")
    return Comparison(rows=tuple(rows), recommended=index, reason=reason)


def recommend(rows: list[dict], broadband: bool = False) -> tuple[int | None, str]:
    """The gap with the most mean power among those whose every check passes."""
    passing = [i for i, r in enumerate(rows)
               if r["checks"] and all(c["level"] == "pass" for c in r["checks"])
               and r["mean_power_W"] is not None]
    if not passing:
        failing = sorted({r["worst"]["name"] for r in rows if r.get("worst")
                          and r["worst"]["level"] != "pass"})
        return None, ("no candidate gap passes every check (" + ", ".join(failing) + "): "
                      "change the beam, the magnets or the limits")
    best = max(passing, key=lambda i: rows[i]["mean_power_W"])
    r = rows[best]
    gain = r.get("gain_over_linear")
    gain_text = f", {gain:.3g}× the magnet-free beam" if gain else ""
    reason = (f"{r['gap_m'] * 1e3:.3g} mm ({r.get('regime', 'regime unknown')}): most mean power "
              f"({r['mean_power_W'] * 1e6:.3g} µW{gain_text}) of the {len(passing)} of "
              f"{len(rows)} gaps that pass every check")
    if gain is not None and gain < 1.0:
        reason += "; it delivers less than the same beam without magnets"
    if r.get("regime") == "monostable" and any(x.get("regime") == "bistable" for x in rows):
        reason += "; no bistable gap does better within the limits"
        if broadband:
            reason += " (under broadband excitation the mean power hardly depends on the potential)"
    return best, reason


@dataclass(frozen=True)
class DesignStudy:
    """Everything the design note shows: the gap table, the sweep at the chosen gap, the site."""

    comparison: Comparison
    focus_gap_m: float | None  # the recommended gap, else the case's own gap
    sweep: tuple[dict, ...]  # tone: bistable vs magnet-free power over [study].frequencies
    spectrum: dict | None  # random: the site PSD (frequency_Hz, psd) and its summary
    excitation: str


def design_study(loaded, *, seed: int = 0, magnet_model: str = "exact",
                 workers: int | None = None, cluster: str | None = None,
                 progress: Callable[[int, int], None] | None = None) -> DesignStudy:
    """The candidate-gap comparison with hop maps, plus the sweep or spectrum for the note."""
    from harvester.analysis.prediction import nominal_load, study_frequencies
    from harvester.build import build

    gaps = candidate_gaps(loaded)
    total = len(gaps) + 1

    def step(done: int, _total: int) -> None:
        if progress is not None:
            progress(done, total)

    comparison = compare_gaps(loaded, seed=seed, magnet_model=magnet_model, hop_map=True,
                              workers=workers, cluster=cluster, progress=step)
    rows = comparison.rows
    if comparison.recommended is not None:
        focus = rows[comparison.recommended]
    else:
        own = loaded.case.fixed_magnet.gap if loaded.case.fixed_magnet is not None else None
        focus = min(rows, key=lambda r: abs(r["gap_m"] - own)) if own is not None else rows[0]
    excitation = loaded.case.excitation.kind if loaded.case.excitation is not None else "none"
    sweep: tuple[dict, ...] = ()
    spectrum = None
    if excitation == "tone":
        from harvester.analysis.prediction import tone_sweep_row
        from harvester.analysis.tone_power import tone_power_sweep

        built = build(loaded, gap_m=focus["gap_m"], magnet_model=magnet_model)
        load = focus["load_ohm"]
        if not math.isfinite(load):
            load = nominal_load(built.model, None)[0]
        model = built.model.with_load(load)
        freqs, _ = study_frequencies(loaded, model)
        tone = loaded.case.excitation.tone
        sweep = tuple(tone_sweep_row(r) for r in tone_power_sweep(model, tone.amplitude, freqs,
                                                             seed=seed))
    elif excitation != "none":
        from harvester.case.signals import random_excitation

        site = random_excitation(loaded)
        spectrum = {"frequency_Hz": list(site.psd.frequency_Hz),
                    "psd_m2_s4_per_Hz": list(site.psd.psd_m2_s4_per_Hz),
                    "summary": site.summary.to_dict(), "warnings": list(site.warnings)}
    step(total, total)
    return DesignStudy(comparison=comparison, focus_gap_m=focus["gap_m"], sweep=sweep,
                       spectrum=spectrum, excitation=excitation)
