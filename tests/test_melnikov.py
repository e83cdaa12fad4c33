"""Melnikov bound on the model's own potential: check values from closed-form homoclinic orbits."""

import math

import numpy as np
import pytest
from scipy.integrate import quad, solve_ivp

from harvester.analysis.melnikov import (
    circuit_melnikov_work,
    homoclinic_deflection,
    homoclinic_orbit,
    homoclinic_velocity,
    melnikov_bound,
    velocity_sine_transform,
)
from harvester.model import CoilCircuit, PiezoCircuit, ReducedModel

CANONICAL = ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.25, stiffness=(-1.0, 1.0),
                         forcing_mass_kg=1.0)


def test_canonical_double_well_bound():
    # Guckenheimer & Holmes (1983), Nonlinear Oscillations, Dynamical Systems, and Bifurcations
    # of Vector Fields, §4.5: u'' + δu' − u + u³ = γ cos ωt has γ_M = 4δ cosh(πω/2)/(3√2 πω);
    # δ = 0.25, ω = 1 → 0.18825 (printed to 5 figures, so compared to its rounding)
    bound = melnikov_bound(CANONICAL, 1.0 / (2.0 * math.pi))
    closed = 4 * 0.25 * math.cosh(math.pi / 2) / (3 * math.sqrt(2) * math.pi)
    assert bound == pytest.approx(closed, rel=1e-7)
    assert bound == pytest.approx(0.18825, abs=5e-6)


def test_canonical_homoclinic_orbit():
    # Guckenheimer & Holmes (1983) §4.5: u_h = √2 sech t, v_h = −√2 sech t tanh t,
    # ∫ v_h² dt = 4/3, turning point √2
    orbit = homoclinic_orbit(CANONICAL)
    assert orbit.turning_point_m == pytest.approx(math.sqrt(2.0), rel=1e-14)
    assert orbit.velocity_square_integral_m2_per_s == pytest.approx(4.0 / 3.0, rel=1e-12)
    t = np.linspace(-40.0, 40.0, 161)
    np.testing.assert_allclose(homoclinic_deflection(orbit, t), math.sqrt(2) / np.cosh(t),
                               rtol=1e-10, atol=0.0)
    np.testing.assert_allclose(homoclinic_velocity(orbit, t),
                               -math.sqrt(2) * np.tanh(t) / np.cosh(t), rtol=1e-9, atol=1e-15)


def test_canonical_velocity_sine_transform():
    # Guckenheimer & Holmes (1983) §4.5: ∫ v_h sin ωt dt = −√2 π ω sech(πω/2) for u_h = √2 sech t
    # (the sign: v_h < 0 for t > 0 on the orbit started at +√2)
    orbit = homoclinic_orbit(CANONICAL)
    omega = np.array([0.05, 0.3, 1.0, 2.0, 3.5, 6.0, 8.0])
    closed = -math.sqrt(2) * math.pi * omega / np.cosh(0.5 * math.pi * omega)
    np.testing.assert_allclose(velocity_sine_transform(orbit, omega), closed, rtol=1e-6)


@pytest.mark.parametrize("frequency_Hz", [5.0, 12.0, 25.0, 40.0])
def test_cubic_in_physical_units(frequency_Hz):
    # the Guckenheimer & Holmes (1983) §4.5 bound in the scales of harvester/METHODS.md §4:
    # ω0 = √(−k1/m), x0 = √(−k1/k3), δ = c/(m ω0), A_M = γ_M(δ, ω/ω0) m x0 ω0²/m_f
    m, mf, c, k1, k3 = 0.010, 0.012, 0.03, -60.0, 6e6
    model = ReducedModel(mass_kg=m, damping_N_s_per_m=c, stiffness=(k1, k3), forcing_mass_kg=mf)
    omega0, x0 = math.sqrt(-k1 / m), math.sqrt(-k1 / k3)
    delta, w = c / (m * omega0), 2 * math.pi * frequency_Hz / omega0
    gamma = 4 * delta * math.cosh(math.pi * w / 2) / (3 * math.sqrt(2) * math.pi * w)
    assert melnikov_bound(model, frequency_Hz) == pytest.approx(gamma * m * x0 * omega0**2 / mf,
                                                                rel=1e-5)


# ẍ − x + x⁵ = 0 has the homoclinic orbit x_h = 3^(1/4) sech^(1/2)(2t), derived by substitution:
# with u = sech 2t, x_h² = √3 u and v_h = −3^(1/4) u^(1/2) tanh 2t, so v_h² = √3 u(1 − u²)
# = x_h² − x_h⁶/3, i.e. ½v² − x²/2 + x⁶/6 = 0 (energy of U = −x²/2 + x⁶/6 at the saddle's level).
QUINTIC = ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.1, stiffness=(-1.0, 0.0, 1.0),
                       forcing_mass_kg=1.0)


def _quintic_velocity(t):
    return -(3.0**0.25) * np.sqrt(1.0 / np.cosh(2 * t)) * np.tanh(2 * t)


def test_quintic_homoclinic_orbit():
    # orbit derived by substitution (comment above); ∫ v_h² dt = (√3/2) ∫ sech s tanh² s ds = √3 π/4
    # (∫ sech = π and, by the reduction ∫ sech³ = ½ sech tanh + ½ ∫ sech, ∫ sech³ = π/2)
    orbit = homoclinic_orbit(QUINTIC)
    assert orbit.turning_point_m == pytest.approx(3.0**0.25, rel=1e-13)
    numerical, _ = quad(lambda t: _quintic_velocity(t) ** 2, -40.0, 40.0, epsabs=0,
                        epsrel=1e-12, limit=200)
    assert orbit.velocity_square_integral_m2_per_s == pytest.approx(numerical, rel=1e-10)
    assert orbit.velocity_square_integral_m2_per_s == pytest.approx(math.sqrt(3) * math.pi / 4,
                                                                    rel=1e-10)
    t = np.linspace(0.0, 30.0, 121)
    np.testing.assert_allclose(homoclinic_velocity(orbit, t), _quintic_velocity(t), rtol=1e-9,
                               atol=1e-15)


@pytest.mark.parametrize("omega", [0.2, 1.0, 2.5, 5.0])
def test_quintic_velocity_sine_transform(omega):
    # S(ω) = 2 ∫_0^∞ v_h sin ωt dt of the closed-form orbit, by QUADPACK's Fourier integral
    # (scipy.integrate.quad, weight='sin', infinite range: Piessens et al. 1983, QUADPACK, QAWF)
    reference, _ = quad(_quintic_velocity, 0.0, np.inf, weight="sin", wvar=omega)
    orbit = homoclinic_orbit(QUINTIC)
    assert velocity_sine_transform(orbit, np.array([omega]))[0] == pytest.approx(2 * reference,
                                                                                 rel=1e-6)


def test_higher_order_polynomial_orbit_and_transform():
    # Energy H = ½ m v² + U(x) = 0 along the separatrix (Guckenheimer & Holmes 1983 §4.5) and
    # S(ω) by QUADPACK's Fourier integral of v_h itself (Piessens et al. 1983, QAWO/QAWF)
    model = ReducedModel(mass_kg=0.002, damping_N_s_per_m=0.005,
                         stiffness=(-25.0, 1.8e6, -3.0e10, 3.3e14, -2.0e18, 5.0e21),
                         forcing_mass_kg=0.0025)
    orbit = homoclinic_orbit(model)
    assert model.potential_energy(orbit.turning_point_m) == pytest.approx(0.0, abs=1e-18)
    t = np.linspace(0.0, orbit.end_time_s * 1.5, 400)
    x, v = homoclinic_deflection(orbit, t), homoclinic_velocity(orbit, t)
    barrier = -float(np.min(model.potential_energy(np.linspace(0, orbit.turning_point_m, 999))))
    energy = 0.5 * model.mass_kg * v**2 + model.potential_energy(x)
    assert np.max(np.abs(energy)) < 1e-12 * barrier
    for omega in (60.0, 150.0, 300.0):
        reference, _ = quad(lambda s: float(homoclinic_velocity(orbit, np.array([s]))[0]), 0.0,
                            np.inf, weight="sin", wvar=omega)
        assert velocity_sine_transform(orbit, np.array([omega]))[0] == pytest.approx(
            2 * reference, rel=1e-6)


def test_resistive_coil_is_viscous_damping():
    # a quasi-static coil (L = 0) is a damper (Bl)²/(R_c + R_l); by Parseval
    # (1/2π) ∫ |V_h|² dΩ = ∫ v_h² dt, so D_circuit = (g²/h) ∫ v_h² dt (Wiggins 1990, ch. 4)
    coil = CoilCircuit(flux_linkage_V_s_per_m=2.0, resistance_ohm=150.0, inductance_H=0.0)
    model = ReducedModel(mass_kg=0.010, damping_N_s_per_m=0.03, stiffness=(-60.0, 6e6, 2e10),
                         forcing_mass_kg=0.012, transducer=coil, load_ohm=250.0)
    orbit = homoclinic_orbit(model)
    expected = 2.0**2 / 400.0 * orbit.velocity_square_integral_m2_per_s
    assert circuit_melnikov_work(model, orbit) == pytest.approx(expected, rel=1e-6)


def test_piezo_circuit_on_the_canonical_orbit():
    # Parseval with the closed-form |S(Ω)| = √2 π Ω sech(πΩ/2) (Guckenheimer & Holmes 1983
    # §4.5): D = (1/π) ∫_0^∞ θ² h/(h² + Ω² C²) · 2π² Ω² sech²(πΩ/2) dΩ, h = 1/R_l
    # (Wiggins 1990, ch. 4); integrated here by scipy.integrate.quad
    theta, cap, load = 0.3, 0.8, 1.5
    model = ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.25, stiffness=(-1.0, 1.0),
                         forcing_mass_kg=1.0,
                         transducer=PiezoCircuit(coupling_N_per_V=theta, capacitance_F=cap),
                         load_ohm=load)
    h = 1.0 / load

    def integrand(w):
        return theta**2 * h / (h * h + (w * cap) ** 2) * 2 * math.pi**2 * w * w / math.cosh(
            math.pi * w / 2) ** 2

    reference, _ = quad(integrand, 0.0, 60.0, epsabs=0, epsrel=1e-12, limit=200)
    work = circuit_melnikov_work(model, homoclinic_orbit(model))
    assert work == pytest.approx(reference / math.pi, rel=1e-6)
    # and the bound carries it: A_M = (c ∫v² + D)/(m_f |S|) at ω = 1
    sine = math.sqrt(2) * math.pi / math.cosh(math.pi / 2)
    assert melnikov_bound(model, 1 / (2 * math.pi)) == pytest.approx(
        (0.25 * 4 / 3 + reference / math.pi) / sine, rel=1e-6)


def test_no_circuit_work_without_a_resistive_path():
    # open piezo (R_l = ∞): Re Y = 0, the circuit stores energy but dissipates none
    # (Wiggins 1990, ch. 4: only the in-phase part of the perturbation enters)
    model = ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.25, stiffness=(-1.0, 1.0),
                         forcing_mass_kg=1.0,
                         transducer=PiezoCircuit(coupling_N_per_V=0.3, capacitance_F=0.8))
    assert circuit_melnikov_work(model, homoclinic_orbit(model)) == 0.0


def test_monostable_has_no_bound():
    # k1 > 0: no saddle, no homoclinic orbit (Guckenheimer & Holmes 1983 §4.5 needs the saddle)
    model = ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.25, stiffness=(1.0, 1.0),
                         forcing_mass_kg=1.0)
    assert melnikov_bound(model, 1.0) is None
    with pytest.raises(ValueError):
        homoclinic_orbit(model)


# Unequal wells: F = k1 x + k2 x² + k3 x³ (k1 < 0 < k3) has its saddle at 0 and two homoclinic
# loops of different size; each turns where U = k1x²/2 + k2x³/3 + k3x⁴/4 returns to U(0) = 0,
# at the roots of k3 x²/4 + k2 x/3 + k1/2 = 0 (quadratic formula).
UNEQUAL = ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.25, stiffness=(-1.0, 1.0),
                       forcing_mass_kg=1.0, even_stiffness=(0.0, 0.3))


def _loop_by_direct_integration(model, x_turn, omega):
    """∫ v_h² dt and S(ω) = ∫ v_h sin ωt dt over one homoclinic loop: DOP853 on m ẍ = −F(x) from
    rest at the turning point (Hairer, Nørsett & Wanner 1993, §II.10), then scipy's quad on its
    dense output, doubled for the half of the loop before t = 0 (x_h even, v_h odd).  Stopped
    when x is 1e-7 of x_t from the saddle: the loop beyond adds parts of that order to S, and
    closer in the integration drifts off the separatrix (the saddle is unstable)."""

    def near_saddle(t, y):
        return abs(y[0]) - 1e-7 * abs(x_turn)

    near_saddle.terminal = True
    sol = solve_ivp(lambda t, y: [y[1], -model.restoring_force(y[0]) / model.mass_kg],
                    (0.0, 200.0), [x_turn, 0.0], method="DOP853", rtol=1e-12, atol=1e-16,
                    events=near_saddle, dense_output=True)
    assert sol.status == 1
    end = float(sol.t_events[0][0])
    options = dict(epsabs=0.0, epsrel=1e-11, limit=500)
    square, _ = quad(lambda t: sol.sol(t)[1] ** 2, 0.0, end, **options)
    sine, _ = quad(lambda t: sol.sol(t)[1] * math.sin(omega * t), 0.0, end, **options)
    return 2.0 * square, 2.0 * sine


@pytest.mark.parametrize("omega", [0.5, 1.0, 2.0])
def test_unequal_wells_bound_by_direct_quadrature(omega):
    # Melnikov's integral on each loop of the asymmetric potential (Guckenheimer & Holmes 1983,
    # §4.5; Wiggins 1990, Introduction to Applied Nonlinear Dynamical Systems and Chaos, ch. 4):
    # the manifolds cross along a loop when m_f A |S(ω)| > c ∫ v_h² dt, and the lower of the two
    # loops' amplitudes bounds chaotic hopping.  Reference: direct time integration of each loop
    # (above), against the module's quadrature in the angle ψ; 1e-6 covers the reference's
    # truncation near the saddle (1e-7 of S) and both methods' error.
    k1, k2, k3 = -1.0, 0.3, 1.0
    root = math.sqrt((k2 / 3) ** 2 - k3 * k1 / 2)
    turns = ((-k2 / 3 - root) / (k3 / 2), (-k2 / 3 + root) / (k3 / 2))
    bounds = []
    for side, x_turn in zip((-1, 1), turns):
        square, sine = _loop_by_direct_integration(UNEQUAL, x_turn, omega)
        orbit = homoclinic_orbit(UNEQUAL, side)
        assert orbit.turning_point_m == pytest.approx(x_turn, rel=1e-12)
        assert orbit.velocity_square_integral_m2_per_s == pytest.approx(square, rel=1e-9)
        assert abs(velocity_sine_transform(orbit, np.array([omega]))[0]) == pytest.approx(
            abs(sine), rel=1e-6)
        bounds.append(0.25 * square / (1.0 * abs(sine)))
    assert bounds[0] != pytest.approx(bounds[1], rel=1e-2)  # the two loops differ
    assert melnikov_bound(UNEQUAL, omega / (2 * math.pi)) == pytest.approx(min(bounds), rel=1e-6)


def test_unequal_wells_loop_follows_the_motion():
    # the loop's x_h(t) and v_h(t) against the same direct integration at a few times; the
    # integration drifts off the separatrix as e^(λt) from its rounding, hence 1e-9 absolute
    orbit = homoclinic_orbit(UNEQUAL, -1)
    t = np.array([0.0, 0.5, 1.5, 3.0, 6.0, 12.0])
    sol = solve_ivp(lambda _, y: [y[1], -UNEQUAL.restoring_force(y[0])], (0.0, 12.0),
                    [orbit.turning_point_m, 0.0], method="DOP853", rtol=1e-12, atol=1e-16,
                    t_eval=t)
    np.testing.assert_allclose(homoclinic_deflection(orbit, t), sol.y[0], rtol=1e-8, atol=1e-9)
    np.testing.assert_allclose(homoclinic_velocity(orbit, -t), -sol.y[1], rtol=1e-8, atol=1e-9)
