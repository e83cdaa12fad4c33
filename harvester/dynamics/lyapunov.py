"""Largest Lyapunov exponent of tone-driven trajectories (Benettin et al. 1980).

The variational (tangent) equations of the reduced model,

    m δẍ + c δẋ + F'(x) δx + g δq = 0,      a_c δq̇ = g δẋ − h δq,

are integrated alongside each trajectory with the same RK4 stages (the tangent stages read the
state's stage positions; `integrate_tone`), the tangent vector is renormalised once per forcing
period, and the exponent is the mean growth rate of its length:  λ = (1/t) Σ ln |δ_k|  [1/s].

The length is measured in scaled coordinates (δx/L, δẋ/(Lω), δq/Q) with L the model's length
scale, ω the forcing frequency and Q the circuit variable whose force g Q equals |k1| L; the
limit does not depend on that choice, only how fast the estimate settles.  An open-circuit
piezo conserves q − (g/a_c)x, a neutral direction: its largest exponent is then never below 0.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from harvester.dynamics.integrator import (
    LOG_GROWTH,
    TIME,
    circuit_terms,
    integrate_tone,
    length_scale_m,
)
from harvester.model import ReducedModel


@dataclass(frozen=True)
class LyapunovEstimate:
    """Largest Lyapunov exponent per trajectory; a flagged trajectory's value covers only the
    periods before it was frozen (see the integrator's flags)."""

    exponent_per_s: np.ndarray
    averaging_time_s: np.ndarray
    flag: np.ndarray


def largest_lyapunov_exponent(model: ReducedModel, amplitude_mps2: np.ndarray,
                              frequency_Hz: np.ndarray, x0: np.ndarray, v0: np.ndarray,
                              q0: np.ndarray | None = None, *, transient_periods: int,
                              periods: int, steps_per_period: int = 128,
                              strobe_phase: float = 0.0) -> LyapunovEstimate:
    """Largest Lyapunov exponent λ [1/s] of the tone-driven reduced model, one per trajectory.

    λ = lim (1/t) ln |δ(t)|/|δ(0)| for a tangent vector δ, estimated by Benettin's method:
    integrate the variational equations with the state, renormalise every forcing period and
    average ln of the growth over `periods` periods after `transient_periods`.  Positive λ
    means chaos; a stable periodic orbit gives its largest Floquet exponent (−δ/2 per unit
    time for the period-1 orbits of u'' + δu' − u + u³ = γ cos ωτ with complex multipliers).

    Arguments broadcast as in `simulate_tone`, with the same time origin and step.

    References
    ----------
    Benettin, Galgani, Giorgilli & Strelcyn (1980), Meccanica 15:9 and 15:21.
    """
    if periods < 1:
        raise ValueError("need periods ≥ 1")
    freq = np.broadcast_arrays(*(np.asarray(a, dtype=float).ravel() for a in
                                 (amplitude_mps2, frequency_Hz, x0, v0)))[1]
    amp_max = float(np.max(np.abs(amplitude_mps2)))
    length = length_scale_m(model, 0.0) if model.k1 < 0 else length_scale_m(model, amp_max)
    _, coupling, _ = model.circuit_coefficients()
    force_scale = abs(model.k1) * length if model.k1 != 0.0 else 1.0
    scale = np.column_stack((np.full(freq.size, length), length * 2.0 * math.pi * freq,
                             np.full(freq.size, force_scale / coupling if coupling else 1.0)))
    # start along (1, 1, 1) in scaled coordinates, or (1, 1, 0) when the circuit has no state
    # (a constant δq would be a neutral direction and hide the exponent)
    circuit = circuit_terms(model, 1.0 / (float(freq.min()) * steps_per_period))
    direction = np.array([1.0, 1.0, 0.0 if circuit.quasi_static else 1.0])
    tangent0 = scale * direction / np.linalg.norm(direction)
    run = integrate_tone(model, amplitude_mps2, frequency_Hz, x0, v0, q0,
                         transient_periods=transient_periods, window_periods=periods,
                         steps_per_period=steps_per_period, strobe_phase=strobe_phase,
                         strobe=False, tangent=(tangent0, scale))
    time_s = run.tallies[:, TIME]
    exponent = np.divide(run.tallies[:, LOG_GROWTH], time_s, out=np.zeros(freq.size),
                         where=time_s > 0)
    return LyapunovEstimate(exponent_per_s=exponent, averaging_time_s=time_s, flag=run.flag)
