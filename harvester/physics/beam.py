"""Composite piezoelectric cantilever with a tip mass: section, exact first mode, coupling.

The beam is clamped at x = 0 and carries a rigid tip body (the magnet and its mount: mass M_t,
rotary inertia I_c about its own centre of mass, which sits a distance e beyond the tip along
the axis) fixed to the beam at x = L.  The body's centre moves w(L) + e w'(L), so the offset
couples tip translation and rotation.  Everything here is reduced to the tip deflection: the
mode is scaled to φ(L) = 1, so modal mass, stiffness, forcing mass and coupling are the
coefficients of the single-degree-of-freedom model in the tip coordinate that
`harvester.model.ReducedModel` holds.

Layer heights z are measured from the substrate's bottom face; a unimorph carries its ceramic
on top (h_s ≤ z ≤ h_s + h_p), a symmetric bimorph one ceramic on each face.

References
----------
Erturk & Inman (2011), *Piezoelectric Energy Harvesting*, Wiley (ch. 3–4, App. C and E).
Erturk & Inman (2009), Smart Mater. Struct. 18:025009 (bimorph coupling and capacitance).
Blevins (1979), *Formulas for Natural Frequency and Mode Shape*, Van Nostrand (table 8-1).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

# Unity-normalised Krylov–Duncan functions K_j(x) = Σ_k x^(4k+j)/(4k+j)!, summed as series:
# every term is positive, so small-argument values (heavy tips, λ → 0) keep full precision
# where cosh x − cos x and friends would cancel.  Twelve terms reach 1e-17 for x ≤ 6.
_SERIES_TERMS = 12
_INVERSE_FACTORIALS = tuple(1.0 / math.factorial(n) for n in range(4 * _SERIES_TERMS + 4))

# Gauss–Legendre rule on [0, 1]; the mode is entire and λ1 < 1.9, so 20 nodes are exact to
# rounding for ∫ψ and ∫ψ².
_NODES, _WEIGHTS = np.polynomial.legendre.leggauss(20)
_XI = 0.5 * (_NODES + 1.0)
_W = 0.5 * _WEIGHTS

# λ1 of the bare clamped-free beam bounds the first root from above for any tip load.
_BARE_CANTILEVER_BOUND = 1.9


@dataclass(frozen=True)
class BeamDesign:
    """Geometry and materials of the cantilever, SI units."""

    length_m: float  # clamp to the tip magnet's inner face
    width_m: float
    substrate_thickness_m: float
    substrate_modulus_Pa: float
    substrate_density_kg_m3: float
    piezo_layers: int = 0  # 0 (coil or bare beam), 1 (unimorph, piezo on top), 2 (bimorph)
    piezo_thickness_m: float = 0.0  # each layer
    piezo_modulus_Pa: float = 0.0  # plane-stress c̄11 = 1/s11E
    piezo_density_kg_m3: float = 0.0
    piezo_e31_C_per_m2: float = 0.0  # ē31 = d31/s11E (negative for PZT)
    piezo_permittivity_F_per_m: float = 0.0  # ε̄33S = ε33T − d31²/s11E
    piezo_wiring: str = "series"  # "series" | "parallel" (bimorph only)
    tip_mass_kg: float = 0.0  # the rigid tip body (magnet, mount, glue)
    tip_rotary_inertia_kg_m2: float = 0.0  # tip body about its own centre of mass, across width
    tip_mass_offset_m: float = 0.0  # tip body's centre of mass beyond the tip, along the axis

    def __post_init__(self) -> None:
        for name in (
            "length_m",
            "width_m",
            "substrate_thickness_m",
            "substrate_modulus_Pa",
            "substrate_density_kg_m3",
        ):
            if not getattr(self, name) > 0.0:
                raise ValueError(f"BeamDesign.{name} must be positive, got {getattr(self, name)}")
        if self.piezo_layers not in (0, 1, 2):
            raise ValueError(f"BeamDesign.piezo_layers must be 0, 1 or 2, got {self.piezo_layers}")
        if self.piezo_layers:
            for name in (
                "piezo_thickness_m",
                "piezo_modulus_Pa",
                "piezo_density_kg_m3",
                "piezo_permittivity_F_per_m",
            ):
                if not getattr(self, name) > 0.0:
                    raise ValueError(
                        f"BeamDesign.{name} must be positive with piezo layers, "
                        f"got {getattr(self, name)}"
                    )
        if self.piezo_wiring not in ("series", "parallel"):
            raise ValueError(
                f"BeamDesign.piezo_wiring must be 'series' or 'parallel', got {self.piezo_wiring!r}"
            )
        if self.tip_mass_kg < 0.0 or self.tip_rotary_inertia_kg_m2 < 0.0:
            raise ValueError("BeamDesign tip mass and rotary inertia must not be negative")
        if not (math.isfinite(self.tip_mass_offset_m) and self.tip_mass_offset_m >= 0.0):
            raise ValueError(
                "BeamDesign.tip_mass_offset_m must be finite and ≥ 0 (centre of the tip body "
                f"beyond the tip), got {self.tip_mass_offset_m}"
            )


@dataclass(frozen=True)
class Layer:
    """One layer of the cross-section."""

    name: str  # "substrate" | "piezo"
    bottom_m: float  # z of the lower face, from the substrate's bottom face
    top_m: float  # z of the upper face
    modulus_Pa: float
    density_kg_m3: float


@dataclass(frozen=True)
class BeamProperties:
    """Derived properties of the beam, reduced to the tip deflection."""

    bending_stiffness_N_m2: float  # EI of the composite section
    mass_per_length_kg_per_m: float
    neutral_axis_m: float  # from the substrate's bottom face
    tip_mass_ratio: float  # R = M_t/(mL)
    rotary_inertia_ratio: float  # J = I_c/(mL³), tip body about its own centre of mass
    tip_mass_offset_ratio: float  # ε = e/L, tip body's centre beyond the tip
    eigenvalue: float  # λ1 of the exact first mode with the rigid tip body
    short_circuit_frequency_Hz: float
    open_circuit_frequency_Hz: float  # equals short-circuit when there is no piezo
    effective_mass_kg: float  # modal mass with the mode scaled to φ(L) = 1 (tip coordinate)
    tip_stiffness_N_per_m: float  # modal stiffness, same scaling (= ω_sc² · effective mass)
    forcing_mass_kg: float  # m∫φ dx + M_t (φ(L) + eφ'(L)), φ(L) = 1; base accel gives −m_f a
    static_stiffness_N_per_m: float  # 3EI/L³
    slope_per_deflection_per_m: float  # φ'(L)/φ(L) of the exact mode [1/m]
    root_curvature_per_deflection_per_m2: float  # φ''(0)/φ(L) [1/m²]
    coupling_N_per_V: float  # θ in the tip coordinate (0 without piezo)
    capacitance_F: float  # C_p seen by the load (0 without piezo)
    foreshortening_per_m: float  # α = ½∫₀ᴸ ψ'² dx: the tip moves α x² towards the clamp [1/m]


# -- cross-section -------------------------------------------------------------------------


def section_layers(design: BeamDesign) -> tuple[Layer, ...]:
    """Layers of the cross-section, bottom to top, with heights from the substrate's bottom face.

    Unimorph: substrate 0…h_s, ceramic h_s…h_s + h_p.  Bimorph: ceramic −h_p…0, substrate
    0…h_s, ceramic h_s…h_s + h_p.  Bare or coil beam: substrate only.

    Parameters
    ----------
    design : the beam [SI]

    Returns
    -------
    tuple of `Layer`, ordered by height
    """
    h_s, h_p = design.substrate_thickness_m, design.piezo_thickness_m
    substrate = Layer(
        "substrate", 0.0, h_s, design.substrate_modulus_Pa, design.substrate_density_kg_m3
    )
    top = Layer("piezo", h_s, h_s + h_p, design.piezo_modulus_Pa, design.piezo_density_kg_m3)
    bottom = Layer("piezo", -h_p, 0.0, design.piezo_modulus_Pa, design.piezo_density_kg_m3)
    if design.piezo_layers == 0:
        return (substrate,)
    if design.piezo_layers == 1:
        return (substrate, top)
    return (bottom, substrate, top)


def composite_section(design: BeamDesign) -> tuple[float, float, float]:
    """Bending stiffness, mass per length and neutral axis of the layered section.

        z_n = Σ E_i h_i z_c,i / Σ E_i h_i
        EI  = (b/3) Σ E_i [(z_top,i − z_n)³ − (z_bot,i − z_n)³]
        m   = b Σ ρ_i h_i

    (transformed-section method; perfect bonding, plane sections, plane-stress moduli for the
    ceramic).

    Parameters
    ----------
    design : the beam [SI]

    Returns
    -------
    (EI [N·m²], m [kg/m], z_n [m] from the substrate's bottom face)

    References
    ----------
    Erturk & Inman (2011), *Piezoelectric Energy Harvesting*, Wiley, ch. 4 and App. C.

    Examples
    --------
    >>> ei, m, zn = composite_section(BeamDesign(0.1, 0.01, 0.001, 200e9, 7800.0))
    >>> round(ei / (200e9 * 0.01 * 0.001**3 / 12), 12), round(zn * 1e3, 12)
    (1.0, 0.5)
    """
    layers = section_layers(design)
    b = design.width_m
    axial = sum(lay.modulus_Pa * (lay.top_m - lay.bottom_m) for lay in layers)
    first_moment = sum(
        lay.modulus_Pa * (lay.top_m - lay.bottom_m) * 0.5 * (lay.top_m + lay.bottom_m)
        for lay in layers
    )
    z_n = first_moment / axial
    ei = (b / 3.0) * sum(
        lay.modulus_Pa * ((lay.top_m - z_n) ** 3 - (lay.bottom_m - z_n) ** 3) for lay in layers
    )
    m = b * sum(lay.density_kg_m3 * (lay.top_m - lay.bottom_m) for lay in layers)
    return ei, m, z_n


# -- exact first mode ----------------------------------------------------------------------


def _krylov(x):
    """(K0 − 1, K1, K2, K3) with K_j(x) = Σ_k x^(4k+j)/(4k+j)!; floats or arrays.

    K0 = (cosh x + cos x)/2, K1 = (sinh x + sin x)/2, K2 = (cosh x − cos x)/2,
    K3 = (sinh x − sin x)/2.  K0 − 1 is returned so that 1 − K0² keeps its precision.
    """
    y = x * x * x * x
    f = _INVERSE_FACTORIALS
    series = []
    for j in (4, 1, 2, 3):
        total = 0.0 * x
        for k in range(_SERIES_TERMS - 1, -1, -1):
            total = total * y + f[4 * k + j]
        series.append(total)
    k0_minus_1 = y * series[0]
    return k0_minus_1, x * series[1], x * x * series[2], x * x * x * series[3]


def frequency_equation(
    eigenvalue,
    tip_mass_ratio: float,
    rotary_inertia_ratio: float = 0.0,
    offset_ratio: float = 0.0,
):
    """Characteristic function of a clamped cantilever carrying a rigid tip body.

        Δ(λ) = 1 + cos λ cosh λ + λR (cos λ sinh λ − sin λ cosh λ)
               − λ³(J + Rε²) (cosh λ sin λ + sinh λ cos λ) + λ⁴RJ (1 − cos λ cosh λ)
               − 2λ²Rε sin λ sinh λ

    from the tip conditions of a body of mass M_t whose centre lies e = εL beyond the tip,
    with rotary inertia I_c about that centre:
        EI w'''(L) = −ω² M_t [w(L) + e w'(L)]
        EI w''(L)  =  ω² [(I_c + M_t e²) w'(L) + M_t e w(L)].
    The tip mass matrix [[R, Rε], [Rε, J + Rε²]] enters through its diagonal, its determinant
    RJ and its off-diagonal Rε; for ε = 0 this is the classical tip-mass-and-inertia equation.
    Its roots λ_n give ω_n = λ_n² sqrt(EI/(mL⁴)).  Evaluated through Krylov–Duncan series
    (1 + cos cosh = 1 + K0² − K2², sin sinh = K1² − K3², etc.) so that it stays accurate for
    small λ.

    Parameters
    ----------
    eigenvalue : λ [-], float or array, 0 ≤ λ ≲ 6
    tip_mass_ratio : R = M_t/(mL) [-]
    rotary_inertia_ratio : J = I_c/(mL³), about the tip body's own centre of mass [-]
    offset_ratio : ε = e/L, the body's centre beyond the tip [-]

    References
    ----------
    Erturk & Inman (2011), *Piezoelectric Energy Harvesting*, Wiley, ch. 3 (ε = 0).
    Meirovitch (1967), *Analytical Methods in Vibrations*, Macmillan (boundary
    conditions from Hamilton's principle, here with the tip body's kinetic energy
    ½M_t(ẇ + eẇ')² + ½I_c ẇ'² at x = L).

    Examples
    --------
    >>> abs(frequency_equation(1.8751040687, 0.0)) < 1e-9
    True
    """
    lam = eigenvalue
    k0m1, k1, k2, k3 = _krylov(lam)
    k0 = k0m1 + 1.0
    one_plus_cc = 1.0 + k0 * k0 - k2 * k2
    one_minus_cc = k2 * k2 - k0m1 * (k0 + 1.0)
    c_sh_minus_s_ch = 2.0 * (k0 * k3 - k1 * k2)
    sh_c_plus_s_ch = 2.0 * (k0 * k1 - k2 * k3)
    s_sh = k1 * k1 - k3 * k3
    r, j, eps = tip_mass_ratio, rotary_inertia_ratio, offset_ratio
    lam2 = lam * lam
    lam3 = lam2 * lam
    return (
        one_plus_cc
        + lam * r * c_sh_minus_s_ch
        - lam3 * (j + r * eps * eps) * sh_c_plus_s_ch
        + lam3 * lam * r * j * one_minus_cc
        - 2.0 * lam2 * r * eps * s_sh
    )


def first_mode_eigenvalue(
    tip_mass_ratio: float, rotary_inertia_ratio: float = 0.0, offset_ratio: float = 0.0
) -> float:
    """λ1, the first root of the frequency equation of a cantilever carrying a rigid tip body.

    ω1 = λ1² sqrt(EI/(mL⁴)).  Tip loads only lower frequencies, so λ1 ≤ 1.87510407 (bare beam);
    for a heavy tip without rotary inertia or offset λ1⁴ → 3/(R + 33/140) (the static-stiffness
    limit).  The root is bracketed by a geometric scan below 1.9 that starts where Δ is still
    near its λ → 0 value of 2, then polished with Brent's method.

    Parameters
    ----------
    tip_mass_ratio : R = M_t/(mL) [-], ≥ 0
    rotary_inertia_ratio : J = I_c/(mL³), tip body about its own centre of mass [-], ≥ 0
    offset_ratio : ε = e/L, the tip body's centre beyond the tip [-], ≥ 0

    Returns
    -------
    λ1 [-]

    References
    ----------
    Blevins (1979), *Formulas for Natural Frequency and Mode Shape*, table 8-1 (R = 0: 1.87510407).
    Erturk & Inman (2011), *Piezoelectric Energy Harvesting*, Wiley, ch. 3.

    Examples
    --------
    >>> round(first_mode_eigenvalue(0.0), 8)
    1.87510407
    >>> round(first_mode_eigenvalue(1.0) ** 2, 6)  # R = 1: Math. Probl. Eng. 2017, 1568019
    1.557298
    """
    r, j, eps = float(tip_mass_ratio), float(rotary_inertia_ratio), float(offset_ratio)
    if not all(v >= 0.0 and math.isfinite(v) for v in (r, j, eps)):
        raise ValueError(
            "tip mass, rotary inertia and offset ratios must be finite and ≥ 0, "
            f"got {r}, {j}, {eps}"
        )
    # Near λ = 0, Δ ≈ 2 − 2λ⁴(R/3 + Rε + J + Rε²) (twice the Dunkerley sum of the tip body on
    # the massless beam): start an order of magnitude below the first root.
    lower = 0.2 * (1.0 + r + 3.0 * (j + r * eps * (1.0 + eps))) ** -0.25
    grid = np.geomspace(lower, _BARE_CANTILEVER_BOUND, 256)
    values = frequency_equation(grid, r, j, eps)
    crossings = np.flatnonzero(np.signbit(values[1:]) != np.signbit(values[:-1]))
    if values[0] <= 0.0 or crossings.size == 0:
        raise ArithmeticError(f"no first root bracketed for R = {r}, J = {j}, ε = {eps}")
    i = crossings[0]
    return brentq(
        frequency_equation, grid[i], grid[i + 1], args=(r, j, eps), xtol=1e-15, rtol=1e-15
    )


def mode_shape(
    xi, eigenvalue: float, tip_mass_ratio: float, derivative: int = 0, offset_ratio: float = 0.0
):
    """Exact mode ψ(ξ) with a rigid tip body, scaled to ψ(1) = 1, or one of its derivatives.

        φ(ξ) = cosh λξ − cos λξ − s (sinh λξ − sin λξ),
        s = [sinh λ − sin λ + λR (cosh λ − cos λ + ελ (sinh λ + sin λ))]
            / [cosh λ + cos λ + λR (sinh λ − sin λ + ελ (cosh λ − cos λ))]

    (s from the shear condition ψ'''(1) = −λ⁴R [ψ(1) + εψ'(1)] at the tip), ψ = φ/φ(1).
    The rotary inertia enters only through λ.  Derivatives are with respect to ξ = x/L; divide
    by L^n for d^n/dx^n.

    Parameters
    ----------
    xi : ξ = x/L [-], float or array in [0, 1]
    eigenvalue : λ, a root of `frequency_equation` [-]
    tip_mass_ratio : R = M_t/(mL) [-]
    derivative : 0, 1, 2 or 3
    offset_ratio : ε = e/L, the tip body's centre beyond the tip [-], ≥ 0

    References
    ----------
    Erturk & Inman (2011), *Piezoelectric Energy Harvesting*, Wiley, ch. 3.

    Examples
    --------
    >>> lam = first_mode_eigenvalue(0.0)
    >>> round(float(mode_shape(0.0, lam, 0.0, derivative=2)), 4)   # λ1² = 3.5160
    3.516
    """
    if derivative not in (0, 1, 2, 3):
        raise ValueError(f"derivative must be 0, 1, 2 or 3, got {derivative}")
    lam, r, eps = eigenvalue, tip_mass_ratio, offset_ratio
    k0m1, k1, k2, k3 = _krylov(lam)
    # With ε ≥ 0 every term of the denominator is positive (K_j > 0), so it never vanishes.
    s = (k3 + lam * r * (k2 + eps * lam * k1)) / (k0m1 + 1.0 + lam * r * (k3 + eps * lam * k2))
    tip = k2 - s * k3
    k0m1x, k1x, k2x, k3x = _krylov(lam * np.asarray(xi, dtype=float))
    k0x = k0m1x + 1.0
    # dK_j/dx = K_(j−1), K_(−1) = K3: each derivative rotates the pair and brings out a λ.
    pairs = ((k2x, k3x), (k1x, k2x), (k0x, k1x), (k3x, k0x))
    a, b = pairs[derivative]
    return lam**derivative * (a - s * b) / tip


def foreshortening_coefficient(
    eigenvalue: float, tip_mass_ratio: float, length_m: float, offset_ratio: float = 0.0
) -> float:
    """How far the tip of an inextensible cantilever moves towards the clamp as it deflects:
    α in u(L) = α x²  [1/m].

        α = ½ ∫₀ᴸ φ'(s)² ds = (1/2L) ∫₀¹ ψ'(ξ)² dξ,   ψ the mode scaled to ψ(1) = 1

    (second-order arc-length constraint of an inextensible beam).  An axial end load P does
    the work P α x² through it, so in the tip coordinate the straight beam softens by 2αP.
    For the static end-load shape ψ = (3ξ² − ξ³)/2, α = 3/(5L); for the bare beam's first
    mode α = 0.5810/L; heavy tips take the mode towards the static shape.

    Parameters
    ----------
    eigenvalue : λ1 of the mode (`first_mode_eigenvalue`) [-]
    tip_mass_ratio : R = M_t/(mL) [-]
    length_m : L [m]
    offset_ratio : ε = e/L, the tip body's centre beyond the tip [-]

    References
    ----------
    Timoshenko & Gere (1961), *Theory of Elastic Stability*, 2nd ed., McGraw-Hill, ch. 2,
    energy method (the load's work through the shortening ½∫ y'² dx; memory).

    Examples
    --------
    >>> round(foreshortening_coefficient(first_mode_eigenvalue(0.0), 0.0, 1.0), 4)
    0.581
    """
    slope = mode_shape(_XI, eigenvalue, tip_mass_ratio, derivative=1, offset_ratio=offset_ratio)
    return 0.5 * float(_W @ (slope * slope)) / length_m


def euler_buckling_load(bending_stiffness_N_m2: float, length_m: float) -> float:
    """Buckling load of a cantilever under an axial end load (Euler's case 1):
    P_cr = π² EI/(4L²)  [N].

    Parameters
    ----------
    bending_stiffness_N_m2 : EI [N·m²]
    length_m : L, clamp to the loaded end [m]

    References
    ----------
    Timoshenko & Gere (1961), *Theory of Elastic Stability*, 2nd ed., McGraw-Hill, §2.1
    (column built in at the base and free at the top; section number from memory).

    Examples
    --------
    >>> round(euler_buckling_load(4.0, 1.0) / math.pi**2, 12)
    1.0
    """
    return math.pi**2 * bending_stiffness_N_m2 / (4.0 * length_m**2)


def single_mode_buckling_load(stiffness_N_per_m: float, foreshortening_per_m: float) -> float:
    """Axial end load at which one assumed deflection shape loses its stiffness:
    P = k/(2α)  [N] (Rayleigh–Ritz, an upper bound on the buckling load).

    k = ∫EI ψ''² dx is the shape's stiffness and 2αP the softening the load brings
    (`foreshortening_coefficient`).  The static end-load shape (k = 3EI/L³, α = 3/(5L)) gives
    2.5 EI/L², 1.3 % above π²EI/(4L²); the bare beam's first vibration mode 7.8 % above, and a
    tip mass brings the mode towards the static shape (2.1 % at R = 1).

    Parameters
    ----------
    stiffness_N_per_m : k of the shape in the tip coordinate [N/m]
    foreshortening_per_m : α of the same shape [1/m]

    References
    ----------
    Timoshenko & Gere (1961), *Theory of Elastic Stability*, 2nd ed., McGraw-Hill, ch. 2,
    energy method (the cantilever column with the end-load curve: 2.5 EI/L²; memory).

    Examples
    --------
    >>> round(single_mode_buckling_load(3.0, 0.6), 12)  # EI = L = 1, static shape
    2.5
    """
    return stiffness_N_per_m / (2.0 * foreshortening_per_m)


# -- properties ----------------------------------------------------------------------------


def beam_properties(design: BeamDesign) -> BeamProperties:
    """Exact-first-mode properties of the beam in the tip coordinate (ψ(L) = 1).

        ω_sc = λ1² sqrt(EI/(mL⁴))
        M    = mL ∫ψ² dξ + M_t (1 + e ψ'(1)/L)² + I_c (ψ'(1)/L)²    (modal mass)
        k    = ω_sc² M                                              (modal stiffness)
        m_f  = mL ∫ψ dξ + M_t (1 + e ψ'(1)/L)        (base acceleration enters as −m_f a)
        θ    = ϑ ψ'(1)/L,  ϑ = ē31 b h_pc · (1 unimorph/series, 2 parallel)
        C_p  = ε̄33S b L/h_p · (1 unimorph, ½ series, 2 parallel)
        ω_oc² = ω_sc² + θ²/(C_p M)
        α    = ½∫₀ᴸ ψ'² dx                          (foreshortening, u(L) = α x²)

    The tip body (mass M_t, rotary inertia I_c about its own centre, centre e beyond the tip)
    moves rigidly with the beam end: its centre by 1 + e ψ'(1)/L per unit tip deflection.
    h_pc is the distance from the neutral axis to the middle of a ceramic layer; the electrode
    covers the full length.  θ is returned as a magnitude: its sign only fixes which electrode
    is called positive.

    Parameters
    ----------
    design : the beam [SI]

    Returns
    -------
    BeamProperties

    References
    ----------
    Erturk & Inman (2009), Smart Mater. Struct. 18:025009 (coupling, C_p, ω_oc).
    Erturk & Inman (2008), J. Intell. Mater. Syst. Struct. 19:1311 (forcing term).
    """
    ei, m, z_n = composite_section(design)
    length = design.length_m
    beam_mass = m * length
    r = design.tip_mass_kg / beam_mass
    j = design.tip_rotary_inertia_kg_m2 / (beam_mass * length**2)
    eps = design.tip_mass_offset_m / length
    lam = first_mode_eigenvalue(r, j, eps)

    psi = mode_shape(_XI, lam, r, offset_ratio=eps)
    slope = float(mode_shape(1.0, lam, r, derivative=1, offset_ratio=eps)) / length
    root_curvature = float(mode_shape(0.0, lam, r, derivative=2, offset_ratio=eps)) / length**2
    body_centre = 1.0 + design.tip_mass_offset_m * slope  # per unit tip deflection
    effective_mass = (
        beam_mass * float(_W @ (psi * psi))
        + design.tip_mass_kg * body_centre**2
        + design.tip_rotary_inertia_kg_m2 * slope**2
    )
    forcing_mass = beam_mass * float(_W @ psi) + design.tip_mass_kg * body_centre
    omega_sc = lam * lam * math.sqrt(ei / (m * length**4))

    alpha = foreshortening_coefficient(lam, r, length, offset_ratio=eps)
    coupling, capacitance = _piezo_coupling(design, z_n)
    theta = abs(coupling * slope)
    omega_oc = omega_sc
    if capacitance > 0.0:
        omega_oc = math.sqrt(omega_sc**2 + theta**2 / (capacitance * effective_mass))

    return BeamProperties(
        bending_stiffness_N_m2=ei,
        mass_per_length_kg_per_m=m,
        neutral_axis_m=z_n,
        tip_mass_ratio=r,
        rotary_inertia_ratio=j,
        tip_mass_offset_ratio=eps,
        eigenvalue=lam,
        short_circuit_frequency_Hz=omega_sc / (2.0 * math.pi),
        open_circuit_frequency_Hz=omega_oc / (2.0 * math.pi),
        effective_mass_kg=effective_mass,
        tip_stiffness_N_per_m=omega_sc**2 * effective_mass,
        forcing_mass_kg=forcing_mass,
        static_stiffness_N_per_m=3.0 * ei / length**3,
        slope_per_deflection_per_m=slope,
        root_curvature_per_deflection_per_m2=root_curvature,
        coupling_N_per_V=theta,
        capacitance_F=capacitance,
        foreshortening_per_m=alpha,
    )


def _piezo_coupling(design: BeamDesign, neutral_axis_m: float) -> tuple[float, float]:
    """(ϑ [N·m/V], C_p [F]) of a full-length electrode; (0, 0) without ceramic."""
    if design.piezo_layers == 0:
        return 0.0, 0.0
    h_s, h_p, b = design.substrate_thickness_m, design.piezo_thickness_m, design.width_m
    lever = h_s + 0.5 * h_p - neutral_axis_m  # neutral axis to the top ceramic's mid-plane
    single_layer_capacitance = design.piezo_permittivity_F_per_m * b * design.length_m / h_p
    if design.piezo_layers == 1:
        scale_coupling, scale_capacitance = 1.0, 1.0
    elif design.piezo_wiring == "series":
        scale_coupling, scale_capacitance = 1.0, 0.5
    else:
        scale_coupling, scale_capacitance = 2.0, 2.0
    coupling = scale_coupling * design.piezo_e31_C_per_m2 * b * lever
    return coupling, scale_capacitance * single_layer_capacitance


def rayleigh_lumped(design: BeamDesign) -> tuple[float, float]:
    """Lumped tip stiffness and mass from Rayleigh's method with the static deflection shape.

        k = 3EI/L³,   m_eff = M_t + (33/140) mL

    For a bare beam (R = 0) this overestimates the first frequency by 1.47 %; the error
    vanishes as the tip mass dominates.  Rotary inertia and the offset of the tip body's
    centre are not included.

    Parameters
    ----------
    design : the beam [SI]

    Returns
    -------
    (k [N/m], m_eff [kg])

    References
    ----------
    Lobontiu (2005), *Mechanical Design of Microresonators*, McGraw-Hill, eqs 3.150–3.152.
    """
    ei, m, _ = composite_section(design)
    length = design.length_m
    return 3.0 * ei / length**3, design.tip_mass_kg + 33.0 / 140.0 * m * length
