"""`harvester basins`: the basin-of-attraction map of the case's design under a tone.

Which orbit the beam ends on depends on where it starts: a grid of starts over the tip's
deflection and speed at one forcing phase (`analysis.basins.basin_map`), each attractor with its
basin stability (the share of the starts that end on it, with its sampling error) and its mean
power, and the share that ends on the high-power side.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

from harvester.case.load import LoadedCase
from harvester.commands.records import Record


@dataclass(frozen=True)
class BasinRow(Record):
    """One attractor: its kind, its basin's share of the starts and its mean power."""

    rank: int  # by basin size, 0 the largest; the map's cells hold it
    kind: str  # "intrawell" | "interwell-periodic" | "chaotic"
    well: int  # −1/+1 for an intrawell orbit of a bistable beam, else 0
    period: int  # in forcing periods; 0: none found
    share: float  # basin stability: of the starts
    ci95_share: tuple[float, float]  # share ± 1.96 standard errors (binomial)
    mean_power_W: float
    hop_rate_per_s: float
    max_abs_x_m: float
    lyapunov_per_s: float | None
    high_power: bool  # on the high-power side (`analysis.basins.high_power_orbits`)


@dataclass(frozen=True)
class BasinGrid(Record):
    """The map: `rank[i][j]` is the attractor that the start (x_m[j], v_mps[i]) ends on
    (−1: it struck the stops or diverged)."""

    x_m: tuple[float, ...]
    v_mps: tuple[float, ...]
    rank: tuple[tuple[int, ...], ...]


@dataclass(frozen=True)
class BasinsResult(Record):
    """`harvester basins`: the attractors, their basin shares and power, and the map."""

    frequency_Hz: float
    amplitude_mps2: float
    gap_m: float | None
    load_ohm: float
    load_note: str
    forcing_phase_fraction: float  # of a period: the starts are taken at a(t) = A cos(2π·this)
    starts_count: int
    transient_periods_count: int
    window_periods_count: int
    attractors: tuple[BasinRow, ...]
    high_power_share: float | None  # of the starts: on the high-power side
    flagged_share: float
    grid: BasinGrid
    notes: tuple[str, ...] = ()


def basins_result(loaded: LoadedCase, *, frequency_Hz: float | None = None,
                  amplitude_mps2: float | None = None, gap_m: float | None = None,
                  load_ohm: float | None = None, points: int | None = None,
                  magnet_model: str = "exact",
                  progress: Callable[[float, float], None] | None = None) -> BasinsResult:
    """`harvester basins`: the basin map of the case's design (or of `gap_m`) under the tone
    (the options, else the case's [excitation] tone), at the load `hop` uses (or `load_ohm`)."""
    from harvester.analysis.basins import (
        GRID_POINTS,
        basin_map,
        high_power_orbits,
        high_power_share,
    )
    from harvester.analysis.sweep import PHASE
    from harvester.build import build
    from harvester.commands.hop import hop_model
    from harvester.commands.sweep import tone_of
    from harvester.errors import CaseError

    frequency_Hz, amplitude_mps2 = tone_of(loaded, frequency_Hz, amplitude_mps2)
    if frequency_Hz is None or amplitude_mps2 is None:
        raise CaseError("no tone to map the basins under: give --frequency and --amplitude "
                        "(or an [excitation] tone)", file=str(loaded.path), key="excitation")
    if not frequency_Hz > 0.0:
        raise CaseError(f"the frequency must be positive, got {frequency_Hz:g} Hz",
                        key="--frequency")
    built = build(loaded, gap_m=gap_m, magnet_model=magnet_model)
    model, load_note = hop_model(loaded, built)
    if load_ohm is not None:
        model, load_note = model.with_load(load_ohm), "as chosen for the candidate"
    if progress is not None:
        progress(0.0, 1.0)
    found = basin_map(model, amplitude_mps2, frequency_Hz,
                      points=GRID_POINTS if points is None else points)
    if progress is not None:
        progress(1.0, 1.0)
    high = high_power_orbits(found.orbits)
    rows = tuple(BasinRow(
        rank=i, kind=o.kind, well=o.well, period=o.period, share=o.share,
        ci95_share=(max(o.share - 1.96 * o.standard_error, 0.0),
                    min(o.share + 1.96 * o.standard_error, 1.0)),
        mean_power_W=o.mean_power_W, hop_rate_per_s=o.hop_rate_per_s,
        max_abs_x_m=o.max_abs_x_m, lyapunov_per_s=o.lyapunov_per_s,
        high_power=any(o is h for h in high)) for i, o in enumerate(found.orbits))
    notes = []
    if found.flagged_share > 0.0:
        notes.append(f"{100 * found.flagged_share:.2g} % of the starts struck the stops or "
                     "diverged; they are on no attractor")
    magnet = loaded.case.fixed_magnet
    return BasinsResult(
        frequency_Hz=found.frequency_Hz, amplitude_mps2=found.amplitude_mps2,
        gap_m=gap_m if gap_m is not None else (magnet.gap if magnet is not None else None),
        load_ohm=model.load_ohm, load_note=load_note,
        forcing_phase_fraction=PHASE / (2.0 * math.pi), starts_count=found.starts,
        transient_periods_count=found.transient_periods,
        window_periods_count=found.window_periods, attractors=rows,
        high_power_share=high_power_share(found.orbits),
        flagged_share=found.flagged_share,
        grid=BasinGrid(x_m=tuple(found.x_m.tolist()), v_mps=tuple(found.v_mps.tolist()),
                       rank=tuple(tuple(r) for r in found.rank.tolist())),
        notes=tuple(notes))
