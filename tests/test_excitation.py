"""Random base acceleration: spectra, spectral-representation sample paths, Welch estimates."""

import math
import tracemalloc

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.signal import welch

from harvester.case.spectra import (
    AccelerationPSD,
    AccelerationRecord,
    flat_band_psd,
    psd_at,
    psd_variance,
    summarise_psd,
    welch_psd,
)
from harvester.dynamics.excitation import (
    acceleration_blocks,
    represented_variance,
    segment_line_amplitudes,
    spectral_segments,
)

# A test-profile shape (rising 3 dB/oct, flat, falling): the input under test, not a check value.
PROFILE = AccelerationPSD(
    np.array([10.0, 40.0, 150.0, 400.0]), np.array([0.02, 0.08, 0.08, 0.01]) * 9.80665**2
)


def stitched(psd, step_s, blocks, n_real, seed, resolution_Hz=0.5, steps=400):
    stream = acceleration_blocks(
        psd, step_s, steps, n_real, np.random.default_rng(seed), resolution_Hz
    )
    parts = [next(stream)]
    parts += [next(stream)[:, 1:] for _ in range(blocks - 1)]
    return np.concatenate(parts, axis=1)


def test_psd_variance_integrates_the_interpolated_table_exactly():
    # reference: adaptive quadrature (scipy.integrate.quad) of the same interpolant
    f = PROFILE.frequency_Hz
    reference = sum(
        quad(lambda x: float(psd_at(PROFILE, x)), a, b, epsabs=0)[0] for a, b in zip(f[:-1], f[1:])
    )
    assert psd_variance(PROFILE) == pytest.approx(reference, rel=1e-9)


def test_flat_band_has_the_requested_rms():
    # definition of a flat one-sided PSD: σ² = G·(f_high − f_low)
    band = flat_band_psd(20.0, 220.0, 3.0)
    assert psd_variance(band) == pytest.approx(9.0, rel=1e-12)
    assert float(psd_at(band, 100.0)) == pytest.approx(9.0 / 200.0, rel=1e-12)
    assert float(psd_at(band, 300.0)) == 0.0


def test_single_segment_parseval_is_exact():
    # Shinozuka & Deodatis (1991), Appl. Mech. Rev. 44:191, eq. 45 and §4: over one period of the
    # FFT segment the mean square of every random-phase path is Σ A_k²/2, to round-off; with
    # cell-integrated lines that is ∫G df up to the last line's cell (here 0.01 % of the total
    # lies above it)
    dt_half, n = 2.5e-4, 1 << 15
    amplitude = segment_line_amplitudes(PROFILE, dt_half, n)
    paths = spectral_segments(amplitude, 5, np.random.default_rng(3), gaussian=False)
    discrete = 0.5 * np.sum(amplitude**2)
    np.testing.assert_allclose(np.mean(paths**2, axis=1), discrete, rtol=1e-12)
    assert discrete == pytest.approx(psd_variance(PROFILE), rel=1e-4)


# line spacing 400/8192 Hz = 0.0488 Hz: 25 Hz falls on a line, 5 Hz and 41.7 Hz between lines
EDGE_DT_HALF, EDGE_SEGMENT = 1.0 / 400.0, 8192


def sloped_psd():
    # −6 dB/octave from 7.3 to 41.7 Hz (G ∝ f⁻²): the input under test, not a check value
    return AccelerationPSD(np.array([7.3, 41.7]), np.array([0.5, 0.5 * (7.3 / 41.7) ** 2]))


@pytest.mark.parametrize(
    "psd, exact",
    [
        # flat band: ∫G df = a_rms² (definition of a flat one-sided PSD)
        (flat_band_psd(5.0, 25.0, 2.0), 4.0),
        # power law G = G0 (f/f0)⁻²: ∫ from f0 to f1 = G0 f0 (1 − f0/f1)
        (sloped_psd(), 0.5 * 7.3 * (1.0 - 7.3 / 41.7)),
    ],
    ids=["flat 5-25 Hz", "-6 dB/oct"],
)
def test_line_powers_integrate_the_psd_over_their_cells(psd, exact):
    # Shinozuka & Deodatis (1991), Appl. Mech. Rev. 44:191, eq. 45: the synthesised variance is
    # Σ A_k²/2 (Parseval); with each line carrying ∫G over its cell it is ∫G df exactly, band
    # edges included, whatever the line spacing
    amplitude = segment_line_amplitudes(psd, EDGE_DT_HALF, EDGE_SEGMENT)
    assert 0.5 * np.sum(amplitude**2) == pytest.approx(exact, rel=1e-6)
    # and each line is its own cell: adaptive quadrature of the interpolant (scipy.integrate.quad)
    df = 1.0 / (EDGE_SEGMENT * EDGE_DT_HALF)
    for f_edge in psd.frequency_Hz:
        k = int(round(f_edge / df))
        cell = quad(lambda x: float(psd_at(psd, x)), (k - 0.5) * df, (k + 0.5) * df, epsabs=0)
        assert 0.5 * amplitude[k] ** 2 == pytest.approx(cell[0], rel=1e-6)


def test_lines_give_a_resonance_at_the_band_edge_its_exact_power():
    # Crandall & Mark (1963), Random Vibration in Mechanical Systems, ch. 2: for base acceleration
    # of one-sided PSD G, m ẍ + c ẋ + k x = −m a dissipates P = c ∫ G(f) ω²|H(f)|² df with
    # H = m/(k − mω² + icω).  Summed over the lines, P ≈ Σ (A_k²/2) ω_k²|H(f_k)|²; here the
    # resonance (24.6 Hz, ζ = 0.02) sits at the band's upper edge, on a line, where a line
    # weighted by G(f_k)Δf would count half a cell outside the band (+1.4 % here)
    psd = flat_band_psd(5.0, 25.0, 2.0)
    m, f_n, zeta = 0.01, 24.6, 0.02
    k, c = m * (2 * math.pi * f_n) ** 2, 2 * zeta * m * 2 * math.pi * f_n

    def power_density(f):
        w = 2 * math.pi * f
        return c * w * w * m * m / ((k - m * w * w) ** 2 + (c * w) ** 2)

    level = 4.0 / 20.0
    exact = level * quad(power_density, 5.0, 25.0, points=[f_n], epsabs=0, epsrel=1e-12)[0]
    amplitude = segment_line_amplitudes(psd, EDGE_DT_HALF, EDGE_SEGMENT)
    f = np.arange(amplitude.size) / (EDGE_SEGMENT * EDGE_DT_HALF)
    from_lines = float(np.sum(0.5 * amplitude**2 * power_density(f)))
    assert from_lines == pytest.approx(exact, rel=1e-3)


def test_gaussian_segments_have_the_target_variance_and_normal_tails():
    # random-amplitude form (Shinozuka & Deodatis 1991, §4): E[a²] = Σ A_k²/2 and a(t) is exactly
    # Gaussian.  Normal-distribution table (Abramowitz & Stegun 1964, Table 26.1):
    # P(|a| > 3σ) = 0.0026998.  Over 400 paths × 4096 samples of a ~1.3 ms correlation time the
    # estimates scatter by ~1 % (variance) and ~4 % (tail).  The random-phase form with four
    # unit lines is bounded, |a| ≤ Σ A_k = 4 = 2.83σ (σ² = 4·½), so it never reaches 3σ.
    dt_half, n = 2.5e-4, 1 << 12
    amplitude = segment_line_amplitudes(PROFILE, dt_half, n)
    paths = spectral_segments(amplitude, 400, np.random.default_rng(4))
    variance = 0.5 * np.sum(amplitude**2)
    assert np.mean(paths**2) == pytest.approx(variance, rel=0.03)
    tail = np.mean(np.abs(paths) > 3.0 * math.sqrt(variance))
    assert tail == pytest.approx(0.0026998, rel=0.15)
    few = np.zeros(6)
    few[1:5] = 1.0
    phases_only = spectral_segments(few, 400, np.random.default_rng(5), gaussian=False)
    assert np.max(np.abs(phases_only)) <= 4.0 + 1e-9
    assert not np.any(np.abs(phases_only) > 3.0 * math.sqrt(2.0))


def test_stitched_path_keeps_the_variance_at_every_instant():
    # Parseval for the overlap-added path (Shinozuka & Deodatis 1991): ensemble and time mean
    # square = ∫G df.  The sine window makes w²(t) + w²(t + N/2) = 1, so no position within a
    # segment may show a different variance (checked in 8 phase bins).
    step = 1e-3
    a = stitched(PROFILE, step, blocks=60, n_real=48, seed=11)
    target = represented_variance(PROFILE, step, 0.5)
    assert target == pytest.approx(psd_variance(PROFILE), rel=2e-3)
    per_path = np.mean(a**2, axis=1)
    standard_error = per_path.std(ddof=1) / math.sqrt(per_path.size)
    assert abs(per_path.mean() - target) < 4.0 * standard_error
    assert per_path.mean() == pytest.approx(target, rel=0.02)
    hop = 2048  # half of the 4096-sample segment that 0.5 Hz at 2 kHz needs
    phase = np.arange(a.shape[1]) % hop
    for b in range(8):
        in_bin = (phase >= b * hop // 8) & (phase < (b + 1) * hop // 8)
        assert np.mean(a[:, in_bin] ** 2) == pytest.approx(target, rel=0.04)


def test_stitched_path_has_the_target_spectrum():
    # Shinozuka & Deodatis (1991): the simulated process has the target PSD.  Estimated with
    # scipy.signal.welch and averaged over 48 independent paths × ~50 segments, the in-band
    # scatter per bin is ~2 %; allow 8 % per bin away from the table's corners.
    step = 1e-3
    a = stitched(PROFILE, step, blocks=60, n_real=48, seed=12)
    f, g = welch(a, fs=2.0 / step, nperseg=2048)
    estimate = g.mean(axis=0)
    target = psd_at(PROFILE, f)
    inside = (f > 15.0) & (f < 380.0) & (np.abs(f - 40.0) > 5.0) & (np.abs(f - 150.0) > 5.0)
    np.testing.assert_allclose(estimate[inside], target[inside], rtol=0.08)
    outside = f > 450.0
    assert np.all(estimate[outside] < 1e-3 * target.max())


def test_blocks_overlap_by_one_sample_and_repeat_with_a_seed():
    first = acceleration_blocks(PROFILE, 1e-3, 100, 4, np.random.default_rng(5), 1.0)
    again = acceleration_blocks(PROFILE, 1e-3, 100, 4, np.random.default_rng(5), 1.0)
    other = acceleration_blocks(PROFILE, 1e-3, 100, 4, np.random.default_rng(6), 1.0)
    b1, b2 = next(first), next(first)
    assert b1.shape == (4, 201)
    np.testing.assert_array_equal(b1[:, -1], b2[:, 0])
    np.testing.assert_array_equal(next(again), b1)
    assert not np.allclose(next(other), b1)


def test_realisations_are_independent():
    # independent phases ⇒ zero cross-correlation between realisations; with ~10⁵ samples of a
    # process with a ~0.03 s correlation time the sample correlation scatters by ~0.02
    a = stitched(PROFILE, 1e-3, blocks=40, n_real=6, seed=8)
    c = np.corrcoef(a)
    off_diagonal = c[~np.eye(6, dtype=bool)]
    assert np.max(np.abs(off_diagonal)) < 0.06


def test_memory_does_not_grow_with_run_length():
    stream = acceleration_blocks(PROFILE, 1e-3, 500, 16, np.random.default_rng(1), 0.5)
    tracemalloc.start()
    for _ in range(20):
        next(stream)
    _, early_peak = tracemalloc.get_traced_memory()
    tracemalloc.reset_peak()
    for _ in range(200):
        next(stream)
    _, late_peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    assert late_peak < 1.5 * early_peak


def test_content_above_the_half_step_nyquist_frequency_is_dropped():
    # sampling at dt/2 represents frequencies below 1/dt only (Shannon); the represented variance
    # is the integral of the PSD up to there
    step = 1.0 / 300.0
    expected = (
        quad(lambda x: float(psd_at(PROFILE, x)), 10.0, 150.0)[0]
        + quad(lambda x: float(psd_at(PROFILE, x)), 150.0, 300.0)[0]
    )
    assert represented_variance(PROFILE, step, 0.25) == pytest.approx(expected, rel=5e-3)


def test_welch_recovers_the_psd_of_a_synthetic_record():
    # Welch (1967), IEEE Trans. Audio Electroacoust. 15:70: the averaged modified periodogram is
    # an unbiased estimate with relative scatter ≈ 1/sqrt(K) for K Hann segments at 50 % overlap
    # (Bendat & Piersol, Random Data, 4th ed. 2010, §11.5.2).  A 200 s record at 2 kHz with a
    # 1 Hz resolution gives K ≈ 400: bins within 5·/sqrt(K) = 25 %, the band mean within 2 %.
    band = flat_band_psd(30.0, 300.0, 4.0)
    step = 1e-3
    a = stitched(band, step, blocks=1000, n_real=1, seed=21, resolution_Hz=0.05)[0]
    record = AccelerationRecord(np.arange(a.size) * step / 2, a, 2.0 / step, "synthetic")
    psd = welch_psd(record, resolution_Hz=1.0)
    inside = (psd.frequency_Hz > 35.0) & (psd.frequency_Hz < 295.0)
    ratio = psd.psd_m2_s4_per_Hz[inside] / psd_at(band, psd.frequency_Hz[inside])
    assert np.all(np.abs(ratio - 1.0) < 0.25)
    assert ratio.mean() == pytest.approx(1.0, abs=0.02)
    assert psd_variance(psd) == pytest.approx(16.0, rel=0.03)


def test_summary_finds_a_tone_and_its_share():
    # a tone of amplitude A carries A²/2 of the mean square (Parseval); Welch spreads it over the
    # Hann main lobe, which the −10 dB band captures almost entirely (≥ 90 %)
    fs, duration = 2000.0, 60.0
    t = np.arange(0.0, duration, 1.0 / fs)
    rng = np.random.default_rng(2)
    tone, noise_rms = 3.0, 0.5
    a = tone * np.sin(2 * np.pi * 47.0 * t) + noise_rms * rng.standard_normal(t.size)
    summary = summarise_psd(welch_psd(AccelerationRecord(t, a, fs, "tone")))
    total = tone**2 / 2 + noise_rms**2
    assert summary.rms_mps2 == pytest.approx(math.sqrt(total), rel=0.02)
    peak = summary.peaks[0]
    assert peak.frequency_Hz == pytest.approx(47.0, abs=0.5)
    assert 0.9 * (tone**2 / 2) / total <= peak.variance_share <= 1.0
    assert summary.to_dict()["peaks"][0]["frequency_Hz"] == peak.frequency_Hz


def test_two_close_bumps_share_the_variance_without_overlap():
    # two Gaussian bumps (σ = 1 Hz at 40 and 43 Hz, heights 1 and 0.8) whose trough stays above
    # −10 dB: each band must stop at the trough, so neither counts the other bump; each share
    # stays within 10 % of its bump's own integral √(2π)·σ·height (Gaussian integral; the split
    # at the trough trades the bumps' overlapping tails)
    f = np.arange(20.0, 60.0, 0.05)
    g = np.exp(-0.5 * (f - 40.0) ** 2) + 0.8 * np.exp(-0.5 * (f - 43.0) ** 2) + 1e-4
    summary = summarise_psd(AccelerationPSD(f, g, interpolation="linear"))
    total = float(np.trapezoid(g, f))
    shares = {round(p.frequency_Hz): p.variance_share for p in summary.peaks[:2]}
    assert shares[40] == pytest.approx(math.sqrt(2 * math.pi) * 1.0 / total, rel=0.1)
    assert shares[43] == pytest.approx(math.sqrt(2 * math.pi) * 0.8 / total, rel=0.1)
    assert sum(p.variance_share for p in summary.peaks) <= 1.0


def test_a_psd_table_rejects_bad_rows():
    with pytest.raises(ValueError):
        AccelerationPSD(np.array([10.0, 5.0]), np.array([1.0, 1.0]))
    with pytest.raises(ValueError):
        AccelerationPSD(np.array([5.0, 10.0]), np.array([1.0, -1.0]))
