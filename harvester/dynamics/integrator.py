"""Compiled ensemble integrator for the reduced model: fixed-step classical Runge–Kutta (RK4).

    m ẍ + c ẋ + F(x) + g q = −m_f a(t),      a_c q̇ = g ẋ − h q          (ReducedModel)

Many trajectories (initial conditions × amplitudes × frequencies, flattened into one axis) are
advanced together.  The trajectory axis is cut into blocks small enough to stay in the L1/L2
cache; blocks run in parallel (`prange`), and within a block every RK4 stage is a loop over the
block's trajectories that the compiler turns into SIMD code, with the time loop outside it.

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

import numba
import numpy as np
from numba import njit, prange

from harvester.model import PiezoCircuit, ReducedModel, analyse_wells

FLAG_OK = 0
FLAG_TRAVEL = 1  # |x| passed the model's travel limit
FLAG_DIVERGED = 2  # non-finite, or beyond the divergence bound

DIVERGENCE_FACTOR = 1.0e3  # divergence bound = this × the model's length scale

# Model constants handed to the kernels, by index into one float64 array.
P_INV_MASS = 0  # 1/m
P_DAMPING = 1  # c, plus g²/h when the circuit is quasi-static
P_COUPLING = 2  # g in the force on the beam (0 when the circuit is quasi-static)
P_CIRCUIT_GAIN = 3  # g/a_c
P_CIRCUIT_DECAY = 4  # h/a_c
P_QUASI_STATIC_GAIN = 5  # g/h when the circuit is quasi-static, else 0: q = q_state + this·ẋ
P_FORCING_MASS = 6  # m_f
P_MASS = 7  # m
N_PARAMS = 8

# Rows of the per-block scratch array used by `_rk4_step`.
W_FORCE = 0
W_X1 = 1  # rows W_X1 … W_X1 + 3: stage positions x_n, x_n + h/2·k1, x_n + h/2·k2, x_n + h·k3
W_VS = 5
W_QS = 6
W_SX = 7
W_SV = 8
W_SQ = 9
W_SPARE = 10  # receives the unused "next stage" position of the last stage
N_WORK = 11

INPUT_CHUNK_STEPS = 32  # sampled input is transposed into cache-sized chunks of this many steps


# -- model → kernel constants -------------------------------------------------------------------
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


def kernel_parameters(model: ReducedModel, circuit: CircuitTerms) -> np.ndarray:
    """The float64 constants array (indices P_*) the compiled kernels read."""
    p = np.zeros(N_PARAMS)
    p[P_INV_MASS] = 1.0 / model.mass_kg
    p[P_MASS] = model.mass_kg
    p[P_FORCING_MASS] = model.forcing_mass_kg
    p[P_DAMPING] = model.damping_N_s_per_m
    if circuit.quasi_static:
        p[P_DAMPING] += circuit.coupling**2 / circuit.loss
        p[P_QUASI_STATIC_GAIN] = circuit.coupling / circuit.loss
    else:
        p[P_COUPLING] = circuit.coupling
        p[P_CIRCUIT_GAIN] = circuit.coupling / circuit.lag
        p[P_CIRCUIT_DECAY] = circuit.loss / circuit.lag
    return p


def stiffness_series(model: ReducedModel) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Coefficients in x² of F(x)/x, F'(x) and U(x)/x²: k_j, (2j+1)k_j, k_j/(2j+2)."""
    k = np.asarray(model.stiffness, dtype=float)
    j = np.arange(k.size)
    return k, (2 * j + 1) * k, k / (2 * j + 2)


def length_scale_m(model: ReducedModel, amplitude_mps2: float) -> float:
    """A length [m] the motion can reach: the well position, or the deflection that the forcing
    amplitude times the resonant amplification m ω_n/c would produce on the restoring force."""
    wells = analyse_wells(model)
    scale = max((abs(w) for w in wells.wells_m), default=0.0)
    k_scale = abs(model.k1) if model.k1 != 0.0 else 1.0
    c_total = model.damping_N_s_per_m
    lag, g, h = model.circuit_coefficients()
    if g != 0.0 and h > 0.0 and math.isfinite(h):
        c_total += g * g / h
    amplification = math.sqrt(k_scale * model.mass_kg) / c_total if c_total > 0 else 1.0e6
    force = model.forcing_mass_kg * amplitude_mps2 * max(1.0, amplification)
    scale = max(scale, _static_deflection(model, force))
    return scale if scale > 0.0 else 1.0


def _static_deflection(model: ReducedModel, force_N: float) -> float:
    """x > 0 with F(x) = force [m], by expanding then bisecting; 0 when F (softening) never
    gets there within 2⁶⁰ times the starting length."""
    if force_N <= 0.0:
        return 0.0
    x = max(max((abs(w) for w in analyse_wells(model).wells_m), default=0.0), 1e-9)
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
    _, slope_series, _ = stiffness_series(model)
    slope = float(np.polyval(slope_series[::-1], (2.0 * x_ref) ** 2))
    slope = max(slope, abs(model.k1))
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
    return int(max(8, min(256, 8 * math.ceil(per_thread / 8))))


# -- compiled pieces shared by every driver -----------------------------------------------------
@njit(cache=True, inline="always")
def _even_series(x, coeffs, out, n):
    """out[i] = Σ_j coeffs[j] x[i]^(2j), Horner in x², one SIMD pass over the block per term."""
    last = coeffs.size - 1
    for i in range(n):
        out[i] = coeffs[last]
    for j in range(last - 1, -1, -1):
        c = coeffs[j]
        for i in range(n):
            out[i] = out[i] * x[i] * x[i] + c
    return out


@njit(cache=True, inline="always")
def _rk4_step(x, v, q, h, acc0, accm, acc1, series, p, w, anchor, n):
    """One classical RK4 step of the whole block, in place; h[i] is trajectory i's step.

        ẋ = v,   m v̇ = −c v − S(X)·x − g q − m_f a,   q̇ = (g/a_c) v − (h/a_c) q

    with S the even series `series` evaluated at the stage positions X held in rows
    W_X1 … W_X1+3 of `anchor`.  For the state itself anchor is w, so X = x and S(x)·x = F(x);
    for the tangent equations (x, v, q = δx, δẋ, δq) anchor is the state's scratch, `series`
    holds F'(x) and the forcing is zero.  acc0, accm, acc1 are the base accelerations at t,
    t + h/2, t + h.  Afterwards rows W_X1 … W_X1+3 of w hold this system's stage positions.
    """
    inv_m = p[P_INV_MASS]
    c = p[P_DAMPING]
    g = p[P_COUPLING]
    gq = p[P_CIRCUIT_GAIN]
    hq = p[P_CIRCUIT_DECAY]
    mf = p[P_FORCING_MASS]
    f, vs, qs = w[W_FORCE], w[W_VS], w[W_QS]
    sx, sv, sq = w[W_SX], w[W_SV], w[W_SQ]
    w[W_X1, :n] = x[:n]
    vs[:n] = v[:n]
    qs[:n] = q[:n]
    w[W_SX:W_SQ + 1, :n] = 0.0
    # RK4 weights, and where the next stage sits as a fraction of the step
    for stage, (weight, advance) in enumerate(((1.0, 0.5), (2.0, 0.5), (2.0, 1.0), (1.0, 0.0))):
        acc = acc0 if stage == 0 else (acc1 if stage == 3 else accm)
        stage_x = w[W_X1 + stage]
        _even_series(anchor[W_X1 + stage], series, f, n)
        next_x = w[W_X1 + stage + 1] if stage < 3 else w[W_SPARE]
        for i in range(n):
            kx = vs[i]
            kv = inv_m * (-c * vs[i] - f[i] * stage_x[i] - g * qs[i] - mf * acc[i])
            kq = gq * vs[i] - hq * qs[i]
            sx[i] += weight * kx
            sv[i] += weight * kv
            sq[i] += weight * kq
            next_x[i] = x[i] + advance * h[i] * kx
            vs[i] = v[i] + advance * h[i] * kv
            qs[i] = q[i] + advance * h[i] * kq
    for i in range(n):
        x[i] += h[i] / 6.0 * sx[i]
        v[i] += h[i] / 6.0 * sv[i]
        q[i] += h[i] / 6.0 * sq[i]


@njit(cache=True)
def _check_and_freeze(x, v, q, h, start, peak, flag, offset, n, travel_limit,
                      divergence_limit):
    """End of a period/chunk: flag and roll back (to start[0..2] = x, ẋ, q) the trajectories
    that left the trusted range.

    Returns a 0/1 array `keep`: 1 where this period's tallies may be committed.
    """
    keep = np.zeros(n)
    for i in range(n):
        finite = math.isfinite(x[i]) and math.isfinite(v[i]) and math.isfinite(q[i])
        if flag[offset + i] != FLAG_OK:
            continue
        if finite and peak[i] <= travel_limit and peak[i] <= divergence_limit:
            keep[i] = 1.0
            continue
        if finite and peak[i] <= divergence_limit:
            flag[offset + i] = FLAG_TRAVEL
        else:
            flag[offset + i] = FLAG_DIVERGED
        x[i] = start[0, i]
        v[i] = start[1, i]
        q[i] = start[2, i]
        h[i] = 0.0
    return keep


# -- tone ---------------------------------------------------------------------------------------
@njit(parallel=True, cache=True)
def _tone_kernel(x0, v0, q0, amplitude, step, phase_cos, k_odd, slope_series, p,
                 steps_per_period, transient_periods, window_periods, travel_limit,
                 divergence_limit, hop_reach, block, tangent, scale, strobe_x, strobe_v,
                 strobe_q, sums, counts, peak_out, log_growth, flag):
    """Integrate a(t) = A cos(phase) over transient + window periods for every trajectory.

    sums[:, 0..2] = Σ ẋ², Σ q², Σ a ẋ over the window's steps; counts[:, 0..2] = hops, zero
    crossings and committed steps in the window; peak_out = max |x| in the window.  During the
    transient only the peak is tracked (it guards the travel limit).  Strobe samples are kept
    when strobe_x has columns.  When `tangent` (n, 3) has rows, the tangent equations run
    alongside from it, renormalised every period in the norm with component scales `scale`,
    and log_growth sums ln of the growth over the window (Benettin et al. 1980).
    """
    n = x0.size
    qv = p[P_QUASI_STATIC_GAIN]
    with_tangent = tangent.shape[0] > 0
    with_strobe = strobe_x.shape[1] > 0
    n_blocks = (n + block - 1) // block
    for b in prange(n_blocks):
        lo = b * block
        nb = min(n, lo + block) - lo
        x = x0[lo:lo + nb].copy()
        v = v0[lo:lo + nb].copy()
        q = q0[lo:lo + nb].copy()
        h = step[lo:lo + nb].copy()
        amp = amplitude[lo:lo + nb].copy()
        w = np.empty((N_WORK, nb))
        forcing = np.empty((3, nb))  # a at t, t + h/2, t + h
        acc0, accm, acc1 = forcing[0], forcing[1], forcing[2]
        start = np.empty((3, nb))  # state at the start of the period, for a rollback
        side = np.zeros(nb)
        peak = np.zeros(nb)
        peak_run = np.zeros(nb)
        # this period's tallies (ẋ², q², a ẋ, hops, crossings), and their committed totals
        tally = np.zeros((5, nb))
        t_v2, t_q2, t_av, t_hop, t_cross = tally[0], tally[1], tally[2], tally[3], tally[4]
        total = np.zeros((7, nb))
        n_tangent = nb if with_tangent else 0
        tw = np.empty((N_WORK, n_tangent))
        still = np.zeros(n_tangent)
        dx = tangent[lo:lo + n_tangent, 0].copy()
        dv = tangent[lo:lo + n_tangent, 1].copy()
        dq = tangent[lo:lo + n_tangent, 2].copy()
        for period in range(transient_periods + window_periods):
            window = period >= transient_periods
            start[0], start[1], start[2] = x, v, q
            peak[:] = 0.0
            tally[:, :] = 0.0
            if window and with_strobe:
                col = period - transient_periods
                for i in range(nb):
                    strobe_x[lo + i, col] = x[i]
                    strobe_v[lo + i, col] = v[i]
                    strobe_q[lo + i, col] = q[i] + qv * v[i]
            for s in range(steps_per_period):
                c0 = phase_cos[2 * s]
                cm = phase_cos[2 * s + 1]
                c1 = phase_cos[2 * s + 2]
                for i in range(nb):
                    acc0[i] = amp[i] * c0
                    accm[i] = amp[i] * cm
                    acc1[i] = amp[i] * c1
                _rk4_step(x, v, q, h, acc0, accm, acc1, k_odd, p, w, w, nb)
                if with_tangent:
                    _rk4_step(dx, dv, dq, h, still, still, still, slope_series, p, tw, w, nb)
                if not window:
                    for i in range(nb):
                        peak[i] = max(abs(x[i]), peak[i])
                    continue
                x_before = w[W_X1]
                for i in range(nb):
                    xi = x[i]
                    vi = v[i]
                    qi = q[i] + qv * vi
                    peak[i] = max(abs(xi), peak[i])
                    t_v2[i] += vi * vi
                    t_q2[i] += qi * qi
                    t_av[i] += acc1[i] * vi
                    was = side[i]
                    now = 1.0 if xi >= hop_reach else (-1.0 if xi <= -hop_reach else was)
                    t_hop[i] += 1.0 if (now != was and was != 0.0) else 0.0
                    side[i] = now
                    t_cross[i] += 1.0 if xi * x_before[i] < 0.0 else 0.0
            keep = _check_and_freeze(x, v, q, h, start, peak, flag, lo, nb, travel_limit,
                                     divergence_limit)
            for i in range(n_tangent):
                length = math.sqrt((dx[i] / scale[lo + i, 0]) ** 2 + (dv[i] / scale[lo + i, 1]) ** 2
                                   + (dq[i] / scale[lo + i, 2]) ** 2)
                if keep[i] > 0.0 and window:
                    total[6, i] += math.log(length)
                if length > 0.0 and math.isfinite(length):
                    dx[i] /= length
                    dv[i] /= length
                    dq[i] /= length
            for i in range(nb):
                if keep[i] > 0.0 and window:
                    peak_run[i] = max(peak[i], peak_run[i])
                    total[0, i] += t_v2[i]
                    total[1, i] += t_q2[i]
                    total[2, i] += t_av[i]
                    total[3, i] += t_hop[i]
                    total[4, i] += t_cross[i]
                    total[5, i] += steps_per_period
        for i in range(nb):
            x0[lo + i] = x[i]
            v0[lo + i] = v[i]
            q0[lo + i] = q[i] + qv * v[i]
            peak_out[lo + i] = peak_run[i]
            log_growth[lo + i] = total[6, i]
            for r in range(3):
                sums[lo + i, r] = total[r, i]
                counts[lo + i, r] = total[r + 3, i]


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
    p = kernel_parameters(model, circuit)
    k_odd, slope_series, _ = stiffness_series(model)
    phase_cos = np.cos(strobe_phase + math.pi * np.arange(2 * steps_per_period + 1)
                       / steps_per_period)
    wells = analyse_wells(model)
    hop_reach = min(w for w in wells.wells_m if w > 0) if wells.regime == "bistable" else math.inf
    divergence = DIVERGENCE_FACTOR * length_scale_m(model, float(np.max(np.abs(amp))))
    if tangent is None:
        tangent0, scale = np.empty((0, 3)), np.ones((0, 3))
    else:
        tangent0, scale = (np.array(np.broadcast_to(a, (n, 3)), dtype=float) for a in tangent)

    run = ToneRun(
        x_m=np.array(xs, dtype=float), v_mps=np.array(vs, dtype=float),
        q=np.zeros(n) if circuit.quasi_static else np.array(qs, dtype=float),
        strobe_x_m=np.empty((n, window_periods if strobe else 0)),
        strobe_v_mps=np.empty((n, window_periods if strobe else 0)),
        strobe_q=np.empty((n, window_periods if strobe else 0)),
        sums=np.zeros((n, 3)), counts=np.zeros((n, 3)), max_abs_x_m=np.zeros(n),
        log_growth=np.zeros(n), flag=np.zeros(n, dtype=np.int64), step_s=step, circuit=circuit,
    )
    _tone_kernel(run.x_m, run.v_mps, run.q, np.ascontiguousarray(amp), step, phase_cos, k_odd,
                 slope_series, p, steps_per_period, transient_periods, window_periods,
                 model.travel_limit_m, divergence, hop_reach, block_size(n), tangent0, scale,
                 run.strobe_x_m, run.strobe_v_mps, run.strobe_q, run.sums, run.counts,
                 run.max_abs_x_m, run.log_growth, run.flag)
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
    steps_done = run.counts[:, 2]
    per_step = np.divide(1.0, steps_done, out=np.zeros(n), where=steps_done > 0)
    mean_v2 = run.sums[:, 0] * per_step
    mean_q2 = run.sums[:, 1] * per_step
    _, _, u_series = stiffness_series(model)

    def stored(xm, vm, qm):
        return (0.5 * model.mass_kg * vm**2 + _potential(u_series, xm)
                + 0.5 * circuit.lag * qm**2)

    # the window's end state for kept trajectories is the final state; a flagged one froze
    # at the start of its failing period, where its tallies also stopped
    e_change = (stored(run.x_m, run.v_mps, run.q)
                - stored(run.strobe_x_m[:, 0], run.strobe_v_mps[:, 0], run.strobe_q[:, 0]))
    return ToneEnsemble(
        amplitude_mps2=amp, frequency_Hz=freq, steps_per_period=steps_per_period,
        strobe_phase=float(strobe_phase), strobe_x_m=run.strobe_x_m,
        strobe_v_mps=run.strobe_v_mps, strobe_q=run.strobe_q, x_m=run.x_m, v_mps=run.v_mps,
        q=run.q, mean_square_q=mean_q2, mean_load_power_W=circuit.load_factor * mean_q2,
        mean_input_power_W=-model.forcing_mass_kg * run.sums[:, 2] * per_step,
        mean_mech_loss_W=model.damping_N_s_per_m * mean_v2,
        mean_elec_loss_W=circuit.loss * mean_q2 if circuit.coupling else np.zeros(n),
        stored_energy_change_J=np.where(steps_done > 0, e_change, 0.0),
        hops=run.counts[:, 0].astype(np.int64), zero_crossings=run.counts[:, 1].astype(np.int64),
        max_abs_x_m=run.max_abs_x_m, averaging_time_s=steps_done * run.step_s, flag=run.flag,
        quasi_static_circuit=circuit.quasi_static,
    )


def _potential(u_series: np.ndarray, x: np.ndarray) -> np.ndarray:
    x2 = x * x
    return x2 * np.polyval(u_series[::-1], x2)


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
    flag: np.ndarray  # FLAG_OK / FLAG_TRAVEL / FLAG_DIVERGED

    @property
    def n(self) -> int:
        return self.flag.size


def new_input_stats(n: int) -> InputStats:
    """Zeroed tallies for n trajectories."""
    values = {f.name: np.zeros(n) for f in fields(InputStats)}
    for name in ("hops", "settled_well", "flag"):
        values[name] = np.zeros(n, dtype=np.int64)
    return InputStats(**values)


@njit(parallel=True, cache=True)
def _input_kernel(state, accel, dt, k_odd, u_series, p, travel_limit, divergence_limit,
                  settle_energy, block, chunk, tallies, hops, settled, peak_out, flag):
    """Advance state (n, 3) in place through accel (n, 2m+1) sampled at half steps.

    tallies[:, 0..5] += ∫ẋ², ∫q², ∫aẋ, time, time with x>0, time with x<0.
    """
    n = state.shape[0]
    m_steps = (accel.shape[1] - 1) // 2
    qv = p[P_QUASI_STATIC_GAIN]
    half_m = 0.5 * p[P_MASS]
    n_blocks = (n + block - 1) // block
    for b in prange(n_blocks):
        lo = b * block
        nb = min(n, lo + block) - lo
        x = np.empty(nb)
        v = np.empty(nb)
        q = np.empty(nb)
        h = np.empty(nb)
        for i in range(nb):
            x[i] = state[lo + i, 0]
            v[i] = state[lo + i, 1]
            q[i] = 0.0 if qv != 0.0 else state[lo + i, 2]
            h[i] = dt if flag[lo + i] == FLAG_OK else 0.0
        w = np.empty((N_WORK, nb))
        energy = np.empty(nb)
        buffer = np.empty((2 * chunk + 1, nb))
        start = np.empty((3, nb))  # state at the start of the chunk, for a rollback
        peak = np.zeros(nb)
        well = np.empty(nb)
        well_start = np.empty(nb)
        hop_tally = np.zeros(nb)
        tally = np.zeros((6, nb))
        for i in range(nb):
            well[i] = settled[lo + i]
        for s0 in range(0, m_steps, chunk):
            steps = min(chunk, m_steps - s0)
            for i in range(nb):
                for j in range(2 * steps + 1):
                    buffer[j, i] = accel[lo + i, 2 * s0 + j]
            start[0], start[1], start[2] = x, v, q
            well_start[:] = well
            peak[:] = 0.0
            hop_tally[:] = 0.0
            tally[:, :] = 0.0
            for s in range(steps):
                acc1 = buffer[2 * s + 2]
                _rk4_step(x, v, q, h, buffer[2 * s], buffer[2 * s + 1], acc1, k_odd, p, w, w,
                          nb)
                if settle_energy < 0.0:
                    _even_series(x, u_series, energy, nb)
                for i in range(nb):
                    xi = x[i]
                    vi = v[i]
                    qi = q[i] + qv * vi
                    hi = h[i]
                    ax = abs(xi)
                    peak[i] = ax if ax > peak[i] else peak[i]
                    tally[0, i] += hi * vi * vi
                    tally[1, i] += hi * qi * qi
                    tally[2, i] += hi * acc1[i] * vi
                    tally[3, i] += hi
                    tally[4, i] += hi if xi > 0.0 else 0.0
                    tally[5, i] += hi if xi < 0.0 else 0.0
                if settle_energy < 0.0:
                    for i in range(nb):
                        xi = x[i]
                        e = half_m * v[i] * v[i] + energy[i] * xi * xi
                        new = 0.0
                        if e < settle_energy:
                            new = 1.0 if xi > 0.0 else (-1.0 if xi < 0.0 else 0.0)
                        hop_tally[i] += 1.0 if (new != 0.0 and well[i] != 0.0
                                                and new != well[i]) else 0.0
                        well[i] = new if new != 0.0 else well[i]
            keep = _check_and_freeze(x, v, q, h, start, peak, flag, lo, nb, travel_limit,
                                     divergence_limit)
            for i in range(nb):
                if keep[i] > 0.0:
                    for r in range(6):
                        tallies[lo + i, r] += tally[r, i]
                    hops[lo + i] += int(hop_tally[i])
                    peak_out[lo + i] = peak[i] if peak[i] > peak_out[lo + i] else peak_out[lo + i]
                else:
                    well[i] = well_start[i]
        for i in range(nb):
            state[lo + i, 0] = x[i]
            state[lo + i, 1] = v[i]
            state[lo + i, 2] = q[i] + qv * v[i]
            settled[lo + i] = int(well[i])


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
        well, so recrossings near the barrier top are not counted (methods.md §6).
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
    p = kernel_parameters(model, circuit)
    k_odd, _, u_series = stiffness_series(model)
    wells = analyse_wells(model)
    settle_energy = -settle_fraction * wells.barrier_J if wells.regime == "bistable" else 0.0
    if not settle_energy < 0.0:
        settle_energy = 0.0  # no settling test: monostable, or a zero fraction
    a_max = float(np.max(np.abs(accel))) if np.all(np.isfinite(accel)) else 0.0
    divergence = DIVERGENCE_FACTOR * length_scale_m(model, a_max)
    n = state.shape[0]
    tallies = np.zeros((n, 6))
    _input_kernel(state, accel, dt, k_odd, u_series, p, model.travel_limit_m, divergence,
                  settle_energy, block_size(n), INPUT_CHUNK_STEPS, tallies, stats.hops,
                  stats.settled_well, stats.max_abs_x_m, stats.flag)
    stats.q2_time[:] += tallies[:, 1]
    stats.energy_load_J[:] += circuit.load_factor * tallies[:, 1]
    stats.elec_loss_J[:] += (circuit.loss if circuit.coupling else 0.0) * tallies[:, 1]
    stats.mech_loss_J[:] += model.damping_N_s_per_m * tallies[:, 0]
    stats.input_work_J[:] += -model.forcing_mass_kg * tallies[:, 2]
    stats.time_total_s[:] += tallies[:, 3]
    stats.time_in_well_pos_s[:] += tallies[:, 4]
    stats.time_in_well_neg_s[:] += tallies[:, 5]
