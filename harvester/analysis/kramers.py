"""Noise-activated escape over the barrier: how often white noise hops the beam between wells.

For a unit mass, ẍ + γẋ + U'(x) = ξ(t) with ⟨ξ(t)ξ(s)⟩ = 2D δ(t − s), the stationary
distribution is Boltzmann's at the temperature k_BT = D/γ (Hänggi, Talkner & Borkovec 1990, Rev.
Mod. Phys. 62:251; "temperature" here is a kinetic energy per unit mass [m²/s²], not a physical
one).  A base acceleration of one-sided PSD G acting through m_f gives ξ = −(m_f/m) a, so
2D = (m_f/m)² G/2 and k_BT = (m_f/m)² G/(4γ): the same equipartition E[ẋ²] = k_BT as the white-
noise identity of `harvester.analysis.random_power`.

The escape rate from one well depends on the loss per excursion, Δ = γ I_b/k_BT (I_b = ∮ẋ dx on
the separatrix loop of one well):
- Δ ≫ 1, moderate to strong damping: spatial diffusion (Kramers), `spatial_diffusion_rate`;
- Δ ≪ 1, light damping: energy diffusion, `energy_diffusion_rate`;
- in between: Mel'nikov & Meshkov's turnover factor bridges the two, `turnover_factor`.
An escape from one well is not yet a hop to the other: at light damping the beam that crosses the
barrier keeps nearly all its energy and may come back over it.  For a symmetric double well the
well-to-well rate is A(Δ)²/A(2Δ) · r_SD (`hop_factor`), which tends to r_SD at strong damping and
to r_ED/2 at light damping (half the escapes end in the other well).
All need a high barrier, ΔU/k_BT ≳ 5 (about 4 still gives ~10 %).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from scipy.integrate import quad
from scipy.optimize import brentq

from harvester.analysis.melnikov import NoHomoclinicOrbit
from harvester.model import ReducedModel, analyse_wells, saddle_stiffness

# how far out (in saddle-to-well distances) the separatrix's turning point is looked for
SEPARATRIX_REACH_WELLS = 64.0


def spatial_diffusion_rate(
    well_angular_frequency: float,
    barrier_angular_frequency: float,
    damping_rate: float,
    barrier_over_temperature: float,
) -> float:
    """Kramers escape rate [1/s] from one well, moderate-to-strong damping.

        r_SD = (ω_a / (2π ω_b)) (sqrt(γ²/4 + ω_b²) − γ/2) exp(−ΔU/k_BT)

    Valid for Δ = γ I_b/k_BT ≫ 1 and ΔU/k_BT ≳ 5; tends to transition-state theory
    (ω_a/2π) exp(−ΔU/k_BT) as γ → 0, where it overestimates (use the turnover factor).

    Parameters
    ----------
    well_angular_frequency : ω_a = sqrt(U''(x_well)) [rad/s]
    barrier_angular_frequency : ω_b = sqrt(−U''(x_barrier)) [rad/s]
    damping_rate : γ = c/m [1/s]
    barrier_over_temperature : ΔU/k_BT [-]

    References
    ----------
    Kramers (1940), Physica 7:284; Hänggi, Talkner & Borkovec (1990), Rev. Mod. Phys. 62:251
    (the spatial-diffusion rate).

    Examples
    --------
    Unit double well U = −x²/2 + x⁴/4 (ω_a = √2, ω_b = 1, ΔU = 1/4) at k_BT = 1/16, γ = 1:

    >>> round(spatial_diffusion_rate(math.sqrt(2.0), 1.0, 1.0, 4.0), 7)
    0.0025478
    """
    wa, wb, g = well_angular_frequency, barrier_angular_frequency, damping_rate
    prefactor = wa / (2.0 * math.pi * wb) * (math.sqrt(0.25 * g * g + wb * wb) - 0.5 * g)
    return prefactor * math.exp(-barrier_over_temperature)


def energy_diffusion_rate(
    well_angular_frequency: float,
    loss_parameter: float,
    barrier_over_temperature: float,
) -> float:
    """Escape rate [1/s] from one well at light damping (energy diffusion).

        r_ED = Δ (ω_a/2π) exp(−ΔU/k_BT),   Δ = γ I_b / k_BT

    Valid for Δ ≪ 1 and ΔU/k_BT ≳ 5.

    Parameters
    ----------
    well_angular_frequency : ω_a [rad/s]
    loss_parameter : Δ = γ I_b/k_BT, the energy lost on the separatrix over k_BT [-]
    barrier_over_temperature : ΔU/k_BT [-]

    References
    ----------
    Kramers (1940), Physica 7:284; Hänggi, Talkner & Borkovec (1990), Rev. Mod. Phys. 62:251
    (the energy-diffusion rate).
    """
    return (
        loss_parameter
        * well_angular_frequency
        / (2.0 * math.pi)
        * math.exp(-barrier_over_temperature)
    )


def turnover_factor(loss_parameter: float) -> float:
    """Mel'nikov–Meshkov depopulation factor A(Δ) ∈ (0, 1) multiplying r_SD at any damping.

        A(Δ) = exp[(1/π) ∫₀^∞ ln(1 − exp(−Δ(λ² + 1/4))) dλ/(λ² + 1/4)]

    A → Δ for Δ ≪ 1 (recovering r_ED) and A → 1 for Δ ≫ 1 (recovering r_SD).  The formula is
    quoted from memory; its two limits are checked in the tests.

    References
    ----------
    Mel'nikov & Meshkov (1986), J. Chem. Phys. 85:1018; Hänggi, Talkner & Borkovec (1990), §V.
    """
    d = loss_parameter
    if d <= 0.0:
        return 0.0

    def integrand(lam: float) -> float:
        s = lam * lam + 0.25
        return math.log(-math.expm1(-d * s)) / s

    value, _ = quad(integrand, 0.0, math.inf, limit=200)
    return math.exp(value / math.pi)


def hop_factor(loss_parameter: float) -> float:
    """Factor A(Δ)²/A(2Δ) multiplying r_SD to give the well-to-well hop rate of a symmetric
    double well, at any damping.

        r_hop = A(Δ)² / A(2Δ) · r_SD,   A: `turnover_factor`

    A trajectory leaving one well over the barrier either settles in the other or, at light
    damping, comes back; the factor counts settled arrivals.  It → Δ/2 for Δ ≪ 1 (r_hop →
    r_ED/2) and → 1 for Δ ≫ 1 (r_hop → r_SD).  Quoted from memory; its limits are checked in
    the tests.

    Parameters
    ----------
    loss_parameter : Δ = γ I_b/k_BT [-]

    References
    ----------
    Mel'nikov (1991), Phys. Rep. 209:1 (the symmetric double well); Hänggi, Talkner &
    Borkovec (1990), Rev. Mod. Phys. 62:251, §V.
    """
    if loss_parameter <= 0.0:
        return 0.0
    return turnover_factor(loss_parameter) ** 2 / turnover_factor(2.0 * loss_parameter)


def separatrix_action(model: ReducedModel, well: int = 1) -> float:
    """I_b = ∮ ẋ dx [m²/s] on the separatrix loop of one well, for a unit mass:
    2 |∫_x_s^x_t sqrt(2 (U(x_s) − U(x))/m) dx|, x_s the saddle and x_t the outer turning point
    U(x_t) = U(x_s) beyond the well on side `well` (+1 right, −1 left; an odd force's loops
    are alike).  For U = −x²/2 + x⁴/4 (m = 1) it is 4/3 (Hänggi, Talkner & Borkovec 1990).

    >>> round(separatrix_action(ReducedModel(1.0, 0.1, (-1.0, 1.0), 1.0)), 9)
    1.333333333
    """
    wells = _require_double_well(model)
    m = model.mass_kg
    saddle = wells.saddle_m
    top = model.potential_energy(saddle)
    x_well = wells.wells_m[1] if well > 0 else wells.wells_m[0]

    def height(x: float) -> float:
        return model.potential_energy(x) - top

    x_turn = saddle + 2.0 * (x_well - saddle)
    # a fitted potential may never climb back to the saddle's level before its range ends
    # (wells so deep that the loop would leave the fit): then there is no separatrix loop
    reach = SEPARATRIX_REACH_WELLS * abs(x_well - saddle)
    if math.isfinite(model.travel_limit_m):
        reach = min(reach, model.travel_limit_m + abs(saddle))
    while height(x_turn) < 0.0:
        if abs(x_turn - saddle) > reach:
            raise NoHomoclinicOrbit("the potential does not climb back to the saddle's level "
                                    "within the model's range: no separatrix loop")
        x_turn = saddle + 2.0 * (x_turn - saddle)
    x_turn = brentq(height, min(x_well, x_turn), max(x_well, x_turn),
                    xtol=1e-15 * abs(x_turn))

    def speed(x: float) -> float:
        return math.sqrt(max(-2.0 * height(x) / m, 0.0))

    value, _ = quad(speed, min(saddle, x_turn), max(saddle, x_turn), limit=200)
    return 2.0 * value


@dataclass(frozen=True)
class EscapeRates:
    """Escape and hop rates [1/s] of a double-well model under white base acceleration.

    An escape leaves one well over the barrier; a hop arrives and settles in the other well.
    The hop rate is what a Monte Carlo counts as well changes.
    """

    temperature_m2_per_s2: float  # k_BT per unit mass
    barrier_over_temperature: float  # ΔU/k_BT
    loss_parameter: float  # Δ = γ I_b/k_BT
    spatial_diffusion_per_s: float
    energy_diffusion_per_s: float
    turnover_escape_per_s: float  # A(Δ) · r_SD: escapes from one well, any damping
    turnover_hop_per_s: float  # A(Δ)²/A(2Δ) · r_SD: well-to-well hops, any damping
    validity: str

    def to_dict(self) -> dict:
        return dict(self.__dict__)


def white_noise_escape_rates(
    model: ReducedModel, psd_level_m2_s4_per_Hz: float, damping_N_s_per_m: float | None = None,
    well: int = 1,
) -> EscapeRates:
    """Escape and hop rates of a double-well model under white base acceleration of one-sided
    PSD G (`EscapeRates`), out of the well on side `well` (+1 right, −1 left).

    γ = c/m, k_BT = (m_f/m)² G/(4γ) (module notes); ΔU (that well's barrier), ω_a (its
    curvature), ω_b (the saddle's) and I_b from the polynomial potential.  With unequal wells
    each well has its own escape rate; the hop factor A(Δ)²/A(2Δ) is the symmetric double
    well's, so the hop rate is then only indicative (see `validity`).
    `damping_N_s_per_m` defaults to the mechanical damping; pass c + c_e to include a resistive
    coil's electrical damping c_e = (Bl)²/(R_c + R_l).
    """
    wells = _require_double_well(model)
    side = 1 if well > 0 else 0
    m = model.mass_kg
    c = model.damping_N_s_per_m if damping_N_s_per_m is None else damping_N_s_per_m
    gamma = c / m
    temperature = (model.forcing_mass_kg / m) ** 2 * psd_level_m2_s4_per_Hz / (4.0 * gamma)
    ratio = wells.barriers_J[side] / m / temperature
    w_a = 2.0 * math.pi * wells.well_frequencies_Hz[side]
    w_b = math.sqrt(-saddle_stiffness(model) / m)
    loss = gamma * separatrix_action(model, well) / temperature
    r_sd = spatial_diffusion_rate(w_a, w_b, gamma, ratio)
    notes = []
    if ratio < 5.0:
        notes.append(f"barrier only {ratio:.2g} k_BT (formulas need ≳ 5)")
    if not model.is_symmetric:
        notes.append("unequal wells: the hop factor assumes a symmetric double well")
    notes.append(
        "spatial diffusion applies (Δ ≫ 1)"
        if loss > 10.0
        else "energy diffusion applies (Δ ≪ 1)"
        if loss < 0.1
        else "between the regimes: use the turnover values"
    )
    return EscapeRates(
        temperature_m2_per_s2=temperature,
        barrier_over_temperature=ratio,
        loss_parameter=loss,
        spatial_diffusion_per_s=r_sd,
        energy_diffusion_per_s=energy_diffusion_rate(w_a, loss, ratio),
        turnover_escape_per_s=turnover_factor(loss) * r_sd,
        turnover_hop_per_s=hop_factor(loss) * r_sd,
        validity="; ".join(notes),
    )


def _require_double_well(model: ReducedModel):
    wells = analyse_wells(model)
    if wells.regime != "bistable" or len(wells.wells_m) != 2:
        raise ValueError("escape rates need a double well (two wells either side of a saddle)")
    return wells
