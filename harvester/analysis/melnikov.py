"""Melnikov's bound for chaotic hopping, on the reduced model's own potential.

For  m ẍ + c ẋ + F(x) + g q = −m_f A cos ωt  with a saddle at x_s between two wells (x_s = 0
for an odd F with k1 < 0), the unperturbed system has two homoclinic orbits x_h(t), loops into
the left and the right well at energy H = ½ m v² + U(x) = U(x_s).  To first order in the
damping, the circuit and the forcing, the stable and unstable manifolds of the saddle cross
along a loop (transverse homoclinic tangles, the gateway to chaotic interwell motion) when

    m_f A |S(ω)| > c ∫ v_h² dt + D_circuit,      S(ω) = ∫ v_h(t) sin ωt dt,

    D_circuit = (1/2π) ∫ Re[Y(Ω)] |V_h(Ω)|² dΩ,    Re[Y(Ω)] = g² h/(h² + Ω² a_c²),

with V_h the Fourier transform of v_h (|V_h| = |S|, v_h being odd) and Y the force/velocity
admittance of the circuit a_c q̇ = g ẋ − h q.  Nothing here replaces the potential by a cubic:
the orbit is that of the full polynomial.  An odd F has two mirror-image loops with the same
bound; with unequal wells each loop has its own, and the lower one bounds chaotic hopping.

Coordinates.  U(x) = x² P(x²) with P(y) = Σ k_(2j+1) y^j/(2j+2).  The orbit turns at x_t, the
first root of P beyond the saddle; with s = (x/x_t)² and P(x_t² s) = (s − 1) Q(s), the angle ψ
defined by x = x_t sin ψ obeys

    ψ̇ = −sin ψ √(2 Q(sin² ψ)/m),     ψ(0) = π/2,

which is regular at the turning point (where v = √(−2U/m) is not) and contracting at the saddle
(ψ → 0 as e^(−λt), λ = √(−k1/m) = √(2 Q(0)/m)).

With unequal wells the loop is written about the saddle, ξ = x − x_s, with V(ξ) = U(x_s + ξ) −
U(x_s) = ξ² R(ξ) and the turning point ξ_t the first root of R on that side.  With u = ξ/ξ_t and
R(ξ_t u) = (u − 1) Q(u), the substitution u = sin² ψ gives

    ψ̇ = −½ sin ψ √(2 Q(sin² ψ)/m),     ψ(0) = π/2,     x_h = x_s + ξ_t sin² ψ,

regular at both ends in the same way (ψ → 0 as e^(−λt/2), λ = √(−F'(x_s)/m)).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np
from numpy.polynomial import Polynomial
from numpy.polynomial import polynomial as poly
from scipy.integrate import OdeSolution, quad, solve_ivp
from scipy.optimize import brentq

from harvester.model import ReducedModel, analyse_wells

# The orbit is integrated until x_h falls below this fraction of the turning point; beyond it
# x_h is a pure exponential to relative accuracy (x_h/x_t)² ≈ 1e-24.
TAIL_FRACTION = 1e-10
# Gauss–Legendre nodes per panel of the time and frequency quadratures.
NODES_PER_PANEL = 20
# |S| below this fraction of ∫|v_h| dt = 2 x_t is quadrature noise, not signal.
RESOLUTION = 1e-12



class NoHomoclinicOrbit(ValueError):
    """The potential has no single homoclinic loop through the saddle (e.g. wells so deep that
    U never climbs back to U(0) within the fitted range): there is no Melnikov bound."""


@dataclass(frozen=True)
class HomoclinicOrbit:
    """The homoclinic orbit x_h(t) of m ẍ + F(x) = 0 through x_h(0) = x_t, t ≥ 0 (SI).

    x_h is even and v_h odd in t.  For t ≤ end_time_s, x_h = x_t sin ψ(t) with ψ from `angle`
    (odd F), or x_h = x_s + (x_t − x_s) sin² ψ(t) (`squared_sine`, a loop of unequal wells);
    beyond, x_h(t) − x_s = (x_h(T) − x_s) e^(−λ(t − T)).
    """

    turning_point_m: float  # x_t: U(x_t) = U(x_s) beyond the well
    velocity_square_integral_m2_per_s: float  # ∫ v_h² dt over −∞ < t < ∞
    saddle_rate_per_s: float  # λ = √(−F'(x_s)/m)
    end_time_s: float  # T, where x_h(T) − x_s = TAIL_FRACTION·(x_t − x_s)
    feature_rate_per_s: float  # fastest local rate √(|F'(x)|/m) along the orbit, ≥ λ
    mass_kg: float
    deflated_stiffness_N_per_m: tuple[float, ...]  # Q, ascending powers of (x/x_t)² or u
    angle: OdeSolution = field(compare=False, repr=False)  # ψ(t) on [0, T]
    saddle_m: float = 0.0  # x_s
    squared_sine: bool = False  # x_h − x_s = (x_t − x_s) sin² ψ (unequal wells), else x_t sin ψ

    @property
    def excursion_m(self) -> float:
        """|x_t − x_s|: how far the loop reaches from the saddle; ∫|v_h| dt = 2 |x_t − x_s|."""
        return abs(self.turning_point_m - self.saddle_m)


def homoclinic_orbit(model: ReducedModel, side: int = 1) -> HomoclinicOrbit:
    """The homoclinic orbit of the undamped, unforced reduced model, from its turning point.

        ½ m v_h² + U(x_h) = 0,   ∫ v_h² dt = 2 ∫_0^{x_t} √(−2U(x)/m) dx
                                         = 2 x_t² ∫_0^{π/2} sin ψ cos² ψ √(2Q(sin² ψ)/m) dψ

    x_t is the first zero of U beyond the saddle; ψ(t) is integrated with DOP853 (module
    notes) until x_h < 1e-10 x_t.  For k1 x + k3 x³: x_h = √2 x0 sech(ω0 t) and
    ∫ v_h² dt = (4/3) x0² ω0 with x0 = √(−k1/k3), ω0 = √(−k1/m).

    With unequal wells (even terms in F) the loop on `side` (+1: into the right well, −1: the
    left), written about the saddle x_s as in the module notes; for k1 x + k2 x² + k3 x³ the
    loops reach the roots of k3 x²/4 + k2 x/3 + k1/2 = 0.  An odd F's loops are mirror images
    with one bound, and the right one is returned whatever `side`.

    Parameters
    ----------
    model : bistable reduced model (only mass and the restoring force are used)
    side : +1 or −1, the loop's well when the wells are unequal

    Raises
    ------
    ValueError : monostable model, or a potential that never climbs back to U(x_s) beyond the
        well (no homoclinic orbit)

    References
    ----------
    Guckenheimer & Holmes (1983), Nonlinear Oscillations, Dynamical Systems, and Bifurcations
    of Vector Fields, Springer, §4.5 (the double-well homoclinic orbit √2 sech t).
    """
    if not model.is_bistable:
        raise ValueError("a homoclinic orbit needs a bistable model (a saddle between two wells)")
    if model.is_symmetric:
        return _orbit(float(model.mass_kg), tuple(float(k) for k in model.stiffness))
    if side not in (1, -1):
        raise ValueError(f"side is +1 (right well) or −1 (left well), not {side}")
    saddle = analyse_wells(model).saddle_m
    return _loop(float(model.mass_kg), model.force_coefficients, float(saddle), side)


@lru_cache(maxsize=64)
def _orbit(mass_kg: float, stiffness: tuple[float, ...]) -> HomoclinicOrbit:
    p = np.array([k / (2 * j + 2) for j, k in enumerate(stiffness)])  # U = x² P(x²)
    y_t = _first_root(p)
    x_t = math.sqrt(y_t)
    p_scaled = p * y_t ** np.arange(p.size)  # P(y_t s), root at s = 1
    q = _deflate_unit_root(p_scaled)
    if not np.all(poly.polyval(np.linspace(0.0, 1.0, 1001), q) > 0.0):
        raise NoHomoclinicOrbit("the potential touches U(0) between the saddle and the turning "
                                "point: the separatrix is not a single homoclinic loop")

    saddle_rate = math.sqrt(-stiffness[0] / mass_kg)
    solution, half = _angle_and_action(mass_kg, q, saddle_rate, squared=False)
    x = np.linspace(0.0, x_t, 2001)
    k_local = sum((2 * j + 1) * k * x ** (2 * j) for j, k in enumerate(stiffness))
    return HomoclinicOrbit(
        turning_point_m=x_t,
        velocity_square_integral_m2_per_s=2.0 * x_t * x_t * half,
        saddle_rate_per_s=saddle_rate,
        end_time_s=float(solution.t_events[0][0]),
        feature_rate_per_s=max(saddle_rate, math.sqrt(np.max(np.abs(k_local)) / mass_kg)),
        mass_kg=mass_kg,
        deflated_stiffness_N_per_m=tuple(float(c) for c in q),
        angle=solution.sol,
    )


@lru_cache(maxsize=64)
def _loop(mass_kg: float, coefficients: tuple[float, ...], saddle: float,
          side: int) -> HomoclinicOrbit:
    # V(ξ) = U(x_s + ξ) − U(x_s) = ξ² R(ξ): U' = F vanishes at the saddle, so the constant and
    # linear terms of U about x_s are dropped, and R(0) = F'(x_s)/2 < 0
    about_saddle = Polynomial(poly.polyint(np.asarray(coefficients)))(Polynomial([saddle, 1.0]))
    r = about_saddle.coef[2:] * float(side) ** np.arange(about_saddle.coef.size - 2)  # R(side·η)
    xi_t = side * _first_root(r)
    q = _deflate_unit_root(r * abs(xi_t) ** np.arange(r.size))  # R(ξ_t u) = (u − 1) Q(u)
    if not np.all(poly.polyval(np.linspace(0.0, 1.0, 1001), q) > 0.0):
        raise NoHomoclinicOrbit("the potential touches U(x_s) between the saddle and the "
                                "turning point: the separatrix is not a single loop")

    saddle_rate = math.sqrt(2.0 * q[0] / mass_kg)
    solution, half = _angle_and_action(mass_kg, q, saddle_rate, squared=True)
    x = saddle + xi_t * np.linspace(0.0, 1.0, 2001)
    k_local = poly.polyval(x, poly.polyder(np.asarray(coefficients)))
    return HomoclinicOrbit(
        turning_point_m=saddle + xi_t,
        velocity_square_integral_m2_per_s=2.0 * xi_t * xi_t * half,
        saddle_rate_per_s=saddle_rate,
        end_time_s=float(solution.t_events[0][0]),
        feature_rate_per_s=max(saddle_rate, math.sqrt(np.max(np.abs(k_local)) / mass_kg)),
        mass_kg=mass_kg,
        deflated_stiffness_N_per_m=tuple(float(c) for c in q),
        angle=solution.sol, saddle_m=saddle, squared_sine=True,
    )


def _angle_and_action(mass_kg: float, q: np.ndarray, saddle_rate: float,
                      squared: bool) -> tuple[OdeSolution, float]:
    """ψ(t) from the turning point (ψ = π/2) until the loop is TAIL_FRACTION of its excursion
    from the saddle, and ½∫ v_h² dt/(x_t − x_s)², for the deflated Q of either substitution
    (module notes): x − x_s ∝ sin ψ (odd force) or sin² ψ (`squared`, unequal wells)."""
    factor, power = (0.5, 2) if squared else (1.0, 1)

    def rate(psi: np.ndarray) -> np.ndarray:
        s = np.sin(psi)
        return -factor * s * np.sqrt(2.0 * poly.polyval(s * s, q) / mass_kg)

    def tail(t: float, state: np.ndarray) -> float:
        return math.sin(state[0]) ** power - TAIL_FRACTION

    tail.terminal = True
    # ψ falls as e^(−λt) (odd force) or e^(−λt/2) (unequal wells)
    solution = solve_ivp(lambda t, state: rate(state), (0.0, 200.0 / (factor * saddle_rate)),
                         [0.5 * math.pi], method="DOP853", rtol=1e-13, atol=1e-30,
                         events=tail, dense_output=True)
    if solution.status != 1:
        raise ValueError(f"the homoclinic orbit did not reach its saddle: {solution.message}")

    def velocity_square(psi: float) -> float:
        c = math.cos(psi)
        weight = 2.0 * math.sin(psi) ** 2 if squared else 1.0
        return weight * math.sin(psi) * c * c * math.sqrt(
            2.0 * poly.polyval(math.sin(psi) ** 2, q) / mass_kg)

    half, _ = quad(velocity_square, 0.0, 0.5 * math.pi, epsabs=0.0, epsrel=1e-13, limit=200)
    return solution, half


def _first_root(p: np.ndarray) -> float:
    """y_t > 0 where P(y) (ascending coefficients, P(0) < 0) first turns from − to +."""
    roots = poly.polyroots(p)
    real = np.sort([r.real for r in roots
                    if r.real > 0.0 and abs(r.imag) <= 1e-6 * abs(r)])
    for y in real:
        lo, hi = y * (1.0 - 1e-7), y * (1.0 + 1e-7)
        if poly.polyval(lo, p) < 0.0 < poly.polyval(hi, p):
            y_t = brentq(lambda v: poly.polyval(v, p), lo, hi, xtol=1e-300, rtol=1e-15)
            if np.all(poly.polyval(np.linspace(0.0, y_t, 1001)[1:-1], p) < 0.0):
                return float(y_t)
    raise NoHomoclinicOrbit("the potential never climbs back to U(0) beyond the well: "
                            "there is no homoclinic orbit")


def _deflate_unit_root(p: np.ndarray) -> np.ndarray:
    """Q with P(s) = (s − 1) Q(s), for P(1) = 0 (ascending coefficients).

    q_j = −Σ_{i≤j} p_i = Σ_{i>j} p_i; each coefficient takes the partial sum with less
    cancellation, so neither Q(0) = −p_0 (the saddle's rate) nor the top end absorbs the
    rounding of P(1) ≈ 0 alone.
    """
    lower = -np.cumsum(p)[:-1]
    upper = np.cumsum(p[::-1])[::-1][1:]
    lower_size = np.cumsum(np.abs(p))[:-1]
    upper_size = np.cumsum(np.abs(p[::-1]))[::-1][1:]
    return np.where(lower_size <= upper_size, lower, upper)


def _angle_rate(orbit: HomoclinicOrbit, psi: np.ndarray) -> np.ndarray:
    """ψ̇ = −sin ψ √(2 Q(sin² ψ)/m)  [1/s], half that for a `squared_sine` loop."""
    s = np.sin(psi)
    q = poly.polyval(s * s, orbit.deflated_stiffness_N_per_m)
    rate = -s * np.sqrt(2.0 * q / orbit.mass_kg)
    return 0.5 * rate if orbit.squared_sine else rate


def _shape(orbit: HomoclinicOrbit, psi):
    """(x_h − x_s)/(x_t − x_s) and its derivative in ψ: sin ψ, cos ψ or sin² ψ, 2 sin ψ cos ψ."""
    if orbit.squared_sine:
        return np.sin(psi) ** 2, 2.0 * np.sin(psi) * np.cos(psi)
    return np.sin(psi), np.cos(psi)


def homoclinic_deflection(orbit: HomoclinicOrbit, t_s: np.ndarray) -> np.ndarray:
    """x_h(t) [m] at times t [s] (either sign; x_h is even).

    x_h = x_s + (x_t − x_s)·shape(ψ(|t|)) up to the end of the table T (shape sin ψ for an odd
    force, sin² ψ for unequal wells), x_s + (x_h(T) − x_s) e^(−λ(|t| − T)) beyond.
    """
    tau = np.abs(np.asarray(t_s, dtype=float))
    end = orbit.end_time_s
    reach = orbit.turning_point_m - orbit.saddle_m
    x_end = reach * float(_shape(orbit, float(orbit.angle(end)[0]))[0])
    inside = reach * _shape(orbit, orbit.angle(np.minimum(tau, end))[0])[0]
    outside = x_end * np.exp(-orbit.saddle_rate_per_s * (tau - end))
    return orbit.saddle_m + np.where(tau <= end, inside, outside)


def homoclinic_velocity(orbit: HomoclinicOrbit, t_s: np.ndarray) -> np.ndarray:
    """v_h(t) [m/s] at times t [s] (either sign; v_h is odd, against x_t − x_s for t > 0).

    v_h = (x_t − x_s)·shape'(ψ)·ψ̇ up to the end of the table T, v_h(T) e^(−λ(|t| − T)) beyond.
    """
    t = np.asarray(t_s, dtype=float)
    tau = np.abs(t)
    end = orbit.end_time_s
    reach = orbit.turning_point_m - orbit.saddle_m
    psi = orbit.angle(np.minimum(tau, end))[0]
    inside = reach * _shape(orbit, psi)[1] * _angle_rate(orbit, psi)
    psi_end = float(orbit.angle(end)[0])
    v_end = reach * float(_shape(orbit, psi_end)[1]) * float(_angle_rate(orbit, psi_end))
    outside = v_end * np.exp(-orbit.saddle_rate_per_s * (tau - end))
    return np.sign(t) * np.where(tau <= end, inside, outside)


def velocity_sine_transform(orbit: HomoclinicOrbit, omega_rad_s: np.ndarray) -> np.ndarray:
    """S(ω) = ∫ v_h(t) sin ωt dt = 2 ∫_0^∞ v_h(t) sin ωt dt  [m], vectorised over ω [rad/s].

    Gauss–Legendre panels on [0, T], each no wider than 1/r (r the fastest rate along the
    orbit) or half a forcing period, plus the exponential tail v_h(T) e^(−λ(t − T)) exactly:

        2 v_h(T) (λ sin ωT + ω cos ωT)/(λ² + ω²).

    For k1 x + k3 x³: S(ω) = −√2 π x0 w sech(πw/2) with w = ω/ω0 (negative: v_h < 0 for t > 0
    with the orbit started at +x_t).  The absolute error is about 1e-13 of ∫|v_h| dt =
    2 |x_t − x_s|, so far above the saddle rate, where S is exponentially small, its relative
    error grows.

    References
    ----------
    Guckenheimer & Holmes (1983), Nonlinear Oscillations, Dynamical Systems, and Bifurcations
    of Vector Fields, Springer, §4.5.
    """
    omega = np.asarray(omega_rad_s, dtype=float)
    flat = omega.ravel()
    end = orbit.end_time_s
    top = float(np.max(np.abs(flat))) if flat.size else 0.0
    width = min(1.0 / orbit.feature_rate_per_s, math.pi / top if top > 0.0 else math.inf)
    t, w = _gauss_panels(np.linspace(0.0, end, max(1, math.ceil(end / width)) + 1))
    weighted = 2.0 * w * homoclinic_velocity(orbit, t)
    lam = orbit.saddle_rate_per_s
    v_end = float(homoclinic_velocity(orbit, np.array([end]))[0])
    result = np.empty_like(flat)
    chunk = max(1, 4_000_000 // t.size)
    for start in range(0, flat.size, chunk):
        om = flat[start:start + chunk]
        body = np.sin(np.outer(om, t)) @ weighted
        tail = 2.0 * v_end * (lam * np.sin(om * end) + om * np.cos(om * end)) / (lam**2 + om**2)
        result[start:start + chunk] = body + tail
    return result.reshape(omega.shape)


def _gauss_panels(edges: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Nodes and weights of NODES_PER_PANEL-point Gauss–Legendre on each [edges_i, edges_i+1]."""
    x, w = np.polynomial.legendre.leggauss(NODES_PER_PANEL)
    half = 0.5 * np.diff(edges)
    mid = 0.5 * (edges[1:] + edges[:-1])
    return (mid[:, None] + half[:, None] * x).ravel(), (half[:, None] * w).ravel()


def circuit_melnikov_work(model: ReducedModel, orbit: HomoclinicOrbit) -> float:
    """Energy [J] the circuit draws from the beam along the homoclinic orbit (first order).

        D_circuit = (1/2π) ∫ Re[Y(Ω)] |V_h(Ω)|² dΩ = (1/π) ∫_0^∞ c_e(Ω) S(Ω)² dΩ,
        c_e(Ω) = g² h/(h² + Ω² a_c²)

    for the circuit a_c q̇ = g ẋ − h q with force g q on the beam (`circuit_coefficients`):
    only the real (resistive) part of the force/velocity admittance Y does net work, and by
    Parseval with |V_h| = |S| (v_h odd).  A quasi-static circuit (a_c = 0) is a viscous damper
    and D_circuit = (g²/h) ∫ v_h² dt.  Zero without a transducer or with an open piezo.

    Parameters
    ----------
    model : reduced model (circuit coefficients)
    orbit : its homoclinic orbit (`homoclinic_orbit`)

    References
    ----------
    Wiggins (1990), Introduction to Applied Nonlinear Dynamical Systems and Chaos, Springer,
    ch. 4 (Melnikov integral of a general perturbation); Parseval's theorem for the work.
    """
    lag, g, h = model.circuit_coefficients()
    if g == 0.0 or h == 0.0 or math.isinf(h):
        return 0.0
    return _circuit_work(orbit, float(lag), float(g), float(h))


@lru_cache(maxsize=64)
def _circuit_work(orbit: HomoclinicOrbit, lag: float, g: float, h: float) -> float:
    lam = orbit.saddle_rate_per_s
    step = 0.5 * lam
    corner = h / abs(lag) if lag else math.inf  # half width of the Lorentzian c_e(Ω)
    total, peak, start = 0.0, 0.0, 0.0
    # blocks of panels outward until S² has fallen below 1e-17 of its peak
    for _ in range(400):
        stop = start + 16 * step
        edges = np.arange(start, stop + 0.5 * step, step)
        if math.isfinite(corner):
            extra = corner * 2.0 ** np.arange(-12, 40)
            edges = np.union1d(edges, extra[(extra > start) & (extra < stop)])
        omega, weight = _gauss_panels(edges)
        s2 = velocity_sine_transform(orbit, omega) ** 2
        total += float(np.sum(weight * g * g * h / (h * h + (omega * lag) ** 2) * s2))
        block = float(np.max(s2))
        peak = max(peak, block)
        if block < 1e-17 * peak:
            return total / math.pi
        start = stop
    raise ValueError("the velocity spectrum of the homoclinic orbit did not decay")


def melnikov_bound(model: ReducedModel, frequency_Hz: float) -> float | None:
    """Melnikov lower bound [m/s²] on the base-acceleration amplitude for chaotic hopping.

        A_M(f) = (c ∫ v_h² dt + D_circuit) / (m_f |S(ω)|),   ω = 2π f

    on the homoclinic orbit of the model's own polynomial (`homoclinic_orbit`,
    `velocity_sine_transform`, `circuit_melnikov_work`); with unequal wells the lower of the
    bounds on the two loops.  Below A_M the manifolds of the saddle do not cross: chaotic
    interwell motion is impossible to first order; above it, it is possible but hopping from
    rest is not guaranteed.  For k1 x + k3 x³ without a circuit this is A_M = γ_M m x0 ω0²/m_f
    with γ_M = 4δ cosh(πw/2)/(3√2 π w), δ = c/(m ω0), w = ω/ω0.  math.inf where |S(ω)| is
    below the quadrature's resolution (1e-12 of 2 |x_t − x_s|): far above the saddle rate,
    where the bound exceeds any physical shaking.  None for a monostable model and where the
    potential has no homoclinic orbit (`NoHomoclinicOrbit`; with unequal wells, on neither
    side).

    Parameters
    ----------
    model : reduced model
    frequency_Hz : forcing frequency f > 0 [Hz]

    References
    ----------
    Guckenheimer & Holmes (1983), Nonlinear Oscillations, Dynamical Systems, and Bifurcations
    of Vector Fields, Springer, §4.5 (check: δ = 0.25, ω = 1 → γ_M = 0.18825);
    Wiggins (1990), Introduction to Applied Nonlinear Dynamical Systems and Chaos, ch. 4.

    Examples
    --------
    The canonical double well u'' + 0.25u' − u + u³ = γ cos t (m = m_f = 1 kg, k1 = −1 N/m,
    k3 = 1 N/m³, c = 0.25 N·s/m):

    >>> unit_well = ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.25, stiffness=(-1.0, 1.0),
    ...                          forcing_mass_kg=1.0)
    >>> round(melnikov_bound(unit_well, 1.0 / (2.0 * math.pi)), 5)
    0.18825
    """
    if frequency_Hz <= 0.0:
        raise ValueError(f"the forcing frequency must be positive, not {frequency_Hz} Hz")
    if not model.is_bistable:
        return None
    orbits = []
    for side in (1,) if model.is_symmetric else (1, -1):
        try:
            orbits.append(homoclinic_orbit(model, side))
        except NoHomoclinicOrbit:
            continue
    if not orbits:
        return None
    omega = np.array([2.0 * math.pi * frequency_Hz])
    bounds = []
    for orbit in orbits:
        sine = abs(float(velocity_sine_transform(orbit, omega)[0]))
        if sine <= RESOLUTION * 2.0 * orbit.excursion_m:
            bounds.append(math.inf)
            continue
        work = (model.damping_N_s_per_m * orbit.velocity_square_integral_m2_per_s
                + circuit_melnikov_work(model, orbit))
        bounds.append(work / (model.forcing_mass_kg * sine))
    return min(bounds)
