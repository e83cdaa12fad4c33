"""Calibrate a case from tests on the built prototype.

* Damping from a ring-down (free decay about a well, or of the magnet-free beam): the
  logarithmic decrement of the cycle amplitudes with its interval (`log_decrement`), and the
  Hilbert envelope with the damping per amplitude band, where an amplitude dependence is
  reported when the record shows one (`envelope_damping`, after Feldman 1994).  Record it with
  no power drawn: the piezo shorted (displacement) or open (voltage), the coil open.
* The restoring force from a static force–deflection table: a polynomial with odd and even
  terms and the coefficients' intervals from the least-squares covariance
  (`fit_restoring_force`); for a geometry case, the effective remanence and gap offset that
  make the magnet model reproduce the table (`fit_magnet_pair`).
* The calibrated case file: the original text with the calibrated values put in place and a
  comment naming the test each came from (`calibrate_case`).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from harvester.case.load import LoadedCase, parse_case
from harvester.case.measurements import ForceDeflection, Ringdown, SteppedSine
from harvester.errors import CaseError
from harvester.model import CoilCircuit, PiezoCircuit, ReducedModel, analyse_wells, rest_well

CONFIDENCE = 0.95
MIN_CYCLES = 4  # a decrement needs this many cycles above the floor
# Cycles are read from the record smoothed over this share of a period (Savitzky–Golay cubic):
# wider windows quiet more noise, and any width leaves a decaying sine's decrement unchanged.
CYCLE_SMOOTHING = 1.0 / 8.0
# Cycles smaller than this share of the first are left out: noise adds to a small amplitude and
# makes the decay look slower (a lower floor uses more cycles but lets noise bias δ low).
RINGDOWN_FLOOR = 0.05
# ... and cycles smaller than this many times the record's noise RMS: an extremum read through
# noise sits high, so small cycles make the decay look slower (at 2 µm of noise on a 0.5 mm
# decay the damping read 0.55 % low down to 12σ, 0.2 % low down to 25σ and unbiased to 50σ).
NOISE_MARGIN = 40.0
ENVELOPE_EDGE_CYCLES = 2  # Hilbert-transform end effects: this many cycles dropped at each end
AMPLITUDE_BANDS = 6  # the envelope's decay is read in this many stretches of equal duration
# an amplitude dependence is reported where the damping ratio changes by more than this share
# over the recorded amplitudes and its trend is significant at CONFIDENCE
AMPLITUDE_DEPENDENCE = 0.10
MIN_FORCE_DEGREE = 3
MAX_FORCE_DEGREE = 7


# -- damping ----------------------------------------------------------------------------------
@dataclass(frozen=True)
class LogDecrement:
    """Logarithmic decrement of a ring-down and the damping ratio it implies."""

    decrement: float  # δ = ln(h_n/h_(n+1)) per cycle
    decrement_ci95: tuple[float, float]
    damping_ratio: float  # ζ = δ/√(4π² + δ²)
    damping_ratio_ci95: tuple[float, float]
    damping_ratio_standard_error: float  # of the slope, through dζ/dδ
    damped_frequency_Hz: float
    natural_frequency_Hz: float  # f_d/√(1 − ζ²)
    cycles: int  # cycle amplitudes used
    cycle_time_s: np.ndarray  # time of each cycle's amplitude (mid-way maximum to minimum)
    cycle_amplitude: np.ndarray  # half the maximum-to-minimum range, in the record's unit
    cycle_centre: np.ndarray  # the mid-point the cycle swings about


@dataclass(frozen=True)
class EnvelopeDamping:
    """Damping from the Hilbert envelope, overall and per amplitude band."""

    damping_ratio: float
    damping_ratio_ci95: tuple[float, float]  # Student's t over the bands
    damped_frequency_Hz: float
    band_amplitude: np.ndarray  # mean envelope of each band, in the record's unit
    band_damping_ratio: np.ndarray
    band_frequency_Hz: np.ndarray  # the backbone: frequency against amplitude
    amplitude_dependent: bool
    time_s: np.ndarray  # the envelope, over the stretch used (for the figure)
    envelope: np.ndarray


@dataclass(frozen=True)
class RingdownFit:
    """Both damping estimates of one ring-down; the log decrement is the one adopted."""

    source: str
    log_decrement: LogDecrement
    envelope: EnvelopeDamping
    warnings: tuple[str, ...] = ()


@dataclass(frozen=True)
class Cycles:
    """The cycles of an oscillation: for each maximum and the minimum after it, the mid-time,
    half their difference (the amplitude) and their mean (the centre it swings about)."""

    time_s: np.ndarray
    amplitude: np.ndarray
    centre: np.ndarray
    peak_time_s: np.ndarray  # time of each maximum
    noise_rms: float  # RMS of the record less its smoothed version: the measurement noise


def find_cycles(time_s: np.ndarray, response: np.ndarray) -> Cycles:
    """Cycle amplitudes and centres of a sampled oscillation (`Cycles`).

    The record is smoothed by a Savitzky–Golay cubic over CYCLE_SMOOTHING of its dominant
    period, so that noise makes no extra extrema; a linear filter maps a decaying sine onto one
    with the same decay and frequency, so the decrement is unchanged.  Extrema are located at
    least 0.6 of a period apart (`scipy.signal.find_peaks`) and refined to the zeros of the
    derivative of a cubic spline through the smoothed samples (error of order (ωΔt)⁴).  Half
    the range from a maximum to the next minimum does not depend on the equilibrium the
    oscillation is about, and for a decaying sine e^(−σt) cos ωt successive ones fall exactly
    by e^(σT).  Extrema within a smoothing window of the ends are left out.
    """
    from scipy.interpolate import CubicSpline
    from scipy.signal import find_peaks, savgol_filter

    from harvester.analysis.measured import strongest_line

    sample_rate = 1.0 / float(np.median(np.diff(time_s)))
    frequency, _ = strongest_line(response, sample_rate)
    per_period = sample_rate / frequency
    width = max(5, int(round(CYCLE_SMOOTHING * per_period)))
    width += 1 - width % 2
    smooth = savgol_filter(response, width, 3)
    spline = CubicSpline(time_s, smooth)
    roots = spline.derivative().roots(extrapolate=False)
    roots = roots[np.isfinite(roots)]
    spacing = max(1, int(0.6 * per_period))
    ends = (width, time_s.size - 1 - width)

    def refined(indices: np.ndarray, sign: float) -> np.ndarray:
        times = []
        for i in indices[(indices > ends[0]) & (indices < ends[1])]:
            near = roots[(roots >= time_s[i - 1]) & (roots <= time_s[i + 1])]
            times.append(near[np.argmax(sign * spline(near))] if near.size else time_s[i])
        return np.array(times)

    tops = refined(find_peaks(smooth, distance=spacing)[0], 1.0)
    bottoms = refined(find_peaks(-smooth, distance=spacing)[0], -1.0)
    following = np.searchsorted(bottoms, tops, side="right")
    paired = following < bottoms.size
    tops, bottoms = tops[paired], bottoms[following[paired]]
    high, low = spline(tops), spline(bottoms)
    return Cycles(0.5 * (tops + bottoms), 0.5 * (high - low), 0.5 * (high + low), tops,
                  float(np.std(response - smooth)))


def log_decrement(ringdown: Ringdown) -> LogDecrement:
    """Damping ratio of a ring-down from the logarithmic decrement of its cycle amplitudes.

        ln h_n = ln h_0 − δ n   (least squares over the cycles above RINGDOWN_FLOOR h_0
                                 and NOISE_MARGIN times the record's noise RMS),
        ζ = δ/√(4π² + δ²),      f_n = f_d/√(1 − ζ²),

    with h_n the cycle amplitudes (`find_cycles`) and f_d from the spacing of the maxima.
    The 95 % interval of δ is Student's t on the slope, mapped to ζ (ζ rises with δ).  Exact for
    a decaying sine; a nonlinear well's amplitude-dependent damping shows in
    `envelope_damping`.

    References
    ----------
    Thomson & Dahleh (1998), *Theory of Vibration with Applications*, 5th ed., §2.6
    (logarithmic decrement).
    """
    from scipy.stats import t as student_t

    cycles = find_cycles(ringdown.time_s, ringdown.response)
    amplitudes, tops = cycles.amplitude, cycles.peak_time_s
    floor = max(RINGDOWN_FLOOR * amplitudes[0] if amplitudes.size else 0.0,
                NOISE_MARGIN * cycles.noise_rms)
    keep = 0
    while keep < amplitudes.size and amplitudes[keep] >= floor and amplitudes[keep] > 0.0:
        keep += 1
    if keep < MIN_CYCLES:
        raise CaseError(
            f"{keep} cycle(s) above {floor:.3g} (the larger of {100 * RINGDOWN_FLOOR:g} % of "
            f"the first and {NOISE_MARGIN:g} × the noise RMS); a decrement needs at least "
            f"{MIN_CYCLES}: record a longer, larger or less damped decay",
            file=ringdown.source,
            key="ringdown",
        )
    n = np.arange(keep)
    coefficients, residual, *_ = np.polyfit(n, np.log(amplitudes[:keep]), 1, full=True)
    decrement = -float(coefficients[0])
    dof = keep - 2
    spread = math.sqrt(float(residual[0]) / dof / np.sum((n - n.mean()) ** 2)) \
        if dof > 0 and residual.size else 0.0
    half = float(student_t.ppf(0.5 + 0.5 * CONFIDENCE, max(dof, 1))) * spread
    interval = (decrement - half, decrement + half)
    period = float(np.polyfit(np.arange(tops[:keep].size), tops[:keep], 1)[0])
    zeta = damping_ratio_from_decrement(decrement)
    damped = 1.0 / period
    slope = 4.0 * math.pi**2 / (4.0 * math.pi**2 + decrement**2) ** 1.5  # dζ/dδ
    return LogDecrement(
        decrement=decrement, decrement_ci95=interval, damping_ratio=zeta,
        damping_ratio_ci95=(damping_ratio_from_decrement(interval[0]),
                            damping_ratio_from_decrement(interval[1])),
        damping_ratio_standard_error=slope * spread,
        damped_frequency_Hz=damped, natural_frequency_Hz=damped / math.sqrt(1.0 - zeta**2),
        cycles=keep, cycle_time_s=cycles.time_s[:keep], cycle_amplitude=amplitudes[:keep],
        cycle_centre=cycles.centre[:keep])


def damping_ratio_from_decrement(decrement: float) -> float:
    """ζ = δ/√(4π² + δ²) of a logarithmic decrement δ per cycle [-].

    >>> round(damping_ratio_from_decrement(2 * math.pi * 0.01 / math.sqrt(1 - 0.01**2)), 12)
    0.01
    """
    return decrement / math.sqrt(4.0 * math.pi**2 + decrement**2)


def envelope_damping(ringdown: Ringdown, decrement: LogDecrement) -> EnvelopeDamping:
    """Damping ratio from the Hilbert envelope of a ring-down, overall and per amplitude band.

    The oscillation about its centre line (the mid-points of the cycles, interpolated) is made
    analytic, z = y + i H[y]; its envelope A = |z| and phase φ = arg z give the decay rate
    σ = −d ln A/dt and the damped frequency ω_d = dφ/dt, and ζ = σ/√(σ² + ω_d²).  Both are
    least-squares slopes over the cycles `decrement` used, less ENVELOPE_EDGE_CYCLES at each
    end (the transform's end effects), overall and in AMPLITUDE_BANDS stretches of equal
    duration.  The bands give the damping and frequency against amplitude (the FREEVIB idea),
    and the overall interval (Student's t over the bands).  The damping is reported as
    amplitude-dependent when its trend over the bands is significant at CONFIDENCE and changes
    ζ by more than AMPLITUDE_DEPENDENCE over the recorded amplitudes.

    References
    ----------
    Feldman (1994), Mech. Syst. Signal Process. 8:119 (free vibration analysis by the Hilbert
    transform, FREEVIB); `scipy.signal.hilbert`.
    """
    from scipy.signal import hilbert
    from scipy.stats import linregress
    from scipy.stats import t as student_t

    t, y = ringdown.time_s, ringdown.response
    times = decrement.cycle_time_s
    period = 1.0 / decrement.damped_frequency_Hz
    centred = y - np.interp(t, times, decrement.cycle_centre)
    analytic = hilbert(centred)
    envelope = np.abs(analytic)
    phase = np.unwrap(np.angle(analytic))
    start = times[0] + ENVELOPE_EDGE_CYCLES * period
    stop = times[-1] - ENVELOPE_EDGE_CYCLES * period
    inside = (t >= start) & (t <= stop)
    if np.count_nonzero(inside) < 8 or stop - start < 2.0 * period:
        raise CaseError(
            f"{decrement.cycles} usable cycle(s): the Hilbert envelope needs more than "
            f"{2 * ENVELOPE_EDGE_CYCLES + 2} (its ends are dropped)",
            file=ringdown.source,
            key="ringdown",
        )
    tt, log_a, ph = t[inside], np.log(envelope[inside]), phase[inside]
    sigma = -float(np.polyfit(tt, log_a, 1)[0])
    omega = abs(float(np.polyfit(tt, ph, 1)[0]))
    zeta = sigma / math.hypot(sigma, omega)
    edges = np.linspace(tt[0], tt[-1], AMPLITUDE_BANDS + 1)
    band_a, band_zeta, band_f = [], [], []
    for lo, hi in zip(edges[:-1], edges[1:]):
        part = (tt >= lo) & (tt <= hi)
        if np.count_nonzero(part) < 4:
            continue
        s = -float(np.polyfit(tt[part], log_a[part], 1)[0])
        w = abs(float(np.polyfit(tt[part], ph[part], 1)[0]))
        band_a.append(float(np.mean(np.exp(log_a[part]))))
        band_zeta.append(s / math.hypot(s, w))
        band_f.append(w / (2.0 * math.pi))
    band_a, band_zeta, band_f = (np.array(v) for v in (band_a, band_zeta, band_f))
    bands = band_zeta.size
    half = 0.0
    dependent = False
    if bands >= 3:
        half = float(student_t.ppf(0.5 + 0.5 * CONFIDENCE, bands - 1)
                     * np.std(band_zeta, ddof=1) / math.sqrt(bands))
        trend = linregress(band_a, band_zeta)
        significant = trend.pvalue < 1.0 - CONFIDENCE
        change = abs(trend.slope) * float(np.ptp(band_a)) / abs(float(np.mean(band_zeta)))
        dependent = bool(significant and change > AMPLITUDE_DEPENDENCE)
    return EnvelopeDamping(
        damping_ratio=zeta, damping_ratio_ci95=(zeta - half, zeta + half),
        damped_frequency_Hz=omega / (2.0 * math.pi), band_amplitude=band_a,
        band_damping_ratio=band_zeta, band_frequency_Hz=band_f, amplitude_dependent=dependent,
        time_s=tt, envelope=np.exp(log_a))


def fit_ringdown(ringdown: Ringdown) -> RingdownFit:
    """Log decrement and Hilbert envelope of one ring-down, with a warning where they disagree
    by more than their intervals or the damping depends on amplitude."""
    decrement = log_decrement(ringdown)
    envelope = envelope_damping(ringdown, decrement)
    warnings = []
    lo, hi = decrement.damping_ratio_ci95
    e_lo, e_hi = envelope.damping_ratio_ci95
    if e_hi < lo or e_lo > hi:
        warnings.append(
            f"{ringdown.source}: the Hilbert envelope gives ζ = {envelope.damping_ratio:.4g}, "
            f"the log decrement {decrement.damping_ratio:.4g} (intervals do not meet); the "
            "decrement is used")
    if envelope.amplitude_dependent:
        warnings.append(
            f"{ringdown.source}: the damping depends on amplitude (ζ from "
            f"{envelope.band_damping_ratio.min():.3g} to {envelope.band_damping_ratio.max():.3g} "
            "over the recorded amplitudes); the decrement averages them")
    return RingdownFit(ringdown.source, decrement, envelope, tuple(warnings))


# -- restoring force --------------------------------------------------------------------------
@dataclass(frozen=True)
class StiffnessFit:
    """Polynomial restoring force F(x) = Σ_j k_j x^j through a force–deflection table (SI:
    k_0 [N], k_1 [N/m], k_2 [N/m²], k_3 [N/m³], …)."""

    source: str
    coefficients: tuple[float, ...]
    ci95: tuple[tuple[float, float], ...]
    standard_errors: tuple[float, ...]
    degree: int
    residual_rms_N: float
    even_terms_significant: bool  # k_2, k_4, … differ from 0 at CONFIDENCE: unequal wells

    @property
    def odd_stiffness(self) -> tuple[float, ...]:
        """(k1, k3, …): the terms a case's `[reduced].stiffness` list holds."""
        return tuple(self.coefficients[1::2])

    @property
    def odd_ci95(self) -> tuple[tuple[float, float], ...]:
        return tuple(self.ci95[1::2])


def fit_restoring_force(table: ForceDeflection, degree: int | None = None) -> StiffnessFit:
    """Least-squares polynomial through a static force–deflection table, with intervals.

        F(x) = k_0 + k_1 x + k_2 x² + k_3 x³ + … + k_d x^d,

    k_0 the force reading at zero deflection (load-cell offset), even terms an asymmetry of the
    wells.  The covariance s² (AᵀA)⁻¹ (s² the residual variance) gives each coefficient's
    standard error and Student's-t interval; the fit runs in x/max|x| for conditioning.
    `degree` None picks d from MIN_FORCE_DEGREE to MAX_FORCE_DEGREE by the Bayesian
    information criterion n ln(RSS/n) + (d + 1) ln n.

    References
    ----------
    Björck (1996), Numerical Methods for Least Squares Problems, SIAM, §1.1 (covariance of
    the least-squares estimate); Schwarz (1978), Ann. Stat. 6:461 (BIC).
    """
    from scipy.stats import t as student_t

    x, force = table.deflection_m, table.force_N
    scale = float(np.max(np.abs(x)))
    u = x / scale
    n = x.size
    degrees = [degree] if degree is not None else range(MIN_FORCE_DEGREE, MAX_FORCE_DEGREE + 1)
    best = None
    for d in degrees:
        if n <= d + 2:
            break
        basis = np.vander(u, d + 1, increasing=True)
        coef, *_ = np.linalg.lstsq(basis, force, rcond=None)
        rss = float(np.sum((force - basis @ coef) ** 2))
        score = n * math.log(max(rss, 1e-300) / n) + (d + 1) * math.log(n)
        if best is None or score < best[0]:
            best = (score, d, basis, coef, rss)
    if best is None:
        raise CaseError(f"{n} rows cannot fit a polynomial of degree {MIN_FORCE_DEGREE} with "
                        "its intervals; measure more deflections", file=table.source,
                        key="force_deflection")
    _, d, basis, coef, rss = best
    dof = n - (d + 1)
    covariance = rss / dof * np.linalg.inv(basis.T @ basis)
    powers = scale ** np.arange(d + 1)
    k = coef / powers
    se = np.sqrt(np.maximum(np.diag(covariance), 0.0)) / powers
    z = float(student_t.ppf(0.5 + 0.5 * CONFIDENCE, dof))
    even = [j for j in range(2, d + 1, 2)]
    return StiffnessFit(
        source=table.source, coefficients=tuple(float(v) for v in k),
        ci95=tuple((float(v - z * s), float(v + z * s)) for v, s in zip(k, se)),
        standard_errors=tuple(float(s) for s in se), degree=d,
        residual_rms_N=math.sqrt(rss / n),
        even_terms_significant=any(abs(k[j]) > z * se[j] for j in even))


@dataclass(frozen=True)
class MagnetFit:
    """Effective remanence and gap offset that make the magnet model reproduce a measured
    force–deflection table (geometry cases)."""

    source: str
    remanence_scale: float  # both magnets' remanence × this
    remanence_scale_ci95: tuple[float, float]
    remanence_scale_standard_error: float
    tip_remanence_T: float
    fixed_remanence_T: float
    gap_offset_m: float  # built gap − nominal gap
    gap_offset_ci95_m: tuple[float, float]
    gap_offset_standard_error_m: float
    remanence_gap_correlation: float  # of the two estimates, from the fit's covariance
    gap_m: float  # nominal gap + offset
    force_offset_N: float  # load-cell reading at zero deflection
    residual_rms_N: float


def fit_magnet_pair(built, table: ForceDeflection) -> MagnetFit:
    """Remanence scale s and gap offset Δg that make the model's restoring force match a
    measured force–deflection table, by nonlinear least squares.

        F_model(x) = k_b x − F_mag(x; s B_r,tip, s B_r,fixed, g + Δg) + F_0

    with the beam stiffness k_b and the magnet force of `build.restoring_force` (the case's
    magnet model, the tip foreshortened by α x² as in the reduced model: a static test bends
    the same beam), and a load-cell offset F_0.  The force between the magnets grows as
    s² (the product of the remanences) and its shape in x changes with the gap, which is what
    lets the two be told apart.  Intervals from the Jacobian at the solution,
    s² (JᵀJ)⁻¹, with Student's t.

    Parameters
    ----------
    built : `build.Built` of a geometry case with a fixed magnet
    table : the measured force–deflection table

    References
    ----------
    Moré (1978), The Levenberg–Marquardt algorithm, Springer LNM 630:105
    (`scipy.optimize.least_squares`); Björck (1996), §9.1 (covariance of a nonlinear fit).
    """
    from scipy.optimize import least_squares
    from scipy.stats import t as student_t

    from harvester.build import restoring_force

    if built.fixed is None or built.beam is None:
        raise CaseError("a remanence and gap fit needs a geometry case with a fixed magnet",
                        key="fixed_magnet")
    x, measured = table.deflection_m, table.force_N
    k_beam = built.beam.tip_stiffness_N_per_m
    slope = built.beam.slope_per_deflection_per_m
    alpha = built.beam.foreshortening_per_m
    gap = built.gap_m
    force_scale = float(np.max(np.abs(measured))) or 1.0

    def model_force(params: np.ndarray) -> np.ndarray:
        s, offset_mm, f0 = params
        tip = replace(built.tip, remanence_T=s * built.tip.remanence_T)
        fixed = replace(built.fixed, remanence_T=s * built.fixed.remanence_T)
        force = restoring_force(x, k_beam, tip, fixed, gap + 1e-3 * offset_mm, slope,
                                built.magnet_model, alpha)
        return force + f0 * force_scale

    def residual(params: np.ndarray) -> np.ndarray:
        return (model_force(params) - measured) / force_scale

    # the gap offset runs in millimetres and the force offset in units of the largest force,
    # so the three unknowns are of order one; the gap stays above a tenth of the nominal
    lower = (0.2, -1e3 * 0.9 * gap, -1.0)
    fit = least_squares(residual, x0=(1.0, 0.0, 0.0), bounds=(lower, (5.0, 1e3 * gap, 1.0)),
                        xtol=1e-12, ftol=1e-12, gtol=1e-12)
    n = x.size
    dof = max(n - 3, 1)
    rss = float(np.sum(fit.fun**2)) * force_scale**2
    jacobian = fit.jac * force_scale
    covariance = rss / dof * np.linalg.pinv(jacobian.T @ jacobian)
    z = float(student_t.ppf(0.5 + 0.5 * CONFIDENCE, dof))
    s, offset_mm, f0 = fit.x
    s_se = math.sqrt(max(covariance[0, 0], 0.0))
    g_se = math.sqrt(max(covariance[1, 1], 0.0)) * 1e-3
    correlation = (float(covariance[0, 1]) / (s_se * g_se * 1e3)) if s_se * g_se > 0.0 else 0.0
    offset = 1e-3 * float(offset_mm)
    return MagnetFit(
        source=table.source, remanence_scale=float(s),
        remanence_scale_ci95=(s - z * s_se, s + z * s_se), remanence_scale_standard_error=s_se,
        tip_remanence_T=float(s * built.tip.remanence_T),
        fixed_remanence_T=float(s * built.fixed.remanence_T), gap_offset_m=offset,
        gap_offset_ci95_m=(offset - z * g_se, offset + z * g_se),
        gap_offset_standard_error_m=g_se, remanence_gap_correlation=correlation,
        gap_m=gap + offset,
        force_offset_N=float(f0 * force_scale), residual_rms_N=math.sqrt(rss / n))


# -- stepped sine about a well ----------------------------------------------------------------
# A step inside the half-power band [f_w(1 − ζ), f_w(1 + ζ)] pins the damping; fewer than this
# many leave it to the flanks' shape, and the interval widens.
MIN_HALF_POWER_ROWS = 3
# the single-mode receptance describes a table whose RMS misfit is below this share of the
# peak; above it another mode, a nonlinear response or a wrong column is suspected
MAX_MISFIT = 0.05
# the response level r = m_f/m of the fit against the model's: a ratio further than this from
# 1 points at a sensor's calibration or units (the mode shape alone moves it a few per cent)
LEVEL_TOLERANCE = 0.10
# the backbone shift at the largest tested amplitude is reported when it exceeds both the
# fit's interval and this share of f_w (smaller shifts are below the force fit's own accuracy)
NONLINEAR_SHIFT = 1e-3
# (ω a/h)² above this: the circuit's lag (a coil's inductance) is not negligible at f_w
REACTANCE_NEGLIGIBLE = 0.01
# a swept sine is slow enough when the frequency moves less than this share of the half-power
# half-width ζf_w in the response's decay time 1/(ζω_w): R < share·2πζ²f_w²
SLOW_SWEEP = 0.1
REMANENCE_STEP = 0.02  # first secant step of the remanence scale that matches f_w
REMANENCE_TOLERANCE = 1e-7  # ... and where it stops (about 1e-6 of f_w)
REMANENCE_GAP_STEP_M = 1e-5  # the gap step of the remanence's sensitivity to the gap


@dataclass(frozen=True)
class ReceptanceFit:
    """The single-degree-of-freedom receptance about a well fitted to a stepped-sine table:

        X/A = e^(iφ0) r/(ω_w² − ω² + 2iζ_T ω_w ω),   r = m_f/m for the reduced model.
    """

    source: str
    well_frequency_Hz: float  # f_w, at the tested load and amplitude
    well_frequency_ci95_Hz: tuple[float, float]
    well_frequency_standard_error_Hz: float
    damping_ratio: float  # ζ_T, total: mechanical and electrical at the tested load
    damping_ratio_ci95: tuple[float, float]
    damping_ratio_standard_error: float
    correlation: float  # of the f_w and ζ_T estimates
    level_per_s2: float  # r [(m/(m/s²))·(rad/s)²] = m_f/m
    level_ci95_per_s2: tuple[float, float]
    phase_offset_rad: float | None  # φ0 (π for the tip's deflection against a(t)); None: no phase
    phase_read_as: str  # "lead" (x = X cos(ωt + φ)), "lag" (sign turned) or "" (no phase)
    dof: int  # residuals less unknowns: Student's t of the intervals
    rows: int
    half_power_rows: int  # steps inside [f_w(1 − ζ_T), f_w(1 + ζ_T)]
    misfit_ratio: float  # RMS misfit ÷ the peak receptance
    peak_displacement_m: float  # the largest tip amplitude of the test
    warnings: tuple[str, ...] = ()
    measured: str = "tip_displacement"  # the table's response column (SteppedSine.measured)


def sdof_receptance(frequency_Hz, well_frequency_Hz: float, damping_ratio: float,
                    level_per_s2: float, phase_offset_rad: float = math.pi):
    """Receptance of a single-degree-of-freedom oscillator to base acceleration [m/(m/s²)].

        X/A = e^(iφ0) r/(ω_w² − ω² + 2iζ ω_w ω),   |X/A| = r/√((ω_w² − ω²)² + (2ζ ω_w ω)²),

    the reduced model m ẍ + c ẋ + k_w x = −m_f a linearised about a well, with r = m_f/m,
    ω_w² = k_w/m, ζ = c/(2mω_w) and φ0 = π (the tip's deflection against the base
    acceleration, x = X cos(ωt + φ) when a = A cos ωt).  At ω = ω_w it is e^(iφ0) r/(2iζω_w²).

    >>> h = sdof_receptance(10.0, 10.0, 0.05, 1.0)
    >>> float(round(abs(h) * 2 * 0.05 * (2 * math.pi * 10.0) ** 2, 12))
    1.0
    >>> float(round(np.degrees(np.angle(h)), 9))
    90.0

    References
    ----------
    Ewins (2000), *Modal Testing: Theory, Practice and Application*, 2nd ed., Research Studies
    Press, ch. 2 (receptance of a viscously damped SDOF system) and ch. 4.
    """
    omega = 2.0 * math.pi * np.asarray(frequency_Hz, dtype=float)
    omega_w = 2.0 * math.pi * well_frequency_Hz
    return (np.exp(1j * phase_offset_rad) * level_per_s2
            / (omega_w**2 - omega**2 + 2j * damping_ratio * omega_w * omega))


def tip_from_voltage(sweep: SteppedSine, model: ReducedModel) -> SteppedSine:
    """A stepped sine of the load's voltage as one of the tip's deflection, through the
    model's circuit at its load:

        a q̇ = g ẋ − h q   ⇒   X = q (h + iωa)/(g iω),

    with q = V/R_l for a coil (its current) and q = V for a piezo; the phase moves by the
    angle of (h + iωa)/(g iω) (a sensor's polarity is left to the fit's phase offset).  The
    frequency and damping a fit reads are those of the tip; its level is the model's m_f/m
    times g_true/g, so it checks the coupling.

    References
    ----------
    Williams & Yates (1996), Sens. Actuators A 52:8; Erturk & Inman (2011), *Piezoelectric
    Energy Harvesting*, Wiley, ch. 3.
    """
    from dataclasses import replace as with_fields

    lag, coupling, loss = model.circuit_coefficients()
    if model.transducer is None or coupling == 0.0:
        raise CaseError("a voltage table needs a transducer in the case: give the tip's "
                        "displacement instead", file=sweep.source, key="sweep")
    omega = 2.0 * math.pi * sweep.frequency_Hz
    per_charge = 1.0 / model.load_ohm if isinstance(model.transducer, CoilCircuit) else 1.0
    turn = per_charge * (loss + 1j * omega * lag) / (coupling * 1j * omega)
    phase = None if sweep.phase_rad is None else sweep.phase_rad + np.angle(turn)
    return with_fields(sweep, tip_displacement_m=sweep.voltage_V * np.abs(turn),
                       phase_rad=phase)


def half_power_estimate(frequency_Hz: np.ndarray, magnitude: np.ndarray) -> tuple[float, float]:
    """(f_r [Hz], ζ) by the peak-amplitude method: the peak of |H| (a parabola through the
    largest step and its neighbours) and the half-power points, where |H| = |H|_max/√2
    (interpolated between steps), ζ = (f_b − f_a)/(2 f_r); a band cut off by the table's end
    is taken as symmetric.

    >>> f = np.linspace(8.0, 12.0, 401)
    >>> fr, zeta = half_power_estimate(f, np.abs(sdof_receptance(f, 10.0, 0.02, 1.0)))
    >>> round(fr, 3), round(zeta, 4)  # a receptance peaks at f_n √(1 − 2ζ²)
    (9.996, 0.02)

    References
    ----------
    Ewins (2000), *Modal Testing*, 2nd ed., ch. 4 (peak-amplitude method).
    """
    k = int(np.argmax(magnitude))
    f_r = float(frequency_Hz[k])
    if 0 < k < frequency_Hz.size - 1:
        top = np.polyfit(frequency_Hz[k - 1:k + 2], magnitude[k - 1:k + 2], 2)
        if top[0] < 0.0:
            f_r = float(np.clip(-top[1] / (2.0 * top[0]), frequency_Hz[k - 1],
                                frequency_Hz[k + 1]))
    half = magnitude[k] / math.sqrt(2.0)
    widths = []
    for side in (-1, 1):
        i = k
        while 0 <= i + side < magnitude.size and magnitude[i + side] > half:
            i += side
        j = i + side
        if 0 <= j < magnitude.size:  # |H| falls to the half-power level between i and j
            share = (magnitude[i] - half) / (magnitude[i] - magnitude[j])
            widths.append(abs(float(frequency_Hz[i] + share * (frequency_Hz[j]
                                                               - frequency_Hz[i])) - f_r))
    width = 2.0 * float(np.mean(widths)) if widths else 0.1 * f_r
    return f_r, width / (2.0 * f_r)


def fit_receptance(sweep: SteppedSine) -> ReceptanceFit:
    """Natural frequency and total damping about a well from a stepped-sine table, by least
    squares on the single-degree-of-freedom receptance (`sdof_receptance`).

    The unknowns are f_w, ζ_T, the level r and, where the table gives the phase, a phase
    offset φ0 (the sensors' polarity and the file's reference); the residuals are the
    complex receptance's misfit H_model − X e^(iφ)/A (its modulus's without a phase), which
    is the least-squares estimate for noise of equal size on every step's response.  A phase
    that rises through the resonance is a lag convention and is turned round.  The start is
    the peak-amplitude estimate (`half_power_estimate`); the intervals come from the Jacobian
    at the solution, s² (JᵀJ)⁻¹, with Student's t on the residuals' degrees of freedom.  The
    resonance must lie inside the table: its largest response may not be at either end.

    References
    ----------
    Ewins (2000), *Modal Testing: Theory, Practice and Application*, 2nd ed., Research Studies
    Press, ch. 4 (SDOF modal analysis: peak amplitude, circle fit, and the least-squares fit of
    the SDOF receptance); Björck (1996), Numerical Methods for Least Squares Problems, SIAM,
    §9.1 (covariance of a nonlinear fit); `scipy.optimize.least_squares`.
    """
    from scipy.optimize import least_squares
    from scipy.stats import t as student_t

    f = sweep.frequency_Hz
    measured = sweep.receptance_m_per_mps2
    magnitude = np.abs(measured)
    peak = int(np.argmax(magnitude))
    if peak in (0, f.size - 1):
        end = "first" if peak == 0 else "last"
        raise CaseError(
            f"the largest response is at the table's {end} step ({f[peak]:.4g} Hz): the "
            "resonance is not inside the swept band; extend the sweep past it",
            file=sweep.source, key="sweep")
    read_as = ""
    if sweep.phase_rad is not None:
        turn = np.unwrap(np.angle(measured))
        read_as = "lead"
        if turn[-1] > turn[0]:
            measured = np.conj(measured)
            read_as = "lag"
    f0, zeta0 = half_power_estimate(f, magnitude)
    zeta0 = min(max(zeta0, 1e-4), 0.5)
    scale = float(magnitude[peak])
    level0 = scale * 2.0 * zeta0 * (2.0 * math.pi * f0) ** 2
    phased = sweep.phase_rad is not None

    def model(p: np.ndarray) -> np.ndarray:
        return sdof_receptance(f, p[0] * f0, p[1] * zeta0, p[2] * level0,
                               p[3] if phased else math.pi)

    def residual(p: np.ndarray) -> np.ndarray:
        if phased:
            miss = (model(p) - measured) / scale
            return np.concatenate((miss.real, miss.imag))
        return (np.abs(model(p)) - magnitude) / scale

    start = [1.0, 1.0, 1.0] + ([float(np.angle(measured[peak])) + 0.5 * math.pi]
                               if phased else [])
    bounds = ([0.5, 1e-3, 1e-3] + ([-4.0 * math.pi] if phased else []),
              [2.0, 1e3, 1e3] + ([4.0 * math.pi] if phased else []))
    fit = least_squares(residual, start, bounds=bounds, xtol=1e-14, ftol=1e-14, gtol=1e-14)
    unknowns = len(start)
    dof = f.size - unknowns  # the rows are the units of the interval (`_row_sandwich`)
    if dof < 1:
        raise CaseError(f"{f.size} steps leave no degree of freedom for the fit's intervals; "
                        "measure more frequencies", file=sweep.source, key="sweep")
    rss = float(np.sum(fit.fun**2))
    covariance = _row_sandwich(fit.jac, fit.fun, f.size)
    spread = np.sqrt(np.maximum(np.diag(covariance), 0.0))
    z = float(student_t.ppf(0.5 + 0.5 * CONFIDENCE, dof))
    f_w, zeta, level = fit.x[0] * f0, fit.x[1] * zeta0, fit.x[2] * level0
    f_se, zeta_se, level_se = spread[0] * f0, spread[1] * zeta0, spread[2] * level0
    correlation = (float(covariance[0, 1] / (spread[0] * spread[1]))
                   if spread[0] * spread[1] > 0.0 else 0.0)
    inside = int(np.count_nonzero(np.abs(f - f_w) <= zeta * f_w))
    misfit = math.sqrt(rss / f.size)
    warnings = []
    if inside < MIN_HALF_POWER_ROWS:
        warnings.append(
            f"{sweep.source}: {inside} step(s) inside the half-power band {f_w * (1 - zeta):.4g}"
            f"–{f_w * (1 + zeta):.4g} Hz; the damping rests on the flanks (step more finely "
            f"near the resonance: {MIN_HALF_POWER_ROWS} or more)")
    rate = sweep.sweep_rate_Hz_per_s
    if rate is not None and rate > SLOW_SWEEP * 2.0 * math.pi * zeta**2 * f_w**2:
        warnings.append(
            f"{sweep.source}: the sweep moves at up to {rate:.3g} Hz/s, too fast for a "
            f"resonance this sharp (ζ = {zeta:.3g}: below "
            f"{SLOW_SWEEP * 2.0 * math.pi * zeta**2 * f_w**2:.3g} Hz/s); the peak is shifted "
            "and flattened: sweep more slowly or step")
    if misfit > MAX_MISFIT:
        warnings.append(
            f"{sweep.source}: the single-mode receptance misses the table by {100 * misfit:.2g} % "
            "of its peak (RMS): another mode nearby, a response that is not linear, or a "
            "wrong column")
    return ReceptanceFit(
        source=sweep.source, well_frequency_Hz=float(f_w),
        well_frequency_ci95_Hz=(float(f_w - z * f_se), float(f_w + z * f_se)),
        well_frequency_standard_error_Hz=float(f_se), damping_ratio=float(zeta),
        damping_ratio_ci95=(float(zeta - z * zeta_se), float(zeta + z * zeta_se)),
        damping_ratio_standard_error=float(zeta_se), correlation=correlation,
        level_per_s2=float(level),
        level_ci95_per_s2=(float(level - z * level_se), float(level + z * level_se)),
        phase_offset_rad=(float(math.pi - (math.pi - fit.x[3]) % (2.0 * math.pi))
                          if phased else None),
        phase_read_as=read_as, dof=int(dof), rows=int(f.size), half_power_rows=inside,
        misfit_ratio=float(misfit), peak_displacement_m=float(np.max(sweep.tip_displacement_m)),
        warnings=tuple(warnings), measured=sweep.measured)


def _row_sandwich(jacobian: np.ndarray, residual: np.ndarray, rows: int) -> np.ndarray:
    """Covariance of a least-squares estimate that holds whatever each row's noise is:

        (JᵀJ)⁻¹ (Σ_i J_iᵀ r_i r_iᵀ J_i) (JᵀJ)⁻¹ · n/(n − p),

    the rows i (a step's real and imaginary misfits together, as they share its noise) as the
    units, n rows and p unknowns.  A stepped sine's noise is not the same on every step: the
    reference's relative noise dominates at the resonance and the response sensor's absolute
    noise on the flanks, and the pooled s²(JᵀJ)⁻¹ then makes the damping's interval too
    narrow.

    References
    ----------
    White (1980), Econometrica 48:817 (heteroscedasticity-consistent covariance);
    MacKinnon & White (1985), J. Econometrics 29:305 (the n/(n − p) factor, HC1).
    """
    unknowns = jacobian.shape[1]
    per_row = residual.size // rows
    bread = np.linalg.pinv(jacobian.T @ jacobian)
    scores = np.einsum("rki,rk->ri", jacobian.reshape(per_row, rows, unknowns).swapaxes(0, 1),
                       residual.reshape(per_row, rows).T)
    meat = scores.T @ scores
    return bread @ meat @ bread * rows / max(rows - unknowns, 1)


def coupling_from_damping(electrical_damping_N_s_per_m: float, frequency_Hz: float,
                          lag: float, loss: float) -> float:
    """Transducer coupling g from the electrical damping it adds at one frequency.

    A circuit a q̇ = g ẋ − h q that pushes back with g q adds, at ω, the dynamic stiffness
    g² iω/(h + iωa) = k_e + iω c_e with

        c_e = g² h/(h² + ω²a²),   k_e = g² ω² a/(h² + ω²a²),   so  g = √(c_e (h² + ω²a²)/h).

    A coil (a = L_c, h = R_c + R_l, g = Bl) gives c_e = (Bl)²/(R_c + R_l) where its inductance
    is negligible (ωL_c ≪ R_c + R_l); a piezo (a = C_p, h = 1/R_l, g = θ) gives
    c_e = θ² R_l/(1 + (ωR_lC_p)²).

    Parameters
    ----------
    electrical_damping_N_s_per_m : c_e [N·s/m]
    frequency_Hz : the frequency it was measured at [Hz]
    lag, loss : a and h of the circuit (`ReducedModel.circuit_coefficients`): L_c [H] and
        R_c + R_l [Ω] for a coil, C_p [F] and 1/R_l [S] for a piezo

    Returns
    -------
    g: Bl [V·s/m] for a coil, θ [N/V] for a piezo

    >>> round(coupling_from_damping(3.0**2 / 1430.0, 17.0, 0.0, 1430.0), 12)
    3.0

    References
    ----------
    Williams & Yates (1996), Sens. Actuators A 52:8 (electrical damping of a coil);
    Erturk & Inman (2011), *Piezoelectric Energy Harvesting*, Wiley, ch. 3 (a piezo on a
    resistor).
    """
    omega = 2.0 * math.pi * frequency_Hz
    return math.sqrt(electrical_damping_N_s_per_m * (loss**2 + (omega * lag) ** 2) / loss)


def welch_satterthwaite(standard_errors: tuple[float, ...], dofs: tuple[float, ...]) -> float:
    """Effective degrees of freedom of a sum (or difference) of independent estimates.

        ν = (Σ u_i²)² / Σ (u_i⁴/ν_i)

    >>> round(welch_satterthwaite((1.0, 1.0), (10, 10)), 9)
    20.0

    References
    ----------
    Welch (1947), Biometrika 34:28; Satterthwaite (1946), Biometrics Bull. 2:110; JCGM 100:2008
    (GUM), §G.4.
    """
    total = sum(u * u for u in standard_errors)
    spread = sum(u**4 / n for u, n in zip(standard_errors, dofs) if u > 0.0)
    return total**2 / spread if spread > 0.0 else math.inf


def backbone_shift(force_coefficients: tuple[float, ...], mass_kg: float, well_m: float,
                   amplitude_m: float) -> float:
    """Shift of the natural frequency [Hz] about an equilibrium at a vibration amplitude.

    With the force expanded about the well, F(x_w + ξ) = k_w ξ + k_2 ξ² + k_3 ξ³ + …, and
    ω0² = k_w/m, α = k_2/m, β = k_3/m, the free vibration of amplitude a has

        ω = ω0 + (3β/(8ω0) − 5α²/(12ω0³)) a²

    (hardening from the cubic term, softening from the quadratic one that the well's tilt
    brings).  A linear fit of a test at amplitude a reads a well frequency off by about this.

    >>> # ẍ + x + 0.1 x³ = 0 at a = 1: ω = 1 + 3·0.1/8
    >>> round(2 * math.pi * backbone_shift((0.0, 1.0, 0.0, 0.1), 1.0, 0.0, 1.0), 12)
    0.0375

    References
    ----------
    Landau & Lifshitz (1976), *Mechanics*, 3rd ed., Pergamon, §28 (anharmonic oscillations;
    eq. 28.13, memory); Nayfeh & Mook (1979), *Nonlinear Oscillations*, §4.1 (Duffing).
    """
    from numpy.polynomial import polynomial as poly

    c = np.asarray(force_coefficients, dtype=float)
    k_w = float(poly.polyval(well_m, poly.polyder(c, 1)))
    if k_w <= 0.0:
        return math.nan
    alpha = float(poly.polyval(well_m, poly.polyder(c, 2))) / 2.0 / mass_kg
    beta = float(poly.polyval(well_m, poly.polyder(c, 3))) / 6.0 / mass_kg
    omega0 = math.sqrt(k_w / mass_kg)
    shift = (3.0 * beta / (8.0 * omega0) - 5.0 * alpha**2 / (12.0 * omega0**3)) * amplitude_m**2
    return shift / (2.0 * math.pi)


@dataclass(frozen=True)
class DampingSplit:
    """The total damping of a stepped sine, the ring-down's mechanical damping, and the
    electrical damping at the tested load, their difference [N·s/m]."""

    total_N_s_per_m: float  # c_T = 2mζ_T ω_w
    total_standard_error_N_s_per_m: float
    mechanical_N_s_per_m: float | None  # the ring-down's 2mζω_n (None: no ring-down)
    mechanical_standard_error_N_s_per_m: float | None
    electrical_N_s_per_m: float | None  # c_T − c_m
    electrical_ci95_N_s_per_m: tuple[float, float] | None
    electrical_standard_error_N_s_per_m: float | None
    dof: float | None  # Welch–Satterthwaite, of the electrical damping's interval


def split_damping(fit: ReceptanceFit, ringdown: RingdownFit | None,
                  mass_kg: float) -> DampingSplit:
    """Electrical damping at the tested load: the stepped sine's total damping less the
    ring-down's mechanical damping.

        c_T = 2m ζ_T ω_w,   c_m = 2m ζ ω_n (ring-down),   c_e = c_T − c_m,

    with m the model's effective mass (it cancels in c_e/c_T).  c_T's standard error comes
    through the fit's covariance of (f_w, ζ_T), c_m's from the decrement's; the two tests are
    independent, so u(c_e)² = u(c_T)² + u(c_m)², and the interval is Student's t with the
    Welch–Satterthwaite degrees of freedom (`welch_satterthwaite`).  Without a ring-down only
    c_T is given.
    """
    from scipy.stats import t as student_t

    omega = 2.0 * math.pi * fit.well_frequency_Hz
    total = 2.0 * mass_kg * fit.damping_ratio * omega
    g_f = 4.0 * math.pi * mass_kg * fit.damping_ratio  # ∂c_T/∂f_w
    g_z = 4.0 * math.pi * mass_kg * fit.well_frequency_Hz  # ∂c_T/∂ζ_T
    u_f, u_z = fit.well_frequency_standard_error_Hz, fit.damping_ratio_standard_error
    total_se = math.sqrt(max((g_f * u_f) ** 2 + (g_z * u_z) ** 2
                             + 2.0 * fit.correlation * g_f * u_f * g_z * u_z, 0.0))
    if ringdown is None:
        return DampingSplit(total, total_se, None, None, None, None, None, None)
    d = ringdown.log_decrement
    per_ratio = 2.0 * mass_kg * 2.0 * math.pi * d.natural_frequency_Hz
    mechanical, m_se = per_ratio * d.damping_ratio, per_ratio * d.damping_ratio_standard_error
    electrical = total - mechanical
    e_se = math.hypot(total_se, m_se)
    dof = welch_satterthwaite((total_se, m_se), (fit.dof, max(d.cycles - 2, 1)))
    z = float(student_t.ppf(0.5 + 0.5 * CONFIDENCE, min(dof, 1e6)))
    return DampingSplit(total, total_se, mechanical, m_se, electrical,
                        (electrical - z * e_se, electrical + z * e_se), e_se, dof)


def coupling_estimate(split: DampingSplit, frequency_Hz: float, lag: float, loss: float
                      ) -> tuple[float, tuple[float, float], float] | None:
    """(g, its 95 % interval, its standard error) from an electrical damping and its interval
    (`coupling_from_damping` at the estimate and at the interval's ends, a negative end read
    as 0; u(g) = g u(c_e)/(2c_e)); None without a positive electrical damping."""
    c_e = split.electrical_N_s_per_m
    if c_e is None or c_e <= 0.0:
        return None
    g = coupling_from_damping(c_e, frequency_Hz, lag, loss)
    interval = tuple(coupling_from_damping(max(c, 0.0), frequency_Hz, lag, loss)
                     for c in split.electrical_ci95_N_s_per_m)
    return g, interval, 0.5 * g * split.electrical_standard_error_N_s_per_m / c_e


@dataclass(frozen=True)
class SweepCalibration:
    """What a stepped sine about a well says about the case: the total damping less the
    ring-down's mechanical damping is the electrical damping at the tested load (`damping`),
    hence the transducer's coupling; the in-well frequency, less the circuit's stiffness,
    checks or sets the magnets."""

    receptance: ReceptanceFit
    load_ohm: float
    well_m: float  # the well the test was about (the model's)
    damping: DampingSplit
    reactance_ratio: float | None  # ω_w a/h: ω L_c/(R_c + R_l) or ω R_l C_p
    coupling: float | None  # Bl [V·s/m] or θ [N/V] at the tested load
    coupling_ci95: tuple[float, float] | None
    coupling_standard_error: float | None
    coupling_unit: str  # "V·s/m", "N/V", or "" without a transducer
    model_coupling: float | None  # the case's
    electrical_stiffness_N_per_m: float  # k_e at ω_w, with the coupling used
    mechanical_well_frequency_Hz: float  # √(ω_w² − k_e/m)/2π
    mechanical_well_frequency_ci95_Hz: tuple[float, float]
    predicted_well_frequency_Hz: float
    predicted_well_frequency_interval_Hz: tuple[float, float] | None
    predicted_from: str  # what the prediction rests on
    well_frequency_agrees: bool  # the two intervals meet
    remanence_scale: float | None  # both magnets × this reproduce f_w at the case's gap
    remanence_scale_ci95: tuple[float, float] | None
    remanence_scale_standard_error: float | None
    remanence_scale_per_gap_per_m: float | None  # ds/dg at the same f_w [1/m]
    level_ratio: float  # the fit's r ÷ the model's m_f/m
    level_ci95_ratio: tuple[float, float]
    backbone_shift_Hz: float | None  # at the test's largest amplitude (model's force)
    warnings: tuple[str, ...] = ()


def calibrate_from_sweep(loaded: LoadedCase, built, fit: ReceptanceFit, *,
                         ringdown: RingdownFit | None = None, magnets: MagnetFit | None = None,
                         stiffness: StiffnessFit | None = None, load_ohm: float | None = None,
                         magnet_model: str = "exact") -> SweepCalibration:
    """Electrical damping, coupling and the well frequency's verdict from a receptance fit.

    Damping: c_T = 2mζ_T ω_w (m the model's effective mass), less the ring-down's
    c_m = 2mζω_n, is the electrical damping c_e at the tested load (its interval by
    Student's t with the Welch–Satterthwaite degrees of freedom of the two tests), and
    `coupling_from_damping` turns it into Bl or θ with the model's circuit (R_c and L_c, or
    C_p).  Frequency: the measured in-well frequency less the circuit's stiffness k_e is the
    mechanical one, ω_m² = ω_w² − k_e/m.  It is compared with the model's (from the
    force–deflection fit where there is one, its interval from the fit's covariance); for a
    geometry case with magnets and no force table it sets the remanence scale s of both
    magnets at the case's gap (a secant on `build`): one frequency cannot tell remanence from
    gap.  A `[reduced]` case's stiffness is not changed (one frequency cannot set k1 and k3).

    Parameters
    ----------
    loaded, built : the case and its `build.Built`
    fit : `fit_receptance` of the stepped sine
    ringdown : the ring-down's fit (the mechanical damping); without it no coupling
    magnets, stiffness : the force–deflection fits, where a table was given
    load_ohm : the load during the sweep [Ω] (default the case's)
    """
    from scipy.stats import t as student_t

    model = _tested_model(loaded, built, load_ohm)
    load = model.load_ohm
    warnings = list(fit.warnings)
    side = _tested_side(model, ringdown)
    mass = model.mass_kg
    omega = 2.0 * math.pi * fit.well_frequency_Hz
    split = split_damping(fit, ringdown, mass)
    lag, coupling_now, loss = model.circuit_coefficients()
    unit = {PiezoCircuit: "N/V", CoilCircuit: "V·s/m"}.get(type(model.transducer), "")
    reactance = omega * lag / loss if model.transducer is not None and loss > 0.0 else None
    g = g_ci = g_se = None
    if model.transducer is not None and ringdown is None:
        warnings.append(f"{fit.source}: no ring-down, so the total damping cannot be split "
                        "into mechanical and electrical: the coupling is not calibrated")
    elif model.transducer is not None:
        found = coupling_estimate(split, fit.well_frequency_Hz, lag, loss)
        if found is None:
            warnings.append(
                f"{fit.source}: the total damping ({split.total_N_s_per_m:.4g} N*s/m) is not "
                f"above the ring-down's mechanical damping ({split.mechanical_N_s_per_m:.4g} "
                "N*s/m): no electrical damping to read (was the load connected?); the "
                "coupling is not calibrated")
        else:
            g, g_ci, g_se = found
            if split.electrical_ci95_N_s_per_m[0] <= 0.0:
                warnings.append(f"{fit.source}: the electrical damping's interval reaches 0: "
                                "the coupling's lower bound is 0")
    if reactance is not None and reactance**2 > REACTANCE_NEGLIGIBLE:
        what = ("the coil's inductance is not negligible" if unit == "V·s/m" else
                "the piezo's capacitance matters")
        warnings.append(
            f"{fit.source}: {what} at {fit.well_frequency_Hz:.4g} Hz (ω a/h = {reactance:.3g}): "
            "the electrical damping is g²h/(h² + ω²a²), not g²/h, and the circuit adds the "
            "stiffness g²ω²a/(h² + ω²a²), both taken into account")
    g_used = g if g is not None else coupling_now
    stiffening = (g_used**2 * omega**2 * lag / (loss**2 + (omega * lag) ** 2)
                  if model.transducer is not None and loss > 0.0 else 0.0)
    mechanical_Hz = _less_stiffness(fit.well_frequency_Hz, stiffening, mass)
    m_ci = tuple(_less_stiffness(f, stiffening, mass) for f in fit.well_frequency_ci95_Hz)
    prediction = _predicted_well_frequency(loaded, built, side, magnets, stiffness,
                                           magnet_model)
    predicted, interval, source, predicted_model = prediction
    low, high = interval if interval is not None else (predicted, predicted)
    agrees = bool(low <= m_ci[1] and high >= m_ci[0])
    scale = s_ci = s_se = per_gap = None
    if magnets is None and built.fixed is not None:
        scale, slope, per_gap = _remanence_for(loaded, built, side, mechanical_Hz,
                                               magnet_model)
        f_se = fit.well_frequency_standard_error_Hz * fit.well_frequency_Hz / mechanical_Hz
        s_se = f_se / abs(slope)
        z = float(student_t.ppf(0.5 + 0.5 * CONFIDENCE, fit.dof))
        s_ci = (scale - z * s_se, scale + z * s_se)
        warnings.append(
            f"{fit.source}: the magnets' remanence ({scale:.4f} × the material's) is the one "
            f"that gives the measured well frequency at the drawn gap, "
            f"{1e3 * built.gap_m:.4g} mm; its interval leaves the gap out: each 0.1 mm the "
            f"gap is wider moves it by {1e-4 * per_gap:+.3g} (a force–deflection table tells "
            "the two apart)")
    if scale is None and not agrees:
        shown = (f"{predicted:.4g} Hz" if interval is None else
                 f"{predicted:.4g} Hz ({low:.4g}–{high:.4g})")
        warnings.append(
            f"{fit.source}: the mechanical well frequency {mechanical_Hz:.4g} Hz (95 %: "
            f"{m_ci[0]:.4g}–{m_ci[1]:.4g}) and that from {source}, {shown}, do not meet"
            + ("" if interval is not None else
               ": the stiffness is not changed by a sweep (one frequency cannot set it); "
               "calibrate it from a force–deflection table"))
    level_model = model.forcing_mass_kg / mass
    level = fit.level_per_s2 / level_model
    level_ci = tuple(v / level_model for v in fit.level_ci95_per_s2)
    if fit.measured == "voltage" and abs(level - 1.0) > LEVEL_TOLERANCE:
        found = "" if g is None else f", against {g / coupling_now:.3g} × from the damping"
        warnings.append(
            f"{fit.source}: the response level, read from the voltage through the case's "
            f"coupling, is {level:.3g} × the model's m_f/m: the coupling is about {level:.3g} × "
            f"the case's{found} (or the voltage sensor's calibration is off)")
    elif abs(level - 1.0) > LEVEL_TOLERANCE:
        warnings.append(
            f"{fit.source}: the response level is {level:.3g} × the model's m_f/m: check the "
            "sensors' calibration and the columns' units (the frequency and damping do not "
            "depend on it)")
    shift = backbone_shift(predicted_model.force_coefficients, mass,
                           _well_of(predicted_model, side), fit.peak_displacement_m)
    half = 0.5 * (fit.well_frequency_ci95_Hz[1] - fit.well_frequency_ci95_Hz[0])
    if math.isfinite(shift) and abs(shift) > max(half, NONLINEAR_SHIFT * fit.well_frequency_Hz):
        warnings.append(
            f"{fit.source}: at the test's largest amplitude ({1e3 * fit.peak_displacement_m:.3g}"
            f" mm) the model's well shifts its frequency by {shift:+.3g} Hz, more than the "
            "fit's interval: the test was not small enough to be linear; repeat it at a lower "
            "level")
    return SweepCalibration(
        receptance=fit, load_ohm=load, well_m=_well_of(model, side), damping=split,
        reactance_ratio=reactance, coupling=g, coupling_ci95=g_ci, coupling_standard_error=g_se,
        coupling_unit=unit, model_coupling=coupling_now if model.transducer else None,
        electrical_stiffness_N_per_m=stiffening, mechanical_well_frequency_Hz=mechanical_Hz,
        mechanical_well_frequency_ci95_Hz=m_ci, predicted_well_frequency_Hz=predicted,
        predicted_well_frequency_interval_Hz=interval, predicted_from=source,
        well_frequency_agrees=agrees, remanence_scale=scale, remanence_scale_ci95=s_ci,
        remanence_scale_standard_error=s_se, remanence_scale_per_gap_per_m=per_gap,
        level_ratio=level, level_ci95_ratio=level_ci,
        backbone_shift_Hz=shift if math.isfinite(shift) else None, warnings=tuple(warnings))


def linear_receptance(model: ReducedModel, well_m: float, frequency_Hz):
    """Receptance of the reduced model, with its circuit, linearised about a well
    [m/(m/s²)]:

        X/A = −m_f/(k_w − mω² + iωc + g² iω/(h + iωa)),

    k_w the force's slope at the well (`ReducedModel.stiffness_at`), and the circuit
    a q̇ = g ẋ − h q pushing back with g q (`ReducedModel.circuit_coefficients`).  The
    phase is the tip's against the base acceleration (x = |X| cos(ωt + φ) for a = A cos ωt).

    >>> m = ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.1, stiffness=(1.0,),
    ...                  forcing_mass_kg=1.0)
    >>> h = linear_receptance(m, 0.0, 1.0 / (2 * math.pi))
    >>> float(round(abs(h), 12)), float(round(np.degrees(np.angle(h)), 9))
    (10.0, 90.0)

    References
    ----------
    Ewins (2000), *Modal Testing*, 2nd ed., ch. 2 (receptance of a viscously damped SDOF
    system); Williams & Yates (1996), Sens. Actuators A 52:8 (a coil's electrical damping).
    """
    omega = 2.0 * math.pi * np.asarray(frequency_Hz, dtype=float)
    lag, coupling, loss = model.circuit_coefficients()
    circuit = (coupling**2 * 1j * omega / (loss + 1j * omega * lag)
               if model.transducer is not None else 0.0)
    dynamic = (model.stiffness_at(well_m) - model.mass_kg * omega**2
               + 1j * omega * model.damping_N_s_per_m + circuit)
    return -model.forcing_mass_kg / dynamic


@dataclass(frozen=True)
class SweepStep:
    """One step of a stepped sine: the measured tip amplitude beside the calibrated model's
    and the design's (both linearised about the tested well, `linear_receptance`), for the
    measured base amplitude.  From a voltage table the measured tip amplitude is the one the
    case's circuit reads from the voltage (`tip_from_voltage`)."""

    frequency_Hz: float
    base_amplitude_mps2: float
    measured_amplitude_m: float
    predicted_amplitude_m: float  # the calibrated case's model
    design_amplitude_m: float  # the case as given
    measured_phase_rad: float | None  # the fit's polarity offset φ0 − π taken out
    predicted_phase_rad: float


def sweep_steps(sweep: SteppedSine, fit: ReceptanceFit, calibrated: ReducedModel,
                calibrated_well_m: float, design: ReducedModel,
                design_well_m: float) -> tuple[SweepStep, ...]:
    """Measured against predicted response at every step of a stepped sine (`SweepStep`):
    the amplitudes for the measured base amplitude, and the phases where the table has one."""
    f = sweep.frequency_Hz
    predicted = linear_receptance(calibrated, calibrated_well_m, f)
    design_h = linear_receptance(design, design_well_m, f)
    measured_phase = None
    if sweep.phase_rad is not None:
        turned = sweep.phase_rad if fit.phase_read_as != "lag" else -sweep.phase_rad
        measured_phase = np.angle(np.exp(1j * (turned - fit.phase_offset_rad + math.pi)))
    return tuple(
        SweepStep(float(f[i]), float(sweep.base_acceleration_mps2[i]),
                  float(sweep.tip_displacement_m[i]),
                  float(abs(predicted[i]) * sweep.base_acceleration_mps2[i]),
                  float(abs(design_h[i]) * sweep.base_acceleration_mps2[i]),
                  None if measured_phase is None else float(measured_phase[i]),
                  float(np.angle(predicted[i])))
        for i in range(f.size))


def _tested_model(loaded: LoadedCase, built, load_ohm: float | None) -> ReducedModel:
    """The case's model at the load a stepped sine ran with (default the case's)."""
    model = built.model
    load = model.load_ohm if load_ohm is None else load_ohm
    if model.transducer is not None and math.isinf(load):
        raise CaseError("a stepped sine is read at the load it was run with: the case gives "
                        "none (\"matched\"); set [load] resistance to the tested load",
                        file=str(loaded.path), key="load.resistance")
    return model.with_load(load)


def _less_stiffness(frequency_Hz: float, stiffness_N_per_m: float, mass_kg: float) -> float:
    """The frequency [Hz] of an oscillator of mass m that loses the stiffness k_e."""
    squared = frequency_Hz**2 - stiffness_N_per_m / (mass_kg * 4.0 * math.pi**2)
    return math.sqrt(max(squared, 0.0))


def _tested_side(model: ReducedModel, ringdown: RingdownFit | None) -> int:
    """The well a test was about: the ring-down's (the side its cycles swing about), else the
    one the beam rests in (`rest_well`); +1 right, −1 left."""
    if ringdown is not None:
        return 1 if float(np.mean(ringdown.log_decrement.cycle_centre)) >= 0.0 else -1
    return 1 if rest_well(analyse_wells(model)) >= 0.0 else -1


def _well_of(model: ReducedModel, side: int) -> float:
    """The model's well on `side` [m] (its rest position when it has one well)."""
    wells = analyse_wells(model)
    if wells.regime == "bistable":
        return wells.wells_m[0 if side < 0 else 1]
    return rest_well(wells)


def _well_frequency(model: ReducedModel, side: int) -> float:
    """Small-oscillation frequency [Hz] of the model about its well on `side`."""
    stiffness = model.stiffness_at(_well_of(model, side))
    return math.sqrt(max(stiffness, 0.0) / model.mass_kg) / (2.0 * math.pi)


def _with_magnets(loaded: LoadedCase, built, scale: float, gap_m: float | None = None
                  ) -> LoadedCase:
    """The case with both magnets' remanence × `scale` (of the built values) and the gap."""
    case = loaded.case
    tip = case.tip_magnet.model_copy(update={"remanence": scale * built.tip.remanence_T})
    fixed = case.fixed_magnet.model_copy(update={
        "remanence": scale * built.fixed.remanence_T,
        "gap": built.gap_m if gap_m is None else gap_m})
    return LoadedCase(case.model_copy(update={"tip_magnet": tip, "fixed_magnet": fixed}),
                      loaded.path)


def _predicted_well_frequency(loaded, built, side, magnets, stiffness, magnet_model):
    """(f [Hz], interval or None, what it rests on, the model) of the model's in-well
    frequency: with the force–deflection fit's magnets and its interval (the gradient in s and
    gap by differences, through the fit's correlation), or the fit's stiffness, else the
    case's."""
    from harvester.build import build

    if magnets is not None:
        s, gap = magnets.remanence_scale, magnets.gap_m
        model = build(_with_magnets(loaded, built, s, gap), magnet_model=magnet_model).model
        f = _well_frequency(model, side)
        ds, dg = 1e-3 * s, 1e-6
        by_s = (_well_frequency(build(_with_magnets(loaded, built, s + ds, gap),
                                      magnet_model=magnet_model).model, side) - f) / ds
        by_g = (_well_frequency(build(_with_magnets(loaded, built, s, gap + dg),
                                      magnet_model=magnet_model).model, side) - f) / dg
        a = by_s * 0.5 * (magnets.remanence_scale_ci95[1] - magnets.remanence_scale_ci95[0])
        b = by_g * 0.5 * (magnets.gap_offset_ci95_m[1] - magnets.gap_offset_ci95_m[0])
        half = math.sqrt(max(a * a + b * b + 2.0 * magnets.remanence_gap_correlation * a * b,
                             0.0))
        return f, (f - half, f + half), f"force-deflection {magnets.source}", model
    if stiffness is not None:
        model = replace(built.model, stiffness=stiffness.odd_stiffness)
        return (_well_frequency(model, side), None, f"force-deflection {stiffness.source}",
                model)
    return _well_frequency(built.model, side), None, "the case", built.model


def _remanence_for(loaded, built, side, target_Hz, magnet_model
                   ) -> tuple[float, float, float]:
    """(s, ∂f/∂s [Hz], ds/dg [1/m]): both magnets' remanence × s give the mechanical in-well
    frequency `target_Hz` at the case's gap (a secant on the built model's well frequency),
    the slope there, and how far s moves per metre of gap error at the same frequency."""
    from harvester.build import build

    def frequency(scale: float, gap_m: float | None = None) -> float:
        return _well_frequency(build(_with_magnets(loaded, built, scale, gap_m),
                                     magnet_model=magnet_model).model, side)

    s0, s1 = 1.0, 1.0 + REMANENCE_STEP
    f0, f1 = _well_frequency(built.model, side), frequency(s1)
    for _ in range(20):
        if f1 == f0:
            break
        s2 = s1 + (target_Hz - f1) * (s1 - s0) / (f1 - f0)
        s2 = min(max(s2, 0.5 * s1), 2.0 * s1)
        s0, f0, s1, f1 = s1, f1, s2, frequency(s2)
        if abs(s1 - s0) < REMANENCE_TOLERANCE * s1:
            break
    else:
        raise CaseError(f"no remanence of the magnets gives a well frequency of "
                        f"{target_Hz:.4g} Hz at the case's gap", key="sweep")
    # slopes over steps the force fit's rounding cannot blur
    step, gap_step = REMANENCE_STEP * s1, REMANENCE_GAP_STEP_M
    by_scale = (frequency(s1 + step) - f1) / step
    by_gap = (frequency(s1, built.gap_m + gap_step) - f1) / gap_step
    return s1, by_scale, -by_gap / by_scale


# -- the calibrated case ----------------------------------------------------------------------
@dataclass(frozen=True)
class CaseChange:
    """One value written into a calibrated case: `[table] key = value  # comment`."""

    table: str  # "losses", "tip_magnet", "reduced", …
    key: str
    value: str  # a TOML value, e.g. '"0.0156"' or '["-24.1 N/m", "1.77e6 N/m^3"]'
    comment: str


@dataclass(frozen=True)
class CalibratedValue:
    """One case value a test sets, in SI: before, after, its 95 % interval and standard error."""

    path: str  # "losses.damping_ratio", "fixed_magnet.gap", "reduced.stiffness[1]" (k3), …
    unit: str  # SI unit of the values, "" for a ratio
    previous: float | None  # the case's value before calibration (None: it gave none)
    value: float
    ci95: tuple[float, float]
    standard_error: float
    source: str  # the test, e.g. "ring-down ringdown.csv"


@dataclass(frozen=True)
class Tolerance:
    """The spread of one case value that a fit leaves, as a `[tolerances]` entry:
    `"path" = { sd = "…" }` (one standard error of the fit, in a unit or as a percentage)."""

    path: str
    sd: float  # standard deviation, in the SI unit of the value
    value: float  # the calibrated value [SI]
    unit: str  # what the entry is written in: "mm", "T", or "%" of the value
    note: str

    @property
    def entry(self) -> str:
        shown = 100.0 * self.sd / self.value if self.unit == "%" else \
            {"mm": 1e3}.get(self.unit, 1.0) * self.sd
        return f'{{ sd = "{shown:.2g} {self.unit}" }}'


@dataclass(frozen=True)
class Calibration:
    """What the tests imply for a case, and the calibrated case file's text."""

    ringdown: RingdownFit | None
    stiffness: StiffnessFit | None  # [reduced] cases
    magnets: MagnetFit | None  # geometry cases
    damping_ratio: float | None  # geometry: [losses] damping_ratio (magnet-free, short circuit)
    damping_N_s_per_m: float | None  # c = 2 m ζ ω_n from the ring-down
    changes: tuple[CaseChange, ...]
    values: tuple[CalibratedValue, ...]
    tolerances: tuple[Tolerance, ...]
    tolerances_written_as: str  # "table", "comments" (the case schema has no [tolerances]), ""
    text: str  # the calibrated case file
    warnings: tuple[str, ...] = ()
    sweep: SweepCalibration | None = None
    sweep_steps: tuple[SweepStep, ...] = ()  # measured against the calibrated case's model


def calibrate_case(loaded: LoadedCase, *, ringdown: Ringdown | None = None,
                   force_deflection: ForceDeflection | None = None,
                   sweep: SteppedSine | None = None, sweep_load_ohm: float | None = None,
                   out_path: str | Path | None = None,
                   magnet_model: str = "exact") -> Calibration:
    """Calibrate a case from a ring-down, a force–deflection table and/or a stepped sine.

    Damping: the ring-down's decrement (`fit_ringdown`) gives ζ and f_n of whatever it
    recorded; the viscous coefficient is c = 2 m ζ (2π f_n) with the model's effective mass m.
    A geometry case stores it as the magnet-free beam's ratio c/(2√(k_b m)); a `[reduced]` case
    as `damping`.  Stiffness: a `[reduced]` case gets the odd terms of `fit_restoring_force`
    (even terms, if significant, are reported: the case's series is odd); a geometry case gets
    the remanence of both magnets and the gap from `fit_magnet_pair` (with the case's
    `magnet_model`).  The text is the original case with those values in place, each with a
    comment naming its test and its interval, and the fits' standard errors as `[tolerances]`
    entries (`tolerance_text`): a table where the case schema has one, else comments.  It is
    checked by reading it back (`parse_case`) at `out_path` (default: beside the case, which
    is where its data-file paths point).

    A stepped sine about a well (`fit_receptance`, then `calibrate_from_sweep` at
    `sweep_load_ohm`, default the case's load) sets the transducer's coupling (a coil's flux
    linkage, a `[reduced]` piezo's coupling) from its total damping less the ring-down's, and,
    for a geometry case without a force table, the magnets' remanence from its well frequency;
    with a force table its well frequency checks the magnet fit.
    """
    from harvester.build import build

    if ringdown is None and force_deflection is None and sweep is None:
        raise CaseError("nothing to calibrate from: give a ring-down, a force–deflection table "
                        "and/or a stepped sine", file=str(loaded.path))
    built = build(loaded, magnet_model=magnet_model)
    case = loaded.case
    changes: list[CaseChange] = []
    values: list[CalibratedValue] = []
    tolerances: list[Tolerance] = []
    warnings: list[str] = []
    ring = stiffness = magnets = None
    zeta_case = damping = None
    if ringdown is not None:
        ring = fit_ringdown(ringdown)
        warnings += ring.warnings
        value, change = _damping_change(built, case, ring)
        damping = 2.0 * built.model.mass_kg * ring.log_decrement.damping_ratio * (
            2.0 * math.pi * ring.log_decrement.natural_frequency_Hz)
        zeta_case = None if case.is_reduced else value.value
        changes.append(change)
        values.append(value)
        tolerances.append(Tolerance(value.path, value.standard_error, value.value, "%",
                                    f"{value.source}: one standard error of the decrement"))
    if force_deflection is not None:
        if case.is_reduced:
            stiffness = fit_restoring_force(force_deflection)
            change, found = _stiffness_change(case, stiffness)
            changes.append(change)
            values += found
            if stiffness.even_terms_significant:
                warnings.append(
                    f"{force_deflection.source}: even terms of the restoring force are "
                    "significant (unequal wells: an offset magnet or gravity); the case's "
                    "stiffness series is odd and leaves them out")
        else:
            magnets = fit_magnet_pair(built, force_deflection)
            found, found_changes, found_tolerances = _magnet_changes(built, magnets)
            values += found
            changes += found_changes
            tolerances += found_tolerances
    original = loaded.path.read_text(encoding="utf-8")
    swept = None
    if sweep is not None:
        if sweep.tip_displacement_m is None:
            sweep = tip_from_voltage(sweep, _tested_model(loaded, built, sweep_load_ohm))
        swept = calibrate_from_sweep(loaded, built, fit_receptance(sweep), ringdown=ring,
                                     magnets=magnets, stiffness=stiffness,
                                     load_ohm=sweep_load_ohm, magnet_model=magnet_model)
        found, found_changes, found_tolerances, notes = _sweep_changes(original, case, built,
                                                                       swept)
        values += found
        changes += found_changes
        tolerances += found_tolerances
        warnings += list(swept.warnings) + notes
    text = calibrated_case_text(original, changes)
    written = ""
    if tolerances:
        written = "table" if "tolerances" in type(case).model_fields else "comments"
        text = tolerance_text(text, tolerances, as_table=written == "table")
    target = Path(out_path) if out_path is not None else loaded.path
    calibrated = parse_case(text, target.resolve())
    steps = ()
    if swept is not None:
        model = build(calibrated, magnet_model=magnet_model).model.with_load(swept.load_ohm)
        side = 1 if swept.well_m >= 0.0 else -1
        steps = sweep_steps(sweep, swept.receptance, model, _well_of(model, side),
                            built.model.with_load(swept.load_ohm), swept.well_m)
    return Calibration(ring, stiffness, magnets, zeta_case, damping, tuple(changes),
                       tuple(values), tuple(tolerances), written, text, tuple(warnings), swept,
                       steps)


def _damping_change(built, case, ring: RingdownFit) -> tuple[CalibratedValue, CaseChange]:
    """The damping a ring-down sets: c = 2mζω_n, as `[reduced] damping` or as the magnet-free
    beam's ratio c/(2√(k_b m)) in `[losses]`."""
    model = built.model
    d = ring.log_decrement
    per_ratio = 2.0 * model.mass_kg * 2.0 * math.pi * d.natural_frequency_Hz  # c per unit ζ
    damping = per_ratio * d.damping_ratio
    source = f"ring-down {ring.source}"
    detail = (f"ζ = {d.damping_ratio:.4g} at {d.natural_frequency_Hz:.4g} Hz, c = 2mζω = "
              f"{damping:.4g} N*s/m")
    if case.is_reduced:
        scale, path, unit, previous = per_ratio, "reduced.damping", "N·s/m", \
            model.damping_N_s_per_m
    else:
        scale = per_ratio / (2.0 * math.sqrt(model.linear_stiffness_N_per_m * model.mass_kg))
        path, unit, previous = "losses.damping_ratio", "", case.losses.damping_ratio
    lo, hi = (scale * z for z in d.damping_ratio_ci95)
    value = CalibratedValue(path, unit, previous, scale * d.damping_ratio, (lo, hi),
                            scale * d.damping_ratio_standard_error, source)
    if case.is_reduced:
        change = CaseChange("reduced", "damping", f'"{value.value:.5g} N*s/m"',
                            f"{source}: {detail}; 95 %: {lo:.4g}–{hi:.4g} N*s/m")
    else:
        change = CaseChange("losses", "damping_ratio", f"{value.value:.5g}",
                            f"{source}: {detail}, as the magnet-free beam's ratio "
                            f"c/(2√(k_b m)); 95 %: {lo:.4g}–{hi:.4g}")
    return value, change


ODD_STIFFNESS_UNITS = ("N/m", "N/m³", "N/m⁵", "N/m⁷", "N/m⁹")  # k1, k3, …: SI units


def _stiffness_change(case, stiffness: StiffnessFit) -> tuple[CaseChange, list[CalibratedValue]]:
    """The odd terms of a force–deflection fit as a `[reduced]` case's stiffness list."""
    odd = stiffness.odd_stiffness
    source = f"force-deflection {stiffness.source}"
    previous = case.reduced.stiffness
    units = [f"N/m{'' if j == 0 else f'^{2 * j + 1}'}" for j in range(len(odd))]
    terms = ", ".join(f'"{k:.5g} {unit}"' for k, unit in zip(odd, units))
    spans = "; ".join(f"k{2 * j + 1} {lo:.4g}…{hi:.4g}"
                      for j, (lo, hi) in enumerate(stiffness.odd_ci95))
    values = [CalibratedValue(f"reduced.stiffness[{j}]", ODD_STIFFNESS_UNITS[j],
                              previous[j] if j < len(previous) else None, k,
                              stiffness.odd_ci95[j], stiffness.standard_errors[2 * j + 1],
                              source)
              for j, (k, unit) in enumerate(zip(odd, units))]
    return CaseChange("reduced", "stiffness", f"[{terms}]", f"{source}; 95 %: {spans}"), values


def _magnet_changes(built, fit: MagnetFit):
    """Remanence of both magnets and the gap from a magnet-pair fit: the values, the case
    changes and the tolerances (`_remanence_changes` for the remanence)."""
    note = f"force-deflection {fit.source}"
    values, changes, tolerance = _remanence_changes(
        built, fit.remanence_scale, fit.remanence_scale_ci95,
        fit.remanence_scale_standard_error, note,
        f"correlated with the gap's (ρ = {fit.remanence_gap_correlation:+.2f})")
    g_lo, g_hi = fit.gap_offset_ci95_m
    values.append(CalibratedValue("fixed_magnet.gap", "m", built.gap_m, fit.gap_m,
                                  (built.gap_m + g_lo, built.gap_m + g_hi),
                                  fit.gap_offset_standard_error_m, note))
    changes.append(CaseChange(
        "fixed_magnet", "gap", f'"{1e3 * fit.gap_m:.4g} mm"',
        f"{note}: offset {1e3 * fit.gap_offset_m:+.3f} mm from the nominal "
        f"{1e3 * built.gap_m:.4g} mm; 95 %: {1e3 * g_lo:+.3f}…{1e3 * g_hi:+.3f} mm"))
    tolerances = [
        tolerance,
        Tolerance("fixed_magnet.gap", fit.gap_offset_standard_error_m, fit.gap_m, "mm",
                  f"{note}: one standard error of the gap offset"),
    ]
    return values, changes, tolerances


def _remanence_changes(built, scale: float, ci95: tuple[float, float], standard_error: float,
                       note: str, detail: str):
    """Both magnets' remanence × `scale`: the values, the case changes and the tolerance.  The
    force between the magnets goes as Br_tip·Br_fixed, and a fit scales both by one factor s,
    so the spread of the product (2σ_s/s relative) is written on the tip magnet's remanence
    alone: a spread on each, drawn independently, would understate it by √2."""
    s_lo, s_hi = ci95
    values, changes = [], []
    for table, magnet in (("tip_magnet", built.tip), ("fixed_magnet", built.fixed)):
        value = scale * magnet.remanence_T
        values.append(CalibratedValue(f"{table}.remanence", "T", magnet.remanence_T, value,
                                      (s_lo * magnet.remanence_T, s_hi * magnet.remanence_T),
                                      standard_error * magnet.remanence_T, note))
        changes.append(CaseChange(table, "remanence", f'"{value:.4g} T"',
                                  f"{note}: {scale:.4f} × the material's; 95 %: "
                                  f"{s_lo:.4f}–{s_hi:.4f}"))
    tolerance = Tolerance("tip_magnet.remanence", 2.0 * standard_error * built.tip.remanence_T,
                          scale * built.tip.remanence_T, "T",
                          f"{note}: the spread of Br_tip·Br_fixed, carried by the tip magnet; "
                          + detail)
    return values, changes, tolerance


# where a calibrated coupling goes in a case: (table, inline table, entry, case path)
COUPLING_ENTRIES = {
    (False, "V·s/m"): ("beam", "coil", "flux_linkage", "beam.coil.flux_linkage"),
    (True, "V·s/m"): ("reduced", "coil", "flux_linkage", "reduced.coil.flux_linkage"),
    (True, "N/V"): ("reduced", "piezo", "coupling", "reduced.piezo.coupling"),
}


def _sweep_changes(text: str, case, built, fit: SweepCalibration):
    """The values, case changes, tolerances and warnings a stepped sine sets: the coupling
    (a coil's flux linkage, a `[reduced]` piezo's coupling) and, without a force table, the
    magnets' remanence at the case's gap."""
    values, changes, tolerances, warnings = [], [], [], []
    r = fit.receptance
    note = f"sweep {r.source}"
    if fit.coupling is not None:
        lo, hi = fit.coupling_ci95
        unit = fit.coupling_unit.replace("·", "*")
        detail = (f"ζ_T = {r.damping_ratio:.4g} at {r.well_frequency_Hz:.4g} Hz, c_e = c_T − "
                  f"c_m = {fit.damping.electrical_N_s_per_m:.4g} N*s/m at "
                  f"{fit.load_ohm:.4g} ohm; 95 %: {lo:.4g}–{hi:.4g} {unit}")
        where = COUPLING_ENTRIES.get((case.is_reduced, fit.coupling_unit))
        change = None if where is None else inline_entry_change(
            text, where[0], where[1], where[2], f'"{fit.coupling:.5g} {unit}"',
            f"{note}: {detail}")
        if change is None:
            warnings.append(f"{note}: the coupling θ = {fit.coupling:.4g} N/V (95 %: {lo:.4g}–"
                            f"{hi:.4g}; the model's {fit.model_coupling:.4g}) has no key in a "
                            "geometry case: it is reported, not written")
        else:
            path = where[3]
            values.append(CalibratedValue(path, fit.coupling_unit, fit.model_coupling,
                                          fit.coupling, fit.coupling_ci95,
                                          fit.coupling_standard_error, note))
            changes.append(change)
            tolerances.append(Tolerance(path, fit.coupling_standard_error, fit.coupling, "%",
                                        f"{note}: one standard error of the coupling"))
    if fit.remanence_scale is not None:
        found, found_changes, tolerance = _remanence_changes(
            built, fit.remanence_scale, fit.remanence_scale_ci95,
            fit.remanence_scale_standard_error, note,
            f"from the well frequency at the case's gap ({1e3 * built.gap_m:.4g} mm, kept)")
        values += found
        changes += found_changes
        tolerances.append(tolerance)
    return values, changes, tolerances, warnings


TOLERANCE_MARK = "# [tolerances]  calibrated:"


def tolerance_text(text: str, tolerances: list[Tolerance] | tuple[Tolerance, ...], *,
                   as_table: bool) -> str:
    """The case text with the fits' tolerances: entries of a `[tolerances]` table
    (`as_table`, replacing those of the same paths), or, for a case schema without one, a
    block of comment lines at the end (replacing an earlier calibration's block) that reads
    as the table once uncommented."""
    if as_table:
        changes = [CaseChange("tolerances", f'"{t.path}"', t.entry, t.note) for t in tolerances]
        return calibrated_case_text(text, changes)
    lines = text.rstrip("\n").splitlines()
    if any(line.startswith(TOLERANCE_MARK) for line in lines):
        start = next(i for i, line in enumerate(lines) if line.startswith(TOLERANCE_MARK))
        end = start + 1
        while end < len(lines) and lines[end].startswith('# "'):
            end += 1
        lines = lines[:start] + lines[end:]
        while lines and not lines[-1].strip():
            lines.pop()
    block = [f"{TOLERANCE_MARK} one standard error per fit, as comments (this version reads "
             "no [tolerances] section)"]
    block += [f'# "{t.path}" = {t.entry}  # {t.note}' for t in tolerances]
    return "\n".join(lines + [""] + block) + "\n"


def calibrated_case_text(text: str, changes: list[CaseChange] | tuple[CaseChange, ...]) -> str:
    """The case text with each change written in place: an existing `key = …` line of the
    change's table is replaced (its value may run over several lines, as an array can), a
    missing key is added after the table's last line, a missing table is appended.  Lines
    inside multi-line strings are left alone.  Everything else, comments included, is kept.

    Python's `tomllib` only reads TOML; the few keys a calibration writes are simple values,
    so they are written here as text rather than through a formatting library.
    """
    lines = text.splitlines()
    for change in changes:
        lines = _put(lines, change)
    return "\n".join(lines) + "\n"


_TABLE = re.compile(r"^\s*\[(?P<name>[^\[\]]+)\]\s*(#.*)?$")
_KEY = re.compile(r'^\s*(?P<key>[A-Za-z0-9_\-]+|"[^"]*")\s*=')  # bare or quoted


def _put(lines: list[str], change: CaseChange) -> list[str]:
    comment = f"# calibrated: {change.comment}"
    last_in_table = None  # index of the last non-blank line of the change's table
    for i, table, key, content in _scan(lines):
        if table != change.table:
            continue
        if key == change.key:
            end = _value_end(lines, i)
            # keep the line's own comment; replace an earlier calibration's note
            kept = _trailing_comment(lines[i]) if end == i else ""
            first = i - 1 if i and lines[i - 1].lstrip().startswith("# calibrated:") else i
            entry = f"{change.key} = {change.value}" + (f"  {kept}" if kept else "")
            return lines[:first] + [comment, entry] + lines[end + 1:]
        if content:
            last_in_table = i
    entry = f"{change.key} = {change.value}"
    if last_in_table is None:
        return lines + ["", f"[{change.table}]", comment, entry]
    return lines[:last_in_table + 1] + [comment, entry] + lines[last_in_table + 1:]


def _scan(lines: list[str]):
    """(index, table, key or None, whether the line belongs to the table's text) of every line
    of a TOML text: the table it is in, and the key it sets where it starts a `key = …`
    outside a multi-line string (the lines inside one belong to the table, blank lines do
    not)."""
    table = None
    in_string = False
    for i, line in enumerate(lines):
        quotes = line.count('"""') + line.count("'''")
        if in_string:
            in_string = quotes % 2 == 0
            yield i, table, None, True
            continue
        match = _TABLE.match(line)
        if match:
            table = match["name"].strip()
            yield i, table, None, True
            continue
        key = _KEY.match(line)
        yield i, table, key["key"] if key else None, bool(line.strip())
        if quotes % 2 == 1:
            in_string = True


def inline_entry_change(text: str, table: str, key: str, entry: str, value: str,
                        comment: str) -> CaseChange | None:
    """The change that sets `entry` of the inline table `key = { … }` in `[table]` (its other
    entries kept as written), or `entry` of a `[table.key]` table; None when the case has
    neither.  TOML keeps an inline table on one line."""
    lines = text.splitlines()
    for i, name, found, _ in _scan(lines):
        if name == f"{table}.{key}":
            return CaseChange(name, entry, value, comment)
        if name == table and found == key:
            line = lines[i]
            code = _code(line)
            stop = code.index("#") - len(code) + len(line) if "#" in code else len(line)
            body = line[line.index("=") + 1:stop].strip()
            pattern = re.compile(rf'(\b{re.escape(entry)}\s*=\s*)("(?:\\.|[^"\\])*"|'
                                 r"'[^']*'|[^,}\s]+)")
            if pattern.search(body):
                body = pattern.sub(lambda m: m[1] + value, body, count=1)
            else:
                body = body[:body.rindex("}")].rstrip() + f", {entry} = {value} }}"
            return CaseChange(table, key, body, comment)
    return None


def _code(line: str) -> str:
    """A TOML line with its strings blanked, so brackets and # inside them do not count."""
    return re.sub(r'"(\\.|[^"\\])*"|\'[^\']*\'', '""', line)


def _trailing_comment(line: str) -> str:
    code = _code(line)
    return line[code.index("#") - len(code) + len(line):].strip() if "#" in code else ""


def _value_end(lines: list[str], start: int) -> int:
    """Index of the last line of the value that starts on line `start` (arrays and inline
    tables may span lines: read until the brackets balance, outside strings)."""
    depth = 0
    for i in range(start, len(lines)):
        code = _code(lines[i]).split("#", 1)[0]
        if i == start:
            code = code.split("=", 1)[1]
        depth += code.count("[") + code.count("{") - code.count("]") - code.count("}")
        if depth <= 0:
            return i
    return len(lines) - 1
