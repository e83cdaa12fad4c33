"""Turning points of the tip deflection x(t): the stress history that fatigue counting needs.

Every root fibre's stress is linear in the tip deflection (σ = s·x), so the sequence of the
deflection's turning points (reversals, where ẋ changes sign) is the whole input of a rainflow
count (ASTM E1049-85, §5.4.4): the stress between two reversals is monotonic and adds nothing.
This module records those reversals for a few trajectories, advancing each with the production
integrator's RK4 step (`harvester.dynamics.integrator._rk4`), one trajectory per thread.

A reversal lies between two steps; its value is the extremum of the cubic Hermite interpolant
through (x, ẋ) at both ends of the step, accurate to the step's own order (x and ẋ are fourth-
order accurate, and so is the interpolant).

Memory is bounded: at most `cap` reversals per trajectory.  A trajectory that fills its record
stops there, and `time_s` says how long it was recorded, so that a damage rate (damage per
second of record) stays right.  A trajectory whose |x| passes the model's travel limit or the
divergence bound, or turns non-finite, is flagged (the integrator's FLAG_* codes) and stopped
where it was; its reversals up to then are kept.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numba import njit, prange

from harvester.dynamics.integrator import (
    DIVERGENCE_FACTOR,
    FAST_MATH,
    FLAG_DIVERGED,
    FLAG_OK,
    FLAG_TRAVEL,
    N_WORK,
    _circuit_force,
    _circuit_variable,
    _rk4,
    _set_step,
    circuit_terms,
    length_scale_m,
    rate_terms,
)
from harvester.model import ReducedModel

DEFAULT_CAP = 1 << 17  # reversals kept per trajectory: 1 MiB each, about 65 000 cycles


@dataclass(frozen=True)
class TurningPoints:
    """Reversals of x(t) for n trajectories, filled in place by `record_turning_points`.

    `state` is each trajectory's current (x [m], ẋ [m/s], q [V or A]); `x_m[i, :count[i]]` its
    reversals in time order; `time_s[i]` the time over which they were recorded.
    """

    x_m: np.ndarray  # (n, cap)
    count: np.ndarray  # (n,) int64
    time_s: np.ndarray  # (n,)
    state: np.ndarray  # (n, 3), C-contiguous float64
    flag: np.ndarray  # (n,) int64: FLAG_OK / FLAG_TRAVEL / FLAG_DIVERGED

    @property
    def n(self) -> int:
        return self.count.size

    @property
    def full(self) -> np.ndarray:
        """Trajectories that have filled their record (and stopped) [bool]."""
        return self.count >= self.x_m.shape[1]

    def reversals(self, i: int) -> np.ndarray:
        """Trajectory i's reversals [m], in time order."""
        return self.x_m[i, : self.count[i]]


def new_turning_points(state: np.ndarray, cap: int = DEFAULT_CAP) -> TurningPoints:
    """An empty record for trajectories starting at `state` (n, 3): x [m], ẋ [m/s], q."""
    start = np.array(state, dtype=float, order="C")
    if start.ndim != 2 or start.shape[1] != 3 or not np.all(np.isfinite(start)):
        raise ValueError("state must be a finite array of shape (n, 3)")
    if cap < 2:
        raise ValueError("a record needs room for at least two reversals")
    n = start.shape[0]
    return TurningPoints(np.empty((n, cap)), np.zeros(n, dtype=np.int64), np.zeros(n), start,
                         np.zeros(n, dtype=np.int64))


def record_turning_points(model: ReducedModel, record: TurningPoints, accel: np.ndarray,
                          dt: float, *, repeats: int = 1, keep: bool = True) -> None:
    """Advance every trajectory through sampled base acceleration and record its reversals.

    Parameters
    ----------
    model : the reduced model
    record : from `new_turning_points`; advanced and filled in place
    accel : (n, 2m+1) base acceleration [m/s²] at t0 + j·dt/2 (the integrator's half-step
        grid); the last column is the first of the next block
    dt : RK4 step [s]
    repeats : pass through `accel` this many times (a tone: one period, repeated)
    keep : False runs a transient: the state advances, nothing is recorded or timed
    """
    accel = np.ascontiguousarray(accel, dtype=float)
    n = record.n
    if accel.ndim != 2 or accel.shape[0] != n or accel.shape[1] < 3 or accel.shape[1] % 2 == 0:
        raise ValueError("accel must have shape (n, 2m+1) with m ≥ 1")
    if not dt > 0.0 or repeats < 1:
        raise ValueError("need dt > 0 and repeats ≥ 1")
    circuit = circuit_terms(model, dt)
    terms = rate_terms(model, circuit)
    a_max = float(np.max(np.abs(accel)))
    divergence = DIVERGENCE_FACTOR * length_scale_m(model, a_max if math.isfinite(a_max) else 0.0)
    c = terms.constants
    _record_kernel(record.state, accel, repeats, dt, keep, terms.stiffness, terms.even,
                   c.damping, terms.circuit, c.forcing_ratio, c.quasi_static_gain,
                   model.travel_limit_m, divergence, record.x_m, record.count, record.time_s,
                   record.flag)


def tone_turning_points(model: ReducedModel, amplitude_mps2: float, frequency_Hz: float,
                        state: np.ndarray, *, transient_periods: int, periods: int,
                        steps_per_period: int, cap: int = DEFAULT_CAP) -> TurningPoints:
    """Reversals over `periods` forcing periods of a(t) = A cos ωt, after `transient_periods`,
    for trajectories starting at `state` (n, 3) at phase 0; `steps_per_period` RK4 steps per
    period, as `harvester.dynamics.integrator.simulate_tone` takes them."""
    if not (frequency_Hz > 0.0 and math.isfinite(amplitude_mps2)):
        raise ValueError("a tone needs a positive frequency and a finite amplitude")
    if steps_per_period < 4 or transient_periods < 0 or periods < 1:
        raise ValueError("need steps_per_period ≥ 4, transient_periods ≥ 0, periods ≥ 1")
    record = new_turning_points(state, cap)
    phase = math.pi * np.arange(2 * steps_per_period + 1) / steps_per_period
    accel = np.broadcast_to(amplitude_mps2 * np.cos(phase), (record.n, phase.size))
    dt = 1.0 / (frequency_Hz * steps_per_period)
    if transient_periods:
        record_turning_points(model, record, accel, dt, repeats=transient_periods, keep=False)
    record_turning_points(model, record, accel, dt, repeats=periods)
    return record


@njit(cache=True, fastmath=FAST_MATH)
def _hermite_extremum(x0, v0, x1, v1, h):
    """Extremum of the cubic Hermite interpolant through (x0, v0) at 0 and (x1, v1) at h, where
    v changes sign: the root in [0, 1] of its slope a s² + b s + c, by the stable quadratic
    formula."""
    a = 6.0 * (x0 - x1) + 3.0 * h * (v0 + v1)
    b = 6.0 * (x1 - x0) - h * (4.0 * v0 + 2.0 * v1)
    c = h * v0
    if abs(a) <= 1e-12 * (abs(b) + abs(c)):
        s = -c / b if b != 0.0 else 0.0
    else:
        root = math.sqrt(max(b * b - 4.0 * a * c, 0.0))
        q = -0.5 * (b + math.copysign(root, b))
        s = c / q if q != 0.0 else 0.0
        if not 0.0 <= s <= 1.0:
            s = q / a
    s = min(max(s, 0.0), 1.0)
    s2 = s * s
    s3 = s2 * s
    return ((2.0 * s3 - 3.0 * s2 + 1.0) * x0 + (s3 - 2.0 * s2 + s) * h * v0
            + (-2.0 * s3 + 3.0 * s2) * x1 + (s3 - s2) * h * v1)


@njit(parallel=True, cache=True, fastmath=FAST_MATH)
def _record_kernel(state, accel, repeats, dt, keep, stiffness, even, damping, circuit,
                   forcing_ratio, quasi_static_gain, travel_limit, divergence_limit, points, count,
                   time, flag):
    """Advance state (n, 3) through accel (n, 2m+1) `repeats` times; append reversals of x to
    points[i, count[i]] (when `keep`) and add the time recorded to time[i]."""
    n = state.shape[0]
    m_steps = (accel.shape[1] - 1) // 2
    cap = points.shape[1]
    for i in prange(n):
        if flag[i] != FLAG_OK or (keep and count[i] >= cap):
            continue
        work = np.zeros((N_WORK, 1))
        _set_step(work, 0, dt, circuit)
        x = state[i, 0]
        v = state[i, 1]
        e = _circuit_force(state[i, 2], circuit)
        stop = False
        for _ in range(repeats):
            for s in range(m_steps):
                x1, v1, e1 = _rk4(x, v, e, work, 0, forcing_ratio, accel[i, 2 * s],
                                  accel[i, 2 * s + 1], accel[i, 2 * s + 2], stiffness, even,
                                  damping, circuit)
                if not (math.isfinite(x1) and math.isfinite(v1) and math.isfinite(e1)) \
                        or abs(x1) > divergence_limit:
                    flag[i] = FLAG_DIVERGED
                    stop = True
                    break
                if abs(x1) > travel_limit:
                    flag[i] = FLAG_TRAVEL
                    stop = True
                    break
                if keep:
                    time[i] += dt
                    if (v > 0.0 and v1 <= 0.0) or (v < 0.0 and v1 >= 0.0):
                        points[i, count[i]] = _hermite_extremum(x, v, x1, v1, dt)
                        count[i] += 1
                x, v, e = x1, v1, e1
                if keep and count[i] >= cap:
                    stop = True
                    break
            if stop:
                break
        state[i, 0] = x
        state[i, 1] = v
        state[i, 2] = _circuit_variable(e, v, circuit, quasi_static_gain)

