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

import numpy as np

from harvester.case.spectra import AccelerationPSD, psd_cumulative_variance


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
