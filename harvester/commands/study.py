"""The design study behind the note: the comparison, the sweep or spectrum at the chosen gap."""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

from harvester.case.load import LoadedCase
from harvester.commands.compare import CompareResult, GapRow, candidate_gaps, compare_result
from harvester.commands.power import SweepRow


@dataclass(frozen=True)
class SiteSpectrum:
    """The site PSD the Monte Carlo used, for the note's figure."""

    frequency_Hz: tuple[float, ...]
    psd_m2_s4_per_Hz: tuple[float, ...]
    summary: object  # SpectrumSummary
    warnings: tuple[str, ...]


@dataclass(frozen=True)
class DesignStudy:
    """Everything the design note shows."""

    comparison: CompareResult
    focus: GapRow | None  # the recommended gap; else the gap with the most power
    sweep: tuple[SweepRow, ...]  # tone: power over [study].frequencies at the focus gap
    spectrum: SiteSpectrum | None  # random: the site PSD
    excitation: str


def focus_gap(comparison: CompareResult) -> GapRow | None:
    """The gap the note dwells on: the recommended one, else the gap with the most power."""
    gaps = [r for r in comparison.rows if not r.magnet_free]
    if comparison.recommended_gap_m is not None:
        return next(r for r in gaps if r.gap_m == comparison.recommended_gap_m)
    return max(gaps, key=lambda r: r.mean_power_W, default=None)


def design_study(loaded: LoadedCase, *, seed: int = 0, magnet_model: str = "exact",
                 workers: int | None = None, cluster: str | None = None,
                 progress: Callable[[int, int], None] | None = None) -> DesignStudy:
    """The candidate comparison with hop maps, plus the sweep or spectrum for the note."""
    from harvester.analysis.operating import nominal_load
    from harvester.build import build
    from harvester.commands.hop import study_frequencies

    total = len(candidate_gaps(loaded)) + 2

    def step(done: int, _total: int) -> None:
        if progress is not None:
            progress(done, total)

    comparison = compare_result(loaded, seed=seed, magnet_model=magnet_model, hop_map=True,
                                workers=workers, cluster=cluster, progress=step)
    focus = focus_gap(comparison)
    excitation = loaded.case.excitation.kind
    sweep: tuple[SweepRow, ...] = ()
    spectrum = None
    if excitation == "tone" and focus is not None:
        from harvester.analysis.tone_power import tone_power_sweep
        from harvester.commands.power import sweep_row

        built = build(loaded, gap_m=focus.gap_m, magnet_model=magnet_model)
        load = focus.load_ohm if math.isfinite(focus.load_ohm) else nominal_load(
            built.model, None)[0]
        model = built.model.with_load(load)
        freqs, _ = study_frequencies(loaded, model)
        tone = loaded.case.excitation.tone
        sweep = tuple(sweep_row(r) for r in tone_power_sweep(model, tone.amplitude, freqs,
                                                            seed=seed))
    elif excitation != "tone":
        from harvester.case.signals import random_excitation

        site = random_excitation(loaded)
        spectrum = SiteSpectrum(tuple(site.psd.frequency_Hz), tuple(site.psd.psd_m2_s4_per_Hz),
                                site.summary, tuple(site.warnings))
    step(total, total)
    return DesignStudy(comparison=comparison, focus=focus, sweep=sweep, spectrum=spectrum,
                       excitation=excitation)
