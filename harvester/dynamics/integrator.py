"""Compiled ensemble integrator for the reduced model: fixed-step classical Runge–Kutta (RK4).

    m ẍ + c ẋ + F(x) + g q = −m_f a(t),      a_c q̇ = g ẋ − h q          (ReducedModel)

Many trajectories (initial conditions × amplitudes × frequencies, flattened into one axis) are
advanced together.  The trajectory axis is cut into blocks of at most 256 whose working data
stay in the L1 cache; blocks run in parallel (`prange`) with the time loop outside, and each
step is one loop over the block's trajectories that does the whole RK4 step (all four stages of
x, ẋ and the circuit) and the tallies in registers; the compiler vectorises it across
trajectories.  The loop tallies the state a step starts from before advancing it, so the tally
arithmetic does not wait for the RK4 stages; each period's (or input chunk's) last state is
tallied after its loop.
The restoring-force series is a tuple, so each number of terms compiles to its own unrolled
kernel.  Inside the kernels the circuit state is carried as its force on the beam per unit mass,
e = (g/m) q, which saves a multiplication per stage; the drivers see q.

Two drivers share the RK4 step:

* `simulate_tone`: a(t) = A cos ωt.  Every trajectory takes the same number of steps per forcing
  period, so the forcing phase at each half step is the same for all of them and cos is read from
  one table (no trigonometry in the loop).  The run starts at phase `strobe_phase`, so the
  stroboscopic samples (once per period, after a transient) fall exactly on step boundaries.
* `advance_with_input`: a(t) sampled at half steps (random excitation), advanced block by block
  with running per-trajectory tallies (`InputStats`).

A circuit whose time constant a_c/h is shorter than a step is treated as quasi-static
(q = g ẋ/h, a viscous damper g²/h): explicit RK4 would be unstable on it, and the error of the
quasi-static circuit is of order ω a_c/h < ω dt.  `a_c = 0` (resistive coil) is always that case.

Trajectories whose |x| passes the model's `travel_limit_m`, or a divergence bound (1000 × the
model's length scale), or that turn non-finite, are rolled back to the start of the period (or
input chunk) in which that happened, flagged and frozen; their tallies stop there.  Results are
never NaN: read the flag.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields
from functools import lru_cache, wraps

import numba
import numpy as np
from numba import njit, prange

from harvester.model import PiezoCircuit, ReducedModel, Wells, analyse_wells, force_slope

FLAG_OK = 0
FLAG_TRAVEL = 1  # |x| passed the model's travel limit
FLAG_DIVERGED = 2  # non-finite, or beyond the divergence bound

DIVERGENCE_FACTOR = 1.0e3  # divergence bound = this × the model's length scale

INPUT_CHUNK_STEPS = 32  # sampled input is transposed into cache-sized chunks of this many steps
# strobe samples are gathered per block and written out this many at a time: a whole cache
# line of each trajectory's row instead of one number
STROBE_CHUNK = 8

# The compiler may fuse multiply-adds in the RK4 arithmetic.  It may not reorder sums: numba's
# cached copy of a reordered kernel rounds differently from the freshly compiled one, so a
# first run and a later run would differ in the last bit, and chaotic ensembles amplify that.
# Nor may it assume away NaN or infinity, because diverging trajectories are caught by
# isfinite checks.
FAST_MATH = {"contract", "nsz", "arcp"}

# A block's working array: one row per quantity, one column per trajectory, BLOCK wide, so that
# the compiler sees the rows at fixed distances and vectorises the fused loop without run-time
# aliasing checks.  Rows S_*: the step constants (`_set_step_terms`; a zero column freezes a
# trajectory).  Rows W_*: the state x, ẋ, e; the forcing factor (m_f/m)·A; the peak |x|; the hop
# side or settled well (−1/0/+1); the previous step's x; whether the period's tallies count
# (`_check_and_freeze`); the period's (or input chunk's) sums of ẋ², e², a·ẋ (cos·ẋ for a tone),
# hops, zero crossings, steps with x > 0 and steps with x < 0; the period's (or chunk's) lowest
# and highest x and largest |ẋ|.
S_HALF, S_FULL, S_SIXTH = 0, 1, 2  # h/2, h, h/6
S_CIRCUIT_HALF = 3  # feedback·h/2 and, in the next row, decay·h/2 (`RateTerms.circuit`)
S_CIRCUIT_FULL = 5  # feedback·h, decay·h
S_CIRCUIT_SIXTH = 7  # feedback·h/6, decay·h/6
N_STEP_TERMS = 9
W_X, W_V, W_E, W_PUSH, W_PEAK, W_SIDE, W_PREVIOUS_X, W_KEEP = range(N_STEP_TERMS,
                                                                    N_STEP_TERMS + 8)
W_V2, W_E2, W_AV, W_HOPS, W_CROSSINGS, W_POSITIVE, W_NEGATIVE = range(W_KEEP + 1, W_KEEP + 8)
W_LOW, W_HIGH, W_SPEED = W_NEGATIVE + 1, W_NEGATIVE + 2, W_NEGATIVE + 3
N_WORK = W_SPEED + 1
BLOCK = 256  # most trajectories per block (`block_size`), and the working array's width


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
    otherwise it is replaced by its quasi-static limit q = g ẋ/h (module notes).
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
    if t is None or math.isinf(model.load_ohm) or model.load_ohm == 0.0:
        return 0.0
    return 1.0 / model.load_ohm if isinstance(t, PiezoCircuit) else model.load_ohm


@dataclass(frozen=True)
class RateTerms:
    """The equations of motion per unit mass, as the compiled kernels read them:

        v̇ = −damping·v − x Σ_j stiffness_j x^(2j) − e − forcing_ratio·a,
        ė = feedback·v − decay·e,

    with e = (g/m) q the circuit's force per unit mass and `circuit` = (coupling, feedback,
    decay) = (g/m, g²/(m a_c), h/a_c), or None when the circuit has no state (none at all, or a
    quasi-static one folded into the damping; then q = quasi_static_gain·v and e = 0).
    """

    stiffness: tuple[float, ...]  # k_j/m [1/s², 1/(m² s²), …]: F(x)/m
    slope: tuple[float, ...]  # (2j+1) k_j/m: F'(x)/m
    potential: tuple[float, ...]  # k_j/((2j+2) m): U(x)/(m x²)
    damping: float  # c/m, plus g²/(h m) when the circuit is quasi-static [1/s]
    circuit: tuple[float, float, float] | None
    storage: float  # a_c m/g²: the circuit stores ½·storage·e² per unit mass (½ a_c q²)
    quasi_static_gain: float  # g/h when the circuit is quasi-static, else 0
    forcing_ratio: float  # m_f/m


# Each number of stiffness terms compiles its own kernels (several seconds each, once per
# machine), so series are padded with zeros to an even length: fitted forces of 3-8 terms share
# three specialisations, at the price of at most one idle multiply-add per force evaluation.
def kernel_terms(n: int) -> int:
    """Terms the kernels evaluate for a series of n: n rounded up to an even number (≥ 2)."""
    return max(2, n + n % 2)


@_per_model
def rate_terms(model: ReducedModel, circuit: CircuitTerms) -> RateTerms:
    """The kernels' form of `model` with the circuit as decided by `circuit_terms`; trailing
    zero stiffness terms are dropped, then zeros appended up to an even number of terms
    (`kernel_terms`)."""
    m = model.mass_kg
    k = np.trim_zeros(np.asarray(model.stiffness, dtype=float), "b")
    k = np.pad(k, (0, kernel_terms(k.size) - k.size))
    j = np.arange(k.size)
    damping = model.damping_N_s_per_m
    storage = 0.0
    if circuit.quasi_static:
        damping += circuit.coupling**2 / circuit.loss
        state, gain = None, circuit.coupling / circuit.loss
    else:
        coupling = circuit.coupling / m
        state = (coupling, coupling * circuit.coupling / circuit.lag, circuit.loss / circuit.lag)
        gain = 0.0
        storage = circuit.lag * m / circuit.coupling**2
    return RateTerms(
        stiffness=tuple(float(c) for c in k / m),
        slope=tuple(float(c) for c in (2 * j + 1) * k / m),
        potential=tuple(float(c) for c in k / ((2 * j + 2) * m)),
        damping=damping / m, circuit=state, storage=storage, quasi_static_gain=gain,
        forcing_ratio=model.forcing_mass_kg / m,
    )


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
    """Highest angular frequency the steps must resolve [rad/s]: √(F'(2 x_ref)/m) with x_ref
    the well position (or √|k1/k3| for a monostable model), plus the open-circuit
    stiffening g²/a_c."""
    wells = analyse_wells(model)
    if wells.regime == "bistable":
        x_ref = max(wells.wells_m)
    else:
        x_ref = math.sqrt(abs(model.k1 / model.k3)) if model.k3 != 0.0 else 0.0
    slope = max(force_slope(model.stiffness, 2.0 * x_ref), abs(model.k1))
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
    """Trajectories per block: 256 (a cache-sized block), fewer so that every thread has work."""
    threads = numba.get_num_threads()
    per_thread = math.ceil(n / max(threads, 1))
    return int(max(8, min(BLOCK, 8 * math.ceil(per_thread / 8))))


# -- compiled pieces shared by every driver -----------------------------------------------------
# Scalar functions of one trajectory; the kernels call them inside their loop over a block's
# trajectories, and the loop is vectorised only if they are inlined into it first.  So the
# RK4 pieces are inlined by numba (inline="always") rather than left to LLVM's inliner, which
# keeps an RK4 step with a 4-term force out of line (over its size threshold) until after
# loop vectorisation: the loop then stayed scalar and ran 8× slower.
@njit(cache=True, fastmath=FAST_MATH)
def _even_series(x2, coefficients):
    """Σ_j c_j x2^j by Horner's rule; `coefficients` is a tuple, so the loop unrolls."""
    last = len(coefficients) - 1
    total = coefficients[last]
    for j in range(last - 1, -1, -1):
        total = total * x2 + coefficients[j]
    return total


@njit(cache=True, fastmath=FAST_MATH)
def _acceleration(x, v, e, drive, stiffness, damping, circuit):
    """v̇ = −(c/m) v − F(x)/m − e − drive (`RateTerms`), with drive = (m_f/m) a."""
    restoring = x * _even_series(x * x, stiffness)
    if circuit is None:
        return -damping * v - restoring - drive
    return -damping * v - e - restoring - drive


@njit(cache=True, fastmath=FAST_MATH)
def _circuit_update(e, v_j, e_j, feedback_step, decay_step, circuit):
    """e + feedback_step·v_j − decay_step·e_j, the circuit's linear RK4 update; e without a
    circuit state."""
    if circuit is None:
        return e
    return e + feedback_step * v_j - decay_step * e_j


@njit(cache=True)
def _set_step_terms(work, i, h, circuit):
    """Column i of the step constants (rows S_*) for a step of h [s]; h = 0 freezes."""
    work[S_HALF, i] = 0.5 * h
    work[S_FULL, i] = h
    work[S_SIXTH, i] = h / 6.0
    if circuit is not None:
        for row, fraction in ((S_CIRCUIT_HALF, 0.5), (S_CIRCUIT_FULL, 1.0),
                              (S_CIRCUIT_SIXTH, 1.0 / 6.0)):
            work[row, i] = fraction * circuit[1] * h
            work[row + 1, i] = fraction * circuit[2] * h


@njit(cache=True, fastmath=FAST_MATH, inline="always")
def _rk4(x, v, e, work, i, drive0, drive_mid, drive1, stiffness, damping, circuit):
    """One classical RK4 step of trajectory i from (x, ẋ, e), with its step constants in column
    i of `work` (rows S_*) and the drives at t, t + h/2 and t + h.

    Stage j sits at (x_j, v_j, e_j), (x_1, v_1, e_1) = (x, ẋ, e), with acceleration a_j.  The
    circuit equation is linear, so its stages are updates of e:  e_(j+1) = e + c_(j+1) h
    (feedback·v_j − decay·e_j), and the step ends at e + (h/6)(feedback Σ w_j v_j − decay
    Σ w_j e_j), where Σ w_j v_j (weights 1, 2, 2, 1) is the sum that also advances x.
    """
    half = work[S_HALF, i]
    feedback_half = work[S_CIRCUIT_HALF, i]
    decay_half = work[S_CIRCUIT_HALF + 1, i]
    a1 = _acceleration(x, v, e, drive0, stiffness, damping, circuit)
    x2 = x + half * v
    v2 = v + half * a1
    e2 = _circuit_update(e, v, e, feedback_half, decay_half, circuit)
    a2 = _acceleration(x2, v2, e2, drive_mid, stiffness, damping, circuit)
    x3 = x + half * v2
    v3 = v + half * a2
    e3 = _circuit_update(e, v2, e2, feedback_half, decay_half, circuit)
    a3 = _acceleration(x3, v3, e3, drive_mid, stiffness, damping, circuit)
    full = work[S_FULL, i]
    x4 = x + full * v3
    v4 = v + full * a3
    e4 = _circuit_update(e, v3, e3, work[S_CIRCUIT_FULL, i], work[S_CIRCUIT_FULL + 1, i],
                         circuit)
    a4 = _acceleration(x4, v4, e4, drive1, stiffness, damping, circuit)
    sum_v = v + 2.0 * (v2 + v3) + v4
    sixth = work[S_SIXTH, i]
    return (x + sixth * sum_v, v + sixth * (a1 + 2.0 * (a2 + a3) + a4),
            _circuit_update(e, sum_v, e + 2.0 * (e2 + e3) + e4, work[S_CIRCUIT_SIXTH, i],
                            work[S_CIRCUIT_SIXTH + 1, i], circuit))


@njit(cache=True, fastmath=FAST_MATH)
def _rates(x, v, e, drive, stiffness, damping, circuit):
    """(ẋ, v̇, ė) of the reduced model per unit mass (`RateTerms`)."""
    a = _acceleration(x, v, e, drive, stiffness, damping, circuit)
    if circuit is None:
        return v, a, 0.0
    return v, a, circuit[1] * v - circuit[2] * e


@njit(cache=True, fastmath=FAST_MATH)
def _tangent_rates(x, dx, dv, de, slope, damping, circuit):
    """Variational equations at position x:  δv̇ = −(c/m) δv − (F'(x)/m) δx − δe,
    δė = feedback·δv − decay·δe."""
    stiffening = _even_series(x * x, slope) * dx
    if circuit is None:
        return dv, -damping * dv - stiffening, 0.0
    return dv, -damping * dv - stiffening - de, circuit[1] * dv - circuit[2] * de


@njit(cache=True, fastmath=FAST_MATH, inline="always")
def _tangent_rk4(x, v, e, dx, dv, de, work, i, drive0, drive_mid, drive1, stiffness, slope,
                 damping, circuit):
    """The RK4 step of `_rk4` applied to a tangent vector (δx, δẋ, δe) at the state's own stage
    positions, which it recomputes from (x, ẋ, e); returns the tangent vector after the step."""
    h = work[S_FULL, i]
    half = work[S_HALF, i]
    ax, av, ae = _rates(x, v, e, drive0, stiffness, damping, circuit)
    tax, tav, tae = _tangent_rates(x, dx, dv, de, slope, damping, circuit)
    x2, v2, e2 = x + half * ax, v + half * av, e + half * ae
    bx, bv, be = _rates(x2, v2, e2, drive_mid, stiffness, damping, circuit)
    tbx, tbv, tbe = _tangent_rates(x2, dx + half * tax, dv + half * tav, de + half * tae, slope,
                                   damping, circuit)
    x3, v3, e3 = x + half * bx, v + half * bv, e + half * be
    cx = _rates(x3, v3, e3, drive_mid, stiffness, damping, circuit)[0]
    tcx, tcv, tce = _tangent_rates(x3, dx + half * tbx, dv + half * tbv, de + half * tbe, slope,
                                   damping, circuit)
    tdx, tdv, tde = _tangent_rates(x + h * cx, dx + h * tcx, dv + h * tcv, de + h * tce, slope,
                                   damping, circuit)
    sixth = work[S_SIXTH, i]
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
def _new_work():
    """A zeroed working array (N_WORK, BLOCK) whose rows start on 64-byte boundaries, so that no
    vector load of a row straddles two cache lines (allocations are only 32-byte aligned)."""
    raw = np.zeros((N_WORK, BLOCK + 8))
    skip = (-raw.ctypes.data) % 64 // 8
    return raw[:, skip:skip + BLOCK]


@njit(cache=True)
def _check_and_freeze(work, start, flag, offset, n, travel_limit, divergence_limit):
    """End of a period/chunk: set row W_KEEP to 1 where the period's tallies count, and flag the
    trajectories of the block that left the trusted range, roll them back to start[0..2] =
    (x, ẋ, e) and freeze them (zero step constants).
    """
    failed = 0
    for i in range(n):
        peak = work[W_PEAK, i]
        trusted = (math.isfinite(work[W_X, i]) & math.isfinite(work[W_V, i])
                   & math.isfinite(work[W_E, i]) & (peak <= travel_limit)
                   & (peak <= divergence_limit))
        running = flag[offset + i] == FLAG_OK
        work[W_KEEP, i] = 1.0 if running & trusted else 0.0
        failed += running & ~trusted
    if failed == 0:
        return
    for i in range(n):
        if work[W_KEEP, i] > 0.0 or flag[offset + i] != FLAG_OK:
            continue
        finite = (math.isfinite(work[W_X, i]) and math.isfinite(work[W_V, i])
                  and math.isfinite(work[W_E, i]))
        flag[offset + i] = FLAG_TRAVEL if finite and work[W_PEAK, i] <= divergence_limit \
            else FLAG_DIVERGED
        work[W_X, i] = start[0, i]
        work[W_V, i] = start[1, i]
        work[W_E, i] = start[2, i]
        work[:N_STEP_TERMS, i] = 0.0


@njit(cache=True, fastmath=FAST_MATH, inline="always")
def _advance(work, i, drive0, drive_mid, drive1, stiffness, damping, circuit):
    """One RK4 step of trajectory i of a block, in place in its working array."""
    work[W_X, i], work[W_V, i], work[W_E, i] = _rk4(work[W_X, i], work[W_V, i], work[W_E, i],
                                                    work, i, drive0, drive_mid, drive1,
                                                    stiffness, damping, circuit)


@njit(cache=True, fastmath=FAST_MATH, inline="always")
def _track_peak(work, i):
    """Peak |x| of trajectory i, with its current state."""
    work[W_PEAK, i] = max(work[W_PEAK, i], abs(work[W_X, i]))


# -- tone ---------------------------------------------------------------------------------------
@njit(cache=True)
def _stored_energy(work, i, potential, storage):
    """½ẋ² + U(x)/m + ½·storage·e² of trajectory i: its stored energy per unit mass."""
    x = work[W_X, i]
    v = work[W_V, i]
    e = work[W_E, i]
    return 0.5 * v * v + x * x * _even_series(x * x, potential) + 0.5 * storage * e * e


@njit(cache=True, fastmath=FAST_MATH, inline="always")
def _tally_motion(work, i, drive_now):
    """The tallies both drivers keep of trajectory i's current state: lowest and highest x,
    largest |ẋ|, and the sums of ẋ², e² and drive·ẋ (drive: cos of the tone's phase, or the
    sampled base acceleration)."""
    x = work[W_X, i]
    v = work[W_V, i]
    e = work[W_E, i]
    work[W_LOW, i] = min(work[W_LOW, i], x)
    work[W_HIGH, i] = max(work[W_HIGH, i], x)
    work[W_SPEED, i] = max(work[W_SPEED, i], abs(v))
    work[W_V2, i] += v * v
    work[W_E2, i] += e * e
    work[W_AV, i] += drive_now * v


@njit(cache=True, fastmath=FAST_MATH, inline="always")
def _tally_tone_state(work, i, cos_now, hop_reach):
    """Add trajectory i's current state to its tallies: `_tally_motion`, a hop when x reaches
    beyond the well position opposite the last one it reached, and a zero crossing when x
    changed sign since the previous state."""
    x = work[W_X, i]
    was_x = work[W_PREVIOUS_X, i]
    work[W_PREVIOUS_X, i] = x
    _tally_motion(work, i, cos_now)
    was = work[W_SIDE, i]
    now = 1.0 if x >= hop_reach else (-1.0 if x <= -hop_reach else was)
    work[W_SIDE, i] = now
    work[W_HOPS, i] += 1.0 if now * was < 0.0 else 0.0
    work[W_CROSSINGS, i] += 1.0 if x * was_x < 0.0 else 0.0


@njit(parallel=True, cache=True, fastmath=FAST_MATH)
def _tone_kernel(x0, v0, q0, amplitude, step, phase_cos, stiffness, slope, potential, damping,
                 circuit, storage, forcing_ratio, quasi_static_gain, steps_per_period,
                 transient_periods, window_periods, travel_limit, divergence_limit, hop_reach,
                 block, tangent, scale, strobe_x, strobe_v, strobe_q, sums, counts, peak_out,
                 low_out, high_out, speed_out, energy_change, log_growth, flag, mass):
    """Integrate a(t) = A cos(phase) over transient + window periods for every trajectory.

    sums[:, 0..2] = Σ ẋ², Σ q², Σ a ẋ over the window's steps; counts[:, 0..2] = hops, zero
    crossings and committed steps in the window; peak_out = max |x|, low_out and high_out =
    min and max x, speed_out = max |ẋ| in the window (all 0 for a trajectory with no committed
    period);
    energy_change = mass × stored energy per unit mass (`_stored_energy`) at the end minus at
    the window's start.  During the transient only the peak is tracked (it guards the travel
    limit).  Strobe samples are kept when strobe_x has columns.  When `tangent` (n, 3) is
    given, the tangent equations run alongside from it, renormalised every period in the norm
    with component scales `scale`, and log_growth sums ln of the growth over the window
    (Benettin et al. 1980).
    """
    n = x0.size
    with_strobe = strobe_x.shape[1] > 0
    n_blocks = (n + block - 1) // block
    for b in prange(n_blocks):
        lo = b * block
        nb = min(n, lo + block) - lo
        work = _new_work()
        for i in range(nb):
            _set_step_terms(work, i, step[lo + i], circuit)
            work[W_X, i] = x0[lo + i]
            work[W_V, i] = v0[lo + i]
            work[W_E, i] = _circuit_force(q0[lo + i], circuit)
            work[W_PUSH, i] = forcing_ratio * amplitude[lo + i]
        start = np.empty((3, nb))  # state at the start of the period, for a rollback
        samples = np.empty((3, STROBE_CHUNK, nb))  # strobe samples not yet written out
        peak_run = np.zeros(nb)
        low_run = np.full(nb, np.inf)
        high_run = np.full(nb, -np.inf)
        speed_run = np.zeros(nb)
        # committed Σẋ², Σq², Σaẋ, hops, crossings, steps, ln growth; the window's first stored
        # energy
        total = np.zeros((8, nb))
        if tangent is not None:
            dx = tangent[lo:lo + nb, 0].copy()
            dv = tangent[lo:lo + nb, 1].copy()
            de = np.empty(nb)
            for i in range(nb):
                de[i] = _circuit_force(tangent[lo + i, 2], circuit)
        for period in range(transient_periods + window_periods):
            window = period >= transient_periods
            start[:, :] = work[W_X:W_E + 1, :nb]
            work[W_PEAK, :nb] = 0.0
            if period == transient_periods:
                for i in range(nb):
                    total[7, i] = _stored_energy(work, i, potential, storage)
            if window:
                work[W_PREVIOUS_X, :nb] = work[W_X, :nb]
                work[W_LOW, :nb] = work[W_X, :nb]
                work[W_HIGH, :nb] = work[W_X, :nb]
                work[W_SPEED, :nb] = 0.0
                work[W_V2:W_CROSSINGS + 1, :nb] = 0.0
                if with_strobe:
                    col = period - transient_periods
                    held = col % STROBE_CHUNK
                    for i in range(nb):
                        samples[0, held, i] = work[W_X, i]
                        samples[1, held, i] = work[W_V, i]
                        samples[2, held, i] = _circuit_variable(work[W_E, i], work[W_V, i],
                                                                circuit, quasi_static_gain)
                    if held == STROBE_CHUNK - 1 or col == window_periods - 1:
                        first = col - held
                        for i in range(nb):
                            for k in range(held + 1):
                                strobe_x[lo + i, first + k] = samples[0, k, i]
                                strobe_v[lo + i, first + k] = samples[1, k, i]
                                strobe_q[lo + i, first + k] = samples[2, k, i]
            # Each step's loop over the block tallies the state the step starts from, then
            # advances it: the tallies do not wait for the RK4 arithmetic, so the two overlap.
            # The period's first state belongs to the previous period; its last is added below.
            for s in range(steps_per_period):
                c0 = phase_cos[2 * s]
                cm = phase_cos[2 * s + 1]
                c1 = phase_cos[2 * s + 2]
                if tangent is not None:
                    for i in range(nb):
                        push = work[W_PUSH, i]
                        dx[i], dv[i], de[i] = _tangent_rk4(
                            work[W_X, i], work[W_V, i], work[W_E, i], dx[i], dv[i], de[i], work,
                            i, push * c0, push * cm, push * c1, stiffness, slope, damping,
                            circuit)
                if s == 0:
                    for i in range(nb):
                        push = work[W_PUSH, i]
                        _advance(work, i, push * c0, push * cm, push * c1, stiffness, damping,
                                 circuit)
                elif window:
                    for i in range(nb):
                        _tally_tone_state(work, i, c0, hop_reach)
                        push = work[W_PUSH, i]
                        _advance(work, i, push * c0, push * cm, push * c1, stiffness, damping,
                                 circuit)
                else:
                    for i in range(nb):
                        _track_peak(work, i)
                        push = work[W_PUSH, i]
                        _advance(work, i, push * c0, push * cm, push * c1, stiffness, damping,
                                 circuit)
            for i in range(nb):
                if window:
                    _tally_tone_state(work, i, phase_cos[2 * steps_per_period], hop_reach)
                    work[W_PEAK, i] = max(work[W_HIGH, i], -work[W_LOW, i])
                else:
                    _track_peak(work, i)
            _check_and_freeze(work, start, flag, lo, nb, travel_limit, divergence_limit)
            if tangent is not None:
                for i in range(nb):
                    dq = _circuit_variable(de[i], 0.0, circuit, 0.0)
                    length = math.sqrt((dx[i] / scale[lo + i, 0]) ** 2
                                       + (dv[i] / scale[lo + i, 1]) ** 2
                                       + (dq / scale[lo + i, 2]) ** 2)
                    if work[W_KEEP, i] > 0.0 and window:
                        total[6, i] += math.log(length)
                    if length > 0.0 and math.isfinite(length):
                        dx[i] /= length
                        dv[i] /= length
                        de[i] /= length
            if window:
                for i in range(nb):
                    kept = work[W_KEEP, i] > 0.0
                    peak_run[i] = max(work[W_PEAK, i] if kept else 0.0, peak_run[i])
                    low_run[i] = min(work[W_LOW, i] if kept else np.inf, low_run[i])
                    high_run[i] = max(work[W_HIGH, i] if kept else -np.inf, high_run[i])
                    speed_run[i] = max(work[W_SPEED, i] if kept else 0.0, speed_run[i])
                    total[0, i] += work[W_V2, i] if kept else 0.0
                    total[1, i] += _sum_of_squares(work[W_E2, i], work[W_V2, i], circuit,
                                                   quasi_static_gain) if kept else 0.0
                    total[2, i] += amplitude[lo + i] * work[W_AV, i] if kept else 0.0
                    total[3, i] += work[W_HOPS, i] if kept else 0.0
                    total[4, i] += work[W_CROSSINGS, i] if kept else 0.0
                    total[5, i] += steps_per_period if kept else 0.0
        for i in range(nb):
            x0[lo + i] = work[W_X, i]
            v0[lo + i] = work[W_V, i]
            q0[lo + i] = _circuit_variable(work[W_E, i], work[W_V, i], circuit, quasi_static_gain)
            peak_out[lo + i] = peak_run[i]
            seen = low_run[i] <= high_run[i]
            low_out[lo + i] = low_run[i] if seen else 0.0
            high_out[lo + i] = high_run[i] if seen else 0.0
            speed_out[lo + i] = speed_run[i]
            energy_change[lo + i] = mass * (_stored_energy(work, i, potential, storage)
                                            - total[7, i])
            log_growth[lo + i] = total[6, i]
            for r in range(3):
                sums[lo + i, r] = total[r, i]
                counts[lo + i, r] = total[r + 3, i]


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

    x_m: np.ndarray
    v_mps: np.ndarray
    q: np.ndarray
    strobe_x_m: np.ndarray
    strobe_v_mps: np.ndarray
    strobe_q: np.ndarray
    sums: np.ndarray  # (n, 3): Σ ẋ², Σ q², Σ a ẋ over the window's steps
    counts: np.ndarray  # (n, 3): hops, zero crossings, committed steps in the window
    max_abs_x_m: np.ndarray
    x_min_m: np.ndarray  # lowest x in the window
    x_max_m: np.ndarray  # highest x in the window
    max_abs_v_mps: np.ndarray  # largest |ẋ| in the window
    stored_energy_change_J: np.ndarray  # ½mẋ² + U(x) + ½a_c q²: end minus the window's start
    log_growth: np.ndarray  # Σ ln(tangent growth) over the window (0 without tangents)
    flag: np.ndarray
    step_s: np.ndarray
    circuit: CircuitTerms


def integrate_tone(model: ReducedModel, amplitude_mps2: np.ndarray, frequency_Hz: np.ndarray,
                   x0: np.ndarray, v0: np.ndarray, q0: np.ndarray | None, *,
                   transient_periods: int, window_periods: int, steps_per_period: int,
                   strobe_phase: float = 0.0, strobe: bool = True,
                   tangent: tuple[np.ndarray, np.ndarray] | None = None) -> ToneRun:
    """Run the compiled tone kernel (see `simulate_tone`); `tangent` = (initial tangent vectors
    (n, 3), component scales (n, 3)) also integrates the variational equations (used by
    `harvester.dynamics.lyapunov`)."""
    amp, freq, xs, vs = np.broadcast_arrays(*(np.asarray(a, dtype=float).ravel() for a in
                                              (amplitude_mps2, frequency_Hz, x0, v0)))
    n = amp.size
    qs = np.zeros(n) if q0 is None else np.broadcast_to(np.asarray(q0, dtype=float).ravel(), n)
    if np.any(freq <= 0.0) or not np.all(np.isfinite(freq)):
        raise ValueError("tone frequencies must be positive and finite")
    if not (np.all(np.isfinite(amp)) and np.all(np.isfinite(xs)) and np.all(np.isfinite(vs))
            and np.all(np.isfinite(qs))):
        raise ValueError("amplitudes and initial states must be finite")
    if steps_per_period < 4 or transient_periods < 0 or window_periods < 1:
        raise ValueError("need steps_per_period ≥ 4, transient_periods ≥ 0, strobe_periods ≥ 1")
    omega = 2.0 * math.pi * freq
    step = 2.0 * math.pi / (omega * steps_per_period)
    circuit = circuit_terms(model, float(step.max()))
    terms = rate_terms(model, circuit)
    phase_cos = _phase_cos(steps_per_period, float(strobe_phase))
    wells = _wells(model)
    hop_reach = min(w for w in wells.wells_m if w > 0) if wells.regime == "bistable" else math.inf
    divergence = DIVERGENCE_FACTOR * _length_scale(model, float(np.max(np.abs(amp))), wells)
    tangent0, scale = None, None
    if tangent is not None:
        tangent0, scale = (np.array(np.broadcast_to(a, (n, 3)), dtype=float) for a in tangent)

    # one block for the three sample arrays: reused by the allocator from call to call rather
    # than handed back to the system and faulted in again
    samples = np.empty((3, n, window_periods if strobe else 0))
    run = ToneRun(
        x_m=np.array(xs, dtype=float), v_mps=np.array(vs, dtype=float),
        q=np.zeros(n) if circuit.quasi_static else np.array(qs, dtype=float),
        strobe_x_m=samples[0], strobe_v_mps=samples[1], strobe_q=samples[2],
        sums=np.empty((n, 3)), counts=np.empty((n, 3)), max_abs_x_m=np.empty(n),
        x_min_m=np.empty(n), x_max_m=np.empty(n), max_abs_v_mps=np.empty(n),
        stored_energy_change_J=np.empty(n),
        log_growth=np.empty(n),
        flag=np.zeros(n, dtype=np.int64), step_s=step, circuit=circuit,
    )
    _tone_kernel(run.x_m, run.v_mps, run.q, np.ascontiguousarray(amp), step, phase_cos,
                 terms.stiffness, terms.slope, terms.potential, terms.damping, terms.circuit,
                 terms.storage, terms.forcing_ratio, terms.quasi_static_gain, steps_per_period,
                 transient_periods, window_periods, model.travel_limit_m, divergence, hop_reach,
                 block_size(n), tangent0, scale, run.strobe_x_m, run.strobe_v_mps, run.strobe_q,
                 run.sums, run.counts, run.max_abs_x_m, run.x_min_m, run.x_max_m,
                 run.max_abs_v_mps, run.stored_energy_change_J,
                 run.log_growth, run.flag, model.mass_kg)
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

    @property
    def n(self) -> int:
        return self.amplitude_mps2.size


def simulate_tone(model: ReducedModel, amplitude_mps2: np.ndarray, frequency_Hz: np.ndarray,
                  x0: np.ndarray, v0: np.ndarray, q0: np.ndarray | None = None, *,
                  transient_periods: int, strobe_periods: int, steps_per_period: int = 128,
                  strobe_phase: float = 0.0) -> ToneEnsemble:
    """Ensemble response to a base-acceleration tone a(t) = A cos ωt [m/s²], by RK4.

    Each trajectory starts at t0 = strobe_phase/ω from (x0 [m], v0 [m/s], q0 [V or A]) and
    takes `steps_per_period` steps of 2π/(ω·steps_per_period) per forcing period.  After
    `transient_periods` it is sampled at the start of each of `strobe_periods` periods, all at
    forcing phase `strobe_phase`, and the window's power and hop tallies are kept.

    Arguments broadcast to one trajectory axis.  A hop is a move from beyond one well position
    (|x| ≥ x_well on that side) to beyond the other; a monostable model has none.
    """
    run = integrate_tone(model, amplitude_mps2, frequency_Hz, x0, v0, q0,
                         transient_periods=transient_periods, window_periods=strobe_periods,
                         steps_per_period=steps_per_period, strobe_phase=strobe_phase)
    n = run.flag.size
    amp, freq = (np.broadcast_to(np.asarray(a, dtype=float).ravel(), n).copy()
                 for a in (amplitude_mps2, frequency_Hz))
    circuit = run.circuit
    means = np.empty((N_MEANS, n))
    events = np.empty((2, n), dtype=np.int64)
    _window_means(run.sums, run.counts, run.step_s, run.stored_energy_change_J,
                  model.forcing_mass_kg, model.damping_N_s_per_m,
                  circuit.loss if circuit.coupling else 0.0, circuit.load_factor, means, events)
    return ToneEnsemble(
        amplitude_mps2=amp, frequency_Hz=freq, steps_per_period=steps_per_period,
        strobe_phase=float(strobe_phase), strobe_x_m=run.strobe_x_m,
        strobe_v_mps=run.strobe_v_mps, strobe_q=run.strobe_q, x_m=run.x_m, v_mps=run.v_mps,
        q=run.q, mean_square_q=means[M_Q2], mean_load_power_W=means[M_LOAD],
        mean_input_power_W=means[M_INPUT], mean_mech_loss_W=means[M_MECH],
        mean_elec_loss_W=means[M_ELEC], stored_energy_change_J=means[M_STORED],
        hops=events[0], zero_crossings=events[1], max_abs_x_m=run.max_abs_x_m,
        x_min_m=run.x_min_m, x_max_m=run.x_max_m, max_abs_v_mps=run.max_abs_v_mps,
        averaging_time_s=means[M_TIME], flag=run.flag, quasi_static_circuit=circuit.quasi_static,
    )


# rows of `_window_means`' output
M_Q2, M_LOAD, M_INPUT, M_MECH, M_ELEC, M_STORED, M_TIME = range(7)
N_MEANS = 7


@njit(cache=True)
def _window_means(sums, counts, step, energy_change, forcing_mass, damping, loss, load_factor,
                  means, events):
    """Per-trajectory window averages of a `ToneRun` into means (rows M_*) and events (hops,
    zero crossings): q², load power, input power −m_f a ẋ, losses c ẋ² and h q², the stored
    energy change and the averaging time; all 0 for a trajectory with no committed step."""
    for i in range(sums.shape[0]):
        steps = counts[i, 2]
        per_step = 1.0 / steps if steps > 0 else 0.0
        mean_q2 = sums[i, 1] * per_step
        means[M_Q2, i] = mean_q2
        means[M_LOAD, i] = load_factor * mean_q2
        means[M_INPUT, i] = -forcing_mass * sums[i, 2] * per_step
        means[M_MECH, i] = damping * sums[i, 0] * per_step
        means[M_ELEC, i] = loss * mean_q2
        means[M_STORED, i] = energy_change[i] if steps > 0 else 0.0
        means[M_TIME, i] = steps * step[i]
        events[0, i] = int(counts[i, 0])
        events[1, i] = int(counts[i, 1])


# -- sampled input (random excitation) ----------------------------------------------------------
@dataclass(frozen=True)
class InputStats:
    """Per-trajectory tallies of `advance_with_input`, updated in place block after block.

    Integrals are over the time each trajectory ran unflagged.  q is volts (piezo) or amperes
    (coil); `q2_time` = ∫q² dt [V²·s or A²·s].
    """

    energy_load_J: np.ndarray  # ∫ load power dt
    q2_time: np.ndarray
    time_total_s: np.ndarray
    input_work_J: np.ndarray  # ∫ −m_f a ẋ dt
    mech_loss_J: np.ndarray  # ∫ c ẋ² dt
    elec_loss_J: np.ndarray  # ∫ h q² dt (load and coil resistance)
    hops: np.ndarray  # changes of settled well
    settled_well: np.ndarray  # −1 / 0 (not yet settled) / +1
    time_in_well_pos_s: np.ndarray  # time with x > 0
    time_in_well_neg_s: np.ndarray  # time with x < 0
    max_abs_x_m: np.ndarray
    x_min_m: np.ndarray  # lowest x (+inf before any committed step)
    x_max_m: np.ndarray  # highest x (−inf before any committed step)
    max_abs_v_mps: np.ndarray  # largest |ẋ|
    flag: np.ndarray  # FLAG_OK / FLAG_TRAVEL / FLAG_DIVERGED

    @property
    def n(self) -> int:
        return self.flag.size


def new_input_stats(n: int) -> InputStats:
    """Zeroed tallies for n trajectories."""
    values = {f.name: np.zeros(n) for f in fields(InputStats)}
    for name in ("hops", "settled_well", "flag"):
        values[name] = np.zeros(n, dtype=np.int64)
    values["x_min_m"] = np.full(n, np.inf)
    values["x_max_m"] = np.full(n, -np.inf)
    return InputStats(**values)


@njit(cache=True, fastmath=FAST_MATH, inline="always")
def _tally_input_state(work, i, acc_now, potential, settle_energy):
    """Add trajectory i's current state to its tallies: `_tally_motion`, the step's side of
    x = 0, and a hop when it settles in the well opposite the one it last settled in (settled:
    ½ẋ² + U(x)/m < settle_energy < 0, per unit mass)."""
    x = work[W_X, i]
    v = work[W_V, i]
    _tally_motion(work, i, acc_now)
    work[W_POSITIVE, i] += 1.0 if x > 0.0 else 0.0
    work[W_NEGATIVE, i] += 1.0 if x < 0.0 else 0.0
    if settle_energy < 0.0:
        x2 = x * x
        energy = 0.5 * v * v + x2 * _even_series(x2, potential)
        side = 1.0 if x > 0.0 else (-1.0 if x < 0.0 else 0.0)
        now = side if energy < settle_energy else 0.0
        was = work[W_SIDE, i]
        work[W_HOPS, i] += 1.0 if now * was < 0.0 else 0.0
        work[W_SIDE, i] = now if now != 0.0 else was


@njit(parallel=True, cache=True, fastmath=FAST_MATH)
def _input_kernel(state, accel, dt, stiffness, potential, damping, circuit, forcing_ratio,
                  quasi_static_gain, travel_limit, divergence_limit, settle_energy, block, chunk,
                  tallies, hops, settled, peak_out, low_out, high_out, speed_out, flag):
    """Advance state (n, 3) in place through accel (n, 2m+1) sampled at half steps of dt.

    tallies[:, 0..5] += ∫ẋ², ∫q², ∫aẋ, time, time with x>0, time with x<0.  A trajectory has
    settled in a well when ½ẋ² + U(x)/m < settle_energy (per unit mass; never when ≥ 0).  Every
    committed step is dt long, so the tallies count steps and are scaled by dt when committed.
    """
    n = state.shape[0]
    m_steps = (accel.shape[1] - 1) // 2
    n_blocks = (n + block - 1) // block
    for b in prange(n_blocks):
        lo = b * block
        nb = min(n, lo + block) - lo
        work = _new_work()
        for i in range(nb):
            _set_step_terms(work, i, dt if flag[lo + i] == FLAG_OK else 0.0, circuit)
            work[W_X, i] = state[lo + i, 0]
            work[W_V, i] = state[lo + i, 1]
            work[W_E, i] = _circuit_force(state[lo + i, 2], circuit)
            work[W_SIDE, i] = settled[lo + i]
        buffer = np.empty((2 * chunk + 1, nb))
        start = np.empty((3, nb))  # state at the start of the chunk, for a rollback
        well_start = np.empty(nb)
        for s0 in range(0, m_steps, chunk):
            steps = min(chunk, m_steps - s0)
            # row by row, so that each cache line of `accel` serves eight consecutive samples
            for j in range(2 * steps + 1):
                for i in range(nb):
                    buffer[j, i] = accel[lo + i, 2 * s0 + j]
            start[:, :] = work[W_X:W_E + 1, :nb]
            well_start[:] = work[W_SIDE, :nb]
            work[W_LOW, :nb] = work[W_X, :nb]
            work[W_HIGH, :nb] = work[W_X, :nb]
            work[W_SPEED, :nb] = 0.0
            work[W_V2:W_NEGATIVE + 1, :nb] = 0.0
            # as in the tone kernel: each step's loop tallies the state the step starts from,
            # then advances it; the chunk's first state belongs to the previous chunk
            for s in range(steps):
                acc0 = buffer[2 * s]
                acc_mid = buffer[2 * s + 1]
                acc1 = buffer[2 * s + 2]
                if s == 0:
                    for i in range(nb):
                        _advance(work, i, forcing_ratio * acc0[i], forcing_ratio * acc_mid[i],
                                 forcing_ratio * acc1[i], stiffness, damping, circuit)
                else:
                    for i in range(nb):
                        _tally_input_state(work, i, acc0[i], potential, settle_energy)
                        _advance(work, i, forcing_ratio * acc0[i], forcing_ratio * acc_mid[i],
                                 forcing_ratio * acc1[i], stiffness, damping, circuit)
            for i in range(nb):
                _tally_input_state(work, i, buffer[2 * steps, i], potential, settle_energy)
                work[W_PEAK, i] = max(work[W_HIGH, i], -work[W_LOW, i])
            _check_and_freeze(work, start, flag, lo, nb, travel_limit, divergence_limit)
            for i in range(nb):
                if work[W_KEEP, i] > 0.0:
                    v2 = work[W_V2, i]
                    tallies[lo + i, 0] += dt * v2
                    tallies[lo + i, 1] += dt * _sum_of_squares(work[W_E2, i], v2, circuit,
                                                               quasi_static_gain)
                    tallies[lo + i, 2] += dt * work[W_AV, i]
                    tallies[lo + i, 3] += dt * steps
                    tallies[lo + i, 4] += dt * work[W_POSITIVE, i]
                    tallies[lo + i, 5] += dt * work[W_NEGATIVE, i]
                    hops[lo + i] += int(work[W_HOPS, i])
                    peak_out[lo + i] = max(work[W_PEAK, i], peak_out[lo + i])
                    low_out[lo + i] = min(work[W_LOW, i], low_out[lo + i])
                    high_out[lo + i] = max(work[W_HIGH, i], high_out[lo + i])
                    speed_out[lo + i] = max(work[W_SPEED, i], speed_out[lo + i])
                else:
                    work[W_SIDE, i] = well_start[i]
        for i in range(nb):
            state[lo + i, 0] = work[W_X, i]
            state[lo + i, 1] = work[W_V, i]
            state[lo + i, 2] = _circuit_variable(work[W_E, i], work[W_V, i], circuit,
                                                 quasi_static_gain)
            settled[lo + i] = int(work[W_SIDE, i])


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
    stats : tallies from `new_input_stats`, updated in place.
    settle_fraction : a trajectory has settled in well ±1 when sign(x) = ±1 and
        ½mẋ² + U(x) − U(0) < −settle_fraction·ΔU (ΔU the barrier); a hop is a change of settled
        well, so recrossings near the barrier top are not counted (harvester/METHODS.md §7).
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
    terms = rate_terms(model, circuit)
    wells = _wells(model)
    settle_energy = -settle_fraction * wells.barrier_J if wells.regime == "bistable" else 0.0
    if not settle_energy < 0.0:
        settle_energy = 0.0  # no settling test: monostable, or a zero fraction
    a_max = max(float(accel.max()), -float(accel.min()))
    a_max = a_max if math.isfinite(a_max) else 0.0  # a NaN or infinite sample diverges anyway
    divergence = DIVERGENCE_FACTOR * _length_scale(model, a_max, wells)
    n = state.shape[0]
    tallies = np.zeros((n, 6))
    _input_kernel(state, accel, dt, terms.stiffness, terms.potential, terms.damping,
                  terms.circuit, terms.forcing_ratio, terms.quasi_static_gain,
                  model.travel_limit_m, divergence, settle_energy / model.mass_kg,
                  block_size(n), INPUT_CHUNK_STEPS, tallies, stats.hops, stats.settled_well,
                  stats.max_abs_x_m, stats.x_min_m, stats.x_max_m, stats.max_abs_v_mps,
                  stats.flag)
    stats.q2_time[:] += tallies[:, 1]
    stats.energy_load_J[:] += circuit.load_factor * tallies[:, 1]
    stats.elec_loss_J[:] += (circuit.loss if circuit.coupling else 0.0) * tallies[:, 1]
    stats.mech_loss_J[:] += model.damping_N_s_per_m * tallies[:, 0]
    stats.input_work_J[:] += -model.forcing_mass_kg * tallies[:, 2]
    stats.time_total_s[:] += tallies[:, 3]
    stats.time_in_well_pos_s[:] += tallies[:, 4]
    stats.time_in_well_neg_s[:] += tallies[:, 5]
