"""`harvester spread`: the spread of a design over its build tolerances and service temperatures.

Monte Carlo over the case's `[tolerances]` (and its temperature range): each sampled build is
an independent task run through `run_tasks`, in this process, on a local pool or on a Dask
cluster, with the same answer from each (the values are drawn here from `--seed`, and each
build carries its own seed for its ensembles).

Every build gets its statics (regime, barrier), the hop onset at the case's excitation (under a
tone: the beam at rest, bisected at the tone's frequency only, with `ONSET_STARTS` starts and
`ONSET_BISECTION_STEPS` halvings; the onset needs the beam at rest alone), a fast power
estimate and the safety checks of that motion (under a tone the orbit the beam at rest in its
well settles on, both wells' when they are unequal: what a build does once installed, without
the random starts of `harvester power`'s orbit mix; under random excitation the statistical
linearisation, its envelope mean ± `RANDOM_PEAK_FACTOR` σ).  A stated subsample
also gets the reference power (the tone ensemble of `harvester power`, or its Monte Carlo) with
every check, the substrate's Miner life included.  One-at-a-time runs at ±1 standard deviation
of each tolerance, with the nominal build's seed, and rank correlations over the samples say
which tolerance to tighten.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace
from functools import lru_cache

import numpy as np

from harvester.analysis.tolerances import (
    Tolerance,
    binomial_interval,
    case_with,
    draw_values,
    outside_domain,
    rank_correlation,
    resolve_tolerances,
    sample_seeds,
    summarise,
)
from harvester.case.load import LoadedCase
from harvester.commands.records import Record
from harvester.errors import CaseError

DEFAULT_SAMPLES = 500
DEFAULT_SUBSAMPLE = 20  # builds that also get the reference power and every check
MAX_SAMPLES = 100_000
ONSET_STARTS = 2  # the onset bisects on the beam at rest; more starts only serve "certain"
# halvings of the onset's 2^(1/4) bracket: 3 give 2^(1/32), the onset to about 2 %, against a
# build-to-build scatter of tens of percent; `hop`'s 5 (0.5 %) cost two more runs per build
ONSET_BISECTION_STEPS = 3
# Under random excitation the fast envelope reaches mean ± this many σ of the linearised
# response: about the largest of 10⁵ Gaussian peaks (Rayleigh peaks, √(2 ln N); common
# practice for a few minutes at tens of hertz), as the Monte Carlo's few minutes would show.
RANDOM_PEAK_FACTOR = 4.5
# Under random excitation a build "does not hop" when its white-noise hop rate (Kramers, with
# the turnover) is below one hop in this time: it stays in a well for minutes on end.
NO_HOP_TIME_S = 600.0
# the Gaussian closure's variance scan for each build: 61 points (steps of 26 % in σ) instead of
# `power`'s 241; on samples of the random demos' builds the same branches and powers to 1e-10
# (roots are polished by Brent's method, and a close pair shows as a dip) at a third of the time
CLOSURE_POINTS = 61
QUANTITIES = (("barrier_J", "J"), ("onset_mps2", "m/s²"), ("mean_power_W", "W"),
              ("worst_margin", ""))
BISTABLE, MONOSTABLE, INVALID = "bistable", "monostable", "invalid"
# a one-at-a-time change below this share of the values is rounding (the force table and fit
# of two mirror-image builds, an offset of ±1 sd, agree to about 1e-12), reported as 0
OAT_NOISE = 1e-9


@dataclass(frozen=True)
class SampleTask:
    """One build: the case, the sampled values at the tolerance paths and its seed."""

    case_path: str
    gap_m: float | None  # None: the case's gap
    paths: tuple[str, ...]
    values: tuple[float, ...]  # [SI], one per path
    seed: int
    magnet_model: str = "exact"
    reference: bool = False  # also the reference power and every check
    statics_only: bool = False
    # where the onset's amplitude ladder starts: the nominal build's onset (None: at the
    # Melnikov bound, as `harvester hop` does)
    onset_hint_mps2: float | None = None
    # the load every build works into: the nominal design's (a "matched" load is chosen once,
    # for the design, and built into every unit); None: the case's or its optimum
    load_ohm: float | None = None


@dataclass(frozen=True)
class SampleRow(Record):
    """One build's values and what they gave (None where a quantity is not defined: no onset
    for a monostable build or one that never hops, nothing at all for an invalid build)."""

    values_SI: tuple[float, ...]  # in the order of `SpreadResult.tolerances`
    seed: int
    regime: str  # "bistable" | "monostable" | "invalid" (a value no build can have)
    barrier_J: float | None  # the lower barrier; 0 when monostable
    onset_mps2: float | None
    hops: bool | None  # the beam at rest hops at the case's excitation
    mean_power_W: float | None  # fast estimate
    worst_check: str | None
    worst_margin: float | None
    check_fails: bool
    reference_power_W: float | None = None  # the subsample's reference power
    reference_worst_margin: float | None = None
    reference_check_fails: bool | None = None
    note: str = ""


@dataclass(frozen=True)
class ToleranceRow(Record):
    """One tolerance in SI: what it applies to and how it scatters."""

    tolerance: str  # the case path
    distribution: str  # "normal" | "uniform"
    nominal_SI: float
    sd_SI: float  # standard deviation (a uniform half-width h: h/√3)
    half_width_SI: float | None  # uniform only
    unit_SI: str


@dataclass(frozen=True)
class QuantitySpread(Record):
    """The spread of one quantity over the builds where it is defined."""

    quantity: str  # the per-build key, e.g. "barrier_J"
    unit_SI: str
    nominal_SI: float | None
    mean_SI: float | None
    p05_SI: float | None
    p50_SI: float | None
    p95_SI: float | None
    standard_error_SI: float | None  # of the mean, s/√n
    defined_count: int  # builds where it is defined


@dataclass(frozen=True)
class Probability(Record):
    """A share of the builds with its exact 95 % binomial interval (Clopper–Pearson 1934)."""

    probability: float
    ci95_probability: tuple[float, float]
    events_count: int
    samples_count: int


@dataclass(frozen=True)
class Effect(Record):
    """How one tolerance moves one quantity."""

    quantity: str
    unit_SI: str
    rank_correlation: float | None  # Spearman, over the samples
    oat_change_SI: float | None  # value at +1 sd minus value at −1 sd, the rest nominal


@dataclass(frozen=True)
class SensitivityRow(Record):
    """One tolerance's effects, ranked by the largest |rank correlation| (then |OAT change|
    relative to the nominal value) over the quantities: the first is the one to tighten."""

    rank: int
    tolerance: str
    sd_SI: float
    unit_SI: str
    largest_correlation: float | None
    effects: tuple[Effect, ...]


@dataclass(frozen=True)
class ReferenceSubsample(Record):
    """The reference power and every check on a subsample of the builds."""

    samples_count: int
    method: str
    mean_power: QuantitySpread
    worst_margin: QuantitySpread
    probability_check_fails: Probability
    fast_over_reference_ratio: float | None  # median, builds with reference power > 0


@dataclass(frozen=True)
class SpreadResult(Record):
    """`harvester spread`: the design's spread over its build tolerances."""

    samples_count: int
    seed: int
    gap_m: float | None
    excitation: str | None
    amplitude_mps2: float | None  # the tone's: the onset is compared with it
    tolerances: tuple[ToleranceRow, ...]
    nominal: SampleRow
    quantities: tuple[QuantitySpread, ...]
    probability_bistable: Probability
    probability_no_hop: Probability  # bistable builds whose beam at rest does not hop
    probability_check_fails: Probability  # builds that fail a check (invalid builds too)
    sensitivity: tuple[SensitivityRow, ...]
    reference: ReferenceSubsample | None
    invalid_count: int
    method: str
    samples: tuple[SampleRow, ...]
    warnings: tuple[str, ...] = ()

    def quantity(self, key: str) -> QuantitySpread:
        return next(q for q in self.quantities if q.quantity == key)


# --- one build -------------------------------------------------------------------------------
@lru_cache(maxsize=4)
def _load(path: str) -> LoadedCase:
    from harvester.case.load import load_case

    return load_case(path)


def evaluate_sample(task: SampleTask) -> SampleRow:
    """Statics, onset, fast power and checks of one sampled build (module notes)."""
    from harvester.build import SPREAD_REGION_POINTS, build
    from harvester.model import analyse_wells

    loaded = _load(task.case_path)
    values = dict(zip(task.paths, task.values))
    empty = dict(values_SI=task.values, seed=task.seed, barrier_J=None, onset_mps2=None,
                 hops=None, mean_power_W=None, worst_check=None, worst_margin=None,
                 check_fails=True)
    odd = [p for p, v in values.items() if outside_domain(p, v)]
    if odd:
        return SampleRow(regime=INVALID, note=f"no such build: {odd[0]} = {values[odd[0]]:.4g}",
                         **empty)
    case = LoadedCase(case=case_with(loaded.case, values), path=loaded.path)
    try:
        built = build(case, gap_m=task.gap_m, magnet_model=task.magnet_model,
                      table_points=SPREAD_REGION_POINTS, with_critical_gap=False)
    except CaseError as exc:
        return SampleRow(regime=INVALID, note=exc.args[0] if exc.args else str(exc), **empty)
    wells = analyse_wells(built.model)
    row = SampleRow(regime=wells.regime, **{**empty, "barrier_J": wells.barrier_J,
                                           "check_fails": False})
    if task.statics_only or case.case.excitation is None:
        return row
    return _dynamics(case, built, wells, row, task)


def _dynamics(loaded: LoadedCase, built, wells, row: SampleRow, task: SampleTask) -> SampleRow:
    from harvester.analysis.thresholds import hop_thresholds
    from harvester.commands.hop import hop_model

    if task.load_ohm is not None:
        model = built.model.with_load(task.load_ohm)
    else:
        model, _ = hop_model(loaded, built)
    excitation = loaded.case.excitation
    tone = excitation.tone
    onset = hops = None
    if tone is not None:
        if wells.regime == BISTABLE:
            hint = task.onset_hint_mps2
            onset = hop_thresholds(
                model, np.array([tone.frequency]), seed=task.seed, n_initial=ONSET_STARTS,
                bisection_steps=ONSET_BISECTION_STEPS,
                ladder_base_mps2=None if hint is None else [hint])[0].onset_mps2
            hops = onset is not None and onset <= tone.amplitude
        power, envelope = _fast_tone(model, tone, task.seed)
    else:
        from harvester.case.signals import random_excitation

        psd = random_excitation(loaded).psd
        if wells.regime == BISTABLE:
            hops = _kramers_hop_rate(model, psd) * NO_HOP_TIME_S >= 1.0
        power, envelope = _fast_random(model, psd)
    worst, fails = _worst(loaded, built, envelope)
    row = replace(row, onset_mps2=onset, hops=hops, mean_power_W=power,
                  worst_check=worst.short_name if worst else None,
                  worst_margin=worst.margin if worst else None, check_fails=fails)
    if not task.reference:
        return row
    from harvester.commands.power import predict_power

    if task.load_ohm is not None and math.isfinite(task.load_ohm):  # the built-in load
        load = loaded.case.load.model_copy(update={"resistance": task.load_ohm})
        loaded = LoadedCase(case=loaded.case.model_copy(update={"load": load}),
                            path=loaded.path)
        built = replace(built, model=built.model.with_load(task.load_ohm))
    reference = predict_power(loaded, built, seed=task.seed, sweep=False, baseline=False)
    best = reference.worst
    return replace(row, reference_power_W=reference.mean_power_W,
                   reference_worst_margin=best.margin if best else None,
                   reference_check_fails=any(c.level == "fail" for c in reference.checks))


def _fast_tone(model, tone, seed: int):
    """The orbit of the beam at rest in its well (both wells' with unequal wells)."""
    from harvester.analysis.operating import tone_envelope
    from harvester.analysis.tone_power import tone_power
    from harvester.dynamics.orbits import resting_starts

    result = tone_power(model, tone.amplitude, tone.frequency, seed=seed,
                        n_initial=resting_starts(model), confirm_chaos=False)
    return result.mean_power_W, tone_envelope(model, result)


def _fast_random(model, psd):
    """The Gaussian closure's interwell branch where it has one (the noise carries the beam
    across), else the intrawell branch of the well it rests in (or the single-well one)."""
    from harvester.analysis.linearisation import (
        gaussian_closure_solutions,
        statistical_linearisation,
    )
    from harvester.analysis.safety import ResponseEnvelope
    from harvester.model import analyse_wells, rest_well

    if model.is_bistable:
        wells = analyse_wells(model)
        side = 1 if rest_well(wells) >= wells.saddle_m else -1
        branch = next(iter(
            gaussian_closure_solutions(model, psd, "interwell", points=CLOSURE_POINTS)[-1:]
            or gaussian_closure_solutions(model, psd, "intrawell", side,
                                          points=CLOSURE_POINTS)[:1]), None)
    else:
        branch = None
    if branch is None:
        branch = statistical_linearisation(model, psd).branches[0]
    reach = RANDOM_PEAK_FACTOR * branch.rms_displacement_m
    centre = 0.0 if branch.kind == "interwell" else branch.mean_offset_m
    low, high = centre - reach, centre + reach
    if branch.kind == "intrawell" and model.is_symmetric:  # the mirror well is as likely
        low, high = min(low, -high), max(high, -low)
    return branch.mean_power_W, ResponseEnvelope(x_min_m=low, x_max_m=high)


def _kramers_hop_rate(model, psd) -> float:
    """The white-noise hop rate [1/s] (Kramers, with the turnover) at the PSD level at the
    well frequency, with the circuit's damping there (as `harvester power` reports it)."""
    from harvester.analysis.kramers import white_noise_escape_rates
    from harvester.analysis.random_power import electrical_damping
    from harvester.case.spectra import psd_at
    from harvester.model import analyse_wells

    f = analyse_wells(model).well_frequency_Hz
    level = float(psd_at(psd, f))
    if level <= 0.0:
        return 0.0
    damping = model.damping_N_s_per_m + electrical_damping(model, 2.0 * math.pi * f)
    return float(white_noise_escape_rates(model, level, damping).turnover_hop_per_s)


def _worst(loaded: LoadedCase, built, envelope):
    """The governing check of the envelope (without the Miner life) and whether any fails."""
    from harvester.analysis.safety import LEVELS, assess_safety, design_materials

    substrate, ceramic = design_materials(loaded.case)
    checks, _ = assess_safety(built, loaded.case.limits, envelope, substrate=substrate,
                              ceramic=ceramic)
    if not checks:
        return None, False
    worst = max(checks, key=lambda c: (LEVELS.index(c.level), -c.margin))
    return worst, any(c.level == "fail" for c in checks)


# --- the spread ------------------------------------------------------------------------------
def spread_result(loaded: LoadedCase, *, samples: int = DEFAULT_SAMPLES, seed: int = 0,
                  gap_m: float | None = None, subsample: int = DEFAULT_SUBSAMPLE,
                  statics_only: bool = False, magnet_model: str = "exact",
                  one_at_a_time: bool = True, workers: int | None = None,
                  cluster: str | None = None,
                  progress: Callable[[int, int], None] | None = None) -> SpreadResult:
    """Sample the builds, run them through the executor and summarise (module notes);
    without `one_at_a_time` the ±1 sd runs are left out (their changes are then None)."""
    from harvester.commands.executor import run_tasks

    if not 1 <= samples <= MAX_SAMPLES:
        raise CaseError(f"{samples} samples: expected 1 … {MAX_SAMPLES}", key="--samples")
    if subsample < 0:
        raise CaseError(f"{subsample}: expected a count ≥ 0", key="--subsample")
    tolerances = resolve_tolerances(loaded)
    if not tolerances:
        raise CaseError("no [tolerances] (and no temperature range) to spread over: give e.g. "
                        "\"fixed_magnet.gap\" = { sd = \"0.1 mm\" }", file=str(loaded.path),
                        key="tolerances")
    if gap_m is not None and loaded.case.fixed_magnet is None:
        raise CaseError("--gap needs a [fixed_magnet] section", file=str(loaded.path),
                        key="--gap")
    paths = tuple(t.path for t in tolerances)
    nominal = tuple(t.nominal for t in tolerances)
    values = draw_values(tolerances, samples, seed)
    seeds = sample_seeds(samples, seed)
    reference = set(np.linspace(0, samples - 1, min(subsample, samples)).astype(int).tolist()) \
        if subsample and not statics_only else set()
    common = dict(case_path=str(loaded.path), gap_m=gap_m, paths=paths,
                  magnet_model=magnet_model, statics_only=statics_only)
    excitation = loaded.case.excitation
    if excitation is not None and not statics_only:
        common["load_ohm"] = _nominal_load(loaded, gap_m, magnet_model)
    if excitation is not None and excitation.tone is not None and not statics_only:
        # every build's onset ladder starts at the nominal one's (found from its Melnikov
        # bound, as `hop` does): most builds' onsets lie within the first stage of rungs
        probe = evaluate_sample(SampleTask(values=nominal, seed=seed, **common))
        common["onset_hint_mps2"] = probe.onset_mps2 or excitation.tone.amplitude
    tasks = [SampleTask(values=nominal, seed=seed, **common)]
    for i, t in enumerate(tolerances if one_at_a_time else ()):
        for sign in (-1.0, 1.0):  # one at a time, ±1 sd, with the nominal build's seed
            shifted = list(nominal)
            shifted[i] = t.nominal + sign * t.sd
            tasks.append(SampleTask(values=tuple(shifted), seed=seed, **common))
    tasks += [SampleTask(values=tuple(float(v) for v in values[i]), seed=int(seeds[i]),
                         reference=i in reference, **common) for i in range(samples)]
    rows = run_tasks(evaluate_sample, tasks, workers=workers, cluster=cluster,
                     progress=progress)
    runs = 2 * len(tolerances) if one_at_a_time else 0
    centre, oat, drawn = rows[0], rows[1:1 + runs], rows[1 + runs:]
    if centre.regime == INVALID:
        raise CaseError(f"the nominal design cannot be built: {centre.note}",
                        file=str(loaded.path))
    return _summary(loaded, tolerances, centre, oat, drawn, seed=seed, gap_m=gap_m,
                    statics_only=statics_only)


def _nominal_load(loaded: LoadedCase, gap_m: float | None, magnet_model: str) -> float:
    """The nominal design's load [Ω], as `hop` and `power` choose it."""
    from harvester.build import build
    from harvester.commands.hop import hop_model

    model, _ = hop_model(loaded, build(loaded, gap_m=gap_m, magnet_model=magnet_model,
                                       with_critical_gap=False))
    return model.load_ohm


def _column(rows, key: str) -> np.ndarray:
    return np.array([np.nan if getattr(r, key) is None else float(getattr(r, key))
                     for r in rows])


def _probability(events: int, trials: int) -> Probability:
    return Probability(probability=events / trials if trials else 0.0,
                       ci95_probability=binomial_interval(events, trials), events_count=events,
                       samples_count=trials)


def _quantity(key: str, unit: str, rows, nominal) -> QuantitySpread:
    s = summarise(_column(rows, key))
    centre = getattr(nominal, key) if nominal is not None else None
    return QuantitySpread(quantity=key, unit_SI=unit, nominal_SI=centre, mean_SI=s.mean,
                          p05_SI=s.p05, p50_SI=s.p50, p95_SI=s.p95,
                          standard_error_SI=s.standard_error, defined_count=s.count)


def _summary(loaded, tolerances: tuple[Tolerance, ...], centre: SampleRow, oat, drawn, *,
             seed: int, gap_m: float | None, statics_only: bool) -> SpreadResult:
    n = len(drawn)
    keys = QUANTITIES[:1] if statics_only else QUANTITIES
    quantities = tuple(_quantity(k, u, drawn, centre) for k, u in keys)
    sensitivity = _sensitivity(tolerances, centre, oat, drawn, keys)
    bistable = sum(r.regime == BISTABLE for r in drawn)
    stays = sum(r.regime == BISTABLE and r.hops is False for r in drawn)
    fails = sum(r.check_fails for r in drawn)
    invalid = sum(r.regime == INVALID for r in drawn)
    reference = None
    picked = [r for r in drawn if r.reference_power_W is not None]
    if picked:
        ratios = [r.mean_power_W / r.reference_power_W for r in picked
                  if r.reference_power_W > 0.0 and r.mean_power_W is not None]
        excitation = loaded.case.excitation
        reference = ReferenceSubsample(
            samples_count=len(picked),
            method=("the orbit mix of harvester power (its starts) with every check, the "
                    "Miner life included" if excitation.kind == "tone" else
                    "the Monte Carlo of harvester power with every check, the Miner life "
                    "included"),
            mean_power=_quantity("reference_power_W", "W", picked, None),
            worst_margin=_quantity("reference_worst_margin", "", picked, None),
            probability_check_fails=_probability(
                sum(bool(r.reference_check_fails) for r in picked), len(picked)),
            fast_over_reference_ratio=float(np.median(ratios)) if ratios else None)
    warnings = []
    if invalid:
        warnings.append(f"{invalid} of {n} sampled builds cannot exist (a value beyond its "
                        "physical range, or no well within the beam's reach); they count as "
                        "failing a check and are left out of the quantities.")
    if centre.regime == BISTABLE and 0 < bistable < n:
        warnings.append(f"{n - bistable} of {n} builds lose the double well.")
    return SpreadResult(
        samples_count=n, seed=seed, gap_m=gap_m, excitation=(
            loaded.case.excitation.kind if loaded.case.excitation is not None else None),
        amplitude_mps2=(loaded.case.excitation.tone.amplitude
                        if loaded.case.excitation is not None
                        and loaded.case.excitation.tone is not None else None),
        tolerances=tuple(ToleranceRow(tolerance=t.path, distribution=t.distribution,
                                      nominal_SI=t.nominal, sd_SI=t.sd,
                                      half_width_SI=t.half_width, unit_SI=t.unit)
                         for t in tolerances),
        nominal=centre, quantities=quantities,
        probability_bistable=_probability(bistable, n),
        probability_no_hop=_probability(stays, n),
        probability_check_fails=_probability(fails, n),
        sensitivity=sensitivity, reference=reference, invalid_count=invalid,
        method=_method_text(loaded, statics_only), samples=tuple(drawn),
        warnings=tuple(warnings))


def _sensitivity(tolerances, centre, oat, drawn, keys) -> tuple[SensitivityRow, ...]:
    rows = []
    for i, t in enumerate(tolerances):
        low, high = (oat[2 * i], oat[2 * i + 1]) if oat else (None, None)
        x = np.array([r.values_SI[i] for r in drawn])
        effects = []
        for key, unit in keys:
            a, b = getattr(low, key, None), getattr(high, key, None)
            change = None if a is None or b is None else float(b) - float(a)
            if change is not None and abs(change) <= OAT_NOISE * max(abs(a), abs(b)):
                change = 0.0  # the same build to rounding: an effect even in the tolerance
            effects.append(Effect(quantity=key, unit_SI=unit,
                                  rank_correlation=rank_correlation(x, _column(drawn, key)),
                                  oat_change_SI=change))
        rows.append((t, tuple(effects)))

    def strength(item) -> tuple[float, float]:
        _, effects = item
        rho = max((abs(e.rank_correlation) for e in effects
                   if e.rank_correlation is not None), default=0.0)
        relative = max((abs(e.oat_change_SI / getattr(centre, e.quantity))
                        for e in effects if e.oat_change_SI is not None
                        and getattr(centre, e.quantity)), default=0.0)
        return rho, relative

    ranked = sorted(rows, key=strength, reverse=True)
    return tuple(SensitivityRow(
        rank=k + 1, tolerance=t.path, sd_SI=t.sd, unit_SI=t.unit,
        largest_correlation=max((e.rank_correlation for e in effects
                                 if e.rank_correlation is not None), key=abs, default=None),
        effects=effects) for k, (t, effects) in enumerate(ranked))


def _method_text(loaded: LoadedCase, statics_only: bool) -> str:
    if statics_only:
        return "statics only: regime and barrier of each sampled build"
    excitation = loaded.case.excitation
    if excitation is None:
        return "statics only: the case gives no [excitation]"
    if excitation.kind == "tone":
        return (f"per build: statics; hop onset of the beam at rest at the tone's frequency "
                f"({ONSET_STARTS} starts, the ladder of harvester hop bisected "
                f"{ONSET_BISECTION_STEPS} times: to about 2 %); mean power of the orbit the beam "
                "at rest settles on (both wells' when unequal); the checks of that motion "
                "without the Miner life")
    return (f"per build: statics; hopping judged by the white-noise (Kramers) hop rate, at "
            f"least one hop per {NO_HOP_TIME_S:g} s; mean power of the statistical "
            f"linearisation (approximate); the checks of its envelope, mean ± "
            f"{RANDOM_PEAK_FACTOR:g} σ, without the Miner life")
