"""The reduced model: one degree of freedom (tip deflection x) coupled to one circuit.

    m ẍ + c ẋ + k1 x + k3 x³ + k5 x⁵ + … (+ k0 + k2 x² + …) + g q = −m_f a(t)
    piezo:  C v̇ + v/R_l − θ ẋ = 0               (q = v, g = θ)
    coil:   L i̇ + (R_c + R_l) i − Bl ẋ = 0       (q = i, g = Bl)

The transducer works into a resistive load R_l, or (`interface`, a `BridgeCircuit`) into a
full-wave diode bridge and a store: the bridge conducts only while the transducer's voltage
exceeds the store voltage plus two diode drops, and the circuit is then piecewise
(`harvester.dynamics.integrator`, "Rectifier bridge").

Everything upstream (case files, beam and magnet physics) builds a `ReducedModel`;
everything downstream (dynamics, analysis, report) consumes one.  All fields are SI floats.

The restoring force is odd (symmetric wells) unless `even_stiffness` has terms: a constant
force k0 (gravity along the deflection, say) or even powers from an asymmetric magnet pair give
unequal wells, whose saddle moves off x = 0.  The odd series stays in `stiffness`, so that a
symmetric model is what it always was and every caller that reads k1, k3, … keeps working; the
even terms are an added field, and `force_coefficients` gives the whole series by power.
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
class VoltageStore:
    """A store that holds its voltage whatever it takes in: a cell, or the regulated input of
    a power converter."""

    voltage_V: float  # V_s [V]


@dataclass(frozen=True)
class CapacitorStore:
    """A storage capacitor with a DC load across it: C_s V̇_s = i_bridge − V_s/R_L."""

    capacitance_F: float  # C_s [F]
    load_ohm: float = math.inf  # R_L [Ω]; inf: no load
    initial_V: float = 0.0  # V_s at the start [V]


@dataclass(frozen=True)
class BridgeCircuit:
    """A full-wave bridge of four diodes into a store, in place of the resistive load.

    Two diodes conduct at a time, each with a constant forward drop V_D (0: ideal diodes), so
    the bridge conducts while the transducer's terminal voltage would exceed V_s + 2 V_D, and
    then holds it there (Guyomar et al. 2005, IEEE Trans. UFFC 52:584, the "standard"
    interface).  The drop is all the diode model has: no reverse recovery, no leakage, no
    junction capacitance.
    """

    diode_drop_V: float  # V_D per diode [V]
    store: VoltageStore | CapacitorStore

    @property
    def clamp_V(self) -> float:
        """V_s + 2 V_D [V] at the store's voltage (its initial one for a capacitor)."""
        return self.store_voltage_V + 2.0 * self.diode_drop_V

    @property
    def store_voltage_V(self) -> float:
        """The store's voltage [V]: a voltage store's, or a capacitor's initial one."""
        store = self.store
        return store.voltage_V if isinstance(store, VoltageStore) else store.initial_V


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
    # even-power coefficients (k0 [N], k2 [N/m²], k4 [N/m⁴], …); empty: an odd force
    even_stiffness: tuple[float, ...] = ()
    # None: the transducer works into load_ohm; a bridge: into the bridge and its store, and
    # load_ohm is not used
    interface: BridgeCircuit | None = None

    # -- derived quantities ---------------------------------------------------------------
    @property
    def k1(self) -> float:
        return self.stiffness[0]

    @property
    def k3(self) -> float:
        return self.stiffness[1] if len(self.stiffness) > 1 else 0.0

    @property
    def is_symmetric(self) -> bool:
        """No even terms: F is odd, the wells are mirror images and the saddle is at x = 0."""
        return not any(self.even_stiffness)

    @property
    def force_coefficients(self) -> tuple[float, ...]:
        """(k0, k1, k2, k3, …) [N/m^p], ascending powers: F(x) = Σ_p k_p x^p."""
        series = [0.0] * max(2 * len(self.stiffness), 2 * len(self.even_stiffness) - 1)
        for j, k in enumerate(self.stiffness):
            series[2 * j + 1] = float(k)
        for j, k in enumerate(self.even_stiffness):
            series[2 * j] = float(k)
        return tuple(series)

    @property
    def is_bistable(self) -> bool:
        """Two stable equilibria with a saddle between them (`analyse_wells`).  For an odd force:
        k1 < 0 and the force turns positive again, a stable equilibrium x > 0 exists."""
        if self.is_symmetric:
            return self.k1 < 0.0 and any(w > 0.0 for w in stable_equilibria(self.stiffness))
        return analyse_wells(self).regime == "bistable"

    def restoring_force(self, x):
        """F(x) = Σ k_(2j+1) x^(2j+1) + Σ k_2j x^2j  [N]; works on floats and numpy arrays."""
        total = 0.0 * x
        power = x
        x2 = x * x
        for k in self.stiffness:
            total = total + k * power
            power = power * x2
        if not self.is_symmetric:
            power = 1.0 + 0.0 * x
            for k in self.even_stiffness:
                total = total + k * power
                power = power * x2
        return total

    def potential_energy(self, x):
        """U(x) = ∫_0^x F dx = Σ_p k_p x^(p+1)/(p+1)  [J], U(0) = 0; see `odd_potential` and
        `series_potential`."""
        if self.is_symmetric:
            return odd_potential(self.stiffness, x)
        return series_potential(self.force_coefficients, x)

    def stiffness_at(self, x: float) -> float:
        """F'(x) = Σ_p p k_p x^(p−1)  [N/m] at a deflection x [m]."""
        slope = force_slope(self.stiffness, x)
        for j, k in enumerate(self.even_stiffness[1:], start=1):
            slope += 2 * j * k * x ** (2 * j - 1)
        return slope

    def circuit_coefficients(self) -> tuple[float, float, float]:
        """(a, g, h) of the circuit written as  a q̇ = g ẋ − h q,  force on the beam g q.

        Piezo: a = C_p, g = θ, h = 1/R_l.  Coil: a = L_c, g = Bl, h = R_c + R_l.
        No transducer: (0, 0, 1).  With a = 0 the circuit is a viscous damper g²/h.  Behind a
        bridge, the terms of the transducer alone (the bridge is not linear): h = 0 for a
        piezo (open between conductions), R_c for a coil (shorted, at no drop).
        """
        t = self.transducer
        if t is None:
            return 0.0, 0.0, 1.0
        if self.interface is not None:
            if isinstance(t, PiezoCircuit):
                return t.capacitance_F, t.coupling_N_per_V, 0.0
            return t.inductance_H, t.flux_linkage_V_s_per_m, t.resistance_ohm
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

    def with_interface(self, interface: BridgeCircuit | None) -> ReducedModel:
        """The same model working into `interface` (None: into its resistive load)."""
        return replace(self, interface=interface)

    def with_store_voltage(self, voltage_V: float) -> ReducedModel:
        """The same bridge working into a store held at `voltage_V` [V]."""
        if self.interface is None:
            raise ValueError("a model without a bridge has no store")
        return replace(self, interface=replace(self.interface,
                                               store=VoltageStore(voltage_V)))

    def without_magnets(self) -> ReducedModel:
        """The same beam with no magnets: linear, stiffness of the bare beam.  Even terms go too:
        a constant force would only move the rest position of a linear beam, not its motion."""
        if self.linear_stiffness_N_per_m is None:
            raise ValueError("this model does not know the magnet-free beam stiffness")
        return replace(self, stiffness=(self.linear_stiffness_N_per_m,), even_stiffness=())


# -- static double-well analysis ------------------------------------------------------------------
@dataclass(frozen=True)
class Wells:
    """Equilibria of the reduced model and the barriers between them (SI).

    A bistable model has two wells either side of a saddle; with an odd force they are mirror
    images (x_w, −x_w, saddle 0) and the pairs below hold two equal numbers.
    """

    regime: str  # "bistable" | "monostable"
    wells_m: tuple[float, ...]  # bistable: (left, right) either side of the saddle; monostable:
    #                             the stable equilibria, ascending
    barrier_J: float  # the lower of barriers_J: min over wells of U(saddle) − U(well); 0 if mono
    well_frequency_Hz: float  # the lower of well_frequencies_Hz (monostable: about its rest)
    linear_frequency_Hz: float | None  # same beam without magnets
    saddle_m: float | None = None  # the barrier top between the wells; None when monostable
    barriers_J: tuple[float, ...] = ()  # U(saddle) − U(well) from the left and the right well
    well_frequencies_Hz: tuple[float, ...] = ()  # small oscillation in the left and right well
    #                                              (monostable: about the rest position)


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


def series_potential(coefficients: tuple[float, ...], x):
    """U(x) = Σ_p k_p x^(p+1)/(p+1)  [J] of F(x) = Σ_p k_p x^p (ascending coefficients), U(0) = 0;
    works on floats and numpy arrays."""
    total = 0.0 * x
    power = x
    for p, k in enumerate(coefficients):
        total = total + k * power / (p + 1)
        power = power * x
    return total


def equilibria(model: ReducedModel) -> tuple[tuple[float, ...], tuple[float, ...]]:
    """(stable, unstable) equilibria [m] of a model, each ascending: the real roots of F(x) = 0
    with F'(x) > 0 and F'(x) < 0.

    The roots of the whole series (`force_coefficients`) are the eigenvalues of its companion
    matrix (numpy.polynomial), polished by three Newton steps.
    """
    import numpy as np
    from numpy.polynomial import polynomial as poly

    coefficients = np.trim_zeros(np.asarray(model.force_coefficients), "b")
    if coefficients.size < 2:
        return (), ()
    derivative = poly.polyder(coefficients)
    found = set()
    for root in poly.polyroots(coefficients):
        if abs(root.imag) > 1e-9 * max(1.0, abs(root.real)):
            continue
        x = float(root.real)
        for _ in range(3):
            slope = float(poly.polyval(x, derivative))
            if slope == 0.0:
                break
            x -= float(poly.polyval(x, coefficients)) / slope
        found.add(x)
    stable = tuple(sorted(x for x in found if model.stiffness_at(x) > 0.0))
    unstable = tuple(sorted(x for x in found if model.stiffness_at(x) < 0.0))
    return stable, unstable


def _frequency_Hz(stiffness_N_per_m: float, mass_kg: float) -> float:
    return math.sqrt(max(stiffness_N_per_m, 0.0) / mass_kg) / (2 * math.pi)


def analyse_wells(model: ReducedModel) -> Wells:
    """Wells, saddle, barriers and small-oscillation frequencies of a reduced model.

    For k1 < 0 < k3 (and no higher terms) the wells are ±√(−k1/k3), the barrier is k1²/(4k3)
    and the well frequency is √2·ω0 with ω0 = √(−k1/m) (Guckenheimer & Holmes 1983, §2.2).
    The wells are the stable equilibria either side of the saddle: ±x_w, x_w the first positive
    one, for an odd force; with even terms the saddle is the unstable equilibrium with a well
    on each side that lies nearest the undeflected beam x = 0 (a fitted force can have spurious
    roots far out), its wells are those neighbours, and each well's barrier is U(saddle) −
    U(well).  For
    k1 x + k2 x² + k3 x³ the wells are the roots of k3 x² + k2 x + k1 = 0 and the saddle is 0.

    Examples
    --------
    k1 = −40 N/m, k3 = 4e6 N/m³: wells at ±√(40/4e6) m, barrier 40²/(4·4e6) J = 100 µJ.

    >>> wells = analyse_wells(ReducedModel(0.01, 0.01, (-40.0, 4e6), 0.01))
    >>> [round(w * 1e3, 6) for w in wells.wells_m], round(wells.barrier_J * 1e6, 9)
    ([-3.162278, 3.162278], 100.0)
    """
    linear = model.linear_stiffness_N_per_m
    linear_Hz = _frequency_Hz(linear, model.mass_kg) if linear and linear > 0 else None
    if not model.is_symmetric:
        return _asymmetric_wells(model, linear_Hz)
    wells = stable_equilibria(model.stiffness)
    positive = [w for w in wells if w > 0.0]
    if model.k1 < 0.0 and positive:
        outer = min(positive)
        barrier = float(model.potential_energy(0.0) - model.potential_energy(outer))
        k_well = force_slope(model.stiffness, outer)
        frequency = _frequency_Hz(k_well, model.mass_kg)
        return Wells(regime="bistable", wells_m=(-outer, outer), barrier_J=barrier,
                     well_frequency_Hz=frequency, linear_frequency_Hz=linear_Hz, saddle_m=0.0,
                     barriers_J=(barrier, barrier), well_frequencies_Hz=(frequency, frequency))
    frequency = _frequency_Hz(force_slope(model.stiffness, 0.0), model.mass_kg)
    return Wells(regime="monostable", wells_m=wells, barrier_J=0.0, well_frequency_Hz=frequency,
                 linear_frequency_Hz=linear_Hz, well_frequencies_Hz=(frequency,))


def _asymmetric_wells(model: ReducedModel, linear_Hz: float | None) -> Wells:
    stable, unstable = equilibria(model)
    points = sorted([(x, True) for x in stable] + [(x, False) for x in unstable])
    flanked = [points[i][0] for i in range(1, len(points) - 1)
               if not points[i][1] and points[i - 1][1] and points[i + 1][1]]
    if not flanked:
        rest = min(stable, key=abs, default=0.0)
        frequency = _frequency_Hz(model.stiffness_at(rest), model.mass_kg)
        return Wells(regime="monostable", wells_m=stable, barrier_J=0.0,
                     well_frequency_Hz=frequency, linear_frequency_Hz=linear_Hz,
                     well_frequencies_Hz=(frequency,))
    saddle = min(flanked, key=abs)
    i = [x for x, _ in points].index(saddle)
    pair = (points[i - 1][0], points[i + 1][0])
    top = float(model.potential_energy(saddle))
    barriers = tuple(top - float(model.potential_energy(w)) for w in pair)
    frequencies = tuple(_frequency_Hz(model.stiffness_at(w), model.mass_kg) for w in pair)
    return Wells(regime="bistable", wells_m=pair, barrier_J=min(barriers),
                 well_frequency_Hz=min(frequencies), linear_frequency_Hz=linear_Hz,
                 saddle_m=saddle, barriers_J=barriers, well_frequencies_Hz=frequencies)


def rest_well(wells: Wells) -> float:
    """The well a bistable beam rests in by default [m]: the deeper one (the higher barrier),
    the right one when both are alike (as for an odd force); the rest position when
    monostable (the stable equilibrium nearest x = 0)."""
    if wells.regime != "bistable":
        return min(wells.wells_m, key=abs, default=0.0)
    left, right = wells.wells_m
    return left if wells.barriers_J[0] > wells.barriers_J[1] else right


def well_stiffness(model: ReducedModel) -> float:
    """Small-oscillation stiffness about the stable rest position [N/m].

    F'(x_w) = Σ (2j+1) k_(2j+1) x_w^(2j) at the first well x_w > 0 when bistable (−2 k1 for
    k1 x + k3 x³), k1 when monostable.  With even terms, F' at `rest_well`.
    """
    if not model.is_symmetric:
        return model.stiffness_at(rest_well(analyse_wells(model)))
    positive = [w for w in stable_equilibria(model.stiffness) if w > 0.0]
    if model.k1 < 0.0 and positive:
        return force_slope(model.stiffness, min(positive))
    return model.k1


def saddle_stiffness(model: ReducedModel) -> float:
    """F'(x_s) [N/m] at the saddle of a bistable model (< 0): k1 for an odd force."""
    if model.is_symmetric:
        return model.k1
    return model.stiffness_at(analyse_wells(model).saddle_m)


def equivalent_cubic(model: ReducedModel) -> float:
    """k3 [N/m³] of the cubic k1 x + k3 x³ with the model's saddle stiffness and barrier ΔU.

        k3_eq = k_s²/(4 ΔU),   k_s = F'(x_s)  (k1 for an odd force)

    The Melnikov energy balance is an integral along the separatrix, the orbit that leaves
    the saddle with the barrier's worth of energy, so a cubic with the right k_s (hence ω0)
    and the right ΔU carries the energy scale of the real well; x0 = √(−k_s/k3_eq) is then an
    equivalent well position, not the exact one.  With no terms beyond k3 this is k3 itself;
    with unequal wells ΔU is the lower barrier.

    References
    ----------
    Guckenheimer & Holmes (1983), Nonlinear Oscillations, Dynamical Systems, and Bifurcations
    of Vector Fields, Springer, §2.2 (ΔU = k1²/(4 k3)) and §4.5 (Melnikov function of the
    double well).
    """
    if model.is_symmetric and not any(model.stiffness[2:]):
        return model.k3
    k_s = saddle_stiffness(model)
    return k_s * k_s / (4.0 * analyse_wells(model).barrier_J)


def nondimensional_groups(model: ReducedModel) -> dict[str, float]:
    """Scales of u'' + δu' − u + u³ = γ cos ωτ for a bistable model (Guckenheimer & Holmes
    1983, §2.2).

    ω0 = √(−k_s/m) with k_s = F'(x_s) at the saddle (k1 for an odd force), x0 = √(−k_s/k3_eq)
    with the barrier-matched cubic of `equivalent_cubic` (x0 = √(−k1/k3) for a pure cubic),
    δ = c/(m ω0); a base acceleration a gives γ = m_f a/(m x0 ω0²), so `forcing_per_mps2` =
    m_f/(m x0 ω0²).  Empty when monostable.
    """
    if not model.is_bistable:
        return {}
    k_s = saddle_stiffness(model)
    omega0 = math.sqrt(-k_s / model.mass_kg)
    x0 = math.sqrt(-k_s / equivalent_cubic(model))
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
