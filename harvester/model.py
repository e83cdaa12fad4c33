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
        return self.k1 < 0.0 and self.k3 > 0.0

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
        """U(x) = Σ k_(2j+1) x^(2j+2)/(2j+2)  [J]."""
        total = 0.0 * x
        x2 = x * x
        power = x2
        for j, k in enumerate(self.stiffness):
            total = total + k * power / (2 * j + 2)
            power = power * x2
        return total

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
