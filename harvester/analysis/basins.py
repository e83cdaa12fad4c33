"""Basins of attraction under a tone: which orbit each start ends on, and how many starts do.

A grid of starts (x0, ẋ0) at one forcing phase (ωt = 0, the crest of a(t) = A cos ωt) is run
as one ensemble through the integrator, each start for a transient and then a window of forcing
periods; every trajectory is classified from its stroboscopic points and grouped into
attractors (`harvester.dynamics.orbits`: intrawell in the well at x < 0 or x > 0,
interwell-periodic, chaotic).  The map colours each start by the attractor it ends on.

Each attractor's basin stability is the share of the starts in the region Q that end on it,
S_B = N_A/N; for starts spread over Q its sampling error is the binomial standard error
√(S_B(1 − S_B)/N) (Menck, Heitzig, Marwan & Kurths 2013, Nat. Phys. 9:89, who estimate S_B
from random starts; a regular grid samples the region at least as evenly).  The region is the
one the orbit mix of `harvester power` draws its random starts from (`basin_samples`):
|x0| ≤ 1.5 L, |ẋ0| ≤ ω L, L the well position and ω the small-oscillation frequency in the
well; for a single-well beam L is the motion's length scale, kept inside a third of the travel.

An attractor that looks chaotic (hops, never repeats) is confirmed on a sample of its members
by the largest Lyapunov exponent (Benettin et al. 1980, Meccanica 15:9): positive on average,
it stays chaotic; otherwise its members are long-period or still settling interwell orbits and
are reported as interwell-periodic with period 0 (harvester/METHODS.md §11).

References
----------
Menck, Heitzig, Marwan & Kurths (2013), "How basin stability complements the linear-stability
paradigm", Nat. Phys. 9:89.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from harvester.analysis.thresholds import settling_periods
from harvester.dynamics.integrator import (
    FLAG_OK,
    length_scale_m,
    recommended_steps_per_period,
    simulate_tone,
)
from harvester.dynamics.lyapunov import largest_lyapunov_exponent
from harvester.dynamics.orbits import (
    CHAOTIC,
    INTERWELL_PERIODIC,
    classify_orbits,
    find_attractors,
)
from harvester.model import ReducedModel, analyse_wells

GRID_POINTS = 200  # starts along each axis: 40 000 in all
WINDOW_PERIODS = 64  # periods each start is classified and averaged over, after its transient
# Transient, in amplitude decay times of the beam's free motion (at least 64 periods,
# `settling_periods`): starts near a basin boundary wander chaotically for far longer than the
# 8 decay times that settle a periodic orbit.  A start still wandering in the window is
# reported as an interwell orbit of period 0 (long-period or not settled).  On a lightly damped
# double well (δ = 0.1, γ = 0.3, ω = 1.4) 24 decay times left 14 % of the starts wandering, 14
# left 29 % and 90 left 0.1 %; each period costs as much as one of the window's.
TRANSIENT_DECAYS = 24.0
# Members of a chaotic-looking attractor whose Lyapunov exponent is computed: enough for the
# sign of the mean, a fraction of the cost of computing it for all of them.
CHAOS_SAMPLE = 32
LYAPUNOV_PERIODS = 300  # as for the orbit mix (`analysis.tone_power`)
# An orbit is on the high-power side when it delivers at least this share of the best orbit's
# mean power: the mirror-image orbits of a symmetric beam and orbits that differ only in their
# period count together, orbits that deliver a fraction of the best do not.
HIGH_POWER_FRACTION = 0.5


@dataclass(frozen=True)
class BasinOrbit:
    """One attractor of a basin map: its kind, its basin's share of the starts and its power."""

    kind: str  # "intrawell" | "interwell-periodic" | "chaotic"
    well: int  # −1/+1 for an intrawell orbit of a bistable beam, else 0
    period: int  # in forcing periods; 0: none found
    share: float  # basin stability S_B: share of the starts that end here
    standard_error: float  # √(S_B(1 − S_B)/N)
    mean_power_W: float
    hop_rate_per_s: float
    max_abs_x_m: float
    lyapunov_per_s: float | None  # mean over a sample of the members (chaotic-looking orbits)


@dataclass(frozen=True)
class BasinMap:
    """Starts on a grid over (x0, ẋ0) at forcing phase 0, and the attractor each ends on."""

    frequency_Hz: float
    amplitude_mps2: float
    x_m: np.ndarray  # (points,) initial displacements, the grid's columns
    v_mps: np.ndarray  # (points,) initial velocities, the grid's rows
    rank: np.ndarray  # (points, points): index into `orbits` (largest basin first); −1 flagged
    orbits: tuple[BasinOrbit, ...]
    flagged_share: float  # starts that struck the stops or diverged
    transient_periods: int
    window_periods: int

    @property
    def starts(self) -> int:
        return self.rank.size


def basin_region(model: ReducedModel, amplitude_mps2: float) -> tuple[float, float]:
    """Half-widths (X [m], V [m/s]) of the region of starts |x0| ≤ X, |ẋ0| ≤ V (module notes):
    X = 1.5 L, V = ω L."""
    wells = analyse_wells(model)
    omega = 2.0 * math.pi * wells.well_frequency_Hz
    if wells.regime == "bistable":
        length = max(wells.wells_m)
    else:
        length = length_scale_m(model, amplitude_mps2)
        if math.isfinite(model.travel_limit_m):
            length = min(length, 0.5 * model.travel_limit_m / 1.5)
    return 1.5 * length, omega * length


def basin_map(model: ReducedModel, amplitude_mps2: float, frequency_Hz: float, *,
              points: int = GRID_POINTS, transient_periods: int | None = None,
              window_periods: int = WINDOW_PERIODS, steps_per_period: int | None = None,
              confirm_chaos: bool = True) -> BasinMap:
    """The attractor each of points × points starts ends on under a tone, and each
    attractor's basin stability and mean power (module notes).

    Parameters
    ----------
    model : the reduced model at its load
    amplitude_mps2 : base-acceleration amplitude A [m/s²] of a(t) = A cos ωt
    frequency_Hz : tone frequency [Hz]
    points : starts along each axis (cell centres of a regular grid over `basin_region`)
    transient_periods : periods before the window; default `settling_periods` for
        TRANSIENT_DECAYS decay times
    window_periods : periods each start is classified and averaged over
    """
    if points < 2:
        raise ValueError("a basin map needs at least 2 × 2 starts")
    if transient_periods is None:
        transient_periods = settling_periods(model, frequency_Hz, e_folds=TRANSIENT_DECAYS)
    if steps_per_period is None:
        steps_per_period = recommended_steps_per_period(model, frequency_Hz)
    x_half, v_half = basin_region(model, amplitude_mps2)
    centres = (np.arange(points) + 0.5) / points * 2.0 - 1.0
    x_m, v_mps = x_half * centres, v_half * centres
    x0, v0 = np.meshgrid(x_m, v_mps)
    ens = simulate_tone(model, amplitude_mps2, frequency_Hz, x0.ravel(), v0.ravel(),
                        transient_periods=transient_periods, strobe_periods=window_periods,
                        steps_per_period=steps_per_period)
    classes = classify_orbits(model, ens)
    found = find_attractors(model, ens, classes)
    n = ens.n
    orbits, members = [], []
    for a in found:
        lyapunov = None
        kind, period = a.kind, a.period
        if confirm_chaos and kind == CHAOTIC:
            lyapunov = _sampled_exponent(model, ens, a.members, steps_per_period)
            if lyapunov <= 0.0:
                kind, period = INTERWELL_PERIODIC, 0
        share = a.members.size / n
        orbits.append(BasinOrbit(
            kind=kind, well=a.well, period=period, share=share,
            standard_error=math.sqrt(share * (1.0 - share) / n), mean_power_W=a.mean_power_W,
            hop_rate_per_s=a.hop_rate_per_s, max_abs_x_m=a.max_abs_x_m,
            lyapunov_per_s=lyapunov))
        members.append(a.members)
    order = sorted(range(len(orbits)), key=lambda i: -orbits[i].share)
    rank = np.full(n, -1, dtype=np.int64)
    for position, i in enumerate(order):
        rank[members[i]] = position
    return BasinMap(frequency_Hz=float(frequency_Hz), amplitude_mps2=float(amplitude_mps2),
                    x_m=x_m, v_mps=v_mps, rank=rank.reshape(points, points),
                    orbits=tuple(orbits[i] for i in order),
                    flagged_share=float(np.mean(ens.flag != FLAG_OK)),
                    transient_periods=int(transient_periods), window_periods=window_periods)


def _sampled_exponent(model: ReducedModel, ens, members: np.ndarray,
                      steps_per_period: int) -> float:
    """Mean largest Lyapunov exponent [1/s] of up to CHAOS_SAMPLE members spread evenly over
    `members`, continued from their final states."""
    pick = members[np.linspace(0, members.size - 1, min(CHAOS_SAMPLE, members.size)).astype(int)]
    est = largest_lyapunov_exponent(model, ens.amplitude_mps2[pick], ens.frequency_Hz[pick],
                                    ens.x_m[pick], ens.v_mps[pick], ens.q[pick],
                                    transient_periods=8, periods=LYAPUNOV_PERIODS,
                                    steps_per_period=steps_per_period,
                                    strobe_phase=ens.strobe_phase)
    return float(np.mean(est.exponent_per_s))


def high_power_orbits(orbits, fraction: float = HIGH_POWER_FRACTION) -> list:
    """The orbits on the high-power side: those delivering at least `fraction` of the best
    orbit's mean power (any records with `mean_power_W` and `share`).  Empty when no orbit
    delivers any power.

    >>> from types import SimpleNamespace as O
    >>> [o.share for o in high_power_orbits([O(share=0.6, mean_power_W=1e-6),
    ...                                      O(share=0.3, mean_power_W=40e-6),
    ...                                      O(share=0.1, mean_power_W=25e-6)])]
    [0.3, 0.1]
    """
    best = max((o.mean_power_W for o in orbits), default=0.0)
    if not best > 0.0:
        return []
    return [o for o in orbits if o.mean_power_W >= fraction * best]


def high_power_share(orbits, fraction: float = HIGH_POWER_FRACTION) -> float | None:
    """Share of the starts that end on the high-power side (`high_power_orbits`); None when no
    orbit delivers any power."""
    found = high_power_orbits(orbits, fraction)
    return float(sum(o.share for o in found)) if found else None
