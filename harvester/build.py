"""From a validated case to the reduced model: beam + magnets → restoring force → k1, k3, …

The exact restoring force F(x) = k_b x + dU_mag/dx is tabulated over the range the motion may
use (the case's travel limit, at most 0.4 L) and fitted with odd powers; where the geometry is
asymmetric (a fixed magnet off the beam's axis, gravity along the deflection) it keeps its
even powers too (`fit_polynomial`), with the same tolerances on both wells.  U_mag is evaluated
with the tip magnet where the inextensible beam puts it: deflected by x, turned with the slope
and drawn towards the clamp by α x² (`harvester.physics.beam.foreshortening_coefficient`), so
the magnets' axial push P softens the straight beam by 2αP, as an end load softens a
beam-column.  k1 is not fitted: it is the exact small-deflection stiffness
k_b + d²U_mag/dx²(0), so the regime (and the critical gap) agree with the physics.  The higher
terms are a weighted least-squares fit that favours the region within two well positions, and
the number of terms is the fewest that reproduce the exact well position, barrier and force
there (`fit_odd_polynomial`); the fit error is reported.

Gravity along the deflection (`[mounting] gravity`, G) loads the beam's own mass and the tip
body's through the forcing mass, a constant force m_f G: the restoring force gains
k0 = −m_f G, and the static deflection of the magnet-free beam is m_f G/k_b.  The magnets'
remanence follows the service temperature, B_r(T) = B_r(20 °C)(1 + α (T − 20 °C))
(`remanence_at`).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace

import numpy as np
from scipy.optimize import brentq, minimize_scalar

from harvester.case.load import LoadedCase
from harvester.case.schema import REFERENCE_TEMPERATURE_K, Case, TipMagnet
from harvester.errors import CaseError
from harvester.materials import find_material
from harvester.model import (
    BridgeCircuit,
    CapacitorStore,
    CoilCircuit,
    PiezoCircuit,
    ReducedModel,
    VoltageStore,
    analyse_wells,
    odd_potential,
    stable_equilibria,
)
from harvester.physics import magnets as mag
from harvester.physics.beam import (
    BeamDesign,
    BeamProperties,
    beam_properties,
    euler_buckling_load,
)

# Largest tip deflection, in beam lengths, for which this project uses the small-deflection
# beam model at all.  It is an outer bound, not an accuracy claim: the tip-loaded elastica is
# already about 10 % stiffer than linear theory at 0.3 L (Bisshopp & Drucker 1945, Q. Appl.
# Math. 3:272, table of tip deflections; memory).
SMALL_DEFLECTION_REACH = 0.4
MIN_FIT_TERMS = 2  # k1, k3
MAX_FIT_TERMS = 8  # k1 … k15
INNER_SPAN_WELLS = 2.0  # the fit favours |x| ≤ 2 wells, where intrawell and hopping motion live
WELL_TOLERANCE = 0.005  # well position of the fit, relative to the exact one
BARRIER_TOLERANCE = 0.01  # barrier of the fit, relative to the exact one
FORCE_TOLERANCE = 0.01  # largest force error within two wells, relative to max |F| there
REGION_POINTS = 200  # table points on each side of x = 2 wells (x ≥ 0)
# `spread` builds hundreds of designs: a coarser table moves the fitted barrier by ~1e-4 of
# itself (well inside the fit's tolerances) at a third of the cost
SPREAD_REGION_POINTS = 50
# the search for equilibria of the exact force: a geometric grid from 1e-6 of the reach to
# the reach (each side, a factor 1.25 per step), every sign change polished by Brent's method
SCAN_POINTS = 64
BARRIER_NODES = 48  # Gauss–Legendre nodes of the barrier integral (the force is smooth there)
# the asymmetric critical gap is bracketed in steps of this factor from the symmetric one
CRITICAL_SEARCH_FACTOR = 1.05
CRITICAL_SEARCH_STEPS = 40
# Warn when the magnets' axial push exceeds this share of the buckling load: a beam-column's
# deflections from any imperfection (a crooked strip, a tilted magnet, gravity) grow as
# 1/(1 − P/P_cr), twofold here (Timoshenko & Gere 1961, ch. 1, beam-columns; memory), and the
# single-mode softening 2αP then errs by the shape's 1–8 % in P_cr on a small net stiffness.
AXIAL_LOAD_WARNING_RATIO = 0.5


@dataclass(frozen=True)
class ForceFit:
    """How well the odd polynomial reproduces the exact restoring force.

    Errors are signed and relative: `well_error` = x_w,fit/x_w − 1, `barrier_error` =
    ΔU_fit/ΔU − 1 (None for a monostable beam); `rms_error` and `max_error` are over the whole
    window, `inner_max_error` over |x| ≤ 2 wells (the whole window when monostable), each
    relative to max |F| over the same range.  With unequal wells (`fit_polynomial`) the well
    error is (x_w,fit − x_w)/|x_w − x_s| and both errors are those of the well that misses
    most; `terms` then counts the odd powers, each with the even power below it.
    """

    window_m: float  # fitted over −window … +window
    terms: int  # odd powers kept: k1 … k_(2 terms − 1)
    rms_error: float
    max_error: float
    inner_max_error: float
    well_error: float | None
    barrier_error: float | None
    exact_well_m: float | None  # first stable equilibrium x > 0 of the exact force
    exact_barrier_J: float | None  # −∫₀^x_w F dx of the exact force
    meets_tolerances: bool  # well, barrier and inner force error all within tolerance
    x_m: np.ndarray  # the table, ascending (symmetric about 0 for an odd force)
    force_N: np.ndarray  # exact restoring force (beam + magnets) on the table
    # unequal wells (an asymmetric geometry): both exact wells, the saddle, both barriers
    exact_wells_m: tuple[float, ...] = ()
    exact_saddle_m: float | None = None
    exact_barriers_J: tuple[float, ...] = ()


@dataclass(frozen=True)
class Built:
    """The reduced model of a geometry case with everything derived on the way."""

    model: ReducedModel
    beam: BeamProperties | None
    beam_design: BeamDesign | None
    tip: mag.Block | mag.Disc | None
    fixed: mag.Block | mag.Disc | None
    gap_m: float | None
    fit: ForceFit | None
    critical_gap_m: float | None
    magnet_model: str
    axial_force_N: float | None = None  # magnets' push P on the tip at rest, towards the clamp
    buckling_load_N: float | None = None  # π²EI/(4L²) of the magnet-free cantilever
    # [circuit]: the bridge the transducer works into (None: the resistor of [load]), and
    # whether its store voltage (or a capacitor's load) is "matched", to be searched for;
    # `model` itself keeps the resistive load, for the AC figures beside the DC ones
    interface: BridgeCircuit | None = None
    interface_matched: bool = False
    offset_m: float = 0.0  # the fixed magnet's centre off the beam's axis, along +x
    gravity_force_N: float = 0.0  # m_f G: the weight along +x of the beam and the tip body
    temperature_K: float = REFERENCE_TEMPERATURE_K  # the magnets' temperature

    @property
    def static_deflection_m(self) -> float | None:
        """m_f G/k_b [m]: where gravity puts the magnet-free beam; None for a [reduced] case."""
        k = self.model.linear_stiffness_N_per_m
        return self.gravity_force_N / k if k else None

    @property
    def buckling_load_ratio(self) -> float | None:
        """P/P_cr [-]; None for a [reduced] case."""
        if self.axial_force_N is None or self.buckling_load_N is None:
            return None
        return self.axial_force_N / self.buckling_load_N


# --- case → physics inputs ---------------------------------------------------------------------
def remanence_at(remanence_T: float, coefficient_per_K: float, temperature_K: float) -> float:
    """Remanence at a temperature [T]: B_r(T) = B_r(20 °C) (1 + α (T − 20 °C)).

    The reversible change, linear about the 20 °C reference at which magnet makers quote B_r
    and α (about −0.12 %/K for NdFeB N grades, common practice from makers' data).  The force
    between two magnets is proportional to the product of their remanences.

    Parameters
    ----------
    remanence_T : B_r at 20 °C [T]
    coefficient_per_K : α [1/K]
    temperature_K : T [K]

    Examples
    --------
    >>> round(remanence_at(1.30, -0.0012, 273.15 + 60.0), 12)  # 40 K above: −4.8 %
    1.2376

    References
    ----------
    Furlani (2001), *Permanent Magnet and Electromechanical Devices*, Academic Press, ch. 2
    (reversible temperature coefficient of remanence; memory).
    """
    return remanence_T * (1.0 + coefficient_per_K * (temperature_K - REFERENCE_TEMPERATURE_K))


def magnet_shape(spec: TipMagnet,
                 temperature_K: float = REFERENCE_TEMPERATURE_K) -> mag.Block | mag.Disc:
    """A magnet section's shape with its remanence (the section's own, a measured value at
    20 °C, or the material's) at `temperature_K`."""
    material = find_material(spec.material, "magnet")
    remanence = spec.remanence if spec.remanence is not None else material.get("remanence")
    remanence = remanence_at(remanence, material.get("remanence_temperature_coefficient"),
                             temperature_K)
    if spec.block is not None:
        axial, width, deflection = spec.block
        return mag.Block(axial_m=axial, width_m=width, deflection_m=deflection,
                         remanence_T=remanence)
    return mag.Disc(diameter_m=spec.disc.diameter, length_m=spec.disc.length,
                    remanence_T=remanence)


def tip_inertia(spec: TipMagnet, shape: mag.Block | mag.Disc) -> tuple[float, float, float]:
    """The tip magnet and its mount as one rigid body: mass, centre offset, own rotary inertia.

        M = M_m + M_x,   e = M_m a/(2M),
        I_c = I_m + M_m (a/2 − e)² + M_x e²      (parallel-axis theorem)

    The magnet (mass M_m, axial length a, inertia I_m about its own centre for rotation in the
    bending plane) sits with its inner face on the beam tip, so its centre is a/2 beyond it;
    the extra mass M_x (mount, glue) is a point at the tip itself.

    Parameters
    ----------
    spec : the case's tip magnet (material, shape, extra mass)
    shape : its geometry [m]

    Returns
    -------
    (M [kg], e [m] beyond the tip along the axis, I_c [kg·m²] about the body's own centre)

    References
    ----------
    Meriam & Kraige (2012), *Engineering Mechanics: Dynamics*, 7th ed., Wiley, appendix B
    (block and cylinder moments of inertia, parallel-axis theorem; memory).
    """
    density = find_material(spec.material, "magnet").get("density")
    magnet_mass = density * mag.magnet_volume(shape)
    if isinstance(shape, mag.Block):
        half = shape.axial_m / 2
        own = magnet_mass * (shape.axial_m**2 + shape.deflection_m**2) / 12
    else:
        half = shape.length_m / 2
        own = magnet_mass * (3 * (shape.diameter_m / 2) ** 2 + shape.length_m**2) / 12
    mass = magnet_mass + spec.extra_mass
    offset = magnet_mass * half / mass
    inertia = own + magnet_mass * (half - offset) ** 2 + spec.extra_mass * offset**2
    return mass, offset, inertia


def beam_design(case: Case) -> BeamDesign:
    beam = case.beam
    substrate = find_material(beam.substrate.material, "substrate")
    tip_mass, tip_offset, tip_rotary = tip_inertia(case.tip_magnet, magnet_shape(case.tip_magnet))
    piezo = {}
    if beam.piezo is not None:
        ceramic = find_material(beam.piezo.material, "piezo")
        piezo = dict(
            piezo_layers=beam.piezo.layers,
            piezo_thickness_m=beam.piezo.thickness,
            piezo_modulus_Pa=ceramic.youngs_modulus_Pa,
            piezo_density_kg_m3=ceramic.get("density"),
            piezo_e31_C_per_m2=ceramic.e31_C_per_m2,
            piezo_permittivity_F_per_m=ceramic.permittivity_S_F_per_m,
            piezo_wiring=beam.piezo.wiring,
        )
    return BeamDesign(
        length_m=beam.length,
        width_m=beam.width,
        substrate_thickness_m=beam.substrate.thickness,
        substrate_modulus_Pa=substrate.youngs_modulus_Pa,
        substrate_density_kg_m3=substrate.get("density"),
        tip_mass_kg=tip_mass,
        tip_rotary_inertia_kg_m2=tip_rotary,
        tip_mass_offset_m=tip_offset,
        **piezo,
    )


# --- restoring force ---------------------------------------------------------------------------
def exact_well(force: Callable[[np.ndarray], np.ndarray], reach: float) -> float | None:
    """First stable equilibrium x_w > 0 of an odd restoring force F(x) [m], or None.

    For k1 < 0 the force is negative just right of 0; the well is its first crossing to
    positive.  The crossing is bracketed on a geometric grid (SCAN_POINTS) from 10⁻⁶ reach (so
    that even the shallow wells just inside the critical gap are seen) and refined with Brent's
    method.

    Parameters
    ----------
    force : F(x) [N] of x [m], vectorised
    reach : largest deflection searched [m]

    References
    ----------
    Brent (1973), Algorithms for Minimization without Derivatives, Prentice-Hall, ch. 4
    (scipy.optimize.brentq).
    """
    x = np.geomspace(1e-6 * reach, reach, SCAN_POINTS)
    f = force(x)
    crossing = np.nonzero(f > 0.0)[0]
    if crossing.size == 0 or crossing[0] == 0:
        return None
    i = crossing[0]
    return float(brentq(lambda v: float(force(np.asarray(v))), x[i - 1], x[i],
                        xtol=1e-15, rtol=1e-12))


def exact_barrier(force: Callable[[np.ndarray], np.ndarray], well_m: float,
                  saddle_m: float = 0.0) -> float:
    """Potential barrier ΔU = U(x_s) − U(x_w) = −∫_x_s^x_w F(x) dx [J] of a restoring force
    [N], from the saddle x_s (0 for an odd force) to the well x_w, by Gauss–Legendre
    quadrature (BARRIER_NODES, one vectorised call: F is smooth between its equilibria).

    References
    ----------
    Davis & Rabinowitz (1984), *Methods of Numerical Integration*, 2nd ed., Academic Press,
    §2.7 (Gauss–Legendre; memory).
    """
    nodes, weights = np.polynomial.legendre.leggauss(BARRIER_NODES)
    half = 0.5 * (well_m - saddle_m)
    x = saddle_m + half * (nodes + 1.0)
    return -float(half * (weights @ force(x)))


def fit_table(window_m: float, well_m: float | None,
              points: int = REGION_POINTS) -> np.ndarray:
    """Symmetric, ascending table for the fit [m]: as many points inside ±2 wells as outside.

    The inner region would otherwise get only a few points when the well is small against the
    window (near the critical gap); `fit_odd_polynomial` weights by spacing, so the denser
    inner points do not change what is minimised.
    """
    inner = min(INNER_SPAN_WELLS * well_m, window_m) if well_m else window_m
    half = np.linspace(0.0, inner, points + 1)
    if inner < window_m:
        half = np.concatenate((half, np.linspace(inner, window_m, points + 1)[1:]))
    return np.concatenate((-half[:0:-1], half))


def fit_odd_polynomial(x: np.ndarray, force: np.ndarray, k1: float,
                       well_m: float | None = None,
                       barrier_J: float | None = None) -> tuple[tuple[float, ...], ForceFit]:
    """Odd polynomial k1 x + k3 x³ + … + k_(2n−1) x^(2n−1) through an exact force table.

    k1 is given (the exact stiffness at x = 0).  For n = 2 … MAX_FIT_TERMS the rest minimise

        Σ w(x)² (F(x) − k1 x − Σ k_(2j+1) x^(2j+1))² Δx,   w = 1/max(|x|/(2 x_w), 1)²,

    a discrete weighted L² norm that keeps the error small within two wells and lets it grow
    outside, in powers of u = x/window for conditioning.  The first n whose polynomial puts
    its well within WELL_TOLERANCE and its barrier within BARRIER_TOLERANCE of the exact
    `well_m` and `barrier_J`, misses F by at most FORCE_TOLERANCE of max |F| within two wells,
    and has as many equilibria in the window as F (no spurious ones) is kept; if none does,
    the one with the smallest worst ratio of error to tolerance, and `meets_tolerances` is
    False.  Monostable (`well_m` None): uniform weights, only the force criterion, over the
    whole window.

    Parameters
    ----------
    x : table [m], ascending, symmetric about 0
    force : exact restoring force on the table [N]
    k1 : stiffness at x = 0 [N/m]
    well_m, barrier_J : the exact well [m] and barrier [J], None when monostable

    Returns
    -------
    (stiffness (k1, k3, …) in SI, the fit's `ForceFit`)

    References
    ----------
    Björck (1996), Numerical Methods for Least Squares Problems, SIAM, §4.4 (weighted least
    squares; numpy.linalg.lstsq).
    """
    window = float(np.max(np.abs(x)))
    u = x / window
    spacing = np.gradient(x)
    if well_m:
        weight = 1.0 / np.maximum(np.abs(x) / (INNER_SPAN_WELLS * well_m), 1.0) ** 2
        inner = np.abs(x) <= INNER_SPAN_WELLS * well_m * (1.0 + 1e-12)
    else:
        weight = np.ones_like(x)
        inner = np.ones_like(x, dtype=bool)
    row = weight * np.sqrt(spacing)
    residual = force - k1 * x
    norm = float(np.max(np.abs(force))) or 1.0
    inner_norm = float(np.max(np.abs(force[inner]))) or 1.0
    positive = x > 0.0
    crossings = _sign_changes(force[positive])
    candidates = []
    for terms in range(MIN_FIT_TERMS, MAX_FIT_TERMS + 1):
        basis = np.stack([u ** (2 * j + 1) for j in range(1, terms)], axis=1)
        coef, *_ = np.linalg.lstsq(basis * row[:, None], residual * row, rcond=None)
        stiffness = (float(k1), *(float(c) / window ** (2 * j + 1)
                                  for j, c in enumerate(coef, start=1)))
        error = residual - basis @ coef
        inner_max = float(np.max(np.abs(error[inner]))) / inner_norm
        ratios = [inner_max / FORCE_TOLERANCE]
        well_error = barrier_error = None
        if well_m:
            well_error, barrier_error = _well_and_barrier_errors(stiffness, well_m, barrier_J)
            ratios += [abs(well_error) / WELL_TOLERANCE, abs(barrier_error) / BARRIER_TOLERANCE]
        fitted = force - error
        if _sign_changes(fitted[positive]) != crossings:
            ratios.append(math.inf)
        fit = ForceFit(window_m=window, terms=terms,
                       rms_error=float(np.sqrt(np.mean(error**2))) / norm,
                       max_error=float(np.max(np.abs(error))) / norm, inner_max_error=inner_max,
                       well_error=well_error, barrier_error=barrier_error, exact_well_m=well_m,
                       exact_barrier_J=barrier_J, meets_tolerances=max(ratios) <= 1.0,
                       x_m=x, force_N=force)
        if fit.meets_tolerances:
            return stiffness, fit
        candidates.append((max(ratios), terms, stiffness, fit))
    _, _, stiffness, fit = min(candidates, key=lambda c: (c[0], c[1]))
    return stiffness, fit


def _sign_changes(values: np.ndarray) -> int:
    signs = np.sign(values[values != 0.0])
    return int(np.count_nonzero(signs[1:] != signs[:-1]))


def _well_and_barrier_errors(stiffness: tuple[float, ...], well_m: float,
                             barrier_J: float | None) -> tuple[float, float]:
    """Signed relative errors of the polynomial's first well and its barrier (inf: no well)."""
    wells = [w for w in stable_equilibria(stiffness) if w > 0.0]
    if not wells:
        return math.inf, math.inf
    x_w = min(wells)
    barrier = -odd_potential(stiffness, x_w)
    return x_w / well_m - 1.0, (barrier / barrier_J - 1.0) if barrier_J else math.inf


# --- unequal wells: the exact force of an asymmetric geometry ---------------------------------
@dataclass(frozen=True)
class ExactWells:
    """Equilibria of an exact restoring force that need not be odd (SI).

    Bistable: `wells_m` (left, right) either side of `saddle_m`, `barriers_J` from each well;
    monostable: `wells_m` holds the rest position alone and `saddle_m` is None.
    """

    wells_m: tuple[float, ...]
    saddle_m: float | None
    barriers_J: tuple[float, ...]

    @property
    def bistable(self) -> bool:
        return self.saddle_m is not None


def exact_equilibria(force: Callable[[np.ndarray], np.ndarray],
                     reach: float) -> tuple[tuple[float, bool], ...]:
    """Equilibria x [m] of a restoring force F(x) [N] within ±reach, ascending, each with
    whether it is stable (F rising through zero).

    Sign changes of F on a grid geometric towards 0 from both sides (SCAN_POINTS per side,
    from 10⁻⁶ reach) and at 0 bracket the roots; Brent's method polishes each.

    References
    ----------
    Brent (1973), Algorithms for Minimization without Derivatives, Prentice-Hall, ch. 4
    (scipy.optimize.brentq).
    """
    side = np.geomspace(1e-6 * reach, reach, SCAN_POINTS)
    x = np.concatenate((-side[::-1], [0.0], side))
    f = force(x)
    found = []
    for i in np.nonzero(np.signbit(f[1:]) != np.signbit(f[:-1]))[0]:
        if f[i] == 0.0:
            root = float(x[i])
        else:
            root = float(brentq(lambda v: float(force(np.asarray(v))), x[i], x[i + 1],
                                xtol=1e-15, rtol=1e-12))
        found.append((root, bool(f[i + 1] > f[i])))
    return tuple(found)


def exact_wells(force: Callable[[np.ndarray], np.ndarray], reach: float) -> ExactWells:
    """Wells, saddle and barriers of an exact restoring force (`exact_equilibria`): the saddle
    is the unstable equilibrium flanked by stable ones nearest the undeflected beam, as in
    `harvester.model.analyse_wells`; monostable: the stable equilibrium nearest 0."""
    points = exact_equilibria(force, reach)
    flanked = [i for i in range(1, len(points) - 1)
               if not points[i][1] and points[i - 1][1] and points[i + 1][1]]
    if not flanked:
        stable = [x for x, up in points if up]
        if not stable:
            raise ValueError("no stable position within the reach")
        return ExactWells(wells_m=(min(stable, key=abs),), saddle_m=None, barriers_J=())
    i = min(flanked, key=lambda j: abs(points[j][0]))
    saddle = points[i][0]
    wells = (points[i - 1][0], points[i + 1][0])
    return ExactWells(wells_m=wells, saddle_m=saddle,
                      barriers_J=tuple(exact_barrier(force, w, saddle) for w in wells))


def asymmetric_table(window_m: float, exact: ExactWells,
                     points: int = REGION_POINTS) -> np.ndarray:
    """Ascending table over ±window for the fit of an asymmetric force: `points` inside twice
    each well's distance from the saddle and as many outside, on each side (the whole window
    evenly when monostable)."""
    if not exact.bistable:
        return np.linspace(-window_m, window_m, 4 * points + 1)
    s = exact.saddle_m
    left = max(s + INNER_SPAN_WELLS * (exact.wells_m[0] - s), -window_m)
    right = min(s + INNER_SPAN_WELLS * (exact.wells_m[1] - s), window_m)
    parts = [np.linspace(left, s, points + 1), np.linspace(s, right, points + 1)[1:]]
    if left > -window_m:
        parts.insert(0, np.linspace(-window_m, left, points + 1)[:-1])
    if right < window_m:
        parts.append(np.linspace(right, window_m, points + 1)[1:])
    return np.concatenate(parts)


def fit_polynomial(x: np.ndarray, force: np.ndarray, k0: float, k1: float,
                   exact: ExactWells) -> tuple[tuple[float, ...], ForceFit]:
    """Polynomial k0 + k1 x + k2 x² + … + k_n x^n (n odd) through the exact force table of an
    asymmetric geometry: `fit_odd_polynomial` with its even powers kept.

    k0 and k1 are given (the exact force and stiffness at x = 0).  For n = 3, 5, … up to
    2 MAX_FIT_TERMS − 1 the rest minimise the weighted discrete L² norm of the error with
    w = 1/max(|x − x_s|/(2 |x_w − x_s|), 1)², x_w the well on the same side of the saddle x_s,
    in powers of u = x/window.  The first n whose polynomial puts each well within
    WELL_TOLERANCE of the exact one (relative to its distance from the saddle) and each barrier
    within BARRIER_TOLERANCE, misses F by at most FORCE_TOLERANCE of max |F| within two wells
    of the saddle, and changes sign as often as F over the table is kept; else the one with
    the smallest worst ratio of error to tolerance (`meets_tolerances` False).  Monostable:
    uniform weights and the force criterion only.

    Parameters
    ----------
    x : table [m], ascending
    force : exact restoring force on the table [N]
    k0, k1 : force [N] and stiffness [N/m] at x = 0
    exact : the exact force's wells, saddle and barriers (`exact_wells`)

    Returns
    -------
    (the coefficients (k0, k1, k2, …) by ascending power, SI; the fit's `ForceFit`, whose
    well and barrier errors are those of the well that misses most)

    References
    ----------
    Björck (1996), Numerical Methods for Least Squares Problems, SIAM, §4.4 (weighted least
    squares; numpy.linalg.lstsq).
    """
    window = float(np.max(np.abs(x)))
    u = x / window
    spacing = np.gradient(x)
    if exact.bistable:
        s = exact.saddle_m
        reach = np.where(x < s, exact.wells_m[0] - s, exact.wells_m[1] - s)
        distance = np.abs(x - s) / (INNER_SPAN_WELLS * np.abs(reach))
        weight = 1.0 / np.maximum(distance, 1.0) ** 2
        inner = distance <= 1.0 + 1e-12
    else:
        weight = np.ones_like(x)
        inner = np.ones_like(x, dtype=bool)
    row = weight * np.sqrt(spacing)
    residual = force - k0 - k1 * x
    norm = float(np.max(np.abs(force))) or 1.0
    inner_norm = float(np.max(np.abs(force[inner]))) or 1.0
    crossings = _sign_changes(force)
    candidates = []
    for terms in range(MIN_FIT_TERMS, MAX_FIT_TERMS + 1):
        powers = range(2, 2 * terms)
        basis = np.stack([u**p for p in powers], axis=1)
        coef, *_ = np.linalg.lstsq(basis * row[:, None], residual * row, rcond=None)
        series = (float(k0), float(k1), *(float(c) / window**p for p, c in zip(powers, coef)))
        error = residual - basis @ coef
        inner_max = float(np.max(np.abs(error[inner]))) / inner_norm
        ratios = [inner_max / FORCE_TOLERANCE]
        well_error = barrier_error = None
        if exact.bistable:
            well_error, barrier_error = _asymmetric_errors(series, exact)
            ratios += [abs(well_error) / WELL_TOLERANCE, abs(barrier_error) / BARRIER_TOLERANCE]
        if _sign_changes(force - error) != crossings:
            ratios.append(math.inf)
        right = exact.wells_m[-1]
        fit = ForceFit(window_m=window, terms=terms,
                       rms_error=float(np.sqrt(np.mean(error**2))) / norm,
                       max_error=float(np.max(np.abs(error))) / norm, inner_max_error=inner_max,
                       well_error=well_error, barrier_error=barrier_error,
                       exact_well_m=right if exact.bistable else None,
                       exact_barrier_J=exact.barriers_J[-1] if exact.bistable else None,
                       meets_tolerances=max(ratios) <= 1.0, x_m=x, force_N=force,
                       exact_wells_m=exact.wells_m, exact_saddle_m=exact.saddle_m,
                       exact_barriers_J=exact.barriers_J)
        if fit.meets_tolerances:
            return series, fit
        candidates.append((max(ratios), terms, series, fit))
    _, _, series, fit = min(candidates, key=lambda c: (c[0], c[1]))
    return series, fit


def split_series(series: tuple[float, ...]) -> tuple[tuple[float, ...], tuple[float, ...]]:
    """(odd, even) coefficients of a series by ascending power: (k1, k3, …), (k0, k2, …)."""
    return tuple(series[1::2]), tuple(series[0::2])


def _asymmetric_errors(series: tuple[float, ...], exact: ExactWells) -> tuple[float, float]:
    """The signed relative errors of the polynomial's wells (against each exact well's
    distance from the saddle) and barriers, each the larger in size of the two wells' (inf
    when the polynomial has no double well)."""
    odd, even = split_series(series)
    wells = analyse_wells(ReducedModel(1.0, 0.0, odd, 1.0, even_stiffness=even))
    if wells.regime != "bistable":
        return math.inf, math.inf
    s = exact.saddle_m
    well_errors = [(fit - w) / abs(w - s) for fit, w in zip(wells.wells_m, exact.wells_m)]
    barrier_errors = [fit / b - 1.0 for fit, b in zip(wells.barriers_J, exact.barriers_J)]
    return max(well_errors, key=abs), max(barrier_errors, key=abs)


def bistability_margin(force: Callable[[np.ndarray], np.ndarray], reach: float) -> float:
    """How far a restoring force is from losing its double well [N]: min(F_max, −F_min) over
    the local maximum and minimum that bound its falling stretch nearest x = 0 (positive:
    bistable; the shallower well vanishes where it passes 0, a saddle-node); −|F| at the
    least slope when F never falls.

    The extrema are bracketed on the grid of `exact_equilibria` and polished by bounded
    Brent minimisation (scipy.optimize.minimize_scalar).
    """
    side = np.geomspace(1e-6 * reach, reach, SCAN_POINTS)
    x = np.concatenate((-side[::-1], [0.0], side))
    f = force(x)
    slope = np.diff(f)
    rising = slope > 0.0
    maxima = [i for i in range(1, x.size - 1) if rising[i - 1] and not rising[i]]
    minima = [i for i in range(1, x.size - 1) if not rising[i - 1] and rising[i]]
    if not maxima or not minima:
        i = int(np.argmin(slope / np.diff(x)))
        return -abs(float(f[i]))
    top = min(maxima, key=lambda i: abs(x[i]))
    bottom = min((i for i in minima if i > top), key=lambda i: abs(x[i]), default=None)
    if bottom is None:
        return -abs(float(f[top]))

    def extremum(i: int, sign: float) -> float:
        found = minimize_scalar(lambda v: sign * float(force(np.asarray(v))),
                                bounds=(x[i - 1], x[i + 1]), method="bounded",
                                options={"xatol": 1e-9 * max(abs(x[i]), 1e-9)})
        return sign * min(float(found.fun), sign * float(f[i]))

    return min(extremum(top, -1.0), -extremum(bottom, 1.0))


def asymmetric_critical_gap(force_at: Callable[[float], Callable[[np.ndarray], np.ndarray]],
                            reach: float, symmetric_gap_m: float) -> float:
    """Face-to-face gap [m] at which an asymmetric geometry's shallower well vanishes (the
    saddle-node where `bistability_margin` passes zero); 0 when it never has two wells.

    An offset magnet or gravity turns the straight beam's pitchfork into a saddle-node
    (an imperfect bifurcation), so the gap is bracketed by stepping from the symmetric pair's
    critical gap and found by Brent's method on the margin.

    Parameters
    ----------
    force_at : the exact restoring force at a gap, F(x; g) [N]
    reach : largest deflection considered [m]
    symmetric_gap_m : the critical gap of the same pair without the asymmetry [m]

    References
    ----------
    Golubitsky & Schaeffer (1985), *Singularities and Groups in Bifurcation Theory*, vol. 1,
    Springer, ch. 1 (the imperfect pitchfork; memory).
    """
    def margin(gap: float) -> float:
        return bistability_margin(force_at(gap), reach)

    if symmetric_gap_m <= 0.0:
        return 0.0
    high = symmetric_gap_m
    for _ in range(CRITICAL_SEARCH_STEPS):
        if margin(high) < 0.0:
            break
        high *= CRITICAL_SEARCH_FACTOR
    else:
        return high
    low = high
    for _ in range(CRITICAL_SEARCH_STEPS):
        low /= CRITICAL_SEARCH_FACTOR
        if margin(low) > 0.0:
            break
    else:
        return 0.0
    return float(brentq(margin, low, high, xtol=1e-9, rtol=1e-7))


def _magnet_kwargs(built_tip, built_fixed, gap_m, slope, model, foreshortening=0.0, offset=0.0):
    return dict(tip=built_tip, fixed=built_fixed, gap_m=gap_m,
                slope_per_deflection_per_m=slope, model=model,
                foreshortening_per_m=foreshortening, offset_m=offset)


def restoring_force(x, beam_stiffness, tip, fixed, gap_m, slope, magnet_model,
                    foreshortening_per_m=0.0, offset_m=0.0):
    """Total restoring force on the tip [N]: F = d/dx (½ k_b x² + U_mag(x)), the beam's k_b x
    minus the magnet force (repulsion), with the tip foreshortened by α x² (α [1/m]) and the
    fixed magnet's centre `offset_m` [m] off the beam's axis."""
    return beam_stiffness * x - mag.magnet_force(
        x, **_magnet_kwargs(tip, fixed, gap_m, slope, magnet_model, foreshortening_per_m,
                            offset_m))


def critical_gap(beam_stiffness: float, tip, fixed, slope: float,
                 magnet_model: str = "exact", foreshortening_per_m: float = 0.0) -> float:
    """Face-to-face gap [m] below which the straight beam loses stability.

    The rest position is unstable when k_b + d²U_mag/dx²(0) < 0 (a pitchfork); with the
    foreshortening α [1/m] the curvature includes the end load's softening −2αP.  The magnets'
    negative stiffness weakens as the gap opens, so the root is bracketed between a
    near-contact gap (10 µm) and a gap where the magnets are negligible; when even the
    near-contact stiffness cannot beat the beam the answer is 0 (never bistable).
    """
    def margin(gap: float) -> float:
        return beam_stiffness + mag.magnet_stiffness_at_rest(
            **_magnet_kwargs(tip, fixed, gap, slope, magnet_model, foreshortening_per_m))

    from scipy.optimize import brentq

    low, high = 1e-5, 1e-3
    while margin(high) < 0.0 and high < 2.0:
        high *= 2.0
    if margin(low) > 0.0:
        return 0.0  # the beam is stiffer than the magnets at any gap
    return float(brentq(margin, low, high, xtol=1e-9, rtol=1e-9))


def interface_of(case: Case) -> tuple[BridgeCircuit | None, bool]:
    """[circuit] as the model's interface: None for a resistor, else the bridge, and whether
    its store voltage (or a capacitor's load) is "matched".  A matched store holds a
    placeholder until the analysis finds it: 0 V, or no load."""
    circuit = case.circuit
    if not circuit.is_bridge:
        return None, False
    store = circuit.store
    if store.is_capacitor:
        kept = CapacitorStore(store.capacitance, math.inf if store.load is None else store.load,
                              store.initial)
    else:
        kept = VoltageStore(0.0 if store.voltage is None else store.voltage)
    return BridgeCircuit(circuit.diode_drop, kept), store.matched


def build(loaded: LoadedCase, gap_m: float | None = None, magnet_model: str = "exact", *,
          table_points: int = REGION_POINTS, with_critical_gap: bool = True) -> Built:
    """The reduced model of a case, at the case's gap or at `gap_m` [m], with its [circuit].

    `table_points` sets the density of the force table (`SPREAD_REGION_POINTS` for the many
    builds of a spread); without `with_critical_gap` the critical gap is not searched for
    (None), which saves its force evaluations.
    """
    built = _build(loaded, gap_m, magnet_model, table_points, with_critical_gap)
    interface, matched = interface_of(loaded.case)
    if interface is None:
        return built
    return replace(built, interface=interface, interface_matched=matched)


def _build(loaded: LoadedCase, gap_m: float | None, magnet_model: str, table_points: int,
           with_critical_gap: bool) -> Built:
    case = loaded.case
    temperature = case.environment.nominal_K
    if case.reduced is not None:
        model = _reduced_model(case)
        weight = -model.force_coefficients[0] if not model.is_symmetric else 0.0
        return Built(model=model, beam=None, beam_design=None, tip=None, fixed=None,
                     gap_m=None, fit=None, critical_gap_m=None, magnet_model=magnet_model,
                     gravity_force_N=weight, temperature_K=temperature)
    design = beam_design(case)
    props = beam_properties(design)
    buckling = euler_buckling_load(props.bending_stiffness_N_m2, design.length_m)
    k_beam = props.tip_stiffness_N_per_m
    m = props.effective_mass_kg
    damping = 2.0 * case.losses.damping_ratio * math.sqrt(k_beam * m)
    transducer, load = _transducer(case, props)
    tip = magnet_shape(case.tip_magnet, temperature)
    weight = props.forcing_mass_kg * case.mounting.gravity  # m_f G along +x
    travel = math.inf
    if case.limits.travel is not None:
        travel = tip_deflection_at_travel(case.limits.travel, tip,
                                          props.slope_per_deflection_per_m)
    fixed = magnet_shape(case.fixed_magnet, temperature) if case.fixed_magnet is not None \
        else None
    notes = temperature_notes(case)
    common = dict(mass_kg=m, damping_N_s_per_m=damping, forcing_mass_kg=props.forcing_mass_kg,
                  transducer=transducer, load_ohm=load, travel_limit_m=travel,
                  linear_stiffness_N_per_m=k_beam)
    situation = dict(gravity_force_N=weight, temperature_K=temperature)
    if fixed is None:
        model = ReducedModel(stiffness=(k_beam,), even_stiffness=(-weight,) if weight else (),
                             notes=notes, **common)
        return Built(model=model, beam=props, beam_design=design, tip=tip, fixed=None,
                     gap_m=None, fit=None, critical_gap_m=None, magnet_model=magnet_model,
                     axial_force_N=0.0, buckling_load_N=buckling, **situation)
    gap = case.fixed_magnet.gap if gap_m is None else gap_m
    if not gap > 0.0:
        raise CaseError(f"gap {gap * 1e3:g} mm: the magnets would touch or overlap; the gap is "
                        "face to face at rest and must be > 0", key="fixed_magnet.gap")
    offset = case.fixed_magnet.offset
    slope, alpha = props.slope_per_deflection_per_m, props.foreshortening_per_m
    pair = _magnet_kwargs(tip, fixed, gap, slope, magnet_model, alpha, offset)
    k1 = k_beam + mag.magnet_stiffness_at_rest(**pair)

    def force_at(gap_m: float) -> Callable[[np.ndarray], np.ndarray]:
        def force(x: np.ndarray) -> np.ndarray:
            return restoring_force(x, k_beam, tip, fixed, gap_m, slope, magnet_model, alpha,
                                   offset) - weight
        return force

    force = force_at(gap)
    reach = SMALL_DEFLECTION_REACH * design.length_m
    no_well = CaseError(f"at a gap of {gap * 1e3:g} mm the magnets push the tip beyond "
                        f"{reach * 1e3:.3g} mm (0.4 of the beam length) without a well: "
                        "widen the gap or stiffen the beam", key="fixed_magnet.gap")
    symmetric_gap = None
    if with_critical_gap:
        symmetric_gap = critical_gap(k_beam, tip, fixed, slope, magnet_model, alpha)
    if offset == 0.0 and weight == 0.0:
        well = barrier = None
        if k1 < 0.0:
            well = exact_well(force, reach)
            if well is None:
                raise no_well
            barrier = exact_barrier(force, well)
        window = fit_window(design.length_m, travel, well)
        x = fit_table(window, well, table_points)
        half = x[x.size // 2:]
        table = force(half)
        stiffness, fit = fit_odd_polynomial(x, np.concatenate((-table[:0:-1], table)), k1, well,
                                            barrier)
        even: tuple[float, ...] = ()
        critical = symmetric_gap
    else:
        try:
            exact = exact_wells(force, reach)
        except ValueError:
            raise no_well from None
        window = fit_window(design.length_m, travel, max(abs(w) for w in exact.wells_m))
        x = asymmetric_table(window, exact, table_points)
        k0 = float(force(np.zeros(1))[0])
        series, fit = fit_polynomial(x, force(x), k0, k1, exact)
        stiffness, even = split_series(series)
        critical = None
        if with_critical_gap:
            critical = asymmetric_critical_gap(force_at, reach, symmetric_gap)
    if window < travel:
        common["travel_limit_m"] = window
        notes += (f"travel limited to ±{window * 1e3:.3g} mm ({SMALL_DEFLECTION_REACH:g} of the "
                  "beam length, the reach of the small-deflection beam model and of the force "
                  "fit): trajectories beyond it are flagged as untrusted",)
    model = ReducedModel(stiffness=stiffness, even_stiffness=even, notes=notes, **common)
    return Built(model=model, beam=props, beam_design=design, tip=tip, fixed=fixed, gap_m=gap,
                 fit=fit, critical_gap_m=critical, magnet_model=magnet_model,
                 axial_force_N=float(mag.magnet_axial_load(0.0, **pair)),
                 buckling_load_N=buckling, offset_m=offset, **situation)


def temperature_notes(case: Case) -> tuple[str, ...]:
    """A warning for each magnet whose highest service temperature ([environment]) exceeds
    its material's maximum operating temperature: there the remanence falls irreversibly, and
    B_r(T) of `remanence_at` (a reversible change) no longer holds."""
    hottest = case.environment.highest_K
    notes = []
    for section in ("tip_magnet", "fixed_magnet"):
        spec = getattr(case, section)
        if spec is None:
            continue
        material = find_material(spec.material, "magnet")
        limit = material.values.get("max_operating_temperature")
        if limit is not None and hottest > limit:
            notes.append(f"the {section.replace('_', ' ')} ({material.name}) would run at "
                         f"{hottest - 273.15:.3g} °C, above its maximum operating temperature "
                         f"of {limit - 273.15:.3g} °C: it loses remanence irreversibly; choose "
                         "a grade rated for the temperature")
    return tuple(notes)


def tip_deflection_at_travel(travel_m: float, tip: mag.Magnet, slope: float) -> float:
    """Tip deflection x [m] at which the tip magnet's outer corner has moved `travel_m`
    ([limits].travel: the room between its outer face at rest and the stop).

    The corner moves x + a sin ψ + h(cos ψ − 1) with ψ = s·x (`magnets.tip_body_travel`),
    more than x itself while the magnet turns with the beam, so the dynamics stop the tip a
    little short of the travel.
    """
    from scipy.optimize import brentq

    def beyond(x: float) -> float:
        return float(mag.tip_body_travel(x, tip, slope)) - travel_m

    if beyond(travel_m) <= 0.0:  # (a corner that lags the tip: not for a slim magnet)
        return travel_m
    return float(brentq(beyond, 0.0, travel_m, xtol=1e-12, rtol=1e-10))


def fit_window(length_m: float, travel_m: float, well_m: float | None) -> float:
    """Half-width of the force fit [m]: the range the motion may use.

    That is the travel limit, capped at SMALL_DEFLECTION_REACH × L (all of that reach when the
    travel is unlimited).  When the well itself lies beyond the travel (the beam rests on its
    stop) the window still reaches two wells, within the cap, so that the reported wells and
    barrier remain those of the force.
    """
    reach = SMALL_DEFLECTION_REACH * length_m
    window = min(travel_m, reach)
    if well_m is not None and well_m >= window:
        window = min(INNER_SPAN_WELLS * well_m, reach)
    return window


def _transducer(case: Case, props: BeamProperties):
    load = case.load.resistance if case.load.resistance is not None else math.inf
    if case.beam.piezo is not None:
        return PiezoCircuit(coupling_N_per_V=props.coupling_N_per_V,
                            capacitance_F=props.capacitance_F), load
    if case.beam.coil is not None:
        coil = case.beam.coil
        return CoilCircuit(flux_linkage_V_s_per_m=coil.flux_linkage,
                           resistance_ohm=coil.resistance, inductance_H=coil.inductance), load
    return None, load


def _reduced_model(case: Case) -> ReducedModel:
    r = case.reduced
    transducer = None
    if r.piezo is not None:
        transducer = PiezoCircuit(coupling_N_per_V=r.piezo.coupling,
                                  capacitance_F=r.piezo.capacitance)
    elif r.coil is not None:
        transducer = CoilCircuit(flux_linkage_V_s_per_m=r.coil.flux_linkage,
                                 resistance_ohm=r.coil.resistance,
                                 inductance_H=r.coil.inductance)
    forcing_mass = r.forcing_mass if r.forcing_mass is not None else r.mass
    even = r.even_stiffness
    if case.mounting.gravity:  # the weight m_f G along +x: a constant force k0 = −m_f G
        even = even or (0.0,)
        even = (even[0] - forcing_mass * case.mounting.gravity, *even[1:])
    return ReducedModel(
        mass_kg=r.mass,
        damping_N_s_per_m=r.damping,
        stiffness=r.odd_stiffness,
        even_stiffness=even,
        forcing_mass_kg=forcing_mass,
        transducer=transducer,
        load_ohm=case.load.resistance if case.load.resistance is not None else math.inf,
        travel_limit_m=case.limits.travel if case.limits.travel is not None else math.inf,
        linear_stiffness_N_per_m=r.linear_stiffness,
    )
