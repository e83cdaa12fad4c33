"""How hard a bistable harvester must be shaken, at each frequency, before it hops between wells.

Three amplitudes of base acceleration [m/s²] per frequency (methods.md §5):

* `melnikov_mps2`: Melnikov's bound, below which transverse homoclinic orbits (and so chaotic
  hopping) cannot exist; a necessary condition, not a guarantee of hopping from rest.
* `onset_mps2`: smallest amplitude at which the beam, starting at rest in a well, settles into
  interwell motion (is still crossing x = 0 after the transient).
* `certain_mps2`: smallest amplitude at which every initial state of an ensemble does, i.e. no
  intrawell attractor is left (as far as the ensemble can see: small basins can be missed, so
  this is an estimate from below).  A state that reaches the travel limit without crossing is
  not counted as hopping: it leaves "certain" unresolved rather than lowering it.
* `interwell_exists_mps2` (the ladder's resolution, a factor 2^(1/4)): smallest amplitude at
  which some state of the ensemble ends in interwell motion, i.e. an interwell attractor exists
  though the beam at rest may not reach it.

The numerical thresholds first scan a ladder of amplitudes a factor 2^(1/4) apart, then bisect
the bracket below the first rung that hops, geometrically, every frequency at once: one
ensemble per step holds all frequencies × (onset, certain) × initial states.  Where hopping
comes and goes with amplitude (small basins), the scan finds the lowest window it can resolve
and the bisection one edge of it.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import asdict, dataclass

import numpy as np

from harvester.analysis.melnikov import melnikov_bound
from harvester.dynamics.integrator import FLAG_OK, recommended_steps_per_period, simulate_tone
from harvester.dynamics.orbits import basin_samples, resting_starts
from harvester.model import ReducedModel, analyse_wells

# First amplitudes tried, in units of the Melnikov bound: ½ … 16 in steps of 2^(1/4).  The
# rungs are close because hopping can come and go with amplitude (small basins of interwell
# orbits): the lowest rung that hops is a truer onset than a bisection of a factor-2 bracket.
RUNG = 2.0**0.25
LADDER = RUNG ** np.arange(-4, 17)
EXTENSION = LADDER[-1] / LADDER[0] * RUNG  # a ladder further up (or down) continues this one
MAX_LADDER_EXTENSIONS = 4


@dataclass(frozen=True)
class ThresholdRow:
    """Hop thresholds at one frequency; None where there is no answer (see `note`)."""

    frequency_Hz: float
    melnikov_mps2: float | None
    onset_mps2: float | None
    certain_mps2: float | None
    flagged: bool = False  # untrusted: monostable, no hopping found, or travel limit reached
    note: str = ""
    interwell_exists_mps2: float | None = None  # to within the ladder's factor 2^(1/4)

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


def _left_wells(model: ReducedModel, frequency_Hz: np.ndarray, amplitude: np.ndarray,
                states: np.ndarray, transient: int, window: int,
                steps: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """For amplitudes (n_f, k): how many initial states pass the saddle in the window
    (interwell motion), how many were flagged, and whether the beam at rest in a well (the
    first state, or with unequal wells either of the first two) passes it, each (n_f, k)."""
    n_f, k = amplitude.shape
    n_s = states.shape[0]
    amp = np.repeat(amplitude.ravel(), n_s)
    freq = np.repeat(np.repeat(frequency_Hz, k), n_s)
    ens = simulate_tone(model, amp, freq, np.tile(states[:, 0], n_f * k),
                        np.tile(states[:, 1], n_f * k), np.tile(states[:, 2], n_f * k),
                        transient_periods=transient, strobe_periods=window,
                        steps_per_period=steps)
    flagged = (ens.flag != FLAG_OK).reshape(n_f, k, n_s)
    left = (ens.zero_crossings > 0).reshape(n_f, k, n_s)
    return left.sum(axis=2), flagged.sum(axis=2), left[:, :, :resting_starts(model)].any(axis=2)


def _states_inside_travel(model: ReducedModel, states: np.ndarray, frequency_Hz: float,
                          transient: int, window: int, steps: int) -> np.ndarray:
    """The initial states that stay inside the travel limit without any forcing.

    A random initial state with more energy than the stops allow would reach the travel limit
    on its own; counting it as "left its well" would put a hop onset at zero forcing.  The
    beam at rest in a well (the first state; with unequal wells the first two) always stays.
    """
    if not np.isfinite(model.travel_limit_m):
        return states
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
                   progress: Callable[[int, int], None] | None = None) -> list[ThresholdRow]:
    """Melnikov, onset and certain hop thresholds [m/s²] at each frequency (module notes).

    Brackets come from one ladder of amplitudes (½ … 16 × the Melnikov bound in steps of
    2^(1/4), extended when a threshold lies outside it); then `bisection_steps` geometric
    bisections narrow each bracket to a factor 2^(1/(4·2^steps)) (5 steps: 0.5 %).  Each
    reported threshold is the upper end of its final bracket: an amplitude at which hopping
    was seen.

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

    By default each frequency takes the step and transient of its octave band [2^j, 2^(j+1))
    Hz, which depend on nothing else: a frequency's thresholds do not change with the other
    frequencies asked for, and a wide sweep does not run its highest frequencies with the
    steps its lowest need.
    """
    freqs = np.atleast_1d(np.asarray(frequencies_Hz, dtype=float))
    melnikov = [melnikov_threshold(model, f) for f in freqs]
    if analyse_wells(model).regime != "bistable" or not model.is_bistable:
        return [ThresholdRow(float(f), None, None, None, True,
                             "monostable: there is no barrier to hop over") for f in freqs]
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
    n_initial = states.shape[0]
    start = np.array([m if m and m > 0 else 1.0 for m in melnikov])

    def count(f_idx: np.ndarray, amplitude: np.ndarray):
        left = np.empty(amplitude.shape, dtype=np.int64)
        flagged = np.empty(amplitude.shape, dtype=np.int64)
        rest = np.empty(amplitude.shape, dtype=bool)
        for j in np.unique(band[f_idx]):
            rows = band[f_idx] == j
            transient, steps = settings[j]
            left[rows], flagged[rows], rest[rows] = _left_wells(
                model, freqs[f_idx[rows]], amplitude[rows], states, transient, strobe_periods,
                steps)
        return left, flagged, rest

    done = 0
    expected = 1 + bisection_steps

    def tick() -> None:
        nonlocal done
        done += 1
        if progress is not None:
            progress(done, max(expected, done))

    # brackets [lo, hi]: lo seen not to hop, hi seen to hop (nan while unknown)
    n_f = freqs.size
    on_lo, on_hi = np.zeros(n_f), np.full(n_f, np.nan)
    ce_lo, ce_hi = np.zeros(n_f), np.full(n_f, np.nan)
    base = start.copy()
    tried = np.zeros(n_f)  # the largest amplitude tried
    exists = np.full(n_f, np.inf)  # lowest rung at which some state ended interwell
    stopped_at_top = np.zeros(n_f, dtype=bool)  # states at the stops on the highest rung
    pending = np.arange(n_f)
    for extension in range(MAX_LADDER_EXTENSIONS + 1):
        ladder = base[pending, None] * LADDER[None, :]
        tried[pending] = np.maximum(tried[pending], ladder[:, -1])
        left, flagged, rest = count(pending, ladder)
        tick()
        all_left = left == n_initial
        stopped_at_top[pending] = flagged[:, -1] > 0
        for row, f in enumerate(pending):
            _bracket(ladder[row], rest[row], on_lo, on_hi, f)
            _bracket(ladder[row], all_left[row], ce_lo, ce_hi, f)
            seen = np.nonzero(left[row] > 0)[0]
            if seen.size:
                exists[f] = min(exists[f], ladder[row, seen[0]])
        low_hops = np.isfinite(on_hi[pending]) & (on_lo[pending] == 0.0)
        # higher rungs cannot resolve a frequency whose states already run into the stops
        missing = np.isnan(on_hi[pending]) | np.isnan(ce_hi[pending])
        unresolved = (missing & ~stopped_at_top[pending]) | low_hops
        if not unresolved.any() or extension == MAX_LADDER_EXTENSIONS:
            break
        expected += 1
        pending = pending[unresolved]
        # hopping already at the bottom rung: look lower; otherwise look higher
        step = np.where(low_hops[unresolved], 1.0 / EXTENSION, EXTENSION)
        base[pending] = base[pending] * step
    # (certain found implies onset found; where certain is missing its column repeats onset)
    idx = np.nonzero(np.isfinite(on_hi))[0]
    has_ce = np.isfinite(ce_hi[idx])
    for _ in range(bisection_steps if idx.size else 0):
        mid_on = _geometric_middle(on_lo[idx], on_hi[idx])
        mid_ce = np.where(has_ce, _geometric_middle(ce_lo[idx], ce_hi[idx]), mid_on)
        left, _, rest = count(idx, np.column_stack((mid_on, mid_ce)))
        tick()
        hop_on = rest[:, 0]
        hop_ce = left[:, 1] == n_initial
        on_hi[idx] = np.where(hop_on, mid_on, on_hi[idx])
        on_lo[idx] = np.where(hop_on, on_lo[idx], mid_on)
        ce_hi[idx] = np.where(has_ce & hop_ce, mid_ce, ce_hi[idx])
        ce_lo[idx] = np.where(has_ce & ~hop_ce, mid_ce, ce_lo[idx])
    # a last look at the reported amplitudes, for trajectories that hit the travel limit
    flagged_at = np.zeros((n_f, 2))
    if idx.size and np.isfinite(model.travel_limit_m):
        _, flagged, _ = count(idx, np.column_stack((on_hi[idx],
                                                    np.where(has_ce, ce_hi[idx], on_hi[idx]))))
        flagged_at[idx] = flagged
        tick()
    if progress is not None and done != expected:
        progress(done, done)  # the work ended sooner or later than first expected
    return [_row(freqs[i], melnikov[i], on_hi[i], ce_hi[i], flagged_at[i], tried[i],
                 exists[i], stopped_at_top[i]) for i in range(n_f)]


def frequency_bands(frequencies_Hz: np.ndarray) -> np.ndarray:
    """Octave band index j of each frequency: 2^j ≤ f < 2^(j+1) [Hz]."""
    return np.floor(np.log2(np.asarray(frequencies_Hz, dtype=float))).astype(np.int64)


def _geometric_middle(lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """√(lo·hi), or hi/√2 where nothing below hi has been tried (lo = 0)."""
    return np.sqrt(np.where(lo > 0, lo, 0.5 * hi) * hi)


def _bracket(amplitudes: np.ndarray, hops: np.ndarray, lo: np.ndarray, hi: np.ndarray,
             f: int) -> None:
    """Update bracket f from a ladder: hi = lowest rung that hops, lo = the rung below it (or
    what was known before, 0 when nothing below the ladder has been tried)."""
    rungs = np.nonzero(hops)[0]
    if rungs.size == 0:
        lo[f] = max(lo[f], amplitudes[-1])
        return
    first = rungs[0]
    if np.isnan(hi[f]) or amplitudes[first] < hi[f]:
        hi[f] = amplitudes[first]
        lo[f] = amplitudes[first - 1] if first > 0 else min(lo[f], amplitudes[0])


def _row(f: float, melnikov: float | None, onset: float, certain: float,
         flagged: np.ndarray, tried: float, exists: float, stopped: bool) -> ThresholdRow:
    notes = []
    if not np.isfinite(onset):
        notes.append(f"no hopping from rest up to {tried:.3g} m/s²")
    elif not np.isfinite(certain):
        notes.append(f"not every initial state was seen to hop up to {tried:.3g} m/s²"
                     + (" (some reached the travel limit first)" if stopped else ""))
    # (unless the note on "certain" already says that starts ran into the stops)
    if flagged.any() and not (stopped and np.isfinite(onset) and not np.isfinite(certain)):
        notes.append("some trajectories reached the travel limit at these amplitudes")
    return ThresholdRow(
        frequency_Hz=float(f), melnikov_mps2=melnikov,
        onset_mps2=float(onset) if np.isfinite(onset) else None,
        certain_mps2=float(certain) if np.isfinite(certain) else None,
        flagged=bool(notes), note="; ".join(notes),
        interwell_exists_mps2=float(exists) if np.isfinite(exists) else None,
    )
