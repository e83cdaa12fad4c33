"""`harvester hop`: hop thresholds against frequency, with the settings every command shares."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from harvester.analysis.operating import nominal_load, study_grid
from harvester.build import Built
from harvester.case.load import LoadedCase
from harvester.commands.records import Record
from harvester.model import ReducedModel

# without [study].frequencies: 0.25–2.5 × the operating frequency, 30 points
DEFAULT_GRID = (0.25, 2.5, 30)


@dataclass(frozen=True)
class HopSettings(Record):
    """The amplitude search behind every hop threshold: `hop`, `compare` and the note use the
    same, so they agree on a gap (the thresholds are reproducible from the seed)."""

    initial_states_count: int = 24  # starts per frequency and amplitude (the first at rest)
    bisection_steps_count: int = 5  # halvings of the 2^(1/4) ladder's bracket: about 0.5 %
    seed: int = 0


@dataclass(frozen=True)
class HopRow(Record):
    """Hop thresholds at one frequency [m/s² of base-acceleration amplitude]; None where there
    is no answer (`status` says why)."""

    frequency_Hz: float
    melnikov_mps2: float | None  # lower bound: a necessary condition for chaotic hopping
    onset_mps2: float | None  # the beam at rest in a well starts hopping
    certain_mps2: float | None  # no intrawell orbit remains among the starts
    stop_mps2: float | None  # the beam at rest strikes its travel limit
    interwell_exists_mps2: float | None  # some start ends in interwell motion
    scan_top_mps2: float | None  # the largest amplitude tried
    status: str  # e.g. "hops", "monostable", "stop-before-hop", "no-hop-in-scan"
    flagged: bool
    note: str

    @classmethod
    def of(cls, row) -> HopRow:
        """From an `analysis.thresholds.ThresholdRow`."""
        return cls(frequency_Hz=row.frequency_Hz, melnikov_mps2=row.melnikov_mps2,
                   onset_mps2=row.onset_mps2, certain_mps2=row.certain_mps2,
                   stop_mps2=row.stop_mps2, interwell_exists_mps2=row.interwell_exists_mps2,
                   scan_top_mps2=row.scan_top_mps2, status=row.status, flagged=row.flagged,
                   note=row.note)


@dataclass(frozen=True)
class HopResult(Record):
    """`harvester hop`: one row per frequency, the load they were found at, and how."""

    rows: tuple[HopRow, ...]
    load_ohm: float
    load_note: str
    frequencies_note: str
    settings: HopSettings


def study_frequencies(loaded: LoadedCase, model: ReducedModel) -> tuple[np.ndarray, str]:
    """[study].frequencies, or 30 points from 0.25 to 2.5 × the operating frequency."""
    return study_grid(loaded.case.study.frequencies, model, DEFAULT_GRID)


def threshold_rows(model: ReducedModel, frequencies_Hz, settings: HopSettings,
                   progress: Callable[[int, int], None] | None = None) -> tuple[HopRow, ...]:
    """Hop thresholds of a loaded model at the frequencies, with the shared settings."""
    from harvester.analysis.thresholds import hop_thresholds

    rows = hop_thresholds(model, np.atleast_1d(np.asarray(frequencies_Hz, dtype=float)),
                          seed=settings.seed, n_initial=settings.initial_states_count,
                          bisection_steps=settings.bisection_steps_count, progress=progress)
    return tuple(HopRow.of(r) for r in rows)


def hop_model(loaded: LoadedCase, built: Built) -> tuple[ReducedModel, str]:
    """The built model at the load the thresholds are found at (the load `power` uses), and
    how it was chosen."""
    psd = None
    excitation = loaded.case.excitation
    if loaded.case.load.resistance is None and excitation is not None \
            and excitation.kind != "tone":
        from harvester.case.signals import random_excitation

        psd = random_excitation(loaded).psd
    load, note = nominal_load(built.model, loaded.case.load.resistance, psd)
    return built.model.with_load(load), note


def hop_result(loaded: LoadedCase, *, seed: int = 0, magnet_model: str = "exact",
               progress: Callable[[int, int], None] | None = None) -> HopResult:
    """`harvester hop`: Melnikov bound and numerical thresholds over the study frequencies."""
    from harvester.build import build

    built = build(loaded, magnet_model=magnet_model)
    model, note = hop_model(loaded, built)
    freqs, grid_note = study_frequencies(loaded, model)
    settings = HopSettings(seed=seed)
    return HopResult(rows=threshold_rows(model, freqs, settings, progress),
                     load_ohm=model.load_ohm, load_note=note, frequencies_note=grid_note,
                     settings=settings)
