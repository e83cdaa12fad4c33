"""Random base acceleration: one-sided PSDs and the sample paths that realise them.

A spectrum is an `AccelerationPSD` (one-sided, [(m/s²)²/Hz] against [Hz]).  Sample paths come
from the spectral representation method (Shinozuka & Deodatis 1991, Appl. Mech. Rev. 44:191),

    a(t) = Σ_k A_k cos(2π f_k t + ϕ_k),   ϕ_k uniform on [0, 2π),   A_k²/2 = ∫ G df over f_k ± Δf/2,

evaluated with an inverse FFT.  Each line carries the integral of G over its own cell rather than
G(f_k) Δf: the two agree inside a smooth band, but a line on a band edge has half its cell
outside the band, and a coarse line spacing would otherwise bias the power of a resonance near
the edge.  By default each line also gets a Rayleigh-distributed amplitude
(Gaussian cosine and sine parts), which makes the process exactly Gaussian — hops over a barrier
are rare events and need the Gaussian tails.  One FFT segment is periodic, so a long path is
stitched from independent segments by windowed overlap-add: with the sine window w and hop N/2,
w²(t) + w²(t + N/2) = 1, so the variance is the target at every instant and memory stays at one
segment per realisation however long the run.  Samples come at half-step spacing dt/2, the grid
the RK4 integrator reads its input on.
"""

from __future__ import annotations

import math
from collections.abc import Iterator
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


def segment_line_amplitudes(
    psd: AccelerationPSD,
    sample_interval_s: float,
    segment_samples: int,
    top_Hz: float = math.inf,
) -> np.ndarray:
    """Cosine amplitudes A_k [m/s²] of one FFT segment on f_k = k Δf, Δf = 1/(N Δt),
    k = 0 … N/2, each carrying the variance of its own cell:

        A_k²/2 = ∫ G df over [f_k − Δf/2, f_k + Δf/2] ∩ [0, top_Hz]

    — Shinozuka & Deodatis (1991), eq. 45, with the cell integral in place of G(f_k) Δf, so a
    line on a band edge carries only the part of its cell inside the band.  The k = 0 line
    stands for [0, Δf/2] only.  It is kept, not dropped: after overlap-add it becomes a slowly
    wandering component, and escape over a barrier is exponentially sensitive to such slow
    pushes (a quasi-static force tilts the potential).  The Nyquist line (k = N/2) would alias
    and is left out, as are lines above `top_Hz`.  The mean square of a path is
    Σ A_k²/2 = ∫ G df up to the highest line's cell (Parseval).
    """
    if segment_samples < 4 or segment_samples % 2:
        raise ValueError("an FFT segment needs an even number (≥ 4) of samples")
    df = 1.0 / (segment_samples * sample_interval_s)
    f = df * np.arange(segment_samples // 2 + 1)
    low = np.clip(f - 0.5 * df, 0.0, top_Hz)
    high = np.clip(f + 0.5 * df, 0.0, top_Hz)
    cell = psd_cumulative_variance(psd, high) - psd_cumulative_variance(psd, low)
    amplitude = np.sqrt(2.0 * np.maximum(cell, 0.0))
    amplitude[-1] = 0.0
    amplitude[f > top_Hz] = 0.0
    return amplitude


def spectral_segments(
    amplitude: np.ndarray, n_realisations: int, rng: np.random.Generator, gaussian: bool = True
) -> np.ndarray:
    """Independent periodic sample paths, shape (n_realisations, N), from the line amplitudes of
    `segment_line_amplitudes`, summed by one inverse real FFT per realisation.

    gaussian=False: a_j = Σ_k A_k cos(2π k j/N + ϕ_k), ϕ_k uniform (Shinozuka & Deodatis 1991,
    eq. 45), and a constant ±A_0/√2 for k = 0: every path has exactly the mean square Σ A_k²/2,
    but it is Gaussian only as the number of lines grows, and its tails are too light when few
    lines fall in a resonance.
    gaussian=True (default): each line is A_k (ξ_k cos − η_k sin)/√2 with independent standard
    normal ξ_k, η_k (Shinozuka & Deodatis 1991, §4, random amplitudes): the same spectrum and
    an exactly Gaussian process, which rare events such as hops over a barrier need.
    """
    n_lines = amplitude.size
    segment_samples = 2 * (n_lines - 1)
    shape = (n_realisations, n_lines)
    if gaussian:
        lines = amplitude * (rng.standard_normal(shape) + 1j * rng.standard_normal(shape))
        lines *= math.sqrt(0.5)
    else:
        lines = amplitude * np.exp(1j * rng.uniform(0.0, 2.0 * math.pi, size=shape))
        lines[:, 0] = amplitude[0] * np.sign(lines[:, 0].real) * math.sqrt(0.5)
    # irfft returns (1/N)[X_0 + 2 Re Σ X_k e^{2πikj/N} + …]; the factor N/2 leaves Σ A_k cos(…)
    # for k ≥ 1 but X_0/2 for the mean line, whose real part is therefore doubled
    lines[:, 0] = 2.0 * lines[:, 0].real
    return np.fft.irfft(lines, n=segment_samples, axis=-1) * (segment_samples / 2.0)


def overlap_window(segment_samples: int) -> np.ndarray:
    """Sine window w_j = sin(π j/N): w_j² + w_(j+N/2)² = 1, so overlap-adding independent
    segments at hop N/2 keeps the variance constant in time."""
    return np.sin(math.pi * np.arange(segment_samples) / segment_samples)


def segment_samples_for(
    sample_interval_s: float, frequency_resolution_Hz: float, max_samples: int = 1 << 18
) -> int:
    """Smallest power of two N with 1/(N Δt) ≤ the wanted resolution (capped at max_samples)."""
    wanted = 1.0 / (frequency_resolution_Hz * sample_interval_s)
    n = 1 << max(2, math.ceil(math.log2(max(wanted, 4.0))))
    return int(min(n, max_samples))


def acceleration_blocks(
    psd: AccelerationPSD,
    step_s: float,
    steps_per_block: int,
    n_realisations: int,
    rng: np.random.Generator,
    frequency_resolution_Hz: float,
    top_Hz: float = math.inf,
) -> Iterator[np.ndarray]:
    """Endless stream of base-acceleration blocks [m/s²] for `n_realisations` independent paths.

    Each block has shape (n_realisations, 2·steps_per_block + 1): samples at t0 + j·step_s/2 for
    one integrator block of `steps_per_block` RK4 steps; its last column is the next block's
    first.  Paths are overlap-added windowed spectral-representation segments (module notes) of
    frequency resolution ≤ `frequency_resolution_Hz`; content above `top_Hz`, and above the
    half-step Nyquist frequency 1/step_s, is dropped (check `represented_variance`).
    Memory is one segment and one block per realisation.
    """
    dt_half = 0.5 * step_s
    segment = segment_samples_for(dt_half, frequency_resolution_Hz)
    hop = segment // 2
    amplitude = segment_line_amplitudes(psd, dt_half, segment, top_Hz)
    window = overlap_window(segment)

    def next_half_segment(tail: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        windowed = spectral_segments(amplitude, n_realisations, rng) * window
        return tail + windowed[:, :hop], windowed[:, hop:]

    # start one half segment in, so the first output sample already sits under two segments
    _, tail = next_half_segment(np.zeros((n_realisations, hop)))
    ready = np.empty((n_realisations, 0))
    width = 2 * steps_per_block + 1
    while True:
        while ready.shape[1] < width:
            done, tail = next_half_segment(tail)
            ready = np.concatenate([ready, done], axis=1)
        block = np.ascontiguousarray(ready[:, :width])
        ready = ready[:, width - 1 :]
        yield block


def represented_variance(
    psd: AccelerationPSD,
    step_s: float,
    frequency_resolution_Hz: float,
    top_Hz: float = math.inf,
) -> float:
    """Variance [(m/s²)²] that `acceleration_blocks` actually synthesises for these settings:
    ∫ G df over the cells of the lines below `top_Hz` and the half-step Nyquist frequency."""
    dt_half = 0.5 * step_s
    segment = segment_samples_for(dt_half, frequency_resolution_Hz)
    return float(0.5 * np.sum(segment_line_amplitudes(psd, dt_half, segment, top_Hz) ** 2))


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
