"""Synthesise the excitation files of the demo cases (invented sites, no measurements).

Run from anywhere with numpy and scipy installed:

    python cases/make_demo_data.py

It rewrites, next to this script:

- ``pump-skid-psd.csv``: one-sided acceleration PSD [g²/Hz] against frequency [Hz], 2–100 Hz
  every 0.25 Hz (the analysis band of a low-frequency survey), of the baseframe of an invented
  cooling-water pump skid.  A broadband floor (flow noise, falling off below 10 Hz) carries the
  rocking mode of the skid on its spring isolators near 5 Hz, a baseframe resonance near 38 Hz,
  the running-speed line at 24.6 Hz and its second harmonic.  The table is scattered like a
  Welch estimate of eight averages (a chi-square of 16 degrees of freedom per bin), so it looks
  measured.
- ``delivery-van-record.csv``: base acceleration [g] against time [s], 40 s at 1 kHz, of a
  sensor box bolted to the cargo floor of an invented delivery van on a rough road.  Road
  roughness reaches the floor through body bounce (1.4 Hz) and wheel hop (11 Hz); the
  four-cylinder engine adds its second and fourth orders while the engine speed wanders
  between about 1700 and 2500 rpm; five bumps (potholes, joints) ring the same two modes.
  Uniformly sampled, no gaps, no NaN, no clipping.

Every random number comes from numpy Generators with the fixed seeds below, so the files are
the same on every run.  Amplitudes are chosen to sit inside the range a practitioner measures
on such machines and vehicles (0.1–0.5 g RMS); they are illustrations, not data, and never a
check value in a test.

The road input is white noise shaped by a quarter-car-like response: the floor acceleration
of a base-excited oscillator, H(f) = (1 + 2iζ f/fn)/(1 − (f/fn)² + 2iζ f/fn), for each of
the two modes (mode frequencies and damping as is common for road vehicles: Gillespie 1992,
*Fundamentals of Vehicle Dynamics*, SAE, ch. 5 (memory); common practice).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
from scipy import signal

HERE = Path(__file__).resolve().parent

PSD_SEED = 20240611
RECORD_SEED = 20240612

# --- pump skid PSD -------------------------------------------------------------------------------
RUNNING_SPEED_HZ = 24.6  # four-pole motor under load
PSD_STEP_HZ = 0.25
PSD_BAND_HZ = (2.0, 100.0)
FLOOR_G2_PER_HZ = 1.2e-4
ROCKING = (5.0, 0.15, 0.03)  # isolator rocking mode: frequency [Hz], damping ratio, RMS [g]
BASEFRAME = (38.0, 0.06, 3.0)  # frequency [Hz], damping ratio, floor rise at resonance [-]
LINES = ((1, 0.12, 0.15), (2, 0.05, 0.2))  # harmonic of the running speed, RMS [g], wander [Hz]
WELCH_DOF = 16  # eight averages, two degrees of freedom each


def _gaussian_line(f: np.ndarray, centre_Hz: float, rms_g: float, width_Hz: float) -> np.ndarray:
    """A line of given RMS [g] spread over a Gaussian of standard deviation `width_Hz` (speed
    wander), as a PSD [g²/Hz] whose integral is rms²."""
    shape = np.exp(-0.5 * ((f - centre_Hz) / width_Hz) ** 2)
    return rms_g**2 * shape / (width_Hz * np.sqrt(2.0 * np.pi))


def _resonance_hump(f: np.ndarray, fn: float, zeta: float, rms_g: float) -> np.ndarray:
    """A lightly damped mode driven by broadband force, |H|² of a single-degree-of-freedom
    oscillator scaled so that its integral over the table is rms² [g²/Hz]."""
    r = f / fn
    shape = 1.0 / ((1 - r**2) ** 2 + (2 * zeta * r) ** 2)
    return rms_g**2 * shape / np.trapezoid(shape, f)


def pump_skid_psd() -> tuple[np.ndarray, np.ndarray]:
    """Frequencies [Hz] and one-sided PSD [g²/Hz] of the invented pump-skid bearing housing."""
    rng = np.random.default_rng(PSD_SEED)
    f = np.arange(PSD_BAND_HZ[0], PSD_BAND_HZ[1] + PSD_STEP_HZ / 2, PSD_STEP_HZ)
    high_pass = (f / 10.0) ** 2 / (1.0 + (f / 10.0) ** 2)
    frame_Hz, frame_damping, frame_rise = BASEFRAME
    r = f / frame_Hz
    frame = 1.0 + frame_rise * (2 * frame_damping) ** 2 / (
        (1 - r**2) ** 2 + (2 * frame_damping * r) ** 2
    )
    g = FLOOR_G2_PER_HZ * high_pass * frame
    g += _resonance_hump(f, *ROCKING)
    for harmonic, rms_g, wander_Hz in LINES:
        g += _gaussian_line(f, harmonic * RUNNING_SPEED_HZ, rms_g, wander_Hz)
    scatter = rng.chisquare(WELCH_DOF, size=f.size) / WELCH_DOF
    return f, g * scatter


# --- delivery-van record -------------------------------------------------------------------------
SAMPLE_RATE_HZ = 1000.0
DURATION_S = 40.0
BODY_BOUNCE = (1.4, 0.30)  # frequency [Hz], damping ratio
WHEEL_HOP = (11.0, 0.25)
ROAD_RMS_G = (0.10, 0.12)  # floor RMS from each mode's path
ENGINE_ORDERS = ((2, 0.05), (4, 0.015))  # (order, amplitude [g])
ENGINE_RPM = (1700.0, 2500.0)
BUMPS = 5
BUMP_PEAK_G = (0.6, 1.1)


def _base_excited(f: np.ndarray, fn: float, zeta: float) -> np.ndarray:
    """Transmissibility of a base-excited oscillator, acceleration to acceleration."""
    r = f / fn
    return (1 + 2j * zeta * r) / (1 - r**2 + 2j * zeta * r)


def _shaped_noise(rng: np.random.Generator, n: int, fn: float, zeta: float) -> np.ndarray:
    """White noise through one mode's transmissibility, high-passed at 0.3 Hz, unit RMS."""
    spectrum = np.fft.rfft(rng.standard_normal(n))
    f = np.fft.rfftfreq(n, 1.0 / SAMPLE_RATE_HZ)
    high_pass = (f / 0.3) ** 2 / (1 + (f / 0.3) ** 2)
    path = np.fft.irfft(spectrum * _base_excited(f, fn, zeta) * high_pass, n=n)
    return path / np.std(path)


def _ring(t: np.ndarray, start_s: float, fn: float, zeta: float) -> np.ndarray:
    """Free decay e^(−ζωt) sin(ω_d t) of one mode after a bump at `start_s` (unit envelope)."""
    tau = np.clip(t - start_s, 0.0, None)
    wd = 2 * np.pi * fn * np.sqrt(1 - zeta**2)
    decay = np.exp(-zeta * 2 * np.pi * fn * tau) * np.sin(wd * tau)
    return np.where(t >= start_s, decay, 0.0)


def delivery_van_record() -> tuple[np.ndarray, np.ndarray]:
    """Times [s] and floor acceleration [g] of the invented delivery van."""
    rng = np.random.default_rng(RECORD_SEED)
    n = int(round(DURATION_S * SAMPLE_RATE_HZ))
    t = np.arange(n) / SAMPLE_RATE_HZ
    a = ROAD_RMS_G[0] * _shaped_noise(rng, n, *BODY_BOUNCE)
    a += ROAD_RMS_G[1] * _shaped_noise(rng, n, *WHEEL_HOP)
    # engine speed: a slow random walk between the limits, smoothed over about two seconds
    sos = signal.butter(2, 0.4, fs=SAMPLE_RATE_HZ, output="sos")
    wander = signal.sosfiltfilt(sos, rng.standard_normal(n))
    wander = (wander - wander.min()) / np.ptp(wander)
    rpm = ENGINE_RPM[0] + (ENGINE_RPM[1] - ENGINE_RPM[0]) * wander
    crank_turns = np.cumsum(rpm / 60.0) / SAMPLE_RATE_HZ
    for order, amplitude in ENGINE_ORDERS:
        phase = rng.uniform(0, 2 * np.pi)
        a += amplitude * np.sin(2 * np.pi * order * crank_turns + phase)
    starts = np.sort(rng.uniform(2.0, DURATION_S - 3.0, size=BUMPS))
    for start in starts:
        peak = rng.uniform(*BUMP_PEAK_G)
        sign = rng.choice([-1.0, 1.0])
        ring = 0.6 * _ring(t, start, *WHEEL_HOP) + 0.4 * _ring(t, start, *BODY_BOUNCE)
        a += sign * peak * ring
    a += 0.003 * rng.standard_normal(n)  # sensor noise
    return t, a


def main() -> None:
    f, g = pump_skid_psd()
    t, a = delivery_van_record()
    tables = (
        ("pump-skid-psd.csv", f, g, ["%.2f", "%.4e"], "frequency_Hz,psd_g2_per_Hz"),
        ("delivery-van-record.csv", t, a, ["%.3f", "%.5f"], "time_s,acceleration_g"),
    )
    for name, x, y, fmt, header in tables:
        np.savetxt(
            HERE / name, np.column_stack([x, y]), delimiter=",", fmt=fmt, header=header, comments=""
        )


if __name__ == "__main__":
    main()
