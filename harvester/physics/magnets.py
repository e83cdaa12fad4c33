"""Force and energy between the tip magnet and the fixed magnet (a repelling pair).

Geometry (other modules rely on it).  The beam runs along +e1 from the clamp; the tip deflects
along e3 by x; e2 is across the width.  The tip rotates with the beam slope by ψ = s·x, with
s = φ'(L)/φ(L) given by the caller.  The beam is inextensible, so as the tip deflects it also
moves towards the clamp by α x², α = ½∫₀ᴸ φ'² dx for the mode scaled to φ(L) = 1, also given
by the caller (α = 0 leaves the foreshortening out).  Coordinates here are centred on the beam
tip at rest:

- tip magnet: inner face on the beam tip (−α x², 0, x); body axes t̂ = (cos ψ, 0, sin ψ)
  (axial), e2 (width), n̂ = (−sin ψ, 0, cos ψ) (deflection); centre half its axial length
  along t̂; magnetised along +t̂.
- fixed magnet: face-to-face gap g to the tip magnet at rest, magnetised along −e1, so like
  poles face each other; its centre sits on the e1 axis, or an offset e off it along e3 (a
  magnet mounted off the beam's axis, along the deflection).

The repulsion pushes the tip magnet towards the clamp with a force P (`magnet_axial_load`),
an end load that compresses the beam.  Evaluating the energy at the foreshortened position
puts its work P·α x² into U(x), and with it the geometric softening −2αP of the straight beam
(the single-mode form of the beam-column's geometric stiffness).

Both magnets are mirror-symmetric in e3 ↦ −e3 together with x ↦ −x, so without an offset the
energy is even and the force odd in x; the functions below then evaluate at |x| and restore
the sign, so this holds to the last bit.  An offset e breaks the symmetry (the mirror image of
the pair at x with offset e is the pair at −x with offset −e): the wells become unequal, and
the functions evaluate at x itself.

Two models.  "dipole": point dipoles at the magnet centres, the tip moment turning with the
tip (Yung, Landecker & Villani 1998).  "exact": the uniformly magnetised tip magnet in the
closed-form field of the fixed one, through the surface-charge picture: a magnet magnetised
along its axis is two faces with charge ±M = ±B_r/μ0, so

    U = μ0 Σ_faces σ ∫ φ_fixed dA,      −dU/dx = Σ_faces σ ∫ B_fixed · ∂r/∂x dA,

with the face points r carried rigidly by the tip (translation and rotation).  Nodes are fixed
in the tip's body frame, so the force is the exact derivative of the discretised energy.
For two blocks three of the four face integrals are done in closed form (the antiderivatives
behind Akoun & Yonnet 1984) and one by Gauss–Legendre quadrature; any pair with a disc uses
Gauss quadrature over the tip faces of the closed-form disc potential and field.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from itertools import pairwise

import numpy as np
from numpy.polynomial.legendre import leggauss
from scipy.constants import mu_0

__all__ = [
    "Block",
    "Disc",
    "Magnet",
    "magnet_volume",
    "dipole_moment",
    "magnet_field",
    "magnetic_scalar_potential",
    "dipole_field",
    "dipole_pair_energy",
    "dipole_pair_force",
    "coaxial_dipole_energy",
    "dipole_critical_distance",
    "interaction_energy",
    "magnet_force",
    "magnet_axial_load",
    "magnet_stiffness_at_rest",
    "clearance",
]

MODELS = ("exact", "dipole")

# Gauss–Legendre nodes across the tip face of a block pair (the one integral not done in
# closed form).  64 nodes keep the force within 1e-6 of the converged value down to a gap of
# 0.5 % of the tip block's deflection-direction side (see tests/test_magnets.py).
_BLOCK_PAIR_NODES = 64

# Face quadrature for pairs with a disc: nodes per direction and panel (radius or width; twice
# as many around the angle or along the deflection side), by the gap over the tip magnet's
# transverse size.  Each tier keeps the force within 2e-5 of the converged value at its
# smallest gap; below a gap ratio of 0.01 (a 0.1 mm gap on a 10 mm disc) the error grows to
# ~1e-2 at a ratio of 0.001, which no buildable design reaches.
_FACE_NODES_BY_GAP_RATIO = ((0.2, 12), (0.05, 16), (0.02, 24), (0.01, 32), (0.0, 48))

# Step of the Richardson-extrapolated difference quotient for the stiffness at rest, as a
# fraction of the length over which the force changes: the gap, shortened when the tip's
# rotation moves its corners faster than its centre.  Truncation is ~(1e-2)^4; a much smaller
# step would let rounding in the far field (terms of size ~ distance cancelling) show.
_STIFFNESS_STEP_FRACTION = 1e-2

# Stand-in for an exact zero in denominators whose numerator then vanishes too.
_TINY = 1e-300


# -- records -----------------------------------------------------------------------------


@dataclass(frozen=True)
class Block:
    """Rectangular block magnet magnetised along its axial side (the beam axis)."""

    axial_m: float  # side along the beam axis (the magnetisation)
    width_m: float  # side across the beam width (e2)
    deflection_m: float  # side along the deflection (e3 at rest)
    remanence_T: float  # B_r

    def __post_init__(self) -> None:
        _require_positive(self, ("axial_m", "width_m", "deflection_m", "remanence_T"))


@dataclass(frozen=True)
class Disc:
    """Cylindrical (disc or rod) magnet, axis and magnetisation along the beam axis."""

    diameter_m: float
    length_m: float  # along the axis
    remanence_T: float  # B_r

    def __post_init__(self) -> None:
        _require_positive(self, ("diameter_m", "length_m", "remanence_T"))


Magnet = Block | Disc


def _require_positive(record: object, names: tuple[str, ...]) -> None:
    for name in names:
        value = getattr(record, name)
        try:
            valid = math.isfinite(float(value)) and float(value) > 0.0
        except (TypeError, ValueError):
            valid = False
        if not valid:
            raise ValueError(
                f"{type(record).__name__}.{name} must be a positive number, got {value!r}"
            )


def _axial_length(m: Magnet) -> float:
    return m.axial_m if isinstance(m, Block) else m.length_m


def _deflection_extent(m: Magnet) -> float:
    """Size across the axis in the bending plane (e1–e3)."""
    return m.deflection_m if isinstance(m, Block) else m.diameter_m


def _transverse_size(m: Magnet) -> float:
    return max(m.width_m, m.deflection_m) if isinstance(m, Block) else m.diameter_m


# -- the tip body's reach ------------------------------------------------------------------
def tip_body_reach(x_m, tip: Magnet, slope_per_deflection_per_m: float) -> np.ndarray:
    """Largest distance from the rest axis of any point of the tip magnet, at tip deflection x [m].

    The magnet's section in the bending plane is a rectangle (axial length a × deflection side
    or diameter 2h) with its inner face centred on the beam tip, turned by ψ = s·x with the
    tip.  Its corners sit at e3 = x + α sin ψ + η cos ψ for α ∈ {0, a}, η ∈ {−h, h}; the reach
    is the largest |e3| of the four.

    Parameters
    ----------
    x_m : tip deflection x [m] (float or array)
    tip : the tip magnet (`Block` or `Disc`)
    slope_per_deflection_per_m : s = φ'(L)/φ(L) [1/m]

    Examples
    --------
    >>> tip = Block(axial_m=5e-3, width_m=8e-3, deflection_m=3e-3, remanence_T=1.2)
    >>> round(float(tip_body_reach(0.0, tip, 25.0)) * 1e3, 9)
    1.5
    """
    if isinstance(tip, Block):
        axial, half_height = tip.axial_m, tip.deflection_m / 2
    else:
        axial, half_height = tip.length_m, tip.diameter_m / 2
    x = np.asarray(x_m, dtype=float)
    psi = slope_per_deflection_per_m * x
    along = np.array([0.0, axial, axial, 0.0]).reshape((4,) + (1,) * x.ndim)
    across = np.array([-half_height, -half_height, half_height, half_height]).reshape(
        (4,) + (1,) * x.ndim
    )
    corners = x + along * np.sin(psi) + across * np.cos(psi)
    return np.abs(corners).max(axis=0)


def tip_body_travel(x_m, tip: Magnet, slope_per_deflection_per_m: float) -> np.ndarray:
    """How far the tip magnet's outermost point has moved towards a stop at tip deflection x [m]:
    `tip_body_reach` minus the half extent h the magnet already occupies at rest.

    This is what a travel limit (the room between the magnet's outer face at rest and the stop,
    on either side) is compared with; at small slopes it is x + a·ψ to first order.

    Examples
    --------
    >>> tip = Block(axial_m=5e-3, width_m=8e-3, deflection_m=3e-3, remanence_T=1.2)
    >>> round(float(tip_body_travel(0.0, tip, 25.0)) * 1e3, 9)
    0.0
    """
    return tip_body_reach(x_m, tip, slope_per_deflection_per_m) - 0.5 * _deflection_extent(tip)


# -- single magnets ----------------------------------------------------------------------


def magnet_volume(m: Magnet) -> float:
    """Volume of a block (product of its sides) or a disc (π D² L/4)  [m³].

    >>> round(magnet_volume(Block(0.01, 0.01, 0.005, 1.3)) * 1e9, 6)
    500.0
    """
    if isinstance(m, Block):
        return m.axial_m * m.width_m * m.deflection_m
    return math.pi * m.diameter_m**2 * m.length_m / 4.0


def dipole_moment(m: Magnet) -> float:
    """Magnetic moment of a uniformly magnetised magnet, m = B_r V/μ0  [A·m²].

    Parameters
    ----------
    m : the magnet; its remanence B_r [T] and volume V [m³]

    References
    ----------
    Furlani (2001), *Permanent Magnet and Electromechanical Devices*, Academic Press, ch. 2
    (M = B_r/μ0 for an ideal hard magnet).

    >>> round(dipole_moment(Block(0.01, 0.01, 0.01, 1.3)), 4)
    1.0345
    """
    return m.remanence_T * magnet_volume(m) / mu_0


def magnet_field(m: Magnet, points: np.ndarray) -> np.ndarray:
    """Flux density B of a uniformly magnetised block or disc, closed form  [T].

    The magnet is centred at the origin of its body frame, axis (and magnetisation) along e1,
    block sides (axial, width, deflection) along (e1, e2, e3).  B includes the magnetisation
    inside the magnet.

    Block: the two charged faces σ = ±M, each contributing per corner (u, v, w) of the face
    (u, v in-plane offsets, w normal distance, r = |(u, v, w)|)
        H_w = (σ/4π) Σ± atan(uv/(w r)),  H_u = −(σ/4π) Σ± asinh(v/√(u²+w²)),
        H_v = −(σ/4π) Σ± asinh(u/√(v²+w²)),       B = μ0 (H + M).
    Disc: Derby & Olbert's form with Bulirsch's complete elliptic integral C(k_c, p, c, s):
        B_ρ = (B_r/π)[α₊ C(k₊, 1, 1, −1) − α₋ C(k₋, 1, 1, −1)],
        B_z = (B_r/π) a/(a+ρ) [β₊ C(k₊, γ², 1, γ) − β₋ C(k₋, γ², 1, γ)],
        z± = z ± L/2, α± = a/√(z±² + (ρ+a)²), β± = z± α±/a, γ = (a−ρ)/(a+ρ),
        k± = √((z±² + (a−ρ)²)/(z±² + (a+ρ)²)).

    Parameters
    ----------
    m : the magnet (sides or diameter and length [m], remanence [T])
    points : field points, shape (..., 3), body frame [m]

    References
    ----------
    Akoun & Yonnet (1984), IEEE Trans. Magn. 20(5):1962 (charged faces of a block).
    Furlani (2001), *Permanent Magnet and Electromechanical Devices*, Academic Press (charge
    model of a block).
    Derby & Olbert (2010), Am. J. Phys. 78:229 (cylinder field).
    """
    p = np.asarray(points, dtype=float)
    X, Y, Z = p[..., 0], p[..., 1], p[..., 2]
    if isinstance(m, Disc):
        rho = np.hypot(Y, Z)
        b_rho, b_axial = _cylinder_flux_density(
            rho, X, m.diameter_m / 2.0, m.length_m / 2.0, m.remanence_T
        )
        safe_rho = np.where(rho > 0.0, rho, 1.0)
        return np.stack([b_axial, b_rho * Y / safe_rho, b_rho * Z / safe_rho], axis=-1)
    hx, hy, hz = _block_charge_field(X, Y, Z, m)
    inside = (
        (np.abs(X) < m.axial_m / 2) & (np.abs(Y) < m.width_m / 2) & (np.abs(Z) < m.deflection_m / 2)
    )
    return np.stack([mu_0 * hx + m.remanence_T * inside, mu_0 * hy, mu_0 * hz], axis=-1)


def magnetic_scalar_potential(m: Magnet, points: np.ndarray) -> np.ndarray:
    """Scalar potential φ of the magnet's face charges, H = −∇φ (B = μ0 H outside)  [A].

    φ(r) = (1/4π) Σ_faces σ ∫ dA'/|r − r'|, σ = ±M = ±B_r/μ0 on the faces at ±L/2.
    Block face (per corner, u, v in-plane, w normal):
        ∫∫ dA'/R = Σ± [u asinh(v/√(u²+w²)) + v asinh(u/√(v²+w²)) − w atan(uv/(w r))].
    Disc face of radius a at (ρ, z) relative to its centre, k_c and p as in the cylinder
    field, M² = (a+ρ)² + z²:
        ∫∫ dA'/R = (2/M) C(k_c, 1, 2a(a+ρ) + z², 2a(a−ρ) + z²)
                   + 2(a−ρ)z²/(M(a+ρ)) C(k_c, ((a−ρ)/(a+ρ))², 1, 1) − π|z|(1 + sgn(a−ρ)),
    obtained by turning the area integral into one round the rim and writing its three
    elliptic parts as Bulirsch integrals; on the axis it is 2π(√(a²+z²) − |z|).

    Parameters
    ----------
    m : the magnet (as in `magnet_field`)
    points : shape (..., 3), body frame [m]

    References
    ----------
    Furlani (2001), *Permanent Magnet and Electromechanical Devices*, Academic Press (charge
    model).
    Bulirsch (1969), Numer. Math. 13:305 (the integral C).
    """
    p = np.asarray(points, dtype=float)
    X, Y, Z = p[..., 0], p[..., 1], p[..., 2]
    magnetisation = m.remanence_T / mu_0
    if isinstance(m, Disc):
        rho = np.hypot(Y, Z)
        a, half = m.diameter_m / 2.0, m.length_m / 2.0
        return (
            magnetisation
            / (4 * math.pi)
            * (_disc_area_integral(rho, X - half, a) - _disc_area_integral(rho, X + half, a))
        )
    total = 0.0
    for face_x, sign in ((m.axial_m / 2, 1.0), (-m.axial_m / 2, -1.0)):
        total = total + sign * _rectangle_corner_sum(
            _rectangle_area_integral, Y, Z, X - face_x, m.width_m / 2, m.deflection_m / 2
        )
    return magnetisation / (4 * math.pi) * total


def _rectangle_corner_sum(f, Y, Z, w, half_width, half_height):
    """Σ± f(u, v, w) over the corners u = Y ∓ b, v = Z ∓ c of a face |y'| ≤ b, |z'| ≤ c."""
    return (
        f(Y + half_width, Z + half_height, w)
        - f(Y + half_width, Z - half_height, w)
        - f(Y - half_width, Z + half_height, w)
        + f(Y - half_width, Z - half_height, w)
    )


def _safe_sqrt(a):
    return np.sqrt(np.maximum(a, _TINY))


def _rectangle_area_integral(u, v, w):
    """Corner term of ∫∫ du dv/r (terms that cancel in the corner sum dropped)."""
    r = np.sqrt(u * u + v * v + w * w)
    return (
        u * np.arcsinh(v / _safe_sqrt(u * u + w * w))
        + v * np.arcsinh(u / _safe_sqrt(v * v + w * w))
        - w * np.arctan(u * v / _nonzero(w * r))
    )


def _nonzero(a):
    return np.where(a == 0.0, _TINY, a)


def _rectangle_field_normal(u, v, w):
    """Corner term of −∂/∂w ∫∫ du dv/r: the field component normal to a charged face."""
    return np.arctan(u * v / _nonzero(w * np.sqrt(u * u + v * v + w * w)))


def _rectangle_field_u(u, v, w):
    """Corner term of −∂/∂u ∫∫ du dv/r."""
    return -np.arcsinh(v / _safe_sqrt(u * u + w * w))


def _rectangle_field_v(u, v, w):
    """Corner term of −∂/∂v ∫∫ du dv/r."""
    return -np.arcsinh(u / _safe_sqrt(v * v + w * w))


def _block_charge_field(X, Y, Z, m: Block):
    """H of the block's face charges [A/m], components (axial, width, deflection)."""
    b, c = m.width_m / 2, m.deflection_m / 2
    hx = hy = hz = 0.0
    for face_x, sign in ((m.axial_m / 2, 1.0), (-m.axial_m / 2, -1.0)):
        w = X - face_x
        hx = hx + sign * _rectangle_corner_sum(_rectangle_field_normal, Y, Z, w, b, c)
        hy = hy + sign * _rectangle_corner_sum(_rectangle_field_u, Y, Z, w, b, c)
        hz = hz + sign * _rectangle_corner_sum(_rectangle_field_v, Y, Z, w, b, c)
    scale = m.remanence_T / mu_0 / (4 * math.pi)
    return scale * hx, scale * hy, scale * hz


def _bulirsch_cel(kc, p, c, s):
    """Bulirsch's complete elliptic integral, p > 0:

    C(k_c, p, c, s) = ∫_0^{π/2} (c cos²θ + s sin²θ) dθ /
                      ((cos²θ + p sin²θ) √(cos²θ + k_c² sin²θ)).

    Bulirsch (1969), Numer. Math. 13:305 (algorithm cel); converges quadratically.
    """
    kc, p, c, s = np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in (kc, p, c, s)))
    k = np.maximum(np.abs(kc), _TINY)
    pp = np.sqrt(p)
    ss = s / pp
    cc = c
    em = np.ones_like(k)
    f = cc
    cc = cc + ss / pp
    g = k / pp
    ss = 2.0 * (ss + f * g)
    pp = g + pp
    g = em
    em = k + em
    kk = k
    for _ in range(40):
        if np.all(np.abs(g - k) <= 1e-14 * g):
            break
        k = 2.0 * np.sqrt(kk)
        kk = k * em
        f = cc
        cc = cc + ss / pp
        g = kk / pp
        ss = 2.0 * (ss + f * g)
        pp = g + pp
        g = em
        em = k + em
    return 0.5 * math.pi * (ss + cc * em) / (em * (em + pp))


def _cylinder_flux_density(rho, z, a, half_length, remanence):
    """(B_ρ, B_z) of an axially magnetised cylinder, Derby & Olbert (2010)."""
    # On the mantle radius the p = γ² argument vanishes; the field is continuous there
    # outside the magnet, so a relative nudge of 1e-12 costs nothing.
    rho = np.where(np.abs(rho - a) < 1e-12 * a, a * (1.0 + 1e-12), rho)
    gamma = (a - rho) / (a + rho)
    b_rho = 0.0
    b_z = 0.0
    for zz, sign in ((z + half_length, 1.0), (z - half_length, -1.0)):
        span = np.sqrt(zz * zz + (rho + a) ** 2)
        kc = np.sqrt(zz * zz + (a - rho) ** 2) / span
        b_rho = b_rho + sign * (a / span) * _bulirsch_cel(kc, 1.0, 1.0, -1.0)
        b_z = b_z + sign * (zz / span) * _bulirsch_cel(kc, gamma * gamma, 1.0, gamma)
    return remanence / math.pi * b_rho, remanence / math.pi * a / (a + rho) * b_z


def _disc_area_integral(rho, z, a):
    """∫∫_disc dA'/|r − r'| for a disc of radius a, point at (ρ, z) from its centre  [m]."""
    big = (a + rho) ** 2 + z * z
    span = np.sqrt(big)
    kc = np.sqrt(((a - rho) ** 2 + z * z) / big)
    p = ((a - rho) / (a + rho)) ** 2
    # At ρ = a this term tends to ±π|z|, which the step of the last term balances: drop both
    # halves of the jump together (sgn(0) = 0 leaves −π|z|, the common limit).
    on_rim_radius = p == 0.0
    rim_factor = 2.0 * (a - rho) * z * z / (span * (a + rho))
    rim_integral = _bulirsch_cel(kc, np.where(on_rim_radius, 1.0, p), 1.0, 1.0)
    rim_term = np.where(on_rim_radius, 0.0, rim_factor * rim_integral)
    return (
        2.0 / span * _bulirsch_cel(kc, 1.0, 2 * a * (a + rho) + z * z, 2 * a * (a - rho) + z * z)
        + rim_term
        - math.pi * np.abs(z) * (1.0 + np.sign(a - rho))
    )


# -- point dipoles -----------------------------------------------------------------------


def dipole_field(moment: np.ndarray, r: np.ndarray) -> np.ndarray:
    """Flux density of a point dipole, B = μ0/(4π R³) [3 r̂ (m·r̂) − m]  [T].

    Parameters
    ----------
    moment : dipole moment m, shape (..., 3) [A·m²]
    r : field point relative to the dipole, shape (..., 3) [m]

    References
    ----------
    Jackson (1999), *Classical Electrodynamics*, 3rd ed., Wiley, §5.6.
    """
    moment = np.asarray(moment, dtype=float)
    r = np.asarray(r, dtype=float)
    dist = np.linalg.norm(r, axis=-1, keepdims=True)
    rhat = r / dist
    return (
        mu_0
        / (4 * math.pi * dist**3)
        * (3.0 * rhat * np.sum(moment * rhat, axis=-1, keepdims=True) - moment)
    )


def dipole_pair_energy(m_a: np.ndarray, m_b: np.ndarray, r: np.ndarray) -> np.ndarray:
    """Interaction energy of two point dipoles, U = μ0/(4πR³)[m_a·m_b − 3(m_a·r̂)(m_b·r̂)]  [J].

    Parameters
    ----------
    m_a, m_b : moments, shape (..., 3) [A·m²]
    r : position of b relative to a, shape (..., 3) [m]

    References
    ----------
    Yung, Landecker & Villani (1998), Magn. Electr. Sep. 9:39 (dipole–dipole energy).
    """
    return -np.sum(np.asarray(m_b, dtype=float) * dipole_field(m_a, r), axis=-1)


def dipole_pair_force(m_a: np.ndarray, m_b: np.ndarray, r: np.ndarray) -> np.ndarray:
    """Force on dipole b from dipole a  [N]:

        F = 3μ0/(4π R⁴) [ (r̂·m_a) m_b + (r̂·m_b) m_a + (m_a·m_b) r̂ − 5 (r̂·m_a)(r̂·m_b) r̂ ].

    Parameters
    ----------
    m_a, m_b : moments, shape (..., 3) [A·m²]
    r : position of b relative to a, shape (..., 3) [m]

    References
    ----------
    Yung, Landecker & Villani (1998), Magn. Electr. Sep. 9:39 (dipole–dipole force).
    """
    m_a = np.asarray(m_a, dtype=float)
    m_b = np.asarray(m_b, dtype=float)
    r = np.asarray(r, dtype=float)
    dist = np.linalg.norm(r, axis=-1, keepdims=True)
    rhat = r / dist
    ra = np.sum(rhat * m_a, axis=-1, keepdims=True)
    rb = np.sum(rhat * m_b, axis=-1, keepdims=True)
    ab = np.sum(m_a * m_b, axis=-1, keepdims=True)
    return (
        3.0
        * mu_0
        / (4 * math.pi * dist**4)
        * (ra * m_b + rb * m_a + ab * rhat - 5.0 * ra * rb * rhat)
    )


def coaxial_dipole_energy(x, d: float, m_a: float, m_b: float) -> np.ndarray:
    """Energy of two opposed (repelling) dipoles on a common axis, one offset sideways  [J].

        U = μ0 m_a m_b (2d² − x²) / (4π (d² + x²)^{5/2})

    (no rotation of either moment).  Its curvature at rest is U''(0) = −3μ0 m_a m_b/(π d⁵).

    Parameters
    ----------
    x : sideways offset of one dipole [m]
    d : distance between the dipoles along the axis [m]
    m_a, m_b : moment magnitudes [A·m²]

    References
    ----------
    Yung, Landecker & Villani (1998), Magn. Electr. Sep. 9:39 (dipole–dipole energy).

    >>> round(float(coaxial_dipole_energy(0.0, 0.02, 1.0, 1.0)), 9)  # 2 μ0/(4π d³)
    0.025
    """
    x = np.asarray(x, dtype=float)
    return mu_0 * m_a * m_b * (2 * d * d - x * x) / (4 * math.pi * (d * d + x * x) ** 2.5)


def dipole_critical_distance(k_b: float, m_a: float, m_b: float) -> float:
    """Centre distance at which coaxial repelling dipoles make the straight beam neutral  [m].

    The rest position loses stability when k_b + U''(0) = 0 with the curvature of
    `coaxial_dipole_energy`:  d_c = (3 μ0 m_a m_b/(π k_b))^{1/5}.  Closer than d_c the beam
    is bistable (in this point-dipole, no-rotation approximation).

    Parameters
    ----------
    k_b : tip stiffness of the magnet-free beam [N/m]
    m_a, m_b : moment magnitudes [A·m²]

    References
    ----------
    Yung, Landecker & Villani (1998), Magn. Electr. Sep. 9:39.

    >>> round(dipole_critical_distance(3e-7, 1.0, 1.0), 6)  # (3·4π·1e-7/(π·3e-7))^(1/5)
    1.319508
    """
    if not k_b > 0.0:
        raise ValueError(f"beam stiffness must be positive, got {k_b!r}")
    return (3.0 * mu_0 * m_a * m_b / (math.pi * k_b)) ** 0.2


# -- the pair ----------------------------------------------------------------------------


def _check_pair(tip: Magnet, fixed: Magnet, gap_m: float, slope: float, model: str,
                foreshortening: float = 0.0, offset: float = 0.0) -> None:
    for name, m in (("tip", tip), ("fixed", fixed)):
        if not isinstance(m, (Block, Disc)):
            raise TypeError(f"{name} must be a Block or a Disc, got {type(m).__name__}")
    if not (math.isfinite(gap_m) and gap_m > 0.0):
        raise ValueError(f"gap_m must be a positive length, got {gap_m!r}")
    if not math.isfinite(slope):
        raise ValueError(f"slope_per_deflection_per_m must be finite, got {slope!r}")
    if not (math.isfinite(foreshortening) and foreshortening >= 0.0):
        raise ValueError(f"foreshortening_per_m must be finite and ≥ 0, got {foreshortening!r}")
    if not math.isfinite(offset):
        raise ValueError(f"offset_m must be finite, got {offset!r}")
    if model not in MODELS:
        raise ValueError(f"model must be one of {MODELS}, got {model!r}")


# What the pair functions evaluate: the energy U, the generalised force −dU/dx on the tip
# deflection, or the force along +e1 on the tip magnet (−∂U/∂X for a rigid shift X along e1).
_ENERGY, _FORCE, _ALONG_AXIS = "energy", "force", "along axis"


def _pair_value(x, tip, fixed, gap_m, slope, foreshortening, model, want, offset=0.0):
    """Energy, generalised force or axial force; on the axis (no offset) evaluated at |x|
    with the symmetry restored, off it at x."""
    _check_pair(tip, fixed, gap_m, slope, model, foreshortening, offset)
    x = np.asarray(x, dtype=float)
    symmetric = offset == 0.0
    where = np.abs(x).ravel() if symmetric else x.ravel()
    motion = (slope, foreshortening, offset)
    if model == "dipole":
        value = _dipole_pair(where, tip, fixed, gap_m, motion, want)
    elif isinstance(tip, Block) and isinstance(fixed, Block):
        value = _block_pair(where, tip, fixed, gap_m, motion, want)
    else:
        value = _face_quadrature_pair(where, tip, fixed, gap_m, motion, want)
    value = value.reshape(x.shape)
    return np.sign(x) * value if want == _FORCE and symmetric else value


def interaction_energy(
    x,
    *,
    tip: Magnet,
    fixed: Magnet,
    gap_m: float,
    slope_per_deflection_per_m: float,
    model: str = "exact",
    foreshortening_per_m: float = 0.0,
    offset_m: float = 0.0,
) -> np.ndarray:
    """Magnetic energy of the pair with the tip deflected by x, zero at infinite separation  [J].

    U(x) = μ0 Σ_tip faces σ ∫ φ_fixed dA (model "exact") or the point-dipole energy of the two
    moments at the magnet centres, the tip moment along t̂ (model "dipole"), with the tip at
    (−α x², 0, x) and turned by ψ = s x.  Even in x without an offset; positive at rest for
    the repelling pair.  Valid while `clearance` > 0.

    Parameters
    ----------
    x : tip deflection(s) [m]
    tip, fixed : the magnets
    gap_m : face-to-face gap at rest [m]
    slope_per_deflection_per_m : s = φ'(L)/φ(L); the tip turns by ψ = s x [1/m]
    model : "exact" or "dipole"
    foreshortening_per_m : α = ½∫₀ᴸ φ'² dx (φ(L) = 1); the tip moves α x² towards the clamp
        [1/m] (`harvester.physics.beam.foreshortening_coefficient`; 0 leaves it out)
    offset_m : the fixed magnet's centre off the beam's axis, along +e3 (the deflection) [m]

    References
    ----------
    Akoun & Yonnet (1984), IEEE Trans. Magn. 20(5):1962; Furlani (2001) (charge model);
    Yung, Landecker & Villani (1998), Magn. Electr. Sep. 9:39 (dipoles).
    """
    return _pair_value(x, tip, fixed, gap_m, slope_per_deflection_per_m, foreshortening_per_m,
                       model, _ENERGY, offset_m)


def magnet_force(
    x,
    *,
    tip: Magnet,
    fixed: Magnet,
    gap_m: float,
    slope_per_deflection_per_m: float,
    model: str = "exact",
    foreshortening_per_m: float = 0.0,
    offset_m: float = 0.0,
) -> np.ndarray:
    """Generalised magnet force on the tip deflection, F = −dU/dx  [N] (positive pushes x up).

    It includes the work of the magnetic torque through the tip rotation ψ = s x and of the
    axial force through the foreshortening α x²: F = F_tip · ∂c/∂x + T_tip · ∂θ/∂x for the
    rigid tip magnet (c its centre, ∂c/∂x = (−2αx − (a/2) s sin ψ, 0, 1 + (a/2) s cos ψ),
    θ its rotation vector).  Odd in x without an offset; near the axis the repelling pair
    pushes the tip away from it (negative stiffness), and a fixed magnet offset by e > 0
    pushes the tip at rest towards −e3.  Valid while `clearance` > 0.

    Parameters
    ----------
    as for `interaction_energy`

    References
    ----------
    Yung, Landecker & Villani (1998), Magn. Electr. Sep. 9:39 (dipole force);
    Akoun & Yonnet (1984), IEEE Trans. Magn. 20(5):1962 (block faces).
    """
    return _pair_value(x, tip, fixed, gap_m, slope_per_deflection_per_m, foreshortening_per_m,
                       model, _FORCE, offset_m)


def magnet_axial_load(
    x,
    *,
    tip: Magnet,
    fixed: Magnet,
    gap_m: float,
    slope_per_deflection_per_m: float,
    model: str = "exact",
    foreshortening_per_m: float = 0.0,
    offset_m: float = 0.0,
) -> np.ndarray:
    """Push of the fixed magnet on the tip magnet towards the clamp, P = ∂U/∂X  [N].

    X is a rigid shift of the tip magnet along +e1 (towards the fixed magnet), so P is minus
    the e1 component of the magnetic force on it: the end load that compresses the beam,
    positive for the repelling pair.  At rest (x = 0) it acts along the beam axis and is the
    P of the beam-column; the straight beam buckles under it alone at P_cr = π²EI/(4L²)
    (`harvester.physics.beam.euler_buckling_load`).  Even in x without an offset.

        exact:  P = −Σ_tip faces σ ∫ B_fixed · e1 dA;   dipole:  P = −F_Yung · e1

    Parameters
    ----------
    as for `interaction_energy`

    References
    ----------
    Akoun & Yonnet (1984), IEEE Trans. Magn. 20(5):1962 (block faces);
    Yung, Landecker & Villani (1998), Magn. Electr. Sep. 9:39 (dipole force).

    Examples
    --------
    Two point dipoles on one axis, d apart, repel with 6μ0 m²/(4π d⁴):

    >>> cube = Block(0.01, 0.01, 0.01, 1.3)
    >>> d = 0.03
    >>> p = magnet_axial_load(0.0, tip=cube, fixed=cube, gap_m=d - 0.01,
    ...                       slope_per_deflection_per_m=0.0, model="dipole")
    >>> round(float(p) / (6 * mu_0 * dipole_moment(cube) ** 2 / (4 * math.pi * d**4)), 12)
    1.0
    """
    return -_pair_value(x, tip, fixed, gap_m, slope_per_deflection_per_m, foreshortening_per_m,
                        model, _ALONG_AXIS, offset_m)


def magnet_stiffness_at_rest(
    *,
    tip: Magnet,
    fixed: Magnet,
    gap_m: float,
    slope_per_deflection_per_m: float,
    model: str = "exact",
    foreshortening_per_m: float = 0.0,
    offset_m: float = 0.0,
) -> float:
    """Magnetic stiffness at the straight position, d²U/dx²(0) = −dF/dx(0)  [N/m].

    Negative for the repelling pair; the beam is bistable when k_b + d²U/dx²(0) < 0.  With the
    foreshortening it includes the geometric softening of the end load, −2αP
    (`magnet_axial_load`), since d²(−αx²)/dx² = −2α.
    Computed from the odd force as D(h) = −F(h)/h, Richardson-extrapolated:
    (4 D(h/2) − D(h))/3, with h = g/(100 max(1, |s| ℓ)), ℓ the largest side of the tip magnet
    (relative error below 1e-6).

    Parameters
    ----------
    as for `interaction_energy`

    References
    ----------
    Richardson & Gaunt (1927), Phil. Trans. R. Soc. A 226:299 (extrapolation).
    """
    _check_pair(tip, fixed, gap_m, slope_per_deflection_per_m, model, foreshortening_per_m,
                offset_m)
    tip_size = max(_axial_length(tip), _transverse_size(tip))
    turning = max(1.0, abs(slope_per_deflection_per_m) * tip_size)
    h = _STIFFNESS_STEP_FRACTION * gap_m / turning
    force = magnet_force(
        np.array([h, h / 2, -h, -h / 2]),
        tip=tip,
        fixed=fixed,
        gap_m=gap_m,
        slope_per_deflection_per_m=slope_per_deflection_per_m,
        model=model,
        foreshortening_per_m=foreshortening_per_m,
        offset_m=offset_m,
    )
    coarse, fine = -(force[0] - force[2]) / (2 * h), -(force[1] - force[3]) / h
    return float((4.0 * fine - coarse) / 3.0)


def clearance(
    x, *, tip: Magnet, fixed: Magnet, gap_m: float, slope_per_deflection_per_m: float,
    offset_m: float = 0.0
) -> np.ndarray:
    """Smallest distance between the surfaces of the two magnets  [m]; ≤ 0 when they touch.

    Both magnets are convex and mirror-symmetric in e2, so a closest pair of points lies in
    the bending plane (e1–e3), where each magnet's section is a rectangle (axial length ×
    deflection side or diameter).  Separated: the least corner-to-edge distance.  Overlapping:
    minus the penetration depth from the separating-axis test.

    Parameters
    ----------
    as for `interaction_energy` (no model)
    """
    _check_pair(tip, fixed, gap_m, slope_per_deflection_per_m, "exact", offset=offset_m)
    x = np.asarray(x, dtype=float)
    flat = x.ravel()
    psi = slope_per_deflection_per_m * flat
    t_hat = np.stack([np.cos(psi), np.sin(psi)], axis=-1)  # (n, 2) in (e1, e3)
    n_hat = np.stack([-np.sin(psi), np.cos(psi)], axis=-1)
    axial_t, half_t = _axial_length(tip), _deflection_extent(tip) / 2
    tip_corners = (
        np.stack([np.zeros_like(flat), flat], axis=-1)[:, None, :]
        + np.array([0.0, axial_t, axial_t, 0.0])[None, :, None] * t_hat[:, None, :]
        + np.array([-half_t, -half_t, half_t, half_t])[None, :, None] * n_hat[:, None, :]
    )
    near = axial_t + gap_m
    far = near + _axial_length(fixed)
    half_f = _deflection_extent(fixed) / 2
    fixed_corners = np.broadcast_to(
        np.array([[near, -half_f], [far, -half_f], [far, half_f], [near, half_f]])
        + np.array([0.0, offset_m]),
        tip_corners.shape,
    )
    axes = np.stack(
        [
            np.broadcast_to([1.0, 0.0], t_hat.shape),
            np.broadcast_to([0.0, 1.0], t_hat.shape),
            t_hat,
            n_hat,
        ],
        axis=1,
    )  # (n, 4, 2)
    proj_t = np.einsum("nac,nkc->nak", axes, tip_corners)
    proj_f = np.einsum("nac,nkc->nak", axes, fixed_corners)
    gap_along_axis = np.maximum(proj_f.min(-1) - proj_t.max(-1), proj_t.min(-1) - proj_f.max(-1))
    separation = gap_along_axis.max(axis=-1)
    distance = np.minimum(
        _corner_to_edge_distance(tip_corners, fixed_corners),
        _corner_to_edge_distance(fixed_corners, tip_corners),
    )
    return np.where(separation > 0.0, distance, separation).reshape(x.shape)


def _corner_to_edge_distance(corners, polygon):
    """Least distance from any corner (n, 4, 2) to any edge of a quadrilateral (n, 4, 2)."""
    start = polygon[:, None, :, :]
    edge = np.roll(polygon, -1, axis=1)[:, None, :, :] - start
    rel = corners[:, :, None, :] - start
    t = np.clip(np.sum(rel * edge, -1) / np.sum(edge * edge, -1), 0.0, 1.0)
    return np.linalg.norm(rel - t[..., None] * edge, axis=-1).min(axis=(1, 2))


# -- dipole model ------------------------------------------------------------------------


def _dipole_pair(x, tip, fixed, gap_m, motion, want):
    slope, foreshortening, offset = motion
    psi = slope * x
    cos_psi, sin_psi, zeros = np.cos(psi), np.sin(psi), np.zeros_like(x)
    half = _axial_length(tip) / 2
    tip_centre = np.stack(
        [half * cos_psi - foreshortening * x * x, zeros, x + half * sin_psi], axis=-1
    )
    fixed_centre = np.array([2 * half + gap_m + _axial_length(fixed) / 2, 0.0, offset])
    m_tip = dipole_moment(tip) * np.stack([cos_psi, zeros, sin_psi], axis=-1)
    m_fixed = np.array([-dipole_moment(fixed), 0.0, 0.0])
    r = tip_centre - fixed_centre
    if want == _ENERGY:
        return dipole_pair_energy(m_fixed, m_tip, r)
    force = dipole_pair_force(m_fixed, m_tip, r)
    if want == _ALONG_AXIS:
        return force[:, 0]
    torque = np.cross(m_tip, dipole_field(m_fixed, r))
    # t̂ turns about −e2 as ψ grows, so the torque works through −T_y dψ.
    centre_rate = np.stack(
        [-2.0 * foreshortening * x - half * slope * sin_psi, zeros, 1.0 + half * slope * cos_psi],
        axis=-1,
    )
    return np.sum(force * centre_rate, axis=-1) - slope * torque[:, 1]


# -- exact model: two blocks -------------------------------------------------------------
#
# With u across the width, v along the deflection and w along the fixed magnet's axis, the
# energy of two charged rectangles that share the width direction is Σ± ∫ dη Φ(u, v, w) over
# the corners in u (both widths) and v (fixed face), where ∂²Φ/∂u² ∂v = 1/r.  Terms that are
# linear in u or free of v cancel in those sums and are dropped.


def _block_pair_potential(u, v, w):
    """Φ(u, v, w) = ½(u² − w²) asinh(v/√(u²+w²)) + uv asinh(u/√(v²+w²)) − ½ v r
    − u w atan(uv/(w r))."""
    r = np.sqrt(u * u + v * v + w * w)
    return (
        0.5 * (u * u - w * w) * np.arcsinh(v / _safe_sqrt(u * u + w * w))
        + u * v * np.arcsinh(u / _safe_sqrt(v * v + w * w))
        - 0.5 * v * r
        - u * w * np.arctan(u * v / _nonzero(w * r))
    )


def _block_pair_potential_dv(u, v, w):
    """∂Φ/∂v = u asinh(u/√(v²+w²)) − r."""
    return u * np.arcsinh(u / _safe_sqrt(v * v + w * w)) - np.sqrt(u * u + v * v + w * w)


def _block_pair_potential_dw(u, v, w):
    """∂Φ/∂w = −w asinh(v/√(u²+w²)) − u atan(uv/(w r))."""
    r = np.sqrt(u * u + v * v + w * w)
    return -w * np.arcsinh(v / _safe_sqrt(u * u + w * w)) - u * np.arctan(u * v / _nonzero(w * r))


@lru_cache(maxsize=32)
def _gauss_legendre(n: int, low: float, high: float) -> tuple[np.ndarray, np.ndarray]:
    nodes, weights = leggauss(n)
    half = 0.5 * (high - low)
    return half * nodes + 0.5 * (high + low), half * weights


def _tip_face_points(x, motion, axial, eta, want):
    """(X, Z) in the bending plane of the tip-face points at body coordinates (axial, η), and
    their rates (∂X, ∂Z) as the tip moves, turns and foreshortens (per unit x), or as it
    shifts rigidly along e1 (`want` _ALONG_AXIS: (1, 0)); x is a column, η a row."""
    slope, foreshortening, _ = motion
    psi = slope * x
    cos_psi, sin_psi = np.cos(psi), np.sin(psi)
    X = axial * cos_psi - eta * sin_psi - foreshortening * x * x
    Z = x + axial * sin_psi + eta * cos_psi
    if want == _ALONG_AXIS:
        return X, Z, 1.0, 0.0
    dX = slope * (-axial * sin_psi - eta * cos_psi) - 2.0 * foreshortening * x
    dZ = 1.0 + slope * (axial * cos_psi - eta * sin_psi)
    return X, Z, dX, dZ


def _block_pair(x, tip: Block, fixed: Block, gap_m, motion, want):
    half_height = tip.deflection_m / 2
    eta, weights = _gauss_legendre(_BLOCK_PAIR_NODES, -half_height, half_height)
    half_w_tip, half_w_fixed = tip.width_m / 2, fixed.width_m / 2
    # The double width integral Σ over (y, y') corners collapses, Φ being even in u, to
    # 2Φ(b_t + b_f) − 2Φ(b_t − b_f).
    widths = ((half_w_tip + half_w_fixed, 2.0), (abs(half_w_tip - half_w_fixed), -2.0))
    half_h_fixed = fixed.deflection_m / 2
    offset = motion[2]
    near = tip.axial_m + gap_m
    total = 0.0
    for axial, tip_sign in ((tip.axial_m, 1.0), (0.0, -1.0)):
        X, Z, dX, dZ = _tip_face_points(x[:, None], motion, axial, eta, want)
        for face_x, fixed_sign in ((near, 1.0), (near + fixed.axial_m, -1.0)):
            w = X - face_x
            for u, width_weight in widths:
                for dv, corner_sign in ((half_h_fixed, 1.0), (-half_h_fixed, -1.0)):
                    v = Z - offset + dv
                    if want == _ENERGY:
                        integrand = _block_pair_potential(u, v, w)
                    elif want == _ALONG_AXIS:
                        integrand = _block_pair_potential_dw(u, v, w)
                    else:
                        integrand = (
                            _block_pair_potential_dv(u, v, w) * dZ
                            + _block_pair_potential_dw(u, v, w) * dX
                        )
                    sign = tip_sign * fixed_sign * width_weight * corner_sign
                    total = total + sign * (integrand @ weights)
    scale = tip.remanence_T * fixed.remanence_T / (4 * math.pi * mu_0)
    return scale * total if want == _ENERGY else -scale * total


# -- exact model: pairs with a disc ------------------------------------------------------


def _face_nodes(tip: Magnet, fixed: Magnet, gap_m: float):
    """Body-frame nodes (η along n̂, y along e2) and weights over one tip face, y ≥ 0 half
    doubled by the mirror symmetry in e2."""
    ratio = gap_m / _transverse_size(tip)
    n = next(count for bound, count in _FACE_NODES_BY_GAP_RATIO if ratio >= bound)
    if isinstance(tip, Disc):
        radius = tip.diameter_m / 2
        # A smaller fixed disc's rim faces the tip face across the gap along the circle of its
        # own radius: the field changes sharply there, so the radial rule breaks at it.
        rim = fixed.diameter_m / 2 if isinstance(fixed, Disc) else radius
        breaks = (0.0, rim, radius) if rim < radius else (0.0, radius)
        parts = [_gauss_legendre(n, lo, hi) for lo, hi in pairwise(breaks)]
        r = np.concatenate([nodes for nodes, _ in parts])
        wr = np.concatenate([weights for _, weights in parts])
        theta, wt = _gauss_legendre(2 * n, 0.0, math.pi)
        eta = np.outer(r, np.cos(theta))
        y = np.outer(r, np.sin(theta))
        weights = 2.0 * np.outer(wr * r, wt)
    else:
        across, wa = _gauss_legendre(n, 0.0, tip.width_m / 2)
        along, wl = _gauss_legendre(2 * n, -tip.deflection_m / 2, tip.deflection_m / 2)
        y, eta = np.meshgrid(across, along, indexing="ij")
        weights = 2.0 * np.outer(wa, wl)
    return eta.ravel(), y.ravel(), weights.ravel()


def _face_quadrature_pair(x, tip: Magnet, fixed: Magnet, gap_m, motion, want):
    eta, y, weights = _face_nodes(tip, fixed, gap_m)
    axial_t = _axial_length(tip)
    fixed_centre = axial_t + gap_m + _axial_length(fixed) / 2
    # Fields are linear in B_r, and the fixed magnet points along −e1: evaluate the same body
    # at 1 T in its own frame and scale by −B_r.
    if isinstance(fixed, Block):
        unit_fixed = Block(fixed.axial_m, fixed.width_m, fixed.deflection_m, 1.0)
    else:
        unit_fixed = Disc(fixed.diameter_m, fixed.length_m, 1.0)
    polarity = -fixed.remanence_T
    charge = tip.remanence_T / mu_0
    total = 0.0
    for axial, tip_sign in ((axial_t, 1.0), (0.0, -1.0)):
        X, Z, dX, dZ = _tip_face_points(x[:, None], motion, axial, eta, want)
        points = np.stack([X - fixed_centre, np.broadcast_to(y, X.shape), Z - motion[2]],
                          axis=-1)
        if want == _ENERGY:
            integrand = mu_0 * polarity * magnetic_scalar_potential(unit_fixed, points)
        else:
            b = polarity * magnet_field(unit_fixed, points)
            integrand = b[..., 0] * dX + b[..., 2] * dZ
        total = total + tip_sign * charge * (integrand @ weights)
    return total
