"""Turning points of x(t) from the compiled recorder against scipy's solve_ivp."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from harvester.dynamics.history import (
    FLAG_OK,
    FLAG_TRAVEL,
    new_turning_points,
    record_turning_points,
    tone_turning_points,
)
from harvester.model import PiezoCircuit, ReducedModel

# a double well (wells at ±3.16 mm) with a piezo whose RC time constant (5 ms) is a state
M, K1, K3, C = 0.01, -40.0, 4e6, 0.02
THETA, CP, R = 1e-3, 50e-9, 1e5
MODEL = ReducedModel(M, C, (K1, K3), M, PiezoCircuit(THETA, CP), R)


def _reference_reversals(amplitude, frequency, x0, periods):
    """Reversals (ẋ = 0 events) of the same equations by DOP853 at rtol 1e-11."""

    def rhs(t, y):
        x, v, q = y
        force = -C * v - K1 * x - K3 * x**3 - THETA * q
        return [v, (force - M * amplitude * math.cos(2 * math.pi * frequency * t)) / M,
                (THETA * v - q / R) / CP]

    def turning(t, y):
        return y[1]

    solution = solve_ivp(rhs, (0.0, periods / frequency), [x0, 0.0, 0.0], method="DOP853",
                         rtol=1e-11, atol=1e-14, events=turning)
    return solution.y_events[0][:, 0]


@pytest.mark.parametrize("amplitude, x0", [(3.0, 3e-3), (12.0, 2e-3)],
                         ids=["intrawell", "hopping"])
def test_reversals_agree_with_solve_ivp(amplitude, x0):
    # Both integrate the same ODE; the recorder's reversals come from RK4 steps (256 per
    # period) and a cubic Hermite interpolant, both fourth order.  Over six periods they agree
    # with the DOP853 reference to 1e-4 of the well position (measured: 5e-8 in the well,
    # 2e-5 when hopping, whose fast snap-through is where RK4 errs most; a third of a
    # micrometre here, far below what a stress needs).  The reference's first event is the
    # start itself, where ẋ = 0.
    frequency = 8.0
    record = tone_turning_points(MODEL, amplitude, frequency, np.array([[x0, 0.0, 0.0]]),
                                 transient_periods=0, periods=6, steps_per_period=256)
    reference = _reference_reversals(amplitude, frequency, x0, 6)[1:]
    got = record.reversals(0)
    assert got.size == reference.size
    well = math.sqrt(-K1 / K3)
    np.testing.assert_allclose(got, reference, rtol=0, atol=1e-4 * well)
    assert record.time_s[0] == pytest.approx(6 / frequency, rel=1e-12)
    assert record.flag[0] == FLAG_OK


def test_the_record_is_capped_and_timed_to_its_last_step():
    # a lightly damped linear oscillator at 10 Hz has two reversals per period: a cap of 10
    # fills in about five periods, and the time recorded stops there
    model = ReducedModel(M, 1e-4, (M * (2 * math.pi * 10.0) ** 2,), M)
    record = tone_turning_points(model, 1.0, 10.0, np.array([[1e-3, 0.0, 0.0]]),
                                 transient_periods=0, periods=100, steps_per_period=128, cap=10)
    assert record.full[0] and record.count[0] == 10
    assert 4.0 / 10.0 < record.time_s[0] < 6.0 / 10.0


def test_a_trajectory_past_the_travel_limit_is_flagged_and_stopped():
    limited = ReducedModel(M, C, (K1, K3), M, travel_limit_m=4e-3)
    record = new_turning_points(np.array([[3e-3, 0.0, 0.0], [-3e-3, 0.0, 0.0]]))
    steps = 2000
    t = np.arange(2 * steps + 1) * 0.5e-4
    accel = np.vstack([30.0 * np.cos(2 * math.pi * 8.0 * t), np.zeros_like(t)])
    record_turning_points(limited, record, accel, 1e-4)
    assert record.flag.tolist() == [FLAG_TRAVEL, FLAG_OK]
    assert record.time_s[0] < record.time_s[1] == pytest.approx(steps * 1e-4)
