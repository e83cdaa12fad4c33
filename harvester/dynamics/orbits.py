"""Orbit classification from stroboscopic samples, and grouping into attractors.

A tone-driven trajectory, sampled once per forcing period after its transient, is

* intrawell: x never passes the saddle in the window (it stays in one well: −1 left, +1 right);
* interwell periodic: x passes the saddle and the samples repeat with some period p
  (|s_(k+p) − s_k| within tolerance for every sample k in the second half of the window);
* chaotic: x passes the saddle and no period up to `max_period` repeats (Moon & Holmes 1979,
  J. Sound Vib. 65:275; confirm with a positive largest Lyapunov exponent,
  `harvester.dynamics.lyapunov`).

The saddle is x = 0 for an odd restoring force and moves with unequal wells (`analyse_wells`).
Samples are compared in scaled coordinates (x/L, ẋ/(Lω)), L the larger distance from the saddle
to a well (monostable: the largest |x| in the window).  A monostable model has one well: every
orbit is "intrawell".
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from harvester.dynamics.integrator import FLAG_OK, ToneEnsemble
from harvester.model import ReducedModel, analyse_wells

INTRAWELL = "intrawell"
INTERWELL_PERIODIC = "interwell-periodic"
CHAOTIC = "chaotic"
KINDS = (INTRAWELL, INTERWELL_PERIODIC, CHAOTIC)
FLAGGED = -1  # kind code of a trajectory the integrator flagged (untrusted)


@dataclass(frozen=True)
class OrbitClasses:
    """Per-trajectory classification; `kind` indexes KINDS, or is FLAGGED."""

    kind: np.ndarray  # int: 0 intrawell, 1 interwell periodic, 2 chaotic, −1 flagged
    period: np.ndarray  # int: smallest repeating strobe period p, 0 when none found
    well: np.ndarray  # int: +1/−1 for intrawell orbits of a bistable model, else 0


@dataclass(frozen=True)
class Attractor:
    """A group of trajectories that ended on the same attractor, with its basin share."""

    kind: str  # one of KINDS
    period: int  # strobe period p (0: none, i.e. chaotic or not settled)
    well: int  # +1/−1 for an intrawell attractor, else 0
    share: float  # fraction of the initial conditions that end here
    mean_power_W: float
    hop_rate_per_s: float
    mean_square_q: float  # [V²] or [A²]
    max_abs_x_m: float  # largest |x| in the window
    x_min_m: float  # lowest x in the window, over the members
    x_max_m: float  # highest x in the window, over the members
    max_abs_v_mps: float  # largest |ẋ| in the window, over the members
    members: np.ndarray  # indices into the ensemble
    strobe_points: np.ndarray  # (p, 2) x [m], ẋ [m/s] of a representative (p = 1 if chaotic)


def basin_samples(model: ReducedModel, n: int, seed: int = 0,
                  length_m: float | None = None) -> np.ndarray:
    """n initial states (x [m], ẋ [m/s], q = 0) for estimating basins of attraction, shape (n, 3).

    The first is the beam at rest in the right well (at x = 0 when monostable), and with
    unequal wells the second at rest in the left well; the others are uniform over
    |x − x_s| ≤ 1.5 L, |ẋ| ≤ ω L about the saddle x_s, with ω the small-oscillation frequency
    (`Wells.well_frequency_Hz`) and L the larger distance from the saddle to a well
    (monostable: x_s = 0 and L = `length_m`, required).  Reproducible from `seed`.
    """
    wells = analyse_wells(model)
    if wells.regime == "bistable":
        saddle = wells.saddle_m
        rest = wells.wells_m[1]
        length = (max(abs(w - saddle) for w in wells.wells_m) if length_m is None
                  else length_m)
    elif length_m is None:
        raise ValueError("a monostable model needs a length scale for its initial states")
    else:
        saddle, rest, length = 0.0, 0.0, length_m
    omega = 2.0 * math.pi * wells.well_frequency_Hz
    rng = np.random.default_rng(seed)
    states = np.zeros((n, 3))
    states[1:, 0] = saddle + rng.uniform(-1.5 * length, 1.5 * length, n - 1)
    states[1:, 1] = rng.uniform(-omega * length, omega * length, n - 1)
    states[0, 0] = rest
    if wells.regime == "bistable" and not model.is_symmetric and n > 1:
        states[1, :2] = wells.wells_m[0], 0.0
    return states


def resting_starts(model: ReducedModel) -> int:
    """How many of `basin_samples`' first states are the beam at rest in a well: both wells
    with unequal wells, one (the right well, or the rest position) otherwise."""
    return 1 if model.is_symmetric or not model.is_bistable else 2


def strobe_scales(model: ReducedModel, ens: ToneEnsemble) -> tuple[np.ndarray, np.ndarray]:
    """Per-trajectory displacement [m] and velocity [m/s] scales for comparing samples."""
    wells = analyse_wells(model)
    if wells.regime == "bistable":
        length = np.full(ens.n, max(abs(w - wells.saddle_m) for w in wells.wells_m))
    else:
        length = np.where(ens.max_abs_x_m > 0.0, ens.max_abs_x_m, 1.0)
    return length, length * 2.0 * math.pi * ens.frequency_Hz


def classify_orbits(model: ReducedModel, ens: ToneEnsemble, *, tolerance: float = 1e-3,
                    max_period: int | None = None) -> OrbitClasses:
    """Classify each trajectory of a tone ensemble as intrawell, interwell periodic or chaotic.

    tolerance : largest scaled distance between samples p periods apart that still counts as a
        repetition (module notes).
    max_period : longest period tried; default a quarter of the strobe window, at most 16.
    """
    n_samples = ens.strobe_x_m.shape[1]
    if max_period is None:
        max_period = max(1, min(16, n_samples // 4))
    if n_samples < 2 * max_period + 1:
        raise ValueError("the strobe window must hold more than two of the longest periods")
    length, speed = strobe_scales(model, ens)
    period = repeating_period(ens.strobe_x_m / length[:, None], ens.strobe_v_mps / speed[:, None],
                              tolerance=tolerance, max_period=max_period)
    wells = analyse_wells(model)
    bistable = wells.regime == "bistable"
    if bistable:
        stays = ens.zero_crossings == 0
    else:
        stays = np.ones(ens.n, dtype=bool)
    kind = np.where(stays, 0, np.where(period > 0, 1, 2))
    kind = np.where(ens.flag == FLAG_OK, kind, FLAGGED)
    side = np.sign(ens.strobe_x_m[:, -1] - wells.saddle_m) if bistable else 0
    well = np.where(stays & bistable, side, 0).astype(np.int64)
    return OrbitClasses(kind=kind.astype(np.int64), period=period, well=well)


def repeating_period(xs: np.ndarray, vs: np.ndarray, *, tolerance: float,
                     max_period: int) -> np.ndarray:
    """Smallest strobe period p ≤ `max_period` with which each row of scaled samples repeats
    (0 when none does): |s_(k+p) − s_k| ≤ `tolerance` in both coordinates for every sample k in
    the second half of the window.  xs, vs : (n, P) scaled displacement and velocity samples."""
    first = xs.shape[1] // 2
    period = np.zeros(xs.shape[0], dtype=np.int64)
    for p in range(max_period, 0, -1):
        # descending, so that the smallest repeating period is the one kept
        gap = np.maximum(np.abs(xs[:, first + p:] - xs[:, first:-p]),
                         np.abs(vs[:, first + p:] - vs[:, first:-p]))
        repeats = np.max(gap, axis=1) <= tolerance
        period[repeats] = p
    return period


def find_attractors(model: ReducedModel, ens: ToneEnsemble, classes: OrbitClasses,
                    members: np.ndarray | None = None, *,
                    tolerance: float = 1e-2) -> list[Attractor]:
    """Group the trajectories `members` (default all; one forcing amplitude and frequency) into
    attractors and report each with its share of the initial conditions and its mean power.

    Periodic orbits with the same period whose strobe points (rotated to start at the point of
    largest x) agree within `tolerance` (scaled) are one attractor; non-repeating intrawell
    orbits group by well; all chaotic trajectories form one attractor.  Flagged trajectories
    are left out (the shares then sum to less than one).
    """
    idx = np.arange(ens.n) if members is None else np.asarray(members)
    length, speed = strobe_scales(model, ens)
    groups: list[tuple[tuple, np.ndarray | None, list[int]]] = []
    for i in idx:
        kind = int(classes.kind[i])
        if kind == FLAGGED:
            continue
        p = int(classes.period[i])
        key = (kind, p, int(classes.well[i]))
        points = _canonical_points(ens, i, p, length[i], speed[i]) if p else None
        for g_key, g_points, g_members in groups:
            if g_key != key:
                continue
            if points is None or np.max(np.abs(points - g_points)) <= tolerance:
                g_members.append(int(i))
                break
        else:
            groups.append((key, points, [int(i)]))
    attractors = []
    for (kind, p, well), _, group in groups:
        m = np.array(group)
        rep = m[0]
        count = max(p, 1)
        attractors.append(Attractor(
            kind=KINDS[kind], period=p, well=well, share=m.size / idx.size,
            mean_power_W=float(np.mean(ens.mean_load_power_W[m])),
            hop_rate_per_s=float(np.mean(ens.hops[m] / np.maximum(ens.averaging_time_s[m],
                                                                   1e-300))),
            mean_square_q=float(np.mean(ens.mean_square_q[m])),
            max_abs_x_m=float(np.max(ens.max_abs_x_m[m])),
            x_min_m=float(np.min(ens.x_min_m[m])), x_max_m=float(np.max(ens.x_max_m[m])),
            max_abs_v_mps=float(np.max(ens.max_abs_v_mps[m])),
            members=m,
            strobe_points=np.column_stack((ens.strobe_x_m[rep, -count:],
                                           ens.strobe_v_mps[rep, -count:])),
        ))
    attractors.sort(key=lambda a: -a.share)
    return attractors


def _canonical_points(ens: ToneEnsemble, i: int, p: int, length: float,
                      speed: float) -> np.ndarray:
    """The last p strobe points of trajectory i, scaled, rotated to start at the largest x."""
    pts = np.column_stack((ens.strobe_x_m[i, -p:] / length, ens.strobe_v_mps[i, -p:] / speed))
    return np.roll(pts, -int(np.argmax(pts[:, 0])), axis=0)
