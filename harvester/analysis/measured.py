"""A measured shaker record against the model's prediction for the excitation it measured.

From a `ResponseRecord` (time, base acceleration, and tip displacement, tip velocity or voltage
across a load) this module finds

* the forcing: a tone's frequency and amplitude (windowed FFT peak, refined by a least-squares
  sine fit with its covariance) or, for a broadband base signal, its Welch PSD and RMS;
* the stroboscopic (Poincaré) section of the response at one forcing phase (interpolated; the
  velocity from a Savitzky–Golay derivative where only the displacement was measured);
* hops between the wells, counted with hysteresis as the tone integrator does (a hop when the
  tip reaches beyond the well position on the other side from the last one it reached), their
  rate with an exact Poisson interval, and the share of time on each side of the saddle;
* the orbit class from the section (`orbits.repeating_period`, with a tolerance for noise);
* the correlation dimension of the section (Grassberger & Procaccia 1983) with the scaling
  range it used, and the largest Lyapunov exponent from the section (Rosenstein, Collins &
  De Luca 1993);
* the mean power into the load from the voltage, with a batch-means interval;

and, for each, the model's prediction for the measured excitation (`trace_record`): the tone
ensemble's orbit mix (`tone_power`) or the Monte Carlo (`random_mean_power`) for the orbit, hop
rate and power, and a model trajectory started from the record's first section state (the
"twin") for the section, its dimension and its Lyapunov exponent.  Each pair is a `Twin`:
measured and predicted value, their intervals, the difference and whether they agree.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np

from harvester.case.measurements import (
    TIP_DISPLACEMENT,
    TIP_VELOCITY,
    VOLTAGE,
    ResponseRecord,
)
from harvester.case.spectra import (
    AccelerationPSD,
    AccelerationRecord,
    SpectrumSummary,
    summarise_psd,
    welch_psd,
)
from harvester.dynamics.orbits import CHAOTIC, INTERWELL_PERIODIC, INTRAWELL, repeating_period
from harvester.errors import CaseError
from harvester.model import ReducedModel, analyse_wells

CONFIDENCE = 0.95
# Forcing.  A tone's line (its FFT bin ± LINE_BINS under a Hann window, whose main lobe is ±2
# bins wide) must carry at least TONE_LINE_SHARE of the base signal's variance; a lower share
# is a broadband record, or, where a tone was asked for, no forcing line at all.
LINE_BINS = 3
TONE_LINE_SHARE = 0.5
MIN_TONE_PERIODS = 64  # a tone record shorter than this cannot show an orbit's class
MIN_SAMPLES_PER_PERIOD = 8  # below this the section's interpolation error exceeds ~1 %
# Velocity from a displacement: Savitzky–Golay cubic over at least 5 samples and about 1/8 of
# the forcing period (a wider window smooths noise more but bends the higher harmonics: a cubic
# over 1/8 period follows the third harmonic within about 1 %).
DERIVATIVE_PERIOD_SHARE = 1.0 / 8.0
SETTLE_FRACTION = 0.5  # random records: settled below this share of the barrier (as the integrator)
# Orbit class: section points p periods apart that differ by at most this much (scaled by the
# well position and by its product with ω) repeat.  The model's ensembles use 1e-3; a measured
# section carries noise and a drifting rig, so the tolerance is wider.
REPEAT_TOLERANCE = 0.05
MAX_PERIOD = 16
# Correlation dimension (module notes of `correlation_dimension`).
RADII_PER_DECADE = 12
MIN_NEIGHBOURS = 10  # lower end of the scaling range: mean neighbours per point within r
MAX_CORRELATION_SUM = 0.1  # upper end: C(r) at most this (well below the set's size)
SLOPE_TOLERANCE = 0.10  # local slopes within ±10 % of the fitted slope over the range
MIN_SCALING_DECADES = 0.5  # the range must span at least this many decades of r
MIN_DIMENSION_POINTS = 400
MAX_DIMENSION_POINTS = 20_000  # pair counting grows as N²; evenly thinned beyond this
# Largest Lyapunov exponent (Rosenstein et al. 1993) on the section.
MIN_LYAPUNOV_POINTS = 200
LYAPUNOV_HORIZON = 20  # section periods over which neighbouring points are followed
THEILER_WINDOW = 1  # neighbours closer in time than this many periods are not used
# The divergence curve is fitted from its start to where it has risen this share of the way
# to its plateau; the interval is the range of the fits ending at the two outer shares.
LINEAR_REGION_SHARES = (0.3, 0.5, 0.7)
# Mean power: batch means over this many consecutive stretches (Schmeiser 1982).
POWER_BATCHES = 20


# -- records ------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Forcing:
    """The base excitation found in a record.  Tone: a(t) = A cos(2π f t + φ) with t the
    record's own time; random: its Welch PSD and RMS."""

    kind: str  # "tone" | "random"
    frequency_Hz: float | None  # tone only
    frequency_ci95_Hz: tuple[float, float] | None
    amplitude_mps2: float | None  # tone only
    amplitude_ci95_mps2: tuple[float, float] | None
    phase_rad: float | None  # φ, tone only
    rms_mps2: float  # RMS of the base acceleration about its mean
    rms_ci95_mps2: tuple[float, float]  # batch means of the square (`batch_mean`)
    line_share: float  # share of the variance in the strongest line
    psd: AccelerationPSD  # Welch estimate (both kinds, for the figure)
    summary: SpectrumSummary


@dataclass(frozen=True)
class Section:
    """Stroboscopic samples of one observable (tip displacement [m], tip velocity [m/s] or
    voltage [V]) and its rate, once per forcing period at forcing phase `phase_rad`
    (ωt + φ ≡ phase), and the scales that make them dimensionless."""

    time_s: np.ndarray
    value: np.ndarray
    rate: np.ndarray  # d(value)/dt
    quantity: str  # TIP_DISPLACEMENT | TIP_VELOCITY | VOLTAGE
    phase_rad: float
    scale: tuple[float, float]  # (value scale, rate scale)

    @property
    def points(self) -> np.ndarray:
        """(n, 2) dimensionless section points (value/scale, rate/(scale·ω))."""
        return np.column_stack((self.value / self.scale[0], self.rate / self.scale[1]))


@dataclass(frozen=True)
class Hops:
    """Interwell hops of a displacement record and where the time was spent."""

    count: int
    rate_per_s: float
    rate_ci95_per_s: tuple[float, float]  # exact Poisson interval (Garwood 1936)
    times_s: np.ndarray  # when each hop reached the other well
    dwell_times_s: np.ndarray  # complete stays between successive hops
    time_share: tuple[float, float]  # share of time below and above the saddle
    duration_s: float


@dataclass(frozen=True)
class CorrelationDimension:
    """Correlation dimension of a set of points, with what it was read from.

    `radius`, `correlation_sum` and `local_slope` are the whole curve (for the figure);
    `scaling_range` is the stretch of r the slope was fitted over (None: none qualified).
    """

    dimension: float | None
    interval: tuple[float, float] | None  # lowest and highest local slope over the range
    scaling_range: tuple[float, float] | None
    radius: np.ndarray
    correlation_sum: np.ndarray
    local_slope: np.ndarray
    points: int
    reason: str = ""  # why `dimension` is None (or 0 for a periodic orbit)


@dataclass(frozen=True)
class LyapunovFromRecord:
    """Largest Lyapunov exponent of a section by Rosenstein's method, with its curve."""

    exponent_per_s: float | None
    interval_per_s: tuple[float, float] | None  # fits ending at the outer LINEAR_REGION_SHARES
    divergence: np.ndarray  # ⟨ln d(i)⟩ against i section periods
    fit_steps: int  # the fit ran over i = 0 … fit_steps
    step_s: float  # one section period [s]
    reason: str = ""


@dataclass(frozen=True)
class MeanPower:
    """Mean power into the load with its batch-means interval."""

    mean_power_W: float
    ci95_W: tuple[float, float]
    batches: int


@dataclass(frozen=True)
class MeasuredResponse:
    """Everything read from one shaker record (SI); None where the record cannot tell, with the
    reason in `notes`."""

    source: str
    duration_s: float
    forcing: Forcing
    section: Section | None
    hops: Hops | None
    orbit: str | None  # one of orbits.KINDS
    period: int  # section period of a repeating orbit, 0 when none
    correlation: CorrelationDimension | None
    lyapunov: LyapunovFromRecord | None
    power: MeanPower | None
    notes: tuple[str, ...] = ()


# -- forcing ------------------------------------------------------------------------------------
def identify_forcing(record: ResponseRecord, kind: str = "auto") -> Forcing:
    """The base excitation of a record: a tone's frequency [Hz], amplitude [m/s²] and phase, or
    a broadband signal's PSD and RMS.

    The Hann-windowed spectrum's strongest line gives the first frequency (Gaussian
    interpolation between bins); if the line (± LINE_BINS bins) carries at least
    TONE_LINE_SHARE of the variance, a least-squares fit of a cos 2πft + b sin 2πft + c with f
    free (Levenberg–Marquardt, `scipy.optimize.curve_fit`) refines it, and the fit's covariance
    gives 95 % intervals (residuals taken as white: harmonics and broadband noise make them
    somewhat narrow).  `kind`: "tone" (raise CaseError when there is no such line), "random"
    or "auto".  A tone record must hold MIN_TONE_PERIODS periods with at least
    MIN_SAMPLES_PER_PERIOD samples each.

    References
    ----------
    Harris (1978), Proc. IEEE 66:51 (windows and spectral leakage); Welch (1967), IEEE Trans.
    Audio Electroacoust. 15:70 (`welch_psd`).
    """
    if kind not in ("auto", "tone", "random"):
        raise ValueError('kind is "auto", "tone" or "random"')
    a = record.base_acceleration_mps2
    t = record.time_s
    fs = record.sample_rate_Hz
    f_peak, line = strongest_line(a, fs)
    psd = welch_psd(AccelerationRecord(t, a, fs, source=record.source))
    rms = float(np.std(a))
    square = batch_mean((a - float(np.mean(a)))**2)
    base = dict(rms_mps2=rms, rms_ci95_mps2=tuple(math.sqrt(v) for v in square.ci95),
                line_share=line, psd=psd, summary=summarise_psd(psd))
    if kind == "random" or (kind == "auto" and line < TONE_LINE_SHARE):
        return Forcing("random", None, None, None, None, None, **base)
    if line < TONE_LINE_SHARE:
        raise CaseError(
            f"no forcing line: the strongest line of the base acceleration, at {f_peak:.4g} Hz, "
            f"carries {100 * line:.2g} % of its variance; a tone test needs at least "
            f"{100 * TONE_LINE_SHARE:g} % (a broadband test is traced as random excitation)",
            file=record.source,
            key="base_acceleration",
        )
    periods = record.duration_s * f_peak
    if periods < MIN_TONE_PERIODS:
        raise CaseError(
            f"too short: {periods:.3g} forcing periods of {f_peak:.4g} Hz; a trace needs at "
            f"least {MIN_TONE_PERIODS} ({MIN_TONE_PERIODS / f_peak:.3g} s)",
            file=record.source,
            key="time",
        )
    if fs / f_peak < MIN_SAMPLES_PER_PERIOD:
        raise CaseError(
            f"{fs / f_peak:.3g} samples per forcing period of {f_peak:.4g} Hz; a trace needs at "
            f"least {MIN_SAMPLES_PER_PERIOD} (sample at {MIN_SAMPLES_PER_PERIOD * f_peak:.4g} Hz "
            "or faster)",
            file=record.source,
            key="time",
        )
    frequency, amplitude, phase, f_ci, a_ci = _sine_fit(t, a, f_peak)
    return Forcing("tone", frequency, f_ci, amplitude, a_ci, phase, **base)


def strongest_line(values: np.ndarray, sample_rate_Hz: float) -> tuple[float, float]:
    """Frequency [Hz] of the strongest line of a sampled signal and the share of its variance
    that the line (± LINE_BINS bins) carries, from its Hann-windowed spectrum; the frequency is
    interpolated between bins (`_interpolated_peak`)."""
    n = values.size
    spectrum = np.abs(np.fft.rfft((values - float(np.mean(values))) * np.hanning(n))) ** 2
    spectrum[0] = 0.0
    peak = int(np.argmax(spectrum))
    total = float(np.sum(spectrum)) or 1.0
    line = float(np.sum(spectrum[max(peak - LINE_BINS, 1):peak + LINE_BINS + 1])) / total
    return _interpolated_peak(spectrum, peak) * sample_rate_Hz / n, line


def _interpolated_peak(spectrum: np.ndarray, k: int) -> float:
    """Bin position of a spectral peak by a parabola through the logarithms of the three bins
    around it (exact for a Gaussian line shape, close for a Hann window's main lobe)."""
    if k < 1 or k >= spectrum.size - 1:
        return float(k)
    lo, mid, hi = np.log(np.maximum(spectrum[k - 1:k + 2], 1e-300))
    curvature = lo - 2.0 * mid + hi
    return k + (0.5 * (lo - hi) / curvature if curvature < 0.0 else 0.0)


def _sine_fit(t: np.ndarray, a: np.ndarray, f0: float):
    """Least-squares tone a cos 2πf(t − t_m) + b sin 2πf(t − t_m) + c: (f [Hz], A [m/s²],
    φ [rad] of A cos(2πf t + φ), 95 % intervals of f and A)."""
    from scipy.optimize import OptimizeWarning, curve_fit
    from scipy.stats import norm

    t_mid = 0.5 * (t[0] + t[-1])
    tau = t - t_mid

    def tone(time, f, c_cos, c_sin, offset):
        w = 2.0 * math.pi * f * time
        return c_cos * np.cos(w) + c_sin * np.sin(w) + offset

    w0 = 2.0 * math.pi * f0 * tau
    basis = np.column_stack((np.cos(w0), np.sin(w0), np.ones_like(tau)))
    start = np.linalg.lstsq(basis, a, rcond=None)[0]
    with warnings.catch_warnings():
        # a noise-free tone fits exactly and has no covariance: its intervals are then points
        warnings.simplefilter("ignore", OptimizeWarning)
        params, cov = curve_fit(tone, tau, a, p0=(f0, *start))
    if not np.all(np.isfinite(cov)):
        cov = np.zeros_like(cov)
    f, c_cos, c_sin, _ = params
    amplitude = math.hypot(c_cos, c_sin)
    gradient = np.array([0.0, c_cos / amplitude, c_sin / amplitude, 0.0])
    z = float(norm.ppf(0.5 + 0.5 * CONFIDENCE))
    f_half = z * math.sqrt(max(cov[0, 0], 0.0))
    a_half = z * math.sqrt(max(float(gradient @ cov @ gradient), 0.0))
    # c_cos cos w + c_sin sin w = A cos(w − atan2(c_sin, c_cos)), w = 2πf(t − t_mid)
    phase = -math.atan2(c_sin, c_cos) - 2.0 * math.pi * f * t_mid
    phase = (phase + math.pi) % (2.0 * math.pi) - math.pi
    return (float(f), amplitude, phase, (float(f - f_half), float(f + f_half)),
            (amplitude - a_half, amplitude + a_half))


# -- section --------------------------------------------------------------------------------------
def observable(record: ResponseRecord) -> tuple[str, np.ndarray]:
    """The response a record's dynamics are read from: the tip displacement, else the tip
    velocity, else the voltage."""
    for quantity, values in ((TIP_DISPLACEMENT, record.tip_displacement_m),
                             (TIP_VELOCITY, record.tip_velocity_mps),
                             (VOLTAGE, record.voltage_V)):
        if values is not None:
            return quantity, values
    raise ValueError("a response record has a displacement, a velocity or a voltage")


def derivative(values: np.ndarray, sample_rate_Hz: float, period_s: float) -> np.ndarray:
    """Time derivative of a sampled signal by a Savitzky–Golay cubic over about
    DERIVATIVE_PERIOD_SHARE of `period_s` (at least 5 samples).

    References
    ----------
    Savitzky & Golay (1964), Anal. Chem. 36:1627 (`scipy.signal.savgol_filter`).
    """
    from scipy.signal import savgol_filter

    width = max(5, int(round(DERIVATIVE_PERIOD_SHARE * period_s * sample_rate_Hz)))
    width += 1 - width % 2
    return savgol_filter(values, width, 3, deriv=1, delta=1.0 / sample_rate_Hz)


def stroboscopic_section(record: ResponseRecord, forcing: Forcing, *, phase_rad: float = 0.0,
                         length_m: float | None = None) -> Section:
    """The response sampled once per forcing period at forcing phase `phase_rad` [rad].

    Sample instants t_k solve 2π f t_k + φ = phase + 2πk; the observable (`observable`) and its
    rate are interpolated there by cubic splines.  The rate is the measured velocity where the
    record has both displacement and velocity, else the Savitzky–Golay derivative
    (`derivative`).  Scales: the value by `length_m` (the well position, as in
    `orbits.strobe_scales`) for a displacement, else by √2 × the observable's RMS; the rate
    by that times ω.

    Parameters
    ----------
    record : the shaker record
    forcing : its tone (`identify_forcing`)
    phase_rad : forcing phase of the section [rad]; 0 samples where a(t) = +A
    length_m : displacement scale [m] (the model's well position); default the largest |x|
    """
    if forcing.kind != "tone":
        raise ValueError("a stroboscopic section needs a tone")
    from scipy.interpolate import CubicSpline

    quantity, values = observable(record)
    f = forcing.frequency_Hz
    omega = 2.0 * math.pi * f
    t = record.time_s
    if quantity == TIP_DISPLACEMENT and record.tip_velocity_mps is not None:
        rate = record.tip_velocity_mps
    else:
        rate = derivative(values, record.sample_rate_Hz, 1.0 / f)
    first = math.ceil((omega * t[0] + forcing.phase_rad - phase_rad) / (2.0 * math.pi))
    last = math.floor((omega * t[-1] + forcing.phase_rad - phase_rad) / (2.0 * math.pi))
    k = np.arange(first, last + 1)
    times = (phase_rad - forcing.phase_rad + 2.0 * math.pi * k) / omega
    value = CubicSpline(t, values)(times)
    rate_k = CubicSpline(t, rate)(times)
    if quantity == TIP_DISPLACEMENT:
        scale = length_m if length_m else float(np.max(np.abs(values)))
    else:
        scale = math.sqrt(2.0) * float(np.std(values))
    return Section(times, value, rate_k, quantity, float(phase_rad), (scale, scale * omega))


# -- hops ---------------------------------------------------------------------------------------
def count_hops(time_s: np.ndarray, x_m: np.ndarray, wells_m: tuple[float, float],
               saddle_m: float = 0.0) -> Hops:
    """Interwell hops of a sampled tip displacement under a tone, counted with hysteresis.

    The tip is on a side once it reaches that side's well position (x ≤ x_left or x ≥ x_right)
    and stays on it until it reaches the other one; a hop is a change of side.  Recrossings of
    the saddle that do not reach the other well are not hops (the tone integrator's rule,
    `integrator._tally_tone_state`).  The rate's 95 % interval is the exact Poisson one,

        [χ²_(α/2)(2n)/(2T),  χ²_(1−α/2)(2n + 2)/(2T)],

    with n hops in the record's duration T.

    References
    ----------
    Garwood (1936), Biometrika 28:437 (exact Poisson confidence limits).
    """
    left, right = wells_m
    sides = np.where(x_m >= right, 1, np.where(x_m <= left, -1, 0))
    return _hops(time_s, x_m, sides, saddle_m)


def count_settled_hops(time_s: np.ndarray, x_m: np.ndarray, v_mps: np.ndarray,
                       model: ReducedModel, settle_fraction: float = SETTLE_FRACTION) -> Hops:
    """Interwell hops of a sampled tip displacement under random excitation: changes of the
    well the tip has settled in, as the random-excitation integrator counts them
    (`integrator.advance_with_input`).

    The tip has settled in well ±1 when sign(x) = ±1 and ½mẋ² + U(x) − U(0) <
    −settle_fraction·ΔU, with the model's mass m, potential U and barrier ΔU; recrossings near
    the barrier top are then not hops.  Interval as `count_hops`.

    References
    ----------
    Hänggi, Talkner & Borkovec (1990), Rev. Mod. Phys. 62:251 (escape counted once the
    particle has relaxed into the other well); Garwood (1936), Biometrika 28:437.
    """
    barrier = analyse_wells(model).barrier_J
    energy = 0.5 * model.mass_kg * v_mps**2 + model.potential_energy(x_m)
    settled = energy < -settle_fraction * barrier
    return _hops(time_s, x_m, np.where(settled, np.sign(x_m), 0).astype(int), 0.0)


def _hops(time_s: np.ndarray, x_m: np.ndarray, sides: np.ndarray, saddle_m: float) -> Hops:
    """`Hops` from the side (−1, +1, or 0: not yet known) the tip is counted on at each sample;
    a hop is a change between the non-zero sides."""
    reached = np.nonzero(sides)[0]
    on = sides[reached]
    hop_index = reached[1:][on[1:] != on[:-1]]
    times = time_s[hop_index]
    count = int(hop_index.size)
    duration = float(time_s[-1] - time_s[0])
    share = (float(np.mean(x_m < saddle_m)), float(np.mean(x_m > saddle_m)))
    return Hops(count, count / duration, poisson_rate_interval(count, duration), times,
                np.diff(times), share, duration)


def poisson_rate_interval(count: int, duration_s: float) -> tuple[float, float]:
    """Exact two-sided CONFIDENCE interval of a Poisson rate [1/s] from `count` events in
    `duration_s` [s] (`count_hops`; Garwood 1936, Biometrika 28:437)."""
    from scipy.stats import chi2

    alpha = 1.0 - CONFIDENCE
    lower = float(chi2.ppf(0.5 * alpha, 2 * count)) / (2.0 * duration_s) if count else 0.0
    return lower, float(chi2.ppf(1.0 - 0.5 * alpha, 2 * count + 2)) / (2.0 * duration_s)


# -- orbit class --------------------------------------------------------------------------------
def section_orbit(points: np.ndarray, hops: int | None, *,
                  tolerance: float = REPEAT_TOLERANCE) -> tuple[str | None, int]:
    """(orbit class, period) of a dimensionless section as `orbits.classify_orbits` decides
    it: intrawell without hops, else interwell periodic when the section repeats with some
    period p ≤ MAX_PERIOD (within `tolerance`), else chaotic.  With `hops` None (no
    displacement to count them) a repeating section is "interwell-periodic" only if its
    points lie on both sides, and the class is None otherwise."""
    n = points.shape[0]
    max_period = max(1, min(MAX_PERIOD, n // 4))
    period = int(repeating_period(points[None, :, 0], points[None, :, 1], tolerance=tolerance,
                                  max_period=max_period)[0])
    if hops is None:
        return (INTERWELL_PERIODIC if period and np.ptp(np.sign(points[:, 0])) > 0 else None,
                period)
    if hops == 0:
        return INTRAWELL, period
    return (INTERWELL_PERIODIC if period else CHAOTIC), period


# -- correlation dimension --------------------------------------------------------------------
def correlation_dimension(points: np.ndarray) -> CorrelationDimension:
    """Correlation dimension of a set of points by the Grassberger–Procaccia correlation sum.

        C(r) = 2/(N(N − 1)) Σ_(i<j) Θ(r − |x_i − x_j|),    C(r) ∝ r^ν  for small r,

    and ν is the slope of ln C against ln r over a scaling range.  The range is chosen
    automatically on a grid of RADII_PER_DECADE radii per decade:

    1. from below, the radius at which the points have on average at least MIN_NEIGHBOURS
       neighbours each (fewer pairs make C scatter);
    2. from above, the radius at which C reaches MAX_CORRELATION_SUM (beyond it the finite
       size of the set bends the curve over);
    3. inside those limits, the widest stretch, at least MIN_SCALING_DECADES long, over which
       every local slope d ln C/d ln r (central differences) lies within ±SLOPE_TOLERANCE of
       the least-squares slope of the stretch; ties go to the smaller radii.

    The dimension is that least-squares slope, and its interval the lowest and highest local
    slope over the stretch.  Points should be dimensionless and comparably scaled (a section
    as `Section.points`).  The set is evenly thinned to MAX_DIMENSION_POINTS; pairs are
    counted with a k-d tree (`scipy.spatial.cKDTree.count_neighbors`).  Sets of fewer than
    MIN_DIMENSION_POINTS points, or without a qualifying stretch, give None and the reason.

    References
    ----------
    Grassberger & Procaccia (1983), Physica D 9:189 (Hénon map: ν = 1.21 ± 0.01);
    Grassberger & Procaccia (1983), Phys. Rev. Lett. 50:346.
    """
    from scipy.spatial import cKDTree

    pts = np.asarray(points, dtype=float)
    pts = pts[np.all(np.isfinite(pts), axis=1)]
    if pts.shape[0] > MAX_DIMENSION_POINTS:
        pts = pts[np.linspace(0, pts.shape[0] - 1, MAX_DIMENSION_POINTS).astype(int)]
    n = pts.shape[0]
    empty = np.zeros(0)
    if n < MIN_DIMENSION_POINTS:
        return CorrelationDimension(None, None, None, empty, empty, empty, n,
                                    f"{n} points; a correlation dimension needs at least "
                                    f"{MIN_DIMENSION_POINTS}")
    extent = float(np.max(np.ptp(pts, axis=0)))
    if extent == 0.0:
        return CorrelationDimension(0.0, (0.0, 0.0), None, empty, empty, empty, n,
                                    "every point is the same point")
    decades = 5.0
    radius = extent * np.logspace(-decades, 0.0, int(decades * RADII_PER_DECADE) + 1)
    tree = cKDTree(pts)
    ordered_pairs = tree.count_neighbors(tree, radius) - n  # each pair twice, no self-pairs
    csum = ordered_pairs / (n * (n - 1.0))
    seen = csum > 0.0
    radius, csum = radius[seen], csum[seen]
    log_r, log_c = np.log(radius), np.log(csum)
    slope = np.gradient(log_c, log_r) if radius.size > 1 else np.zeros_like(radius)
    # C(r) does not decrease, so the radii inside both limits are one contiguous stretch
    usable = np.nonzero((csum * (n - 1.0) >= MIN_NEIGHBOURS) & (csum <= MAX_CORRELATION_SUM))[0]
    # spans counted in grid steps, so that rounding cannot drop a stretch of exactly the minimum
    min_steps = round(MIN_SCALING_DECADES * RADII_PER_DECADE)
    best = None
    for i in usable:
        for j in usable[::-1]:
            span = j - i
            if span < min_steps or (best is not None and span <= best[0]):
                break
            fitted = float(np.polyfit(log_r[i:j + 1], log_c[i:j + 1], 1)[0])
            if np.all(np.abs(slope[i:j + 1] - fitted) <= SLOPE_TOLERANCE * abs(fitted)):
                best = (span, i, j, fitted)
                break
    if best is None:
        return CorrelationDimension(None, None, None, radius, csum, slope, n,
                                    f"no stretch of {MIN_SCALING_DECADES:g} decade(s) where "
                                    "the local slope of ln C(r) is steady: too few points, or "
                                    "noise at the scales the points fill")
    _, i, j, fitted = best
    window = slope[i:j + 1]
    return CorrelationDimension(fitted, (float(window.min()), float(window.max())),
                                (float(radius[i]), float(radius[j])), radius, csum, slope, n)


# -- largest Lyapunov exponent ---------------------------------------------------------------
def rosenstein_exponent(points: np.ndarray, step_s: float) -> LyapunovFromRecord:
    """Largest Lyapunov exponent [1/s] of a sequence of states by Rosenstein's method.

    Each point X_j is paired with its nearest neighbour X_ĵ among the points more than
    THEILER_WINDOW steps away in time; the pairs are followed for LYAPUNOV_HORIZON steps and

        y(i) = ⟨ln |X_(j+i) − X_(ĵ+i)|⟩_j  ≈  λ i Δt + const

    while the separation grows.  λ is the least-squares slope of y from i = 0 to the step
    where y has risen LINEAR_REGION_SHARES[1] of the way to its largest value; the interval
    is the range of the slopes with the fit ending at the outer shares.  The states here are a
    section's points (a map with Δt one forcing period).  Fewer than MIN_LYAPUNOV_POINTS
    points give None and the reason.

    References
    ----------
    Rosenstein, Collins & De Luca (1993), Physica D 65:117.
    """
    from scipy.spatial import cKDTree

    pts = np.asarray(points, dtype=float)
    n = pts.shape[0]
    horizon = LYAPUNOV_HORIZON
    if n < max(MIN_LYAPUNOV_POINTS, 4 * horizon):
        return LyapunovFromRecord(None, None, np.zeros(0), 0, step_s,
                                  f"{n} section points; the exponent needs at least "
                                  f"{max(MIN_LYAPUNOV_POINTS, 4 * horizon)}")
    index = np.arange(n)
    distance, neighbour = cKDTree(pts).query(pts, k=2 * THEILER_WINDOW + 3)
    apart = np.abs(neighbour - index[:, None]) > THEILER_WINDOW
    first = np.argmax(apart, axis=1)
    nearest = neighbour[index, first]
    usable = (apart[index, first] & (distance[index, first] > 0.0)
              & (index + horizon < n) & (nearest + horizon < n))
    j = index[usable]
    if j.size < MIN_LYAPUNOV_POINTS // 2:
        return LyapunovFromRecord(None, None, np.zeros(0), 0, step_s,
                                  "too few distinct neighbours (a repeating section)")
    ahead = j[None, :] + np.arange(horizon + 1)[:, None]
    gap = np.linalg.norm(pts[ahead] - pts[nearest[j][None, :] + np.arange(horizon + 1)[:, None]],
                         axis=2)
    curve = np.mean(np.log(np.maximum(gap, 1e-300)), axis=1)
    rise = float(np.max(curve) - curve[0])
    slopes = []
    ends = []
    for share in LINEAR_REGION_SHARES:
        end = max(2, int(np.argmax(curve >= curve[0] + share * rise)))
        slopes.append(float(np.polyfit(np.arange(end + 1) * step_s, curve[:end + 1], 1)[0]))
        ends.append(end)
    return LyapunovFromRecord(slopes[1], (min(slopes), max(slopes)), curve, ends[1], step_s)


# -- power --------------------------------------------------------------------------------------
def mean_power(voltage_V: np.ndarray, load_ohm: float, batches: int = POWER_BATCHES) -> MeanPower:
    """Mean power into a resistive load [W], P̄ = ⟨v²⟩/R, with a batch-means 95 % interval.

    The record is cut into `batches` consecutive stretches of equal length; their mean powers
    are taken as independent, and the interval is Student's t over them (batches long against
    the response's correlation time make that hold).

    References
    ----------
    Schmeiser (1982), Oper. Res. 30:556 (batch means: 10–30 batches).
    """
    power = voltage_V**2 / load_ohm
    return MeanPower(float(np.mean(power)), batch_mean(power, batches).ci95, batches)


def batch_mean(samples: np.ndarray, batches: int = POWER_BATCHES):
    """Mean of a correlated, non-negative series with its CONFIDENCE interval by batch means:
    Student's t over the means of `batches` consecutive stretches (Schmeiser 1982, Oper. Res.
    30:556), the lower end held at 0 (`random_power.Estimate`)."""
    from harvester.analysis.random_power import mean_with_ci

    size = samples.size // batches
    means = samples[:size * batches].reshape(batches, size).mean(axis=1)
    return mean_with_ci(means, CONFIDENCE, floor=0.0)


# -- one record ---------------------------------------------------------------------------------
def analyse_response(record: ResponseRecord, model: ReducedModel, *, kind: str = "auto",
                     phase_rad: float = 0.0) -> MeasuredResponse:
    """Forcing, section, hops, orbit class, correlation dimension, Lyapunov exponent and mean
    power of a shaker record, each None (with a note) where the record cannot tell.

    The model supplies only what the record is read against: its wells (the hop rule and the
    section's scale) and, under random excitation, its mass, potential and barrier (the
    settling rule of `count_settled_hops`).

    Parameters
    ----------
    record : the shaker record (`case.measurements.read_response_record`)
    model : the reduced model of the tested design
    kind : the forcing, "tone", "random" or "auto" (`identify_forcing`)
    phase_rad : forcing phase of the section [rad]
    """
    forcing = identify_forcing(record, kind)
    wells = analyse_wells(model)
    bistable = wells.regime == "bistable"
    notes: list[str] = []
    quantity, values = observable(record)
    hops = None
    if quantity == TIP_DISPLACEMENT and bistable:
        if forcing.kind == "tone":
            hops = count_hops(record.time_s, values, (min(wells.wells_m), max(wells.wells_m)))
        else:
            rate = record.tip_velocity_mps
            if rate is None:
                rate = derivative(values, record.sample_rate_Hz, 1.0 / wells.well_frequency_Hz)
            hops = count_settled_hops(record.time_s, values, rate, model)
    elif not bistable:
        notes.append("the model is monostable: no wells to hop between")
    else:
        notes.append(f"the record gives the {quantity.replace('_', ' ')}, not the tip "
                     "displacement: which well the tip is in, and so the hops, are unknown")
    power = None
    if record.voltage_V is not None and record.load_ohm:
        power = mean_power(record.voltage_V, record.load_ohm)
    else:
        notes.append("no voltage across a load in the record: no measured power")
    section = correlation = lyapunov = None
    period = 0
    if forcing.kind == "tone":
        length = max(wells.wells_m) if bistable else None
        section = stroboscopic_section(record, forcing, phase_rad=phase_rad, length_m=length)
        orbit, period = section_orbit(section.points, None if hops is None else hops.count)
        correlation, lyapunov = section_geometry(section.points, orbit, period,
                                                 1.0 / forcing.frequency_Hz)
    else:
        orbit = None if hops is None else (CHAOTIC if hops.count else INTRAWELL)
        notes.append("random excitation: no stroboscopic section, correlation dimension or "
                     "Lyapunov exponent")
    return MeasuredResponse(record.source, record.duration_s, forcing, section, hops, orbit,
                            period, correlation, lyapunov, power, tuple(notes))


def section_geometry(points: np.ndarray, orbit: str | None, period: int,
                     period_s: float) -> tuple[CorrelationDimension, LyapunovFromRecord]:
    """Correlation dimension and largest Lyapunov exponent of a section.  A repeating section
    (period p) is p points: dimension 0, and its exponent is negative, which neighbours as
    close as the noise cannot show (None, with the reason)."""
    if period:
        reason = f"a period-{period} orbit: the section is {period} point(s)"
        empty = np.zeros(0)
        return (CorrelationDimension(0.0, (0.0, 0.0), None, empty, empty, empty,
                                     points.shape[0], reason),
                LyapunovFromRecord(None, None, empty, 0, period_s,
                                   reason + "; its exponent is negative"))
    return correlation_dimension(points), rosenstein_exponent(points, period_s)


# -- the model's prediction for the measured excitation --------------------------------------
TWIN_REPEAT_TOLERANCE = 1e-3  # the model's own section is noise-free (as `classify_orbits`)
# The model's values carry what is left of the transient after `settling_periods` (e^(−8) of
# the amplitude, about 10⁻³ of a power): a prediction is taken as that uncertain at the least.
PREDICTION_PRECISION = 1e-3
TWIN_LYAPUNOV_STARTS = 16  # finite-time exponents on the model: their range is the interval
# The model's section is at least this long (and as long as the record's): a chaotic section
# of a few hundred points often shows no steady half decade of ln C(r), even noise-free, while
# from about 1400 points on one was found in every window tried; the model's section is cheap.
# Its finite-size bias is then smaller than the record's, which the record's interval (the
# spread of its local slopes) has to cover.
TWIN_MIN_POINTS = 2000


@dataclass(frozen=True)
class Twin:
    """One quantity read from the record beside the model's prediction for the same excitation.

    JSON keys (`to_dict`), with `name` and `unit` as in "hop_rate" and "per_s":
    `{name}_{unit}` (measured), `predicted_{name}_{unit}`, `{name}_ci95_{unit}`,
    `predicted_{name}_interval_{unit}`, `{name}_difference_{unit}` (measured − predicted),
    `{name}_inside_interval` and `{name}_note`; a class (the orbit: `unit` "") has only the
    first two, the flag and the note.  A dimensionless number says so by its `unit`
    ("dimension": the correlation dimension's keys end in `_dimension`).  `inside_interval`
    is True when the measured value's 95 % interval meets the prediction's interval widened
    by PREDICTION_PRECISION (a value without an interval counts as a point; for a class, when
    the measured class is among the predicted ones), None when either side is missing.
    """

    name: str
    unit: str  # SI unit suffix of the JSON keys ("Hz", "mps2", "per_s", "W", "dimension"), ""
    measured: float | str | None
    predicted: float | str | None
    measured_ci95: tuple[float, float] | None = None
    predicted_interval: tuple[float, float] | None = None
    inside_interval: bool | None = None
    note: str = ""

    @property
    def key(self) -> str:
        return f"{self.name}_{self.unit}" if self.unit else self.name

    @property
    def difference(self) -> float | None:
        if isinstance(self.measured, (int, float)) and isinstance(self.predicted, (int, float)):
            return float(self.measured) - float(self.predicted)
        return None

    def to_dict(self) -> dict:
        flag = {f"{self.name}_inside_interval": self.inside_interval,
                f"{self.name}_note": self.note}
        if not self.unit:
            return {self.key: self.measured, f"predicted_{self.key}": self.predicted, **flag}
        suffix = f"_{self.unit}"
        return {
            self.key: self.measured,
            f"predicted_{self.key}": self.predicted,
            f"{self.name}_ci95{suffix}": _listed(self.measured_ci95),
            f"predicted_{self.name}_interval{suffix}": _listed(self.predicted_interval),
            f"{self.name}_difference{suffix}": self.difference,
            **flag,
        }


def compared(name: str, unit: str, measured: float | None, predicted: float | None,
             measured_ci95: tuple[float, float] | None = None,
             predicted_interval: tuple[float, float] | None = None, note: str = "") -> Twin:
    """A numeric `Twin`, its `inside_interval` decided as the class documents."""
    inside = None
    if measured is not None and predicted is not None:
        lo_m, hi_m = measured_ci95 or (measured, measured)
        lo_p, hi_p = predicted_interval or (predicted, predicted)
        slack = PREDICTION_PRECISION * abs(predicted)
        inside = bool(lo_m <= hi_p + slack and lo_p - slack <= hi_m)
    return Twin(name, unit, measured, predicted, measured_ci95, predicted_interval, inside, note)


def _listed(interval: tuple[float, float] | None) -> list[float] | None:
    return None if interval is None else [float(v) for v in interval]


@dataclass(frozen=True)
class TraceResult:
    """A shaker record against the model: one `Twin` per quantity of `harvester trace`, each
    field named by its JSON key, and what they were computed from (SI)."""

    forcing_frequency_Hz: Twin
    forcing_amplitude_mps2: Twin  # a tone's amplitude, or the RMS of a random base signal
    hop_rate_per_s: Twin
    orbit: Twin
    correlation_dimension: Twin
    lyapunov_per_s: Twin
    mean_power_W: Twin
    load_ohm: float | None
    measured: MeasuredResponse
    predicted_section: Section | None  # the model's section from the record's first state
    predicted_correlation: CorrelationDimension | None
    predicted_orbits: tuple  # tone: `tone_power.OrbitShare`s; random: the Monte Carlo's entry
    method: str
    notes: tuple[str, ...] = ()

    @property
    def twins(self) -> tuple[Twin, ...]:
        return (self.forcing_frequency_Hz, self.forcing_amplitude_mps2, self.hop_rate_per_s,
                self.orbit, self.correlation_dimension, self.lyapunov_per_s, self.mean_power_W)


def trace_record(record: ResponseRecord, model: ReducedModel, *, kind: str = "auto",
                 planned_frequency_Hz: float | None = None,
                 planned_amplitude_mps2: float | None = None,
                 planned_kind: str | None = None, phase_rad: float = 0.0,
                 seed: int = 0, n_initial: int = 32,
                 target_relative_half_width: float = 0.05) -> TraceResult:
    """A shaker record and the model's prediction for the excitation it measured.

    The model runs at the record's load (when the record has one).  Tone: the orbit mix of
    `tone_power` at the measured frequency and amplitude gives the orbit (the most likely
    class; the record's class agrees when it is among the predicted ones), and, from the
    predicted attractor of the record's class (the mix where there is none), the hop rate with
    its exact Poisson interval over the ensemble time and the mean power.  A model trajectory
    from the record's first section state (the twin; from rest in a well when the record has
    no displacement) gives the predicted section, its correlation dimension and its largest
    Lyapunov exponent (Benettin et al. 1980).  Random: `random_mean_power` under the record's
    Welch PSD gives hop rate, power and orbit; there is no section.

    Parameters
    ----------
    record : the shaker record
    model : the reduced model of the tested design
    kind : forcing kind, "tone", "random" or "auto" (`identify_forcing`)
    planned_frequency_Hz, planned_amplitude_mps2 : the excitation the case plans (a tone's
        frequency [Hz] and amplitude [m/s²], or a random excitation's RMS [m/s²]), the
        "prediction" beside the measured forcing; None leaves it out
    planned_kind : "tone" or "random", the kind of the planned excitation: a plan of the
        other kind than the record's forcing is left out (with a note); None: as the record's
    phase_rad : forcing phase of the sections [rad]
    seed, n_initial : the tone ensemble's seed and number of starts (`tone_power`)
    target_relative_half_width : the Monte Carlo's stopping rule (`random_mean_power`)
    """
    if record.load_ohm is not None:
        model = model.with_load(record.load_ohm)
    measured = analyse_response(record, model, kind=kind, phase_rad=phase_rad)
    forcing = measured.forcing
    amplitude = forcing.amplitude_mps2 if forcing.kind == "tone" else forcing.rms_mps2
    amplitude_ci = (forcing.amplitude_ci95_mps2 if forcing.kind == "tone"
                    else forcing.rms_ci95_mps2)
    plan = "predicted: the case's planned excitation"
    if planned_kind not in (None, forcing.kind):
        planned_frequency_Hz = planned_amplitude_mps2 = None
        plan = f"the case plans {planned_kind} excitation: nothing to compare"
    forcing_twins = (
        compared("forcing_frequency", "Hz", forcing.frequency_Hz,
                 planned_frequency_Hz if forcing.kind == "tone" else None,
                 forcing.frequency_ci95_Hz, note=plan),
        compared("forcing_amplitude", "mps2", amplitude, planned_amplitude_mps2, amplitude_ci,
                 note=("tone amplitude" if forcing.kind == "tone" else "RMS") + "; " + plan),
    )
    if forcing.kind == "tone":
        return _trace_tone(record, model, measured, forcing_twins, seed=seed,
                           n_initial=n_initial)
    return _trace_random(record, model, measured, forcing_twins, seed=seed,
                         target=target_relative_half_width)


def _measured_hops(measured: MeasuredResponse) -> tuple[float | None, tuple | None]:
    hops = measured.hops
    return (hops.rate_per_s, hops.rate_ci95_per_s) if hops else (None, None)


def _trace_tone(record, model, measured, forcing_twins, *, seed, n_initial) -> TraceResult:
    from harvester.analysis.tone_power import tone_power

    forcing = measured.forcing
    f, amplitude = forcing.frequency_Hz, forcing.amplitude_mps2
    average_periods = 64
    mix = tone_power(model, amplitude, f, seed=seed, n_initial=n_initial,
                     average_periods=average_periods)
    orbits = mix.orbits
    well = 0
    if measured.orbit == INTRAWELL and measured.section is not None:
        well = int(np.sign(np.mean(measured.section.value)))
    match = [o for o in orbits if o.kind == measured.orbit and (o.well == well or not o.well)]
    rate, rate_ci = _measured_hops(measured)
    power = measured.power
    if match:
        chosen = max(match, key=lambda o: o.share)
        starts = max(1, round(chosen.share * n_initial))
        ensemble_time = starts * average_periods / f
        hop_interval = poisson_rate_interval(round(chosen.hop_rate_per_s * ensemble_time),
                                             ensemble_time)
        hop_twin = compared("hop_rate", "per_s", rate, chosen.hop_rate_per_s, rate_ci,
                            hop_interval, note=f"the predicted {chosen.kind} orbit "
                            f"({100 * chosen.share:.0f} % of starts)")
        power_twin = compared("mean_power", "W", power.mean_power_W if power else None,
                              chosen.mean_power_W, power.ci95_W if power else None,
                              note=f"the predicted {chosen.kind} orbit")
    else:
        spread = [o.hop_rate_per_s for o in orbits] or [0.0]
        hop_twin = compared("hop_rate", "per_s", rate, mix.hop_rate_per_s, rate_ci,
                            (min(spread), max(spread)),
                            note="no predicted orbit of the record's class: the orbit mix")
        powers = [o.mean_power_W for o in orbits] or [0.0]
        power_twin = compared("mean_power", "W", power.mean_power_W if power else None,
                              mix.mean_power_W, power.ci95_W if power else None,
                              (min(powers), max(powers)),
                              note="no predicted orbit of the record's class: the orbit mix")
    kinds = {o.kind for o in orbits}
    dominant = orbits[0].kind if orbits else None
    orbit_twin = Twin("orbit", "", measured.orbit, dominant, None, None,
                      None if measured.orbit is None else measured.orbit in kinds,
                      "predicted: " + ", ".join(f"{_orbit_label(o)} {100 * o.share:.0f} %"
                                                for o in orbits))
    section, correlation, exponent, spread = _twin_section(model, measured, record)
    corr = measured.correlation
    lyap = measured.lyapunov
    twins = dict(
        correlation_dimension=compared(
            "correlation", "dimension", corr.dimension if corr else None,
            correlation.dimension, corr.interval if corr else None, correlation.interval,
            note="; ".join(filter(None, (corr.reason if corr else "",
                                         correlation.reason and "model: " + correlation.reason)))),
        lyapunov_per_s=compared(
            "lyapunov", "per_s", lyap.exponent_per_s if lyap else None, exponent,
            lyap.interval_per_s if lyap else None, spread,
            note=(lyap.reason if lyap and lyap.reason else "")),
    )
    method = (
        "tone from a windowed FFT peak refined by a least-squares sine fit; section at forcing "
        f"phase {measured.section.phase_rad:g} rad by cubic-spline interpolation; hops counted "
        "when the tip reaches the other well; correlation dimension by Grassberger & Procaccia "
        "(1983) over an automatic scaling range; Lyapunov exponent from the section by "
        "Rosenstein et al. (1993); power by batch means.  Prediction: orbit mix of "
        f"{n_initial} starts (tone_power); the model's trajectory from the record's first "
        "section state for the section and its dimension; Benettin et al. (1980) from "
        f"{TWIN_LYAPUNOV_STARTS} states along that section over the record's span for the "
        "exponent (interval: the range of those finite-time exponents)")
    return TraceResult(*forcing_twins, hop_rate_per_s=hop_twin, orbit=orbit_twin,
                       mean_power_W=power_twin, load_ohm=record.load_ohm, measured=measured,
                       predicted_section=section, predicted_correlation=correlation,
                       predicted_orbits=tuple(orbits), method=method,
                       notes=tuple(mix.notes), **twins)


def _orbit_label(orbit) -> str:
    """An orbit of the tone ensemble in words: its class, its well or its period."""
    if orbit.kind == INTRAWELL and orbit.well:
        return f"intrawell ({'x > 0' if orbit.well > 0 else 'x < 0'})"
    if orbit.kind == INTERWELL_PERIODIC and orbit.period:
        return f"interwell period-{orbit.period}"
    return orbit.kind


def _twin_section(model: ReducedModel, measured: MeasuredResponse, record: ResponseRecord
                  ) -> tuple[Section, CorrelationDimension, float, tuple[float, float]]:
    """The model's section from the record's first section state, its correlation dimension,
    and its largest Lyapunov exponent [1/s] over the record's span with the range of those
    finite-time exponents: Benettin's method from TWIN_LYAPUNOV_STARTS states along the later
    half of the model's section (finite-time exponents of a chaotic orbit scatter, and the
    record's is one such)."""
    from harvester.dynamics.integrator import recommended_steps_per_period, simulate_tone
    from harvester.dynamics.lyapunov import largest_lyapunov_exponent
    from harvester.dynamics.orbits import basin_samples

    forcing = measured.forcing
    section = measured.section
    f, amplitude = forcing.frequency_Hz, forcing.amplitude_mps2
    if section.quantity == TIP_DISPLACEMENT:
        x0, v0 = float(section.value[0]), float(section.rate[0])
        scale = section.scale
        q0 = _circuit_state(model, record, float(section.time_s[0]))
    else:
        x0, v0, q0 = basin_samples(model, 1)[0]
        length = max((abs(w) for w in analyse_wells(model).wells_m), default=0.0) or 1.0
        scale = (length, length * 2.0 * math.pi * f)
    periods = max(section.time_s.size, TWIN_MIN_POINTS)
    steps = recommended_steps_per_period(model, f)
    run = simulate_tone(model, amplitude, f, x0, v0, q0, transient_periods=0,
                        strobe_periods=periods, steps_per_period=steps,
                        strobe_phase=section.phase_rad)
    times = section.time_s[0] + np.arange(periods) / f
    twin = Section(times, run.strobe_x_m[0], run.strobe_v_mps[0], TIP_DISPLACEMENT,
                   section.phase_rad, scale)
    orbit, period = section_orbit(twin.points, int(run.hops[0]),
                                  tolerance=TWIN_REPEAT_TOLERANCE)
    correlation, _ = section_geometry(twin.points, orbit, period, 1.0 / f)
    picks = np.linspace(periods // 2, periods - 1, TWIN_LYAPUNOV_STARTS).astype(int)
    exponent = largest_lyapunov_exponent(
        model, amplitude, f, run.strobe_x_m[0, picks], run.strobe_v_mps[0, picks],
        run.strobe_q[0, picks], transient_periods=0,
        periods=max(section.time_s.size, MIN_LYAPUNOV_POINTS), steps_per_period=steps,
        strobe_phase=section.phase_rad).exponent_per_s
    return (twin, correlation, float(np.mean(exponent)),
            (float(np.min(exponent)), float(np.max(exponent))))


def _circuit_state(model: ReducedModel, record: ResponseRecord, time_s: float) -> float:
    """The circuit variable at `time_s` from the record's voltage: volts for a piezo, the
    current V/R_l for a coil; 0 without a voltage."""
    from harvester.model import CoilCircuit

    if record.voltage_V is None:
        return 0.0
    voltage = float(np.interp(time_s, record.time_s, record.voltage_V))
    if isinstance(model.transducer, CoilCircuit):
        return voltage / record.load_ohm
    return voltage


def _trace_random(record, model, measured, forcing_twins, *, seed, target) -> TraceResult:
    from harvester.analysis.random_power import random_mean_power

    result = random_mean_power(model, measured.forcing.psd, seed=seed, baseline=False,
                               target_relative_half_width=target)
    design = result.design
    rate, rate_ci = _measured_hops(measured)
    power = measured.power
    predicted_orbit = result.orbits[0]["kind"]
    absent = "random excitation: no section"
    twins = dict(
        hop_rate_per_s=compared("hop_rate", "per_s", rate, design.hop_rate_per_s.mean, rate_ci,
                                design.hop_rate_per_s.ci95,
                                note="Monte Carlo under the record's Welch PSD"),
        orbit=Twin("orbit", "", measured.orbit, predicted_orbit, None, None,
                   None if measured.orbit is None else measured.orbit == predicted_orbit,
                   "hopping under random excitation is reported as chaotic"),
        correlation_dimension=Twin("correlation", "dimension", None, None, note=absent),
        lyapunov_per_s=Twin("lyapunov", "per_s", None, None, note=absent),
        mean_power_W=compared("mean_power", "W", power.mean_power_W if power else None,
                              design.power_W.mean, power.ci95_W if power else None,
                              design.power_W.ci95,
                              note="Monte Carlo under the record's Welch PSD"),
    )
    method = ("random base signal: Welch PSD and RMS; hops counted when the tip settles in the "
              "other well; power by batch means.  Prediction: " + result.method)
    return TraceResult(*forcing_twins, load_ohm=record.load_ohm, measured=measured,
                       predicted_section=None, predicted_correlation=None,
                       predicted_orbits=tuple(result.orbits), method=method,
                       notes=result.warnings, **twins)
