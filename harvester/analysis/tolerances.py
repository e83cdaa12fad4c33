"""Build tolerances: sampling the case's `[tolerances]`, and the statistics of a spread.

A tolerance names a case value (`fixed_magnet.gap`) and how it scatters from build to build:
normal with a standard deviation, or uniform within ± a half-width, either in the value's own
unit or as a fraction of its nominal value.  A service temperature given as a range is sampled
uniformly over the range as one more tolerance (`environment.temperature`): a build meets any
temperature of the range, none more likely than another.

Samples are drawn here, in one process, from one seed (`draw_values`), so every executor runs
the same builds; each build then carries its own seed for its random ensembles.

The statistics are the plain ones an engineer signs off with: mean, 5th, 50th and 95th
percentiles and the standard error of the mean of a quantity; the share of builds with a
property and its exact (Clopper–Pearson) 95 % binomial interval; and Spearman's rank
correlation of each tolerance with each quantity.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from harvester.case.load import LoadedCase
from harvester.case.schema import Case, Environment, ToleranceSpec
from harvester.errors import CaseError
from harvester.materials import find_material

TEMPERATURE_PATH = "environment.temperature"
# paths whose value must stay positive for the build to exist (a gap, a length, a mass ...)
POSITIVE = ("fixed_magnet.gap", "tip_magnet.remanence", "fixed_magnet.remanence",
            "beam.length", "beam.width", "beam.substrate.thickness", "beam.piezo.thickness",
            "losses.damping_ratio", "reduced.damping", "beam.coil.flux_linkage",
            "reduced.coil.flux_linkage", TEMPERATURE_PATH)
AT_LEAST_ZERO = ("tip_magnet.extra_mass",)
CONFIDENCE = 0.95  # of every interval a spread reports


@dataclass(frozen=True)
class Tolerance:
    """One tolerance in SI, about its nominal value."""

    path: str
    distribution: str  # "normal" | "uniform"
    nominal: float  # [SI of the path]
    sd: float  # standard deviation [SI]: a uniform half-width h has h/√3
    half_width: float | None  # uniform only [SI]
    unit: str  # SI unit of the path ("" for a ratio)

    def draw(self, rng: np.random.Generator, n: int) -> np.ndarray:
        """n values of the build-to-build scatter [SI]."""
        if self.distribution == "uniform":
            return self.nominal + self.half_width * rng.uniform(-1.0, 1.0, n)
        return self.nominal + self.sd * rng.standard_normal(n)


def nominal_value(case: Case, path: str) -> float:
    """The case's value at a tolerance path [SI]: a magnet's remanence is its section's, or its
    material's (at 20 °C); the temperature is the nominal one (`Environment.nominal_K`)."""
    if path == TEMPERATURE_PATH:
        return case.environment.nominal_K
    section, _, name = path.rpartition(".")
    node = case
    for part in section.split("."):
        node = getattr(node, part, None)
        if node is None:
            raise KeyError(f"the case has no [{section}] section")
    value = getattr(node, name)
    if value is None and name == "remanence":
        value = find_material(node.material, "magnet").get("remanence")
    return float(value)


def resolve_tolerances(loaded: LoadedCase) -> tuple[Tolerance, ...]:
    """The case's tolerances in SI about their nominal values, the temperature range last.

    Raises CaseError (naming the tolerance) for a path the case has no value at, a percentage
    of a zero value, or a temperature tolerance beside a temperature range.
    """
    case = loaded.case
    found = []
    for spec in case.tolerances:
        found.append(_resolve(loaded, spec))
    window = case.environment.range_K
    if window is not None:
        if any(t.path == TEMPERATURE_PATH for t in found):
            raise CaseError("the temperature is already a range, sampled uniformly over it: "
                            "leave out its tolerance", file=str(loaded.path),
                            key=f"tolerances.{TEMPERATURE_PATH}")
        half = 0.5 * (window[1] - window[0])
        found.append(Tolerance(TEMPERATURE_PATH, "uniform", 0.5 * (window[0] + window[1]),
                               half / math.sqrt(3.0), half, "K"))
    return tuple(found)


def _resolve(loaded: LoadedCase, spec: ToleranceSpec) -> Tolerance:
    key = f"tolerances.{spec.path}"
    try:
        nominal = nominal_value(loaded.case, spec.path)
    except KeyError as exc:
        raise CaseError(f"{exc.args[0]}, so no tolerance can apply to {spec.path}",
                        file=str(loaded.path), key=key) from None
    width = spec.width_SI * abs(nominal) if spec.relative else spec.width_SI
    if spec.relative and nominal == 0.0:
        raise CaseError("a percentage of a zero value: give the tolerance in the value's unit",
                        file=str(loaded.path), key=key)
    unit = spec.unit_SI
    if spec.distribution == "uniform":
        return Tolerance(spec.path, "uniform", nominal, width / math.sqrt(3.0), width, unit)
    return Tolerance(spec.path, "normal", nominal, width, None, unit)


def draw_values(tolerances: tuple[Tolerance, ...], n: int, seed: int) -> np.ndarray:
    """(n, k) sampled values [SI], one column per tolerance, reproducible from `seed` (drawn
    column by column from one `numpy.random.default_rng(seed)`)."""
    rng = np.random.default_rng(seed)
    columns = [t.draw(rng, n) for t in tolerances]
    return np.stack(columns, axis=1) if columns else np.zeros((n, 0))


def sample_seeds(n: int, seed: int) -> np.ndarray:
    """One seed per build for its random ensembles, independent of the values' stream
    (`numpy.random.SeedSequence` spawned from `seed`)."""
    children = np.random.SeedSequence(seed).spawn(n)
    return np.array([int(c.generate_state(1)[0]) for c in children], dtype=np.int64)


def outside_domain(path: str, value: float) -> bool:
    """A sampled value no build can have: a gap, length, remanence or damping ratio ≤ 0, a
    damping ratio ≥ 1, a negative extra mass."""
    if path in POSITIVE and not value > 0.0:
        return True
    if path == "losses.damping_ratio" and value >= 1.0:
        return True
    return path in AT_LEAST_ZERO and value < 0.0


def case_with(case: Case, values: dict[str, float]) -> Case:
    """The case with the values at the given tolerance paths [SI] (not validated again: every
    value is SI already).  A temperature becomes a single service temperature."""
    for path, value in values.items():
        if path == TEMPERATURE_PATH:
            case = case.model_copy(update={"environment": Environment(temperature=None)
                                           .model_copy(update={"temperature": float(value)})})
            continue
        case = _set(case, path.split("."), float(value))
    return case


def _set(node, parts: list[str], value: float):
    if len(parts) == 1:
        return node.model_copy(update={parts[0]: value})
    child = getattr(node, parts[0])
    return node.model_copy(update={parts[0]: _set(child, parts[1:], value)})


# --- statistics ------------------------------------------------------------------------------
@dataclass(frozen=True)
class Summary:
    """Sample statistics of one quantity over the builds where it is defined."""

    count: int
    mean: float | None
    p05: float | None
    p50: float | None
    p95: float | None
    standard_error: float | None  # of the mean: s/√n


def summarise(values: np.ndarray) -> Summary:
    """Mean, 5th/50th/95th percentiles (linear interpolation between order statistics, numpy's
    default) and the standard error s/√n of the finite values.

    >>> s = summarise(np.arange(1.0, 102.0))
    >>> s.mean, s.p05, s.p50, s.p95
    (51.0, 6.0, 51.0, 96.0)
    """
    finite = np.asarray(values, dtype=float)
    finite = finite[np.isfinite(finite)]
    n = int(finite.size)
    if n == 0:
        return Summary(0, None, None, None, None, None)
    p05, p50, p95 = (float(v) for v in np.percentile(finite, [5.0, 50.0, 95.0]))
    error = float(np.std(finite, ddof=1) / math.sqrt(n)) if n > 1 else None
    return Summary(n, float(np.mean(finite)), p05, p50, p95, error)


def binomial_interval(events: int, trials: int,
                      confidence: float = CONFIDENCE) -> tuple[float, float]:
    """Exact (Clopper–Pearson) interval of a binomial proportion k/n:

        lower = B⁻¹(α/2; k, n − k + 1),   upper = B⁻¹(1 − α/2; k + 1, n − k),

    B⁻¹ the beta distribution's quantile (lower 0 for k = 0, upper 1 for k = n); it covers the
    true proportion with at least the stated probability, also near 0 and 1.

    Parameters
    ----------
    events : k, builds with the property
    trials : n, builds
    confidence : 1 − α

    Examples
    --------
    >>> [round(v, 4) for v in binomial_interval(0, 30)]   # the "rule of three": 3/30
    [0.0, 0.1157]

    References
    ----------
    Clopper & Pearson (1934), Biometrika 26:404 (the exact interval).
    """
    from scipy.stats import beta

    if trials <= 0:
        return 0.0, 1.0
    alpha = 1.0 - confidence
    lower = 0.0 if events == 0 else float(beta.ppf(alpha / 2, events, trials - events + 1))
    upper = 1.0 if events == trials else float(beta.ppf(1 - alpha / 2, events + 1,
                                                        trials - events))
    return lower, upper


def correlation_noise(count: int) -> float:
    """The |ρ| that independent values reach by chance in 5 % of samples of `count` builds:
    1.96/√(n − 1), from the variance 1/(n − 1) of Spearman's ρ under independence (its
    large-sample normal approximation).

    >>> round(correlation_noise(101), 3)
    0.196

    References
    ----------
    Kendall (1948), *Rank Correlation Methods*, Griffin, ch. 4 (the variance of ρ under
    independence; memory).
    """
    return 1.96 / math.sqrt(max(count - 1, 1))


def rank_correlation(values: np.ndarray, quantity: np.ndarray) -> float | None:
    """Spearman's rank correlation of a tolerance's sampled values with a quantity over the
    builds where the quantity is defined (scipy.stats.spearmanr); None where either is
    constant or fewer than three builds are left.

    References
    ----------
    Spearman (1904), Am. J. Psychol. 15:72 (rank correlation).
    """
    from scipy.stats import spearmanr

    x = np.asarray(values, dtype=float)
    y = np.asarray(quantity, dtype=float)
    keep = np.isfinite(x) & np.isfinite(y)
    if keep.sum() < 3 or np.ptp(x[keep]) == 0.0 or np.ptp(y[keep]) == 0.0:
        return None
    found = spearmanr(x[keep], y[keep]).statistic
    return float(found) if math.isfinite(found) else None
