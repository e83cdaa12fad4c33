"""Base-acceleration spectra and records in SI: what the case's excitation is.

A spectrum is an `AccelerationPSD`: one-sided, [(m/s²)²/Hz] against [Hz], with the rule that
joins its rows (straight lines on log-log axes for a test profile given by its corners, straight
lines for a dense estimate).  A record is an `AccelerationRecord` sampled uniformly in time.
These are the case layer's SI form of `[excitation]`; the dynamics turn them into sample paths
(`harvester.dynamics.excitation`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class AccelerationPSD:
    """One-sided base-acceleration PSD as a table, zero outside it.

    Between rows `interpolation` is "loglog" (common practice for random-vibration test
    profiles, whose straight segments are in dB/octave; linear where a row is zero) or
    "linear" (dense estimates such as Welch's, whose bins are averages, not corners).
    """

    frequency_Hz: np.ndarray  # strictly increasing, ≥ 0
    psd_m2_s4_per_Hz: np.ndarray  # G(f) ≥ 0  [(m/s²)²/Hz]
    source: str = ""
    interpolation: str = "loglog"

    def __post_init__(self) -> None:
        f = np.asarray(self.frequency_Hz, dtype=float)
        g = np.asarray(self.psd_m2_s4_per_Hz, dtype=float)
        if f.ndim != 1 or f.shape != g.shape or f.size < 2:
            raise ValueError("a PSD needs two or more (frequency, value) rows of equal length")
        if not (np.all(np.isfinite(f)) and np.all(np.isfinite(g))):
            raise ValueError("a PSD must be finite")
        if f[0] < 0.0 or np.any(np.diff(f) <= 0.0):
            raise ValueError("PSD frequencies must be non-negative and strictly increasing")
        if np.any(g < 0.0):
            raise ValueError("a PSD cannot be negative")
        if self.interpolation not in ("loglog", "linear"):
            raise ValueError('interpolation is "loglog" or "linear"')
        f.setflags(write=False)
        g.setflags(write=False)
        object.__setattr__(self, "frequency_Hz", f)
        object.__setattr__(self, "psd_m2_s4_per_Hz", g)

    @property
    def highest_frequency_Hz(self) -> float:
        """Highest frequency at which the PSD is non-zero [Hz]."""
        nonzero = np.nonzero(self.psd_m2_s4_per_Hz > 0.0)[0]
        if nonzero.size == 0:
            return 0.0
        last = nonzero[-1]
        return float(self.frequency_Hz[min(last + 1, self.frequency_Hz.size - 1)])


def flat_band_psd(low_Hz: float, high_Hz: float, rms_mps2: float) -> AccelerationPSD:
    """Band-limited white base acceleration of a given RMS [m/s²] between low and high [Hz].

    G = a_rms² / (f_high − f_low)   for f_low ≤ f ≤ f_high,  0 elsewhere.

    >>> band = flat_band_psd(10.0, 110.0, 2.0)   # 2 m/s² RMS over 100 Hz
    >>> round(float(psd_at(band, 50.0)), 12), round(psd_variance(band), 12)
    (0.04, 4.0)
    """
    if not (0.0 <= low_Hz < high_Hz) or not rms_mps2 > 0.0:
        raise ValueError("a band needs 0 ≤ low < high and a positive RMS")
    level = rms_mps2**2 / (high_Hz - low_Hz)
    return AccelerationPSD(
        np.array([low_Hz, high_Hz]),
        np.array([level, level]),
        source=f"flat band {low_Hz:g}–{high_Hz:g} Hz, {rms_mps2:.4g} m/s² RMS",
    )


def psd_at(psd: AccelerationPSD, frequency_Hz: np.ndarray | float) -> np.ndarray:
    """G(f) [(m/s²)²/Hz] at arbitrary frequencies, interpolated as the table says."""
    f = np.asarray(frequency_Hz, dtype=float)
    fk, gk = psd.frequency_Hz, psd.psd_m2_s4_per_Hz
    i = np.clip(np.searchsorted(fk, f, side="right") - 1, 0, fk.size - 2)
    f0, f1, g0, g1 = fk[i], fk[i + 1], gk[i], gk[i + 1]
    s = (f - f0) / (f1 - f0)
    linear = g0 + s * (g1 - g0)
    loglog_ok = (g0 > 0.0) & (g1 > 0.0) & (f0 > 0.0) & (f > 0.0)
    if psd.interpolation == "linear":
        loglog_ok = np.zeros_like(loglog_ok)
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = np.log(g1 / g0) / np.log(f1 / f0)
        loglog = g0 * (f / f0) ** slope
    value = np.where(loglog_ok, loglog, linear)
    inside = (f >= fk[0]) & (f <= fk[-1])
    return np.where(inside, value, 0.0)


def psd_variance(psd: AccelerationPSD) -> float:
    """Mean square of the acceleration [(m/s²)²]: σ² = ∫ G(f) df over the table, integrated
    exactly for the power-law and straight segments of `psd_at`."""
    return float(psd_cumulative_variance(psd, psd.frequency_Hz[-1]))


def psd_cumulative_variance(psd: AccelerationPSD, frequency_Hz: np.ndarray | float) -> np.ndarray:
    """C(f) = ∫₀^f G(f') df' [(m/s²)²], exact for the segments of `psd_at`.

    On a power-law segment G = G_i (f/f_i)^n the partial area from f_i is
    G_i f_i ((f/f_i)^(n+1) − 1)/(n + 1)  (G_i f_i ln(f/f_i) for n = −1); on a straight one it
    is G_i (f − f_i) + (G_(i+1) − G_i)(f − f_i)²/(2 (f_(i+1) − f_i)).  C is 0 below the table
    and the total above it, so ∫ over [a, b] is C(b) − C(a) for any a ≤ b.
    """
    fk, gk = psd.frequency_Hz, psd.psd_m2_s4_per_Hz
    f = np.clip(np.asarray(frequency_Hz, dtype=float), fk[0], fk[-1])
    i = np.clip(np.searchsorted(fk, f, side="right") - 1, 0, fk.size - 2)
    f0, f1, g0, g1 = fk[i], fk[i + 1], gk[i], gk[i + 1]
    df = f - f0
    partial = g0 * df + 0.5 * (g1 - g0) * df * df / (f1 - f0)
    power_law = (g0 > 0.0) & (g1 > 0.0) & (f0 > 0.0) & (g0 != g1)
    if psd.interpolation == "loglog" and np.any(power_law):
        with np.errstate(divide="ignore", invalid="ignore"):
            n = np.log(g1 / g0) / np.log(f1 / f0)
            general = g0 * f0 / (n + 1.0) * ((f / f0) ** (n + 1.0) - 1.0)
            at_minus_one = g0 * f0 * np.log(f / f0)
        curved = np.where(np.abs(n + 1.0) < 1e-12, at_minus_one, general)
        partial = np.where(power_law, curved, partial)
    whole = np.concatenate([[0.0], np.cumsum(_segment_areas(psd))])
    return whole[i] + partial


def _segment_areas(psd: AccelerationPSD) -> np.ndarray:
    f0, f1 = psd.frequency_Hz[:-1], psd.frequency_Hz[1:]
    g0, g1 = psd.psd_m2_s4_per_Hz[:-1], psd.psd_m2_s4_per_Hz[1:]
    area = 0.5 * (g0 + g1) * (f1 - f0)
    power_law = (g0 > 0.0) & (g1 > 0.0) & (f0 > 0.0) & (g0 != g1)
    if psd.interpolation == "linear":
        power_law[:] = False
    if np.any(power_law):
        a0, a1, b0, b1 = f0[power_law], f1[power_law], g0[power_law], g1[power_law]
        n = np.log(b1 / b0) / np.log(a1 / a0)
        with np.errstate(divide="ignore", invalid="ignore"):
            general = b0 * a0 / (n + 1.0) * ((a1 / a0) ** (n + 1.0) - 1.0)
        at_minus_one = b0 * a0 * np.log(a1 / a0)
        area[power_law] = np.where(np.abs(n + 1.0) < 1e-12, at_minus_one, general)
    return area


@dataclass(frozen=True)
class AccelerationRecord:
    """A uniformly sampled base-acceleration record in SI, with what was noticed on reading."""

    time_s: np.ndarray
    acceleration_mps2: np.ndarray
    sample_rate_Hz: float
    source: str = ""
    warnings: tuple[str, ...] = ()


def welch_psd(record: AccelerationRecord, resolution_Hz: float | None = None) -> AccelerationPSD:
    """One-sided PSD [(m/s²)²/Hz] of a record by Welch's method (Welch 1967, IEEE Trans. Audio
    Electroacoust. 15:70): Hann-windowed segments, 50 % overlap, mean removed, averaged
    periodograms (`scipy.signal.welch`).

    Without `resolution_Hz` the segment is the longest power of two that still gives eight
    averages, trading resolution for a scatter of about ±1/sqrt(8·1.9) per bin.
    """
    from scipy.signal import welch

    n = record.acceleration_mps2.size
    if resolution_Hz is None:
        nperseg = 1 << max(4, int(math.floor(math.log2(max(n / 8.0, 16.0)))))
    else:
        nperseg = int(round(record.sample_rate_Hz / resolution_Hz))
    nperseg = min(nperseg, n)
    f, g = welch(
        record.acceleration_mps2,
        fs=record.sample_rate_Hz,
        window="hann",
        nperseg=nperseg,
        detrend="constant",
        scaling="density",
    )
    return AccelerationPSD(
        f, g, source=f"Welch PSD of {record.source or 'a record'}", interpolation="linear"
    )


@dataclass(frozen=True)
class SpectralPeak:
    frequency_Hz: float
    psd_m2_s4_per_Hz: float
    variance_share: float  # share of the total mean square inside the peak's band


@dataclass(frozen=True)
class SpectrumSummary:
    """What an engineer reads off a spectrum first."""

    rms_mps2: float
    frequency_range_Hz: tuple[float, float]  # lowest and highest frequency with G > 0
    peaks: tuple[SpectralPeak, ...]  # most prominent first

    def to_dict(self) -> dict:
        return {
            "rms_mps2": self.rms_mps2,
            "frequency_range_Hz": list(self.frequency_range_Hz),
            "peaks": [
                {
                    "frequency_Hz": p.frequency_Hz,
                    "psd_m2_s4_per_Hz": p.psd_m2_s4_per_Hz,
                    "variance_share": p.variance_share,
                }
                for p in self.peaks
            ],
        }


def summarise_psd(psd: AccelerationPSD, max_peaks: int = 3) -> SpectrumSummary:
    """RMS [m/s²] = sqrt(∫G df), the band where G > 0, and the most prominent peaks.

    A peak's band runs out from its maximum to the first row on each side where G has fallen
    below a tenth (−10 dB) of the peak value, never past the neighbouring minima; its share is
    the area of that band over the total area (trapezoids on the table rows).
    """
    from scipy.signal import find_peaks

    f, g = psd.frequency_Hz, psd.psd_m2_s4_per_Hz
    total = float(np.trapezoid(g, f))
    positive = np.nonzero(g > 0.0)[0]
    # 12 figures: a Welch top bin of fs/2 prints as 500 Hz, not 499.99999999999955
    band = (float(f"{f[positive[0]]:.12g}"), float(f"{f[positive[-1]]:.12g}")) \
        if positive.size else (0.0, 0.0)
    index, props = find_peaks(g, prominence=0.0)
    order = np.argsort(props["prominences"])[::-1][:max_peaks]
    peaks = []
    for j in order:
        p = index[j]
        # a base can lie beyond a neighbouring peak: stop at the lowest row between the two
        before = index[j - 1] if j > 0 else 0
        after = index[j + 1] if j + 1 < index.size else g.size - 1
        lo = max(props["left_bases"][j], before + int(np.argmin(g[before:p + 1])))
        hi = min(props["right_bases"][j], p + int(np.argmin(g[p:after + 1])))
        left = p
        while left > lo and g[left] > 0.1 * g[p]:
            left -= 1
        right = p
        while right < hi and g[right] > 0.1 * g[p]:
            right += 1
        area = float(np.trapezoid(g[left : right + 1], f[left : right + 1]))
        peaks.append(SpectralPeak(float(f[p]), float(g[p]), area / total if total > 0 else 0.0))
    return SpectrumSummary(math.sqrt(psd_variance(psd)), band, tuple(peaks))
