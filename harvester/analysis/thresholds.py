"""How hard a bistable harvester must be shaken, at each frequency, before it hops between wells.

Amplitudes of base acceleration [m/s²] per frequency (harvester/METHODS.md §6):

* `melnikov_mps2`: Melnikov's bound, below which transverse homoclinic orbits (and so chaotic
  hopping) cannot exist; a necessary condition, not a guarantee of hopping from rest.
* `stop_mps2`: smallest amplitude at which the beam, starting at rest in a well, strikes its
  stops (reaches the model's travel limit) at any time in the run.
* `onset_mps2`: smallest amplitude at which the beam, starting at rest in a well, settles into
  interwell motion (is still crossing x = 0 after the transient) without striking the stops.
* `certain_mps2`: smallest amplitude at which every initial state of an ensemble does, i.e. no
  intrawell attractor is left (as far as the ensemble can see: small basins can be missed, so
  this is an estimate from below).  A state that reaches the travel limit without crossing is
  not counted as hopping: it leaves "certain" unresolved rather than lowering it.
* `interwell_exists_mps2` (the ladder's resolution, a factor 2^(1/4)): smallest amplitude at
  which some state of the ensemble ends in interwell motion, i.e. an interwell attractor exists
  though the beam at rest may not reach it.

A row describes the amplitudes below the stop strike only.  Once the beam at rest strikes its
stops, shaking harder tells nothing about the design as built, so the scan ends there, and no
onset, certain or interwell-exists amplitude at or above `stop_mps2` is reported: where the beam
at rest strikes before it hops, the onset (and so "certain") is None and the row's status is
"stop-before-hop"; an interwell attractor reached from other starts below the strike is still
reported.

The numerical thresholds first scan a ladder of amplitudes a factor 2^(1/4) apart, a few rungs
per ensemble and upwards, until the beam at rest strikes the stops, both thresholds are found,
or the ladder reaches `scan_ceiling`; then they bisect the bracket below the first rung that
hops (and the one below the first that strikes), geometrically, every frequency at once.
Where hopping comes and goes with amplitude (small basins), the scan finds the lowest window it
can resolve and the bisection one edge of it.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import asdict, dataclass

import numpy as np

from harvester.analysis.melnikov import melnikov_bound
from harvester.dynamics.integrator import FLAG_OK, recommended_steps_per_period, simulate_tone
from harvester.dynamics.orbits import basin_samples, resting_starts
from harvester.model import ReducedModel, analyse_wells, well_stiffness

# Rungs of the amplitude ladder, a factor 2^(1/4) apart.  The rungs are close because hopping
# can come and go with amplitude (small basins of interwell orbits): the lowest rung that hops
# is a truer onset than a bisection of a factor-2 bracket.
RUNG = 2.0**0.25
# The first ladder, in rungs about the Melnikov bound: ½ … 16 × the bound.
FIRST_RUNG, LAST_RUNG = -4, 16
# Rungs per ensemble of the scan: fewer waste less work above a stop strike or a found
# threshold, more save ensemble calls (7: the first ladder in three calls).
STAGE_RUNGS = 7
# How far below the first ladder the scan may look, in rungs (a factor 2^21 ≈ 2·10⁶), for a
# beam that already hops or strikes on the ladder's lowest rung.
LOWEST_RUNG = FIRST_RUNG - 84
# The ladder starts no higher than this fraction of the linearised stop-strike amplitude
# (`_linear_strike`): a start from rest can swing up to twice its steady amplitude (a lightly
# damped oscillator suddenly forced), so the strike can come that much earlier.
STRIKE_MARGIN = 0.5
# `scan_ceiling`'s multiple of the force that moves the beam at rest across its range: larger
# scans further (more work) for thresholds that the linearised response misjudges.
TOP_MULTIPLE = 4.0

# `ThresholdRow.status` codes
HOPS = "hops"  # onset found, below the stop strike if there is one
STOP_BEFORE_HOP = "stop-before-hop"  # the beam at rest strikes its stops at a lower amplitude
NO_HOP_IN_SCAN = "no-hop-in-scan"  # neither a hop nor a strike up to scan_top_mps2
MONOSTABLE = "monostable"  # no barrier to hop over; nothing was scanned


@dataclass(frozen=True)
class ThresholdRow:
    """Hop thresholds [m/s²] at one frequency; None where there is no answer.

    `status` says why in machine-readable form (module constants):

    * "hops": `onset_mps2` found (below `stop_mps2` when that is not None).  `certain_mps2`
      None then means not every start was seen to hop below the stop strike (`stop_mps2` set)
      or up to `scan_top_mps2` (no strike).
    * "stop-before-hop": the beam at rest strikes its stops at `stop_mps2` without having
      hopped at any lower amplitude; onset and certain are None.
    * "no-hop-in-scan": the beam at rest neither hops nor strikes up to `scan_top_mps2`.
    * "monostable": no barrier to hop over; every amplitude None, `scan_top_mps2` 0.

    `note` says the same in words (m/s²); `flagged` is True where it says anything.
    """

    frequency_Hz: float
    melnikov_mps2: float | None
    onset_mps2: float | None
    certain_mps2: float | None
    flagged: bool = False  # untrusted or missing: see `note`
    note: str = ""
    interwell_exists_mps2: float | None = None  # to within the ladder's factor 2^(1/4)
    stop_mps2: float | None = None  # beam at rest strikes its stops; None: not within the scan
    scan_top_mps2: float = 0.0  # largest amplitude tried
    status: str = HOPS

    def to_dict(self) -> dict:
        return asdict(self)


def melnikov_threshold(model: ReducedModel, frequency_Hz: float) -> float | None:
    """Melnikov lower bound on the base-acceleration amplitude [m/s²] for chaotic hopping.

    Transverse homoclinic orbits (a necessary condition for chaotic hopping) exist when

        m_f A |S(ω)| > c ∫ v_h² dt + D_circuit,   S(ω) = ∫ v_h(t) sin ωt dt,

    along the homoclinic orbit v_h of the model's own potential (`melnikov.melnikov_bound`; with
    unequal wells the lower of its two loops).
    For u'' + δu' − u + u³ = γ cos ωτ this is γ_M = 4δ cosh(πω/2)/(3√2 π ω) (with the
    circuit's work `melnikov.circuit_melnikov_work` added to (4/3)δ).  None for a monostable model,
    where the bound is beyond any finite amplitude (|S| vanishing at high frequency), and where
    the potential has no homoclinic orbit within the fitted range (wells so deep that U never
    climbs back to U(0) before the travel limit).

    Parameters
    ----------
    model : the reduced model (bistable: k1 < 0 and a stable well)
    frequency_Hz : forcing frequency [Hz]

    References
    ----------
    Guckenheimer & Holmes (1983), Nonlinear Oscillations, Dynamical Systems, and Bifurcations
    of Vector Fields, Springer, §4.5 (check: δ = 0.25, ω = 1 → γ_M = 0.18825).
    """
    bound = melnikov_bound(model, frequency_Hz)
    return float(bound) if bound is not None and math.isfinite(bound) else None


def settling_periods(model: ReducedModel, frequency_Hz: float, e_folds: float = 8.0,
                     minimum: int = 64, maximum: int = 2000) -> int:
    """Forcing periods for `e_folds` amplitude decays of the slowest free motion, e^(−c t/2m),
    with c the mechanical damping plus the circuit's quasi-static damping at its largest
    (g²/h for a coil, none for a piezo whose RC is long), clipped to [minimum, maximum]."""
    lag, g, h = model.circuit_coefficients()
    c = model.damping_N_s_per_m
    if g and h and math.isfinite(h):
        # the largest c_e(ω) = g²h/(h² + ω²a²) over the relevant band is at ω → 0
        c += g * g / h if lag == 0.0 else 0.0
    if c <= 0.0:
        return maximum
    periods = e_folds * frequency_Hz * 2.0 * model.mass_kg / c
    return int(min(maximum, max(minimum, math.ceil(periods))))


def scan_ceiling(model: ReducedModel, frequency_Hz: float) -> float:
    """Largest base-acceleration amplitude [m/s²] the hop scan tries at a frequency.

        A_top = TOP_MULTIPLE · max(F_b, D |k_w − m ω² + i c ω|) / m_f

    F_b = max −F(x) over 0 < x < x_w is the static force barrier: a steady push that large
    carries the beam at rest over the saddle ((2/(3√3)) |k1| x_w for k1 x + k3 x³).
    D |k_w − m ω² + i c ω| is the force amplitude at which the steady swing of the beam
    linearised about its well (receptance 1/|k_w − m ω² + i c ω|) is D: the distance from the
    well to the saddle (x_w) without a travel limit, to the far stop (x_w + travel limit) with
    one.  Shaken TOP_MULTIPLE times harder than both, the beam would swing several times as far
    as it needs to hop or to reach a stop, so a threshold still higher would describe the
    idealised polynomial model far outside its wells, not the design.  The barrier term keeps
    the ceiling up near the well's resonance, where the linear swing overstates the real one
    (the softening well detunes itself).  With a travel limit the scan usually ends much
    sooner, where the beam at rest strikes.

    Parameters
    ----------
    model : bistable reduced model (x_w its well, k_w = F'(x_w), c its mechanical damping)
    frequency_Hz : forcing frequency [Hz]

    >>> double_well = ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.25, stiffness=(-1.0, 1.0),
    ...                            forcing_mass_kg=1.0)
    >>> round(scan_ceiling(double_well, 1 / (2 * math.pi)), 4)  # 4 |2 − 1 + 0.25i|
    4.1231

    References
    ----------
    Thomson & Dahleh (1998), Theory of Vibration with Applications, 5th ed., Prentice Hall,
    ch. 3 (steady-state response of the damped single-degree-of-freedom oscillator).
    """
    well = max(analyse_wells(model).wells_m)
    barrier_force = float(np.max(-model.restoring_force(np.linspace(0.0, well, 257))))
    reach = well + (model.travel_limit_m if math.isfinite(model.travel_limit_m) else 0.0)
    linear = reach * _dynamic_stiffness(model, frequency_Hz)
    return TOP_MULTIPLE * max(barrier_force, linear) / model.forcing_mass_kg


def _dynamic_stiffness(model: ReducedModel, frequency_Hz: float) -> float:
    """|k_w − m ω² + i c ω| [N/m]: force amplitude per unit steady amplitude of the beam
    linearised about its well (the inverse of its receptance)."""
    omega = 2.0 * math.pi * frequency_Hz
    return abs(complex(well_stiffness(model) - model.mass_kg * omega**2,
                       model.damping_N_s_per_m * omega))


def _linear_strike(model: ReducedModel, frequency_Hz: float) -> float:
    """Amplitude [m/s²] at which the steady swing of the beam linearised about its well reaches
    the near stop, (travel limit − x_w)|k_w − m ω² + i c ω|/m_f; ∞ without a travel limit."""
    if not math.isfinite(model.travel_limit_m):
        return math.inf
    room = max(model.travel_limit_m - max(analyse_wells(model).wells_m), 0.0)
    return room * _dynamic_stiffness(model, frequency_Hz) / model.forcing_mass_kg


@dataclass(frozen=True)
class _Outcome:
    """What the runs of a list of items showed, per item."""

    left: np.ndarray  # starts crossing x = 0 in the window (also if they struck afterwards)
    flagged: np.ndarray  # starts that reached the travel limit (or diverged)
    rest_hops: np.ndarray  # the beam at rest passes the saddle in the window, never strikes
    rest_strikes: np.ndarray  # the beam at rest reaches the travel limit


@dataclass(frozen=True)
class _Ensembles:
    """Runs items (frequency index, amplitude, every start or the beam at rest alone) as one
    ensemble per octave band, with that band's transient and steps per period."""

    model: ReducedModel
    frequency_Hz: np.ndarray
    band: np.ndarray
    settings: dict  # octave band → (transient periods, steps per period)
    states: np.ndarray  # initial states (n, 3); the first (two, for unequal wells) at rest
    window: int  # strobe periods

    def run(self, f_idx: np.ndarray, amplitude: np.ndarray, every_start: np.ndarray) -> _Outcome:
        # the beam at rest: the first state, or with unequal wells the first two (one per well)
        resting = resting_starts(self.model)
        starts = np.where(every_start, self.states.shape[0], resting)
        first = np.cumsum(starts) - starts  # each item's first trajectory: the beam at rest
        item = np.repeat(np.arange(f_idx.size), starts)
        state = self.states[np.arange(item.size) - first[item]]
        crossed = np.empty(item.size, dtype=bool)
        flag = np.empty(item.size, dtype=np.int64)
        item_band = self.band[f_idx][item]
        for j in np.unique(item_band):
            rows = item_band == j
            transient, steps = self.settings[j]
            ens = simulate_tone(self.model, amplitude[item[rows]],
                                self.frequency_Hz[f_idx[item[rows]]], state[rows, 0],
                                state[rows, 1], state[rows, 2], transient_periods=transient,
                                strobe_periods=self.window, steps_per_period=steps)
            crossed[rows] = ens.zero_crossings > 0
            flag[rows] = ens.flag
        stopped = flag != FLAG_OK
        rest = first[:, None] + np.arange(resting)[None, :]
        rest_strikes = stopped[rest].any(axis=1) & math.isfinite(self.model.travel_limit_m)
        rest_hops = (crossed[rest] & ~stopped[rest]).any(axis=1) & ~rest_strikes
        return _Outcome(left=np.add.reduceat(crossed.astype(np.int64), first),
                        flagged=np.add.reduceat(stopped.astype(np.int64), first),
                        rest_hops=rest_hops, rest_strikes=rest_strikes)


def _states_inside_travel(model: ReducedModel, states: np.ndarray, frequency_Hz: float,
                          transient: int, window: int, steps: int) -> np.ndarray:
    """The initial states that stay inside the travel limit without any forcing.

    A random initial state with more energy than the stops allow would reach the travel limit
    on its own; counting it as "left its well" would put a hop onset at zero forcing.  The
    beam at rest in a well (the first state; with unequal wells the first two) always stays.
    """
    if not np.isfinite(model.travel_limit_m) or states.shape[0] <= resting_starts(model):
        return states  # no stops, or the beam at rest alone
    n = states.shape[0]
    quiet = simulate_tone(model, np.zeros(n), np.full(n, frequency_Hz), states[:, 0].copy(),
                          states[:, 1].copy(), states[:, 2].copy(), transient_periods=transient,
                          strobe_periods=window, steps_per_period=steps)
    keep = quiet.flag == FLAG_OK
    keep[:resting_starts(model)] = True
    return states[keep]


def hop_thresholds(model: ReducedModel, frequencies_Hz: np.ndarray, *, seed: int = 0,
                   n_initial: int = 24, bisection_steps: int = 5,
                   transient_periods: int | None = None, strobe_periods: int = 16,
                   steps_per_period: int | None = None,
                   progress: Callable[[int, int], None] | None = None,
                   ladder_base_mps2: list[float] | None = None) -> list[ThresholdRow]:
    """Melnikov, stop-strike, onset and certain thresholds [m/s²] at each frequency (module
    notes).

    The ladder of amplitudes a factor 2^(1/4) apart starts at ½ × the Melnikov bound (½ ×
    `scan_ceiling`/16 where there is none, or where the bound lies above the ceiling), or lower
    where STRIKE_MARGIN × the amplitude at which the steady swing of the beam linearised about
    its well would reach the near stop is lower.  It is climbed STAGE_RUNGS rungs per ensemble
    until the beam at rest strikes its stops, onset and certain are both found, or the next
    rung would pass `scan_ceiling`, and continued downwards where the beam at rest already hops
    or strikes on the lowest rung.  Then
    `bisection_steps` geometric bisections narrow each bracket to a factor 2^(1/(4·2^steps))
    (5 steps: 0.5 %); the onset and stop brackets need only the beam at rest, "certain" the
    whole ensemble.  Each reported threshold is the upper end of its final bracket: an
    amplitude at which hopping (or the strike) was seen.

    Parameters
    ----------
    model : reduced model; a monostable one gets rows of None, flagged
    frequencies_Hz : forcing frequencies [Hz]
    seed : seed of the random initial states (`basin_samples`; the first is at rest in a well)
    n_initial : initial states per frequency and amplitude
    transient_periods : default per octave band (`frequency_bands`): `settling_periods` at
        the band's top
    strobe_periods : periods after the transient in which a hop (sign change) is looked for
    steps_per_period : default per octave band: `recommended_steps_per_period(…,
        per_fast_period=32)` at the band's bottom
    progress : called as progress(ensembles done, ensembles expected)
    ladder_base_mps2 : per frequency, the amplitude [m/s²] to build the ladder about instead
        of the Melnikov bound, e.g. a known onset of a nearby design (`harvester spread`'s
        nominal build); the rows then carry no Melnikov bound, which is not computed

    By default each frequency takes the step and transient of its octave band [2^j, 2^(j+1))
    Hz, which depend on nothing else: a frequency's thresholds do not change with the other
    frequencies asked for, and a wide sweep does not run its highest frequencies with the
    steps its lowest need.
    """
    freqs = np.atleast_1d(np.asarray(frequencies_Hz, dtype=float))
    melnikov = ([melnikov_threshold(model, f) for f in freqs] if ladder_base_mps2 is None
                else [None] * freqs.size)
    if analyse_wells(model).regime != "bistable" or not model.is_bistable:
        return [ThresholdRow(float(f), None, None, None, True,
                             "monostable: there is no barrier to hop over", status=MONOSTABLE)
                for f in freqs]
    band = frequency_bands(freqs)
    settings = {}  # octave band → (transient periods, steps per period)
    for j in np.unique(band):
        low, high = 2.0 ** float(j), 2.0 ** float(j + 1)
        settings[j] = (
            settling_periods(model, high) if transient_periods is None else transient_periods,
            recommended_steps_per_period(model, low, per_fast_period=32)
            if steps_per_period is None else steps_per_period)
    quiet = settings[band[int(np.argmin(freqs))]]
    states = _states_inside_travel(model, basin_samples(model, n_initial, seed),
                                   float(freqs.min()), quiet[0], strobe_periods, quiet[1])
    ensembles = _Ensembles(model, freqs, band, settings, states, strobe_periods)
    scan = _Scan.start(melnikov if ladder_base_mps2 is None else list(ladder_base_mps2),
                       [scan_ceiling(model, f) for f in freqs],
                       [STRIKE_MARGIN * _linear_strike(model, f) for f in freqs],
                       states.shape[0])

    done = 0
    expected = -(-(LAST_RUNG - FIRST_RUNG + 1) // STAGE_RUNGS) + bisection_steps
    shown = 0  # the total last shown

    def tick() -> None:
        nonlocal done, shown
        done += 1
        shown = max(expected, done)
        if progress is not None:
            progress(done, shown)

    f_idx, rungs = scan.next_rungs()
    while f_idx.size:
        expected = max(expected, done + 1 + bisection_steps)
        amplitude = scan.base[f_idx] * RUNG ** rungs.astype(float)
        scan.record(f_idx, rungs, amplitude,
                    ensembles.run(f_idx, amplitude, np.ones(f_idx.size, dtype=bool)))
        tick()
        f_idx, rungs = scan.next_rungs()
    steps = bisection_steps if scan.bisectable().any() else 0
    expected = done + steps
    for _ in range(steps):
        f_idx, amplitude, every_start, kind = scan.midpoints()
        scan.bisect(f_idx, amplitude, kind, ensembles.run(f_idx, amplitude, every_start))
        tick()
    if progress is not None and shown != done:
        progress(done, done)  # the work ended sooner than last shown
    return [scan.row(i, freqs[i], melnikov[i]) for i in range(freqs.size)]


def frequency_bands(frequencies_Hz: np.ndarray) -> np.ndarray:
    """Octave band index j of each frequency: 2^j ≤ f < 2^(j+1) [Hz]."""
    return np.floor(np.log2(np.asarray(frequencies_Hz, dtype=float))).astype(np.int64)


# which bracket a bisection item narrows (`_Scan.midpoints`)
_ONSET, _STOP, _CERTAIN = 0, 1, 2


@dataclass
class _Scan:
    """The scan's state per frequency: brackets (lo, hi] of the onset, the stop strike and
    "certain" (lo: highest amplitude seen not to hop/strike below hi, 0 when nothing below hi
    was tried; hi: lowest seen to, nan while unknown), and the ladder's extent in rungs of
    `base`·RUNG^k."""

    base: np.ndarray  # amplitude of rung 0 [m/s²]
    ceiling: np.ndarray  # highest rung allowed (`scan_ceiling`)
    low: np.ndarray  # lowest and highest rung tried (`low` > `high`: none yet)
    high: np.ndarray
    lo: np.ndarray  # (3, n_f): onset, stop, certain
    hi: np.ndarray
    exists: np.ndarray  # lowest rung amplitude, below any strike, where some start hopped
    certain_flagged: np.ndarray  # starts that reached the travel limit at hi[_CERTAIN]
    struck: np.ndarray  # lowest amplitude at which the beam at rest was seen to strike
    tried: np.ndarray  # largest amplitude tried
    n_starts: int

    @classmethod
    def start(cls, melnikov: list[float | None], ceiling: list[float], below: list[float],
              n_starts: int) -> _Scan:
        """The first ladder: ½ … 16 × the Melnikov bound, begun lower where `below` is lower;
        without a bound, or with the ladder's bottom above the ceiling, it ends at the
        ceiling."""
        top = np.asarray(ceiling, dtype=float)
        base = np.array([m if m and m > 0 else math.inf for m in melnikov])
        base = np.where(base * RUNG**FIRST_RUNG < top, base, top * RUNG**-LAST_RUNG)
        with np.errstate(divide="ignore"):  # no room at all before the stop: the lowest rung
            first = np.clip(np.floor(np.log(np.asarray(below) / base) / math.log(RUNG)),
                            LOWEST_RUNG, FIRST_RUNG).astype(np.int64)
        n_f = base.size
        return cls(base=base,
                   ceiling=np.floor(np.log(top / base) / math.log(RUNG) + 1e-9).astype(np.int64),
                   low=first, high=first - 1, lo=np.zeros((3, n_f)),
                   hi=np.full((3, n_f), np.nan), exists=np.full(n_f, np.inf),
                   certain_flagged=np.zeros(n_f, dtype=np.int64), struck=np.full(n_f, np.inf),
                   tried=np.zeros(n_f), n_starts=n_starts)

    def next_rungs(self) -> tuple[np.ndarray, np.ndarray]:
        """The next stage of rungs (frequency index and rung, one item each): downwards where
        the beam at rest hops or strikes on the lowest rung tried, upwards while onset or
        certain is missing, the beam at rest has not struck, and the ceiling is not reached."""
        at_bottom = (self.lo[:2] == 0.0) & np.isfinite(self.hi[:2])
        down = at_bottom.any(axis=0) & (self.low > LOWEST_RUNG)
        up = (~down & np.isnan(self.hi[_STOP]) & np.isnan(self.hi[[_ONSET, _CERTAIN]]).any(axis=0)
              & (self.high < self.ceiling))
        first = np.where(down, np.maximum(self.low - STAGE_RUNGS, LOWEST_RUNG), self.high + 1)
        last = np.where(down, self.low - 1, np.minimum(self.high + STAGE_RUNGS, self.ceiling))
        go = np.nonzero(down | up)[0]
        counts = last[go] - first[go] + 1
        f_idx = np.repeat(go, counts)
        offset = np.arange(f_idx.size) - np.repeat(np.cumsum(counts) - counts, counts)
        return f_idx, first[f_idx] + offset

    def record(self, f_idx: np.ndarray, rungs: np.ndarray, amplitude: np.ndarray,
               seen: _Outcome) -> None:
        """Update the brackets from one stage of rungs (every start run at each)."""
        everyone = (seen.left == self.n_starts) & seen.rest_hops
        for f in np.unique(f_idx):
            at = np.nonzero(f_idx == f)[0]  # this frequency's rungs, ascending
            a = amplitude[at]
            self.low[f] = min(self.low[f], rungs[at[0]])
            self.high[f] = max(self.high[f], rungs[at[-1]])
            self.tried[f] = max(self.tried[f], a[-1])
            strikes = seen.rest_strikes[at]
            # nothing at or above the first strike counts: the beam at rest is at its stops
            below = np.arange(at.size) < (np.argmax(strikes) if strikes.any() else at.size)
            if strikes.any():
                self.struck[f] = min(self.struck[f], a[strikes][0])
            _bracket(a, strikes, self.lo[_STOP], self.hi[_STOP], f)
            _bracket(a, seen.rest_hops[at] & below, self.lo[_ONSET], self.hi[_ONSET], f)
            all_hop = everyone[at] & below
            _bracket(a, all_hop, self.lo[_CERTAIN], self.hi[_CERTAIN], f)
            if all_hop.any() and self.hi[_CERTAIN, f] == a[all_hop][0]:
                self.certain_flagged[f] = seen.flagged[at][all_hop][0]
            some = np.nonzero((seen.left[at] > 0) & below)[0]
            if some.size:
                self.exists[f] = min(self.exists[f], a[some[0]])

    def bisectable(self) -> np.ndarray:
        """(3, n_f): brackets with an upper end."""
        return np.isfinite(self.hi)

    def midpoints(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Items of one bisection step: (frequency index, amplitude, every start?, bracket)."""
        kind, f_idx = np.nonzero(self.bisectable())
        middle = _geometric_middle(self.lo[kind, f_idx], self.hi[kind, f_idx])
        return f_idx, middle, kind == _CERTAIN, kind

    def bisect(self, f_idx: np.ndarray, amplitude: np.ndarray, kind: np.ndarray,
               seen: _Outcome) -> None:
        """Narrow each bracket to the half whose ends differ; a strike of the beam at rest
        seen on the way (where the strike comes and goes with amplitude) is remembered."""
        yes = np.select([kind == _ONSET, kind == _STOP],
                        [seen.rest_hops, seen.rest_strikes],
                        (seen.left == self.n_starts) & seen.rest_hops)
        self.hi[kind, f_idx] = np.where(yes, amplitude, self.hi[kind, f_idx])
        self.lo[kind, f_idx] = np.where(yes, self.lo[kind, f_idx], amplitude)
        certain = (kind == _CERTAIN) & yes
        self.certain_flagged[f_idx[certain]] = seen.flagged[certain]
        np.minimum.at(self.struck, f_idx[seen.rest_strikes], amplitude[seen.rest_strikes])

    def row(self, i: int, frequency_Hz: float, melnikov: float | None) -> ThresholdRow:
        """The reported row: nothing at or above the lowest strike of the beam at rest."""
        stop = self.struck[i]  # (every strike seen lowers it, so it is hi of the stop bracket)
        onset, certain = self.hi[_ONSET, i], self.hi[_CERTAIN, i]
        onset = onset if onset < stop else math.inf
        certain = certain if certain < stop and math.isfinite(onset) else math.inf
        exists = self.exists[i] if self.exists[i] < stop else math.inf
        top = self.tried[i]
        notes = []
        if math.isfinite(onset):
            status = HOPS
            if not math.isfinite(certain):
                notes.append("not every initial state was seen to hop "
                             + (f"below the stop strike at {stop:.3g} m/s²"
                                if math.isfinite(stop) else f"up to {top:.3g} m/s²"))
            elif self.certain_flagged[i]:
                notes.append("some trajectories reached the travel limit at these amplitudes")
        elif math.isfinite(stop):
            status = STOP_BEFORE_HOP
            notes.append(f"the beam at rest strikes its stops at {stop:.3g} m/s² before it "
                         "hops")
        else:
            status = NO_HOP_IN_SCAN
            notes.append(f"no hopping from rest up to {top:.3g} m/s²")

        def answer(value: float) -> float | None:
            return float(value) if math.isfinite(value) else None

        return ThresholdRow(
            frequency_Hz=float(frequency_Hz), melnikov_mps2=melnikov,
            onset_mps2=answer(onset), certain_mps2=answer(certain),
            flagged=bool(notes), note="; ".join(notes), interwell_exists_mps2=answer(exists),
            stop_mps2=answer(stop), scan_top_mps2=float(top), status=status,
        )


def _geometric_middle(lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """√(lo·hi), or hi/√2 where nothing below hi has been tried (lo = 0)."""
    return np.sqrt(np.where(lo > 0, lo, 0.5 * hi) * hi)


def _bracket(amplitudes: np.ndarray, hops: np.ndarray, lo: np.ndarray, hi: np.ndarray,
             f: int) -> None:
    """Update bracket f from a stage of rungs: hi = lowest rung that hops (if below the known
    hi), lo = the rung below it (or what was known before, 0 when nothing below the stage has
    been tried); with no hop, lo rises to the stage's top where that is below hi."""
    rungs = np.nonzero(hops)[0]
    if rungs.size == 0:
        if not hi[f] <= amplitudes[-1]:
            lo[f] = max(lo[f], amplitudes[-1])
        return
    first = rungs[0]
    if np.isnan(hi[f]) or amplitudes[first] < hi[f]:
        hi[f] = amplitudes[first]
        lo[f] = amplitudes[first - 1] if first > 0 else min(lo[f], amplitudes[0])
