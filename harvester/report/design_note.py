"""Turn a design study into a design note: the answer, inputs, wells, hop map, power, checks.

Every table draws its columns from the registry (`harvester.report.columns`) and holds SI
values from the study's records, so the note's CSV and JSON carry the command line's keys.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from datetime import date

import numpy as np

from harvester import __version__
from harvester.commands.compare import interval_words
from harvester.model import series_potential
from harvester.report.columns import Column, column
from harvester.report.note import Figure, Note, Section, Table
from harvester.report.svg import Axis, Series, category_map, heat_map, line_plot
from harvester.units import STANDARD_GRAVITY

CAUTIONS = (
    "This note is a preliminary design aid. It does not replace testing, the applicable "
    "design codes or licensed engineering judgement; have the design reviewed by a qualified "
    "engineer before it is built or installed.",
    "Fatigue: a bistable beam sits pre-bent in a well and may snap through millions of times. "
    "The margins rest on handbook strengths and an idealised clamp; clamps, bonds and edges "
    "concentrate stress. Verify the life by test on the built part.",
    "Brittle ceramic: PZT cracks in tension without warning. Keep the peak tensile strain and "
    "stress below the limits shown, with margin, including shocks during handling and "
    "installation.",
    "Strong magnets: NdFeB magnets snap together and can pinch or shatter. Keep them away from "
    "people with implanted medical devices and from magnetic media; handle with tools.",
    "High voltage: an open-circuit piezo beam can produce well over 60 V when it is struck or "
    "disconnected. Insulate the electrodes, keep a load or bleed resistor connected and "
    "discharge before handling.",
    "The site vibration used here is what the case file states; machines and structures change "
    "with speed, load, season and wear. Measure at the mounting point and re-check.",
    "Rare peaks: under random vibration the stress, travel and voltage checks use the largest "
    "excursion of a few minutes of simulated excitation; years of service meet rarer, larger "
    "peaks, and shocks add their own. Keep margin on those checks.",
)

STORE_CAUTION = (
    "Stored energy: behind the bridge a storage capacitor or cell charges towards the "
    "transducer's open-circuit voltage whenever the node draws less than the harvester gives, "
    "and keeps its charge after the beam stops. Rate the store and the converter's input for "
    "the voltage shown, clamp it where that is higher than they take, discharge it before "
    "handling, and follow the local electrical code for the installation.")

CANDIDATE = Column("gap_m", "gap", "mm", 3, words=((None, "no magnet"),))
# builds the note's spread samples (its section states the number; `harvester spread` takes
# more): a share to about ±17 % (its interval is shown), for a few seconds of the note
NOTE_SPREAD_SAMPLES = 30


def build_note(loaded, *, seed: int = 0, magnet_model: str = "exact",
               workers: int | None = None, cluster: str | None = None, paper: str = "A4",
               progress: Callable[[int, int], None] | None = None) -> Note:
    """Run the design study for a case and lay it out as a `Note`."""
    from harvester.commands.study import design_study

    study = design_study(loaded, seed=seed, magnet_model=magnet_model, workers=workers,
                         cluster=cluster, progress=progress)
    chosen = _chosen(study)
    spread = None
    if loaded.case.tolerances or loaded.case.environment.range_K is not None:
        from harvester.commands.spread import spread_result

        gap = chosen.gap_m if chosen is not None and not chosen.magnet_free else None
        spread = spread_result(loaded, samples=NOTE_SPREAD_SAMPLES, seed=seed, gap_m=gap,
                               subsample=0, magnet_model=magnet_model,
                               one_at_a_time=False, workers=workers, cluster=cluster,
                               progress=progress)
    return note_from_study(loaded, study, seed=seed, magnet_model=magnet_model, paper=paper,
                           history=tone_history(loaded, chosen, magnet_model), spread=spread)


def tone_history(loaded, chosen, magnet_model: str = "exact"):
    """Under a tone, the basin map (`commands.basins`) and the up- and down-sweep
    (`commands.sweep`) of the chosen gap at its load, for the note; None otherwise."""
    excitation = loaded.case.excitation
    if chosen is None or chosen.magnet_free or excitation is None or excitation.kind != "tone":
        return None
    from harvester.commands.basins import basins_result
    from harvester.commands.sweep import sweep_result

    return (basins_result(loaded, gap_m=chosen.gap_m, load_ohm=chosen.load_ohm,
                          magnet_model=magnet_model),
            sweep_result(loaded, gap_m=chosen.gap_m, load_ohm=chosen.load_ohm,
                         magnet_model=magnet_model))


def note_from_study(loaded, study, *, seed: int, magnet_model: str,
                    paper: str = "A4", history=None, spread=None) -> Note:
    case = loaded.case
    title = case.title or loaded.path.stem
    subtitle = (f"Design note from {loaded.path.name}, harvester {__version__}, "
                f"{date.today().isoformat()}; seed {seed}, magnet model {magnet_model}")
    rows = study.comparison.rows
    gaps = [r for r in rows if not r.magnet_free]
    chosen = _chosen(study)
    sections = [
        _candidates_section(study),
        _design_section(loaded, study, chosen),
        _power_section(study, chosen),
        _node_section(chosen),
        _history_section(chosen, history),
        _hop_section(gaps, study),
        _spread_section(spread),
        _appendix_section(loaded, rows),
    ]
    return Note(title=title, subtitle=subtitle, sections=tuple(s for s in sections if s),
                cautions=CAUTIONS + ((STORE_CAUTION,) if case.circuit.is_bridge else ()),
                flags=tuple(_flags(chosen)),
                answer=tuple(_answer(loaded, study, chosen)), paper=paper)


def _gap_label(row) -> str:
    return "no fixed magnet" if row.magnet_free else f"{row.gap_m * 1e3:.4g} mm gap"


def _chosen(study):
    """The candidate the note is about: the recommended one, else the focus gap."""
    comp = study.comparison
    index = comp.recommended_index
    return comp.rows[index] if index is not None else study.focus


def _answer(loaded, study, chosen) -> list[tuple[str, str]]:
    """Page 1: what to build, why, how much power against the magnet-free beam, the worst
    margin, and the cautions that apply to it."""
    comp = study.comparison
    power = column("mean_power_W")
    if comp.recommended_candidate is None:
        build = "nothing yet: no candidate passes every check"
    elif comp.recommended_gap_m is None:
        build = "the beam without the fixed magnet (leave out the fixed magnet)"
    else:
        build = f"the beam with its magnets at a {comp.recommended_gap_m * 1e3:.4g} mm gap"
    lines = [("Build", build), ("Why", comp.recommendation)]
    if chosen is not None:
        free = next((r for r in comp.rows if r.magnet_free), None)
        spread = interval_words(chosen.ci95_W)
        text = f"{power.show(chosen.mean_power_W)} µW ({spread}) at {_gap_label(chosen)}"
        if free is not None and not chosen.magnet_free and chosen.gain_ratio is not None:
            gain = chosen.gain_ratio
            times = f"{gain:,.0f}" if gain >= 1000 else column("gain_ratio").show(gain)
            text += (f", {times}× the magnet-free beam "
                     f"({power.show(free.mean_power_W)} µW)")
        lines.append(("Mean power", text))
        lines += _supply_lines(chosen)
        if chosen.worst_level is not None:
            lines.append(("Worst margin", f"{chosen.worst_check}: {chosen.worst_margin:.3g} "
                                          f"({chosen.worst_level})"))
    lines.append(("Cautions that apply", "; ".join(_cautions_that_apply(loaded, study)) +
                  " (see Cautions)"))
    return lines


def _supply_lines(chosen) -> list[tuple[str, str]]:
    """Behind a bridge: the DC power into the store and, with a [node], that power against
    what the node needs."""
    dc, node = chosen.dc, chosen.node
    if dc is None:
        return []
    power = column("dc_power_W")
    volts = column("store_voltage_V").show(dc.store_voltage_V)
    lines = [("DC power", f"{power.show(dc.dc_power_W)} µW ({interval_words(dc.ci95_W)}) "
                          f"into the store at {volts} V, before any converter")]
    if node is None:
        return lines
    need = power.show(node.node_power_W)
    margin = power.show(node.budget_margin_W)
    if not node.node_starts:
        verdict = (f"does NOT power the node: it never starts ({node.note}); the node needs "
                   f"{need} µW on average")
    elif node.budget_margin_W < 0.0:
        verdict = (f"{power.show(dc.dc_power_W)} µW against the node's {need} µW: short by "
                   f"{power.show(-node.budget_margin_W)} µW, the node cannot run on it")
    else:
        share = column("start_share").show(node.start_share)
        first = node.time_to_first_report_s
        verdict = (f"{power.show(dc.dc_power_W)} µW against the node's {need} µW: a margin of "
                   f"{margin} µW; it starts on {share} % of the {_samples(dc)}"
                   + (f", first report after {column('time_to_first_report_s').show(first)} s"
                      if first is not None else ""))
    lines.append(("Sensor node", verdict))
    return lines


def _samples(dc) -> str:
    return "realisations" if dc.method.startswith("Monte Carlo") else "orbits"


def _cautions_that_apply(loaded, study) -> list[str]:
    case = loaded.case
    found = ["preliminary design aid: test and have it reviewed", "fatigue of the clamp and bonds"]
    if case.has_piezo:
        found += ["brittle ceramic", "open-circuit voltage"]
    if case.tip_magnet is not None:
        found.append("strong magnets")
    if study.excitation != "tone":
        found.append("rare peaks beyond the simulated minutes")
    if case.circuit.is_bridge:
        found.append("stored energy")
    found.append("the site's vibration changes: measure at the mount")
    return found


# --- sections --------------------------------------------------------------------------------
SUMMARY_KEYS = ("regime", "onset_mps2", "mean_power_W", "ci95_W", "gain_ratio",
                "worst_check", "worst_margin", "worst_level")
HISTORY_KEYS = ("high_power_share", "upsweep_reaches_high_power")


def _missing_onsets(rows) -> str:
    """Why a candidate has no hop onset, for the table's note (the same words as `compare`)."""
    from harvester.report.views import gap_row_note

    reasons: dict[str, list[str]] = {}
    for r in rows:
        if r.onset_mps2 is not None:
            continue
        reasons.setdefault(gap_row_note(r) or "no hopping found", []).append(
            "no magnet" if r.magnet_free else f"{r.gap_m * 1e3:.4g} mm")
    return "; ".join(f"{', '.join(who)}: {why}" for why, who in reasons.items())


def _candidates_section(study) -> Section:
    comp = study.comparison
    rows = comp.rows
    chosen = comp.recommended_index
    gaps = [r for r in rows if not r.magnet_free]
    paragraphs = [
        f"{len(gaps)} gaps and the same beam without the fixed magnet were evaluated under the "
        f"case's {study.excitation} excitation: the double well, the hop thresholds, the mean "
        "load power with its 95 % confidence interval, and the stress and safety checks of the "
        "predicted motion. The gain is each candidate's mean power over the magnet-free "
        "beam's, evaluated once, at its own load.",
        *(_candidate_line(r, i == chosen) for i, r in enumerate(rows)),
    ]
    keys = SUMMARY_KEYS
    note = ("Hop onset: smallest tone amplitude at which the beam at rest in a well starts "
            "hopping (at the case's tone frequency; for random excitation the lowest onset "
            "inside the band). CI: 95 % confidence interval of the mean power. Gain: over the "
            "magnet-free beam (the first row).")
    missing = _missing_onsets(rows)
    if missing:
        note += f" No onset (—): {missing}."
    if any(r.dc is not None for r in rows):
        keys = keys + (("dc_power_W", "budget_margin_W", "start_share")
                       if any(r.node is not None for r in rows) else ("dc_power_W",))
        note += (" DC power: through the bridge into the store; budget margin: that less the "
                 "node's mean consumption; starts on: share of the starts on which the node "
                 "starts.")
    if any(r.needs_lucky_start is not None for r in rows):
        keys = keys + HISTORY_KEYS
        note += (" High-power starts: share of the random starts that end on an orbit with at "
                 "least half of the best orbit's power. Up-sweep: whether the beam, run up "
                 "slowly from rest at the bottom of the study's frequencies, arrives on it; where "
                 "it does not, the gap needs a lucky start.")
    table = Table(
        title="Candidate gaps",
        columns=[CANDIDATE, *(column(k) for k in keys), column("recommended")],
        rows=[[r.gap_m, *(getattr(r, k) for k in keys), i == chosen]
              for i, r in enumerate(rows)],
        note=note)
    figures = []
    if gaps:
        free = next((r for r in rows if r.magnet_free), None)
        series = [Series("with magnets", [r.gap_m * 1e3 for r in gaps],
                         [r.mean_power_W * 1e6 for r in gaps], markers=True,
                         band=([r.ci95_W[0] * 1e6 for r in gaps],
                               [r.ci95_W[1] * 1e6 for r in gaps]))]
        if free is not None:
            span = [gaps[0].gap_m * 1e3, gaps[-1].gap_m * 1e3]
            series.append(Series("same beam without magnets", span,
                                 [free.mean_power_W * 1e6] * 2, dashed=True))
        powers = [r.mean_power_W for r in rows if r.mean_power_W > 0]
        log = bool(powers) and max(powers) / min(powers) > 30
        figures.append(Figure(
            title="Mean power by gap",
            svg=line_plot(series, x_axis=Axis("magnet gap", "mm"),
                          y_axis=Axis("mean load power", "µW", log=log),
                          title="Mean load power by candidate gap",
                          description="Mean load power against magnet gap, with its "
                                      "confidence band, and the magnet-free beam's power as a "
                                      "horizontal dashed line."),
            caption="Read where the shaded band (95 % interval of each gap) lies against the "
                    "dashed line (the same beam without the fixed magnet, at its own load): a "
                    "gap pays only where its whole band lies above the line."))
    tables = [table, *_temperature_table(rows)]
    return Section("Candidates", paragraphs=paragraphs, tables=tables, figures=figures)


def _temperature_table(rows) -> list[Table]:
    """Over a service temperature range: each gap's regime and barrier at both ends, with the
    gaps whose regime changes inside the range flagged (none without a range)."""
    ends = [r for r in rows if r.regimes_at_ends]
    if not ends:
        return []
    low, high = (t - 273.15 for t in ends[0].temperatures_at_ends_K)
    changing = [f"{r.gap_m * 1e3:.3g} mm" for r in ends if r.regime_changes_in_range]
    note = (f"The remanence, and with it the barrier, falls steadily as the magnets warm, so a "
            f"gap whose regime differs between {low:.3g} °C and {high:.3g} °C changes it "
            "inside the range: ")
    note += (f"{', '.join(changing)} (flagged); build such a gap only where both regimes "
             "serve." if changing else "no candidate does.")
    keys = ("regimes_at_ends", "barriers_at_ends_J", "regime_changes_in_range")
    return [Table(title=f"Candidate gaps over the service temperature range, {low:.3g} … "
                        f"{high:.3g} °C",
                  columns=[CANDIDATE, *(column(k) for k in keys)],
                  rows=[[r.gap_m, *(getattr(r, k) for k in keys)] for r in ends], note=note)]


def _candidate_line(row, chosen: bool) -> str:
    """One line per candidate: how it fares and, for the rejected, why."""
    power = column("mean_power_W").show(row.mean_power_W)
    head = f"{_gap_label(row)} ({row.regime}): {power} µW"
    if row.dc is not None:
        head += f", {column('dc_power_W').show(row.dc_power_W)} µW DC"
    if row.needs_lucky_start:
        share = column("high_power_share").show(row.high_power_share)
        head += (f"; needs a lucky start: {share} % of the starts reach its high-power orbit, "
                 f"and a run-up from rest leaves it at "
                 f"{column('upsweep_power_W').show(row.upsweep_power_W)} µW")
    if row.never_starts:
        head += "; the node never starts on it"
    if chosen:
        return f"★ {head}; recommended."
    failing = [c for c in row.checks if c.level != "pass"]
    if failing:
        worst = sorted(failing, key=lambda c: (c.level != "fail", c.margin))
        reasons = ", ".join(f"{c.short_name} {c.level}s (margin {c.margin:.2g})"
                            for c in worst[:3])
        return f"{head}; {reasons}."
    return f"{head}; passes every check."


WELL_KEYS = ("regime", "critical_gap_m", "wells_m", "barrier_J", "well_frequency_Hz",
             "linear_frequency_Hz", "k1_N_per_m", "k3_N_per_m3")
HOP_KEYS = ("frequency_Hz", "melnikov_mps2", "onset_mps2", "certain_mps2", "stop_mps2")
CHECK_KEYS = ("check", "level", "margin")


def _design_section(loaded, study, chosen) -> Section | None:
    """The chosen design: its inputs, its double well, its thresholds at the case's
    excitation and its checks."""
    from harvester.case.schema import case_si_dict
    from harvester.report.views import hop_row_note

    if chosen is None:
        return None
    design = case_si_dict(loaded.case)
    if chosen.magnet_free:
        design.pop("fixed_magnet", None)
    elif "fixed_magnet" in design:
        design["fixed_magnet"]["gap_m"] = chosen.gap_m
    design.pop("study", None)
    design.pop("notes", None)
    tables = [Table(title="Inputs of the chosen design (SI)",
                    columns=[Column("key", "key", text=True),
                             Column("value", "value", text=True)],
                    rows=[[k, _show_input(v)] for k, v in _flatten(design)],
                    note="Values as validated from the case file; each key names its SI unit.")]
    figures = []
    gaps = [r for r in study.comparison.rows if not r.magnet_free]
    if not chosen.magnet_free:
        tables.append(Table(title=f"Double well at the {_gap_label(chosen)}",
                            columns=[column(k) for k in WELL_KEYS],
                            rows=[[getattr(chosen, k) for k in WELL_KEYS]]))
        rows = _thresholds_at_the_site(loaded, chosen)
        if rows:
            tables.append(Table(
                title=f"Hop thresholds near the case's excitation, {_gap_label(chosen)}",
                columns=[*(column(k) for k in HOP_KEYS), column("note")],
                rows=[[*(getattr(m, k) for k in HOP_KEYS), hop_row_note(m)] for m in rows],
                note="Melnikov: necessary condition for chaotic hopping (Guckenheimer & "
                     "Holmes 1983, §4.5), a lower bound. Onset: the beam at rest in a well "
                     "starts hopping. Certain: no intrawell orbit remains among the starts."))
    potential = _potential_figure(gaps)
    if potential is not None:
        figures.append(potential)
    tables.append(Table(title=f"Stress and safety checks, {_gap_label(chosen)}",
                        columns=[column("check"), column("level"), column("margin"),
                                 Column("reading", "value of limit", text=True)],
                        rows=[[c.check, c.level, c.margin, _reading(c)]
                              for c in chosen.checks],
                        note="Mean stress from the well the beam sits in, alternating stress "
                             "from the predicted motion about it. Pass needs the margin to "
                             "reach [limits].safety_factor; each check's basis is in the "
                             "appendix's data files."))
    paragraphs = [f"Not checked: {o}." for o in chosen.omitted_checks]
    return Section(f"The chosen design: {_gap_label(chosen)}", paragraphs=paragraphs,
                   tables=tables, figures=figures)


def _reading(check) -> str:
    from harvester.report.views import CHECK_DISPLAY

    unit, scale = CHECK_DISPLAY.get(check.unit_SI, (check.unit_SI, 1.0))
    return f"{check.value_SI * scale:.3g} of {check.limit_SI * scale:.3g} {unit}"


def _thresholds_at_the_site(loaded, row) -> list:
    """The chosen gap's thresholds at the frequencies the site excites: within ±25 % of the
    tone, or inside the band."""
    excitation = loaded.case.excitation
    if excitation.kind == "tone":
        f0 = excitation.tone.frequency
        near = [m for m in row.hop_map if abs(m.frequency_Hz / f0 - 1.0) <= 0.25]
        return near
    band = excitation.band
    return [m for m in row.hop_map if band is None or band.low <= m.frequency_Hz <= band.high]


def _potential_figure(gaps) -> Figure | None:
    series = []
    # one span for every gap, a little past twice the widest well, so the wells stay readable
    # when the force is fitted out to a distant stop
    widest = max((max(r.wells_m) for r in gaps if r.wells_m), default=None)
    for r in gaps:
        window = r.fit_window_m or math.inf
        reach = min(window, 2.2 * widest) if widest else r.fit_window_m
        if not reach or not math.isfinite(reach):
            continue
        x = np.linspace(-reach, reach, 161)
        series.append(Series(f"{r.gap_m * 1e3:.4g} mm", x * 1e3,
                             series_potential(r.force_coefficients_SI, x) * 1e6))
    if not series:
        return None
    return Figure(
        title="Double-well potential",
        svg=line_plot(series, x_axis=Axis("tip deflection", "mm"),
                      y_axis=Axis("potential energy", "µJ"),
                      title="Potential energy of the beam and magnets by gap",
                      description="Potential energy against tip deflection, one curve per "
                                  "candidate gap: double wells below the critical gap, single "
                                  "wells above it."),
        caption="Read the depth of each gap's wells (the barrier the excitation must lift the "
                "beam over) and how far out they sit (the pre-bend the beam rests in). U(x) "
                "from the fitted restoring force, out to 2.2 times the widest well.")


SWEEP_KEYS = ("frequency_Hz", "mean_power_W", "linear_power_W", "gain_ratio",
              "interwell_share", "hop_rate_per_s", "dominant_orbit")
ORBIT_KEYS = ("kind", "share", "mean_power_W", "hop_rate_per_s", "max_abs_x_m")


def _power_section(study, chosen) -> Section:
    figures, tables, paragraphs = [], [], []
    focus = study.focus
    if study.sweep and focus is not None:
        sweep = study.sweep
        f = [s.frequency_Hz for s in sweep]
        figures.append(Figure(
            title="Power versus frequency",
            svg=line_plot([Series("bistable (with magnets)", f,
                                  [s.mean_power_W * 1e6 for s in sweep], markers=True),
                           Series("same beam without magnets", f,
                                  [(s.linear_power_W or 0.0) * 1e6 for s in sweep],
                                  dashed=True)],
                          x_axis=Axis("frequency", "Hz"),
                          y_axis=Axis("mean load power", "µW", log=True),
                          title=f"Tone at the case's amplitude, {_gap_label(focus)}",
                          description="Mean load power against tone frequency for the beam "
                                      "with magnets and without them, on a logarithmic power "
                                      "axis."),
            caption="Read the band of frequencies over which the bistable beam (solid) lies "
                    "above the magnet-free beam (dashed, exact linear steady state at the same "
                    "load): that is the speed range the magnets buy. Each point is the "
                    "share-weighted mean over the orbits an ensemble of starts reaches."))
        tables.append(Table(
            title=f"Power versus frequency, {_gap_label(focus)}",
            columns=[column(k) for k in SWEEP_KEYS],
            rows=[[getattr(s, k) for k in SWEEP_KEYS] for s in sweep], inline=False))
        wins = [s.frequency_Hz for s in sweep if (s.gain_ratio or 0) > 1]
        if wins:
            paragraphs.append(f"With magnets the beam delivers more than without between "
                              f"{min(wins):.3g} and {max(wins):.3g} Hz (at "
                              f"{_gap_label(focus)}, same load).")
    if study.spectrum is not None:
        spec = study.spectrum
        f = np.asarray(spec.frequency_Hz)
        psd = np.asarray(spec.psd_m2_s4_per_Hz) / STANDARD_GRAVITY**2
        keep = psd > 0
        figures.append(Figure(
            title="Site vibration",
            svg=line_plot([Series("site PSD", f[keep], psd[keep])],
                          x_axis=Axis("frequency", "Hz", log=True),
                          y_axis=Axis("acceleration PSD", "g²/Hz", log=True),
                          title="Base-acceleration PSD used for the Monte Carlo",
                          description="Base-acceleration power spectral density of the site "
                                      "against frequency, on logarithmic axes."),
            caption=f"Read where the site's energy lies against the beam's well and "
                    f"magnet-free frequencies. RMS {spec.summary.rms_mps2 / STANDARD_GRAVITY:.3g}"
                    " g."))
        paragraphs.extend(spec.warnings)
    if chosen is not None and chosen.orbits:
        tables.append(Table(title=f"Orbit mix, {_gap_label(chosen)}",
                            columns=[column(k) for k in ORBIT_KEYS],
                            rows=[[getattr(o, k) for k in ORBIT_KEYS] for o in chosen.orbits]))
    return Section("Mean power", paragraphs=paragraphs, tables=tables, figures=figures)


DC_KEYS = ("store", "store_voltage_V", "diode_drop_V", "dc_power_W", "ci95_W", "dc_current_A",
           "conduction_share", "diode_loss_W", "dc_load_ohm", "charge_time_s", "charge_target_V")
NODE_KEYS = ("node_power_W", "budget_margin_W", "node_starts", "start_share", "start_voltage_V",
             "start_dc_power_W", "time_to_first_report_s")
CURVE_KEYS = ("store_voltage_V", "dc_power_W", "ci95_W", "conduction_share",
              "conducting_share")


def _node_section(chosen) -> Section | None:
    """Behind a bridge: the DC power into the store, the curve it was found on, and the
    node's budget and start-up."""
    if chosen is None or chosen.dc is None:
        return None
    dc, node = chosen.dc, chosen.node
    keys = [k for k in DC_KEYS if getattr(dc, k) is not None]
    tables = [Table(title=f"DC power through the bridge, {_gap_label(chosen)}",
                    columns=[column(k) for k in keys], rows=[[getattr(dc, k) for k in keys]],
                    note="DC power: into the store (for a capacitor store, into its DC load "
                         "at the steady voltage), before any converter. Bridge conducts: "
                         "share of the time."),
              Table(title="DC power against the store voltage",
                    columns=[column(k) for k in CURVE_KEYS],
                    rows=[[getattr(p, k) for k in CURVE_KEYS] for p in dc.curve],
                    inline=False)]
    paragraphs = [p for p in (dc.store_note, dc.charge_note, dc.method) if p]
    paragraphs.append(
        "The diodes are modelled as a constant forward drop each, conducting only while the "
        "transducer's voltage exceeds the store voltage plus two drops. Left out: reverse "
        "recovery, leakage and junction capacitance of the diodes, and the power-management "
        "stage's efficiency curve, which takes its own share before the node sees the power.")
    if node is not None:
        tables.append(Table(title="Sensor node", columns=[column(k) for k in NODE_KEYS],
                            rows=[[getattr(node, k) for k in NODE_KEYS]],
                            note="Budget margin: DC power less the node's mean consumption."))
        paragraphs.append(node.note)
    figures = []
    curve = [p for p in dc.curve if p.store_voltage_V > 0.0]
    if len(curve) > 2:
        figures.append(Figure(
            title="DC power against the store voltage",
            svg=line_plot([Series("DC power", [p.store_voltage_V for p in curve],
                                  [p.dc_power_W * 1e6 for p in curve], markers=True,
                                  band=([p.ci95_W[0] * 1e6 for p in curve],
                                        [p.ci95_W[1] * 1e6 for p in curve]))],
                          x_axis=Axis("store voltage", "V"),
                          y_axis=Axis("DC power", "µW"),
                          title=f"DC power into a store held at each voltage, "
                                f"{_gap_label(chosen)}",
                          description="DC power through the bridge against the store voltage "
                                      "it is held at, with its 95 % interval as a band."),
            caption="Read where the curve peaks (the store voltage to hold, or the DC load "
                    "that holds it there) and where it falls to zero (the store voltage above "
                    "which the bridge no longer conducts: a store or start voltage beyond it "
                    "never charges)."))
    return Section("Powering the node", paragraphs=paragraphs, tables=tables, figures=figures)


def _history_section(chosen, history) -> Section | None:
    """Which orbit the chosen gap's beam ends on: its basin map at the case's tone and its
    up- and down-sweep."""
    if history is None:
        return None
    basins, sweep = history
    label = _gap_label(chosen)
    share = column("share")
    high = basins.high_power_share
    if len(basins.attractors) == 1:
        (only,) = basins.attractors
        opening = (f"Under the case's tone the beam at the {label} ends on one orbit from every "
                   f"one of {basins.starts_count} starts spread over the tip's deflection and "
                   f"speed: {orbit_name(only.kind, only.well, only.period)}.")
    else:
        opening = (f"Under the case's tone the beam at the {label} can end on "
                   f"{len(basins.attractors)} orbits; " + (
                       f"{share.show(high)} % of {basins.starts_count} starts spread over the "
                       "tip's deflection and speed end on the high-power side."
                       if high is not None else "none delivers power."))
    paragraphs = [opening]
    if chosen.upsweep_reaches_high_power is not None:
        paragraphs.append(
            "A machine that runs up to speed slowly carries the beam "
            + ("onto the high-power orbit." if chosen.upsweep_reaches_high_power else
               "past it: it arrives on a low-power orbit, so the high-power orbit needs a lucky "
               "start (or a kick) at this gap."))
    if sweep.interwell_held:
        parts = [f"{h.direction}, {h.frequency_Hz[0]:.3g} → {h.frequency_Hz[1]:.3g} Hz"
                 for h in sweep.interwell_held]
        paragraphs.append("The large interwell orbit is held: " + "; ".join(parts) + ".")
    paragraphs.append(sweep.rate_note[0].upper() + sweep.rate_note[1:] + ".")
    table = Table(title=f"Basins of attraction, {label}",
                  columns=[column(k) for k in ("kind", "well", "period", "share", "ci95_share",
                                               "mean_power_W", "high_power")],
                  rows=[[a.kind, a.well, a.period, a.share, a.ci95_share, a.mean_power_W,
                         a.high_power] for a in basins.attractors],
                  note="Share: basin stability, the share of the starts that end on the orbit "
                       "(Menck et al. 2013, Nat. Phys. 9:89), with its 95 % sampling interval. "
                       "Period 0: long-period or not settled.")
    jumps = Table(title=f"Jumps along the sweeps, {label}",
                  columns=[column(k) for k in ("direction", "frequency_Hz", "from", "to")],
                  rows=[[j.direction, j.frequency_Hz, j.from_, j.to] for j in sweep.jumps],
                  inline=False)
    figures = [
        Figure(title="Basins of attraction", svg=basin_figure(basins),
               caption="Read how much of the map the high-power orbit's colour covers, and "
                       "where: a beam disturbed from rest lands on the orbit whose basin holds "
                       "its state at that instant; thin interleaved bands mean the landing is a "
                       "matter of chance."),
        Figure(title="Power along slow sweeps", svg=sweep_figure(sweep),
               caption="Read where the two paths part: between the jumps the beam's orbit "
                       "depends on whether the machine's speed came from below (solid) or from "
                       "above (dashed)."),
    ]
    return Section("Which orbit the beam ends on", paragraphs=paragraphs,
                   tables=[table, jumps], figures=figures)


def _hop_section(gaps, study) -> Section | None:
    from harvester.report.views import hop_row_note

    maps = [r for r in gaps if r.hop_map]
    if not maps:
        return None
    freqs = [m.frequency_Hz for m in maps[0].hop_map]
    onset = np.array([[np.nan if m.onset_mps2 is None else m.onset_mps2 / STANDARD_GRAVITY
                       for m in r.hop_map] for r in maps])
    figure = Figure(
        title="Hop-threshold map",
        svg=heat_map(freqs, [r.gap_m * 1e3 for r in maps], onset,
                     x_axis=Axis("frequency", "Hz"), y_axis=Axis("magnet gap", "mm"),
                     value_axis=Axis("hop onset", "g", log=True),
                     missing_label="monostable, stops first or no hopping found",
                     title="Tone amplitude needed to start hopping",
                     description="Heat map of the hop-onset amplitude over frequency and "
                                 "magnet gap."),
        caption="Read the amplitude a tone at each frequency needs to start the beam hopping "
                "from rest at each gap: the site's level must lie above it for the magnets to "
                "pay. Grey: no wells, the beam strikes its stops first, or no hopping within "
                "the amplitudes tried.")
    s = study.comparison.hop_settings
    table = Table(title="Hop thresholds by gap and frequency",
                  columns=[CANDIDATE, *(column(k) for k in HOP_KEYS), column("note")],
                  rows=[[r.gap_m, *(getattr(m, k) for k in HOP_KEYS), hop_row_note(m)]
                        for r in maps for m in r.hop_map],
                  note=f"{s.initial_states_count} starts, {s.bisection_steps_count} "
                       "bisections: the settings of `harvester hop`.", inline=False)
    return Section("Hop thresholds", tables=[table], figures=[figure])


SPREAD_EVENTS = (("stay bistable", "probability_bistable"),
                 ("stay in a well at the site (bistable, no hop)", "probability_no_hop"),
                 ("fail a check", "probability_check_fails"))


def _spread_section(spread) -> Section | None:
    """The spread over the build tolerances: shares with their intervals, quantiles, what to
    tighten, and every build's hop onset (or barrier) against the tolerance that moves it
    most."""
    if spread is None:
        return None
    from harvester.analysis.tolerances import correlation_noise
    from harvester.report.views import tolerance_text

    where = (f"the {spread.gap_m * 1e3:.3g} mm gap" if spread.gap_m is not None
             else "the case's design")
    share = column("probability")
    lines = [f"{spread.samples_count} builds of {where}, sampled from the case's [tolerances] "
             f"and service temperatures (seed {spread.seed}; harvester spread takes more): "
             + "; ".join(f"{share.show(getattr(spread, key).probability)} % "
                         f"({share.show(getattr(spread, key).ci95_probability[0])}–"
                         f"{share.show(getattr(spread, key).ci95_probability[1])} %) {name}"
                         for name, key in SPREAD_EVENTS) + ".", f"Method: {spread.method}."]
    lines += list(spread.warnings)
    top = spread.sensitivity[0] if spread.sensitivity else None
    if top is not None:
        lines.append(f"The tolerance that moves the results most is {top.tolerance} "
                     f"(1 sd {tolerance_text(top.sd_SI, top.unit_SI)}, largest rank "
                     f"correlation {top.largest_correlation or 0.0:.2g}): tighten it first.")
    statistics = (("nominal", "nominal build"), ("mean", "mean"), ("p05", "5 % of builds"),
                  ("p50", "median build"), ("p95", "95 % of builds"))
    counts = ", ".join(f"{column(q.quantity).label} {q.defined_count}"
                       for q in spread.quantities)
    tables = [
        Table(title="Builds that …",
              columns=[Column("event", "builds that", text=True), column("probability"),
                       column("ci95_probability"), column("events_count"),
                       column("samples_count")],
              rows=[[name, p.probability, p.ci95_probability, p.events_count, p.samples_count]
                    for name, p in ((n, getattr(spread, k)) for n, k in SPREAD_EVENTS)],
              note="95 % intervals: exact binomial (Clopper & Pearson 1934, Biometrika 26:404)."),
        Table(title="Spread of the results over the builds",
              columns=[Column("statistic", "", text=True),
                       *(column(q.quantity) for q in spread.quantities)],
              rows=[[label, *(getattr(q, f"{key}_SI") for q in spread.quantities)]
                    for key, label in statistics],
              note="Each result over the builds where it is defined (no hop onset without "
                   f"wells or without hopping); builds with a value: {counts}."),
    ]
    keys = [e.quantity for e in top.effects] if top is not None else []
    if keys:
        tables.append(Table(
            title="What to tighten (rank correlation ρ of each tolerance with each result)",
            columns=[Column("rank", "rank"), column("tolerance"),
                     Column("sd_text", "1 sd", text=True),
                     *(Column(f"rho_{k}", f"ρ {column(k).label}", digits=2) for k in keys)],
            rows=[[r.rank, r.tolerance, tolerance_text(r.sd_SI, r.unit_SI),
                   *(e.rank_correlation for e in r.effects)] for r in spread.sensitivity],
            note="Spearman's rank correlation over the sampled builds (Spearman 1904); with "
                 f"{spread.samples_count} builds a |ρ| below about "
                 f"{correlation_noise(spread.samples_count):.2f} is within sampling noise "
                 "(Kendall 1948). harvester spread takes more builds and adds each tolerance's "
                 "one-at-a-time change from −1 to +1 standard deviation."))
    figures = [f for f in [_spread_figure(spread, top)] if f is not None]
    return Section("Spread over build tolerances", paragraphs=lines, tables=tables,
                   figures=figures)


def _spread_figure(spread, top) -> Figure | None:
    """Every build's hop onset (or, without onsets, its barrier) against the sampled value of
    the tolerance that moves the results most: a strip plot split by what the build does."""
    if top is None:
        return None
    i = [t.tolerance for t in spread.tolerances].index(top.tolerance)
    unit = top.unit_SI
    scale, shown = {"m": (1e3, "mm"), "K": (1.0, "K"), "kg": (1e3, "g")}.get(unit, (1.0, unit))
    offset = -273.15 if unit == "K" else 0.0
    shown = "°C" if unit == "K" else shown
    samples = spread.samples
    onsets = [r for r in samples if r.onset_mps2 is not None]
    if onsets:
        key, factor = "onset_mps2", 1.0 / STANDARD_GRAVITY
        axis = Axis("hop onset of the beam at rest", "g", log=True)
        groups = (("hops at the site", lambda r: r.hops is True),
                  ("stays in a well", lambda r: r.hops is False))
    else:
        key, factor = "barrier_J", 1e6
        axis = Axis("barrier", "µJ")
        groups = (("bistable", lambda r: r.regime == "bistable"),
                  ("monostable", lambda r: r.regime == "monostable"))
    series = []
    for label, member in groups:
        chosen = [r for r in samples if member(r) and getattr(r, key) is not None]
        if chosen:
            series.append(Series(label, [r.values_SI[i] * scale + offset for r in chosen],
                                 [getattr(r, key) * factor for r in chosen], line=False,
                                 markers=True))
    if not series:
        return None
    amplitude = spread.amplitude_mps2 if key == "onset_mps2" else None
    if amplitude:
        xs = [r.values_SI[i] * scale + offset for r in samples]
        series.append(Series("site amplitude", [min(xs), max(xs)],
                             [amplitude / STANDARD_GRAVITY] * 2, dashed=True))
    what = "hop onset" if key == "onset_mps2" else "barrier"
    return Figure(
        title=f"Spread of the {what}",
        svg=line_plot(series, x_axis=Axis(top.tolerance, shown), y_axis=axis,
                      title=f"Every sampled build's {what} against its {top.tolerance}",
                      description=f"Strip plot: one marker per sampled build, its {what} "
                                  f"against the sampled value of {top.tolerance}, split by "
                                  "what the build does."),
        caption=(f"Read how the {what} of the builds scatters and how it follows "
                 f"{top.tolerance}, the tolerance that moves the results most"
                 + (": builds above the dashed line (the site's amplitude) stay in a well and "
                    "deliver little; tighten the tolerance or move the gap until none do. Builds "
                    "without wells have no onset and are not shown."
                    if amplitude else ": builds at zero have lost their wells.")))


def _appendix_section(loaded, rows) -> Section:
    from harvester.materials import find_material

    checks = []
    for r in rows:
        for c in r.checks:
            checks.append([r.gap_m, c.check, c.level, c.value_SI, c.limit_SI, c.unit_SI,
                           c.margin, c.basis])
    every_check = Table(title="Stress and safety checks of every candidate",
                        columns=[CANDIDATE, column("check"), column("level"),
                                 Column("value_SI", "value (SI)"),
                                 Column("limit_SI", "limit (SI)"),
                                 Column("unit_SI", "SI unit", text=True), column("margin"),
                                 Column("basis", "basis", text=True)], rows=checks,
                        inline=False)
    wells = Table(title="Double-well analysis by gap",
                  columns=[CANDIDATE, *(column(k) for k in WELL_KEYS)],
                  rows=[[r.gap_m, *(getattr(r, k) for k in WELL_KEYS)] for r in rows
                        if not r.magnet_free], inline=False)
    case = loaded.case
    named = []
    if case.beam is not None:
        named.append((case.beam.substrate.material, "substrate"))
        if case.beam.piezo is not None:
            named.append((case.beam.piezo.material, "piezo"))
    for section in (case.tip_magnet, case.fixed_magnet):
        if section is not None:
            named.append((section.material, "magnet"))
    materials, seen = [], set()
    for name, kind in named:
        mat = find_material(name, kind)
        if mat.key in seen:
            continue
        seen.add(mat.key)
        for prop, value in mat.values.items():
            materials.append([mat.name, prop, value, mat.sources[prop]])
    material_table = Table(title="Material data and sources",
                           columns=[Column("material", "material", text=True),
                                    Column("property", "property", text=True),
                                    Column("value_SI", "value (SI)"),
                                    Column("source", "source", text=True)], rows=materials)
    paragraphs = ["The complete tables are in the data files beside this note."]
    if case.notes.strip():
        paragraphs.insert(0, f"About the case: {case.notes.strip()}")
    omitted: dict[str, list[str]] = {}
    for r in rows:
        for line in r.omitted_checks:
            omitted.setdefault(line, []).append(
                "magnet-free beam" if r.magnet_free else _gap_label(r))
    paragraphs += [f"Not checked: {o}" + ("." if len(who) == len(rows) else
                                           f" (only for the {', '.join(who)}).")
                   for o, who in sorted(omitted.items())]
    return Section("Appendix", paragraphs=paragraphs,
                   tables=[every_check, wells, material_table])


def _flags(chosen) -> list[tuple[str, str]]:
    """The chosen design's failed and warning checks and warnings; the other candidates'
    verdicts are in the candidate table and lines."""
    if chosen is None:
        return []
    label = _gap_label(chosen)
    flags = [(c.level, f"{label}: {c.check} (margin {c.margin:.3g})") for c in chosen.checks
             if c.level != "pass"]
    flags += [("warn", f"{label}: {w}") for w in chosen.warnings]
    return flags


# --- helpers ---------------------------------------------------------------------------------
def _flatten(data, prefix: str = ""):
    for key, value in data.items():
        name = f"{prefix}{key}"
        if isinstance(value, dict):
            yield from _flatten(value, name + ".")
        elif value is not None and value != [] and value != "":
            yield name, value


def _show_input(value) -> str:
    if isinstance(value, float):
        return f"{value:.6g}" if math.isfinite(value) else str(value)
    if isinstance(value, list):
        return ", ".join(_show_input(v) for v in value)
    return str(value)


# --- sweeps and basins -----------------------------------------------------------------------
BASIN_COLOURS = 7  # attractors drawn in a colour of their own; smaller basins share "other"


def orbit_name(kind: str, well: int, period: int) -> str:
    """An attractor in a few words: "intrawell x > 0", "interwell", "interwell, period 3",
    "interwell, not settled", "chaotic".

    >>> orbit_name("intrawell", -1, 1), orbit_name("interwell-periodic", 0, 0)
    ('intrawell x < 0', 'interwell, not settled')
    """
    if kind == "chaotic":
        return kind
    name = "interwell" if kind == "interwell-periodic" else kind
    if kind == "intrawell" and well:
        name += " x > 0" if well > 0 else " x < 0"
    if period > 1:
        name += f", period {period}"
    elif period == 0:
        name += ", not settled" if kind == "interwell-periodic" else ", no period"
    return name


def sweep_figure(result) -> str:
    """The mean power along each direction of a sweep (`commands.sweep.SweepResult`), the
    jumps marked on the curves."""
    frequency = result.over == "frequency"
    key = "frequency_Hz" if frequency else "amplitude_mps2"
    scale = 1.0 if frequency else 1.0 / STANDARD_GRAVITY
    series, jumps_x, jumps_y = [], [], []
    for curve in result.curves:
        x = np.array(getattr(curve, key)) * scale
        y = np.array([np.nan if p is None else p * 1e6 for p in curve.mean_power_W])
        series.append(Series(f"{curve.direction}-sweep", x, y, dashed=curve.direction == "down"))
        for jump in result.jumps:
            if jump.direction == curve.direction:
                at = int(np.argmin(np.abs(x - getattr(jump, key) * scale)))
                jumps_x.append(x[at])
                jumps_y.append(y[at])
    if jumps_x:
        series.append(Series("jumps", jumps_x, jumps_y, line=False, markers=True))
    powers = [p for c in result.curves for p in c.mean_power_W if p]
    log = bool(powers) and max(powers) / min(powers) > 30
    axis = Axis("tone frequency", "Hz") if frequency else Axis("tone amplitude", "g")
    return line_plot(series, x_axis=axis, y_axis=Axis("mean load power", "µW", log=log),
                     title=f"Mean power along a slow {result.over} sweep",
                     description=f"Mean load power against the tone's {result.over} along "
                                 "each direction of a slow sweep from rest in a well, with "
                                 "the jumps between orbits marked.")


def basin_figure(result) -> str:
    """The basin map of a `commands.basins.BasinsResult`: each start coloured by the attractor
    it ends on, the key naming each attractor's share and mean power."""
    power, share = column("mean_power_W"), column("share")
    shown = result.attractors[:BASIN_COLOURS]
    names = [f"{orbit_name(a.kind, a.well, a.period)}: {share.show(a.share)} %, "
             f"{power.show(a.mean_power_W)} µW" for a in shown]
    rank = np.array(result.grid.rank)
    rest = result.attractors[BASIN_COLOURS:]
    if rest:
        names[-1] = (f"{len(rest) + 1} other orbits: "
                     f"{share.show(sum(a.share for a in result.attractors[BASIN_COLOURS - 1:]))}"
                     " %")
        rank = np.where(rank >= BASIN_COLOURS - 1, BASIN_COLOURS - 1, rank)
    return category_map(np.array(result.grid.x_m) * 1e3, np.array(result.grid.v_mps), rank,
                        names, width=720, x_axis=Axis("initial tip deflection", "mm"),
                        y_axis=Axis("initial tip speed", "m/s"),
                        title=f"Basins of attraction at {result.frequency_Hz:.4g} Hz, "
                              f"{result.amplitude_mps2 / STANDARD_GRAVITY:.3g} g",
                        missing_label="strikes the stops or diverges",
                        description="Map of the starting tip deflection and speed, at the "
                                    "crest of the forcing, coloured by the orbit each start "
                                    "ends on; the key gives each orbit's share of the starts "
                                    "and its mean power.")
