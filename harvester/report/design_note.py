"""Turn a design study into a design note: inputs, wells, hop map, power, stresses, cautions."""

from __future__ import annotations

import math
from collections.abc import Callable
from datetime import date

import numpy as np

from harvester import __version__
from harvester.model import odd_potential
from harvester.report.note import Column, Figure, Note, Section, Table
from harvester.report.svg import Axis, Series, heat_map, line_plot

G = 9.80665  # m/s² per g

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


def build_note(loaded, *, seed: int = 0, magnet_model: str = "exact",
               workers: int | None = None, cluster: str | None = None,
               progress: Callable[[int, int], None] | None = None) -> Note:
    """Run the design study for a case and lay it out as a `Note`."""
    from harvester.analysis.study import design_study

    study = design_study(loaded, seed=seed, magnet_model=magnet_model, workers=workers,
                         cluster=cluster, progress=progress)
    return note_from_study(loaded, study, seed=seed, magnet_model=magnet_model)


def note_from_study(loaded, study, *, seed: int, magnet_model: str) -> Note:
    case = loaded.case
    rows = study.comparison.rows
    title = case.title or loaded.path.stem
    subtitle = (f"Design note from {loaded.path.name}, harvester {__version__}, "
                f"{date.today().isoformat()}; seed {seed}, magnet model {magnet_model}")
    sections = [
        _summary_section(study),
        _inputs_section(loaded),
        _wells_section(rows),
        _hop_section(rows, study),
        _power_section(rows, study),
        _stress_section(rows, study),
    ]
    return Note(title=title, subtitle=subtitle, sections=tuple(s for s in sections if s),
                cautions=CAUTIONS, flags=tuple(_flags(rows, study)))


# --- sections --------------------------------------------------------------------------------
def _summary_section(study) -> Section:
    comp = study.comparison
    rows = comp.rows
    paragraphs = []
    if comp.recommended is not None:
        paragraphs.append(f"Recommended magnet gap: {comp.reason}.")
    else:
        paragraphs.append(f"No gap is recommended: {comp.reason}.")
    paragraphs.append(
        f"{len(rows)} candidate gaps were evaluated under the case's {study.excitation} "
        "excitation. For each: the static double well, the hop thresholds, the mean load power "
        "against the same beam without magnets, and the stress and safety checks of the "
        "predicted motion.")
    table = Table(
        title="Candidate gaps",
        columns=[Column("gap", "mm"), Column("regime"), Column("barrier", "µJ"),
                 Column("well frequency", "Hz"), Column("hop onset", "g"),
                 Column("mean power", "µW"), Column("CI low", "µW"), Column("CI high", "µW"),
                 Column("magnet-free power", "µW"), Column("gain", "×"),
                 Column("hop rate", "1/s"), Column("worst check"), Column("worst margin"),
                 Column("recommended")],
        rows=[[r["gap_m"] * 1e3, r["regime"], r["barrier_J"] * 1e6, r["well_frequency_Hz"],
               _scaled(r.get("onset_mps2"), 1 / G), _scaled(r["mean_power_W"], 1e6),
               _scaled((r.get("ci95_W") or [None, None])[0], 1e6),
               _scaled((r.get("ci95_W") or [None, None])[1], 1e6),
               _scaled(r.get("linear_power_W"), 1e6), r.get("gain_over_linear"),
               r.get("hop_rate_per_s"),
               f"{r['worst']['level']}: {r['worst']['name']}" if r.get("worst") else "",
               r["worst"]["margin"] if r.get("worst") else None,
               "yes" if i == comp.recommended else ""] for i, r in enumerate(rows)],
        note="Hop onset: smallest tone amplitude at which the beam at rest in a well starts "
             "hopping (at the case's tone frequency; for random excitation the lowest onset "
             "inside the band). CI: 95 % confidence interval of the mean power.")
    figure = Figure(
        title="Mean power by gap",
        svg=line_plot(
            [Series("with magnets", [r["gap_m"] * 1e3 for r in rows],
                    [_scaled(r["mean_power_W"], 1e6) for r in rows], markers=True,
                    band=([_scaled((r.get("ci95_W") or [None, None])[0], 1e6) for r in rows],
                          [_scaled((r.get("ci95_W") or [None, None])[1], 1e6) for r in rows])),
             Series("same beam without magnets", [r["gap_m"] * 1e3 for r in rows],
                    [_scaled(r.get("linear_power_W"), 1e6) for r in rows], dashed=True)],
            x_axis=Axis("magnet gap", "mm"), y_axis=Axis("mean load power", "µW",
                                                         log=_positive_span(rows)),
            title="Mean load power by candidate gap"),
        caption="Shaded: 95 % confidence interval. The magnet-free beam is evaluated at the "
                "same load as each gap (a \"matched\" load is searched per gap).")
    return Section("Summary", paragraphs=paragraphs, tables=[table], figures=[figure])


def _inputs_section(loaded) -> Section:
    from harvester.materials import find_material

    design = loaded.case.model_dump(mode="json", by_alias=True)
    entries = []
    for key, value in _flatten(design):
        entries.append([key, _show_input(key, value)])
    inputs = Table(title="Case inputs (SI)", columns=[Column("key"), Column("value (SI)")],
                   rows=entries, note="Values as validated from the case file, in SI units "
                                      "(m, kg, s, Hz, m/s², Ω, H, F, V).")
    materials = []
    case = loaded.case
    named = []
    if case.beam is not None:
        named.append((case.beam.substrate.material, "substrate"))
        if case.beam.piezo is not None:
            named.append((case.beam.piezo.material, "piezo"))
    for section in (case.tip_magnet, case.fixed_magnet):
        if section is not None:
            named.append((section.material, "magnet"))
    seen = set()
    for name, kind in named:
        mat = find_material(name, kind)
        if mat.key in seen:
            continue
        seen.add(mat.key)
        for prop, value in mat.values.items():
            materials.append([mat.name, prop, value, mat.sources[prop]])
    material_table = Table(title="Material data and sources",
                           columns=[Column("material"), Column("property"),
                                    Column("value (SI)"), Column("source")], rows=materials)
    return Section("Inputs", paragraphs=[loaded.case.notes.strip()] if loaded.case.notes.strip()
                   else [], tables=[inputs, material_table])


def _wells_section(rows) -> Section:
    series = []
    # one span for every gap, a little past twice the widest well, so the wells stay readable
    # when the force is fitted out to a distant stop
    widest = max((max(r["wells_m"]) for r in rows if r["wells_m"]), default=None)
    for r in rows:
        k = r["stiffness_terms_SI"]
        window = r.get("fit_window_m") or math.inf
        reach = min(window, 2.2 * widest) if widest else r.get("fit_window_m")
        if not reach or not math.isfinite(reach):
            continue
        x = np.linspace(-reach, reach, 161)
        u = odd_potential(k, x)
        series.append(Series(f"{r['gap_m'] * 1e3:.3g} mm", x * 1e3, u * 1e6))
    figure = Figure(
        title="Double-well potential",
        svg=line_plot(series, x_axis=Axis("tip deflection", "mm"),
                      y_axis=Axis("potential energy", "µJ"),
                      title="Potential energy of the beam and magnets by gap"),
        caption="U(x) = Σ k(2j+1) x^(2j+2)/(2j+2) from the fitted restoring force, out to 2.2 "
                "times the widest well (within each fit window). Wells are the minima; the "
                "barrier is the rise from a well to x = 0.")
    table = Table(
        title="Double-well analysis by gap",
        columns=[Column("gap", "mm"), Column("regime"), Column("critical gap", "mm"),
                 Column("well position", "mm"), Column("barrier", "µJ"),
                 Column("well frequency", "Hz"), Column("magnet-free frequency", "Hz"),
                 Column("k1", "N/m"), Column("k3", "N/m³")],
        rows=[[r["gap_m"] * 1e3, r["regime"], _scaled(r["critical_gap_m"], 1e3),
               max(r["wells_m"]) * 1e3 if r["wells_m"] else None, r["barrier_J"] * 1e6,
               r["well_frequency_Hz"], r["linear_frequency_Hz"], r["k1_N_per_m"],
               r["k3_N_per_m3"]] for r in rows])
    return Section("Double well", paragraphs=[
        "Below the critical gap the straight beam is unstable and the magnets give it two "
        "wells; the barrier between them is what the excitation must overcome."],
        tables=[table], figures=[figure] if series else [])


def _hop_section(rows, study) -> Section | None:
    maps = [r for r in rows if r.get("hop_map")]
    if not maps:
        return None
    freqs = [m["frequency_Hz"] for m in maps[0]["hop_map"]]
    gaps = [r["gap_m"] * 1e3 for r in maps]
    onset = np.array([[np.nan if m["onset_mps2"] is None else m["onset_mps2"] / G
                       for m in r["hop_map"]] for r in maps])
    figure = Figure(
        title="Hop-threshold map",
        svg=heat_map(freqs, gaps, onset, x_axis=Axis("frequency", "Hz"),
                     y_axis=Axis("magnet gap", "mm"),
                     value_axis=Axis("hop onset", "g", log=True),
                     missing_label="monostable or no hopping found",
                     title="Tone amplitude needed to start hopping"),
        caption="Smallest base-acceleration amplitude of a tone at which the beam, starting at "
                "rest in a well, settles into interwell motion. Grey: no wells, or no hopping "
                "within the amplitudes tried.")
    table_rows = []
    for r in maps:
        for m in r["hop_map"]:
            table_rows.append([r["gap_m"] * 1e3, m["frequency_Hz"],
                               _scaled(m["melnikov_mps2"], 1 / G), _scaled(m["onset_mps2"], 1 / G),
                               _scaled(m["certain_mps2"], 1 / G), m.get("note", "")])
    table = Table(title="Hop thresholds by gap and frequency",
                  columns=[Column("gap", "mm"), Column("frequency", "Hz"),
                           Column("Melnikov bound", "g"), Column("onset", "g"),
                           Column("certain", "g"), Column("note")], rows=table_rows,
                  note="Melnikov: necessary condition for chaotic hopping (Guckenheimer & "
                       "Holmes 1983, §4.5), a lower bound. Certain: no intrawell orbit remains "
                       "among the initial states tried.")
    return Section("Hop thresholds", tables=[table], figures=[figure])


def _power_section(rows, study) -> Section:
    figures, tables, paragraphs = [], [], []
    if study.sweep:
        sweep = study.sweep
        f = [s["frequency_Hz"] for s in sweep]
        figures.append(Figure(
            title="Power versus frequency",
            svg=line_plot([Series("bistable (with magnets)", f,
                                  [_scaled(s["mean_power_W"], 1e6) for s in sweep], markers=True),
                           Series("same beam without magnets", f,
                                  [_scaled(s["linear_power_W"], 1e6) for s in sweep],
                                  dashed=True)],
                          x_axis=Axis("frequency", "Hz"),
                          y_axis=Axis("mean load power", "µW", log=True),
                          title=f"Tone at the case's amplitude, gap {study.focus_gap_m * 1e3:.3g}"
                                " mm"),
            caption="Share-weighted mean over the orbits reached from an ensemble of initial "
                    "states; the magnet-free beam is its exact linear steady state."))
        tables.append(Table(
            title=f"Power versus frequency at {study.focus_gap_m * 1e3:.3g} mm",
            columns=[Column("frequency", "Hz"), Column("bistable power", "µW"),
                     Column("magnet-free power", "µW"), Column("gain", "×"),
                     Column("hop rate", "1/s"), Column("main orbit")],
            rows=[[s["frequency_Hz"], _scaled(s["mean_power_W"], 1e6),
                   _scaled(s["linear_power_W"], 1e6), s["gain_over_linear"],
                   s["hop_rate_per_s"], s["dominant_orbit"]] for s in sweep]))
        wins = [s["frequency_Hz"] for s in sweep if (s["gain_over_linear"] or 0) > 1]
        if wins:
            paragraphs.append(f"With magnets the beam delivers more than without between "
                              f"{min(wins):.3g} and {max(wins):.3g} Hz (at "
                              f"{study.focus_gap_m * 1e3:.3g} mm).")
    if study.spectrum:
        spec = study.spectrum
        f = np.asarray(spec["frequency_Hz"])
        psd = np.asarray(spec["psd_m2_s4_per_Hz"]) / G**2
        keep = psd > 0
        figures.append(Figure(
            title="Site vibration",
            svg=line_plot([Series("site PSD", f[keep], psd[keep])],
                          x_axis=Axis("frequency", "Hz", log=True),
                          y_axis=Axis("acceleration PSD", "g²/Hz", log=True),
                          title="Base-acceleration PSD used for the Monte Carlo"),
            caption=f"RMS {spec['summary']['rms_mps2'] / G:.3g} g."))
        paragraphs.extend(spec.get("warnings") or [])
    orbit_rows = []
    for r in rows:
        for o in r.get("orbits") or []:
            orbit_rows.append([r["gap_m"] * 1e3, o["kind"], o["share"],
                               _scaled(o["mean_power_W"], 1e6)])
    if orbit_rows:
        tables.append(Table(title="Orbit mix by gap",
                            columns=[Column("gap", "mm"), Column("orbit"), Column("share"),
                                     Column("mean power", "µW")], rows=orbit_rows))
    return Section("Mean power", paragraphs=paragraphs, tables=tables, figures=figures)


def _stress_section(rows, study) -> Section:
    table_rows = []
    for r in rows:
        for c in r["checks"]:
            table_rows.append([r["gap_m"] * 1e3, c["name"], c["level"], c["value_SI"],
                               c["limit_SI"], c["unit"], c["margin"], c["basis"]])
    table = Table(title="Stress and safety checks by gap",
                  columns=[Column("gap", "mm"), Column("check"), Column("result"),
                           Column("value (SI)"), Column("limit (SI)"), Column("unit"),
                           Column("margin"), Column("basis")], rows=table_rows,
                  note="Mean stress from the well the beam sits in, alternating stress from the "
                       "predicted motion about it (whole deflection envelope). Pass needs the "
                       "margin to reach [limits].safety_factor.")
    omitted = sorted({line for r in rows for line in r.get("omitted_checks", [])})
    return Section("Stresses and safety", paragraphs=[f"Not checked: {o}." for o in omitted],
                   tables=[table])


def _flags(rows, study) -> list[tuple[str, str]]:
    flags = []
    for r in rows:
        gap = f"{r['gap_m'] * 1e3:.3g} mm"
        for c in r["checks"]:
            if c["level"] != "pass":
                flags.append((c["level"], f"{gap}: {c['name']} (margin {c['margin']:.3g})"))
        for w in r.get("warnings", []):
            flags.append(("warn", f"{gap}: {w}"))
    comp = study.comparison
    if comp.recommended is not None:
        flags.append(("pass", f"every check passes at the recommended gap "
                              f"{rows[comp.recommended]['gap_m'] * 1e3:.3g} mm"))
    return flags


# --- helpers ---------------------------------------------------------------------------------
def _scaled(value, factor: float):
    return None if value is None else value * factor


def _positive_span(rows) -> bool:
    values = [r["mean_power_W"] for r in rows if r["mean_power_W"]]
    return bool(values) and min(values) > 0 and max(values) / min(values) > 30


def _flatten(data, prefix: str = ""):
    for key, value in data.items():
        name = f"{prefix}{key}"
        if isinstance(value, dict):
            yield from _flatten(value, name + ".")
        elif value is not None and value != [] and value != "":
            yield name, value


def _show_input(key: str, value) -> str:
    if isinstance(value, float):
        return f"{value:.6g}" if math.isfinite(value) else str(value)
    if isinstance(value, list):
        return ", ".join(_show_input(key, v) for v in value)
    return str(value)
