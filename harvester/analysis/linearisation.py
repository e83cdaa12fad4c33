"""Fast, approximate mean power under Gaussian random excitation by statistical linearisation.

The restoring force F(x) is replaced by the linear spring that is best in mean square for a
Gaussian response x ~ N(μ, σ²) (Gaussian closure; Caughey 1963, J. Acoust. Soc. Am. 35:1706;
Roberts & Spanos, Random Vibration and Statistical Linearization, Wiley 1990, ch. 5):

    E[F(x)] = 0                 (the mean offset μ balances the static force)
    k_eq    = E[F'(x)]          (the equivalent stiffness)
    σ²      = ∫ G(f) |H_x(f; k_eq)|² df

where H_x is the displacement receptance of the linear beam with stiffness k_eq coupled to the
circuit.  The last line depends on σ² through k_eq, so the three are solved together.  A double
well has two kinds of solution: intrawell (μ near a well, the beam rattles in one well) and
interwell (μ near the saddle, 0 for an odd force: the beam crosses the barrier so often that it
sees one averaged spring).  With unequal wells each well has its own intrawell solution.  The
estimate is approximate: a hopping response is far from Gaussian.  The Monte Carlo of
`harvester.analysis.random_power` is the reference.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy.optimize import brentq, minimize_scalar

from harvester.analysis.tone_power import linear_matched_load
from harvester.case.spectra import AccelerationPSD, psd_at
from harvester.model import ReducedModel, analyse_wells

# the closure residual is scanned over σ²/x_s² in this range (x_s: `_displacement_scale`) on a
# geometric grid of 6 % steps in σ; a pair of roots inside one step shows as a dip of |residual|
# and is bracketed from there (`_closure_roots`), so the grid can stay coarse (and fast)
VARIANCE_SEARCH_RANGE = (1e-8, 1e4)
VARIANCE_SEARCH_POINTS = 241

# The matched load under a spectrum is searched in log R over this many decades either side of
# the tone optimum at the operating frequency, to this tolerance in log10 R (0.23 % in R; the
# power is flat at its maximum, so finer buys nothing).  Each outer round solves the closure
# once (the costly part) and refits the load at its equivalent stiffness; the rounds stop when
# the load moves by less than `MATCH_SETTLED` in log10 R (1 %) or after `MATCH_ROUNDS`.
MATCH_DECADES = 1.5
MATCH_XATOL = 1e-3
MATCH_SETTLED = 0.004
MATCH_ROUNDS = 4


@dataclass(frozen=True)
class LinearResponse:
    """Stationary response of the linear beam–circuit system to a PSD."""

    displacement_variance_m2: float
    circuit_variance: float  # E[q²]: V² (piezo) or A² (coil)
    mean_power_W: float


@dataclass(frozen=True)
class LinearisedBranch:
    """One self-consistent Gaussian-closure solution."""

    kind: str  # "linear" | "single-well" | "intrawell" | "interwell"
    mean_offset_m: float  # μ (for an odd force's intrawell pair, the positive-well member)
    rms_displacement_m: float  # σ, about μ
    equivalent_stiffness_N_per_m: float
    mean_power_W: float
    rms_circuit: float  # V (piezo) or A (coil)

    def to_dict(self) -> dict:
        return {
            "kind": self.kind,
            "mean_offset_m": self.mean_offset_m,
            "rms_displacement_m": self.rms_displacement_m,
            "equivalent_stiffness_N_per_m": self.equivalent_stiffness_N_per_m,
            "mean_power_W": self.mean_power_W,
            "rms_circuit": self.rms_circuit,
        }


@dataclass(frozen=True)
class LinearisationEstimate:
    branches: tuple[LinearisedBranch, ...]
    method: str = (
        "approximate: statistical (equivalent) linearisation with Gaussian closure "
        "(Caughey 1963; Roberts & Spanos 1990); the Monte Carlo is the reference"
    )

    def to_dict(self) -> dict:
        return {"branches": [b.to_dict() for b in self.branches], "method": self.method}


def linear_random_response(
    model: ReducedModel, stiffness_N_per_m: float, psd: AccelerationPSD
) -> LinearResponse:
    """Stationary variances and mean load power of the linear beam (stiffness k) coupled to the
    model's circuit under base acceleration of one-sided PSD G (Crandall & Mark 1963, *Random
    Vibration in Mechanical Systems*, ch. 2):

        σ_x² = ∫ G |H_x|² df,   H_x = −m_f / (k − mω² + iωc + iω g²/(iωa + h)),
        σ_q² = ∫ G |iω g H_x/(iωa + h)|² df,   P = σ_q²/R_l (piezo) or σ_q² R_l (coil).

    Parameters
    ----------
    model : the reduced model (mass, damping, circuit; its own stiffness is not used)
    stiffness_N_per_m : k [N/m], > 0
    psd : one-sided base-acceleration PSD [(m/s²)²/Hz]
    """
    f = _integration_grid(model, stiffness_N_per_m, psd)
    g_psd = psd_at(psd, f)
    h_x, h_q = _receptances(model, stiffness_N_per_m, 2.0 * math.pi * f)
    var_x = float(np.trapezoid(g_psd * np.abs(h_x) ** 2, f))
    var_q = float(np.trapezoid(g_psd * np.abs(h_q) ** 2, f))
    # an open coil carries no current: 0 A² into an infinite load is no power, not NaN
    power = float(model.load_power(1.0)) * var_q if var_q > 0.0 else 0.0
    return LinearResponse(var_x, var_q, power)


def statistical_linearisation(model: ReducedModel, psd: AccelerationPSD) -> LinearisationEstimate:
    """Gaussian-closure estimates of the response and mean load power (module notes).

    Returns every branch that has a self-consistent solution: for a double well the intrawell
    branch with the smallest σ (the one reached as the noise grows from zero; with unequal wells
    one per well, the right one first) and the interwell branch with the largest σ; for k1 > 0
    the single-well branch (exact for a linear model).
    """
    if len(model.stiffness) == 1 and not any(model.even_stiffness[1:]):
        k = model.k1
        r = linear_random_response(model, k, psd)
        offset = -model.even_stiffness[0] / k if model.even_stiffness else 0.0
        return LinearisationEstimate((_branch("linear", offset, model, k, r),))
    if model.is_symmetric:
        kinds = (("intrawell", 1), ("interwell", 1)) if model.k1 < 0.0 else (("single-well", 1),)
    else:
        kinds = ((("intrawell", 1), ("intrawell", -1), ("interwell", 1)) if model.is_bistable
                 else (("single-well", 1),))
    branches = []
    for kind, well in kinds:
        solutions = gaussian_closure_solutions(model, psd, kind, well)
        if solutions:
            branches.append(solutions[0] if kind == "intrawell" else solutions[-1])
    return LinearisationEstimate(tuple(branches))


def gaussian_force_moments(
    stiffness: tuple[float, ...], mean_m: float, variance_m2: float,
    even: tuple[float, ...] = (),
) -> tuple[float, float]:
    """E[F(x)] [N] and E[F'(x)] [N/m] for F(x) = Σ k_(2j+1) x^(2j+1) + Σ k_2j x^2j (`stiffness`
    the odd terms, `even` the even ones) and x ~ N(μ, σ²), using the Gaussian moments
    E[(μ + σz)^n] = Σ_(i even) C(n, i) μ^(n−i) σ^i (i − 1)!!."""
    mean_force = 0.0
    mean_slope = 0.0
    for j, k in enumerate(stiffness):
        n = 2 * j + 1
        mean_force += k * _gaussian_power_moment(n, mean_m, variance_m2)
        mean_slope += k * n * _gaussian_power_moment(n - 1, mean_m, variance_m2)
    for j, k in enumerate(even):
        n = 2 * j
        mean_force += k * _gaussian_power_moment(n, mean_m, variance_m2)
        if n:
            mean_slope += k * n * _gaussian_power_moment(n - 1, mean_m, variance_m2)
    return mean_force, mean_slope


def _gaussian_power_moment(n: int, mean: float, variance: float) -> float:
    total = 0.0
    for i in range(0, n + 1, 2):
        total += math.comb(n, i) * mean ** (n - i) * variance ** (i // 2) * _double_factorial(i - 1)
    return total


@lru_cache(maxsize=64)  # the closure asks for the same few values millions of times
def _double_factorial(n: int) -> int:
    return 1 if n <= 0 else n * _double_factorial(n - 2)


def _intrawell_offset(stiffness: tuple[float, ...], variance: float) -> float | None:
    """Positive μ with E[F] = 0 and E[F'] > 0, nearest the well, or None."""
    coefficients = np.zeros(2 * len(stiffness))  # polynomial in μ, lowest power first
    for j, k in enumerate(stiffness):
        n = 2 * j + 1
        for i in range(0, n + 1, 2):
            coefficients[n - i] += (
                k * math.comb(n, i) * variance ** (i // 2) * _double_factorial(i - 1)
            )
    roots = np.polynomial.polynomial.polyroots(coefficients)
    positive = sorted(
        r.real for r in roots if abs(r.imag) <= 1e-9 * max(1.0, abs(r.real)) and r.real > 0.0
    )
    for mu in positive:
        if gaussian_force_moments(stiffness, mu, variance)[1] > 0.0:
            return float(mu)
    return None


def _closure_offset(model: ReducedModel, variance: float, kind: str, well: int) -> float | None:
    """μ with E[F] = 0 and E[F'] > 0 for a model with even terms, as for an odd force: while
    E[F] has an unstable root (E[F'] < 0; the one nearest the saddle), "intrawell" takes the
    stable root next to it on side `well`, and there is no interwell solution; once E[F] is
    monotone in μ its one root is the interwell (or single-well) solution and there is no
    intrawell one.  None where there is none."""
    coefficients = np.zeros(len(model.force_coefficients))  # E[F] as a polynomial in μ
    for n, k in enumerate(model.force_coefficients):
        for i in range(0, n + 1, 2):
            coefficients[n - i] += (
                k * math.comb(n, i) * variance ** (i // 2) * _double_factorial(i - 1)
            )
    roots = np.polynomial.polynomial.polyroots(np.trim_zeros(coefficients, "b"))
    real = sorted(float(r.real) for r in roots if abs(r.imag) <= 1e-9 * max(1.0, abs(r.real)))
    slopes = [gaussian_force_moments(model.stiffness, mu, variance, model.even_stiffness)[1]
              for mu in real]
    stable = [mu for mu, slope in zip(real, slopes) if slope > 0.0]
    unstable = [mu for mu, slope in zip(real, slopes) if slope < 0.0]
    if kind == "intrawell":
        if not unstable:
            return None
        saddle = analyse_wells(model).saddle_m or 0.0
        pivot = min(unstable, key=lambda mu: abs(mu - saddle))
        side = [mu for mu in stable if (mu - pivot) * well > 0.0]
        return min(side, key=lambda mu: abs(mu - pivot)) if side else None
    if unstable and kind == "interwell":
        return None
    return min(stable, key=abs) if stable else None


def gaussian_closure_solutions(
    model: ReducedModel, psd: AccelerationPSD, kind: str, well: int = 1, *,
    points: int = VARIANCE_SEARCH_POINTS,
) -> tuple[LinearisedBranch, ...]:
    """Every self-consistent Gaussian-closure solution of one kind, smallest σ first.

    Solves  E[F] = 0,  k_eq = E[F'],  σ² = ∫ G |H_x(f; k_eq)|² df  (module notes) for σ² by
    bracketing roots of ln(σ²/σ_lin²(k_eq(σ²))) over σ² = (1e-8 … 1e4)·x_s² on `points`
    geometric points (241), x_s the well position (or the linear RMS response); pairs of roots
    closer than a grid step are found at the dip of the residual between them.

    Parameters
    ----------
    model : reduced model with a polynomial restoring force
    psd : one-sided base-acceleration PSD [(m/s²)²/Hz]
    kind : "intrawell" (μ > 0, the positive-well member of a ± pair), "interwell" or
        "single-well" (both μ = 0); with unequal wells μ is the offset that balances the
        force's mean (`_closure_offset`), in the well `well` (+1 right, −1 left) for
        "intrawell"
    well : side of the saddle of an intrawell solution when the wells are unequal

    References
    ----------
    Caughey (1963), J. Acoust. Soc. Am. 35:1706; Roberts & Spanos (1990), Random Vibration and
    Statistical Linearization, Wiley, ch. 5.
    """
    if kind not in ("intrawell", "interwell", "single-well"):
        raise ValueError('kind is "intrawell", "interwell" or "single-well"')

    def closure(variance: float) -> tuple[float, float] | None:
        if not model.is_symmetric:
            mu = _closure_offset(model, variance, kind, well)
        elif kind == "intrawell":
            mu = _intrawell_offset(model.stiffness, variance)
        else:
            mu = 0.0
        if mu is None:
            return None
        k_eq = gaussian_force_moments(model.stiffness, mu, variance, model.even_stiffness)[1]
        return (mu, k_eq) if k_eq > 0.0 else None

    def residual(variance: float, found: tuple[float, float] | None = None) -> float:
        mu, k_eq = found or closure(variance)
        return math.log(
            variance / linear_random_response(model, k_eq, psd).displacement_variance_m2
        )

    x_scale = _displacement_scale(model, psd)
    grid = x_scale**2 * np.geomspace(*VARIANCE_SEARCH_RANGE, points)
    r = [None if found is None else residual(v, found)
         for v, found in ((v, closure(v)) for v in grid)]
    solutions = []
    for variance in _closure_roots(residual, grid, r):
        mu, k_eq = closure(variance)
        solutions.append(_branch(kind, mu, model, k_eq, linear_random_response(model, k_eq, psd)))
    return tuple(solutions)


def _closure_roots(residual, grid: np.ndarray, values: list) -> list[float]:
    """Every root of the closure residual seen on the variance grid.

    A sign change between neighbours brackets one root.  Two roots closer together than a grid
    step leave no sign change, only a dip in |residual|; at such a local minimum the residual is
    minimised (with its sign) between the neighbours and, if that flips the sign, the two roots
    are bracketed on either side of the minimiser.
    """

    def root(lo: float, hi: float) -> float:
        return brentq(residual, lo, hi, xtol=1e-12 * lo, rtol=1e-10)

    roots = []
    for i in range(len(grid) - 1):
        r0, r1 = values[i], values[i + 1]
        if r0 is not None and r1 is not None and r0 * r1 <= 0.0:
            roots.append(root(grid[i], grid[i + 1]))
    for i in range(1, len(grid) - 1):
        r_prev, r_mid, r_next = values[i - 1], values[i], values[i + 1]
        if r_prev is None or r_mid is None or r_next is None or r_mid == 0.0:
            continue
        same_sign = r_prev * r_mid > 0.0 and r_mid * r_next > 0.0
        if not (same_sign and abs(r_mid) < abs(r_prev) and abs(r_mid) < abs(r_next)):
            continue
        sign = math.copysign(1.0, r_mid)
        # search in log-variance, the grid's own spacing
        dip = minimize_scalar(
            lambda u, s=sign: s * residual(math.exp(u)),
            bounds=(math.log(grid[i - 1]), math.log(grid[i + 1])),
            method="bounded",
            options={"xatol": 1e-9},
        )
        v_dip = math.exp(dip.x)
        if sign * residual(v_dip) < 0.0:
            roots += [root(grid[i - 1], v_dip), root(v_dip, grid[i + 1])]
    return sorted(roots)


def _branch(kind, mu, model, k_eq, response: LinearResponse) -> LinearisedBranch:
    return LinearisedBranch(
        kind=kind,
        mean_offset_m=mu,
        rms_displacement_m=math.sqrt(response.displacement_variance_m2),
        equivalent_stiffness_N_per_m=k_eq,
        mean_power_W=response.mean_power_W,
        rms_circuit=math.sqrt(response.circuit_variance),
    )


def _displacement_scale(model: ReducedModel, psd: AccelerationPSD) -> float:
    """A length typical of the response [m]: the well position of a double well (with unequal
    wells the farther one from the saddle), else the RMS response of the linear spring k1
    (1 mm for the degenerate k1 = 0)."""
    if not model.is_symmetric and model.is_bistable:
        wells = analyse_wells(model)
        return max(abs(w - wells.saddle_m) for w in wells.wells_m)
    if model.k1 < 0.0 and model.k3 > 0.0:
        return math.sqrt(-model.k1 / model.k3)
    if model.k1 > 0.0:
        return math.sqrt(linear_random_response(model, model.k1, psd).displacement_variance_m2)
    return 1e-3


def _receptances(model: ReducedModel, k: float, omega: np.ndarray):
    a, g, h = model.circuit_coefficients()
    m, c, mf = model.mass_kg, model.damping_N_s_per_m, model.forcing_mass_kg
    jw = 1j * omega
    circuit = np.zeros_like(jw) if g == 0.0 else g * g * jw / (jw * a + h)
    h_x = -mf / (k - m * omega**2 + c * jw + circuit)
    h_q = np.zeros_like(h_x) if g == 0.0 else jw * g * h_x / (jw * a + h)
    return h_x, h_q


def _integration_grid(model: ReducedModel, k: float, psd: AccelerationPSD) -> np.ndarray:
    """Frequencies [Hz] that resolve both the PSD table and every lightly damped pole."""
    f_lo, f_hi = float(psd.frequency_Hz[0]), float(psd.frequency_Hz[-1])
    parts = [psd.frequency_Hz, np.linspace(f_lo, f_hi, 4001)]
    if f_hi > 0.0:
        parts.append(np.geomspace(max(f_lo, 1e-6 * f_hi), f_hi, 4001))
    u = np.sinh(np.linspace(-math.asinh(400.0), math.asinh(400.0), 801))
    for pole in _poles(model, k):
        if pole.imag > 0.0:
            centre = abs(pole) / (2.0 * math.pi)
            half_bandwidth = max(-pole.real, 1e-12 * abs(pole)) / (2.0 * math.pi)
            parts.append(centre + half_bandwidth * u)
    f = np.unique(np.concatenate(parts))
    return f[(f >= f_lo) & (f <= f_hi)]


def _poles(model: ReducedModel, k: float) -> np.ndarray:
    """Roots of (m s² + c s + k)(a s + h) + g² s, the coupled system's characteristic
    polynomial (a = 0: the circuit is the viscous damper g²/h)."""
    a, g, h = model.circuit_coefficients()
    m, c = model.mass_kg, model.damping_N_s_per_m
    if a == 0.0:
        return np.roots([m, c + (g * g / h if g else 0.0), k])
    return np.roots([m * a, m * h + c * a, k * a + c * h + g * g, k * h])


def random_matched_load(model: ReducedModel, psd: AccelerationPSD) -> tuple[float, str]:
    """The load [Ω] that gives the most mean power under a spectrum, by the fast estimate, and
    a note saying how it was chosen.

    The linearised beam (stiffness k_eq of the governing Gaussian-closure branch, the one with
    the most power) collects P(R) = σ_q²(R)/R (piezo) or σ_q²(R) R (coil),
    σ_q² = ∫ G |H_q(f; k_eq, R)|² df (`linear_random_response`); R is found by a bounded 1-D
    search in log R (`scipy.optimize.minimize_scalar`, bounded Brent) within `MATCH_DECADES`
    of the tone optimum `linear_matched_load` at the operating frequency.  The closure is then
    solved again at the new load and the search repeated, until the load settles: the result is
    the optimum of the equivalent linear system at its own stiffness.  For a linear model
    (k_eq = k1) the first round is exact; for a double well it is as approximate as the
    closure (the Monte Carlo then runs at this load).

    References
    ----------
    Erturk & Inman (2011), *Piezoelectric Energy Harvesting*, Wiley, ch. 3 (single-mode
    coupled response); Newland (1993), *An Introduction to Random Vibrations, Spectral &
    Wavelet Analysis*, 3rd ed., ch. 7 (response spectrum of a linear system); Roberts & Spanos
    (1990), *Random Vibration and Statistical Linearization*, ch. 5.
    """
    if model.transducer is None:
        return math.inf, "no transducer"
    wells = analyse_wells(model)
    frequency = wells.well_frequency_Hz or wells.linear_frequency_Hz or 1.0
    reference = linear_matched_load(model, frequency)
    centre = math.log10(reference)
    bounds = (centre - MATCH_DECADES, centre + MATCH_DECADES)
    load, how = reference, "no Gaussian-closure solution: the tone optimum is kept"
    for _ in range(MATCH_ROUNDS):
        branches = statistical_linearisation(model.with_load(load), psd).branches
        if not branches:
            break
        branch = max(branches, key=lambda b: b.mean_power_W)
        k_eq = branch.equivalent_stiffness_N_per_m
        best = minimize_scalar(
            lambda u, k=k_eq: -linear_random_response(model.with_load(10.0**u), k,
                                                      psd).mean_power_W,
            bounds=bounds, method="bounded", options={"xatol": MATCH_XATOL})
        moved = abs(best.x - math.log10(load))
        load = 10.0**best.x
        edge = min(best.x - bounds[0], bounds[1] - best.x) < 2 * MATCH_XATOL
        how = (f"{branch.kind} branch, k_eq = {k_eq:.4g} N/m, {-best.fun:.3g} W"
               + ("; at the edge of the search" if edge else ""))
        if moved < MATCH_SETTLED or branch.kind == "linear":
            break
    return load, (
        f"\"matched\": {load:.4g} Ω, the most mean power under the case's spectrum by the fast "
        f"estimate (statistical linearisation, {how}); bounded search in log R over "
        f"{10 ** bounds[0]:.3g}–{10 ** bounds[1]:.3g} Ω around the tone optimum "
        f"{reference:.3g} Ω at {frequency:.3g} Hz"
    )

