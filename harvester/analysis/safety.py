"""Stress and safety checks of a predicted response: fatigue, yield, ceramic, travel, magnets.

A bistable beam rests pre-bent in a well and moves about it.  The dynamics report the extremes
of the tip deflection, x_min and x_max; every root fibre's stress is linear in x (σ = s·x, with s
the stress per unit tip deflection of that fibre), so its cycle runs between s·x_min and s·x_max:
the mean stress comes from the mean deflection, the alternating stress from the swing about it.

Either well.  When the reduced model's restoring force is odd in x, whatever the beam does
about one well it can equally do about the other: every stress and strain check covers the
envelope x_min…x_max and its mirror image −x_max…−x_min.  For an asymmetric section (a unimorph,
whose neutral axis can lie inside the ceramic) the two wells load different faces, and the
worse one governs.  Tip travel and magnet clearance are even in x already.  With unequal wells
(even terms in the force) the mirror argument fails: the checks then cover the envelope as
predicted and the beam at rest in each well, and the worst of the three governs.

Stresses are narrow-beam (Euler–Bernoulli) values; a wide strip in cylindrical bending cannot
contract across its width, and at the same curvature its stresses are up to 1/(1 − ν²) ≈ 1.1
higher (see `harvester.physics.stress`).

Every check compares a value with a limit and reports a margin:

- strength checks (Goodman, Langer, ceramic, travel, voltage): margin = limit/value, a safety
  factor; fail below 1, warn below `[limits].safety_factor`, pass otherwise;
- magnet clearance: margin = clearance/(10 % of the gap); fail when the magnets touch
  (clearance ≤ 0), warn below 10 % of the rest gap, pass otherwise;
- touch hazard: warn when the open-circuit voltage exceeds 60 V DC, whatever the case says.

A check that cannot be computed (a [reduced] case has no beam section or magnets; a coil has no
ceramic; no travel limit was given) is left out of `safety_checks` and named, with the reason,
by `omitted_checks`: nothing is dropped silently.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING

import numpy as np
from scipy.optimize import minimize_scalar

from harvester.build import Built
from harvester.case.schema import Case, Limits
from harvester.materials import Material, find_material
from harvester.model import CoilCircuit, PiezoCircuit, analyse_wells
from harvester.physics import magnets as mag
from harvester.physics.beam import section_layers
from harvester.physics.stress import (
    CERAMIC_STRAIN_LIMIT,
    CERAMIC_STRESS_LIMIT_PA,
    ceramic_check,
    ceramic_layer_stresses,
    fibre_stress_extremes,
    goodman_safety_factor,
    langer_yield_factor,
    mean_and_alternating,
    outer_fibre_strains,
    outer_fibre_stresses,
)

if TYPE_CHECKING:
    from harvester.analysis.fatigue import FatigueLife

LEVELS = ("pass", "warn", "fail")

# Warn when the magnets come closer than this fraction of their rest gap: placement tolerances
# and the single-mode shape make a near-touch prediction uncertain (engineering judgement).
CLEARANCE_WARNING_FRACTION = 0.1

# Samples of the swept deflection range before the closest approach is polished by Brent's
# bounded search; the clearance is smooth between the corners' contact changes.
CLEARANCE_SAMPLES = 257

_GOODMAN = "substrate fatigue (Goodman)"
_MINER = "substrate fatigue life (Miner)"
_LANGER = "substrate yield (Langer)"
_STRAIN = "ceramic tensile strain"
_STRESS = "ceramic tensile stress"
_TRAVEL = "tip travel"
_CLEARANCE = "magnet clearance"
_VOLTAGE = "open-circuit voltage"
# the short names narrow tables print (the full names are in JSON and the design note)
SHORT_NAMES = {
    _GOODMAN: "Goodman",
    _LANGER: "Langer",
    _STRAIN: "ceramic ε",
    _STRESS: "ceramic σ",
    _TRAVEL: "travel",
    _CLEARANCE: "clearance",
    _VOLTAGE: "voltage",
}
# DC voltage above which bare electrodes are a touch hazard: ES1 limit, IEC 62368-1 (memory)
VOLTAGE_TOUCH_HAZARD_V = 60.0

_MIRRORED = " (mirrored envelope)"
_EITHER_WELL = "over x_min…x_max and its mirror −x_max…−x_min (either well)"
_UNEQUAL_WELLS = "over x_min…x_max and at rest in each well (unequal wells: no mirror image)"
_NARROW_BEAM = (
    "narrow beam σ = E(z − zn)κ: a wide strip in cylindrical bending at the same curvature "
    "is up to 1/(1 − ν²) ≈ 1.1 higher (Timoshenko & Woinowsky-Krieger 1959, ch. 1)"
)


@dataclass(frozen=True)
class ResponseEnvelope:
    """What the dynamics predicted for one operating point (SI)."""

    x_min_m: float  # tip deflection extremes over the steady response
    x_max_m: float
    peak_open_circuit_voltage_V: float | None = None  # None: from θ, C_p and the stroke
    cycles_per_second: float = 0.0  # for information (fatigue duty)
    # Largest |v| across the piezo electrodes over the response, with its load; the ceramic
    # checks add its field to the strain in the worse polarity.  None: not predicted, and the
    # ceramic is taken as short-circuited.  θ(x_max − x_min)/C_p bounds it for any resistive
    # load (`open_circuit_voltage_swing`).
    peak_voltage_V: float | None = None

    def __post_init__(self) -> None:
        if not (math.isfinite(self.x_min_m) and math.isfinite(self.x_max_m)):
            raise ValueError(
                f"ResponseEnvelope deflections must be finite, got {self.x_min_m}, {self.x_max_m}"
            )
        if self.x_min_m > self.x_max_m:
            raise ValueError(
                f"ResponseEnvelope.x_min_m ({self.x_min_m}) exceeds x_max_m ({self.x_max_m})"
            )
        volts = self.peak_open_circuit_voltage_V
        if volts is not None and not (math.isfinite(volts) and volts >= 0.0):
            raise ValueError(
                f"ResponseEnvelope.peak_open_circuit_voltage_V must be finite and ≥ 0, got {volts}"
            )
        if not (math.isfinite(self.cycles_per_second) and self.cycles_per_second >= 0.0):
            raise ValueError(
                f"ResponseEnvelope.cycles_per_second must be finite and ≥ 0, got "
                f"{self.cycles_per_second}"
            )
        volts = self.peak_voltage_V
        if volts is not None and not (math.isfinite(volts) and volts >= 0.0):
            raise ValueError(f"ResponseEnvelope.peak_voltage_V must be finite and ≥ 0, got {volts}")


@dataclass(frozen=True)
class Check:
    """One safety check: a value against a limit, SI units."""

    name: str  # e.g. "substrate fatigue (Goodman)", "magnet clearance"
    value: float
    limit: float
    unit: str
    margin: float  # safety factor limit/value, or clearance/allowance (see `basis`)
    level: str  # "pass" | "warn" | "fail"
    basis: str  # one line: formula and source

    def __post_init__(self) -> None:
        if self.level not in LEVELS:
            raise ValueError(f"Check.level must be one of {LEVELS}, got {self.level!r}")

    @property
    def short_name(self) -> str:
        return SHORT_NAMES.get(self.name, self.name)


# -- physics ---------------------------------------------------------------------------------


def open_circuit_voltage_swing(
    coupling_N_per_V: float, capacitance_F: float, x_min_m: float, x_max_m: float
) -> float:
    """Peak-to-peak open-circuit voltage of a piezo transducer over a tip stroke [V].

    With no load the circuit equation C_p v̇ + v/R_l − θ ẋ = 0 becomes C_p v̇ = θ ẋ, so
    v(t) = v_0 + θ (x(t) − x_0)/C_p follows the deflection and

        v_max − v_min = |θ| (x_max − x_min)/C_p.

    The level v_0 is set by when the electrodes were last discharged; discharged at one end of
    the stroke, the whole swing appears in one polarity, so the swing is also the largest
    voltage the open element can show over that stroke.  Charge left from a discharge at
    another deflection x_ref adds θ(x_ref − x_0)/C_p: discharge before handling.

    It also bounds |v| under any resistive load R_l in steady operation: integrating
    C_p v̇ + v/R_l = θ ẋ by parts gives v = (θ/C_p)(x(t) − x̄(t)), x̄ a weighted mean of the
    past deflections (weights e^(−s/R_l C_p)/(R_l C_p)), so |v| ≤ θ(x_max − x_min)/C_p.

    Parameters
    ----------
    coupling_N_per_V : θ, electromechanical coupling in the tip coordinate [N/V]
    capacitance_F : C_p, capacitance seen by the load [F]
    x_min_m, x_max_m : ends of the tip stroke [m]

    References
    ----------
    Erturk & Inman (2009), Smart Mater. Struct. 18:025009 (the coupled circuit equation).

    Examples
    --------
    >>> round(open_circuit_voltage_swing(2e-4, 20e-9, -1e-3, 1e-3), 9)
    20.0
    """
    if not capacitance_F > 0.0:
        raise ValueError(f"capacitance must be positive, got {capacitance_F}")
    return abs(coupling_N_per_V) * (x_max_m - x_min_m) / capacitance_F


def static_envelope(built: Built) -> ResponseEnvelope:
    """The beam at rest in a well: x_min = x_max = the outer stable equilibrium [m].

    For a bistable model this is the positive (right) well; `safety_checks` also checks its
    mirror image, the negative well, which loads the other faces of an asymmetric section (with
    unequal wells, the left well at rest).  For a monostable model the straight beam, x = 0.
    """
    wells = analyse_wells(built.model).wells_m
    rest = max(wells, default=0.0)
    return ResponseEnvelope(x_min_m=rest, x_max_m=rest)


def design_materials(case: Case) -> tuple[Material | None, Material | None]:
    """The (substrate, ceramic) material records of a case; None where it has none."""
    if case.beam is None:
        return None, None
    substrate = find_material(case.beam.substrate.material, "substrate")
    ceramic = None
    if case.beam.piezo is not None:
        ceramic = find_material(case.beam.piezo.material, "piezo")
    return substrate, ceramic


# -- checks ----------------------------------------------------------------------------------


def safety_checks(
    built: Built,
    limits: Limits,
    envelope: ResponseEnvelope,
    *,
    substrate: Material | None = None,
    ceramic: Material | None = None,
) -> list[Check]:
    """Stress and safety checks of one predicted response, worst-governing fibre per check.

    Every stress and strain check covers the envelope and its mirror image −x_max … −x_min
    (either well; the reduced model is odd in x) and reports the governing one.  With unequal
    wells there is no mirror image: each check covers the envelope and the beam at rest in
    each well, and reports the worst.

    Substrate (root fibres, stress s·x per fibre, cycle s·x_min … s·x_max):
        modified Goodman   σ_a/S_e + σ_m/S_ut = 1/n   (σ_m < 0: n = S_e/σ_a)
        first-cycle yield  n_y = S_y/(σ_a + |σ_m|)   (Langer)
    S_e is the material's specimen fatigue strength at its stated cycles, with no Marin
    surface, size or reliability factors.
    Ceramic: peak tensile strain, and stress σ1 = c̄11 ε1 − ē31 E3 with any voltage up to the
    envelope's `peak_voltage_V` in either polarity (short circuit when it is None), against
    the material's limits (compression is not
    checked).  Tip travel: the outermost point of the tip body (the tip magnet's outer corner,
    turning with the beam; the tip itself when there is no magnet geometry) over the swept range
    against `limits.travel`.  Magnet clearance over the swept range x_min … x_max.
    Open-circuit voltage |θ|(x_max − x_min)/C_p against `limits.max_voltage`, and against the
    60 V DC touch-hazard limit always.

    A [reduced] case gives only the checks its model supports (travel, voltage); a coil beam
    has no ceramic checks.  `omitted_checks` names what was left out and why.

    Parameters
    ----------
    built : the built design (reduced model, and beam and magnets unless [reduced])
    limits : the case's [limits] (safety_factor, travel [m], max_voltage [V])
    envelope : the predicted response
    substrate : the substrate's material record; required when `built` has a beam
    ceramic : the ceramic's material record; required when the beam carries piezo layers

    Returns
    -------
    list of `Check`, in a fixed order: Goodman, Langer, ceramic strain, ceramic stress, travel,
    clearance, voltage, touch hazard (those that apply)

    References
    ----------
    Budynas & Nisbett (2011), *Shigley's Mechanical Engineering Design*, 9th ed., ch. 6
    (modified Goodman, Langer).  IEC 62368-1, ES1 limit of 60 V DC (memory).
    """
    return _assess_wells(built, limits, envelope, substrate, ceramic)[0]


def omitted_checks(
    built: Built,
    limits: Limits,
    envelope: ResponseEnvelope,
    *,
    substrate: Material | None = None,
    ceramic: Material | None = None,
) -> list[str]:
    """The checks `safety_checks` leaves out for this design, one line each with the reason."""
    return _assess_wells(built, limits, envelope, substrate, ceramic)[1]


def assess_safety(
    built: Built,
    limits: Limits,
    envelope: ResponseEnvelope,
    *,
    substrate: Material | None = None,
    ceramic: Material | None = None,
) -> tuple[list[Check], list[str]]:
    """`safety_checks` and `omitted_checks` from one pass (callers that want both)."""
    return _assess_wells(built, limits, envelope, substrate, ceramic)


def worst_margin(checks: Sequence[Check]) -> Check:
    """The governing check: the most severe level (fail > warn > pass), then the least margin.

    Margins of different kinds are not compared across levels: a warning clearance of 0.5 of
    its allowance is less severe than a Goodman factor of 0.9, which fails.
    """
    if not checks:
        raise ValueError("worst_margin needs at least one check")
    severity = {level: rank for rank, level in enumerate(LEVELS)}
    return max(checks, key=lambda c: (severity[c.level], -c.margin))


def _assess_wells(built, limits, envelope, substrate, ceramic) -> tuple[list[Check], list[str]]:
    """`_assess` for a symmetric model (mirrored fibres); with unequal wells `_assess` of the
    envelope and of the beam at rest in each well, the worst check of each name kept."""
    if built.model.is_symmetric or analyse_wells(built.model).regime != "bistable":
        return _assess(built, limits, envelope, substrate, ceramic)
    checks, omitted = _assess(built, limits, envelope, substrate, ceramic)
    index = {check.name: i for i, check in enumerate(checks)}
    severity = {level: rank for rank, level in enumerate(LEVELS)}
    for side, rest in zip(("left", "right"), analyse_wells(built.model).wells_m):
        at_rest = ResponseEnvelope(x_min_m=rest, x_max_m=rest)
        for check in _assess(built, limits, at_rest, substrate, ceramic)[0]:
            i = index.get(check.name)
            if i is None:
                continue
            worst = checks[i]
            if (severity[check.level], -check.margin) > (severity[worst.level], -worst.margin):
                checks[i] = replace(check, basis=f"{check.basis}; at rest in the {side} well")
    return [replace(c, basis=c.basis.replace(_EITHER_WELL, _UNEQUAL_WELLS)) for c in checks], \
        omitted


def _assess(built, limits, envelope, substrate, ceramic) -> tuple[list[Check], list[str]]:
    checks: list[Check] = []
    omitted: list[str] = []
    factor = limits.safety_factor
    design = built.beam_design
    if design is None or built.beam is None:
        omitted.append(
            f"{_GOODMAN}, {_LANGER}, {_STRAIN}, {_STRESS}: a [reduced] case has no "
            "beam section to take root stresses from"
        )
    else:
        if substrate is None:
            raise ValueError(
                "safety_checks needs the substrate's Material for a beam design "
                "(its fatigue and ultimate strengths); see design_materials()"
            )
        if design.piezo_layers and ceramic is None:
            raise ValueError(
                "safety_checks needs the ceramic's Material for a piezo beam "
                "(its tensile limits); see design_materials()"
            )
        fibres = _root_fibres(built)
        checks.append(_goodman(fibres, envelope, substrate, factor))
        if "yield_strength" in substrate.values:
            checks.append(_langer(fibres, envelope, substrate, factor))
        else:
            omitted.append(f"{_LANGER}: material {substrate.name!r} gives no yield_strength")
        if design.piezo_layers:
            checks.extend(_ceramic(built, fibres, envelope, ceramic, factor))
        else:
            omitted.append(f"{_STRAIN}, {_STRESS}: the beam carries no ceramic")

    if limits.travel is not None:
        checks.append(_travel(built, envelope, limits.travel, factor))
    else:
        omitted.append(f"{_TRAVEL}: no [limits].travel given")

    if built.tip is None or built.fixed is None or built.beam is None or built.gap_m is None:
        reason = (
            "a [reduced] case has no magnet geometry"
            if built.beam is None
            else "the design has no fixed magnet"
        )
        omitted.append(f"{_CLEARANCE}: {reason}")
    else:
        checks.append(_clearance(built, envelope))

    volts, volts_basis = _open_circuit_voltage(built, envelope, omitted)
    if volts is not None:
        checks.append(_voltage(volts, volts_basis, limits.max_voltage, factor))
    return checks, omitted


# -- the individual checks -------------------------------------------------------------------


@dataclass(frozen=True)
class _RootFibres:
    """Outer fibres of every layer at the clamped root, per unit tip deflection, each twice: as
    built and mirrored (s ↦ −s), so that an envelope x_min…x_max is checked together with its
    mirror image −x_max…−x_min (s·(−x) = (−s)·x).  The as-built fibres come first, so they win
    a tie (a symmetric envelope)."""

    where: tuple[str, ...]  # e.g. "upper face of the substrate"
    in_substrate: np.ndarray  # bool per fibre
    strain_per_m: np.ndarray  # [1/m]
    stress_Pa_per_m: np.ndarray  # [Pa/m]


def _root_fibres(built: Built) -> _RootFibres:
    """The root fibres, mirrored only for an odd force (`_assess_wells` covers unequal wells)."""
    layers = section_layers(built.beam_design)
    ceramics = sum(layer.name == "piezo" for layer in layers)
    labels = []
    for layer in layers:
        if layer.name == "substrate":
            labels.append("substrate")
        elif ceramics == 1:
            labels.append("ceramic")
        else:
            labels.append("lower ceramic" if layer.top_m <= 0.0 else "upper ceramic")
    bottoms = np.array([layer.bottom_m for layer in layers])
    tops = np.array([layer.top_m for layer in layers])
    moduli = np.array([layer.modulus_Pa for layer in layers])
    z_n = built.beam.neutral_axis_m
    kappa = built.beam.root_curvature_per_deflection_per_m2
    strain = np.concatenate(outer_fibre_strains(bottoms, tops, z_n, kappa))
    stress = np.concatenate(outer_fibre_stresses(moduli, bottoms, tops, z_n, kappa))
    where = tuple(f"lower face of the {label}" for label in labels) + tuple(
        f"upper face of the {label}" for label in labels
    )
    in_substrate = np.array([layer.name == "substrate" for layer in layers] * 2)
    if not built.model.is_symmetric:
        return _RootFibres(where, in_substrate, strain, stress)
    return _RootFibres(
        where + tuple(w + _MIRRORED for w in where),
        np.concatenate([in_substrate, in_substrate]),
        np.concatenate([strain, -strain]),
        np.concatenate([stress, -stress]),
    )


def _substrate_cycles(fibres: _RootFibres, envelope: ResponseEnvelope):
    lo, hi = fibre_stress_extremes(
        fibres.stress_Pa_per_m[fibres.in_substrate], envelope.x_min_m, envelope.x_max_m
    )
    mean, alternating = mean_and_alternating(lo, hi)
    where = [w for w, s in zip(fibres.where, fibres.in_substrate, strict=True) if s]
    return mean, alternating, where


SERVICE_YEAR_DAYS = 365.0  # fatigue data that a year of service outlives is pointed out


def _goodman(fibres, envelope, substrate: Material, factor: float) -> Check:
    s_e, s_ut = substrate.get("fatigue_strength"), substrate.get("ultimate_strength")
    mean, alternating, where = _substrate_cycles(fibres, envelope)
    n = np.atleast_1d(goodman_safety_factor(alternating, mean, s_e, s_ut))
    i = int(np.argmin(n))
    equivalent = float(alternating[i] + max(mean[i], 0.0) * s_e / s_ut)
    duty = ""
    cycles = substrate.fatigue_cycles
    if cycles and envelope.cycles_per_second > 0.0:
        days = cycles / envelope.cycles_per_second / 86400.0
        duty = f" (≈ {days:.3g} days at {envelope.cycles_per_second:.3g} cycles/s)"
        if days < SERVICE_YEAR_DAYS:
            # metals without an endurance limit keep losing strength past the data's life
            duty += (", less than a year of service: for a longer life use fatigue data at its "
                     "cycle count")
    life = f" at {cycles:.0e} cycles{duty}" if cycles else ""
    return Check(
        _GOODMAN,
        equivalent,
        s_e,
        "Pa",
        float(n[i]),
        _level(float(n[i]), factor),
        f"σa/Se + σm/Sut = 1/n at the {where[i]} (σa = {alternating[i] / 1e6:.3g} MPa, "
        f"σm = {_shown_mean(mean[i], alternating[i]) / 1e6:.3g} MPa), worst {_EITHER_WELL}; "
        f"value σa + σm·Se/Sut = Se/n; modified Goodman, Shigley ch. 6; "
        f"Se = {s_e / 1e6:.4g} MPa{life} ({substrate.name}): specimen fatigue strength, no Marin "
        f"surface/size/reliability factors (Shigley ch. 6), so divide n by their product "
        f"for a rough or large part; Sut = {s_ut / 1e6:.4g} MPa; {_NARROW_BEAM}",
    )


def _shown_mean(mean: float, alternating: float) -> float:
    """σm as printed: 0 when it is below the rounding of σa (3 significant figures), so a
    fully reversed cycle does not read as σm = 9.91e-06 MPa."""
    return 0.0 if abs(mean) < 5e-4 * abs(alternating) else float(mean)


def _langer(fibres, envelope, substrate: Material, factor: float) -> Check:
    s_y = substrate.get("yield_strength")
    mean, alternating, where = _substrate_cycles(fibres, envelope)
    n = np.atleast_1d(langer_yield_factor(alternating, mean, s_y))
    i = int(np.argmin(n))
    peak = float(alternating[i] + abs(mean[i]))
    return Check(
        _LANGER,
        peak,
        s_y,
        "Pa",
        float(n[i]),
        _level(float(n[i]), factor),
        f"n = Sy/(σa + |σm|) at the {where[i]}, worst {_EITHER_WELL}; Langer line, "
        f"Shigley ch. 6; Sy = {s_y / 1e6:.4g} MPa ({substrate.name}); {_NARROW_BEAM}",
    )


def _ceramic(built, fibres, envelope, ceramic: Material, factor: float) -> list[Check]:
    in_ceramic = ~fibres.in_substrate
    where = [w for w, c in zip(fibres.where, in_ceramic, strict=True) if c]
    _, strain_hi = fibre_stress_extremes(
        fibres.strain_per_m[in_ceramic], envelope.x_min_m, envelope.x_max_m
    )
    stress_hi, field_basis = _ceramic_peak_stresses(built, envelope)
    i_strain, i_stress = int(np.argmax(strain_hi)), int(np.argmax(stress_hi))
    strain_limit, strain_source = _ceramic_limit(
        ceramic, "max_tensile_strain", CERAMIC_STRAIN_LIMIT
    )
    stress_limit, stress_source = _ceramic_limit(
        ceramic, "max_tensile_stress", CERAMIC_STRESS_LIMIT_PA
    )
    result = ceramic_check(
        float(strain_hi[i_strain]), float(stress_hi[i_stress]), strain_limit, stress_limit
    )
    strain_margin = _inverse(result.strain_utilisation)
    stress_margin = _inverse(result.stress_utilisation)
    return [
        Check(
            _STRAIN,
            max(result.peak_tensile_strain, 0.0),
            strain_limit,
            "-",
            strain_margin,
            _level(strain_margin, factor),
            f"ε = (z − zn)κ at the {where[i_strain]}, peak tension {_EITHER_WELL}; "
            f"margin = limit/value; limit {strain_limit * 1e6:.4g} µε ({strain_source}); "
            f"{_NARROW_BEAM}",
        ),
        Check(
            _STRESS,
            max(result.peak_tensile_stress_Pa, 0.0),
            stress_limit,
            "Pa",
            stress_margin,
            _level(stress_margin, factor),
            f"σ = c̄11 (z − zn)κ − ē31E3 at the {where[i_stress]}, peak tension {_EITHER_WELL}, "
            f"{field_basis}; margin = limit/value; limit {stress_limit / 1e6:.4g} MPa "
            f"({stress_source}); {_NARROW_BEAM}",
        ),
    ]


def _ceramic_peak_stresses(built: Built, envelope: ResponseEnvelope) -> tuple[np.ndarray, str]:
    """Largest stress of every ceramic root face (in `_root_fibres` order: lower faces, upper
    faces, then, for an odd force, both mirrored) over the envelope, with any voltage up to the
    peak |v| in either polarity, and the basis of the field term.  The stress is affine in
    (x, v), so its largest value over that box is at one of its corners."""
    volts = envelope.peak_voltage_V
    peak = 0.0 if volts is None else volts
    design, props = built.beam_design, built.beam
    ends = np.array([envelope.x_min_m, envelope.x_max_m])
    faces = []
    # as given, and for an odd force the mirror image (the other well; `_assess_wells` covers
    # unequal wells by their rest positions instead)
    mirrors = (ends, -ends[::-1]) if built.model.is_symmetric else (ends,)
    for x in mirrors:
        lower, upper = ceramic_layer_stresses(x[:, None], np.array([-peak, peak]), design, props)
        faces.append(np.concatenate([lower.max(axis=(0, 1)), upper.max(axis=(0, 1))]))
    e31, c11 = design.piezo_e31_C_per_m2, design.piezo_modulus_Pa
    coupling = e31**2 / (c11 * design.piezo_permittivity_F_per_m + e31**2)  # k31²
    across = "|v|/(2h_p) in each layer (series)" if (
        design.piezo_layers == 2 and design.piezo_wiring == "series") else "|v|/h_p"
    if volts is None:
        basis = (f"electrodes short-circuited, E3 = 0 (no voltage predicted): an open or "
                 f"high-resistance load adds −ē31E3, ×1/(1 − k31²) = {1 / (1 - coupling):.3g} "
                 "on a uniformly strained layer in open circuit")
    else:
        basis = (f"E3 = {across} with any |v| up to the predicted {volts:.3g} V in the worse "
                 "polarity")
    basis += " (IEEE Std 176-1987; plane stress, Erturk & Inman 2011, App. E)"
    return np.concatenate(faces), basis


def _ceramic_limit(ceramic: Material, prop: str, default: float) -> tuple[float, str]:
    if prop in ceramic.values:
        return ceramic.get(prop), f"{ceramic.name}: {ceramic.sources[prop]}"
    return default, f"{ceramic.name} gives none: common-practice default (memory)"


def _travel(built: Built, envelope: ResponseEnvelope, travel_m: float, factor: float) -> Check:
    tip_reach = max(abs(envelope.x_min_m), abs(envelope.x_max_m))
    if built.tip is None or built.beam is None:
        moved = tip_reach
        what = "max(|x_min|, |x_max|) at the beam tip (no tip-magnet geometry)"
    else:
        # the corners' travel need not peak at an end of the stroke for a large, turning magnet
        x = np.linspace(envelope.x_min_m, envelope.x_max_m, CLEARANCE_SAMPLES)
        moved = float(mag.tip_body_travel(x, built.tip,
                                          built.beam.slope_per_deflection_per_m).max())
        what = (
            "how far the tip body's outermost point (the tip magnet's outer corner, turning "
            "with the beam slope) moves from its place at rest, over x_min…x_max (beam tip "
            f"itself {tip_reach * 1e3:.3g} mm)"
        )
    margin = _ratio(travel_m, moved)
    # reaching the limit means striking the stop: a failure, not a near miss
    level = "fail" if moved >= travel_m else _level(margin, factor)
    return Check(
        _TRAVEL,
        moved,
        travel_m,
        "m",
        margin,
        level,
        f"{what} against [limits].travel (the room between the magnet's outer face at rest and "
        "the stop), either well; reaching it is a strike on the stop: fail; margin = limit/value",
    )


def _clearance(built: Built, envelope: ResponseEnvelope) -> Check:
    geometry = dict(
        tip=built.tip,
        fixed=built.fixed,
        gap_m=built.gap_m,
        slope_per_deflection_per_m=built.beam.slope_per_deflection_per_m,
        offset_m=built.offset_m,
    )

    def gap_at(x: float) -> float:
        return float(mag.clearance(x, **geometry))

    x = np.linspace(envelope.x_min_m, envelope.x_max_m, CLEARANCE_SAMPLES)
    distance = mag.clearance(x, **geometry)
    i = int(np.argmin(distance))
    closest, at = float(distance[i]), float(x[i])
    if 0 < i < x.size - 1:
        polished = minimize_scalar(
            gap_at,
            bounds=(x[i - 1], x[i + 1]),
            method="bounded",
            options={"xatol": 1e-9 * max(abs(at), 1e-3)},
        )
        if polished.fun < closest:
            closest, at = float(polished.fun), float(polished.x)
    allowance = CLEARANCE_WARNING_FRACTION * built.gap_m
    margin = closest / allowance
    level = "fail" if closest <= 0.0 else "warn" if margin < 1.0 else "pass"
    return Check(
        _CLEARANCE,
        closest,
        allowance,
        "m",
        margin,
        level,
        f"least face-to-face distance over x_min…x_max (closest at x = "
        f"{at * 1e3:.3g} mm), tip magnet turning with the beam slope (and the fixed magnet "
        f"off the axis where it is offset); fail ≤ 0, warn "
        f"below {CLEARANCE_WARNING_FRACTION:.0%} of the {built.gap_m * 1e3:.3g} mm gap; "
        "margin = clearance/allowance",
    )


def _open_circuit_voltage(
    built: Built, envelope: ResponseEnvelope, omitted: list[str]
) -> tuple[float | None, str]:
    given = envelope.peak_open_circuit_voltage_V
    transducer = built.model.transducer
    if given is not None:
        return given, "peak open-circuit voltage from the dynamics"
    if isinstance(transducer, PiezoCircuit):
        swing = open_circuit_voltage_swing(
            transducer.coupling_N_per_V,
            transducer.capacitance_F,
            envelope.x_min_m,
            envelope.x_max_m,
        )
        return swing, (
            "open circuit C_p v̇ = θ ẋ: v swings θ(x_max − x_min)/C_p peak to peak, "
            "all of it in one polarity if discharged at one end of the stroke; "
            "Erturk & Inman 2009"
        )
    if isinstance(transducer, CoilCircuit):
        omitted.append(
            f"{_VOLTAGE}: a coil's open-circuit EMF Bl·ẋ needs the tip velocity, "
            "which this analysis did not estimate"
        )
    else:
        omitted.append(f"{_VOLTAGE}: the design has no transducer")
    return None, ""


def _voltage(volts: float, basis: str, max_voltage: float | None, factor: float) -> Check:
    """The open-circuit voltage against [limits].max_voltage, or against the 60 V touch-hazard
    limit when the case gives none; one verdict rule, as for every strength check."""
    if max_voltage is not None:
        limit, against = max_voltage, "[limits].max_voltage"
    else:
        limit, against = VOLTAGE_TOUCH_HAZARD_V, (
            f"the {VOLTAGE_TOUCH_HAZARD_V:g} V DC touch-hazard limit (ES1, IEC 62368-1, memory; "
            "no [limits].max_voltage given)")
    margin = _ratio(limit, volts)
    hazard = ""
    if volts > VOLTAGE_TOUCH_HAZARD_V:
        hazard = (f"; above {VOLTAGE_TOUCH_HAZARD_V:g} V DC the bare electrodes are a touch "
                  "hazard (ES1, IEC 62368-1, memory): insulate them")
    return Check(_VOLTAGE, volts, limit, "V", margin, _level(margin, factor),
                 f"{basis}; margin = limit/value against {against}{hazard}")


def _level(margin: float, safety_factor: float) -> str:
    """fail below 1, warn below the safety factor, pass otherwise."""
    if margin < 1.0:
        return "fail"
    return "warn" if margin < safety_factor else "pass"


def _ratio(limit: float, value: float) -> float:
    return limit / value if value > 0.0 else math.inf


def _inverse(utilisation: float) -> float:
    return 1.0 / utilisation if utilisation > 0.0 else math.inf


# -- fatigue life over the service (Miner) ---------------------------------------------------


def substrate_fibres(built: Built) -> tuple[tuple[str, ...], np.ndarray]:
    """The substrate's root fibres, as built and mirrored (either well): (where, stress per
    unit tip deflection s [Pa/m]), σ = s·x."""
    fibres = _root_fibres(built)
    where = tuple(w for w, s in zip(fibres.where, fibres.in_substrate, strict=True) if s)
    return where, fibres.stress_Pa_per_m[fibres.in_substrate]


def fatigue_life_check(life: FatigueLife, safety_factor: float, substrate: Material,
                       sn_points) -> Check:
    """The "substrate fatigue life (Miner)" check of a stress-history summary.

    value = Miner's sum over the design life D (damage per hour × design hours), limit 1;
    margin = life/design life = 1/D.  Fail when the life falls short of the design life; warn
    when the stresses could grow by less than the safety factor before they would use the
    design life up (the stress factor n of `FatigueLife`, which compares with the Goodman
    factor; a life margin of 2 is only n ≈ 2^(1/m) ≈ 1.06 for a slope m ≈ 12); pass otherwise.

    References
    ----------
    Miner (1945), J. Appl. Mech. 12:A159; ASTM E1049-85 §5.4.4 (rainflow counting); Budynas &
    Nisbett (2011), *Shigley's Mechanical Engineering Design*, 9th ed., ch. 6 (Goodman, S–N
    line, Marin factors).
    """
    (n1, s1), (n2, s2) = sn_points
    n = life.stress_factor
    level = "fail" if life.margin < 1.0 else "warn" if n < safety_factor else "pass"
    m = -1.0 / life.basquin_exponent
    record = (f"{life.cycles_counted:.4g} rainflow cycles in {life.simulated_duration_s:.4g} s "
              f"of simulated record over {life.trajectories} "
              + ("orbit starts (worst orbit governs; "
                 f"{100 * life.failing_share:.3g} % of starts end on an orbit that uses the "
                 "design life up)" if life.excitation == "tone" else "realisations (pooled)"))
    flagged = (f"; {life.flagged} trajectories reached the travel limit or diverged and were "
               "counted up to there: stop strikes are not in the count" if life.flagged else "")
    return Check(
        _MINER,
        life.design_damage,
        1.0,
        "-",
        life.margin,
        level,
        f"Miner sum D over the design life {life.design_life_years:.3g} years ([limits]."
        f"design_life, default 10 years) at the {life.where}: {life.damage_per_hour:.3g}/h "
        f"({life.counted_damage_per_hour:.3g}/h counted + {life.tail_damage_per_hour:.3g}/h "
        f"tail), life {life.life_years:.3g} years; margin = life/design life; stresses × "
        f"{n:.3g} would use the design life up, warn below [limits].safety_factor; rainflow "
        f"(ASTM E1049-85 §5.4.4) on the root stress σ = s·x, {record}; each cycle's mean by "
        "Goodman S = σa/(1 − σm/Sut) (Shigley ch. 6); Basquin S = Sf′(2N)^b (b = "
        f"{life.basquin_exponent:.4g}, m = {m:.3g}) through {s1 / 1e6:.4g} MPa at {n1:.0e} and "
        f"{s2 / 1e6:.4g} MPa × Marin {life.marin_factor:.3g} at {n2:.0e} cycles "
        f"({substrate.name}), no endurance limit; tail: {life.tail_basis}{flagged}; rare "
        f"peaks and shocks beyond the simulated excitation add damage; {_NARROW_BEAM}",
    )

