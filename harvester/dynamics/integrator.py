"""Compiled ensemble integrator for the reduced model: fixed-step classical Runge–Kutta (RK4).

    m ẍ + c ẋ + F(x) + g q = −m_f a(t),      a_c q̇ = g ẋ − h q          (ReducedModel)

Many trajectories (initial conditions × amplitudes × frequencies, flattened into one axis) are
advanced together.  The trajectory axis is cut into blocks of at most `BLOCK` whose working data
stay in the L1 cache; blocks run in parallel (`prange`) with the time loop outside, and each
step is one loop over the block's trajectories that does the whole RK4 step (all four stages of
x, ẋ and the circuit) and the tallies in registers; the compiler vectorises it across
trajectories.  That loop is written once (`_run_steps`) and serves both drivers:

* `simulate_tone`: a(t) = A cos ωt.  Every trajectory takes the same number of steps per forcing
  period, so the forcing phase at each half step is the same for all of them and cos is read from
  one table (no trigonometry in the loop).  The run starts at phase `strobe_phase`, so the
  stroboscopic samples (once per period, after a transient) fall exactly on step boundaries.
* `advance_with_input`: a(t) sampled at half steps (random excitation), copied chunk by chunk
  into a block-sized array, with running per-trajectory tallies (`InputStats`).

The loop tallies the state each step starts from before advancing it, so the tally arithmetic
does not wait for the RK4 stages; the state a segment (a forcing period or an input chunk) ends
in joins its range tallies after the loop.  Sums over a segment are left-endpoint sums
h Σ f(state at step start).

Both drivers return one row of tallies per trajectory, a float array (n, N_TALLIES) whose columns
are named by the constants below (X_MIN, X_MAX, …, FLAG).  The kernels take a state array, the
model (`RateTerms`), the flagging and counting thresholds (`Bounds`), the drive and a schedule.
The restoring-force series is a tuple, so each number of terms compiles to its own unrolled
kernel, and the circuit is a tuple (or None when it has no state), so each kind compiles its
own.  Inside the kernels the circuit state is carried as its force on the beam per unit mass,
e = (g/m) q, which saves a multiplication per stage; the drivers see q.

A circuit whose time constant a_c/h is shorter than a step is treated as quasi-static
(q = g ẋ/h, a viscous damper g²/h): explicit RK4 would be unstable on it, and the error of the
quasi-static circuit is of order ω a_c/h < ω dt.  `a_c = 0` (resistive coil) is always that case.

Trajectories whose |x| passes the model's `travel_limit_m`, or a divergence bound (1000 × the
model's length scale), or that turn non-finite, are rolled back to the start of the period (or
input chunk) in which that happened, flagged and frozen; their tallies stop there.  Results are
never NaN: read the flag.

Rectifier bridge (`ReducedModel.interface`).  Behind a full-wave bridge with drop V_D per diode
into a store at V_s, the circuit is piecewise linear and its piece is decided by the state, with
the clamp V_c = V_s + 2 V_D:

* piezo: open, C_p v̇ = θ ẋ, while |v| < V_c; conducting, v = ±V_c and the current θ ẋ flows
  into the store, while ẋ keeps the sign that drove v to the clamp.  Within a step v is a
  function of x alone, v = clip(v0 + (θ/C_p)(x − x0), −V_c, V_c) (a play operator), so the
  stages read it from their own x and the beam sees an exact, merely kinked, force.  Where ẋ
  changes sign within a step the clamp lets go at the turning point, which is placed where the
  step's linear velocity vanishes (error O(h³) in x there); the charge a step sends through the
  bridge is then exact by Kirchhoff's current law, Q = θ Δx − C_p Δv, over each monotone part.
* coil with a current state: L i̇ = Bl ẋ − R_c i − V_c sgn(i), and the diodes block a
  reversal: the step keeps the polarity its current (or, at zero current, its EMF) has at the
  start, every stage is projected onto that polarity (a current that would reverse stops at
  zero), and the charge is the RK4-weighted sum of the stage currents.
* coil without a state (L/R_c shorter than a step): i = sgn(ẋ) max(Bl |ẋ| − V_c, 0)/R_c, a
  dead-zone damper read at every stage.

The store voltage is a state of its own, advanced once per step from that step's charge,
C_s ΔV_s = Q − h V_s/R_L; a voltage store has 1/C_s = 0 and stays put.  That explicit step
is first order in ΔV_s: its energy error, ½ C_s ΔV_s² per step, is negligible while the store
is much larger than the transducer's capacitance (a store of 100 C_p moves by under 1 % of the
clamp per conduction).  No smoothing is involved: the energy the beam gives up is the tallied
mechanical, resistive and diode losses plus what the store takes (`tests/test_bridge.py`
checks the balance).  Tallies CHARGE, DC_ENERGY (V_s Q), DIODE_LOSS (2 V_D Q) and
CONDUCTION_TIME hold the bridge's share; LOAD_ENERGY is what the store passes on (all of it for
a voltage store, ∫V_s²/R_L for a capacitor).
"""

from __future__ import annotations

import inspect
import math
from dataclasses import dataclass
from functools import lru_cache, wraps
from typing import NamedTuple

import numba
import numpy as np
from llvmlite import ir
from numba import njit, prange, types
from numba.extending import intrinsic, overload

from harvester.model import (
    PiezoCircuit,
    ReducedModel,
    VoltageStore,
    Wells,
    analyse_wells,
)

FLAG_OK = 0
FLAG_TRAVEL = 1  # |x| passed the model's travel limit
FLAG_DIVERGED = 2  # non-finite, or beyond the divergence bound

DIVERGENCE_FACTOR = 1.0e3  # divergence bound = this × the model's length scale

INPUT_CHUNK_STEPS = 32  # sampled input is copied per block this many steps at a time
# strobe samples are gathered per block and written out this many at a time: a whole cache
# line of each trajectory's row instead of one number
STROBE_CHUNK = 8

# The compiler may fuse multiply-adds in the RK4 arithmetic.  It may not reorder sums: numba's
# cached copy of a reordered kernel rounds differently from the freshly compiled one, so a
# first run and a later run would differ in the last bit, and chaotic ensembles amplify that.
# Nor may it assume away NaN or infinity, because diverging trajectories are caught by
# isfinite checks.
FAST_MATH = {"contract", "nsz", "arcp"}

# -- a trajectory's tallies: the columns of the drivers' output (n, N_TALLIES) -------------------
# Ranges over the committed steps (X_MIN = +inf and X_MAX = −inf before the first); time and
# energy integrals h Σ over them; event counts; the trajectory's flag and last side.
X_MIN, X_MAX = 0, 1  # lowest and highest x [m]
PEAK, SPEED = 2, 3  # largest |x| [m] and |ẋ| [m/s]
TIME = 4  # committed time [s]
INPUT_WORK, MECH_LOSS, ELEC_LOSS, LOAD_ENERGY = 5, 6, 7, 8  # ∫−m_f a ẋ, ∫c ẋ², ∫h q², ∫P_load [J]
Q2_TIME = 9  # ∫q² dt [V²·s or A²·s]
HOPS = 10  # moves from one well to the other (tone: beyond one well position to beyond the
#            other; sampled input: changes of the well the beam has settled in)
CROSSINGS = 11  # passages of x through the saddle
TIME_ABOVE, TIME_BELOW = 12, 13  # time with x above / below the saddle [s] (sampled input)
SIDE = 14  # tone: the well position last reached; sampled input: the well settled in (−1/0/+1)
FLAG = 15  # FLAG_OK / FLAG_TRAVEL / FLAG_DIVERGED
ENERGY_CHANGE = 16  # tone: ½mẋ² + U(x) + ½a_c q² at the end minus at the window's start [J]
LOG_GROWTH = 17  # tone with tangents: Σ ln(tangent growth) over the window
# behind a bridge (module notes, "Rectifier bridge")
STORE_V = 18  # the store's voltage V_s, carried from run to run like SIDE [V]
CHARGE = 19  # ∫|i_bridge| dt: charge through the bridge [C]
DC_ENERGY = 20  # ∫V_s |i_bridge| dt: energy into the store [J]
DIODE_LOSS = 21  # ∫2 V_D |i_bridge| dt [J]
CONDUCTION_TIME = 22  # time with the bridge conducting [s]
N_TALLIES = 23

# A block's working array: one row per quantity, one column per trajectory, BLOCK wide, so that
# the compiler sees every row at a fixed distance from the others and vectorises the loop over a
# block without run-time aliasing checks.  Rows W_*: the state x, ẋ, e; the forcing factor
# push (the drive is push·g); the step constants (`_set_step`; zeros freeze a trajectory); the
# state at the segment's start (rollback); the segment's tallies: lowest and highest x, largest
# |ẋ|, largest |x| (transient), Σẋ², Σe², Σg·ẋ, x − saddle of the state before, crossings,
# steps above and below the saddle, side, hops, and the side at the segment's start; whether
# the segment counts; the tangent vector; the stored energy at the window's start; behind a
# bridge, the store voltage (and at the segment's start) and the segment's Σ charge, Σ V_s·
# charge, Σ V_s², Σ conducting share of each step and the coil's ∫i² dt.
W_X, W_V, W_E, W_PUSH = range(4)
W_HALF, W_FULL, W_SIXTH = 4, 5, 6  # h/2, h, h/6
W_CIRCUIT = 7  # six rows: (feedback, decay) × (h/2, h, h/6) (`RateTerms.circuit`)
W_START = 13  # three rows: x, ẋ, e at the segment's start
W_LOW, W_HIGH, W_SPEED, W_PEAK = 16, 17, 18, 19
W_V2, W_E2, W_POWER = 20, 21, 22
W_PREVIOUS, W_CROSSINGS, W_ABOVE, W_BELOW, W_SIDE, W_HOPS, W_SIDE_START = range(23, 30)
W_KEEP = 30
W_TANGENT = 31  # three rows: δx, δẋ, δe
W_ENERGY0 = 34
W_STORE, W_STORE_START = 35, 36
W_CHARGE, W_DC, W_STORE2, W_CONDUCTING, W_LOSS2 = range(37, 42)
N_WORK = 42
# Most trajectories per block (`block_size`), and the working array's width.  A tallied step
# reads and writes about 23 rows: 128 columns keep them within a 32 KiB L1 data cache (AVX2-era
# cores); 256 did as well on 48 KiB, and no faster.
BLOCK = 128


# -- model → kernel constants -------------------------------------------------------------------
def _per_model(function):
    """Remember `function`'s results for the models it was last called with: the drivers are
    called again and again on the same model (bisections, sweeps).  A model that cannot be
    hashed (say, stiffness given as a list) is simply worked out afresh."""
    remembered = lru_cache(maxsize=64)(function)

    @wraps(function)
    def call(*args):
        try:
            return remembered(*args)
        except TypeError:
            return function(*args)

    return call


_wells = _per_model(analyse_wells)


@dataclass(frozen=True)
class CircuitTerms:
    """The circuit as the integrator sees it (SI), after the quasi-static decision."""

    lag: float  # a_c: C_p [F] or L_c [H]; 0 when quasi-static
    coupling: float  # g: θ [N/V] or Bl [N/A]
    loss: float  # h: 1/R_l [S] or R_c + R_l [Ω]
    load_factor: float  # load power = load_factor · q²: 1/R_l (piezo) or R_l (coil)
    quasi_static: bool


def circuit_terms(model: ReducedModel, step_s: float) -> CircuitTerms:
    """Circuit coefficients with the quasi-static decision for a step of `step_s` [s].

    The circuit is advanced as a state when its time constant a_c/h is at least one step;
    otherwise it is replaced by its quasi-static limit q = g ẋ/h (module notes).  Behind a
    bridge the decision is on the transducer's own terms (`ReducedModel.circuit_coefficients`):
    a piezo always keeps its state, a coil when L_c/R_c is at least one step.
    """
    lag, coupling, loss = model.circuit_coefficients()
    load_factor = _load_factor(model)
    if math.isinf(loss) or coupling == 0.0:  # e.g. a coil on an open load: no current, no force
        return CircuitTerms(0.0, 0.0, 1.0, 0.0, True)
    if lag > 0.0 and (loss == 0.0 or lag / loss >= step_s):
        return CircuitTerms(lag, coupling, loss, load_factor, False)
    if loss <= 0.0:
        raise ValueError("a circuit with no inductance and no resistance is a rigid short")
    return CircuitTerms(0.0, coupling, loss, load_factor, True)


def _load_factor(model: ReducedModel) -> float:
    """Load power per q²: 1/R_l for a piezo (q in volts), R_l for a coil (q in amperes)."""
    t = model.transducer
    if t is None or model.interface is not None or math.isinf(model.load_ohm) \
            or model.load_ohm == 0.0:
        return 0.0
    return 1.0 / model.load_ohm if isinstance(t, PiezoCircuit) else model.load_ohm


class ModelConstants(NamedTuple):
    """The model's scalar constants as the kernels read them (one flat record, so that a
    parallel loop can take it whole)."""

    damping: float  # c/m, plus g²/(h m) when the circuit is quasi-static [1/s]
    forcing_ratio: float  # m_f/m
    quasi_static_gain: float  # g/h when the circuit is quasi-static, else 0: q = gain·ẋ
    storage: float  # a_c m/g²: the circuit stores ½·storage·e² per unit mass (½ a_c q²)
    mass: float  # m [kg]
    mechanical_damping: float  # c [N·s/m]
    circuit_loss: float  # h [S or Ω] of a circuit that takes current, else 0
    load_factor: float  # load power per q² (`CircuitTerms.load_factor`)


class PiezoBridge(NamedTuple):
    """A piezo behind a bridge, as the kernels read it (module notes, "Rectifier bridge"); the
    clamp is V_c = V_s + drop, with the store voltage V_s a per-trajectory state."""

    drop: float  # 2 V_D [V]
    clamp_gain: float  # e = (θ/m) v stays within ±clamp_gain·V_c [N/(V·kg)]
    charge_per_x: float  # θ [C/m] in Q = θ Δx − C_p Δv
    charge_per_e: float  # C_p m/θ [C per unit of e]
    coil_resistance: float  # 0 (see `DeadZoneBridge`)
    inverse_capacitance: float  # 1/C_s [1/F] of a capacitor store (0 for a voltage store)
    inverse_load: float  # 1/R_L [S] across a capacitor store
    capacitor: float | None  # C_s/m [F/kg] of a capacitor store; None for a voltage store


class CoilBridge(NamedTuple):
    """A coil whose current is a state (L_c/R_c of a step or more) behind a bridge."""

    drop: float  # 2 V_D [V]
    push_gain: float  # ė gains −sgn(i)·push_gain·V_c: Bl/(m L_c) [N/(V·kg·s)]
    current_per_e: float  # i = current_per_e·e: m/Bl [A per unit of e]
    coil_resistance: float  # 0: its R_c i² is tallied with the circuit's loss
    inverse_capacitance: float
    inverse_load: float
    capacitor: float | None


class DeadZoneBridge(NamedTuple):
    """A coil without a state (L_c/R_c under a step) behind a bridge: a dead-zone damper,
    |i| = max(damper_gain |ẋ| − damper_offset V_c, 0), pulling with e = damper_force·i."""

    drop: float  # 2 V_D [V]
    damper_gain: float  # Bl/R_c [A·s/m]
    damper_offset: float  # 1/R_c [S]
    damper_force: float  # Bl/m [N/(A·kg)]
    coil_resistance: float  # R_c [Ω]: its loss R_c i² is tallied with the bridge
    inverse_capacitance: float
    inverse_load: float
    capacitor: float | None


BridgeTerms = PiezoBridge | CoilBridge | DeadZoneBridge


class RateTerms(NamedTuple):
    """The equations of motion per unit mass, as the compiled kernels read them:

        v̇ = −forcing_ratio·a − e − damping·v − x Σ_j stiffness_j x^(2j) − Σ_j even_j x^(2j),
        ė = feedback·v − decay·e,

    with e = (g/m) q the circuit's force per unit mass and `circuit` = (coupling, feedback,
    decay) = (g/m, g²/(m a_c), h/a_c), or None when the circuit has no state (none at all, or a
    quasi-static one folded into the damping; then q = quasi_static_gain·v and e = 0).
    `even` is None for an odd force, so that a symmetric model's kernels do not evaluate it.
    `bridge` is None for a resistive load; behind a bridge the circuit equation is the
    piecewise one of the module notes (decay 0 for a piezo, R_c/L_c for a coil), and a coil
    without a state is a dead-zone damper rather than a viscous one.
    """

    stiffness: tuple[float, ...]  # k_(2j+1)/m [1/s², 1/(m² s²), …]
    even: tuple[float, ...] | None  # k_2j/m [m/s², 1/(m s²), …]
    circuit: tuple[float, float, float] | None
    constants: ModelConstants
    bridge: BridgeTerms | None = None


class Bounds(NamedTuple):
    """Where the kernels flag a trajectory and count its events (SI)."""

    travel_limit: float  # |x| beyond this stops a trajectory (FLAG_TRAVEL) [m]
    divergence_limit: float  # |x| beyond this stops it as diverged [m]
    saddle: float  # x of the barrier top: crossings and sides are counted about it [m]
    reach_low: float  # tone: x at or below this has reached the left well (−inf: never) [m]
    reach_high: float  # tone: x at or above this has reached the right well [m]
    settle_low: float  # sampled input: ½ẋ² + U(x)/m below this left of the saddle has settled
    settle_high: float  # … and right of it (per unit mass [J/kg]; −inf: never settles)


# Each number of stiffness terms compiles its own kernels (several seconds each, once per
# machine), so series are padded with zeros to an even length: fitted forces of 3-8 terms share
# three specialisations, at the price of at most one idle multiply-add per force evaluation.
def kernel_terms(n: int) -> int:
    """Terms the kernels evaluate for a series of n: n rounded up to an even number (≥ 2)."""
    return max(2, n + n % 2)


def _padded(series: tuple[float, ...]) -> np.ndarray:
    """`series` without trailing zeros, padded with zeros to `kernel_terms`."""
    k = np.trim_zeros(np.asarray(series, dtype=float), "b")
    return np.pad(k, (0, kernel_terms(k.size) - k.size))


@_per_model
def rate_terms(model: ReducedModel, circuit: CircuitTerms) -> RateTerms:
    """The kernels' form of `model` with the circuit as decided by `circuit_terms`; in each
    series trailing zero terms are dropped, then zeros appended up to an even number of terms
    (`kernel_terms`)."""
    m = model.mass_kg
    k = _padded(model.stiffness)
    even = None if model.is_symmetric else _padded(model.even_stiffness)
    damping = model.damping_N_s_per_m
    storage = 0.0
    bridge = bridge_terms(model, circuit)
    if circuit.quasi_static and bridge is not None:
        state, gain = None, 0.0
    elif circuit.quasi_static:
        damping += circuit.coupling**2 / circuit.loss
        state, gain = None, circuit.coupling / circuit.loss
    else:
        coupling = circuit.coupling / m
        state = (coupling, coupling * circuit.coupling / circuit.lag, circuit.loss / circuit.lag)
        gain = 0.0
        storage = circuit.lag * m / circuit.coupling**2
    return RateTerms(
        stiffness=tuple(float(c) for c in k / m),
        even=None if even is None else tuple(float(c) for c in even / m), circuit=state,
        constants=ModelConstants(
            damping=damping / m, forcing_ratio=model.forcing_mass_kg / m,
            quasi_static_gain=gain, storage=storage, mass=m,
            mechanical_damping=model.damping_N_s_per_m,
            circuit_loss=circuit.loss if circuit.coupling else 0.0,
            load_factor=circuit.load_factor),
        bridge=bridge,
    )


def bridge_terms(model: ReducedModel, circuit: CircuitTerms) -> BridgeTerms | None:
    """The kernels' form of the model's bridge and store (`PiezoBridge`, `CoilBridge` or
    `DeadZoneBridge`), with the transducer as `circuit_terms` decided it; None for a resistive
    load or no transducer.  Each kind compiles kernels of its own, as does a capacitor store:
    a voltage store's kernels skip the store's update and its tallies."""
    bridge = model.interface
    if bridge is None or circuit.coupling == 0.0:
        return None
    m, g = model.mass_kg, circuit.coupling
    drop = 2.0 * bridge.diode_drop_V
    store = bridge.store
    if isinstance(store, VoltageStore):
        capacitor = (0.0, 0.0, None)
    else:
        capacitor = (1.0 / store.capacitance_F,
                     0.0 if math.isinf(store.load_ohm) else 1.0 / store.load_ohm,
                     store.capacitance_F / m)
    if isinstance(model.transducer, PiezoCircuit):
        return PiezoBridge(drop, g / m, g, circuit.lag * m / g, 0.0, *capacitor)
    if circuit.quasi_static:
        return DeadZoneBridge(drop, g / circuit.loss, 1.0 / circuit.loss, g / m, circuit.loss,
                              *capacitor)
    return CoilBridge(drop, g / (m * circuit.lag), m / g, 0.0, *capacitor)


def length_scale_m(model: ReducedModel, amplitude_mps2: float) -> float:
    """A length [m] the motion can reach: the well position, or the deflection that the forcing
    amplitude times the resonant amplification m ω_n/c would produce on the restoring force."""
    return _length_scale(model, amplitude_mps2, _wells(model))


@_per_model
def _length_scale(model: ReducedModel, amplitude_mps2: float, wells: Wells) -> float:
    """`length_scale_m` with the model's wells already analysed."""
    scale = max((abs(w) for w in wells.wells_m), default=0.0)
    k_scale = abs(model.k1) if model.k1 != 0.0 else 1.0
    c_total = model.damping_N_s_per_m
    lag, g, h = model.circuit_coefficients()
    if g != 0.0 and h > 0.0 and math.isfinite(h):
        c_total += g * g / h
    amplification = math.sqrt(k_scale * model.mass_kg) / c_total if c_total > 0 else 1.0e6
    force = model.forcing_mass_kg * amplitude_mps2 * max(1.0, amplification)
    scale = max(scale, _static_deflection(model, force, wells))
    return scale if scale > 0.0 else 1.0


def _static_deflection(model: ReducedModel, force_N: float, wells: Wells) -> float:
    """x > 0 with F(x) = force [m], by expanding then bisecting; 0 when F (softening) never
    gets there within 2⁶⁰ times the starting length."""
    if force_N <= 0.0:
        return 0.0
    x = max(max((abs(w) for w in wells.wells_m), default=0.0), 1e-9)
    for _ in range(60):
        if model.restoring_force(x) >= force_N:
            break
        x *= 2.0
    else:
        return 0.0
    lo = 0.0
    for _ in range(80):
        mid = 0.5 * (lo + x)
        if model.restoring_force(mid) >= force_N:
            x = mid
        else:
            lo = mid
    return x


def fastest_frequency_rad_s(model: ReducedModel) -> float:
    """Highest angular frequency the steps must resolve [rad/s]: √(F'(±2 x_ref)/m) with x_ref
    the outer well's distance from x = 0 (or √|k1/k3| for a monostable model), plus the
    open-circuit stiffening g²/a_c."""
    wells = analyse_wells(model)
    if wells.regime == "bistable":
        x_ref = max(abs(w) for w in wells.wells_m)
    else:
        x_ref = math.sqrt(abs(model.k1 / model.k3)) if model.k3 != 0.0 else 0.0
    slope = max(model.stiffness_at(2.0 * x_ref), model.stiffness_at(-2.0 * x_ref), abs(model.k1))
    lag, g, _ = model.circuit_coefficients()
    if lag > 0.0:
        slope += g * g / lag
    return math.sqrt(slope / model.mass_kg)


def recommended_steps_per_period(model: ReducedModel, frequency_Hz: np.ndarray | float,
                                 minimum: int = 128, per_fast_period: int = 40) -> int:
    """Steps per forcing period for an ensemble: at least `minimum`, and at least
    `per_fast_period` steps per period of the fastest motion (`fastest_frequency_rad_s`) at the
    lowest forcing frequency.  Rounded up to a multiple of 8."""
    f_low = float(np.min(frequency_Hz))
    fast_Hz = fastest_frequency_rad_s(model) / (2.0 * math.pi)
    steps = max(minimum, math.ceil(per_fast_period * fast_Hz / f_low))
    return int(8 * math.ceil(steps / 8))


def block_size(n: int) -> int:
    """Trajectories per block: BLOCK (a cache-sized block), fewer so that every thread has
    work."""
    threads = numba.get_num_threads()
    per_thread = math.ceil(n / max(threads, 1))
    return int(max(8, min(BLOCK, 8 * math.ceil(per_thread / 8))))


def _bounds(model: ReducedModel, wells: Wells, divergence_m: float,
            settle_fraction: float = 0.0) -> Bounds:
    """The kernels' `Bounds` of a model: crossings about its saddle, hops between its well
    positions, settled in a well below U(saddle) − settle_fraction·ΔU of that well (never when
    monostable or the fraction is 0)."""
    if wells.regime != "bistable" or not settle_fraction > 0.0:
        return Bounds(travel_limit=model.travel_limit_m, divergence_limit=divergence_m,
                      saddle=wells.saddle_m if wells.saddle_m is not None else 0.0,
                      reach_low=wells.wells_m[0] if wells.regime == "bistable" else -math.inf,
                      reach_high=wells.wells_m[1] if wells.regime == "bistable" else math.inf,
                      settle_low=-math.inf, settle_high=-math.inf)
    top = float(model.potential_energy(wells.saddle_m))
    low, high = ((top - settle_fraction * barrier) / model.mass_kg
                 for barrier in wells.barriers_J)
    return Bounds(travel_limit=model.travel_limit_m, divergence_limit=divergence_m,
                  saddle=wells.saddle_m, reach_low=wells.wells_m[0], reach_high=wells.wells_m[1],
                  settle_low=low, settle_high=high)


# -- compiled pieces shared by every driver -----------------------------------------------------
# Scalar functions of one trajectory; the kernels call them inside their loop over a block's
# trajectories, and the loop is vectorised only if they are inlined into it first.  So the
# RK4 pieces are inlined by numba (inline="always") rather than left to LLVM's inliner, which
# keeps an RK4 step with a 4-term force out of line (over its size threshold) until after
# loop vectorisation: the loop then stayed scalar and ran 8× slower.  The small functions that
# choose between the drivers or circuits by the type of an argument (None or not) cannot be
# inlined by numba (it would type both branches); LLVM inlines those, being small.
@njit(cache=True, fastmath=FAST_MATH)
def _even_series(x2, coefficients):
    """Σ_j c_j x2^j by Horner's rule; `coefficients` is a tuple, so the loop unrolls."""
    last = len(coefficients) - 1
    total = coefficients[last]
    for j in range(last - 1, -1, -1):
        total = total * x2 + coefficients[j]
    return total


@njit(cache=True, fastmath=FAST_MATH)
def _restoring(x, stiffness, even):
    """F(x)/m = x Σ_j stiffness_j x^(2j) + Σ_j even_j x^(2j) (`RateTerms`), Horner's rule in
    x² for each series; the odd series alone when `even` is None."""
    x2 = x * x
    if even is None:
        return x * _even_series(x2, stiffness)
    return x * _even_series(x2, stiffness) + _even_series(x2, even)


@njit(cache=True, fastmath=FAST_MATH)
def _slope(x, stiffness, even):
    """F'(x)/m = Σ_j (2j+1) stiffness_j x^(2j) + Σ_j 2j even_j x^(2j−1)."""
    x2 = x * x
    last = len(stiffness) - 1
    total = (2 * last + 1) * stiffness[last]
    for j in range(last - 1, -1, -1):
        total = total * x2 + (2 * j + 1) * stiffness[j]
    if even is None:
        return total
    last = len(even) - 1
    rising = 2 * last * even[last]
    for j in range(last - 1, 0, -1):
        rising = rising * x2 + 2 * j * even[j]
    return total + x * rising


@njit(cache=True, fastmath=FAST_MATH)
def _potential(x, stiffness, even):
    """U(x)/m = ∫_0^x F/m = x² Σ_j stiffness_j x^(2j)/(2j+2) + x Σ_j even_j x^(2j)/(2j+1)."""
    x2 = x * x
    last = len(stiffness) - 1
    total = stiffness[last] / (2 * last + 2)
    for j in range(last - 1, -1, -1):
        total = total * x2 + stiffness[j] / (2 * j + 2)
    if even is None:
        return x2 * total
    last = len(even) - 1
    rising = even[last] / (2 * last + 1)
    for j in range(last - 1, -1, -1):
        rising = rising * x2 + even[j] / (2 * j + 1)
    return x2 * total + x * rising


@njit(cache=True, fastmath=FAST_MATH)
def _acceleration(x, v, e, push, g, stiffness, even, damping, circuit, bridge, threshold):
    """v̇ = −push·g − e − (c/m) v − F(x)/m (`RateTerms`), with the drive (m_f/m) a = push·g,
    summed in this order, so that the force, whose series takes longest, enters last.
    Written so that every product is fused into the sum (a tone's drive costs no
    multiplication of its own).  Without a circuit state, `_stateless_acceleration`."""
    if circuit is None:
        return _stateless_acceleration(x, v, push, g, stiffness, even, damping, bridge,
                                       threshold)
    return ((-(push * g) - e) - damping * v) - _restoring(x, stiffness, even)


@njit(cache=True, fastmath=FAST_MATH)
def _circuit_update(e, v_j, e_j, feedback_step, decay_step, circuit):
    """e − decay_step·e_j + feedback_step·v_j, the circuit's linear RK4 update (v_j, which
    the stages finish last, added last); e without a circuit state."""
    if circuit is None:
        return e
    return (e - decay_step * e_j) + feedback_step * v_j


@njit(cache=True)
def _set_step(work, i, h, circuit):
    """Trajectory i's step constants (rows W_HALF … W_CIRCUIT + 5) for a step of h [s]; h = 0
    freezes it."""
    work[W_HALF, i] = 0.5 * h
    work[W_FULL, i] = h
    work[W_SIXTH, i] = h / 6.0
    if circuit is not None:
        for k, fraction in enumerate((0.5, 1.0, 1.0 / 6.0)):
            work[W_CIRCUIT + 2 * k, i] = fraction * circuit[1] * h
            work[W_CIRCUIT + 2 * k + 1, i] = fraction * circuit[2] * h


@njit(cache=True, fastmath=FAST_MATH, inline="always")
def _step(x, v, e, work, i, push, g0, g_mid, g1, stiffness, even, damping, circuit, bridge,
          low, high, clamp_push, threshold):
    """One classical RK4 step of trajectory i from (x, ẋ, e), with its step constants in column
    i of `work` and the drives push·g at t, t + h/2 and t + h; returns the state after the
    step and the stage sums of `_stage_currents`.

    Stage j sits at (x_j, v_j, e_j), (x_1, v_1, e_1) = (x, ẋ, e), with acceleration a_j.  The
    circuit equation is linear, so its stages are updates of e:  e_(j+1) = e + c_(j+1) h
    (feedback·v_j − decay·e_j), and the step ends at e + (h/6)(feedback Σ w_j v_j − decay
    Σ w_j e_j), where Σ w_j v_j (weights 1, 2, 2, 1) is the sum that also advances x (Hairer,
    Nørsett & Wanner 1993, Solving ODEs I, §II.1).  Each product with a step constant is read
    from the working array, not formed: the loop is bound by floating-point operations, and
    loads go to other ports.  Behind a bridge each circuit stage also feels the clamp
    (`_bridged`: the piezo's clamp [low, high], or the coil's clamp voltage `clamp_push` and
    polarity), and a coil without a state its dead zone (`threshold`, `_acceleration`); for
    a piezo (decay 0) e_j = clip(e + feedback (x_j − x)), the play operator read at x_j.
    """
    half = work[W_HALF, i]
    feedback_half = work[W_CIRCUIT, i]
    decay_half = work[W_CIRCUIT + 1, i]
    a1 = _acceleration(x, v, e, push, g0, stiffness, even, damping, circuit, bridge, threshold)
    x2 = x + half * v
    v2 = v + half * a1
    e2 = _bridged(_circuit_update(e, v, e, feedback_half, decay_half, circuit), half,
                  clamp_push, low, high, bridge)
    a2 = _acceleration(x2, v2, e2, push, g_mid, stiffness, even, damping, circuit, bridge,
                       threshold)
    x3 = x + half * v2
    v3 = v + half * a2
    e3 = _bridged(_circuit_update(e, v2, e2, feedback_half, decay_half, circuit), half,
                  clamp_push, low, high, bridge)
    a3 = _acceleration(x3, v3, e3, push, g_mid, stiffness, even, damping, circuit, bridge,
                       threshold)
    full = work[W_FULL, i]
    x4 = x + full * v3
    v4 = v + full * a3
    e4 = _bridged(_circuit_update(e, v3, e3, work[W_CIRCUIT + 2, i], work[W_CIRCUIT + 3, i],
                                  circuit), full, clamp_push, low, high, bridge)
    a4 = _acceleration(x4, v4, e4, push, g1, stiffness, even, damping, circuit, bridge,
                       threshold)
    sum_v = v + 2.0 * (v2 + v3) + v4
    sum_e = e + 2.0 * (e2 + e3) + e4
    sixth = work[W_SIXTH, i]
    current, square = _stage_currents(v, v2, v3, v4, sum_e, threshold, bridge)
    return (x + sixth * sum_v, v + sixth * (a1 + 2.0 * (a2 + a3) + a4),
            _bridged(_circuit_update(e, sum_v, sum_e, work[W_CIRCUIT + 4, i],
                                     work[W_CIRCUIT + 5, i], circuit), full, clamp_push, low,
                     high, bridge),
            current, square)


@njit(cache=True, fastmath=FAST_MATH, inline="always")
def _rk4(x, v, e, work, i, push, g0, g_mid, g1, stiffness, even, damping, circuit):
    """One RK4 step (`_step`) of a model with a resistive load: the state after it."""
    x1, v1, e1, _, _ = _step(x, v, e, work, i, push, g0, g_mid, g1, stiffness, even, damping,
                             circuit, None, 0.0, 0.0, 0.0, 0.0)
    return x1, v1, e1


@njit(cache=True, fastmath=FAST_MATH)
def _rates(x, v, e, push, g, stiffness, even, damping, circuit):
    """(ẋ, v̇, ė) of the reduced model per unit mass (`RateTerms`)."""
    a = _acceleration(x, v, e, push, g, stiffness, even, damping, circuit, None, 0.0)
    if circuit is None:
        return v, a, 0.0
    return v, a, circuit[1] * v - circuit[2] * e


@njit(cache=True, fastmath=FAST_MATH)
def _tangent_rates(x, dx, dv, de, stiffness, even, damping, circuit):
    """Variational equations at position x:  δv̇ = −δe − (F'(x)/m) δx − (c/m) δv,
    δė = feedback·δv − decay·δe."""
    stiffening = _slope(x, stiffness, even) * dx
    if circuit is None:
        return dv, -stiffening - damping * dv, 0.0
    return dv, (-de - stiffening) - damping * dv, circuit[1] * dv - circuit[2] * de


@njit(cache=True, fastmath=FAST_MATH, inline="always")
def _tangent_rk4(x, v, e, dx, dv, de, work, i, push, g0, g_mid, stiffness, even, damping, circuit):
    """The RK4 step of `_rk4` applied to a tangent vector (δx, δẋ, δe) at the state's own stage
    positions, which it recomputes from (x, ẋ, e); returns the tangent vector after the step."""
    h = work[W_FULL, i]
    half = work[W_HALF, i]
    ax, av, ae = _rates(x, v, e, push, g0, stiffness, even, damping, circuit)
    tax, tav, tae = _tangent_rates(x, dx, dv, de, stiffness, even, damping, circuit)
    x2, v2, e2 = x + half * ax, v + half * av, e + half * ae
    bx, bv, be = _rates(x2, v2, e2, push, g_mid, stiffness, even, damping, circuit)
    tbx, tbv, tbe = _tangent_rates(x2, dx + half * tax, dv + half * tav, de + half * tae,
                                   stiffness, even, damping, circuit)
    x3, v3, e3 = x + half * bx, v + half * bv, e + half * be
    cx = _rates(x3, v3, e3, push, g_mid, stiffness, even, damping, circuit)[0]
    tcx, tcv, tce = _tangent_rates(x3, dx + half * tbx, dv + half * tbv, de + half * tbe,
                                   stiffness, even, damping, circuit)
    tdx, tdv, tde = _tangent_rates(x + h * cx, dx + h * tcx, dv + h * tcv, de + h * tce,
                                   stiffness, even, damping, circuit)
    sixth = work[W_SIXTH, i]
    return (dx + sixth * (tax + 2.0 * (tbx + tcx) + tdx),
            dv + sixth * (tav + 2.0 * (tbv + tcv) + tdv),
            de + sixth * (tae + 2.0 * (tbe + tce) + tde))


@njit(cache=True)
def _circuit_force(q, circuit):
    """e = (g/m) q; 0 when the circuit has no state."""
    if circuit is None:
        return 0.0
    return circuit[0] * q


@njit(cache=True)
def _circuit_variable(e, v, circuit, quasi_static_gain):
    """q [V or A] from e and ẋ: e/(g/m), or quasi_static_gain·ẋ without a circuit state."""
    if circuit is None:
        return quasi_static_gain * v
    return e / circuit[0]


@njit(cache=True)
def _sum_of_squares(sum_e2, sum_v2, circuit, quasi_static_gain):
    """Σq² from Σe² and Σẋ² (see `_circuit_variable`)."""
    if circuit is None:
        return quasi_static_gain**2 * sum_v2
    return sum_e2 / circuit[0] ** 2


@njit(cache=True, inline="always")
def _new_work(rows):
    """A zeroed working array (rows, BLOCK) whose rows start on 64-byte boundaries, so that no
    vector load of a row straddles two cache lines (allocations are only 32-byte aligned)."""
    raw = np.zeros((rows, BLOCK + 8))
    skip = (-raw.ctypes.data) % 64 // 8
    return raw[:, skip:skip + BLOCK]


@njit(cache=True)
def _stored_energy(work, i, stiffness, even, storage):
    """½ẋ² + U(x)/m + ½·storage·e² of trajectory i: its stored energy per unit mass."""
    v = work[W_V, i]
    e = work[W_E, i]
    return 0.5 * v * v + _potential(work[W_X, i], stiffness, even) + 0.5 * storage * e * e


def _extremum(name):
    """min or max of two floats as one vector instruction.  LLVM turns `low = x if x < low
    else low`, stored back where `low` came from, into a masked store, which costs four
    micro-operations with AVX2.  A NaN operand may give either one: a state that turns NaN is
    flagged at the end of its segment, and that segment's tallies are dropped."""

    @intrinsic
    def extremum(typingctx, a, b):
        def codegen(context, builder, signature, args):
            double = ir.DoubleType()
            fn = builder.module.declare_intrinsic(name, [double],
                                                  ir.FunctionType(double, [double, double]))
            return builder.call(fn, args, fastmath=("nnan",))

        return types.float64(types.float64, types.float64), codegen

    return extremum


_lower = _extremum("llvm.minnum")
_higher = _extremum("llvm.maxnum")


# -- the rectifier bridge (module notes) -------------------------------------------------------
# The bridge's pieces are compiled for the kind of bridge they are given (`_by_bridge`), so a
# kernel holds only its own bridge's arithmetic: a resistive kernel none of it.
def _by_bridge(choose):
    """A compiled-only function whose body `choose` picks, when a kernel is compiled, from the
    numba types of its arguments; numba inlines the chosen body where it is called
    (`overload(inline="always")`), before loop vectorisation.  Left to LLVM's inliner, the
    bridge's helpers stayed out of line and the bridge loop ran scalar, ten times slower; and
    numba types both branches of a test on None in a function it inlines itself, so that test
    cannot sit in the body.  `choose` takes the arguments' types by name and returns a plain
    Python function with the same parameters."""
    names = list(inspect.signature(choose).parameters)

    def compiled(*args):
        raise NotImplementedError(f"{choose.__name__} runs only inside compiled kernels")

    def pick(*args):
        return choose(**dict(zip(names, args)))

    overload(compiled, inline="always", strict=False)(pick)
    compiled.__name__ = compiled.__qualname__ = choose.__name__
    compiled.__doc__ = choose.__doc__
    return compiled


def _kind(bridge) -> type | None:
    """The class of the bridge record a numba type stands for (None: no bridge)."""
    return None if isinstance(bridge, types.NoneType) else bridge.instance_class


def _has_capacitor(bridge) -> bool:
    """Whether a bridge record's numba type holds a capacitor store."""
    return not isinstance(bridge.types[bridge.fields.index("capacitor")], types.NoneType)


@njit(cache=True, fastmath=FAST_MATH)
def _select(condition, if_true, if_false):
    """`if_true if condition else if_false`, for the bodies numba inlines itself (`_by_bridge`):
    a conditional expression written there leaves a branch in numba's IR, which it warns
    about, where this small function becomes one select instruction."""
    return if_true if condition else if_false


@njit(cache=True, fastmath=FAST_MATH)
def _clip(value, low, high):
    """value held within [low, high], as one min and one max instruction."""
    return _lower(_higher(value, low), high)


@njit(cache=True, fastmath=FAST_MATH)
def _damper_current(v, bridge, threshold):
    """|i| [A] of a coil without a state behind a bridge: max(Bl |ẋ| − V_c, 0)/R_c, with
    threshold = V_c/R_c."""
    return _higher(bridge.damper_gain * abs(v) - threshold, 0.0)


@_by_bridge
def _stateless_acceleration(x, v, push, g, stiffness, even, damping, bridge, threshold):
    """`_acceleration` of a model without a circuit state: −push·g − (c/m) v − F(x)/m, and
    behind a bridge (a coil without a state) the dead-zone pull (Bl/m) sgn(ẋ)|i| as well."""
    def free(x, v, push, g, stiffness, even, damping, bridge, threshold):
        return (-(push * g) - damping * v) - _restoring(x, stiffness, even)

    def dead_zone(x, v, push, g, stiffness, even, damping, bridge, threshold):
        pull = bridge.damper_force * math.copysign(_damper_current(v, bridge, threshold), v)
        return ((-(push * g) - pull) - damping * v) - _restoring(x, stiffness, even)

    return dead_zone if _kind(bridge) is DeadZoneBridge else free


@_by_bridge
def _clamp_terms(e, v, store, bridge):
    """(low, high, clamp push, dead-zone threshold) of a step, from the state it starts in and
    the store voltage V_s; the clamp is V_c = V_s + 2 V_D.

    A piezo's e stays within ±(θ/m)V_c.  A coil's current keeps, for the whole step, the
    polarity it has at the start or, at zero current, the polarity its EMF drives: [0, ∞) or
    (−∞, 0], and the clamp voltage pushes against it.  A coil without a state conducts beyond
    |ẋ| = V_c/Bl: threshold = V_c/R_c.  Zeros without a bridge.
    """
    def unclamped(e, v, store, bridge):
        return 0.0, 0.0, 0.0, 0.0

    def piezo(e, v, store, bridge):
        level = bridge.clamp_gain * (store + bridge.drop)
        return -level, level, 0.0, 0.0

    def coil(e, v, store, bridge):
        way = _select(e != 0.0, e, v)
        sign = _select(way > 0.0, 1.0, _select(way < 0.0, -1.0, 0.0))
        return (_select(sign < 0.0, -math.inf, 0.0), _select(sign > 0.0, math.inf, 0.0),
                sign * bridge.push_gain * (store + bridge.drop), 0.0)

    def dead_zone(e, v, store, bridge):
        return 0.0, 0.0, 0.0, bridge.damper_offset * (store + bridge.drop)

    return {None: unclamped, PiezoBridge: piezo, CoilBridge: coil,
            DeadZoneBridge: dead_zone}[_kind(bridge)]


@_by_bridge
def _bridged(e, step, push, low, high, bridge):
    """A circuit stage as the bridge lets it be: a piezo's e held within its clamp [low, high];
    a coil's current pushed back by the clamp voltage over `step` and held to its polarity;
    unchanged without a bridge, or without a circuit state."""
    def same(e, step, push, low, high, bridge):
        return e

    def piezo(e, step, push, low, high, bridge):
        return _clip(e, low, high)

    def coil(e, step, push, low, high, bridge):
        return _clip(e - step * push, low, high)

    return {None: same, PiezoBridge: piezo, CoilBridge: coil, DeadZoneBridge: same}[_kind(bridge)]


@_by_bridge
def _stage_currents(v, v2, v3, v4, sum_e, threshold, bridge):
    """RK4-weighted sums over a step's stages (weights 1, 2, 2, 1) of the bridge current |i|
    [A] and, for a coil without a state, of i² [A²]; (0, 0) without a bridge and for a piezo,
    whose charge comes from the step's ends (`_finish_step`)."""
    def none(v, v2, v3, v4, sum_e, threshold, bridge):
        return 0.0, 0.0

    def coil(v, v2, v3, v4, sum_e, threshold, bridge):
        return bridge.current_per_e * abs(sum_e), 0.0

    def dead_zone(v, v2, v3, v4, sum_e, threshold, bridge):
        i1 = _damper_current(v, bridge, threshold)
        i2 = _damper_current(v2, bridge, threshold)
        i3 = _damper_current(v3, bridge, threshold)
        i4 = _damper_current(v4, bridge, threshold)
        return i1 + 2.0 * (i2 + i3) + i4, i1 * i1 + 2.0 * (i2 * i2 + i3 * i3) + i4 * i4

    return {None: none, PiezoBridge: none, CoilBridge: coil,
            DeadZoneBridge: dead_zone}[_kind(bridge)]


@_by_bridge
def _finish_step(x, v, e, x1, v1, e1, current, square, low, high, threshold, h, bridge,
                 circuit):
    """(e after the step, charge through the bridge [C], conducting share of the step,
    ∫i² dt [A²·s] of a coil without a state); (e1, 0, 0, 0) without a bridge.

    Piezo: the play operator is carried through the step's midpoint, x_m = (x + x1)/2 +
    h (ẋ − ẋ1)/8 (the cubic Hermite interpolant's, exact for cubic motion), e_m = clip(e +
    κ (x_m − x)) and e1 = clip(e_m + κ (x1 − x_m)), κ the feedback, so that a clamp lets go
    near where ẋ changes sign within the step: the turning point's x is missed by at most
    |ẍ| h²/32 (the largest of three samples of a parabola), against |ẍ| h²/8 from the ends
    alone, and no division is needed.  The charge is θ Δx − C_p Δv over each half (exact,
    Kirchhoff), that is C_p m/θ times what the clamp took off e (exactly zero while open); the
    step counts as conducting when that charge is over half of θ |Δx|, the charge of a whole
    step's conduction (rounded to whole steps, the conduction time is off by under half a step
    per conduction, either way).
    Coils: the charge is h/6 times the RK4-weighted sum of the stage currents; the share is
    the trapezoid of "conducting" at the step's two ends.
    """
    def none(x, v, e, x1, v1, e1, current, square, low, high, threshold, h, bridge, circuit):
        return e1, 0.0, 0.0, 0.0

    def piezo(x, v, e, x1, v1, e1, current, square, low, high, threshold, h, bridge, circuit):
        kappa = circuit[1]
        x_mid = 0.5 * (x + x1) + 0.125 * h * (v - v1)
        open_mid = e + kappa * (x_mid - x)
        e_mid = _clip(open_mid, low, high)
        open_end = e_mid + kappa * (x1 - x_mid)
        end = _clip(open_end, low, high)
        through = bridge.charge_per_e * (abs(open_mid - e_mid) + abs(open_end - end))
        whole = bridge.charge_per_x * (abs(x_mid - x) + abs(x1 - x_mid))
        return end, through, _select(through > 0.5 * whole, 1.0, 0.0), 0.0

    def coil(x, v, e, x1, v1, e1, current, square, low, high, threshold, h, bridge, circuit):
        on = 0.5 * (_select(e != 0.0, 1.0, 0.0) + _select(e1 != 0.0, 1.0, 0.0))
        return e1, h / 6.0 * current, on, 0.0

    def dead_zone(x, v, e, x1, v1, e1, current, square, low, high, threshold, h, bridge,
                  circuit):
        sixth = h / 6.0
        on = 0.5 * (_select(bridge.damper_gain * abs(v) > threshold, 1.0, 0.0)
                    + _select(bridge.damper_gain * abs(v1) > threshold, 1.0, 0.0))
        return e1, sixth * current, on, sixth * square

    return {None: none, PiezoBridge: piezo, CoilBridge: coil,
            DeadZoneBridge: dead_zone}[_kind(bridge)]


@_by_bridge
def _account(work, i, store, charge, on, loss2, bridge):
    """Add a step to the segment's Σ charge, Σ conducting share and ∫i² dt; for a capacitor
    store also advance it, C_s ΔV_s = Q − h V_s/R_L (explicit, module notes), and add to
    Σ V_s·charge and Σ V_s².  Nothing without a bridge."""
    def none(work, i, store, charge, on, loss2, bridge):
        return None

    def voltage(work, i, store, charge, on, loss2, bridge):
        work[W_CHARGE, i] += charge
        work[W_CONDUCTING, i] += on
        work[W_LOSS2, i] += loss2

    def capacitor(work, i, store, charge, on, loss2, bridge):
        h = work[W_FULL, i]
        work[W_STORE, i] = store + bridge.inverse_capacitance * (
            charge - h * bridge.inverse_load * store)
        work[W_CHARGE, i] += charge
        work[W_DC, i] += store * charge
        work[W_STORE2, i] += store * store
        work[W_CONDUCTING, i] += on
        work[W_LOSS2, i] += loss2

    if _kind(bridge) is None:
        return none
    return capacitor if _has_capacitor(bridge) else voltage


@_by_bridge
def _charge_store(work, i, store, charge, bridge):
    """`_account` without the tallies: only a capacitor store's voltage moves."""
    def none(work, i, store, charge, bridge):
        return None

    def capacitor(work, i, store, charge, bridge):
        work[W_STORE, i] = store + bridge.inverse_capacitance * (
            charge - work[W_FULL, i] * bridge.inverse_load * store)

    return capacitor if _kind(bridge) is not None and _has_capacitor(bridge) else none


@_by_bridge
def _commit_bridge(out, work, i, h, bridge):
    """Add a segment's bridge tallies (`_account`) to a trajectory's row `out`: charge, energy
    into the store (V_s Q), diode loss 2 V_D Q, conduction time, what the store passes on to
    the node (all it took in, for a voltage store; ∫V_s²/R_L dt for a capacitor) and a
    stateless coil's R_c ∫i² dt.  Nothing without a bridge."""
    def none(out, work, i, h, bridge):
        return None

    def voltage(out, work, i, h, bridge):
        charge = work[W_CHARGE, i]
        energy = work[W_STORE, i] * charge
        out[CHARGE] += charge
        out[DC_ENERGY] += energy
        out[DIODE_LOSS] += bridge.drop * charge
        out[CONDUCTION_TIME] += h * work[W_CONDUCTING, i]
        out[LOAD_ENERGY] += energy
        out[ELEC_LOSS] += bridge.coil_resistance * work[W_LOSS2, i]
        out[Q2_TIME] += work[W_LOSS2, i]

    def capacitor(out, work, i, h, bridge):
        charge = work[W_CHARGE, i]
        out[CHARGE] += charge
        out[DC_ENERGY] += work[W_DC, i]
        out[DIODE_LOSS] += bridge.drop * charge
        out[CONDUCTION_TIME] += h * work[W_CONDUCTING, i]
        out[LOAD_ENERGY] += h * bridge.inverse_load * work[W_STORE2, i]
        out[ELEC_LOSS] += bridge.coil_resistance * work[W_LOSS2, i]
        out[Q2_TIME] += work[W_LOSS2, i]

    if _kind(bridge) is None:
        return none
    return capacitor if _has_capacitor(bridge) else voltage


@_by_bridge
def _with_store(energy, work, i, bridge):
    """A stored energy per unit mass, plus ½ (C_s/m) V_s² in a capacitor store."""
    def same(energy, work, i, bridge):
        return energy

    def capacitor(energy, work, i, bridge):
        store = work[W_STORE, i]
        return energy + 0.5 * bridge.capacitor * store * store

    return capacitor if _kind(bridge) is not None and _has_capacitor(bridge) else same


@_by_bridge
def _output_variable(e, v, store, circuit, quasi_static_gain, bridge):
    """q [V or A] as `_circuit_variable`; behind a bridge, a coil without a state reports its
    dead-zone current sgn(ẋ)|i| at the store voltage `store`."""
    def state(e, v, store, circuit, quasi_static_gain, bridge):
        return _circuit_variable(e, v, circuit, quasi_static_gain)

    def dead_zone(e, v, store, circuit, quasi_static_gain, bridge):
        threshold = bridge.damper_offset * (store + bridge.drop)
        return math.copysign(_damper_current(v, bridge, threshold), v)

    return dead_zone if _kind(bridge) is DeadZoneBridge else state


# -- the tally-and-advance loop, once for both drivers ------------------------------------------
@njit(cache=True, fastmath=FAST_MATH)
def _phase(table, j):
    """cos of a tone's phase at half step j of the period; 0 for a sampled input (no table)."""
    if table is None:
        return 0.0
    return table[j]


@njit(cache=True, fastmath=FAST_MATH)
def _drive(samples, j, i, phase_cos):
    """g of the drive push·g = (m_f/m)·a of trajectory i at half step j: cos of a tone's
    phase (no samples; the same for every trajectory, push = (m_f/m)·A), or a sampled input's
    (push = m_f/m)."""
    if samples is None:
        return phase_cos
    return samples[j, i]


@njit(cache=True, fastmath=FAST_MATH)
def _side_now(x, v, y, was, bounds, stiffness, even, table):
    """The well trajectory i counts as being in (−1/+1), or `was`: a tone's has reached a well
    position; a sampled input's has settled, with ½ẋ² + U(x)/m below the threshold of its side
    of the saddle (y = x − saddle)."""
    if table is not None:
        return 1.0 if x >= bounds.reach_high else (-1.0 if x <= bounds.reach_low else was)
    energy = 0.5 * v * v + _potential(x, stiffness, even)
    above = y > 0.0
    limit = bounds.settle_high if above else bounds.settle_low
    side = 1.0 if above else -1.0
    return side if energy < limit else was


@njit(cache=True, fastmath=FAST_MATH)
def _count_sides(work, i, y, table):
    """Steps above and below the saddle (sampled input only)."""
    if table is None:
        work[W_ABOVE, i] += 1.0 if y > 0.0 else 0.0
        work[W_BELOW, i] += 1.0 if y < 0.0 else 0.0


@njit(cache=True, fastmath=FAST_MATH, inline="always")
def _tally(work, i, g, bounds, stiffness, even, table):
    """Add trajectory i's current state to the segment's tallies: lowest and highest x,
    largest |ẋ|, Σẋ², Σe², Σg·ẋ (the drive's work over push), a crossing of the saddle since
    the state before, and a hop when its well (`_side_now`) changed sign."""
    x = work[W_X, i]
    v = work[W_V, i]
    e = work[W_E, i]
    work[W_LOW, i] = _lower(x, work[W_LOW, i])
    work[W_HIGH, i] = _higher(x, work[W_HIGH, i])
    work[W_SPEED, i] = _higher(abs(v), work[W_SPEED, i])
    work[W_V2, i] += v * v
    work[W_E2, i] += e * e
    work[W_POWER, i] += g * v
    y = x - bounds.saddle
    was_y = work[W_PREVIOUS, i]
    work[W_PREVIOUS, i] = y
    work[W_CROSSINGS, i] += 1.0 if y * was_y < 0.0 else 0.0
    _count_sides(work, i, y, table)
    was = work[W_SIDE, i]
    now = _side_now(x, v, y, was, bounds, stiffness, even, table)
    work[W_SIDE, i] = now
    work[W_HOPS, i] += 1.0 if now * was < 0.0 else 0.0


@njit(cache=True, fastmath=FAST_MATH, inline="always")
def _advance(work, i, g0, g_mid, g1, stiffness, even, damping, circuit, bridge, tally):
    """One RK4 step of trajectory i of a block, in place in its working array; behind a
    bridge with the bridge's piecewise circuit and its store (module notes), whose step is
    tallied (`_account`) only with `tally` (a constant where it is called, so that a transient
    step does no bridge tallies)."""
    x = work[W_X, i]
    v = work[W_V, i]
    e = work[W_E, i]
    store = work[W_STORE, i]
    low, high, clamp_push, threshold = _clamp_terms(e, v, store, bridge)
    x1, v1, e1, current, square = _step(x, v, e, work, i, work[W_PUSH, i], g0, g_mid, g1,
                                        stiffness, even, damping, circuit, bridge, low, high,
                                        clamp_push, threshold)
    e1, charge, on, loss2 = _finish_step(x, v, e, x1, v1, e1, current, square, low, high,
                                         threshold, work[W_FULL, i], bridge, circuit)
    work[W_X, i] = x1
    work[W_V, i] = v1
    work[W_E, i] = e1
    if tally:
        _account(work, i, store, charge, on, loss2, bridge)
    else:
        _charge_store(work, i, store, charge, bridge)


@njit(cache=True, fastmath=FAST_MATH, inline="always")
def _run_steps(work, nb, steps, table, samples, stiffness, even, circuit, constants, bridge,
               bounds, tally, tangent):
    """Advance the block's first nb trajectories `steps` RK4 steps.

    The drive is a tone's (`table`: cos of the phase at every half step of the segment) or a
    sampled input's (`samples` (2 steps + 1, nb), the other one None).  The samples are an
    array of their own: held in rows of `work` at an offset that moves with the step, they kept
    the compiler from proving them apart from the rows the loop writes, and it did not
    vectorise.  With `tally` each step
    first adds the state it starts from to the segment's tallies (`_tally`; a tone counts hops
    at the well positions, a sampled input when the beam settles), otherwise it only tracks the
    largest |x|.  With `tangent` the tangent vector in rows W_TANGENT… is advanced alongside
    (`_tangent_rk4`).  Inlined into the kernels, where the compiler knows the working array's
    row stride: compiled on its own, the loops were not vectorised.
    """
    damping = constants.damping
    for s in range(steps):
        j = 2 * s
        c0 = _phase(table, j)
        cm = _phase(table, j + 1)
        c1 = _phase(table, j + 2)
        if tangent:
            for i in range(nb):
                work[W_TANGENT, i], work[W_TANGENT + 1, i], work[W_TANGENT + 2, i] = \
                    _tangent_rk4(work[W_X, i], work[W_V, i], work[W_E, i], work[W_TANGENT, i],
                                 work[W_TANGENT + 1, i], work[W_TANGENT + 2, i], work, i,
                                 work[W_PUSH, i], _drive(samples, j, i, c0),
                                 _drive(samples, j + 1, i, cm), stiffness, even, damping,
                                 circuit)
        if tally:
            for i in range(nb):
                g0 = _drive(samples, j, i, c0)
                _tally(work, i, g0, bounds, stiffness, even, table)
                _advance(work, i, g0, _drive(samples, j + 1, i, cm),
                         _drive(samples, j + 2, i, c1), stiffness, even, damping, circuit,
                         bridge, True)
        else:
            for i in range(nb):
                work[W_PEAK, i] = _higher(abs(work[W_X, i]), work[W_PEAK, i])
                _advance(work, i, _drive(samples, j, i, c0), _drive(samples, j + 1, i, cm),
                         _drive(samples, j + 2, i, c1), stiffness, even, damping, circuit,
                         bridge, False)


@njit(cache=True)
def _begin_segment(work, nb, tally, saddle):
    """Keep the state for a rollback and clear the segment's tallies."""
    for i in range(nb):
        x = work[W_X, i]
        work[W_START, i] = x
        work[W_START + 1, i] = work[W_V, i]
        work[W_START + 2, i] = work[W_E, i]
        work[W_SIDE_START, i] = work[W_SIDE, i]
        work[W_STORE_START, i] = work[W_STORE, i]
        work[W_PEAK, i] = 0.0
        if tally:
            work[W_LOW, i] = x
            work[W_HIGH, i] = x
            work[W_PREVIOUS, i] = x - saddle
    if tally:
        work[W_SPEED, :nb] = 0.0
        work[W_V2:W_POWER + 1, :nb] = 0.0
        work[W_CROSSINGS:W_BELOW + 1, :nb] = 0.0
        work[W_HOPS, :nb] = 0.0
        work[W_CHARGE:W_LOSS2 + 1, :nb] = 0.0


@njit(cache=True)
def _end_segment(work, nb, tally, tallies, offset, bounds):
    """End of a segment: add the final state to the range tallies; set row W_KEEP to 1 where
    the segment counts; flag the trajectories that left the trusted range (FLAG column of
    `tallies`), roll them back to the segment's start and freeze them (step 0)."""
    failed = 0
    for i in range(nb):
        x = work[W_X, i]
        v = work[W_V, i]
        if tally:
            work[W_LOW, i] = min(work[W_LOW, i], x)
            work[W_HIGH, i] = max(work[W_HIGH, i], x)
            work[W_SPEED, i] = max(work[W_SPEED, i], abs(v))
            work[W_PEAK, i] = max(work[W_HIGH, i], -work[W_LOW, i])
        else:
            work[W_PEAK, i] = max(work[W_PEAK, i], abs(x))
        peak = work[W_PEAK, i]
        trusted = (math.isfinite(x) & math.isfinite(v) & math.isfinite(work[W_E, i])
                   & math.isfinite(work[W_STORE, i])
                   & (peak <= bounds.travel_limit) & (peak <= bounds.divergence_limit))
        running = tallies[offset + i, FLAG] == FLAG_OK
        work[W_KEEP, i] = 1.0 if running & trusted else 0.0
        failed += running & ~trusted
    if failed == 0:
        return
    for i in range(nb):
        if work[W_KEEP, i] > 0.0 or tallies[offset + i, FLAG] != FLAG_OK:
            continue
        finite = (math.isfinite(work[W_X, i]) and math.isfinite(work[W_V, i])
                  and math.isfinite(work[W_E, i]) and math.isfinite(work[W_STORE, i]))
        tallies[offset + i, FLAG] = FLAG_TRAVEL if finite \
            and work[W_PEAK, i] <= bounds.divergence_limit else FLAG_DIVERGED
        work[W_X, i] = work[W_START, i]
        work[W_V, i] = work[W_START + 1, i]
        work[W_E, i] = work[W_START + 2, i]
        work[W_SIDE, i] = work[W_SIDE_START, i]
        work[W_STORE, i] = work[W_STORE_START, i]
        work[W_HALF:W_CIRCUIT + 6, i] = 0.0


@njit(cache=True)
def _commit(work, nb, steps, tallies, offset, circuit, constants, bridge):
    """Add the segment's tallies of the trajectories that count (row W_KEEP) to their row of
    `tallies`, as integrals over the segment's steps."""
    for i in range(nb):
        if work[W_KEEP, i] == 0.0:
            continue
        out = tallies[offset + i]
        h = work[W_FULL, i]
        v2 = work[W_V2, i]
        q2 = h * _sum_of_squares(work[W_E2, i], v2, circuit, constants.quasi_static_gain)
        out[TIME] += h * steps
        out[INPUT_WORK] -= constants.mass * work[W_PUSH, i] * h * work[W_POWER, i]
        out[MECH_LOSS] += constants.mechanical_damping * h * v2
        out[Q2_TIME] += q2
        out[ELEC_LOSS] += constants.circuit_loss * q2
        out[LOAD_ENERGY] += constants.load_factor * q2
        out[HOPS] += work[W_HOPS, i]
        out[CROSSINGS] += work[W_CROSSINGS, i]
        out[TIME_ABOVE] += h * work[W_ABOVE, i]
        out[TIME_BELOW] += h * work[W_BELOW, i]
        out[X_MIN] = min(out[X_MIN], work[W_LOW, i])
        out[X_MAX] = max(out[X_MAX], work[W_HIGH, i])
        out[PEAK] = max(out[PEAK], work[W_PEAK, i])
        out[SPEED] = max(out[SPEED], work[W_SPEED, i])
        _commit_bridge(out, work, i, h, bridge)


@njit(cache=True)
def _load_block(work, nb, state, tallies, offset, step, push, circuit):
    """Copy the block's states (x, ẋ, q), last sides, store voltages, steps (0 for a flagged
    trajectory) and forcing factors into the working array."""
    for i in range(nb):
        work[W_X, i] = state[offset + i, 0]
        work[W_V, i] = state[offset + i, 1]
        work[W_E, i] = _circuit_force(state[offset + i, 2], circuit)
        work[W_SIDE, i] = tallies[offset + i, SIDE]
        work[W_STORE, i] = tallies[offset + i, STORE_V]
        work[W_PUSH, i] = push[i]
        _set_step(work, i, step[i] if tallies[offset + i, FLAG] == FLAG_OK else 0.0, circuit)


@njit(cache=True)
def _store_block(work, nb, state, tallies, offset, circuit, quasi_static_gain, bridge):
    """Copy the block's states (x, ẋ, q), last sides and store voltages back."""
    for i in range(nb):
        state[offset + i, 0] = work[W_X, i]
        state[offset + i, 1] = work[W_V, i]
        state[offset + i, 2] = _output_variable(work[W_E, i], work[W_V, i], work[W_STORE, i],
                                                circuit, quasi_static_gain, bridge)
        tallies[offset + i, SIDE] = work[W_SIDE, i]
        tallies[offset + i, STORE_V] = work[W_STORE, i]


def new_tallies(n: int, store_V: np.ndarray | float = 0.0) -> np.ndarray:
    """Tallies (n, N_TALLIES) of n trajectories that have not run yet: ranges empty, sums 0,
    flags FLAG_OK, the store at `store_V` [V] (read only behind a bridge)."""
    tallies = np.zeros((n, N_TALLIES))
    tallies[:, X_MIN] = np.inf
    tallies[:, X_MAX] = -np.inf
    tallies[:, STORE_V] = store_V
    return tallies


def _store_start(model: ReducedModel, store_V: np.ndarray | float | None) -> np.ndarray | float:
    """The store voltages [V] a run starts from: `store_V`, or the model's store."""
    if store_V is not None:
        store_V = np.asarray(store_V, dtype=float)
        if not np.all(np.isfinite(store_V)) or np.any(store_V < 0.0):
            raise ValueError("store voltages must be finite and non-negative")
        return store_V.ravel() if store_V.ndim else float(store_V)
    return 0.0 if model.interface is None else model.interface.store_voltage_V


# -- tone ---------------------------------------------------------------------------------------
@njit(parallel=True, cache=True, fastmath=FAST_MATH)
def _tone_kernel(state, stiffness, even, circuit, constants, bridge, bounds, drive, schedule,
                 tallies, strobe, tangent):
    """Integrate a(t) = A cos(phase) over transient + window periods for every trajectory.

    state : (n, 3) [x, ẋ, q], advanced in place
    stiffness, even, circuit, constants, bridge : the parts of `RateTerms` (a parallel loop
        cannot take a record of records);  bounds : `Bounds`
    drive : (amplitude A (n), step h (n), cos of the phase at every half step of a period)
    schedule : (steps per period, transient periods, window periods, block size)
    tallies : (n, N_TALLIES) from `new_tallies`: the window's tallies (during the transient
        only the largest |x| is tracked, to guard the travel limit), the stored energy change
        and, with tangents, the summed log growth
    strobe : (3, n, P) x, ẋ, q at the start of each window period (P = 0: none kept)
    tangent : None, or (initial tangent vectors (n, 3), renormalised in place; component scales
        (n, 3)): the tangent equations run alongside, renormalised every period in the norm
        with those scales, and LOG_GROWTH sums ln of the growth over the window (Benettin et
        al. 1980)
    """
    amplitude, step, table = drive
    steps, transient, window_periods, block = schedule
    n = state.shape[0]
    with_strobe = strobe.shape[2] > 0
    for b in prange((n + block - 1) // block):
        lo = b * block
        nb = min(n, lo + block) - lo
        work = _new_work(N_WORK)
        _load_block(work, nb, state, tallies, lo, step[lo:lo + nb],
                    constants.forcing_ratio * amplitude[lo:lo + nb], circuit)
        if tangent is not None:
            for i in range(nb):
                work[W_TANGENT, i] = tangent[0][lo + i, 0]
                work[W_TANGENT + 1, i] = tangent[0][lo + i, 1]
                work[W_TANGENT + 2, i] = _circuit_force(tangent[0][lo + i, 2], circuit)
        samples = np.empty((3, STROBE_CHUNK, nb))  # strobe samples not yet written out
        for period in range(transient + window_periods):
            window = period >= transient
            if period == transient:
                for i in range(nb):
                    work[W_ENERGY0, i] = _with_store(
                        _stored_energy(work, i, stiffness, even, constants.storage), work, i,
                        bridge)
            if window and with_strobe:
                col = period - transient
                held = col % STROBE_CHUNK
                for i in range(nb):
                    samples[0, held, i] = work[W_X, i]
                    samples[1, held, i] = work[W_V, i]
                    samples[2, held, i] = _output_variable(
                        work[W_E, i], work[W_V, i], work[W_STORE, i], circuit,
                        constants.quasi_static_gain, bridge)
                if held == STROBE_CHUNK - 1 or col == window_periods - 1:
                    first = col - held
                    for i in range(nb):
                        for k in range(held + 1):
                            for r in range(3):
                                strobe[r, lo + i, first + k] = samples[r, k, i]
            _begin_segment(work, nb, window, bounds.saddle)
            _run_steps(work, nb, steps, table, None, stiffness, even, circuit, constants, bridge,
                       bounds, window, tangent is not None)
            _end_segment(work, nb, window, tallies, lo, bounds)
            if tangent is not None:
                for i in range(nb):
                    scale = tangent[1][lo + i]
                    dx = work[W_TANGENT, i]
                    dv = work[W_TANGENT + 1, i]
                    dq = _circuit_variable(work[W_TANGENT + 2, i], 0.0, circuit, 0.0)
                    length = math.sqrt((dx / scale[0]) ** 2 + (dv / scale[1]) ** 2
                                       + (dq / scale[2]) ** 2)
                    if work[W_KEEP, i] > 0.0 and window:
                        tallies[lo + i, LOG_GROWTH] += math.log(length)
                    if length > 0.0 and math.isfinite(length):
                        for r in range(3):
                            work[W_TANGENT + r, i] /= length
            if window:
                _commit(work, nb, steps, tallies, lo, circuit, constants, bridge)
        for i in range(nb):
            energy = _with_store(_stored_energy(work, i, stiffness, even, constants.storage),
                                 work, i, bridge)
            tallies[lo + i, ENERGY_CHANGE] = constants.mass * (energy - work[W_ENERGY0, i])
        if tangent is not None:
            for i in range(nb):
                tangent[0][lo + i, 0] = work[W_TANGENT, i]
                tangent[0][lo + i, 1] = work[W_TANGENT + 1, i]
                tangent[0][lo + i, 2] = _circuit_variable(work[W_TANGENT + 2, i], 0.0, circuit,
                                                          0.0)
        _store_block(work, nb, state, tallies, lo, circuit, constants.quasi_static_gain, bridge)


@lru_cache(maxsize=16)
def _phase_cos(steps_per_period: int, strobe_phase: float) -> np.ndarray:
    """cos of the forcing phase at every half step of a period that starts at `strobe_phase`
    (read-only, shared between runs)."""
    table = np.cos(strobe_phase + math.pi * np.arange(2 * steps_per_period + 1)
                   / steps_per_period)
    table.flags.writeable = False
    return table


@dataclass(frozen=True)
class ToneRun:
    """Raw output of `integrate_tone` (SI; q as volts or amperes), before averaging."""

    state: np.ndarray  # (n, 3): final x [m], ẋ [m/s], q
    strobe: np.ndarray  # (3, n, P): x, ẋ, q at the start of each window period
    tallies: np.ndarray  # (n, N_TALLIES): the window's tallies (columns X_MIN … LOG_GROWTH)
    step_s: np.ndarray  # (n,)
    circuit: CircuitTerms

    @property
    def flag(self) -> np.ndarray:
        """FLAG_OK / FLAG_TRAVEL / FLAG_DIVERGED per trajectory."""
        return self.tallies[:, FLAG].astype(np.int64)


def integrate_tone(model: ReducedModel, amplitude_mps2: np.ndarray, frequency_Hz: np.ndarray,
                   x0: np.ndarray, v0: np.ndarray, q0: np.ndarray | None, *,
                   transient_periods: int, window_periods: int, steps_per_period: int,
                   strobe_phase: float = 0.0, strobe: bool = True,
                   tangent: tuple[np.ndarray, np.ndarray] | None = None,
                   store_V: np.ndarray | float | None = None) -> ToneRun:
    """Run the compiled tone kernel (see `simulate_tone`); `tangent` = (initial tangent vectors
    (n, 3), component scales (n, 3)) also integrates the variational equations (used by
    `harvester.dynamics.lyapunov`; not behind a bridge, whose variational equations are not
    implemented).  `store_V` [V]: each trajectory's store voltage at the start (default: the
    model's store, `BridgeCircuit.store_voltage_V`)."""
    amp, freq, xs, vs, store = np.broadcast_arrays(*(
        np.asarray(a, dtype=float).ravel() for a in
        (amplitude_mps2, frequency_Hz, x0, v0, _store_start(model, store_V))))
    n = amp.size
    qs = np.zeros(n) if q0 is None else np.broadcast_to(np.asarray(q0, dtype=float).ravel(), n)
    if np.any(freq <= 0.0) or not np.all(np.isfinite(freq)):
        raise ValueError("tone frequencies must be positive and finite")
    if not (np.all(np.isfinite(amp)) and np.all(np.isfinite(xs)) and np.all(np.isfinite(vs))
            and np.all(np.isfinite(qs))):
        raise ValueError("amplitudes and initial states must be finite")
    if steps_per_period < 4 or transient_periods < 0 or window_periods < 1:
        raise ValueError("need steps_per_period ≥ 4, transient_periods ≥ 0, strobe_periods ≥ 1")
    if tangent is not None and model.interface is not None:
        raise ValueError("the tangent equations are not implemented behind a bridge")
    omega = 2.0 * math.pi * freq
    step = 2.0 * math.pi / (omega * steps_per_period)
    circuit = circuit_terms(model, float(step.max()))
    terms = rate_terms(model, circuit)
    wells = _wells(model)
    divergence = DIVERGENCE_FACTOR * _length_scale(model, float(np.max(np.abs(amp))), wells)
    if tangent is not None:
        tangent = tuple(np.array(np.broadcast_to(a, (n, 3)), dtype=float) for a in tangent)
    state = np.column_stack((xs, vs, np.zeros(n) if circuit.quasi_static else qs))
    run = ToneRun(state=state, strobe=np.empty((3, n, window_periods if strobe else 0)),
                  tallies=new_tallies(n, store), step_s=step,
                  circuit=circuit)
    _tone_kernel(run.state, *terms, _bounds(model, wells, divergence),
                 (np.ascontiguousarray(amp), step, _phase_cos(steps_per_period,
                                                              float(strobe_phase))),
                 (steps_per_period, transient_periods, window_periods, block_size(n)),
                 run.tallies, run.strobe, tangent)
    return run


@dataclass(frozen=True)
class ToneEnsemble:
    """Response of an ensemble to a tone a(t) = A cos ωt; arrays over trajectories (n,) or
    (n, strobe_periods).  q is the circuit variable: volts (piezo) or amperes (coil).

    Averages run over the strobe window (after the transient) and stop where a trajectory was
    flagged; `averaging_time_s` says how long each one ran.
    """

    amplitude_mps2: np.ndarray
    frequency_Hz: np.ndarray
    steps_per_period: int
    strobe_phase: float  # forcing phase ωt (mod 2π) of the initial state and of every sample
    strobe_x_m: np.ndarray  # (n, P): state at the start of each window period
    strobe_v_mps: np.ndarray
    strobe_q: np.ndarray
    x_m: np.ndarray  # final state
    v_mps: np.ndarray
    q: np.ndarray
    mean_square_q: np.ndarray  # [V²] or [A²]
    mean_load_power_W: np.ndarray
    mean_input_power_W: np.ndarray  # −m_f a ẋ
    mean_mech_loss_W: np.ndarray  # c ẋ²
    mean_elec_loss_W: np.ndarray  # h q²: everything the circuit dissipates (load and coil)
    stored_energy_change_J: np.ndarray  # over the window: ½mẋ² + U(x) + ½a_c q²
    hops: np.ndarray  # moves from beyond one well position to beyond the other, in the window
    zero_crossings: np.ndarray  # sign changes of x in the window
    max_abs_x_m: np.ndarray  # over the window
    x_min_m: np.ndarray  # lowest x over the window
    x_max_m: np.ndarray  # highest x over the window
    max_abs_v_mps: np.ndarray  # largest |ẋ| over the window
    averaging_time_s: np.ndarray
    flag: np.ndarray  # FLAG_OK / FLAG_TRAVEL / FLAG_DIVERGED
    quasi_static_circuit: bool
    # behind a bridge (zeros without one): mean_load_power_W is then what the store passes on
    store_V: np.ndarray | None = None  # store voltage at the end [V]
    mean_current_A: np.ndarray | None = None  # rectified current through the bridge
    mean_dc_power_W: np.ndarray | None = None  # into the store, V_s |i|
    mean_diode_loss_W: np.ndarray | None = None  # 2 V_D |i|
    conduction_share: np.ndarray | None = None  # share of the window the bridge conducts

    @property
    def n(self) -> int:
        return self.amplitude_mps2.size


def simulate_tone(model: ReducedModel, amplitude_mps2: np.ndarray, frequency_Hz: np.ndarray,
                  x0: np.ndarray, v0: np.ndarray, q0: np.ndarray | None = None, *,
                  transient_periods: int, strobe_periods: int, steps_per_period: int = 128,
                  strobe_phase: float = 0.0,
                  store_V: np.ndarray | float | None = None) -> ToneEnsemble:
    """Ensemble response to a base-acceleration tone a(t) = A cos ωt [m/s²], by RK4.

    Each trajectory starts at t0 = strobe_phase/ω from (x0 [m], v0 [m/s], q0 [V or A]) and
    takes `steps_per_period` steps of 2π/(ω·steps_per_period) per forcing period.  After
    `transient_periods` it is sampled at the start of each of `strobe_periods` periods, all at
    forcing phase `strobe_phase`, and the window's power and hop tallies are kept.

    Arguments broadcast to one trajectory axis.  A hop is a move from beyond one well position
    (|x| ≥ x_well on that side) to beyond the other; a monostable model has none.  Behind a
    bridge each trajectory's store starts at `store_V` [V] (default: the model's store).
    """
    run = integrate_tone(model, amplitude_mps2, frequency_Hz, x0, v0, q0,
                         transient_periods=transient_periods, window_periods=strobe_periods,
                         steps_per_period=steps_per_period, strobe_phase=strobe_phase,
                         store_V=store_V)
    t = run.tallies
    n = t.shape[0]
    amp, freq = (np.broadcast_to(np.asarray(a, dtype=float).ravel(), n).copy()
                 for a in (amplitude_mps2, frequency_Hz))
    time = t[:, TIME]
    ran = time > 0.0

    def mean(column: int) -> np.ndarray:
        return np.divide(t[:, column], time, out=np.zeros(n), where=ran)

    return ToneEnsemble(
        amplitude_mps2=amp, frequency_Hz=freq, steps_per_period=steps_per_period,
        strobe_phase=float(strobe_phase), strobe_x_m=run.strobe[0],
        strobe_v_mps=run.strobe[1], strobe_q=run.strobe[2], x_m=run.state[:, 0].copy(),
        v_mps=run.state[:, 1].copy(), q=run.state[:, 2].copy(), mean_square_q=mean(Q2_TIME),
        mean_load_power_W=mean(LOAD_ENERGY), mean_input_power_W=mean(INPUT_WORK),
        mean_mech_loss_W=mean(MECH_LOSS), mean_elec_loss_W=mean(ELEC_LOSS),
        stored_energy_change_J=np.where(ran, t[:, ENERGY_CHANGE], 0.0),
        hops=t[:, HOPS].astype(np.int64), zero_crossings=t[:, CROSSINGS].astype(np.int64),
        max_abs_x_m=t[:, PEAK].copy(), x_min_m=np.where(ran, t[:, X_MIN], 0.0),
        x_max_m=np.where(ran, t[:, X_MAX], 0.0), max_abs_v_mps=t[:, SPEED].copy(),
        averaging_time_s=time.copy(), flag=run.flag,
        quasi_static_circuit=run.circuit.quasi_static, store_V=t[:, STORE_V].copy(),
        mean_current_A=mean(CHARGE), mean_dc_power_W=mean(DC_ENERGY),
        mean_diode_loss_W=mean(DIODE_LOSS), conduction_share=mean(CONDUCTION_TIME),
    )


# -- sampled input (random excitation) ----------------------------------------------------------
@njit(parallel=True, cache=True, fastmath=FAST_MATH)
def _input_kernel(state, stiffness, even, circuit, constants, bridge, bounds, accel, dt, layout,
                  tallies):
    """Advance state (n, 3) [x, ẋ, q] in place through accel (n, 2m+1), the base acceleration
    sampled at half steps of dt, and add to `tallies` (n, N_TALLIES); the model as in
    `_tone_kernel`.

    layout = (steps per chunk, block size).  A trajectory has settled in a well when
    ½ẋ² + U(x)/m is below `bounds.settle_low`/`settle_high` on that side of the saddle.
    """
    chunk, block = layout
    n = state.shape[0]
    m_steps = (accel.shape[1] - 1) // 2
    ratio = constants.forcing_ratio
    for b in prange((n + block - 1) // block):
        lo = b * block
        nb = min(n, lo + block) - lo
        work = _new_work(N_WORK)
        samples = np.empty((2 * chunk + 1, nb))
        _load_block(work, nb, state, tallies, lo, np.full(nb, dt), np.full(nb, ratio), circuit)
        for s0 in range(0, m_steps, chunk):
            steps = min(chunk, m_steps - s0)
            # row by row, so that each cache line of `accel` serves eight consecutive samples
            for j in range(2 * steps + 1):
                for i in range(nb):
                    samples[j, i] = accel[lo + i, 2 * s0 + j]
            _begin_segment(work, nb, True, bounds.saddle)
            _run_steps(work, nb, steps, None, samples, stiffness, even, circuit, constants, bridge,
                       bounds, True, False)
            _end_segment(work, nb, True, tallies, lo, bounds)
            _commit(work, nb, steps, tallies, lo, circuit, constants, bridge)
        _store_block(work, nb, state, tallies, lo, circuit, constants.quasi_static_gain, bridge)


@dataclass(frozen=True)
class InputStats:
    """Per-trajectory tallies of `advance_with_input`, updated in place block after block.

    Integrals are over the time each trajectory ran unflagged.  q is volts (piezo) or amperes
    (coil).  The numbers live in `tallies` (n, N_TALLIES), columns X_MIN … FLAG; the fields
    below read them (floats are views, the counts copies as integers).
    """

    tallies: np.ndarray

    @property
    def n(self) -> int:
        return self.tallies.shape[0]

    @property
    def energy_load_J(self) -> np.ndarray:  # ∫ load power dt
        return self.tallies[:, LOAD_ENERGY]

    @property
    def q2_time(self) -> np.ndarray:  # ∫q² dt [V²·s or A²·s]
        return self.tallies[:, Q2_TIME]

    @property
    def time_total_s(self) -> np.ndarray:
        return self.tallies[:, TIME]

    @property
    def input_work_J(self) -> np.ndarray:  # ∫ −m_f a ẋ dt
        return self.tallies[:, INPUT_WORK]

    @property
    def mech_loss_J(self) -> np.ndarray:  # ∫ c ẋ² dt
        return self.tallies[:, MECH_LOSS]

    @property
    def elec_loss_J(self) -> np.ndarray:  # ∫ h q² dt (load and coil resistance)
        return self.tallies[:, ELEC_LOSS]

    @property
    def hops(self) -> np.ndarray:  # changes of settled well
        return self.tallies[:, HOPS].astype(np.int64)

    @property
    def settled_well(self) -> np.ndarray:  # −1 / 0 (not yet settled) / +1
        return self.tallies[:, SIDE].astype(np.int64)

    @property
    def time_in_well_pos_s(self) -> np.ndarray:  # time with x above the saddle
        return self.tallies[:, TIME_ABOVE]

    @property
    def time_in_well_neg_s(self) -> np.ndarray:  # time with x below the saddle
        return self.tallies[:, TIME_BELOW]

    @property
    def max_abs_x_m(self) -> np.ndarray:
        return self.tallies[:, PEAK]

    @property
    def x_min_m(self) -> np.ndarray:  # lowest x (+inf before any committed step)
        return self.tallies[:, X_MIN]

    @property
    def x_max_m(self) -> np.ndarray:  # highest x (−inf before any committed step)
        return self.tallies[:, X_MAX]

    @property
    def max_abs_v_mps(self) -> np.ndarray:  # largest |ẋ|
        return self.tallies[:, SPEED]

    @property
    def flag(self) -> np.ndarray:  # FLAG_OK / FLAG_TRAVEL / FLAG_DIVERGED
        return self.tallies[:, FLAG].astype(np.int64)

    @property
    def store_V(self) -> np.ndarray:  # behind a bridge: the store's voltage now
        return self.tallies[:, STORE_V]

    @property
    def charge_C(self) -> np.ndarray:  # ∫|i_bridge| dt
        return self.tallies[:, CHARGE]

    @property
    def dc_energy_J(self) -> np.ndarray:  # ∫V_s |i_bridge| dt: into the store
        return self.tallies[:, DC_ENERGY]

    @property
    def diode_loss_J(self) -> np.ndarray:  # ∫2 V_D |i_bridge| dt
        return self.tallies[:, DIODE_LOSS]

    @property
    def conduction_time_s(self) -> np.ndarray:  # time with the bridge conducting
        return self.tallies[:, CONDUCTION_TIME]


def new_input_stats(n: int, model: ReducedModel | None = None,
                    store_V: np.ndarray | float | None = None) -> InputStats:
    """Zeroed tallies for n trajectories; behind a bridge (`model`) the store starts at
    `store_V` [V], by default at the model's store voltage."""
    return InputStats(new_tallies(n, 0.0 if model is None else _store_start(model, store_V)))


def restarted_input_stats(stats: InputStats) -> InputStats:
    """Fresh tallies that carry on the flags, settled wells and store voltages of `stats`
    (after a transient)."""
    fresh = new_input_stats(stats.n)
    fresh.tallies[:, FLAG] = stats.tallies[:, FLAG]
    fresh.tallies[:, SIDE] = stats.tallies[:, SIDE]
    fresh.tallies[:, STORE_V] = stats.tallies[:, STORE_V]
    return fresh


def advance_with_input(model: ReducedModel, state: np.ndarray, accel: np.ndarray, dt: float,
                       stats: InputStats, settle_fraction: float = 0.5) -> None:
    """Advance an ensemble m = (accel.shape[1] − 1)/2 RK4 steps of `dt` [s] under sampled base
    acceleration, in place, and add to its tallies.

    Parameters
    ----------
    state : (n, 3) float64 C-contiguous [x [m], ẋ [m/s], q [V or A]], advanced in place.  When
        the circuit is quasi-static (see module notes) q is output only (q = g ẋ/h).
    accel : (n, 2m+1) base acceleration [m/s²] at t0 + j·dt/2; the last column is the first of
        the next block.
    stats : tallies from `new_input_stats` (with the model, behind a bridge, so that the
        store starts at its voltage), updated in place.
    settle_fraction : a trajectory has settled in well ±1 when sign(x) = ±1 and
        ½mẋ² + U(x) − U(0) < −settle_fraction·ΔU (ΔU the barrier); a hop is a change of settled
        well, so recrossings near the barrier top are not counted (Hänggi, Talkner & Borkovec
        1990, Rev. Mod. Phys. 62:251, on counting escapes).
    """
    if state.ndim != 2 or state.shape[1] != 3 or state.dtype != np.float64 \
            or not state.flags.c_contiguous:
        raise ValueError("state must be a C-contiguous float64 array of shape (n, 3)")
    accel = np.ascontiguousarray(accel, dtype=float)
    if accel.shape[0] != state.shape[0] or accel.shape[1] < 3 or accel.shape[1] % 2 == 0:
        raise ValueError("accel must have shape (n, 2m+1) with m ≥ 1")
    if not dt > 0.0:
        raise ValueError("dt must be positive")
    circuit = circuit_terms(model, dt)
    wells = _wells(model)
    a_max = max(float(accel.max()), -float(accel.min()))
    a_max = a_max if math.isfinite(a_max) else 0.0  # a NaN or infinite sample diverges anyway
    divergence = DIVERGENCE_FACTOR * _length_scale(model, a_max, wells)
    n = state.shape[0]
    _input_kernel(state, *rate_terms(model, circuit),
                  _bounds(model, wells, divergence, settle_fraction), accel, dt,
                  (INPUT_CHUNK_STEPS, block_size(n)), stats.tallies)
