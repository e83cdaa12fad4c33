"""A measured shaker record against the model: forcing, section, hops, correlation dimension,
Lyapunov exponent and power, each checked against a published value or a reference library."""

from __future__ import annotations

import importlib.util
import math
from pathlib import Path

import numpy as np
import pytest

from harvester.analysis.measured import (
    correlation_dimension,
    count_hops,
    identify_forcing,
    mean_power,
    poisson_rate_interval,
    rosenstein_exponent,
    section_orbit,
    trace_record,
)
from harvester.case.measurements import ResponseRecord
from harvester.dynamics.integrator import simulate_tone
from harvester.dynamics.lyapunov import largest_lyapunov_exponent
from harvester.errors import CaseError
from harvester.model import PiezoCircuit, ReducedModel

UNIT_FREQUENCY = 1.0 / (2.0 * math.pi)  # ω = 1 in the unit double well


def henon(n: int, a: float = 1.4, b: float = 0.3, skip: int = 1000) -> np.ndarray:
    """Points of the Hénon map's attractor (Hénon 1976, Commun. Math. Phys. 50:69)."""
    x, y = 0.1, 0.1
    out = np.empty((n, 2))
    for i in range(n + skip):
        x, y = 1.0 - a * x * x + y, b * x
        if i >= skip:
            out[i - skip] = x, y
    return out


def nolds_measures():
    """`nolds.measures`, loaded without the package's __init__: nolds 0.6.3 reads its bundled
    datasets there with importlib.resources.files(<module>), which Python 3.11 refuses, while the
    estimators themselves need nothing of it."""
    try:
        import nolds

        return nolds
    except TypeError:
        spec = importlib.util.find_spec("nolds")
        path = Path(spec.origin).parent / "measures.py"
        module_spec = importlib.util.spec_from_file_location("nolds_measures", path)
        module = importlib.util.module_from_spec(module_spec)
        module_spec.loader.exec_module(module)
        return module


def unit_double_well(delta: float, model_extra: dict | None = None) -> ReducedModel:
    """u'' + δu' − u + u³ = −γ cos τ in SI with unit scales (methods of Guckenheimer & Holmes
    1983, §2.2)."""
    return ReducedModel(mass_kg=1.0, damping_N_s_per_m=delta, stiffness=(-1.0, 1.0),
                        forcing_mass_kg=1.0, **(model_extra or {}))


def model_section(delta: float, gamma: float = 0.30, periods: int = 8000):
    model = unit_double_well(delta)
    run = simulate_tone(model, gamma, UNIT_FREQUENCY, 1.0, 0.0, transient_periods=200,
                        strobe_periods=periods, steps_per_period=128)
    return model, run, np.column_stack((run.strobe_x_m[0], run.strobe_v_mps[0]))


def rk4(rates, state: tuple[float, float, float], dt: float, samples: int, *,
        substeps: int = 1, skip: int = 0) -> np.ndarray:
    """Classical RK4 in plain Python, independent of the compiled integrator: `samples` states
    (x, ẋ, q), one every `substeps` steps of `dt` after `skip` samples' worth of steps;
    rates(t, x, v, q) → (ẋ, v̇, q̇)."""
    out = np.empty((samples, 3))
    x, v, q = state
    t = 0.0
    for s in range((skip + samples) * substeps):
        if s >= skip * substeps and s % substeps == 0:
            out[s // substeps - skip] = x, v, q
        k1 = rates(t, x, v, q)
        k2 = rates(t + dt / 2, x + dt / 2 * k1[0], v + dt / 2 * k1[1], q + dt / 2 * k1[2])
        k3 = rates(t + dt / 2, x + dt / 2 * k2[0], v + dt / 2 * k2[1], q + dt / 2 * k2[2])
        k4 = rates(t + dt, x + dt * k3[0], v + dt * k3[1], q + dt * k3[2])
        x += dt / 6 * (k1[0] + 2 * k2[0] + 2 * k3[0] + k4[0])
        v += dt / 6 * (k1[1] + 2 * k2[1] + 2 * k3[1] + k4[1])
        q += dt / 6 * (k1[2] + 2 * k2[2] + 2 * k3[2] + k4[2])
        t += dt
    return out


def model_rates(model: ReducedModel, base):
    """rates(t, x, v, q) of the reduced model under base acceleration base(t) [m/s²]."""
    lag, coupling, loss = model.circuit_coefficients()
    m, c, mf = model.mass_kg, model.damping_N_s_per_m, model.forcing_mass_kg

    def rates(t, x, v, q):
        force = sum(k * x ** (2 * j + 1) for j, k in enumerate(model.stiffness))
        accel = (-c * v - force - coupling * q - mf * base(t)) / m
        return v, accel, (coupling * v - loss * q) / lag if lag else 0.0

    return rates


def synthesise(model: ReducedModel, amplitude: float, frequency: float, periods: int, *,
               per_period: int = 32, substeps: int = 4, skip: int = 50, phase: float = 0.3,
               noise_m: float = 0.0, x0: float = 1.0, seed: int = 0) -> ResponseRecord:
    """A shaker record of a known model (`rk4`): base acceleration A cos(ωt + φ), the tip
    displacement with white measurement noise, and the voltage across the load where the
    model has a piezo."""
    omega = 2.0 * math.pi * frequency
    rates = model_rates(model, lambda t: amplitude * math.cos(omega * t + phase))
    n = periods * per_period
    out = rk4(rates, (x0, 0.0, 0.0), 1.0 / (frequency * per_period * substeps), n,
              substeps=substeps, skip=skip * per_period)
    time_s = (skip * per_period + np.arange(n)) / (per_period * frequency)
    noise = noise_m * np.random.default_rng(seed).standard_normal(n)
    piezo = isinstance(model.transducer, PiezoCircuit)
    return ResponseRecord(
        time_s=time_s, base_acceleration_mps2=amplitude * np.cos(omega * time_s + phase),
        tip_displacement_m=out[:, 0] + noise, tip_velocity_mps=None,
        voltage_V=out[:, 2] if piezo else None, load_ohm=model.load_ohm if piezo else None,
        sample_rate_Hz=per_period * frequency, source="synthetic.csv")


def tone_record(amplitude: float, frequency: float, *, noise: float, n: int = 20_000,
                fs: float = 1000.0, seed: int = 1) -> ResponseRecord:
    rng = np.random.default_rng(seed)
    t = np.arange(n) / fs
    a = amplitude * np.cos(2 * np.pi * frequency * t + 0.7) + noise * rng.standard_normal(n)
    return ResponseRecord(t, a, np.sin(2 * np.pi * frequency * t), None, None, None, fs,
                          source="tone.csv")


# -- forcing ------------------------------------------------------------------------------------
def test_tone_is_found_with_the_cramer_rao_interval():
    # A tone in white noise of variance σ²: the least-squares amplitude is efficient, with
    # variance 2σ²/N (Rife & Boorstyn 1974, IEEE Trans. Inf. Theory 20:591, eq. 13 and the
    # Cramér–Rao bound); so the 95 % half-width is 1.96 σ √(2/N).  Tolerance: the fit's
    # covariance uses the sample residual variance (about 1 % scatter at N = 20 000), so 5 %.
    record = tone_record(2.0, 24.6, noise=0.2)
    forcing = identify_forcing(record, "tone")
    assert forcing.kind == "tone"
    assert forcing.frequency_ci95_Hz[0] <= 24.6 <= forcing.frequency_ci95_Hz[1]
    assert forcing.amplitude_ci95_mps2[0] <= 2.0 <= forcing.amplitude_ci95_mps2[1]
    half = 0.5 * (forcing.amplitude_ci95_mps2[1] - forcing.amplitude_ci95_mps2[0])
    assert half == pytest.approx(1.959964 * 0.2 * math.sqrt(2.0 / 20_000), rel=0.05)
    assert forcing.phase_rad == pytest.approx(0.7, abs=0.01)
    assert forcing.rms_mps2 == pytest.approx(math.sqrt(2.0**2 / 2 + 0.2**2), rel=0.01)


def test_no_forcing_line_and_too_short_records_are_refused():
    noise = tone_record(0.05, 24.6, noise=1.0)
    with pytest.raises(CaseError) as exc:
        identify_forcing(noise, "tone")
    assert "no forcing line" in str(exc.value) and "tone.csv" in str(exc.value)
    assert identify_forcing(noise, "auto").kind == "random"
    short = tone_record(2.0, 24.6, noise=0.01, n=2000)  # 49 periods
    with pytest.raises(CaseError) as exc:
        identify_forcing(short, "auto")
    assert "too short" in str(exc.value) and "at least 64" in str(exc.value)


# -- hops -----------------------------------------------------------------------------------------
def test_hops_count_only_arrivals_in_the_other_well():
    # wells at ±1: a swing over the saddle to −0.5 that returns is a recrossing, not a hop
    x = np.array([1.0, 0.2, -0.5, 0.3, 1.1, 0.0, -1.0, -0.4, -1.2, 0.5, 1.0])
    hops = count_hops(np.arange(x.size, dtype=float), x, (-1.0, 1.0))
    assert hops.count == 2
    np.testing.assert_allclose(hops.times_s, [6.0, 10.0])
    np.testing.assert_allclose(hops.dwell_times_s, [4.0])


def test_poisson_rate_interval_is_garwoods():
    # Exact 95 % Poisson limits (Garwood 1936, Biometrika 28:437; tabulated e.g. in Ulm 1990,
    # Am. J. Epidemiol. 131:373): n = 0 → (0, 3.689); n = 10 → (4.795, 18.39)
    assert poisson_rate_interval(0, 1.0) == pytest.approx((0.0, 3.689), abs=5e-4)
    assert poisson_rate_interval(10, 2.0) == pytest.approx((4.795 / 2, 18.39 / 2), abs=5e-3)


# -- correlation dimension ---------------------------------------------------------------------
def test_henon_correlation_dimension():
    # Grassberger & Procaccia (1983), Physica D 9:189: ν = 1.21 ± 0.01 for the Hénon map
    # (a = 1.4, b = 0.3) from about 15 000 points.  Tolerance ±0.03: the estimate with the
    # automatic scaling range, at the same number of points, scatters by about ±0.01 between
    # samples of the attractor, and a finite set biases it slightly low.
    result = correlation_dimension(henon(16_000))
    assert result.dimension == pytest.approx(1.21, abs=0.03)
    low, high = result.scaling_range
    assert high / low >= 10**0.5
    assert result.interval[0] <= result.dimension <= result.interval[1]


def test_correlation_dimension_agrees_with_nolds():
    # nolds.corr_dim (PyPI, test-only reference) on the same data: the Hénon map's x series,
    # delay-embedded in two dimensions, over the radii our automatic range chose.  Tolerance 5 %:
    # nolds counts each point as its own neighbour, which lifts C(r) by 1/N at the small end.
    x = henon(4001)[:, 0]
    ours = correlation_dimension(np.column_stack((x[:-1], x[1:])))
    radii = np.geomspace(*ours.scaling_range, 12)
    reference = nolds_measures().corr_dim(x, 2, rvals=radii, fit="poly")
    assert ours.dimension == pytest.approx(reference, rel=0.05)


def test_forced_double_well_section_dimension_falls_with_damping():
    # The chaotic forced double well u'' + δu' − u + u³ = γ cos ωτ, ω = 1, γ = 0.30
    # (Guckenheimer & Holmes 1983, §2.2; chaotic at δ = 0.25): its section is a strange
    # attractor of dimension between 1 and 2, and more damping contracts it toward a curve
    # (common practice).  Grassberger & Procaccia (1983) show ν ≤ the information dimension,
    # which the Kaplan–Yorke dimension 1 + λ1/|λ2| estimates (Kaplan & Yorke 1979, Springer
    # LNM 730:204; λ1 + λ2 = −δ per unit time for this flow's section): ν must not
    # exceed it (tolerance 0.05, the estimate's scatter at 8000 points).
    dimensions = []
    for delta in (0.15, 0.25):
        model, run, points = model_section(delta)
        result = correlation_dimension(points)
        lam = largest_lyapunov_exponent(model, 0.30, UNIT_FREQUENCY, run.x_m, run.v_mps,
                                        transient_periods=0, periods=1000).exponent_per_s[0]
        assert lam > 0.0
        kaplan_yorke = 1.0 + lam / (lam + delta)
        assert 1.0 < result.dimension < 2.0
        assert result.dimension <= kaplan_yorke + 0.05
        dimensions.append(result.dimension)
    assert dimensions[1] < dimensions[0]


def test_a_periodic_section_is_a_finite_set():
    # γ = 0.18: period-1 intrawell orbits (common practice, canonical double well)
    model = unit_double_well(0.25)
    run = simulate_tone(model, 0.18, UNIT_FREQUENCY, 1.0, 0.0, transient_periods=300,
                        strobe_periods=200, steps_per_period=128)
    points = np.column_stack((run.strobe_x_m[0], run.strobe_v_mps[0]))
    assert section_orbit(points, int(run.hops[0])) == ("intrawell", 1)


# -- Lyapunov exponent ----------------------------------------------------------------------------
def test_rosenstein_exponent_of_the_henon_map():
    # Largest Lyapunov exponent of the Hénon map 0.418 per iteration (Wolf, Swift, Swinney &
    # Vastano 1985, Physica D 16:285, Table 1: 0.603 bits); Rosenstein, Collins & De Luca (1993,
    # Physica D 65:117) recover it within a few per cent from a few thousand points.  Tolerance
    # 6 %: the fit of the divergence curve's start is slightly low at 5000 points.
    result = rosenstein_exponent(henon(5000), 1.0)
    assert result.exponent_per_s == pytest.approx(0.418, rel=0.06)
    assert result.interval_per_s[0] <= result.exponent_per_s <= result.interval_per_s[1]


def test_rosenstein_exponent_of_the_section_matches_benettin():
    # The section of the chaotic double well (δ = 0.25, γ = 0.30) against Benettin's tangent-map
    # estimate on the same model (harvester.dynamics.lyapunov; canonical value ≈ 0.12 per unit
    # time, common practice).  Tolerance 15 %: Rosenstein's fit on a section of 3000 points
    # runs about 5–10 % low (its neighbours start a finite distance apart).
    model, run, points = model_section(0.25, periods=3000)
    benettin = largest_lyapunov_exponent(model, 0.30, UNIT_FREQUENCY, run.x_m, run.v_mps,
                                         transient_periods=0, periods=2000).exponent_per_s[0]
    result = rosenstein_exponent(points, 2.0 * math.pi)
    assert result.exponent_per_s == pytest.approx(benettin, rel=0.15)


# -- power ---------------------------------------------------------------------------------------
def test_mean_power_of_a_sine_across_a_resistor():
    # P = V²/(2R) for a sine of amplitude V across R (Joule's law averaged over a cycle)
    t = np.arange(100_000) / 10_000.0
    rng = np.random.default_rng(3)
    voltage = 2.0 * np.sin(2 * np.pi * 24.6 * t) + 0.05 * rng.standard_normal(t.size)
    result = mean_power(voltage, 1e3)
    expected = (2.0**2 / 2 + 0.05**2) / 1e3
    assert result.ci95_W[0] <= expected <= result.ci95_W[1]
    assert result.mean_power_W == pytest.approx(expected, rel=1e-3)


# -- a record of a known model ------------------------------------------------------------------
def test_record_of_the_chaotic_double_well_agrees_with_its_model():
    # A record synthesised from the canonical chaotic double well (δ = 0.25, γ = 0.30, ω = 1;
    # Guckenheimer & Holmes 1983, §2.2) with 0.1 % measurement noise: the trace recovers the
    # forcing, calls the orbit chaotic as the model does, and its hop rate lies inside the
    # model's interval.  The Lyapunov exponent from 1500 section points agrees with Benettin's
    # on the model within 30 % (noise and a short section; Rosenstein et al. 1993 report
    # 10–30 % on records of this length).
    model = unit_double_well(0.25)
    record = synthesise(model, 0.30, UNIT_FREQUENCY, 1500, noise_m=0.001)
    result = trace_record(record, model, planned_frequency_Hz=UNIT_FREQUENCY,
                          planned_amplitude_mps2=0.30)
    assert result.forcing_frequency_Hz.measured == pytest.approx(UNIT_FREQUENCY, rel=1e-6)
    assert result.forcing_amplitude_mps2.inside_interval
    assert result.orbit.measured == result.orbit.predicted == "chaotic"
    assert result.hop_rate_per_s.inside_interval
    assert result.lyapunov_per_s.measured == pytest.approx(result.lyapunov_per_s.predicted,
                                                           rel=0.3)
    data = {k: v for twin in result.twins for k, v in twin.to_dict().items()}
    for key in ("forcing_frequency_Hz", "forcing_amplitude_mps2", "hop_rate_per_s", "orbit",
                "correlation_dimension", "lyapunov_per_s", "mean_power_W"):
        assert key in data and f"predicted_{key}" in data


def test_record_of_a_piezo_harvester_gives_the_models_power():
    # An intrawell period-1 response of the unit double well with a weakly coupled piezo on a
    # resistor (γ = 0.18: period-1 intrawell, common practice): the measured mean power agrees
    # with the model's within the batch-means interval, and the orbit is the model's.
    piezo = PiezoCircuit(coupling_N_per_V=0.05, capacitance_F=1.0)
    model = unit_double_well(0.25, {"transducer": piezo, "load_ohm": 1.0})
    record = synthesise(model, 0.18, UNIT_FREQUENCY, 300, skip=300)
    result = trace_record(record, model)
    assert result.orbit.measured == "intrawell" and result.orbit.inside_interval
    assert result.mean_power_W.inside_interval
    assert result.mean_power_W.measured == pytest.approx(result.mean_power_W.predicted,
                                                         rel=0.01)
    assert result.correlation_dimension.measured == 0.0


def test_random_record_of_a_known_model_agrees_with_its_monte_carlo():
    # A bistable piezo harvester (m = 5 g, k1 = −40 N/m, k3 = 4e6 N/m³) under band-limited
    # white base acceleration (5–60 Hz, 9 m/s² RMS), one 40 s record by RK4: its hops, counted
    # when the tip settles in the other well as the Monte Carlo counts them, and its power lie
    # inside the Monte Carlo's intervals under the record's own Welch PSD (the Monte Carlo is
    # checked against the white-noise identity of Caughey 1963 / Daqaq 2012 in
    # test_random_power.py).
    piezo = PiezoCircuit(coupling_N_per_V=1e-3, capacitance_F=50e-9)
    model = ReducedModel(mass_kg=5e-3, damping_N_s_per_m=0.01, stiffness=(-40.0, 4e6),
                         forcing_mass_kg=5e-3, transducer=piezo, load_ohm=1e5)
    fs, n = 2000.0, 80_000
    rng = np.random.default_rng(0)
    spectrum = np.fft.rfft(rng.standard_normal(n))
    f = np.fft.rfftfreq(n, 1.0 / fs)
    spectrum[(f < 5.0) | (f > 60.0)] = 0.0
    base = np.fft.irfft(spectrum, n)
    base *= 9.0 / np.std(base)

    def acceleration(t: float) -> float:  # the samples, joined by straight lines
        i = min(int(t * fs), n - 2)
        return base[i] + (t * fs - i) * (base[i + 1] - base[i])

    out = rk4(model_rates(model, acceleration), (math.sqrt(1e-5), 0.0, 0.0), 1.0 / fs, n)
    record = ResponseRecord(np.arange(n) / fs, base, out[:, 0], None, out[:, 2], 1e5, fs,
                            source="random.csv")
    result = trace_record(record, model, target_relative_half_width=0.2)
    assert result.measured.forcing.kind == "random"
    assert result.forcing_amplitude_mps2.measured == pytest.approx(9.0, rel=1e-9)
    assert result.hop_rate_per_s.inside_interval
    assert result.mean_power_W.inside_interval
    assert result.correlation_dimension.measured is None
