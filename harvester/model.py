"""The reduced model: one degree of freedom (tip deflection x) coupled to one circuit.

    m ẍ + c ẋ + k1 x + k3 x³ + k5 x⁵ + … + g q = −m_f a(t)
    piezo:  C v̇ + v/R_l − θ ẋ = 0               (q = v, g = θ)
    coil:   L i̇ + (R_c + R_l) i − Bl ẋ = 0       (q = i, g = Bl)

Everything upstream (case files, beam and magnet physics) builds a `ReducedModel`;
everything downstream (dynamics, analysis, report) consumes one.  All fields are SI floats.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace


@dataclass(frozen=True)
class PiezoCircuit:
    """Piezoelectric transducer in the tip coordinate."""

    coupling_N_per_V: float  # θ: force on the tip per volt  [N/V]
    capacitance_F: float  # C_p  [F]


@dataclass(frozen=True)
class CoilCircuit:
    """Electromagnetic transducer in the tip coordinate."""

    flux_linkage_V_s_per_m: float  # Bl  [V·s/m] = [N/A]
    resistance_ohm: float  # coil resistance R_c  [Ω]
    inductance_H: float  # coil inductance L_c  [H]; 0 means purely resistive


@dataclass(frozen=True)
class ReducedModel:
    """Single-mode double-well harvester in the tip deflection x [m]."""

    mass_kg: float  # m, effective (modal) mass at the tip
    damping_N_s_per_m: float  # c, mechanical damping (short circuit, magnet-free beam)
    stiffness: tuple[float, ...]  # odd-power coefficients (k1 [N/m], k3 [N/m³], k5 [N/m⁵], …)
    forcing_mass_kg: float  # m_f: base acceleration a enters as −m_f a
    transducer: PiezoCircuit | CoilCircuit | None = None
    load_ohm: float = math.inf  # R_l; inf = open circuit (piezo) / no current (coil)
    travel_limit_m: float = math.inf  # |x| beyond this is outside the physical range
    linear_stiffness_N_per_m: float | None = None  # k of the same beam without magnets
    notes: tuple[str, ...] = field(default_factory=tuple)

    # -- derived quantities ---------------------------------------------------------------
    @property
    def k1(self) -> float:
        return self.stiffness[0]

    @property
    def k3(self) -> float:
        return self.stiffness[1] if len(self.stiffness) > 1 else 0.0

    @property
    def is_bistable(self) -> bool:
        """k1 < 0 and the force turns positive again: a stable equilibrium x > 0 exists."""
        return self.k1 < 0.0 and any(w > 0.0 for w in stable_equilibria(self.stiffness))

    def restoring_force(self, x):
        """F(x) = Σ k_(2j+1) x^(2j+1)  [N]; works on floats and numpy arrays."""
        total = 0.0 * x
        power = x
        x2 = x * x
        for k in self.stiffness:
            total = total + k * power
            power = power * x2
        return total

    def potential_energy(self, x):
        """U(x) = Σ k_(2j+1) x^(2j+2)/(2j+2)  [J]; see `odd_potential`."""
        return odd_potential(self.stiffness, x)

    def circuit_coefficients(self) -> tuple[float, float, float]:
        """(a, g, h) of the circuit written as  a q̇ = g ẋ − h q,  force on the beam g q.

        Piezo: a = C_p, g = θ, h = 1/R_l.  Coil: a = L_c, g = Bl, h = R_c + R_l.
        No transducer: (0, 0, 1).  With a = 0 the circuit is a viscous damper g²/h.
        """
        t = self.transducer
        if t is None:
            return 0.0, 0.0, 1.0
        if isinstance(t, PiezoCircuit):
            h = 0.0 if math.isinf(self.load_ohm) else 1.0 / self.load_ohm
            return t.capacitance_F, t.coupling_N_per_V, h
        return t.inductance_H, t.flux_linkage_V_s_per_m, t.resistance_ohm + self.load_ohm

    def load_power(self, q):
        """Instantaneous power into the load [W] for circuit state q (volts or amperes)."""
        t = self.transducer
        if t is None:
            return 0.0 * q
        if isinstance(t, PiezoCircuit):
            return 0.0 * q if math.isinf(self.load_ohm) else q * q / self.load_ohm
        return q * q * self.load_ohm

    def with_load(self, load_ohm: float) -> ReducedModel:
        return replace(self, load_ohm=load_ohm)

    def without_magnets(self) -> ReducedModel:
        """The same beam with no magnets: linear, stiffness of the bare beam."""
        if self.linear_stiffness_N_per_m is None:
            raise ValueError("this model does not know the magnet-free beam stiffness")
        return replace(self, stiffness=(self.linear_stiffness_N_per_m,))


# -- static double-well analysis ------------------------------------------------------------------
@dataclass(frozen=True)
class Wells:
    """Equilibria of the reduced model and the barrier between them (SI)."""

    regime: str  # "bistable" | "monostable"
    wells_m: tuple[float, ...]  # stable equilibria, ascending
    barrier_J: float  # U(0) − U(well); 0 when monostable
    well_frequency_Hz: float  # small oscillation about a well (about 0 when monostable)
    linear_frequency_Hz: float | None  # same beam without magnets


def stable_equilibria(stiffness: tuple[float, ...]) -> tuple[float, ...]:
    """Stable equilibria [m] of F(x) = Σ k_(2j+1) x^(2j+1), ascending.

    F(x)/x is a polynomial in y = x²; its positive real roots give ±√y, and an equilibrium is
    stable where F'(x) > 0.  x = 0 is stable when k1 > 0.
    """
    import numpy as np

    found = [0.0] if stiffness[0] > 0.0 else []
    if len(stiffness) > 1:
        roots = np.roots(list(reversed(stiffness)))  # coefficients in y, highest power first
        for y in roots:
            if abs(y.imag) <= 1e-9 * max(1.0, abs(y.real)) and y.real > 0.0:
                x = math.sqrt(y.real)
                if force_slope(stiffness, x) > 0.0:
                    found += [-x, x]
    return tuple(sorted(set(found)))


def odd_potential(stiffness: tuple[float, ...], x):
    """U(x) = Σ k_(2j+1) x^(2j+2)/(2j+2)  [J] of the odd force with these coefficients, U(0) = 0;
    works on floats and numpy arrays."""
    total = 0.0 * x
    x2 = x * x
    power = x2
    for j, k in enumerate(stiffness):
        total = total + k * power / (2 * j + 2)
        power = power * x2
    return total


def force_slope(stiffness: tuple[float, ...], x: float) -> float:
    """F'(x) = Σ (2j+1) k_(2j+1) x^(2j)  [N/m]."""
    return sum((2 * j + 1) * k * x ** (2 * j) for j, k in enumerate(stiffness))


def analyse_wells(model: ReducedModel) -> Wells:
    """Wells, barrier and small-oscillation frequencies of a reduced model.

    For k1 < 0 < k3 (and no higher terms) the wells are ±√(−k1/k3), the barrier is k1²/(4k3)
    and the well frequency is √2·ω0 with ω0 = √(−k1/m) (Kovacic & Brennan 2011, *The Duffing
    Equation*, Wiley, ch. 1; harvester/METHODS.md §4).

    Examples
    --------
    k1 = −40 N/m, k3 = 4e6 N/m³: wells at ±√(40/4e6) m, barrier 40²/(4·4e6) J = 100 µJ.

    >>> wells = analyse_wells(ReducedModel(0.01, 0.01, (-40.0, 4e6), 0.01))
    >>> [round(w * 1e3, 6) for w in wells.wells_m], round(wells.barrier_J * 1e6, 9)
    ([-3.162278, 3.162278], 100.0)
    """
    wells = stable_equilibria(model.stiffness)
    positive = [w for w in wells if w > 0.0]
    if model.k1 < 0.0 and positive:
        outer = min(positive)
        barrier = float(model.potential_energy(0.0) - model.potential_energy(outer))
        k_well = force_slope(model.stiffness, outer)
        regime = "bistable"
    else:
        barrier = 0.0
        k_well = force_slope(model.stiffness, 0.0)
        regime = "monostable"
    linear = model.linear_stiffness_N_per_m
    return Wells(
        regime=regime,
        wells_m=wells,
        barrier_J=barrier,
        well_frequency_Hz=math.sqrt(max(k_well, 0.0) / model.mass_kg) / (2 * math.pi),
        linear_frequency_Hz=(math.sqrt(linear / model.mass_kg) / (2 * math.pi)
                             if linear and linear > 0 else None),
    )


def well_stiffness(model: ReducedModel) -> float:
    """Small-oscillation stiffness about the stable rest position [N/m].

    F'(x_w) = Σ (2j+1) k_(2j+1) x_w^(2j) at the first well x_w > 0 when bistable (−2 k1 for
    k1 x + k3 x³), k1 when monostable.
    """
    positive = [w for w in stable_equilibria(model.stiffness) if w > 0.0]
    if model.k1 < 0.0 and positive:
        return force_slope(model.stiffness, min(positive))
    return model.k1


def equivalent_cubic(model: ReducedModel) -> float:
    """k3 [N/m³] of the cubic k1 x + k3 x³ with the model's k1 and its barrier ΔU.

        k3_eq = k1²/(4 ΔU)

    The Melnikov energy balance is an integral along the separatrix, the orbit that leaves
    x = 0 with the barrier's worth of energy, so a cubic with the right k1 (the saddle, hence
    ω0) and the right ΔU carries the energy scale of the real well; x0 = √(−k1/k3_eq) is then
    an equivalent well position, not the exact one.  With no terms beyond k3 this is k3 itself.

    References
    ----------
    Guckenheimer & Holmes (1983), Nonlinear Oscillations, Dynamical Systems, and Bifurcations
    of Vector Fields, Springer, §4.5 (Melnikov function of the double well);
    Kovacic & Brennan (2011), The Duffing Equation, Wiley, ch. 1 (ΔU = k1²/(4 k3)).
    """
    if not any(model.stiffness[2:]):
        return model.k3
    barrier = analyse_wells(model).barrier_J
    return model.k1 * model.k1 / (4.0 * barrier)


def nondimensional_groups(model: ReducedModel) -> dict[str, float]:
    """Scales of u'' + δu' − u + u³ = γ cos ωτ for a bistable model (harvester/METHODS.md §4).

    ω0 = √(−k1/m) (exact at the saddle), x0 = √(−k1/k3_eq) with the barrier-matched cubic of
    `equivalent_cubic` (x0 = √(−k1/k3) for a pure cubic), δ = c/(m ω0); a base acceleration a
    gives γ = m_f a/(m x0 ω0²), so `forcing_per_mps2` = m_f/(m x0 ω0²).  Empty when monostable.
    """
    if not model.is_bistable:
        return {}
    omega0 = math.sqrt(-model.k1 / model.mass_kg)
    x0 = math.sqrt(-model.k1 / equivalent_cubic(model))
    groups = {
        "omega0_rad_per_s": omega0,
        "x0_m": x0,
        "delta": model.damping_N_s_per_m / (model.mass_kg * omega0),
        "forcing_per_mps2": model.forcing_mass_kg / (model.mass_kg * x0 * omega0**2),
    }
    a, g, h = model.circuit_coefficients()
    if isinstance(model.transducer, PiezoCircuit):
        # coupling coefficient squared referred to the stiffness about the well: θ²/(C F'(x_w))
        groups["coupling_k2"] = g * g / (a * well_stiffness(model))
        groups["circuit_time_constant_s"] = a / h if h else math.inf
    elif isinstance(model.transducer, CoilCircuit):
        # the coil's resistive damping in units of δ: (Bl)²/(R_c + R_l)/(m ω0)
        groups["electrical_delta"] = g * g / h / (model.mass_kg * omega0)
        groups["circuit_time_constant_s"] = a / h
    return groups
