"""`harvester power`: mean power under the case's excitation, against the magnet-free beam, with
the safety checks of the predicted motion.

A tone goes to the ensemble orbit analysis (`tone_power`), a band, PSD table or record to the
Monte Carlo (`random_mean_power`).  The baseline is the same beam without magnets, at the
case's load or, for a "matched" load, at its own best load: the gain is the design's mean power
over the baseline's, the same quantity `compare` ranks by.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from harvester.analysis.operating import (
    is_linear,
    nominal_load,
    random_envelope,
    tone_envelope,
    tone_matched_load,
)
from harvester.analysis.safety import Check, assess_safety, design_materials
from harvester.build import Built
from harvester.case.load import LoadedCase
from harvester.commands.records import Record
from harvester.errors import CaseError
from harvester.model import CoilCircuit, ReducedModel, analyse_wells
from harvester.units import STANDARD_GRAVITY

TONE_INITIAL_STATES = 32  # ensemble size for the orbit mix under a tone
# a store working above this needs its own rating and handling: the input of the usual
# low-voltage power-management stages is rated at a few volts (common practice)
STORE_CAUTION_V = 5.5
# random excitation: the DC Monte Carlo's interval closes to the target share of the DC power
# or of this share of the AC mean power, whichever is larger (a DC power far below the AC one
# needs no finer interval to be read, and would otherwise run to the step budget)
DC_FLOOR_SHARE = 0.1
# and runs at most this many times the AC run's averaging time: a longer run narrows the DC
# interval (the DC power varies more between realisations than the AC power) at the cost of
# compare's time; the interval is reported as reached
DC_DURATION_RATIO = 1.0


@dataclass(frozen=True)
class CheckRow(Record):
    """One stress or safety check: a value against a limit, both in the SI unit beside them."""

    check: str  # e.g. "substrate fatigue (Goodman)"
    short_name: str  # e.g. "Goodman", for narrow tables
    level: str  # "pass" | "warn" | "fail"
    value_SI: float
    limit_SI: float
    unit_SI: str  # "Pa", "m", "V" or "-" (a strain)
    margin: float  # limit/value (a safety factor), or clearance/allowance
    basis: str  # formula and source

    @classmethod
    def of(cls, check: Check) -> CheckRow:
        return cls(check=check.name, short_name=check.short_name, level=check.level,
                   value_SI=check.value, limit_SI=check.limit, unit_SI=check.unit,
                   margin=check.margin, basis=check.basis)


@dataclass(frozen=True)
class OrbitRow(Record):
    """One attractor under a tone (or, under random excitation, the whole ensemble)."""

    kind: str  # "intrawell" | "interwell-periodic" | "chaotic"
    share: float  # of the initial states (or realisations)
    mean_power_W: float
    period: int | None = None  # in forcing periods; 0: none found
    well: int | None = None  # +1/−1 for an intrawell orbit, 0 for both wells
    hop_rate_per_s: float | None = None
    max_abs_x_m: float | None = None
    x_min_m: float | None = None
    x_max_m: float | None = None
    max_abs_v_mps: float | None = None
    lyapunov_per_s: float | None = None


@dataclass(frozen=True)
class SweepRow(Record):
    """Mean power at one frequency of a tone sweep at the case's amplitude."""

    frequency_Hz: float
    mean_power_W: float
    linear_power_W: float | None  # the magnet-free beam, at the same load
    gain_ratio: float | None
    hop_rate_per_s: float
    interwell_share: float  # of the starts that end on an interwell orbit
    dominant_orbit: str | None  # the orbit with the largest share
    flagged_share: float


@dataclass(frozen=True)
class FastBranch(Record):
    """One Gaussian-closure branch of the statistical linearisation (approximate)."""

    kind: str
    mean_offset_m: float
    rms_displacement_m: float
    equivalent_stiffness_N_per_m: float
    mean_power_W: float
    rms_voltage_V: float | None
    rms_current_A: float | None


@dataclass(frozen=True)
class MonteCarlo(Record):
    """How the Monte Carlo mean was obtained."""

    realisations_count: int
    averaging_time_s: float
    transient_s: float
    step_s: float
    seed: int
    relative_half_width_fraction: float | None
    target_relative_half_width_fraction: float
    target_reached: bool
    flagged_realisations_count: int
    trusted: bool
    method: str


@dataclass(frozen=True)
class FatigueLifeRow(Record):
    """Miner life of the substrate over the service life (`analysis.fatigue.FatigueLife`)."""

    life_years: float
    design_life_years: float
    margin: float  # life / design life
    stress_factor: float  # factor on every stress that would use the design life up
    damage_per_h: float  # counted + tail, governing fibre (and, under a tone, worst orbit)
    counted_damage_per_h: float
    tail_damage_per_h: float  # estimated beyond the simulated peak
    design_damage: float  # Miner sum over the design life
    cycles_count: float  # rainflow cycles over all trajectories
    simulated_duration_s: float
    trajectories_count: int
    flagged_count: int
    failing_share: float  # trajectories whose damage uses the design life up
    where: str  # the governing fibre
    peak_amplitude_Pa: float
    fatigue_coefficient_Pa: float  # S_f′ of the Basquin line, Marin factors applied
    basquin_exponent: float  # b
    marin_factor: float
    tail_basis: str

    @classmethod
    def of(cls, life) -> FatigueLifeRow:
        return cls(life_years=life.life_years, design_life_years=life.design_life_years,
                   margin=life.margin, stress_factor=life.stress_factor,
                   damage_per_h=life.damage_per_hour,
                   counted_damage_per_h=life.counted_damage_per_hour,
                   tail_damage_per_h=life.tail_damage_per_hour,
                   design_damage=life.design_damage, cycles_count=life.cycles_counted,
                   simulated_duration_s=life.simulated_duration_s,
                   trajectories_count=life.trajectories, flagged_count=life.flagged,
                   failing_share=life.failing_share, where=life.where,
                   peak_amplitude_Pa=life.peak_amplitude_Pa,
                   fatigue_coefficient_Pa=life.fatigue_coefficient_Pa,
                   basquin_exponent=life.basquin_exponent, marin_factor=life.marin_factor,
                   tail_basis=life.tail_basis)


@dataclass(frozen=True)
class DcPointRow(Record):
    """DC power into a store held at one voltage (`analysis.node.DcPoint`)."""

    store_voltage_V: float
    dc_power_W: float
    ci95_W: tuple[float, float]
    conduction_share: float  # of the time
    conducting_share: float  # of the orbits (realisations) on which the bridge conducts


@dataclass(frozen=True)
class DcRow(Record):
    """DC power through the bridge into its store (`analysis.node.DcPower`)."""

    diode_drop_V: float
    store: str  # "voltage" | "capacitor"
    store_voltage_V: float  # the working one: given, matched, or a capacitor's steady voltage
    store_note: str
    dc_power_W: float
    ci95_W: tuple[float, float]
    dc_current_A: float  # rectified, mean
    conduction_share: float  # of the time the bridge conducts
    diode_loss_W: float
    dc_load_ohm: float | None  # a capacitor store's DC load
    charge_time_s: float | None  # capacitor store: from its initial voltage to charge_target_V
    charge_target_V: float | None
    charge_note: str | None
    flagged_share: float
    method: str
    curve: tuple[DcPointRow, ...]  # every store voltage evaluated

    @classmethod
    def of(cls, dc, bridge) -> DcRow:
        from harvester.model import CapacitorStore

        return cls(diode_drop_V=bridge.diode_drop_V,
                   store="capacitor" if isinstance(bridge.store, CapacitorStore) else "voltage",
                   store_voltage_V=dc.store_voltage_V, store_note=dc.store_note,
                   dc_power_W=dc.dc_power_W, ci95_W=dc.ci95_W, dc_current_A=dc.current_A,
                   conduction_share=dc.conduction_share, diode_loss_W=dc.diode_loss_W,
                   dc_load_ohm=dc.load_ohm, charge_time_s=dc.charge_time_s,
                   charge_target_V=dc.charge_target_V, charge_note=dc.charge_note,
                   flagged_share=dc.flagged_share, method=dc.method,
                   curve=tuple(DcPointRow(store_voltage_V=p.store_voltage_V,
                                          dc_power_W=p.dc_power_W, ci95_W=p.ci95_W,
                                          conduction_share=p.conduction_share,
                                          conducting_share=p.conducting_share)
                               for p in dc.curve))


@dataclass(frozen=True)
class NodeRow(Record):
    """The sensor node's supply (`analysis.node.NodeBudget`)."""

    node_power_W: float  # its mean consumption
    budget_margin_W: float  # DC power − consumption
    node_starts: bool
    start_share: float  # of the orbits (realisations) on which it starts
    start_voltage_V: float
    start_dc_power_W: float  # DC power available at the start voltage
    time_to_first_report_s: float | None  # None: never
    note: str

    @classmethod
    def of(cls, budget) -> NodeRow:
        return cls(node_power_W=budget.consumption_W, budget_margin_W=budget.budget_margin_W,
                   node_starts=budget.starts, start_share=budget.start_share,
                   start_voltage_V=budget.start_voltage_V,
                   start_dc_power_W=budget.start_dc_power_W,
                   time_to_first_report_s=budget.time_to_first_report_s, note=budget.note)


@dataclass(frozen=True)
class PowerResult(Record):
    """`harvester power`: mean power, its interval, the baseline, the orbits and the checks."""

    excitation: str  # "tone" | "band" | "psd" | "record"
    load_ohm: float
    load_note: str
    mean_power_W: float
    ci95_W: tuple[float, float]
    ci95_note: str
    linear_power_W: float | None  # the magnet-free beam (the baseline)
    linear_ci95_W: tuple[float, float] | None
    linear_load_ohm: float | None
    linear_load_note: str | None
    gain_ratio: float | None  # mean power over the baseline's
    hop_rate_per_s: float
    hop_rate_ci95_per_s: tuple[float, float] | None
    interwell_share: float | None  # tone: share of starts on interwell orbits
    kramers_hop_rate_per_s: float | None  # random: white-noise escape theory, for comparison
    kramers_note: str | None
    rms_voltage_V: float | None
    rms_current_A: float | None
    input_power_W: float | None
    max_abs_x_m: float
    x_min_m: float  # the deflection envelope the checks see
    x_max_m: float
    flagged_share: float  # starts or realisations that left the trusted range
    orbits: tuple[OrbitRow, ...]
    checks: tuple[CheckRow, ...]
    omitted_checks: tuple[str, ...]
    sweep: tuple[SweepRow, ...] = ()
    frequency_Hz: float | None = None  # the tone
    amplitude_mps2: float | None = None
    spectrum: object | None = None  # the site spectrum's summary (random)
    fast_estimate: tuple[FastBranch, ...] = ()
    fast_estimate_method: str | None = None
    monte_carlo: MonteCarlo | None = None
    fatigue_life: FatigueLifeRow | None = None
    warnings: tuple[str, ...] = ()
    # behind a bridge ([circuit] interface = "bridge"), beside the AC figures above; the node's
    # budget with a [node]
    dc_power_W: float | None = None
    dc_ci95_W: tuple[float, float] | None = None
    budget_margin_W: float | None = None
    dc: DcRow | None = None
    node: NodeRow | None = None
    # the gap evaluated, face to face at rest (None: a [reduced] case or no fixed magnet), so
    # that a result can be set beside `compare`'s row for the same gap
    gap_m: float | None = None

    @property
    def worst(self) -> CheckRow | None:
        """The governing check: the most severe level, then the least margin."""
        from harvester.analysis.safety import LEVELS

        if not self.checks:
            return None
        return max(self.checks, key=lambda c: (LEVELS.index(c.level), -c.margin))


def magnet_free_model(model: ReducedModel) -> ReducedModel | None:
    """The same beam without magnets, or None when the model does not know it."""
    try:
        return model.without_magnets()
    except ValueError:
        return None


def _baseline_load(free: ReducedModel, case_resistance: float | None, *,
                   frequency_Hz: float | None = None, psd=None) -> tuple[float, str]:
    """The magnet-free beam's load: the case's, or its own exact optimum."""
    if case_resistance is None and frequency_Hz is not None:
        return tone_matched_load(free, frequency_Hz)
    return nominal_load(free, case_resistance, psd)


def predict_power(loaded: LoadedCase, built: Built, *, seed: int = 0,
                  target_relative_half_width: float = 0.05, sweep: bool = True,
                  baseline: bool = True, tone_starts: int = TONE_INITIAL_STATES,
                  progress: Callable[[float, float], None] | None = None) -> PowerResult:
    """Mean power and safety of a built design under the case's excitation.

    With `baseline` the magnet-free beam is evaluated beside it (at the case's load, or at its
    own best load for "matched") and the gain reported; `compare` evaluates the magnet-free
    beam as a candidate of its own instead.
    """
    excitation = loaded.case.excitation
    if excitation is None:
        raise CaseError("no [excitation] section: give a tone, band, psd or record",
                        file=str(loaded.path), key="excitation")
    if excitation.kind == "tone":
        return _predict_tone(loaded, built, seed=seed, sweep=sweep, baseline=baseline,
                             starts=tone_starts, progress=progress)
    return _predict_random(loaded, built, seed=seed, target=target_relative_half_width,
                           baseline=baseline, progress=progress)


def power_result(loaded: LoadedCase, *, seed: int = 0, ci: float = 0.05, sweep: bool = True,
                 starts: int = TONE_INITIAL_STATES, magnet_model: str = "exact",
                 progress: Callable[[float, float], None] | None = None) -> PowerResult:
    """`harvester power` on the case's own design."""
    from harvester.build import build

    built = build(loaded, magnet_model=magnet_model)
    return predict_power(loaded, built, seed=seed, target_relative_half_width=ci, sweep=sweep,
                         tone_starts=starts, progress=progress)


# --- tone ------------------------------------------------------------------------------------
def _predict_tone(loaded, built, *, seed, sweep, baseline, starts, progress) -> PowerResult:
    from harvester.analysis.tone_power import (
        linear_tone_power,
        matched_load,
        tone_power,
        tone_power_sweep,
    )

    case = loaded.case
    tone = case.excitation.tone
    model = built.model
    options = dict(seed=seed, n_initial=starts)
    if progress:
        progress(0.0, 1.0)
    if case.load.resistance is None and model.transducer is not None:
        if is_linear(model):
            load, note = tone_matched_load(model, tone.frequency)
            result = tone_power(model.with_load(load), tone.amplitude, tone.frequency,
                                **options)
        else:
            result = matched_load(model, tone.amplitude, tone.frequency, **options)
            load, note = result.load_ohm, "\"matched\": searched for the most mean power"
    else:
        load, note = nominal_load(model, case.load.resistance)
        result = tone_power(model.with_load(load), tone.amplitude, tone.frequency, **options)
    model = model.with_load(load)
    free = magnet_free_model(model) if baseline else None
    linear = linear_load = linear_note = None
    if free is not None:
        linear_load, linear_note = _baseline_load(free, case.load.resistance,
                                                  frequency_Hz=tone.frequency)
        linear = float(linear_tone_power(free.with_load(linear_load), tone.amplitude,
                                         tone.frequency))
    rows: tuple[SweepRow, ...] = ()
    grid = case.study.frequencies
    if sweep and grid is not None:
        if progress:
            progress(0.5, 1.0)
        freqs = np.linspace(grid.start, grid.stop, grid.count)
        rows = tuple(sweep_row(r) for r in tone_power_sweep(model, tone.amplitude, freqs,
                                                           **options))
    if progress:
        progress(1.0, 1.0)
    mean = result.mean_power_W
    # the orbit mix is a basin estimate from a finite ensemble: each start is one sample of
    # the power a beam started at random gets, so the mean's interval is Student's over them
    from scipy.stats import t as student

    n = starts
    spread = sum(o.share * (o.mean_power_W - mean) ** 2 for o in result.orbits)
    half = float(student.ppf(0.975, n - 1)) * math.sqrt(spread * n / (n - 1) / n)
    envelope = tone_envelope(model, result)
    checks, omitted, life = _checks(loaded, built, envelope, model, tone, seed)
    dc, dc_warnings = _direct_current(loaded, built, tone, envelope, seed=seed, starts=starts,
                                      target=0.05, mean_power_W=mean)
    return PowerResult(
        excitation="tone", load_ohm=load, load_note=note, mean_power_W=mean,
        ci95_W=(max(mean - half, 0.0), mean + half),
        ci95_note=(f"95 % interval of the orbit mix over {n} random starts (Student's t); a "
                   f"basin reached by none of them can still hold up to {100 * 3 / n:.2g} % of "
                   "starts (rule of three, 95 %) and is not in the interval"),
        linear_power_W=linear, linear_ci95_W=None if linear is None else (linear, linear),
        linear_load_ohm=linear_load, linear_load_note=linear_note,
        gain_ratio=mean / linear if linear else None,
        hop_rate_per_s=result.hop_rate_per_s, hop_rate_ci95_per_s=None,
        interwell_share=interwell_share(result.orbits),
        kramers_hop_rate_per_s=None, kramers_note=None,
        rms_voltage_V=result.rms_voltage_V, rms_current_A=result.rms_current_A,
        input_power_W=None,
        max_abs_x_m=max((o.max_abs_x_m for o in result.orbits), default=0.0),
        x_min_m=envelope.x_min_m, x_max_m=envelope.x_max_m,
        flagged_share=result.flagged_share,
        orbits=tuple(OrbitRow(**o.to_dict()) for o in result.orbits),
        checks=tuple(CheckRow.of(c) for c in checks), omitted_checks=tuple(omitted),
        sweep=rows, frequency_Hz=result.frequency_Hz, amplitude_mps2=result.amplitude_mps2,
        fatigue_life=life, warnings=tuple(result.notes) + dc_warnings, gap_m=built.gap_m,
        **dc,
    )


def interwell_share(orbits) -> float:
    """Share of the starts that end on an orbit that crosses between the wells."""
    return float(sum(o.share for o in orbits if o.kind != "intrawell"))


def sweep_row(result) -> SweepRow:
    return SweepRow(frequency_Hz=result.frequency_Hz, mean_power_W=result.mean_power_W,
                    linear_power_W=result.linear_power_W, gain_ratio=result.gain_over_linear,
                    hop_rate_per_s=result.hop_rate_per_s,
                    interwell_share=interwell_share(result.orbits),
                    dominant_orbit=result.orbits[0].kind if result.orbits else None,
                    flagged_share=result.flagged_share)


# --- behind a bridge ------------------------------------------------------------------------
def _direct_current(loaded, built, excitation, envelope, *, seed, starts, target,
                    mean_power_W, duration_s=None) -> tuple[dict, tuple[str, ...]]:
    """The DC fields of a result behind a bridge (`analysis.node.dc_power`), with the node's
    budget when the case has a [node], and the cautions they raise; none without a bridge.
    The store voltages scanned run up to 1.5 × the open-circuit voltage of the resistive run's
    envelope (the piezo's half swing θ Δx/(2C_p), or the coil's peak EMF scaled to an open
    circuit), and further where the answer lies above."""
    if built.interface is None:
        return {}, ()
    from harvester.analysis.node import dc_power, node_demand

    node = loaded.case.node
    if isinstance(built.model.transducer, CoilCircuit):
        open_circuit = envelope.peak_open_circuit_voltage_V
    else:
        open_circuit = 0.5 * (envelope.peak_voltage_V or 0.0)
    dc, budget = dc_power(built.model, built.interface, excitation,
                          matched=built.interface_matched,
                          demand=node_demand(node) if node is not None else None,
                          open_circuit_V=open_circuit or 1.0, seed=seed,
                          starts=starts or TONE_INITIAL_STATES,
                          target_relative_half_width=target,
                          floor_W=DC_FLOOR_SHARE * (mean_power_W or 0.0),
                          max_duration_s=duration_s)
    warnings = []
    if dc.store_voltage_V > STORE_CAUTION_V:
        warnings.append(
            f"the store works at {dc.store_voltage_V:.3g} V: rate the storage part and the "
            "converter's input for it, or clamp the store (a shunt regulator or Zener across "
            "it); a charged store keeps its energy after the beam stops, discharge it before "
            "handling and follow the local electrical code")
    fields = {"dc_power_W": dc.dc_power_W, "dc_ci95_W": dc.ci95_W,
              "budget_margin_W": budget.budget_margin_W if budget is not None else None,
              "dc": DcRow.of(dc, built.interface),
              "node": NodeRow.of(budget) if budget is not None else None}
    return fields, tuple(warnings)


# --- random ----------------------------------------------------------------------------------
def _predict_random(loaded, built, *, seed, target, baseline, progress) -> PowerResult:
    from harvester.analysis.random_power import random_mean_power
    from harvester.case.signals import random_excitation

    excitation = random_excitation(loaded)
    psd = excitation.psd
    case = loaded.case
    load, note = nominal_load(built.model, case.load.resistance, psd)
    model = built.model.with_load(load)
    free = magnet_free_model(model) if baseline else None
    linear_load = linear_note = None
    if free is not None:
        linear_load, linear_note = _baseline_load(free, case.load.resistance, psd=psd)
        free = free.with_load(linear_load)
    result = random_mean_power(model, psd, target_relative_half_width=target, seed=seed,
                               baseline=free if free is not None else False,
                               progress=progress)
    d, b = result.design, result.baseline
    envelope = random_envelope(model, result, bool(d.flagged))
    checks, omitted, life = _checks(loaded, built, envelope, model, psd, seed)
    dc, dc_warnings = _direct_current(loaded, built, psd, envelope, seed=seed, starts=0,
                                      target=target, mean_power_W=d.power_W.mean,
                                      duration_s=DC_DURATION_RATIO * d.averaging_time_s)
    coil = result.transducer == "coil"
    rms_v = (d.rms_circuit * load if math.isfinite(load) else None) if coil else d.rms_circuit
    kramers, kramers_note = _kramers(model, psd)
    fast = _fast_estimate(model, psd)
    linear = b.power_W.mean if b is not None else None
    return PowerResult(
        excitation=case.excitation.kind, load_ohm=load, load_note=note,
        mean_power_W=d.power_W.mean, ci95_W=tuple(d.power_W.ci95),
        ci95_note=(f"95 % interval over {result.realisations} independent realisations "
                   "(Student's t)"),
        linear_power_W=linear, linear_ci95_W=tuple(b.power_W.ci95) if b is not None else None,
        linear_load_ohm=linear_load, linear_load_note=linear_note,
        gain_ratio=d.power_W.mean / linear if linear else None,
        hop_rate_per_s=d.hop_rate_per_s.mean, hop_rate_ci95_per_s=tuple(d.hop_rate_per_s.ci95),
        interwell_share=None, kramers_hop_rate_per_s=kramers, kramers_note=kramers_note,
        rms_voltage_V=rms_v, rms_current_A=d.rms_circuit if coil else None,
        input_power_W=d.input_power_W.mean, max_abs_x_m=d.max_abs_x_m,
        x_min_m=envelope.x_min_m, x_max_m=envelope.x_max_m,
        flagged_share=d.flagged / result.realisations,
        orbits=tuple(OrbitRow(**o) for o in result.orbits),
        checks=tuple(CheckRow.of(c) for c in checks), omitted_checks=tuple(omitted),
        spectrum=excitation.summary, fast_estimate=fast.branches if fast else (),
        fast_estimate_method=fast.method if fast else None,
        monte_carlo=MonteCarlo(
            realisations_count=result.realisations, averaging_time_s=d.averaging_time_s,
            transient_s=result.transient_s, step_s=result.step_s, seed=result.seed,
            relative_half_width_fraction=(d.power_W.relative_half_width
                                          if math.isfinite(d.power_W.relative_half_width)
                                          else None),
            target_relative_half_width_fraction=result.target_relative_half_width,
            target_reached=result.target_reached, flagged_realisations_count=d.flagged,
            trusted=result.trusted, method=result.method),
        fatigue_life=life,
        warnings=tuple(excitation.warnings) + tuple(result.warnings) + dc_warnings,
        gap_m=built.gap_m, **dc,
    )


@dataclass(frozen=True)
class _Fast:
    branches: tuple[FastBranch, ...]
    method: str


def _fast_estimate(model: ReducedModel, psd) -> _Fast:
    """Statistical-linearisation estimate beside the Monte Carlo (labelled approximate)."""
    from harvester.analysis.linearisation import statistical_linearisation

    estimate = statistical_linearisation(model, psd)
    coil = isinstance(model.transducer, CoilCircuit)
    branches = tuple(FastBranch(
        kind=b.kind, mean_offset_m=b.mean_offset_m, rms_displacement_m=b.rms_displacement_m,
        equivalent_stiffness_N_per_m=b.equivalent_stiffness_N_per_m,
        mean_power_W=b.mean_power_W, rms_voltage_V=None if coil else b.rms_circuit,
        rms_current_A=b.rms_circuit if coil else None) for b in estimate.branches)
    return _Fast(branches, estimate.method)


def _kramers(model: ReducedModel, psd) -> tuple[float | None, str | None]:
    """The white-noise well-to-well hop rate (Kramers, with the turnover factor) at the PSD
    level at the well frequency, beside the counted rate, with the regime it is valid in."""
    from harvester.analysis.kramers import white_noise_escape_rates
    from harvester.analysis.melnikov import NoHomoclinicOrbit
    from harvester.analysis.random_power import electrical_damping
    from harvester.case.spectra import psd_at

    wells = analyse_wells(model)
    if wells.regime != "bistable" or len(wells.wells_m) != 2:
        return None, None
    f = wells.well_frequency_Hz
    level = float(psd_at(psd, f))
    if level <= 0.0:
        return None, f"no excitation at the well frequency {f:.3g} Hz"
    damping = model.damping_N_s_per_m + electrical_damping(model, 2.0 * math.pi * f)
    try:
        rates = white_noise_escape_rates(model, level, damping)
    except NoHomoclinicOrbit as exc:
        return None, f"no Kramers estimate: {exc}"
    height = (f" (barrier {rates.barrier_over_temperature:.2g} k_BT)"
              if rates.barrier_over_temperature >= 5.0 else "")
    note = (f"white-noise estimate (Hänggi, Talkner & Borkovec 1990, with the Mel'nikov–Meshkov "
            f"turnover) at G({f:.3g} Hz) = {level / STANDARD_GRAVITY**2:.3g} g²/Hz and the "
            f"damping at the well frequency{height}; {rates.validity}; for a spectrum that is "
            "not flat around the well frequency it is an order-of-magnitude check on the "
            "counted rate")
    return rates.turnover_hop_per_s, note


def _checks(loaded, built, envelope, model, excitation, seed):
    """The safety checks of the predicted envelope, and the substrate's life over the service
    life under the excitation (rainflow and Miner on the simulated stress history) where the
    design has a beam section and its substrate an S–N line."""
    from harvester.analysis.fatigue import substrate_fatigue_life

    substrate, ceramic = design_materials(loaded.case)
    limits = loaded.case.limits
    checks, omitted = assess_safety(built, limits, envelope, substrate=substrate,
                                    ceramic=ceramic)
    life = None
    if built.beam is None:
        omitted.append("substrate fatigue life (Miner): a [reduced] case has no beam section")
    elif substrate.sn_points is None:
        omitted.append(f"substrate fatigue life (Miner): {substrate.name} gives one S–N point")
    else:
        found, check = substrate_fatigue_life(built, limits, model, excitation,
                                              substrate=substrate, seed=seed)
        checks.append(check)
        life = FatigueLifeRow.of(found)
    return checks, omitted, life
