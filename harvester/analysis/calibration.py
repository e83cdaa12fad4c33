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
from harvester.case.measurements import ForceDeflection, Ringdown
from harvester.errors import CaseError

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
    Moré (1978), The Levenberg–Marquardt algorithm, Lecture Notes in Math. 630:105
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


def calibrate_case(loaded: LoadedCase, *, ringdown: Ringdown | None = None,
                   force_deflection: ForceDeflection | None = None,
                   out_path: str | Path | None = None,
                   magnet_model: str = "exact") -> Calibration:
    """Calibrate a case from a ring-down and/or a force–deflection table.

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
    """
    from harvester.build import build

    if ringdown is None and force_deflection is None:
        raise CaseError("nothing to calibrate from: give a ring-down and/or a force–deflection "
                        "table", file=str(loaded.path))
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
    text = calibrated_case_text(loaded.path.read_text(encoding="utf-8"), changes)
    written = ""
    if tolerances:
        written = "table" if "tolerances" in type(case).model_fields else "comments"
        text = tolerance_text(text, tolerances, as_table=written == "table")
    target = Path(out_path) if out_path is not None else loaded.path
    parse_case(text, target.resolve())
    return Calibration(ring, stiffness, magnets, zeta_case, damping, tuple(changes),
                       tuple(values), tuple(tolerances), written, text, tuple(warnings))


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
    changes and the tolerances.  The force between the magnets goes as Br_tip·Br_fixed, and
    the fit scales both by one factor s, so the spread of the product (2σ_s/s relative) is
    written on the tip magnet's remanence alone: a spread on each, drawn independently, would
    understate it by √2."""
    note = f"force-deflection {fit.source}"
    s, s_se = fit.remanence_scale, fit.remanence_scale_standard_error
    s_lo, s_hi = fit.remanence_scale_ci95
    values, changes = [], []
    for table, magnet, value in (("tip_magnet", built.tip, fit.tip_remanence_T),
                                 ("fixed_magnet", built.fixed, fit.fixed_remanence_T)):
        values.append(CalibratedValue(f"{table}.remanence", "T", magnet.remanence_T, value,
                                      (s_lo * magnet.remanence_T, s_hi * magnet.remanence_T),
                                      s_se * magnet.remanence_T, note))
        changes.append(CaseChange(table, "remanence", f'"{value:.4g} T"',
                                  f"{note}: {s:.4f} × the material's; 95 %: "
                                  f"{s_lo:.4f}–{s_hi:.4f}"))
    g_lo, g_hi = fit.gap_offset_ci95_m
    values.append(CalibratedValue("fixed_magnet.gap", "m", built.gap_m, fit.gap_m,
                                  (built.gap_m + g_lo, built.gap_m + g_hi),
                                  fit.gap_offset_standard_error_m, note))
    changes.append(CaseChange(
        "fixed_magnet", "gap", f'"{1e3 * fit.gap_m:.4g} mm"',
        f"{note}: offset {1e3 * fit.gap_offset_m:+.3f} mm from the nominal "
        f"{1e3 * built.gap_m:.4g} mm; 95 %: {1e3 * g_lo:+.3f}…{1e3 * g_hi:+.3f} mm"))
    correlated = f"correlated with the gap's (ρ = {fit.remanence_gap_correlation:+.2f})"
    tolerances = [
        Tolerance("tip_magnet.remanence", 2.0 * s_se * built.tip.remanence_T,
                  fit.tip_remanence_T, "T",
                  f"{note}: the spread of Br_tip·Br_fixed, carried by the tip magnet; "
                  + correlated),
        Tolerance("fixed_magnet.gap", fit.gap_offset_standard_error_m, fit.gap_m, "mm",
                  f"{note}: one standard error of the gap offset"),
    ]
    return values, changes, tolerances


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
    table = None
    in_string = False
    last_in_table = None  # index of the last non-blank line of the change's table
    for i, line in enumerate(lines):
        quotes = line.count('"""') + line.count("'''")
        if in_string:
            in_string = quotes % 2 == 0
            if table == change.table:
                last_in_table = i
            continue
        match = _TABLE.match(line)
        if match:
            table = match["name"].strip()
            if table == change.table:
                last_in_table = i
            continue
        if table == change.table:
            key = _KEY.match(line)
            if key and key["key"] == change.key:
                end = _value_end(lines, i)
                # keep the line's own comment; replace an earlier calibration's note
                kept = _trailing_comment(line) if end == i else ""
                first = i - 1 if i and lines[i - 1].lstrip().startswith("# calibrated:") else i
                entry = f"{change.key} = {change.value}" + (f"  {kept}" if kept else "")
                return lines[:first] + [comment, entry] + lines[end + 1:]
            if line.strip():
                last_in_table = i
        if quotes % 2 == 1:
            in_string = True
    entry = f"{change.key} = {change.value}"
    if last_in_table is None:
        return lines + ["", f"[{change.table}]", comment, entry]
    return lines[:last_in_table + 1] + [comment, entry] + lines[last_in_table + 1:]


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
