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
from harvester.model import odd_potential
from harvester.report.columns import Column, column
from harvester.report.note import Figure, Note, Section, Table
from harvester.report.svg import Axis, Series, heat_map, line_plot
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

CANDIDATE = Column("gap_m", "gap", "mm", 3, words=((None, "no magnet"),))


def build_note(loaded, *, seed: int = 0, magnet_model: str = "exact",
               workers: int | None = None, cluster: str | None = None,
               progress: Callable[[int, int], None] | None = None) -> Note:
    """Run the design study for a case and lay it out as a `Note`."""
    from harvester.commands.study import design_study

    study = design_study(loaded, seed=seed, magnet_model=magnet_model, workers=workers,
                         cluster=cluster, progress=progress)
    return note_from_study(loaded, study, seed=seed, magnet_model=magnet_model)


def note_from_study(loaded, study, *, seed: int, magnet_model: str) -> Note:
    case = loaded.case
    title = case.title or loaded.path.stem
    subtitle = (f"Design note from {loaded.path.name}, harvester {__version__}, "
                f"{date.today().isoformat()}; seed {seed}, magnet model {magnet_model}")
    rows = study.comparison.rows
    gaps = [r for r in rows if not r.magnet_free]
    sections = [
        _summary_section(study),
        _inputs_section(loaded),
        _wells_section(gaps),
        _hop_section(gaps, study),
        _power_section(rows, study),
        _stress_section(rows),
    ]
    return Note(title=title, subtitle=subtitle, sections=tuple(s for s in sections if s),
                cautions=CAUTIONS, flags=tuple(_flags(study)))


def _gap_label(row) -> str:
    return "no magnet" if row.magnet_free else f"{row.gap_m * 1e3:.3g} mm"


# --- sections --------------------------------------------------------------------------------
SUMMARY_KEYS = ("regime", "barrier_J", "well_frequency_Hz", "onset_mps2", "mean_power_W",
                "ci95_W", "gain_ratio", "hop_rate_per_s", "worst_check", "worst_level",
                "worst_margin")


def _summary_section(study) -> Section:
    comp = study.comparison
    rows = comp.rows
    chosen = comp.recommended_index
    if comp.recommended_candidate is None:
        lead = f"No candidate is recommended: {comp.recommendation}."
    elif comp.recommended_gap_m is None:
        lead = f"Recommendation: {comp.recommendation[0].upper()}{comp.recommendation[1:]}."
    else:
        lead = f"Recommended magnet gap: {comp.recommendation}."
    gaps = [r for r in rows if not r.magnet_free]
    paragraphs = [
        lead,
        f"{len(gaps)} candidate gaps and the same beam without the fixed magnet were evaluated "
        f"under the case's {study.excitation} excitation. For each: the static double well, "
        "the hop thresholds, the mean load power with its 95 % confidence interval, and the "
        "stress and safety checks of the predicted motion. The gain is each candidate's mean "
        "power over the magnet-free beam's, evaluated once at its own load.",
    ]
    table = Table(
        title="Candidate gaps",
        columns=[CANDIDATE, *(column(k) for k in SUMMARY_KEYS), column("recommended")],
        rows=[[r.gap_m, *(getattr(r, k) for k in SUMMARY_KEYS), i == chosen]
              for i, r in enumerate(rows)],
        note="Hop onset: smallest tone amplitude at which the beam at rest in a well starts "
             "hopping (at the case's tone frequency; for random excitation the lowest onset "
             "inside the band). CI: 95 % confidence interval of the mean power. Gain: over the "
             "magnet-free beam (the row without a magnet).")
    free = next((r for r in rows if r.magnet_free), None)
    series = [Series("with magnets", [r.gap_m * 1e3 for r in gaps],
                     [r.mean_power_W * 1e6 for r in gaps], markers=True,
                     band=([r.ci95_W[0] * 1e6 for r in gaps],
                           [r.ci95_W[1] * 1e6 for r in gaps]))]
    if free is not None and gaps:
        span = [gaps[0].gap_m * 1e3, gaps[-1].gap_m * 1e3]
        series.append(Series("same beam without magnets", span,
                             [free.mean_power_W * 1e6] * 2, dashed=True))
    powers = [r.mean_power_W for r in rows if r.mean_power_W > 0]
    log = bool(powers) and max(powers) / min(powers) > 30
    figure = Figure(
        title="Mean power by gap",
        svg=line_plot(series, x_axis=Axis("magnet gap", "mm"),
                      y_axis=Axis("mean load power", "µW", log=log),
                      title="Mean load power by candidate gap"),
        caption="Shaded: 95 % confidence interval. Dashed: the same beam without the fixed "
                "magnet, at its own load; a gap pays only where its band lies above the line.")
    return Section("Summary", paragraphs=paragraphs, tables=[table],
                   figures=[figure] if gaps else [])


def _inputs_section(loaded) -> Section:
    from harvester.case.schema import case_si_dict
    from harvester.materials import find_material

    design = case_si_dict(loaded.case)
    entries = [[key, _show_input(value)] for key, value in _flatten(design)]
    inputs = Table(title="Case inputs (SI)",
                   columns=[Column("key", "key", text=True), Column("value", "value", text=True)],
                   rows=entries, note="Values as validated from the case file; each key names "
                                      "its SI unit (m, kg, Hz, m/s², Ω, H, F, V).")
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
    notes = [loaded.case.notes.strip()] if loaded.case.notes.strip() else []
    return Section("Inputs", paragraphs=notes, tables=[inputs, material_table])


WELL_KEYS = ("regime", "critical_gap_m", "wells_m", "barrier_J", "well_frequency_Hz",
             "linear_frequency_Hz", "k1_N_per_m", "k3_N_per_m3")


def _wells_section(gaps) -> Section | None:
    if not gaps:
        return None
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
        series.append(Series(_gap_label(r), x * 1e3, odd_potential(r.stiffness_SI, x) * 1e6))
    figure = Figure(
        title="Double-well potential",
        svg=line_plot(series, x_axis=Axis("tip deflection", "mm"),
                      y_axis=Axis("potential energy", "µJ"),
                      title="Potential energy of the beam and magnets by gap"),
        caption="U(x) = Σ k(2j+1) x^(2j+2)/(2j+2) from the fitted restoring force, out to 2.2 "
                "times the widest well (within each fit window). Wells are the minima; the "
                "barrier is the rise from a well to x = 0.")
    table = Table(title="Double-well analysis by gap",
                  columns=[CANDIDATE, *(column(k) for k in WELL_KEYS)],
                  rows=[[r.gap_m, *(getattr(r, k) for k in WELL_KEYS)] for r in gaps])
    return Section("Double well", paragraphs=[
        "Below the critical gap the straight beam is unstable and the magnets give it two "
        "wells; the barrier between them is what the excitation must overcome."],
        tables=[table], figures=[figure] if series else [])


HOP_KEYS = ("frequency_Hz", "melnikov_mps2", "onset_mps2", "certain_mps2", "stop_mps2")


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
                     title="Tone amplitude needed to start hopping"),
        caption="Smallest base-acceleration amplitude of a tone at which the beam, starting at "
                "rest in a well, settles into interwell motion. Grey: no wells, the beam "
                "strikes its stops first, or no hopping within the amplitudes tried.")
    table_rows = [[r.gap_m, *(getattr(m, k) for k in HOP_KEYS), hop_row_note(m)]
                  for r in maps for m in r.hop_map]
    s = study.comparison.hop_settings
    table = Table(title="Hop thresholds by gap and frequency",
                  columns=[CANDIDATE, *(column(k) for k in HOP_KEYS), column("note")],
                  rows=table_rows,
                  note="Melnikov: necessary condition for chaotic hopping (Guckenheimer & "
                       "Holmes 1983, §4.5), a lower bound. Certain: no intrawell orbit remains "
                       f"among the {s.initial_states_count} starts tried (the same settings "
                       "as `harvester hop`).")
    return Section("Hop thresholds", tables=[table], figures=[figure])


SWEEP_KEYS = ("frequency_Hz", "mean_power_W", "linear_power_W", "gain_ratio",
              "interwell_share", "hop_rate_per_s", "dominant_orbit")


def _power_section(rows, study) -> Section:
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
                          title=f"Tone at the case's amplitude, gap {_gap_label(focus)}"),
            caption="Share-weighted mean over the orbits reached from an ensemble of initial "
                    "states; the magnet-free beam is its exact linear steady state at the same "
                    "load. The interwell share in the table says how many starts the mean "
                    "rests on."))
        tables.append(Table(
            title=f"Power versus frequency at {_gap_label(focus)}",
            columns=[column(k) for k in SWEEP_KEYS],
            rows=[[getattr(s, k) for k in SWEEP_KEYS] for s in sweep]))
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
                          title="Base-acceleration PSD used for the Monte Carlo"),
            caption=f"RMS {spec.summary.rms_mps2 / STANDARD_GRAVITY:.3g} g."))
        paragraphs.extend(spec.warnings)
    orbit_rows = [[r.gap_m, o.kind, o.share, o.mean_power_W] for r in rows for o in r.orbits]
    if orbit_rows:
        tables.append(Table(title="Orbit mix by candidate",
                            columns=[CANDIDATE, column("kind"), column("share"),
                                     column("mean_power_W")], rows=orbit_rows))
    return Section("Mean power", paragraphs=paragraphs, tables=tables, figures=figures)


def _stress_section(rows) -> Section:
    from harvester.report.views import CHECK_DISPLAY as SCALES

    table_rows = []
    for r in rows:
        for c in r.checks:
            unit, scale = SCALES.get(c.unit_SI, (c.unit_SI, 1.0))
            table_rows.append([r.gap_m, c.check, c.level, c.value_SI, c.limit_SI, c.unit_SI,
                               c.margin, f"{c.value_SI * scale:.3g} of {c.limit_SI * scale:.3g}"
                               f" {unit}", c.basis])
    table = Table(title="Stress and safety checks by candidate",
                  columns=[CANDIDATE, column("check"), column("level"),
                           Column("value_SI", "value (SI)"), Column("limit_SI", "limit (SI)"),
                           Column("unit_SI", "SI unit", text=True), column("margin"),
                           Column("reading", "value of limit", text=True),
                           Column("basis", "basis", text=True)], rows=table_rows,
                  note="Mean stress from the well the beam sits in, alternating stress from the "
                       "predicted motion about it (whole deflection envelope). Pass needs the "
                       "margin to reach [limits].safety_factor.")
    omitted = sorted({line for r in rows for line in r.omitted_checks})
    return Section("Stresses and safety", paragraphs=[f"Not checked: {o}." for o in omitted],
                   tables=[table])


def _flags(study) -> list[tuple[str, str]]:
    """The checks of the recommended candidate (or, with none, of the focus gap) and the
    warnings about it; the other candidates' verdicts are in the tables."""
    comp = study.comparison
    index = comp.recommended_index
    row = comp.rows[index] if index is not None else study.focus
    if row is None:
        return []
    label = _gap_label(row)
    flags = [(c.level, f"{label}: {c.check} (margin {c.margin:.3g})") for c in row.checks
             if c.level != "pass"]
    flags += [("warn", f"{label}: {w}") for w in row.warnings]
    if index is not None and row.passes:
        flags.append(("pass", f"every check passes for the recommended design ({label})"))
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
