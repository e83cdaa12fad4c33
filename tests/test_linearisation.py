"""Statistical linearisation: exact for linear models, Gaussian-closure algebra, and the
comparison with the Monte Carlo reference."""

import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.linalg import solve_continuous_lyapunov
from scipy.optimize import brentq, minimize_scalar
from scipy.stats import norm

from harvester.analysis.linearisation import (
    gaussian_closure_solutions,
    gaussian_force_moments,
    linear_random_response,
    random_matched_load,
    statistical_linearisation,
)
from harvester.analysis.tone_power import linear_matched_load
from harvester.case.spectra import flat_band_psd
from harvester.model import CoilCircuit, PiezoCircuit, ReducedModel

# demo-sized beam: 10 g at 20 Hz, 1 % damping, a piezo patch near its matched load
MASS, F_N, ZETA = 0.01, 20.0, 0.01
K = MASS * (2 * math.pi * F_N) ** 2
C = 2 * ZETA * MASS * 2 * math.pi * F_N
PIEZO = PiezoCircuit(coupling_N_per_V=1e-3, capacitance_F=50e-9)
R_MATCH = 1.0 / (2 * math.pi * F_N * 50e-9)


def beam(stiffness, transducer=PIEZO, load=R_MATCH):
    return ReducedModel(MASS, C, stiffness, MASS, transducer, load, linear_stiffness_N_per_m=K)


def lyapunov_response(model, k, level):
    """Stationary covariance of ż = A z + B a for white a of one-sided PSD G: the covariance
    equation A P + P Aᵀ + B (G/2) Bᵀ = 0 (Lin 1967, Probabilistic Theory of Structural Dynamics,
    §5; Crandall & Mark 1963).  States x, ẋ, q."""
    a, g, h = model.circuit_coefficients()
    m, c, mf = model.mass_kg, model.damping_N_s_per_m, model.forcing_mass_kg
    A = np.array([[0, 1, 0], [-k / m, -c / m, -g / m], [0, g / a, -h / a]])
    B = np.array([[0.0], [-mf / m], [0.0]])
    P = solve_continuous_lyapunov(A, -B @ B.T * level / 2.0)
    return P[0, 0], P[2, 2]


def test_gaussian_moments_match_numerical_expectation():
    # reference: scipy.stats.norm.expect (adaptive quadrature over the Gaussian)
    stiffness = (-3.0, 2.0e6, 5.0e11)
    mu, sd = 4e-4, 7e-4
    force, slope = gaussian_force_moments(stiffness, mu, sd**2)

    def f(x):
        return sum(k * x ** (2 * j + 1) for j, k in enumerate(stiffness))

    def df(x):
        return sum((2 * j + 1) * k * x ** (2 * j) for j, k in enumerate(stiffness))

    assert force == pytest.approx(norm.expect(f, loc=mu, scale=sd), rel=1e-8)
    assert slope == pytest.approx(norm.expect(df, loc=mu, scale=sd), rel=1e-8)


def test_gaussian_moments_with_even_terms_match_numerical_expectation():
    # the same with k0 and k2 (reference: scipy.stats.norm.expect)
    stiffness, even = (-3.0, 2.0e6), (0.01, 4.0e3)
    mu, sd = -4e-4, 9e-4
    force, slope = gaussian_force_moments(stiffness, mu, sd**2, even)

    def f(x):
        return even[0] - 3.0 * x + even[1] * x**2 + 2.0e6 * x**3

    def df(x):
        return -3.0 + 2 * even[1] * x + 6.0e6 * x**2

    assert force == pytest.approx(norm.expect(f, loc=mu, scale=sd), rel=1e-8)
    assert slope == pytest.approx(norm.expect(df, loc=mu, scale=sd), rel=1e-8)


def test_unequal_wells_closure_in_each_well():
    # F = k1 x + k2 x² + k3 x³: under weak noise each intrawell Gaussian-closure solution sits
    # at its well (roots of k3 x² + k2 x + k1 = 0, quadratic formula) with E[F(μ + σz)] = 0,
    # that is k1 μ + k2 (μ² + σ²) + k3 (μ³ + 3μσ²) = 0 (Gaussian moments; Roberts & Spanos
    # 1990, ch. 5), and k_eq = k1 + 2 k2 μ + 3 k3 (μ² + σ²)
    x0 = 1e-3
    k1, k3 = -K / 2, K / 2 / x0**2
    k2 = 0.3 * k3 * x0
    model = ReducedModel(MASS, C, (k1, k3), MASS, PIEZO, R_MATCH, linear_stiffness_N_per_m=K,
                         even_stiffness=(0.0, k2))
    branches = statistical_linearisation(model, flat_band_psd(0.0, 200.0, 0.05)).branches
    root = math.sqrt(k2 * k2 - 4 * k3 * k1)
    wells = {1: (-k2 + root) / (2 * k3), -1: (-k2 - root) / (2 * k3)}
    intrawell = [b for b in branches if b.kind == "intrawell"]
    assert len(intrawell) == 2
    for branch in intrawell:
        mu, s2 = branch.mean_offset_m, branch.rms_displacement_m**2
        well = wells[1 if mu > 0 else -1]
        assert mu == pytest.approx(well, rel=0.05)
        balance = k1 * mu + k2 * (mu * mu + s2) + k3 * (mu**3 + 3 * mu * s2)
        assert balance == pytest.approx(0.0, abs=1e-9 * abs(k1 * well))
        assert branch.equivalent_stiffness_N_per_m == pytest.approx(
            k1 + 2 * k2 * mu + 3 * k3 * (mu * mu + s2), rel=1e-9)


@pytest.mark.parametrize(
    "transducer, load",
    [(PIEZO, R_MATCH), (PIEZO, 20 * R_MATCH), (CoilCircuit(2.0, 5.0, 0.01), 20.0)],
)
def test_linear_response_equals_the_covariance_equation(transducer, load):
    # white excitation up to 2 kHz (100× the resonance): the truncated tail of the displacement
    # integral is below 1e-6 of the total, so the two routes agree to the integration error
    model = beam((K,), transducer, load)
    band = flat_band_psd(0.0, 2000.0, 3.0)
    level = float(band.psd_m2_s4_per_Hz[0])
    var_x, var_q = lyapunov_response(model, K, level)
    response = linear_random_response(model, K, band)
    assert response.displacement_variance_m2 == pytest.approx(var_x, rel=2e-4)
    assert response.circuit_variance == pytest.approx(var_q, rel=2e-4)
    assert response.mean_power_W == pytest.approx(float(model.load_power(1.0)) * var_q, rel=2e-4)


def test_linear_oscillator_without_transducer_has_the_textbook_variance():
    # Crandall & Mark (1963), Random Vibration in Mechanical Systems, ch. 2: for white base
    # acceleration of one-sided PSD G, m ẍ + c ẋ + k x = −m a has σ_x² = m² G/(4 c k)
    model = ReducedModel(MASS, C, (K,), MASS)
    band = flat_band_psd(0.0, 2000.0, 3.0)
    level = float(band.psd_m2_s4_per_Hz[0])
    expected = MASS**2 * level / (4.0 * C * K)
    assert linear_random_response(model, K, band).displacement_variance_m2 == pytest.approx(
        expected, rel=2e-4
    )


def test_linearisation_of_a_linear_model_is_the_linear_integral():
    model = beam((K,))
    band = flat_band_psd(5.0, 80.0, 2.0)
    estimate = statistical_linearisation(model, band)
    assert [b.kind for b in estimate.branches] == ["linear"]
    exact = linear_random_response(model, K, band)
    branch = estimate.branches[0]
    assert branch.mean_power_W == pytest.approx(exact.mean_power_W, rel=1e-12)
    assert branch.rms_displacement_m**2 == pytest.approx(exact.displacement_variance_m2, rel=1e-12)


def test_cubic_double_well_closure_algebra():
    # Gaussian closure for F = k1 x + k3 x³ (Roberts & Spanos 1990, ch. 5): the intrawell branch
    # has μ² = −k1/k3 − 3σ² and k_eq = −2 k1 − 6 k3 σ²; the interwell branch k_eq = k1 + 3 k3 σ²
    x0 = 1e-3
    model = beam((-K / 2, K / 2 / x0**2))
    k1, k3 = model.k1, model.k3
    weak = statistical_linearisation(model, flat_band_psd(0.0, 200.0, 1.0)).branches
    intrawell = next(b for b in weak if b.kind == "intrawell")
    s2 = intrawell.rms_displacement_m**2
    assert intrawell.mean_offset_m**2 == pytest.approx(-k1 / k3 - 3 * s2, rel=1e-9)
    assert intrawell.equivalent_stiffness_N_per_m == pytest.approx(-2 * k1 - 6 * k3 * s2, rel=1e-9)
    strong = statistical_linearisation(model, flat_band_psd(0.0, 200.0, 20.0)).branches
    interwell = next(b for b in strong if b.kind == "interwell")
    s2 = interwell.rms_displacement_m**2
    assert interwell.mean_offset_m == 0.0
    assert interwell.equivalent_stiffness_N_per_m == pytest.approx(k1 + 3 * k3 * s2, rel=1e-9)
    # self-consistency: σ² is the linear response at k_eq
    check = linear_random_response(
        model, interwell.equivalent_stiffness_N_per_m, flat_band_psd(0.0, 200.0, 20.0)
    )
    assert s2 == pytest.approx(check.displacement_variance_m2, rel=1e-8)


def test_velocity_damped_linearisation_keeps_the_white_noise_identity():
    # Caughey (1963) / Daqaq (2012), Nonlinear Dyn. 69:1063: with a resistive coil (L = 0) the
    # mean power under white noise is m G c_e/(4(c_m + c_e)) whatever the spring, so every
    # linearised branch must give it.  Band-limiting to f_max drops the velocity tail
    # ∫ G/(2πf)² df above f_max, a share γ/(π² f_max) = 0.03 % here (γ = (c_m + c_e)/m)
    coil = CoilCircuit(flux_linkage_V_s_per_m=1.0, resistance_ohm=0.0, inductance_H=0.0)
    load = 1.0 / C  # c_e = (Bl)²/R_l = c_m
    model = beam((-K / 2, K / 2 / 1e-3**2), coil, load)
    band = flat_band_psd(0.0, 2000.0, 25.0)
    level = float(band.psd_m2_s4_per_Hz[0])
    c_e = 1.0 / load
    expected = MASS * level * c_e / (4.0 * (C + c_e))
    branches = statistical_linearisation(model, band).branches
    assert branches
    for b in branches:
        assert b.mean_power_W == pytest.approx(expected, rel=1e-3)


def test_hardening_duffing_under_white_noise_has_the_closed_form_closure():
    # Roberts & Spanos (1990), ch. 5 (Duffing oscillator): under white noise the closure
    # k_eq = k1 + 3 k3 σ² with σ² = m² G/(4 c k_eq) gives k1 σ² + 3 k3 σ⁴ = m² G/(4c)
    m, c, k1, k3 = 1.0, 0.2, 1.0, 0.5
    band = flat_band_psd(0.0, 50.0, math.sqrt(0.1 * 50.0))
    level = float(band.psd_m2_s4_per_Hz[0])
    s = m * m * level / (4.0 * c)
    sigma2 = (-k1 + math.sqrt(k1 * k1 + 12.0 * k3 * s)) / (6.0 * k3)
    (branch,) = statistical_linearisation(ReducedModel(m, c, (k1, k3), m), band).branches
    assert branch.kind == "single-well"
    assert branch.rms_displacement_m**2 == pytest.approx(sigma2, rel=1e-3)


@pytest.mark.parametrize("separation", [0.03, 0.004], ids=["3 % apart", "0.4 % apart"])
def test_two_close_interwell_roots_are_both_found(separation):
    # Gaussian closure of the cubic double well F = k1 x + k3 x³ (Roberts & Spanos 1990, ch. 5):
    # the interwell branch has k_eq = k1 + 3 k3 σ² and σ² = ∫ G m²/((k_eq − mω²)² + (cω)²) df
    # (Crandall & Mark 1963, ch. 2).  Under a flat band G the roots are the σ with
    # G = g(σ) := σ²/∫ m²/|…|² df, which has one minimum; a level just above it gives two roots
    # a chosen fraction of σ apart, both closer than a 12 % grid step.  The reference solves
    # the same equations independently: scipy.integrate.quad for the integral, then
    # scipy.optimize.minimize_scalar and brentq on g.
    x0, f_lo, f_hi = 1e-3, 15.0, 35.0
    model = ReducedModel(MASS, C, (-K / 2, K / 2 / x0**2), MASS)
    k1, k3 = model.k1, model.k3

    def unit_level_variance(sigma):
        k_eq = k1 + 3 * k3 * sigma**2

        def receptance_squared(f):
            w = 2 * math.pi * f
            return MASS**2 / ((k_eq - MASS * w * w) ** 2 + (C * w) ** 2)

        f_res = math.sqrt(k_eq / MASS) / (2 * math.pi)
        points = [f_res] if f_lo < f_res < f_hi else None
        return quad(receptance_squared, f_lo, f_hi, points=points, epsabs=0, epsrel=1e-13)[0]

    def level_needed(sigma):
        return sigma**2 / unit_level_variance(sigma)

    dip = minimize_scalar(
        level_needed, bounds=(0.7 * x0, 1.2 * x0), method="bounded", options={"xatol": 1e-13}
    )
    sigma_dip = dip.x
    # level with roots at sigma_dip (1 ± separation/2), to second order in the separation
    curvature = (level_needed(sigma_dip * 1.01) + level_needed(sigma_dip * 0.99) - 2 * dip.fun) / (
        0.01 * sigma_dip
    ) ** 2
    level = dip.fun + 0.5 * curvature * (0.5 * separation * sigma_dip) ** 2
    expected = (
        brentq(lambda s: level_needed(s) - level, 0.8 * sigma_dip, sigma_dip, xtol=1e-16),
        brentq(lambda s: level_needed(s) - level, sigma_dip, 1.2 * sigma_dip, xtol=1e-16),
    )
    # the construction is second order only, so the spacing is near, not at, the one asked for
    assert expected[1] / expected[0] - 1 == pytest.approx(separation, rel=0.3)
    band = flat_band_psd(f_lo, f_hi, math.sqrt(level * (f_hi - f_lo)))
    solutions = gaussian_closure_solutions(model, band, "interwell")
    assert len(solutions) == 2
    for solution, sigma in zip(solutions, expected):
        # the roots move by δρ/ρ' for an error δρ in the residual; near a double root ρ' is
        # small, so the tolerance allows for the trapezoid integral's ~1e-8 relative error
        assert solution.rms_displacement_m == pytest.approx(sigma, rel=1e-5)
        assert solution.equivalent_stiffness_N_per_m == pytest.approx(
            k1 + 3 * k3 * sigma**2, rel=1e-4
        )
    # the reported interwell branch is the larger-σ root
    interwell = next(
        b for b in statistical_linearisation(model, band).branches if b.kind == "interwell"
    )
    assert interwell.rms_displacement_m == pytest.approx(expected[1], rel=1e-5)


# -- the matched load under a spectrum -------------------------------------------------------


def _band_power(model, low, high, rms, load):
    """Mean load power under a flat band, ∫ G |V/A|²/R df (piezo) or ∫ G |I/A|² R df (coil), by
    adaptive quadrature of the single-mode coupled FRF (Erturk & Inman 2011, Piezoelectric
    Energy Harvesting, ch. 3; the coil by its circuit equation L i̇ + (R_c + R) i = Bl ẋ):

        X/A = −m_f / (k − mω² + iωc + iω g Y),   Y = θ/(iωC + 1/R)  or  Bl/(iωL + R_c + R),

    V or I = Y iω X; spectral response of a linear system (Newland 1993, An Introduction to
    Random Vibrations, Spectral & Wavelet Analysis, ch. 7)."""
    level = rms**2 / (high - low)
    m, c, k, mf = model.mass_kg, model.damping_N_s_per_m, model.k1, model.forcing_mass_kg
    t = model.transducer

    def density(f):
        w = 2 * math.pi * f
        if isinstance(t, PiezoCircuit):
            g, y = t.coupling_N_per_V, t.coupling_N_per_V / (1j * w * t.capacitance_F + 1 / load)
        else:
            g = t.flux_linkage_V_s_per_m
            y = g / (1j * w * t.inductance_H + t.resistance_ohm + load)
        x = -mf / (k - m * w * w + 1j * w * c + 1j * w * g * y)
        q2 = abs(y * 1j * w * x) ** 2
        return level * (q2 / load if isinstance(t, PiezoCircuit) else q2 * load)

    f_n = math.sqrt(k / m) / (2 * math.pi)
    return quad(density, low, high, points=[f_n], limit=400, epsabs=0, epsrel=1e-11)[0]


@pytest.mark.parametrize(
    "transducer",
    [PIEZO, CoilCircuit(flux_linkage_V_s_per_m=0.5, resistance_ohm=20.0, inductance_H=0.05)],
    ids=["piezo", "coil"],
)
def test_matched_load_under_a_band_is_the_spectral_optimum(transducer):
    # A linear beam (k3 = 0) under a 10–40 Hz band: the load that maximises the spectral power
    # integral, found here by quadrature and a bounded search of its own, against the one
    # random_matched_load picks.  2 % in the load (the power is flat at its maximum: 2 % moves
    # it by about 1e-4) and 0.5 % in the power (the library's trapezoid grid against quad).
    model = beam((K,), transducer=transducer, load=1.0)
    band = flat_band_psd(10.0, 40.0, 2.0)
    best = minimize_scalar(lambda u: -_band_power(model, 10.0, 40.0, 2.0, 10.0**u),
                           bounds=(0.0, 8.0), method="bounded", options={"xatol": 1e-5})
    grid = np.linspace(0.0, 8.0, 161)  # the search found the global maximum, not a local one
    assert -best.fun >= max(_band_power(model, 10.0, 40.0, 2.0, 10.0**u) for u in grid) * (1 - 1e-9)
    optimum = 10.0**best.x
    load, note = random_matched_load(model, band)
    assert load == pytest.approx(optimum, rel=0.02)
    power = linear_random_response(model.with_load(load), K, band).mean_power_W
    assert power == pytest.approx(-best.fun, rel=0.005)
    assert f"{load:.4g} Ω" in note and "statistical linearisation" in note
    # the tone optimum at the resonance is not the band's: the test can tell them apart
    tone = linear_matched_load(model, math.sqrt(K / MASS) / (2 * math.pi))
    assert abs(math.log(tone / optimum)) > math.log(1.1)
