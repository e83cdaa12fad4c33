"""Monte Carlo mean power under random excitation, against exact white-noise results, the
Kramers escape rate and the linear random-vibration integral."""

import math

import numpy as np
import pytest

from harvester.analysis.kramers import (
    energy_diffusion_rate,
    separatrix_action,
    spatial_diffusion_rate,
    turnover_factor,
    white_noise_escape_rates,
)
from harvester.analysis.linearisation import linear_random_response, statistical_linearisation
from harvester.analysis.random_power import mean_with_ci, random_mean_power
from harvester.case.spectra import flat_band_psd
from harvester.model import CoilCircuit, PiezoCircuit, ReducedModel

# unit double well of Hänggi, Talkner & Borkovec (1990): U = −x²/2 + x⁴/4, m = 1
UNIT_WELL = (-1.0, 1.0)
RESISTIVE_COIL = CoilCircuit(flux_linkage_V_s_per_m=1.0, resistance_ohm=0.0, inductance_H=0.0)


def white(level, top_Hz):
    """Band-limited white base acceleration of one-sided PSD `level` from 0 to `top_Hz`."""
    return flat_band_psd(0.0, top_Hz, math.sqrt(level * top_Hz))


# -- exact white-noise identity ----------------------------------------------------------------


@pytest.mark.parametrize("stiffness", [(1.0, 0.5), UNIT_WELL], ids=["monostable", "bistable"])
def test_white_noise_power_is_independent_of_the_potential(stiffness):
    # Caughey (1963), J. Acoust. Soc. Am. 35:1706; Daqaq (2012), Nonlinear Dyn. 69:1063;
    # Halvorsen (2008), J. Microelectromech. Syst. 17:1061: for m ẍ + (c_m + c_e) ẋ + F(x) = −m a
    # with a white of one-sided PSD G, E[ẋ²] = m G/(4(c_m + c_e)) for any F, so the resistive
    # load (zero inductance, no coil resistance) takes P = m G c_e/(4(c_m + c_e)).  The input
    # power is m G/4 for any system.  White noise is cut at 20 Hz here, ~100× the dynamics
    # (the step of 0.01 s resolves it): the missing tail ∫ G/(2πf)² df is a share γ/(π² f_top)
    # = 0.2 % of the power, far inside the ±3 % interval.
    c_m, c_e, level = 0.2, 0.2, 0.5
    model = ReducedModel(
        1.0, c_m, stiffness, 1.0, RESISTIVE_COIL, 1.0 / c_e, linear_stiffness_N_per_m=1.0
    )
    result = random_mean_power(
        model,
        white(level, 20.0),
        target_relative_half_width=0.03,
        realisations=64,
        seed=1,
        step_s=0.01,
    )
    assert not result.warnings
    expected = level * c_e / (4.0 * (c_m + c_e))
    low, high = result.design.power_W.ci95
    assert result.target_reached
    assert low <= expected <= high
    assert result.design.input_power_W.mean == pytest.approx(level / 4.0, rel=0.03)
    # the magnet-free baseline obeys the same identity
    b_low, b_high = result.baseline.power_W.ci95
    assert b_low <= expected <= b_high


@pytest.mark.parametrize("load_ohm", [2e3, 2e4, 2e5])
def test_no_harvester_beats_the_white_noise_bound(load_ohm):
    # after Daqaq (2012) and Halvorsen (2008), harvester/METHODS.md §8: under white base
    # acceleration of one-sided PSD G no harvester of proof mass m collects more than m G/4 —
    # here a strongly coupled piezo double well (k² ≈ 0.3) at three loads around its match
    mass, k = 0.01, 0.01 * (2 * math.pi * 20.0) ** 2
    piezo = PiezoCircuit(coupling_N_per_V=2e-3, capacitance_F=50e-9)
    model = ReducedModel(
        mass, 0.005, (-k / 2, k / 2 / 1e-3**2), mass, piezo, load_ohm, linear_stiffness_N_per_m=k
    )
    level = 0.2
    result = random_mean_power(
        model,
        white(level, 400.0),
        target_relative_half_width=0.05,
        realisations=32,
        seed=2,
        baseline=False,
    )
    bound = mass * level / 4.0
    assert result.design.power_W.ci95[0] < bound
    assert result.mean_power_W < bound
    assert result.design.input_power_W.mean == pytest.approx(bound, rel=0.05)


def test_linear_baseline_matches_the_random_vibration_integral():
    # Crandall & Mark (1963), Random Vibration in Mechanical Systems, ch. 2: the stationary
    # power of a linear system is ∫ G |H|² df (computed exactly by linear_random_response);
    # the Monte Carlo interval must contain it.  Band 5–80 Hz around a 20 Hz beam.
    mass, k = 0.01, 0.01 * (2 * math.pi * 20.0) ** 2
    piezo = PiezoCircuit(coupling_N_per_V=1e-3, capacitance_F=50e-9)
    model = ReducedModel(
        mass, 0.025, (-k / 2, k / 2 / 1e-3**2), mass, piezo, 1.6e5, linear_stiffness_N_per_m=k
    )
    band = flat_band_psd(5.0, 80.0, 3.0)
    result = random_mean_power(
        model, band, target_relative_half_width=0.03, realisations=48, seed=0
    )
    exact = linear_random_response(model.without_magnets(), k, band).mean_power_W
    low, high = result.baseline.power_W.ci95
    assert low <= exact <= high
    assert result.to_dict()["linear_power_W"] == result.baseline.power_W.mean


# -- Kramers escape ----------------------------------------------------------------------------


def test_kramers_rates_for_the_unit_double_well():
    # Hänggi, Talkner & Borkovec (1990), Rev. Mod. Phys. 62:251: unit double well,
    # k_BT = 1/16, γ = 1: ω_a = √2, ω_b = 1, ΔU = 1/4, r_SD = 0.00255 per unit time.
    # The closed form, written out: (√2/2π)(√(1/4 + 1) − 1/2) e⁻⁴ = 0.0025478.
    closed_form = math.sqrt(2) / (2 * math.pi) * (math.sqrt(1.25) - 0.5) * math.exp(-4.0)
    r_sd = spatial_diffusion_rate(math.sqrt(2.0), 1.0, 1.0, 4.0)
    assert r_sd == pytest.approx(closed_form, rel=1e-12)
    assert r_sd == pytest.approx(0.00255, abs=5e-6)
    # the same through the model: one-sided PSD G = 4 γ k_BT = 1/4 gives k_BT = 1/16
    model = ReducedModel(1.0, 1.0, UNIT_WELL, 1.0)
    rates = white_noise_escape_rates(model, 0.25)
    assert rates.temperature_m2_per_s2 == pytest.approx(1.0 / 16.0, rel=1e-12)
    assert rates.barrier_over_temperature == pytest.approx(4.0, rel=1e-12)
    assert rates.spatial_diffusion_per_s == pytest.approx(closed_form, rel=1e-9)


def test_separatrix_action_and_energy_diffusion():
    # I_b = ∮ v dx on one well's separatrix loop = 4/3 for U = −x²/2 + x⁴/4 (Hänggi, Talkner
    # & Borkovec 1990); r_ED = Δ (ω_a/2π) e^(−ΔU/k_BT) is linear in Δ
    assert separatrix_action(ReducedModel(1.0, 0.1, UNIT_WELL, 1.0)) == pytest.approx(
        4 / 3, rel=1e-9
    )
    # scaling check: U = k1 x²/2 + k3 x⁴/4 with mass m has I_b = (4/3)(|k1|^(3/2)/(k3 √m))
    m, k1, k3 = 0.01, -50.0, 2e7
    expected = 4 / 3 * abs(k1) ** 1.5 / (k3 * math.sqrt(m))
    assert separatrix_action(ReducedModel(m, 0.1, (k1, k3), m)) == pytest.approx(expected, rel=1e-6)
    assert energy_diffusion_rate(math.sqrt(2), 0.2, 4.0) == pytest.approx(
        0.2 * math.sqrt(2) / (2 * math.pi) * math.exp(-4.0), rel=1e-12
    )


def test_turnover_factor_limits():
    # Mel'nikov & Meshkov (1986), J. Chem. Phys. 85:1018 (formula from memory): A(Δ) → Δ as
    # Δ → 0 (energy diffusion) and A(Δ) → 1 as Δ → ∞ (spatial diffusion), increasing between
    assert turnover_factor(1e-4) == pytest.approx(1e-4, rel=0.02)
    assert turnover_factor(50.0) == pytest.approx(1.0, abs=1e-6)
    values = [turnover_factor(d) for d in (0.01, 0.1, 1.0, 10.0)]
    assert all(a < b for a, b in zip(values, values[1:]))


@pytest.mark.parametrize(
    "gamma, limit, tolerance",
    [(20.0, "spatial", 1e-3), (1e-6, "energy", 0.01)],
    ids=["strong damping", "light damping"],
)
def test_hop_rate_limits(gamma, limit, tolerance):
    # unit double well at k_BT = 1/16 (one-sided G = 4 γ k_BT), Δ = γ (4/3)/k_BT.
    # Strong damping (Δ = 427): every escape settles, hops = r_SD (Kramers 1940, Physica 7:284).
    # Light damping (Δ = 2e-5): energy diffusion, an escaped beam is equally likely to settle in
    # either well, so hops = r_ED/2 in a symmetric double well (Hänggi, Talkner & Borkovec 1990,
    # Rev. Mod. Phys. 62:251, §V).  The bridge A(Δ)²/A(2Δ) r_SD (Mel'nikov 1991, Phys. Rep.
    # 209:1, from memory) approaches r_ED/2 as 1 − O(√Δ), hence the 1 % at Δ = 2e-5.
    model = ReducedModel(1.0, gamma, UNIT_WELL, 1.0)
    rates = white_noise_escape_rates(model, 4.0 * gamma / 16.0)
    expected = (
        rates.spatial_diffusion_per_s if limit == "spatial" else 0.5 * rates.energy_diffusion_per_s
    )
    assert rates.turnover_hop_per_s == pytest.approx(expected, rel=tolerance)
    # a hop needs an escape first: hops never outnumber escapes (A increases with Δ)
    assert rates.turnover_hop_per_s <= rates.turnover_escape_per_s


def test_monte_carlo_hop_rate_matches_kramers():
    # Hänggi, Talkner & Borkovec (1990): unit double well, k_BT = 1/16, γ = 1 → r_SD = 0.00255;
    # a Monte Carlo run gives ≈ 0.0024 (the formula at ΔU/k_BT = 4 is slightly high).
    # 512 realisations × 1000 time units give ~1200 settled hops, a ±6 % interval; accept within
    # 15 % of r_SD.
    # White noise G = 4 γ k_BT = 1/4 is cut at 5 Hz, ~20× the well frequency.
    model = ReducedModel(1.0, 1.0, UNIT_WELL, 1.0)
    result = random_mean_power(
        model, white(0.25, 5.0), realisations=512, seed=4, duration_s=1000.0, baseline=False
    )
    rate = result.design.hop_rate_per_s
    assert rate.mean == pytest.approx(0.00255, rel=0.15)
    assert rate.ci95[0] < 0.0024 < rate.ci95[1] or abs(rate.mean - 0.0024) < 0.0003
    assert result.orbits[0]["kind"] == "chaotic"
    assert sum(result.design.well_share) == pytest.approx(1.0, abs=1e-9)
    assert result.design.well_share[0] == pytest.approx(0.5, abs=0.05)


# -- linearisation against the Monte Carlo reference ------------------------------------------

MASS, K = 0.01, 0.01 * (2 * math.pi * 20.0) ** 2
PIEZO_MODEL = ReducedModel(
    MASS,
    2 * 0.01 * MASS * 2 * math.pi * 20.0,
    (-K / 2, K / 2 / 1e-3**2),
    MASS,
    PiezoCircuit(coupling_N_per_V=1e-3, capacitance_F=50e-9),
    1.0 / (2 * math.pi * 20.0 * 50e-9),
    linear_stiffness_N_per_m=K,
)


@pytest.mark.parametrize(
    "band, kind",
    [(flat_band_psd(15.0, 35.0, 0.5), "intrawell"), (flat_band_psd(0.0, 200.0, 20.0), "interwell")],
    ids=["weak-narrow-intrawell", "strong-broad-interwell"],
)
def test_linearisation_tracks_the_monte_carlo_in_its_range(band, kind):
    # Gaussian closure (Roberts & Spanos 1990, ch. 5) is approximate; in its range — weak noise
    # that never hops, or broad-band noise that hops all the time — it should be within 10 % of
    # the Monte Carlo (±3 % interval).  Between (onset of hopping) it can be off by 2×.
    estimate = statistical_linearisation(PIEZO_MODEL, band)
    branch = next(b for b in estimate.branches if b.kind == kind)
    result = random_mean_power(
        PIEZO_MODEL, band, target_relative_half_width=0.03, realisations=64, seed=5, baseline=False
    )
    assert branch.mean_power_W == pytest.approx(result.mean_power_W, rel=0.10)
    assert "approximate" in estimate.method


# -- driver behaviour --------------------------------------------------------------------------


def test_same_seed_same_result_and_progress_is_reported():
    calls = []
    band = flat_band_psd(10.0, 40.0, 1.0)
    first = random_mean_power(
        PIEZO_MODEL,
        band,
        realisations=8,
        seed=9,
        duration_s=5.0,
        progress=lambda done, total: calls.append((done, total)),
    )
    again = random_mean_power(PIEZO_MODEL, band, realisations=8, seed=9, duration_s=5.0)
    other = random_mean_power(PIEZO_MODEL, band, realisations=8, seed=10, duration_s=5.0)
    assert first.to_dict() == again.to_dict()
    assert first.mean_power_W != other.mean_power_W
    assert calls and calls[-1][0] >= 5.0 and all(d <= t for d, t in calls)


def test_cap_gives_a_warning_and_the_result_names_its_keys():
    band = flat_band_psd(10.0, 40.0, 1.0)
    result = random_mean_power(
        PIEZO_MODEL,
        band,
        target_relative_half_width=1e-4,
        realisations=8,
        seed=1,
        max_duration_s=2.0,
    )
    d = result.to_dict()
    assert not d["target_reached"]
    assert any("cap" in w for w in d["warnings"])
    for key in (
        "mean_power_W",
        "ci95_W",
        "hop_rate_per_s",
        "rms_voltage_V",
        "linear_power_W",
        "linear_ci95_W",
        "well_share",
        "orbits",
        "method",
    ):
        assert key in d
    assert d["ci95_W"][0] < d["mean_power_W"] < d["ci95_W"][1]


def test_travel_limit_is_flagged_not_hidden():
    from dataclasses import replace

    tight = replace(PIEZO_MODEL, travel_limit_m=1.2e-3)  # just beyond the wells at ±1 mm
    result = random_mean_power(
        tight,
        flat_band_psd(0.0, 200.0, 20.0),
        realisations=8,
        seed=1,
        duration_s=2.0,
        baseline=False,
    )
    assert result.design.flagged > 0
    assert not result.trusted and result.to_dict()["trusted"] is False
    assert any("travel limit" in w for w in result.warnings)
    assert all(math.isfinite(v) for v in result.design.power_W.ci95)


def test_confidence_interval_is_students():
    # Student (1908), Biometrika 6:1; t_(0.975, 3) = 3.182446 (statistical tables, e.g.
    # Abramowitz & Stegun 1964, Table 26.10): for 1, 2, 3, 4 the interval is 2.5 ± 3.1824·s/2
    estimate = mean_with_ci(np.array([1.0, 2.0, 3.0, 4.0]))
    half = 3.182446 * np.std([1, 2, 3, 4], ddof=1) / 2.0
    assert estimate.mean == 2.5
    assert estimate.ci95[1] - 2.5 == pytest.approx(half, rel=1e-6)


def test_no_separatrix_loop_is_said_not_searched_forever():
    # U = −x²/2 + x⁴/4 − 0.2x⁶/6 peaks at x² = (1 + √0.2)/0.4 (F = 0 beyond the well) below
    # U(0): no separatrix loop exists, so there is no energy-diffusion rate to give
    # (Hänggi, Talkner & Borkovec 1990, Rev. Mod. Phys. 62:251, §V needs the loop)
    from harvester.analysis.kramers import separatrix_action
    from harvester.analysis.melnikov import NoHomoclinicOrbit

    x_top = math.sqrt((1 + math.sqrt(0.2)) / 0.4)
    assert -x_top**2 / 2 + x_top**4 / 4 - 0.2 * x_top**6 / 6 < 0.0
    model = ReducedModel(1.0, 0.1, (-1.0, 1.0, -0.2), 1.0)
    with pytest.raises(NoHomoclinicOrbit):
        separatrix_action(model)
