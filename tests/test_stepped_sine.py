"""Calibration from a stepped sine about a well: the single-mode receptance fit, its agreement
with the half-power estimate and with scipy's curve_fit, the coupling it implies with a
ring-down, and bad tables."""

from __future__ import annotations

import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from harvester.analysis.calibration import calibrate_case, fit_receptance, half_power_estimate
from harvester.build import build
from harvester.case.load import load_case
from harvester.case.measurements import Ringdown, SteppedSine, read_stepped_sine
from harvester.errors import CaseError

ROOT = Path(__file__).resolve().parent.parent
COIL_CASE = ROOT / "tests" / "data" / "resistive-coil-band.toml"


def textbook_sweep(f_n: float, zeta: float, *, mass: float = 0.01, low: float = 0.8,
                   high: float = 1.2, step: float = 0.005, noise: float = 0.01,
                   phase: bool = True, seed: int = 3) -> SteppedSine:
    """A stepped sine of m ẍ + c ẋ + k x = −m a(t) at 0.005 g, written out from the textbook
    receptance X/A = −m/(k − mω² + icω) (Ewins 2000, Modal Testing, 2nd ed., §2.2, memory),
    frequencies from `low`·f_n to `high`·f_n in `step`·f_n steps, with `noise` relative
    Gaussian noise on the response's real and imaginary parts."""
    omega_n = 2 * math.pi * f_n
    k, c = mass * omega_n**2, 2 * mass * zeta * omega_n
    f = f_n * np.arange(low, high + step / 2, step)
    omega = 2 * math.pi * f
    a = np.full(f.size, 0.005 * 9.80665)
    h = -mass / (k - mass * omega**2 + 1j * c * omega)
    rng = np.random.default_rng(seed)
    x = h * a * (1 + noise * (rng.standard_normal(f.size) + 1j * rng.standard_normal(f.size)))
    return SteppedSine(f, a, np.abs(x), np.angle(x) if phase else None, "steps.csv")


def test_receptance_fit_recovers_frequency_and_damping():
    # The oscillator's natural frequency within 1 % and damping ratio within 5 % (the
    # tolerances of the task; 1 % noise on 81 steps leaves errors ten times smaller), and the
    # 95 % intervals hold the true values.
    for f_n, zeta in ((14.0, 0.02), (30.0, 0.05)):
        fit = fit_receptance(textbook_sweep(f_n, zeta))
        assert fit.well_frequency_Hz == pytest.approx(f_n, rel=0.01)
        assert fit.damping_ratio == pytest.approx(zeta, rel=0.05)
        assert fit.well_frequency_ci95_Hz[0] < f_n < fit.well_frequency_ci95_Hz[1]
        assert fit.damping_ratio_ci95[0] < zeta < fit.damping_ratio_ci95[1]
        assert fit.level_per_s2 == pytest.approx(1.0, rel=0.05)  # r = m_f/m
        assert fit.misfit_ratio < 0.05 and not fit.warnings


def test_receptance_fit_reads_a_lagging_phase_and_a_magnitude_only_table():
    lead = textbook_sweep(14.0, 0.02)
    lag = SteppedSine(lead.frequency_Hz, lead.base_acceleration_mps2, lead.tip_displacement_m,
                      -lead.phase_rad, "lag.csv")
    assert fit_receptance(lag).phase_read_as == "lag"
    assert fit_receptance(lag).damping_ratio == pytest.approx(
        fit_receptance(lead).damping_ratio, rel=1e-9)
    bare = fit_receptance(textbook_sweep(14.0, 0.02, phase=False))
    assert bare.phase_read_as == "" and bare.phase_offset_rad is None
    assert bare.damping_ratio == pytest.approx(0.02, rel=0.05)


def test_receptance_fit_agrees_with_the_half_power_bandwidth():
    # Half-power bandwidth, ζ = (f_b − f_a)/(2 f_r) (Ewins 2000, Modal Testing, 2nd ed., §4.3,
    # peak-amplitude method; memory): on finely stepped, noise-free data the two agree within
    # 2 % in ζ (the method's own error is O(ζ²) on a receptance) and 0.1 % in frequency (the
    # receptance peaks at f_n √(1 − 2ζ²): 0.04 % below f_n at ζ = 0.02).
    sweep = textbook_sweep(14.0, 0.02, step=0.001, noise=0.0)
    fit = fit_receptance(sweep)
    f_r, zeta = half_power_estimate(sweep.frequency_Hz, np.abs(sweep.receptance_m_per_mps2))
    assert f_r == pytest.approx(fit.well_frequency_Hz, rel=1e-3)
    assert zeta == pytest.approx(fit.damping_ratio, rel=0.02)


def test_receptance_fit_agrees_with_scipy_curve_fit():
    # The same least-squares problem solved by scipy.optimize.curve_fit (test-only reference)
    # on the magnitude |X/A| = r/√((ω_n² − ω²)² + (2ζω_nω)²): the estimates agree to 1e-5
    # (both are the minimum of the same sum of squares; the difference is solver tolerance).
    from scipy.optimize import curve_fit

    sweep = textbook_sweep(14.0, 0.02, phase=False, noise=0.02, seed=8)
    fit = fit_receptance(sweep)

    def magnitude(f, f_n, zeta, r):
        w, wn = 2 * np.pi * f, 2 * np.pi * f_n
        return r / np.sqrt((wn**2 - w**2) ** 2 + (2 * zeta * wn * w) ** 2)

    (f_n, zeta, r), _ = curve_fit(magnitude, sweep.frequency_Hz,
                                  np.abs(sweep.receptance_m_per_mps2), p0=(13.5, 0.03, 1.2),
                                  xtol=1e-14, ftol=1e-14)
    assert fit.well_frequency_Hz == pytest.approx(f_n, rel=1e-5)
    assert fit.damping_ratio == pytest.approx(zeta, rel=1e-5)
    assert fit.level_per_s2 == pytest.approx(r, rel=1e-5)


def test_sweep_and_ringdown_recover_the_coil_coupling(tmp_path):
    # A known reduced model (tests/data/resistive-coil-band.toml: m = 10 g, k1 = −40 N/m,
    # k3 = 4e6 N/m³, c_m = 0.02 N·s/m, 50 Ω) whose coil has Bl = 0.8 V·s/m, not the case's 1:
    # about its well (k_w = −2k1 = 80 N/m) the stepped sine's total damping is
    # c_m + (Bl)²/(R_c + R_l) (Williams & Yates 1996, Sens. Actuators A 52:8), and a ring-down
    # with the coil open gives c_m.  The calibrated case's Bl is within 5 %, and its
    # linearised response matches the measured steps within 4 % (1 % noise, ≥ 3σ).
    mass, c_m, bl, load = 0.01, 0.02, 0.8, 50.0
    k_w = 80.0
    omega_w = math.sqrt(k_w / mass)
    f_w = omega_w / (2 * math.pi)
    zeta_total = (c_m + bl**2 / load) / (2 * mass * omega_w)
    sweep = textbook_sweep(f_w, zeta_total, mass=mass, step=0.004)
    zeta_m = c_m / (2 * mass * omega_w)
    damped = omega_w * math.sqrt(1 - zeta_m**2)
    t = np.arange(40 * 64) * 2 * math.pi / (damped * 64)
    well = math.sqrt(40 / 4e6)
    y = well + 1e-4 * np.exp(-zeta_m * omega_w * t) * np.cos(damped * t)
    ring = Ringdown(t, y, "tip_displacement", 1.0 / (t[1] - t[0]), "ring.csv")
    case = tmp_path / "coil.toml"
    case.write_text(COIL_CASE.read_text(encoding="utf-8"), encoding="utf-8")
    result = calibrate_case(load_case(case), ringdown=ring, sweep=sweep)
    out = tmp_path / "coil-calibrated.toml"
    out.write_text(result.text, encoding="utf-8")
    model = build(load_case(out)).model
    assert model.transducer.flux_linkage_V_s_per_m == pytest.approx(bl, rel=0.05)
    assert result.sweep.receptance.well_frequency_Hz == pytest.approx(f_w, rel=0.01)
    assert result.sweep.well_frequency_agrees
    measured = np.array([s.measured_amplitude_m for s in result.sweep_steps])
    predicted = np.array([s.predicted_amplitude_m for s in result.sweep_steps])
    assert np.max(np.abs(predicted / measured - 1)) < 0.04
    assert any(t.path == "reduced.coil.flux_linkage" for t in result.tolerances)


def write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "steps.csv"
    path.write_text(text, encoding="utf-8")
    return path


ROWS = "".join(f"{13 + 0.5 * i:.1f}, 0.005, {0.01 + 0.001 * i:.4f}\n" for i in range(10))


def test_a_table_without_a_response_column_is_refused(tmp_path):
    path = write(tmp_path, "frequency [Hz], base_acceleration [g]\n"
                 + "".join(r.rsplit(",", 1)[0] + "\n" for r in ROWS.splitlines()))
    with pytest.raises(CaseError) as error:
        read_stepped_sine(path)
    text = str(error.value)
    assert "steps.csv" in text and "tip_displacement" in text and "\n" not in text


def test_unsorted_frequencies_are_refused(tmp_path):
    rows = ROWS.splitlines()
    rows[3], rows[4] = rows[4], rows[3]
    path = write(tmp_path, "frequency [Hz], base_acceleration [g], tip_displacement [mm]\n"
                 + "\n".join(rows) + "\n")
    with pytest.raises(CaseError) as error:
        read_stepped_sine(path)
    text = str(error.value)
    assert "steps.csv" in text and "(frequency)" in text and "\n" not in text


def test_a_resonance_outside_the_table_is_refused():
    with pytest.raises(CaseError, match="not inside the swept band"):
        fit_receptance(textbook_sweep(14.0, 0.02, low=1.05, high=1.3))


def test_bad_sweep_exits_2_with_one_line(tmp_path):
    path = write(tmp_path, "frequency [Hz], base_acceleration [g], phase [deg]\n"
                 + ROWS.replace(", 0.0", ", 1"))
    run = subprocess.run([sys.executable, "-m", "harvester", "calibrate", str(COIL_CASE),
                          "--sweep", str(path), "--out", str(tmp_path / "c.toml")],
                         capture_output=True, text=True, timeout=120, cwd=ROOT)
    assert run.returncode == 2
    assert len(run.stderr.strip().splitlines()) == 1 and "steps.csv" in run.stderr


def test_a_voltage_sweep_gives_the_coupling_twice():
    # The same coil as above measured by the load's voltage: V = R_l I, with the current
    # I = Bl iω X/(R_c + R_l) of a coil whose inductance is negligible (Williams & Yates 1996).
    # The tip's frequency and damping come out as from a displacement table (within 1 % and
    # 5 %), and the response level, read through the case's Bl = 1, is Bl_true/1 = 0.8 within
    # 5 %, which the calibration reports beside the Bl from the damping.
    mass, c_m, bl, load = 0.01, 0.02, 0.8, 50.0
    omega_w = math.sqrt(80.0 / mass)
    zeta_total = (c_m + bl**2 / load) / (2 * mass * omega_w)
    tip = textbook_sweep(omega_w / (2 * math.pi), zeta_total, mass=mass, step=0.004)
    omega = 2 * math.pi * tip.frequency_Hz
    volts = tip.tip_displacement_m * np.exp(1j * tip.phase_rad) * bl * 1j * omega
    sweep = SteppedSine(tip.frequency_Hz, tip.base_acceleration_mps2, None, np.angle(volts),
                        "volts.csv", measured="voltage", voltage_V=np.abs(volts))
    result = calibrate_case(load_case(COIL_CASE), sweep=sweep)
    fit = result.sweep.receptance
    assert fit.well_frequency_Hz == pytest.approx(omega_w / (2 * math.pi), rel=0.01)
    assert fit.damping_ratio == pytest.approx(zeta_total, rel=0.05)
    assert result.sweep.level_ratio == pytest.approx(bl, rel=0.05)
    assert any("the coupling is about" in w for w in result.warnings)


def test_steps_are_read_from_a_time_record(tmp_path):
    # A stepped sine recorded in time: each step of the textbook oscillator (f_n = 20 Hz,
    # ζ = 0.04) held for 60 cycles, its steady state x = |H|A cos(ωt + ∠H) plus a decaying
    # transient from the previous step's state, by scipy.signal.lsim (test-only reference);
    # 2 % sensor noise.  The steps read from it fit to f_n within 1 % and ζ within 5 %.
    from scipy.signal import lsim

    f_n, zeta, rate = 20.0, 0.04, 500.0
    wn = 2 * math.pi * f_n
    t, a = [], []
    start = 0.0
    for f in np.arange(16.0, 24.01, 0.25):
        n = int(round(60 / f * rate))
        step_t = start + np.arange(n) / rate
        t.append(step_t)
        a.append(0.05 * np.cos(2 * math.pi * f * (step_t - start)))
        start += n / rate
    t, a = np.concatenate(t), np.concatenate(a)
    _, x, _ = lsim(([-1.0], [1.0, 2 * zeta * wn, wn**2]), a, t)
    rng = np.random.default_rng(5)
    x = x + 0.02 * np.max(np.abs(x)) * rng.standard_normal(x.size)
    a = a + 0.001 * rng.standard_normal(a.size)
    path = tmp_path / "stepped.csv"
    np.savetxt(path, np.column_stack((t, a, 1e3 * x)), delimiter=",",
               fmt=("%.6f", "%.6g", "%.6g"),
               header="time [s], base_acceleration [m/s^2], tip_displacement [mm]", comments="")
    sweep = read_stepped_sine(path)
    assert sweep.sweep_rate_Hz_per_s is None and sweep.frequency_Hz.size == 33
    fit = fit_receptance(sweep)
    assert fit.well_frequency_Hz == pytest.approx(f_n, rel=0.01)
    assert fit.damping_ratio == pytest.approx(zeta, rel=0.05)


def test_a_slow_swept_sine_is_read_and_a_fast_one_flagged(tmp_path):
    # A linear up-sweep 16 → 24 Hz through the same oscillator, by scipy.signal.lsim: at
    # 0.2 Hz/s, half of a tenth of 2πζ²f_n² = 4 Hz/s, the quasi-steady response fits f_n within
    # 1 % and ζ within 5 %; at 1 Hz/s the fit says the sweep was too fast (common practice:
    # the frequency must move little within the response's decay time).
    from scipy.signal import chirp, lsim

    f_n, zeta, rate = 20.0, 0.04, 1000.0
    wn = 2 * math.pi * f_n
    for sweep_rate, slow in ((0.2, True), (1.0, False)):
        t = np.arange(int(8.0 / sweep_rate * rate)) / rate
        a = 0.05 * chirp(t, 16.0, t[-1], 24.0, phi=-90)
        _, x, _ = lsim(([-1.0], [1.0, 2 * zeta * wn, wn**2]), a, t)
        path = tmp_path / "swept.csv"
        np.savetxt(path, np.column_stack((t, a, 1e3 * x)), delimiter=",",
                   fmt=("%.6f", "%.6g", "%.6g"),
                   header="time [s], base_acceleration [m/s^2], tip_displacement [mm]",
                   comments="")
        fit = fit_receptance(read_stepped_sine(path))
        too_fast = any("too fast" in w for w in fit.warnings)
        assert too_fast is not slow
        if slow:
            assert fit.well_frequency_Hz == pytest.approx(f_n, rel=0.01)
            assert fit.damping_ratio == pytest.approx(zeta, rel=0.05)


def test_a_sweep_sets_the_remanence_of_a_geometry_case_without_a_force_table():
    # A geometry case (tests/data/small-study.toml, piezo across 100 kΩ) built with magnets 4 %
    # weaker than the case says: its linearised receptance about the rest well (with the
    # piezo's circuit; Erturk & Inman 2011, ch. 3) is the sweep.  Without a force table the
    # well frequency sets both magnets' remanence at the drawn gap: 0.96 within 0.5 % (the
    # frequency is recovered to about 1e-4, and f_w moves faster than the remanence).
    from dataclasses import replace

    from harvester.analysis.calibration import linear_receptance
    from harvester.model import analyse_wells, rest_well

    loaded = load_case(ROOT / "tests" / "data" / "small-study.toml")
    built = build(loaded)
    weak = loaded.case.model_copy(update={
        "tip_magnet": loaded.case.tip_magnet.model_copy(
            update={"remanence": 0.96 * built.tip.remanence_T}),
        "fixed_magnet": loaded.case.fixed_magnet.model_copy(
            update={"remanence": 0.96 * built.fixed.remanence_T})})
    truth = build(replace(loaded, case=weak)).model
    well = rest_well(analyse_wells(truth))
    f_w = math.sqrt(truth.stiffness_at(well) / truth.mass_kg) / (2 * math.pi)
    f = f_w * np.arange(0.8, 1.2, 0.004)
    h = linear_receptance(truth, well, f)
    a = np.full(f.size, 0.01)
    sweep = SteppedSine(f, a, np.abs(h) * a, np.angle(h), "piezo.csv")
    result = calibrate_case(loaded, sweep=sweep)
    assert result.sweep.remanence_scale == pytest.approx(0.96, rel=0.005)
    keys = {v.path for v in result.values}
    assert {"tip_magnet.remanence", "fixed_magnet.remanence"} <= keys
