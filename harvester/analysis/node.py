"""Powering the sensor node: DC power through the bridge, the store, the budget and start-up.

The transducer works into a full-wave bridge and a store (`ReducedModel.interface`).  The DC
power is found at store voltages held constant (`DcSamples`): over the tone's random starts
(the orbit mix) or over the Monte Carlo's realisations, each sample one beam's long-run mean.
From those:

* a voltage store gives its DC power at its voltage; "matched" is the store voltage that gives
  the most (a scan of store voltages, refined under a tone as the resistive "matched" load is);
* a capacitor store with a DC load R_L settles where the bridge's mean current I(V) equals
  V/R_L, and charges from its initial voltage to V in t = ∫ C_s dV/(I(V) − V/R_L) (the store
  being much larger than the transducer's capacitance, it moves slowly over a forcing period,
  and each voltage on the way sees the bridge's mean current at that voltage); a "matched"
  load is V/I(V) at the voltage that gives the most power;
* the node's budget margin is the DC power less its mean consumption; it starts on a share of
  the orbits (or realisations): those on which the bridge conducts into a store at its start
  voltage, that is on which the open-circuit voltage passes the start voltage plus two diode
  drops, with at least its start power to spare.

What the diode model leaves out (reverse recovery, leakage, junction capacitance) and the
power-management stage's own efficiency are not counted: the DC power is what reaches the
store, before any converter.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace

import numpy as np

from harvester.model import BridgeCircuit, CapacitorStore, ReducedModel, VoltageStore

SCAN_VOLTAGES = 16  # store voltages in a scan (a search or a curve): more resolve the optimum
SCAN_LOWEST_SHARE = 0.01  # the scan runs from this share of its top voltage up (geometric)
SCAN_EXTENSIONS = 3  # times the scan's top may double when the answer lies above it
SCAN_STARTS = 64  # tone: at least this many starts per voltage (the same in search and answer)
CHARGE_TARGET_SHARE = 0.9  # without a start voltage, the charge time runs to this × the steady


@dataclass(frozen=True)
class NodeDemand:
    """What the sensor node draws and needs to start (SI)."""

    average_power_W: float  # its mean consumption
    report_energy_J: float  # one report's active energy (0 when given as an average)
    start_voltage_V: float | None  # its power-management stage starts at this input voltage…
    start_power_W: float | None  # … with this much input power (None: any)


def duty_cycle_power(active_power_W: float, active_time_s: float, interval_s: float,
                     sleep_power_W: float) -> float:
    """Mean consumption [W] of a node that is active for t_a once every T and asleep between.

        P = (P_a t_a + P_s (T − t_a)) / T

    Parameters
    ----------
    active_power_W : P_a, while measuring and sending [W]
    active_time_s : t_a, per report [s]
    interval_s : T, between reports [s]
    sleep_power_W : P_s, between reports [W]

    Examples
    --------
    3 mW for 20 ms every minute, 2 µW asleep: (60 µJ + 2 µW × 59.98 s)/60 s = 3.0 µW.

    >>> round(duty_cycle_power(3e-3, 0.02, 60.0, 2e-6) * 1e6, 4)
    2.9993
    """
    return (active_power_W * active_time_s
            + sleep_power_W * (interval_s - active_time_s)) / interval_s


def node_demand(node) -> NodeDemand:
    """The [node] section (`harvester.case.schema.Node`) as a `NodeDemand`."""
    if node.average_power is not None:
        average, report = node.average_power, 0.0
    else:
        average = duty_cycle_power(node.active_power, node.active_time, node.report_interval,
                                   node.sleep_power)
        report = node.active_power * node.active_time
    return NodeDemand(average_power_W=average, report_energy_J=report,
                      start_voltage_V=node.start_voltage, start_power_W=node.start_power)


@dataclass(frozen=True)
class DcSamples:
    """A bridge model's DC results at store voltages held constant: row k is `store_V[k]`,
    column j one sample, a start (tone) or a realisation (random excitation).  A flagged
    sample (travel limit, divergence) counts as delivering nothing."""

    store_V: np.ndarray  # (k,) [V]
    power_W: np.ndarray  # (k, n): into the store, V_s·|i|
    current_A: np.ndarray  # (k, n): rectified current
    conduction_share: np.ndarray  # (k, n): share of the time the bridge conducts
    diode_loss_W: np.ndarray  # (k, n)
    flagged: np.ndarray  # (k, n) bool
    samples: str  # what a sample is: "orbits" (random starts) or "realisations"
    method: str

    def joined(self, other: DcSamples) -> DcSamples:
        """These rows and `other`'s (the same samples at more voltages)."""
        def both(name: str) -> np.ndarray:
            return np.concatenate((getattr(self, name), getattr(other, name)))

        return DcSamples(store_V=both("store_V"), power_W=both("power_W"),
                         current_A=both("current_A"),
                         conduction_share=both("conduction_share"),
                         diode_loss_W=both("diode_loss_W"), flagged=both("flagged"),
                         samples=self.samples, method=self.method)

    def point(self, k: int) -> DcPoint:
        """Row k summarised: means over the samples, the power's 95 % interval."""
        from harvester.analysis.random_power import mean_with_ci

        power = mean_with_ci(self.power_W[k], floor=0.0)
        return DcPoint(store_voltage_V=float(self.store_V[k]), dc_power_W=power.mean,
                       ci95_W=power.ci95, current_A=float(np.mean(self.current_A[k])),
                       conduction_share=float(np.mean(self.conduction_share[k])),
                       conducting_share=float(np.mean(self.current_A[k] > 0.0)),
                       diode_loss_W=float(np.mean(self.diode_loss_W[k])),
                       flagged_share=float(np.mean(self.flagged[k])))


@dataclass(frozen=True)
class DcPoint:
    """DC power into a store held at one voltage, over an ensemble."""

    store_voltage_V: float
    dc_power_W: float  # mean over the samples
    ci95_W: tuple[float, float]  # Student's t over the samples
    current_A: float
    conduction_share: float  # of the time
    conducting_share: float  # of the samples on which the bridge conducts at all
    diode_loss_W: float
    flagged_share: float


@dataclass(frozen=True)
class DcPower:
    """DC power through the bridge at the store's working voltage, and how it was found."""

    dc_power_W: float  # into the store (for a capacitor store at its steady voltage: its load's)
    ci95_W: tuple[float, float]
    store_voltage_V: float
    conduction_share: float
    current_A: float
    diode_loss_W: float
    store_note: str  # how the working voltage was found
    load_ohm: float | None  # a capacitor store's DC load (the matched one when searched)
    charge_time_s: float | None  # capacitor store: from its initial voltage to charge_target_V
    charge_target_V: float | None
    charge_note: str | None
    flagged_share: float
    curve: tuple[DcPoint, ...]  # the store voltages evaluated, ascending
    method: str


@dataclass(frozen=True)
class NodeBudget:
    """The node's supply: margin, start-up and first report."""

    consumption_W: float  # mean
    budget_margin_W: float  # DC power − consumption
    starts: bool  # on some orbit (or realisation)
    start_share: float  # of the orbits (realisations) on which it starts
    start_voltage_V: float  # where start-up was judged
    start_dc_power_W: float  # DC power available there (mean over the samples)
    time_to_first_report_s: float | None  # None: never
    note: str


# --- the ensembles ---------------------------------------------------------------------------
def tone_dc_samples(model: ReducedModel, amplitude_mps2: float, frequency_Hz: float,
                    voltages: np.ndarray, *, seed: int = 0,
                    starts: int = SCAN_STARTS) -> DcSamples:
    """DC results of a bridge model (`ReducedModel.interface`) under a tone at each store
    voltage of `voltages` [V], held constant, from the same `starts` random initial states
    (the orbit mix of `harvester.analysis.tone_power`; reproducible by `seed`), averaged over
    64 periods after the model's settling time.  One ensemble runs every voltage."""
    from harvester.analysis.thresholds import settling_periods
    from harvester.analysis.tone_power import _initial_states
    from harvester.dynamics.integrator import recommended_steps_per_period, simulate_tone

    volts = np.atleast_1d(np.asarray(voltages, dtype=float))
    states = _initial_states(model, amplitude_mps2, starts, seed)
    n = states.shape[0]
    ens = simulate_tone(model, amplitude_mps2, frequency_Hz, np.tile(states[:, 0], volts.size),
                        np.tile(states[:, 1], volts.size), 0.0,
                        transient_periods=settling_periods(model, frequency_Hz),
                        strobe_periods=64,
                        steps_per_period=recommended_steps_per_period(model, frequency_Hz),
                        store_V=np.repeat(volts, n))
    flagged = (ens.flag != 0).reshape(volts.size, n)

    def rows(values: np.ndarray) -> np.ndarray:
        return np.where(flagged, 0.0, values.reshape(volts.size, n))

    return DcSamples(store_V=volts, power_W=rows(ens.mean_dc_power_W),
                     current_A=rows(ens.mean_current_A),
                     conduction_share=rows(ens.conduction_share),
                     diode_loss_W=rows(ens.mean_diode_loss_W), flagged=flagged,
                     samples="orbits",
                     method=f"{n} random starts per store voltage, the mean over 64 periods "
                            "after the transient; 95 % interval over the starts (Student's t)")


# --- from the ensembles to the answer ---------------------------------------------------------
def dc_power(model: ReducedModel, bridge: BridgeCircuit, excitation, *, matched: bool = False,
             demand: NodeDemand | None = None, open_circuit_V: float, seed: int = 0,
             starts: int = 32, target_relative_half_width: float = 0.05,
             floor_W: float = 0.0, max_duration_s: float | None = None,
             progress: Callable[[float, float], None] | None = None
             ) -> tuple[DcPower, NodeBudget | None]:
    """DC power of `model` through `bridge` under `excitation` (a `Tone`, or an
    `AccelerationPSD` for the Monte Carlo), with the node's budget when `demand` is given.

    Parameters
    ----------
    model : the reduced model (its own load is not used)
    bridge : the diode bridge and its store; with `matched` the store voltage (or a
        capacitor's load) is searched for and the one in `bridge` is a placeholder
    open_circuit_V : an estimate of the open-circuit voltage amplitude [V] (piezo θu/C_p, coil
        Bl max|ẋ|): the store voltages scanned run geometrically from 1 % to 1.5 times it, and
        on where the answer lies at an edge
    starts : tone: random starts per store voltage (at least `SCAN_STARTS`, the same set in
        the search and at the working voltage, so that both see one orbit mix)
    target_relative_half_width : random: the Monte Carlo runs until the 95 % interval of the
        largest DC power is within this share of it, or of `floor_W` [W] where that is larger,
        for at most `max_duration_s` [s] of averaging (or its step budget)
    """
    # every run holds its store voltage: a capacitor store is then found from those runs
    model = model.with_interface(BridgeCircuit(bridge.diode_drop_V, VoltageStore(0.0)))
    sample = _sampler(model, excitation, seed=seed, starts=starts,
                      target=target_relative_half_width, floor_W=floor_W,
                      max_duration_s=max_duration_s, progress=progress)
    from harvester.case.schema import Tone

    tone = isinstance(excitation, Tone)
    store = bridge.store
    capacitor = isinstance(store, CapacitorStore)
    wanted = [] if demand is None or demand.start_voltage_V is None else [
        demand.start_voltage_V]
    scan = None
    if capacitor or matched:
        top = max(1.5 * open_circuit_V, 2.0 * max(wanted, default=0.0), 1e-6)
        # geometric: a coil's low EMF behind the drops puts the answer at a small share of it
        steps = np.geomspace(SCAN_LOWEST_SHARE, 1.0, SCAN_VOLTAGES)
        scan = sample(np.concatenate(([0.0] if capacitor else [], top * steps, wanted)))
        for _ in range(SCAN_EXTENSIONS):
            if not _beyond_the_scan(scan, store, matched):
                break
            top *= 2.0
            scan = scan.joined(sample(top * steps[steps > 0.5]))
        for _ in range(SCAN_EXTENSIONS if matched else 0):
            lowest = float(np.min(scan.store_V[scan.store_V > 0.0]))
            if _best_voltage(scan) > lowest or not np.any(scan.power_W > 0.0):
                break
            scan = scan.joined(sample(lowest * steps[steps < 1.0]))
    if capacitor and not matched:
        # once more on an even grid across the voltages the samples settle between: I(V) is
        # far from straight over the geometric scan's wide steps
        low, high = _capacitor_store(store, scan)[2]
        if high > low:
            scan = scan.joined(sample(np.linspace(low, high, SCAN_VOLTAGES + 2)[1:-1]))
        working, note, _ = _capacitor_store(store, scan)
        volts, load, runs = working.store_voltage_V, store.load_ohm, scan
    elif matched and not tone:
        # the Monte Carlo scan ran every voltage on the same sample paths, in full: its best
        # row is the answer (the paths' synthesis, not the bridge, is most of its cost)
        volts, note, load = _matched_store(scan, sample, excitation)
        runs = scan
        working = scan.point(int(np.argmin(np.abs(scan.store_V - volts))))
    else:
        if matched:
            volts, note, load = _matched_store(scan, sample, excitation)
        else:
            volts, note, load = store.voltage_V, "as given in [circuit].store", None
        runs = sample(np.array([volts] + wanted))
        working = runs.point(0)
    if matched and capacitor:
        # the steady state of a capacitor store into R_L is the voltage store at V = I R_L
        load = volts / working.current_A if working.current_A > 0.0 else math.inf
        note = (f"\"matched\" load {load:.3g} Ω: it holds the store at {volts:.3g} V, the "
                "voltage with the most DC power")
        store = replace(store, load_ohm=load)
    charge = _charge_time(store, scan, volts, demand) if capacitor else (None, None, None)
    curve = _curve(scan, runs)
    dc = DcPower(dc_power_W=working.dc_power_W, ci95_W=working.ci95_W,
                 store_voltage_V=volts, conduction_share=working.conduction_share,
                 current_A=working.current_A, diode_loss_W=working.diode_loss_W,
                 store_note=note, load_ohm=load, charge_time_s=charge[0],
                 charge_target_V=charge[1], charge_note=charge[2],
                 flagged_share=working.flagged_share, curve=curve, method=runs.method)
    if demand is None:
        return dc, None
    judged = volts if demand.start_voltage_V is None else demand.start_voltage_V
    row = int(np.argmin(np.abs(runs.store_V - judged)))
    # start-up is judged on the samples whose DC power is reported, at every voltage they ran:
    # under a tone the scan ran the same starts as the answer (the Monte Carlo's answer is its
    # scan), so its voltages above the start voltage count too
    same = runs if scan is None or scan is runs else runs.joined(scan)
    return dc, node_budget(demand, dc, same, row, bridge.diode_drop_V)


def _sampler(model: ReducedModel, excitation, *, seed: int, starts: int, target: float,
             floor_W: float, max_duration_s: float | None,
             progress) -> Callable[[np.ndarray], DcSamples]:
    """A function running the model at store voltages: under a tone the same starts at every
    voltage, the Monte Carlo the same sample paths."""
    from harvester.case.schema import Tone

    tone = isinstance(excitation, Tone)

    def sample(voltages: np.ndarray) -> DcSamples:
        if tone:
            return tone_dc_samples(model, excitation.amplitude, excitation.frequency, voltages,
                                   seed=seed, starts=max(starts, SCAN_STARTS))
        from harvester.analysis.random_power import random_dc_samples

        return random_dc_samples(model, excitation, voltages, seed=seed,
                                 target_relative_half_width=target, floor_W=floor_W,
                                 max_duration_s=max_duration_s, progress=progress)

    return sample


def _matched_store(scan: DcSamples, sample, excitation) -> tuple[float, str, None]:
    """The store voltage with the most DC power: the best of the scan; under a tone refined
    by bounded Brent on log V between its neighbours (as `matched_load` refines a load)."""
    power = scan.power_W.mean(axis=1)
    best = int(np.argmax(power))
    volts = float(scan.store_V[best])
    if power[best] <= 0.0:
        return volts, "\"matched\": no store voltage in the scan takes any power", None
    from harvester.case.schema import Tone

    if isinstance(excitation, Tone):
        from scipy.optimize import minimize_scalar

        order = np.argsort(scan.store_V)
        at = int(np.searchsorted(scan.store_V[order], volts))
        # below the first scanned voltage the bracket reaches down to a tenth of it
        low = max(scan.store_V[order][max(at - 1, 0)], 0.1 * volts)
        high = scan.store_V[order][min(at + 1, order.size - 1)]
        if high > low:
            found = minimize_scalar(
                lambda log_v: -float(np.mean(sample(np.array([math.exp(log_v)])).power_W[0])),
                bounds=(math.log(low), math.log(high)), method="bounded",
                options={"xatol": 0.005})
            volts = math.exp(found.x) if -found.fun > power[best] else volts
    return volts, f"\"matched\": the store voltage with the most DC power, {volts:.3g} V", None


def _capacitor_store(store: CapacitorStore,
                     scan: DcSamples) -> tuple[DcPoint, str, tuple[float, float]]:
    """The capacitor store's steady state, sample by sample: where that sample's bridge
    current I(V) meets V/R_L (linear between the scanned voltages), with the power V²/R_L
    its load takes there.  Each orbit (or realisation) settles at its own voltage; the point
    returned holds their means, and the power's interval is over them; then the scanned
    voltages that bracket every sample's crossing."""
    from harvester.analysis.random_power import mean_with_ci

    order = np.argsort(scan.store_V)
    volts = scan.store_V[order]
    n = scan.power_W.shape[1]
    excess = scan.current_A[order] - volts[:, None] / store.load_ohm
    off = excess <= 0.0
    # the first voltage at which each sample's current falls to V/R_L (the top one if none)
    upper = np.where(off.any(axis=0), np.argmax(off, axis=0), volts.size - 1)
    columns = np.arange(n)
    lower = np.where(off[upper, columns], np.maximum(upper - 1, 0), upper)
    e0, e1 = excess[lower, columns], excess[upper, columns]
    crossing = (upper > lower) & off[upper, columns]
    share = np.where(crossing, e0 / np.where(crossing, e0 - e1, 1.0), 0.0)
    steady = volts[lower] + share * (volts[upper] - volts[lower])
    weights = np.zeros((volts.size, n))  # row weights of each sample's interpolation
    np.add.at(weights, (lower, columns), 1.0 - share)
    np.add.at(weights, (upper, columns), share)
    power = np.where(scan.flagged[order].any(axis=0), 0.0, steady**2 / store.load_ohm)
    estimate = mean_with_ci(power, floor=0.0)

    def at_steady(values: np.ndarray) -> float:
        return float(np.mean(np.sum(weights * values[order], axis=0)))

    point = DcPoint(store_voltage_V=float(np.mean(steady)), dc_power_W=estimate.mean,
                    ci95_W=estimate.ci95, current_A=float(np.mean(steady / store.load_ohm)),
                    conduction_share=at_steady(scan.conduction_share),
                    conducting_share=float(np.mean(power > 0.0)),
                    diode_loss_W=at_steady(scan.diode_loss_W),
                    flagged_share=float(np.mean(scan.flagged[order].any(axis=0))))
    spread = (f" (from {steady.min():.3g} to {steady.max():.3g} V over the {scan.samples})"
              if steady.max() > 1.001 * steady.min() else "")
    note = (f"steady: each sample's mean bridge current meets V/R_L (R_L = "
            f"{store.load_ohm:.3g} Ω) at {point.store_voltage_V:.3g} V on average{spread}")
    return point, note, (float(volts[lower].min()), float(volts[upper].max()))


def _best_voltage(scan: DcSamples) -> float:
    """The scanned store voltage with the most mean DC power."""
    return float(scan.store_V[int(np.argmax(scan.power_W.mean(axis=1)))])


def _beyond_the_scan(scan: DcSamples, store, matched: bool) -> bool:
    """Whether the answer may lie above the scanned voltages: the most power at the top one
    (a "matched" search), or a capacitor store still charging there.  Behind a bridge the beam
    swings wider than behind the resistor the scan's top was estimated from."""
    volts, current = _current_curve(scan)
    if matched:
        return current[-1] > 0.0 and int(np.argmax(volts * current)) == volts.size - 1
    top = int(np.argmax(scan.store_V))
    return bool(np.any(scan.current_A[top] > volts[-1] / store.load_ohm))


def _current_curve(scan: DcSamples) -> tuple[np.ndarray, np.ndarray]:
    """(V, mean bridge current I(V)) of a scan, ascending in V."""
    order = np.argsort(scan.store_V)
    return scan.store_V[order], scan.current_A.mean(axis=1)[order]


def charge_time(capacitance_F: float, load_ohm: float, volts: np.ndarray,
                current_A: np.ndarray, start_V: float, target_V: float) -> float:
    """Time [s] for a storage capacitor to charge from `start_V` to `target_V` through a
    bridge whose mean current at store voltage V is I(V) (linear between the points given),
    with a DC load across it:

        t = ∫ C_s dV / (I(V) − V/R_L)

    inf when the net current falls to zero on the way.  Valid while the store is much larger
    than the transducer's capacitance, so that it moves little in a forcing period.

    Parameters
    ----------
    capacitance_F : C_s [F];  load_ohm : R_L [Ω] (inf: none)
    volts, current_A : the mean bridge current [A] at store voltages [V], ascending
    start_V, target_V : from and to [V]

    Examples
    --------
    A constant 10 µA into 470 µF with no load, 0 → 0.6 V: 470e-6 × 0.6/10e-6 = 28.2 s.

    >>> round(charge_time(470e-6, math.inf, np.array([0.0, 1.0]), np.array([1e-5, 1e-5]),
    ...                   0.0, 0.6), 6)
    28.2
    """
    if target_V <= start_V:
        return 0.0
    v = np.linspace(start_V, target_V, 400)
    net = np.interp(v, volts, current_A) - v / load_ohm
    if np.any(net <= 0.0):
        return math.inf
    rate = capacitance_F / net
    return float(np.sum(0.5 * (rate[1:] + rate[:-1]) * np.diff(v)))


def _charge_time(store: CapacitorStore, scan: DcSamples, steady_V: float,
                 demand: NodeDemand | None) -> tuple[float | None, float, str]:
    """The capacitor store's charge time from its initial voltage to the node's start voltage
    (or to 0.9 of the steady voltage without one)."""
    if demand is not None and demand.start_voltage_V is not None:
        target, what = demand.start_voltage_V, "the node's start voltage"
    else:
        target, what = CHARGE_TARGET_SHARE * steady_V, \
            f"{CHARGE_TARGET_SHARE:g} of the steady store voltage"
    volts, current = _current_curve(scan)
    time = charge_time(store.capacitance_F, store.load_ohm, volts, current, store.initial_V,
                       target)
    note = (f"from {store.initial_V:.3g} V to {target:.3g} V ({what}), at the bridge's mean "
            "current at each voltage on the way, ∫ C_s dV/(I(V) − V/R_L)")
    return (time if math.isfinite(time) else None), target, note


def _curve(scan: DcSamples | None, runs: DcSamples) -> tuple[DcPoint, ...]:
    points = [runs.point(k) for k in range(runs.store_V.size)]
    if scan is not None:
        points += [scan.point(k) for k in range(scan.store_V.size)]
    unique = {p.store_voltage_V: p for p in points}
    return tuple(unique[v] for v in sorted(unique))


def node_budget(demand: NodeDemand, dc: DcPower, runs: DcSamples, row: int,
                diode_drop_V: float) -> NodeBudget:
    """The node's budget margin (DC power − mean consumption), whether it starts and on which
    share of the samples, and the time to its first report.

    Start-up is judged at the node's start voltage (the working store voltage without one):
    a sample starts the node where the bridge conducts into a store at that voltage, i.e.
    where the open-circuit voltage passes it plus two diode drops, and delivers at least the
    start power at it or at a higher voltage evaluated on the same sample (past its start
    voltage the stage's input may rise to where the harvester gives more).  `runs` holds the
    samples whose DC power is reported, at every store voltage they ran.  The first report
    follows the capacitor store's charge to the start voltage (none for a voltage store, which
    holds it already) and the harvest of one report's active energy at the mean DC power
    there.
    """
    volts = float(runs.store_V[row])
    above = runs.store_V >= volts
    power = np.max(runs.power_W[above], axis=0)
    enough = power >= (demand.start_power_W or 0.0)
    started = (runs.current_A[row] > 0.0) & enough
    share = float(np.mean(started))
    available = float(np.mean(runs.power_W[row]))
    margin = dc.dc_power_W - demand.average_power_W
    capacitor = dc.charge_target_V is not None
    charge = dc.charge_time_s if capacitor else 0.0
    if charge is None:  # the capacitor store stops short of the start voltage
        share = 0.0
    first = None
    if share > 0.0:
        gather = demand.report_energy_J / available if available > 0.0 else math.inf
        first = charge + gather if math.isfinite(gather) else None
    need = f"{volts:.3g} V + 2 × {diode_drop_V:.3g} V"
    if demand.start_power_W:
        need += f" with {demand.start_power_W * 1e6:.3g} µW to spare"
    note = (f"starts on {100 * share:.3g} % of the {runs.samples}: the open-circuit voltage "
            f"must pass {need}")
    if capacitor and charge is None:
        note += "; the store never charges to the start voltage"
    note += (f"; margin = DC power − mean consumption "
             f"{demand.average_power_W * 1e6:.3g} µW")
    if margin < 0.0:
        note += "; the harvester cannot sustain the node"
    return NodeBudget(consumption_W=demand.average_power_W, budget_margin_W=margin,
                      starts=share > 0.0, start_share=share, start_voltage_V=volts,
                      start_dc_power_W=available, time_to_first_report_s=first, note=note)
