"""What each command shows: which record keys, under which titles, with which notes.

Every number goes through the column registry (`harvester.report.columns`); JSON and CSV are
the records themselves (`harvester.report.render`).
"""

from __future__ import annotations

from harvester.commands.records import json_value
from harvester.report.columns import LEVEL_STYLE, Column, column, columns, format_number
from harvester.report.render import (
    console_for,
    emit_csv,
    emit_json,
    emit_record_csv,
    print_lines,
    print_record,
    print_rows,
)

WELLS_KEYS = ("regime", "gap_m", "critical_gap_m", "wells_m", "saddle_m", "barrier_J",
              "barriers_J", "well_frequency_Hz", "well_frequencies_Hz",
              "linear_frequency_Hz", "effective_mass_kg", "forcing_mass_kg",
              "damping_N_s_per_m", "k1_N_per_m", "k3_N_per_m3", "axial_force_N",
              "buckling_load_N", "buckling_load_ratio", "magnet_model",
              "fit_terms_count", "fit_window_m", "fit_well_error_fraction",
              "fit_barrier_error_fraction", "fit_rms_error_fraction")
DESIGN_KEYS = ("bending_stiffness_N_m2", "mass_per_length_kg_per_m", "neutral_axis_m",
               "tip_mass_kg", "tip_mass_ratio", "tip_mass_offset_ratio", "eigenvalue",
               "short_circuit_frequency_Hz", "open_circuit_frequency_Hz",
               "tip_stiffness_N_per_m", "static_stiffness_N_per_m",
               "slope_per_deflection_per_m", "coupling_N_per_V", "capacitance_F",
               "tip_magnet_moment_A_m2", "fixed_magnet_moment_A_m2",
               "magnet_stiffness_at_rest_N_per_m")
DATA_FILE_KEYS = ("key", "file", "content", "frequency_range_Hz", "rms_mps2", "duration_s",
                  "sample_rate_Hz", "rows_count")
# units a check's value and limit are shown in, by the SI unit beside them
CHECK_DISPLAY = {"Pa": ("MPa", 1e-6), "m": ("mm", 1e3), "-": ("µε", 1e6), "V": ("V", 1.0)}


def show_wells(result, fmt: str) -> None:
    cols = columns(*WELLS_KEYS)
    if fmt == "json":
        emit_json(result)
    elif fmt == "csv":
        emit_record_csv(result, cols)
    else:
        console = print_record("Double-well analysis", result, cols)
        print_lines(console, result.warnings)


def show_check(result, fmt: str) -> None:
    if fmt == "json":
        emit_json(result)
        return
    cols = columns(*DESIGN_KEYS)
    wells = [c for c in columns(*WELLS_KEYS) if c.key not in DESIGN_KEYS]
    if fmt == "csv":
        emit_record_csv({**json_value(result.derived), **json_value(result.wells)},
                        cols + wells)
        return
    title = result.design.get("title") or "Design check"
    console = print_record(title, result.derived, cols)
    print_record("Double well at the case's gap", result.wells, wells)
    if result.data_files:
        print_rows("Data files (read and checked)", result.data_files, columns(*DATA_FILE_KEYS))
    print_lines(console, result.warnings)


def show_materials(result, fmt: str) -> None:
    keys = ("material", "kind", "property", "value_SI", "unit_SI", "value_display",
            "unit_display", "source")
    if fmt == "json":
        emit_json(result)
        return
    if fmt == "csv":
        emit_csv(result.materials, keys)
        return
    from rich.table import Table

    table = Table(title="Materials (materials/*.toml)", header_style="bold")
    for name in ("material", "property"):
        table.add_column(name, no_wrap=True)
    table.add_column("value", justify="right")
    table.add_column("unit")
    table.add_column("source", overflow="fold")
    previous = None
    for row in result.materials:
        table.add_row(row.material if row.material != previous else "", row.property,
                      format_number(row.value_display, 4), row.unit_display, row.source)
        previous = row.material
    console_for(table).print(table)


# --- hop thresholds --------------------------------------------------------------------------
def hop_row_note(row, unit: str = "g") -> str:
    """A row's note in the table's display unit: why an amplitude is missing, or what else
    happened on the way (from the row's status and amplitudes, `analysis.thresholds`)."""
    from harvester.analysis.thresholds import MONOSTABLE, NO_HOP_IN_SCAN, STOP_BEFORE_HOP

    acc = column("onset_mps2", unit)

    def amount(value) -> str:
        return f"{acc.show(value)} {unit}"

    if row.status == MONOSTABLE:
        return "monostable: there is no barrier to hop over"
    if row.status == STOP_BEFORE_HOP:
        return f"strikes the stop at {amount(row.stop_mps2)} before hopping"
    if row.status == NO_HOP_IN_SCAN:
        top = f" up to {amount(row.scan_top_mps2)}" if row.scan_top_mps2 else ""
        return f"no hopping from rest{top}"
    if row.certain_mps2 is None:
        upto = ("the stop strike" if row.stop_mps2 else amount(row.scan_top_mps2)
                if row.scan_top_mps2 else "the end of the scan")
        return f"some starts stay in a well up to {upto}"
    if row.stop_mps2 is not None:
        return f"strikes the stop at {amount(row.stop_mps2)}"
    return ""


HOP_KEYS = ("frequency_Hz", "melnikov_mps2", "onset_mps2", "certain_mps2", "stop_mps2",
            "interwell_exists_mps2")
HOP_CSV_KEYS = HOP_KEYS + ("scan_top_mps2", "status", "flagged", "note")


def show_thresholds(result, fmt: str) -> None:
    if fmt == "json":
        emit_json(result)
        return
    if fmt == "csv":
        emit_csv(result.rows, HOP_CSV_KEYS)
        return
    rows = [dict(json_value(r), note=hop_row_note(r)) for r in result.rows]
    cols = columns(*HOP_KEYS)
    if not any(r["stop_mps2"] is not None for r in rows):
        cols = [c for c in cols if c.key != "stop_mps2"]
    if any(r["note"] for r in rows):
        cols.append(column("note"))
    s = result.settings
    footer = (f"load {format_ohm(result.load_ohm)} ({result.load_note}); frequencies: "
              f"{result.frequencies_note}; {s.initial_states_count} starts, "
              f"{s.bisection_steps_count} bisections, seed {s.seed}. Melnikov is a necessary "
              "condition (lower bound); onset: the beam at rest in a well starts hopping; "
              "certain: no intrawell orbit remains; orbit exists: some start ends in interwell "
              "motion (to a factor 2^(1/4)).")
    print_rows("Interwell hop thresholds (base acceleration amplitude)", rows, cols,
               footer=footer)


def format_ohm(value: float | None) -> str:
    if value is None or value != value or value == float("inf"):
        return "open circuit"
    for scale, unit in ((1e6, "MΩ"), (1e3, "kΩ")):
        if value >= scale:
            return f"{format_number(value / scale, 3)} {unit}"
    return f"{format_number(value, 3)} Ω"


# --- mean power ------------------------------------------------------------------------------
POWER_KEYS = ("mean_power_W", "ci95_W", "linear_power_W", "gain_ratio", "hop_rate_per_s",
              "kramers_hop_rate_per_s", "interwell_share", "rms_voltage_V", "rms_current_A",
              "input_power_W", "max_abs_x_m")
ORBIT_KEYS = ("kind", "well", "period", "share", "mean_power_W", "hop_rate_per_s",
              "max_abs_x_m", "lyapunov_per_s")
FAST_KEYS = ("kind", "mean_power_W", "rms_displacement_m", "mean_offset_m",
             "equivalent_stiffness_N_per_m")
SWEEP_KEYS = ("frequency_Hz", "mean_power_W", "linear_power_W", "gain_ratio",
              "interwell_share", "hop_rate_per_s", "dominant_orbit")
DC_KEYS = ("dc_power_W", "ci95_W", "store", "store_voltage_V", "diode_drop_V", "dc_current_A",
           "conduction_share", "diode_loss_W", "dc_load_ohm", "charge_time_s", "charge_target_V")
NODE_KEYS = ("node_power_W", "budget_margin_W", "node_starts", "start_share",
             "start_voltage_V", "start_dc_power_W", "time_to_first_report_s")
DC_CSV_KEYS = ("dc_power_W", "dc_ci95_W", "budget_margin_W")


def show_power(result, fmt: str) -> None:
    if fmt == "json":
        emit_json(result)
        return
    if fmt == "csv":
        emit_record_csv(result, columns(*POWER_KEYS)
                        + (columns(*DC_CSV_KEYS) if result.dc is not None else []))
        return
    console = console_for()
    show_check_table(console, result.checks)
    if result.spectrum is not None:
        spectrum = result.spectrum
        peaks = ", ".join(f"{p.frequency_Hz:.3g} Hz ({100 * p.variance_share:.0f} % of the "
                          "variance)" for p in spectrum.peaks)
        low, high = spectrum.frequency_range_Hz
        rms = column("rms_mps2")
        console.print(f"excitation: {result.excitation}, RMS {rms.show(spectrum.rms_mps2)} g "
                      f"({spectrum.rms_mps2:.3g} m/s²), {low:.3g}–{high:.3g} Hz"
                      + (f"; peaks {peaks}" if peaks else ""), markup=False, highlight=False)
    print_record(f"Mean power ({result.excitation})", result, columns(*POWER_KEYS))
    console.print(f"load {format_ohm(result.load_ohm)} ({result.load_note})", markup=False,
                  highlight=False)
    if result.linear_load_ohm is not None:
        console.print(f"magnet-free beam: load {format_ohm(result.linear_load_ohm)} "
                      f"({result.linear_load_note})", markup=False, highlight=False)
    for note in (result.ci95_note, result.kramers_note):
        if note:
            console.print(note, style="dim", markup=False, highlight=False)
    # under random excitation there are no separate attractors: the table above says it all
    if result.orbits and result.excitation == "tone":
        print_rows("Orbit mix", result.orbits, columns(*ORBIT_KEYS),
                   footer="share: of the initial states; period in forcing periods T; λ max: "
                          "largest Lyapunov exponent (chaotic orbits)")
    if result.fast_estimate:
        print_rows("Fast estimate (approximate; the Monte Carlo above is the reference)",
                   result.fast_estimate, columns(*FAST_KEYS),
                   footer=result.fast_estimate_method or "")
    if result.sweep:
        print_rows("Frequency sweep at the case's amplitude", result.sweep,
                   columns(*SWEEP_KEYS),
                   footer="interwell share: of the starts that end on an interwell orbit; the "
                          "mean can be lifted by a minority of starts")
    show_direct_current(console, result.dc, result.node)
    print_lines(console, result.warnings)
    print_lines(console, result.omitted_checks, prefix="not checked: ", style="dim")


def show_direct_current(console, dc, node) -> None:
    """Behind a bridge: the DC power into the store and, with a [node], its supply."""
    if dc is None:
        return
    shown = [c for c in columns(*DC_KEYS) if getattr(dc, c.key) is not None]
    print_record("DC power through the bridge (before any converter)", dc, shown)
    notes = [dc.store_note, dc.charge_note, dc.method,
             "the diodes are a constant drop each: no reverse recovery, leakage or junction "
             "capacitance; the power-management stage's efficiency is not counted"]
    for note in notes:
        if note:
            console.print(note, style="dim", markup=False, highlight=False)
    if node is not None:
        print_record("Sensor node", node, columns(*NODE_KEYS))
        console.print(node.note, style="dim" if node.node_starts else "bold yellow",
                      markup=False, highlight=False)


def show_check_table(console, checks) -> None:
    """Safety checks with the failed ones first and in red: never buried."""
    from rich.markup import escape
    from rich.table import Table

    from harvester.report.columns import severity_rank

    table = Table(title="Stress and safety checks", header_style="bold")
    for name in ("check", "result", "value", "limit", "margin"):
        table.add_column(name, justify="left" if name in ("check", "result") else "right")
    ranked = sorted(checks, key=lambda c: severity_rank(c.level))
    level = column("level")
    for check in ranked:
        unit, scale = CHECK_DISPLAY.get(check.unit_SI, (check.unit_SI, 1.0))
        table.add_row(escape(check.check),
                      f"[{LEVEL_STYLE[check.level]}]{level.show(check.level)}[/]",
                      escape(f"{format_number(check.value_SI * scale, 3)} {unit}"),
                      escape(f"{format_number(check.limit_SI * scale, 3)} {unit}"),
                      format_number(check.margin, 3))
    console.print(table)
    failed = [c.check for c in checks if c.level == "fail"]
    if failed:
        console.print(f"[bold white on red] FAILED: {escape(', '.join(failed))} [/]")
    for check in ranked:
        if check.level != "pass":
            console.print(f"  {check.check}: ", style=LEVEL_STYLE[check.level], end="")
            console.print(check.basis, markup=False, highlight=False)


# --- candidate gaps --------------------------------------------------------------------------
COMPARE_CSV_KEYS = ("gap_m", "regime", "critical_gap_m", "barrier_J", "well_frequency_Hz",
                    "onset_mps2", "onset_frequency_Hz", "melnikov_mps2", "stop_mps2",
                    "mean_power_W", "ci95_W", "gain_ratio", "hop_rate_per_s",
                    "interwell_share", "load_ohm", "worst_check", "worst_level",
                    "worst_margin", "recommended", "high_power_share", "upsweep_power_W",
                    "upsweep_reaches_high_power", "needs_lucky_start",
                    "regime_changes_in_range")
COMPARE_COLUMNS = [
    Column("mark", ""),
    Column("candidate", "gap", "mm", text=True),
    column("regime"),
    column("barrier_J", digits=3),
    column("well_frequency_Hz", digits=3),
    Column("onset_text", "hop onset", "g", text=True),
    Column("power_text", "power (95 % CI)", "µW", text=True),
    column("gain_ratio"),
    column("hop_rate_per_s"),
    Column("worst_text", "worst check (margin)", text=True),
]
# under a tone: how many starts reach the high-power orbit, and whether a run-up does
HISTORY_COLUMNS = [column("high_power_share"), column("upsweep_reaches_high_power")]


DC_COMPARE_COLUMNS = [
    Column("dc_text", "DC power (95 % CI)", "µW", text=True),
    column("budget_margin_W"),
    column("start_share"),
]
DC_COMPARE_CSV_KEYS = ("dc_power_W", "dc_ci95_W", "budget_margin_W", "node_starts",
                       "start_share")


def comparison_rows(result) -> list[dict]:
    """Rows for people: the candidate, onset with a dagger where a note applies, power with its
    interval (and behind a bridge the DC power and the node's margin and start share), the
    governing check, the recommendation mark."""
    rows = []
    best = result.recommended_index
    onset = column("onset_mps2")
    power, interval = column("mean_power_W"), column("ci95_W")
    for i, row in enumerate(result.rows):
        note = gap_row_note(row)
        rows.append({
            **json_value(row),
            "mark": "★" if i == best else "",
            "candidate": ("no magnet" if row.magnet_free else format_number(row.gap_m, 3, 1e3))
            + ("‡" if row.needs_lucky_start else ""),
            "onset_text": onset.show(row.onset_mps2) + ("†" if note else ""),
            "power_text": f"{power.show(row.mean_power_W)} ({interval.show(row.ci95_W)})",
            "dc_text": (f"{power.show(row.dc_power_W)} ({interval.show(row.dc_ci95_W)})"
                        if row.dc_power_W is not None else "—"),
            "worst_text": (f"{row.worst_level.upper()} {row.worst_check} "
                           f"({format_number(row.worst_margin, 2)})" if row.worst_level
                           else "—"),
            "recommended": i == best,
            "note": note,
        })
    return rows


def gap_row_note(row) -> str:
    """Why a candidate has no hop onset, or what else happened on the way to it (the words of
    `hop_row_note`); "" where there is nothing to say."""
    if row.regime != "bistable":
        if row.onset_mps2 is not None:
            return ""
        return ("no wells to hop between" if row.magnet_free
                else "monostable: there is no barrier to hop over")
    return hop_row_note(_hop_view(row))


def _hop_view(row):
    """The hop fields of a gap row in the shape `hop_row_note` reads (only why an onset is
    missing matters in the gap table)."""
    from types import SimpleNamespace

    return SimpleNamespace(status=row.hop_status, onset_mps2=row.onset_mps2,
                           stop_mps2=row.stop_mps2 if row.onset_mps2 is None else None,
                           certain_mps2=row.onset_mps2, scan_top_mps2=None)


def show_comparison(result, fmt: str) -> None:
    if fmt == "json":
        emit_json(result)
        return
    rows = comparison_rows(result)
    bridge = any(r.dc is not None for r in result.rows)
    node = any(r.node is not None for r in result.rows)
    if fmt == "csv":
        emit_csv(rows, COMPARE_CSV_KEYS + (DC_COMPARE_CSV_KEYS if bridge else ()))
        return
    mark = "★ recommended: " if result.recommended_index is not None else "no recommendation: "
    footer = mark + result.recommendation
    daggers: dict[str, list[str]] = {}
    for row in rows:
        if row["note"]:
            label = row["candidate"].rstrip("‡")
            daggers.setdefault(row["note"], []).append(
                label if row["gap_m"] is None else f"{label} mm")
    if daggers:
        footer += "\n† " + "; ".join(f"{', '.join(gaps)}: {note}"
                                     for note, gaps in daggers.items())
    cols = COMPARE_COLUMNS
    if bridge:
        extra = DC_COMPARE_COLUMNS if node else DC_COMPARE_COLUMNS[:1]
        at = next(i for i, c in enumerate(cols) if c.key == "power_text") + 1
        cols = cols[:at] + extra + cols[at:]
    if any(r.needs_lucky_start is not None for r in result.rows):
        cols = cols + HISTORY_COLUMNS
        footer += ("\nhigh-power starts: share of the random starts that end within half of the "
                   "best orbit's power; up-sweep: whether the beam, run up from rest at the "
                   "bottom of the study's frequencies, arrives there")
        if any(r.needs_lucky_start for r in result.rows):
            footer += ("\n‡ needs a lucky start: a machine running up to speed leaves the beam "
                       "on a low-power orbit")
    console = print_rows("Candidates: the magnet-free beam and each magnet gap", rows,
                         cols, footer=footer)
    failed = [f"{r['candidate'].rstrip('‡')}{'' if r['gap_m'] is None else ' mm'} "
              f"({r['worst_check']})" for r in rows if r["worst_level"] == "fail"]
    if failed:
        console.print(f"failed checks at: {', '.join(failed)}", style="bold yellow",
                      markup=False, highlight=False)
    for line in temperature_range_lines(result):
        console.print(line, markup=False, highlight=False,
                      style="bold yellow" if "CHANGES" in line else None)


# --- spread over build tolerances ------------------------------------------------------------
# a tolerance's SI unit → the column whose display unit shows it
TOLERANCE_DISPLAY = {"m": "gap_m", "J": "barrier_J", "m/s²": "onset_mps2", "W": "mean_power_W",
                     "kg": "tip_mass_kg", "": "margin"}
SPREAD_CSV_KEYS = ("quantity", "unit_SI", "nominal_SI", "mean_SI", "p05_SI", "p50_SI",
                   "p95_SI", "standard_error_SI", "defined_count")
SPREAD_QUANTITY_COLUMNS = [
    column("quantity"),
    Column("unit", "unit", text=True),
    *(Column(key, label, text=True) for key, label in (
        ("nominal", "nominal"), ("mean", "mean"), ("p05", "5 %"), ("p50", "median"),
        ("p95", "95 %"))),
    column("defined_count"),
]
SPREAD_PROBABILITY_COLUMNS = [Column("event", "builds that", text=True),
                              column("probability"), column("ci95_probability"),
                              column("events_count"), column("samples_count")]


def tolerance_text(value: float | None, unit_SI: str) -> str:
    """A tolerance's value in the unit people read it in (mm, g, K, T …)."""
    key = TOLERANCE_DISPLAY.get(unit_SI)
    if key is None:
        return f"{format_number(value, 3)} {unit_SI}"
    col = column(key)
    return f"{col.show(value)} {col.unit}".strip()


def spread_quantity_rows(result) -> list[dict]:
    """One row per quantity, each value in its own display unit."""
    rows = []
    for q in result.quantities:
        col = column(q.quantity)
        rows.append({"quantity": col.label, "unit": col.unit, "defined_count": q.defined_count,
                     **{k: col.show(getattr(q, f"{k}_SI"))
                        for k in ("nominal", "mean", "p05", "p50", "p95")}})
    return rows


def spread_probability_rows(result) -> list[dict]:
    events = (("stay bistable", result.probability_bistable),
              ("stay in a well at the site (bistable, no hop)", result.probability_no_hop),
              ("fail a check", result.probability_check_fails))
    return [{"event": name, **json_value(p)} for name, p in events]


def sensitivity_rows(result) -> tuple[list[dict], list[Column], list[Column]]:
    """Ranked tolerances: ρ and the one-at-a-time change (−1 → +1 sd) per quantity; the
    columns of the correlation table and of the change table."""
    keys = [e.quantity for e in result.sensitivity[0].effects] if result.sensitivity else []
    head = [Column("rank", "rank"), column("tolerance"), Column("sd_text", "1 sd", text=True)]
    rho = head + [Column(f"rho_{k}", f"ρ {column(k).label}", digits=2) for k in keys]
    change = head + [Column(f"oat_{k}", f"Δ {column(k).label}", column(k).unit, text=True)
                     for k in keys]
    rows = []
    for s in result.sensitivity:
        row = {"rank": s.rank, "tolerance": s.tolerance,
               "sd_text": tolerance_text(s.sd_SI, s.unit_SI)}
        for e in s.effects:
            row[f"rho_{e.quantity}"] = e.rank_correlation
            row[f"oat_{e.quantity}"] = column(e.quantity).show(e.oat_change_SI)
        rows.append(row)
    return rows, rho, change


def show_spread(result, fmt: str) -> None:
    from harvester.analysis.tolerances import correlation_noise

    if fmt == "json":
        emit_json(result)
        return
    if fmt == "csv":
        emit_csv(result.quantities, SPREAD_CSV_KEYS)
        return
    where = f" at a {format_number(result.gap_m, 3, 1e3)} mm gap" if result.gap_m else ""
    print_rows(f"Spread over {result.samples_count} sampled builds{where}",
               spread_quantity_rows(result), SPREAD_QUANTITY_COLUMNS,
               footer=f"{result.method}; seed {result.seed}")
    print_rows("How many builds …", spread_probability_rows(result),
               SPREAD_PROBABILITY_COLUMNS,
               footer="95 % intervals: exact binomial (Clopper & Pearson 1934)")
    rows, rho, change = sensitivity_rows(result)
    print_rows("What to tighten: rank correlation ρ (Spearman) of each tolerance with each "
               "quantity over the sampled builds", rows, rho,
               footer=f"|ρ| below about {correlation_noise(result.samples_count):.2f} is within "
                      f"the sampling noise of {result.samples_count} builds")
    console = print_rows("… and the change from −1 to +1 standard deviation of each "
                         "tolerance, the rest nominal", rows, change)
    if result.reference is not None:
        ref = result.reference
        power, margin = column("mean_power_W"), column("worst_margin")
        ratio = (f"; fast estimate / reference, median {ref.fast_over_reference_ratio:.3g}"
                 if ref.fast_over_reference_ratio is not None else "")
        console.print(
            f"reference on {ref.samples_count} builds ({ref.method}): mean power median "
            f"{power.show(ref.mean_power.p50_SI)} µW (5–95 %: "
            f"{power.show(ref.mean_power.p05_SI)}–{power.show(ref.mean_power.p95_SI)} µW), "
            f"worst margin median {margin.show(ref.worst_margin.p50_SI)}, a check fails in "
            f"{ref.probability_check_fails.events_count} of them{ratio}",
            markup=False, highlight=False)
    print_lines(console, result.warnings)


def temperature_range_lines(result) -> list[str]:
    """For a service temperature range: each gap's regime and barrier at both ends, the gaps
    that change regime inside it first."""
    rows = [r for r in result.rows if r.regimes_at_ends]
    if not rows:
        return []
    low, high = (t - 273.15 for t in rows[0].temperatures_at_ends_K)
    barrier = column("barrier_J")
    lines = [f"service temperature {low:.3g} … {high:.3g} °C (regime, barrier at each end):"]
    for r in sorted(rows, key=lambda r: not r.regime_changes_in_range):
        mark = "  CHANGES REGIME: " if r.regime_changes_in_range else "  "
        lines.append(f"{mark}{format_number(r.gap_m, 3, 1e3)} mm: "
                     f"{r.regimes_at_ends[0]} {barrier.show(r.barriers_at_ends_J[0])} µJ → "
                     f"{r.regimes_at_ends[1]} {barrier.show(r.barriers_at_ends_J[1])} µJ")
    return lines


# --- a shaker record against the model (trace) ----------------------------------------------
TRACE_COLUMNS = [
    Column("quantity", "quantity", text=True),
    Column("unit", "unit", text=True),
    Column("measured_text", "measured (95 % CI)", text=True),
    Column("predicted_text", "predicted (interval)", text=True),
    Column("difference_text", "difference", text=True),
    Column("agrees_text", "agrees", text=True),
    Column("note", "note", text=True),
]
TRACE_CSV_KEYS = ("key", "measured_SI", "predicted_SI", "measured_ci95_SI",
                  "predicted_interval_SI", "difference_SI", "unit_SI", "inside_interval",
                  "agreement", "note")
TRACE_RECORD_KEYS = ("duration_s", "sample_rate_Hz", "load_ohm", "section_points_count",
                     "hop_count", "well_time_share", "orbit_period_count",
                     "scaling_range_ratio", "predicted_scaling_range_ratio")


def twin_fields(result, name: str, unit: str) -> dict:
    """One compared quantity of a trace record under plain names: key, measured, predicted,
    measured_ci95, predicted_interval, difference, inside_interval, note (SI)."""
    key = f"{name}_{unit}" if unit else name
    suffix = f"_{unit}" if unit else ""
    return {"key": key, "measured": getattr(result, key),
            "predicted": getattr(result, f"predicted_{key}"),
            "measured_ci95": getattr(result, f"{name}_ci95{suffix}", None),
            "predicted_interval": getattr(result, f"predicted_{name}_interval{suffix}", None),
            "difference": getattr(result, f"{name}_difference{suffix}", None),
            "inside_interval": getattr(result, f"{name}_inside_interval"),
            "note": getattr(result, f"{name}_note")}


def agreement(result, name: str, inside: bool | None) -> str:
    """How a compared quantity stands: "yes", "no", "—" (nothing to compare); the forcing
    against the plan; an indicative comparison marked so."""
    from harvester.commands.trace import INDICATIVE, PLANNED

    if inside is None:
        return "—"
    if name in PLANNED:
        return "at plan" if inside else "off plan"
    word = "yes" if inside else "no"
    return f"{word} (indicative)" if name in INDICATIVE else word


def trace_rows(result) -> list[dict]:
    """One row per compared quantity: display text for people, SI values for CSV."""
    from harvester.commands.records import si_unit
    from harvester.commands.trace import QUANTITIES

    rows = []
    for name, unit in QUANTITIES:
        t = twin_fields(result, name, unit)
        col = column(t["key"])
        rows.append({
            "quantity": col.label, "unit": col.unit,
            "measured_text": _with_interval(col, t["measured"], t["measured_ci95"]),
            "predicted_text": _with_interval(col, t["predicted"], t["predicted_interval"]),
            "difference_text": "" if t["difference"] is None else col.show(t["difference"]),
            "agrees_text": agreement(result, name, t["inside_interval"]),
            "key": t["key"], "measured_SI": t["measured"], "predicted_SI": t["predicted"],
            "measured_ci95_SI": t["measured_ci95"],
            "predicted_interval_SI": t["predicted_interval"], "difference_SI": t["difference"],
            "unit_SI": si_unit(t["key"]) or "", "inside_interval": t["inside_interval"],
            "agreement": agreement(result, name, t["inside_interval"]), "note": t["note"],
        })
    return rows


def _with_interval(col: Column, value, interval) -> str:
    text = col.show(value)
    if interval is not None and value is not None:
        text += f" ({col.show(interval[0])}–{col.show(interval[1])})"
    return text


def trace_verdict(result) -> str:
    """One line: does the model hold for the measured excitation, and what differs."""
    if result.model_agrees is None:
        return "nothing in the record to compare with the model"
    if result.model_agrees:
        return ("the model agrees with the record: every response quantity compared lies "
                "inside the prediction's interval")
    names = ", ".join(column(k).label for k in result.disagreeing)
    return f"the model does not hold for this record: {names} differ beyond their intervals"


def show_trace(result, fmt: str) -> None:
    if fmt == "json":
        emit_json(result)
        return
    rows = trace_rows(result)
    if fmt == "csv":
        emit_csv(rows, TRACE_CSV_KEYS)
        return
    footer = trace_verdict(result)
    if result.indicative:
        footer += ("\n(indicative) the record's Lyapunov exponent comes from a short, noisy "
                   "section (Rosenstein et al. 1993) and the model's from its own trajectory "
                   "(Benettin et al. 1980): a hint, not a test")
    footer += ("\nforcing rows: the measured excitation against the case's planned one; the "
               "model's predictions are for the measured excitation")
    console = print_rows(f"{result.source} against {result.case_file} ({result.forcing_kind})",
                         rows, TRACE_COLUMNS, footer=footer)
    print_record("The record and its section", result, columns(*TRACE_RECORD_KEYS))
    console.print(f"method: {result.method}", style="dim", markup=False, highlight=False)
    print_lines(console, result.notes, prefix="note: ", style="dim")
    print_lines(console, result.warnings)


# --- calibration from tests -----------------------------------------------------------------
# units a calibrated value is shown in, by its SI unit
CALIBRATION_DISPLAY = {"m": ("mm", 1e3), "N·s/m": ("mN·s/m", 1e3)}
CHANGE_COLUMNS = [
    Column("key", "case key", text=True),
    Column("previous_text", "before", text=True),
    Column("value_text", "after", text=True),
    Column("ci95_text", "95 % CI", text=True),
    Column("unit", "unit", text=True),
    Column("source", "source", text=True),
]
RINGDOWN_KEYS = ("damping_ratio", "damping_ci95_ratio", "envelope_damping_ratio",
                 "envelope_damping_ci95_ratio", "amplitude_dependent", "natural_frequency_Hz",
                 "damped_frequency_Hz", "cycles_count", "damping_N_s_per_m")
MAGNET_KEYS = ("remanence_scale_ratio", "remanence_scale_ci95_ratio", "tip_remanence_T",
               "fixed_remanence_T", "gap_offset_m", "gap_offset_ci95_m", "gap_m",
               "remanence_gap_correlation", "force_offset_N", "residual_rms_N")
STIFFNESS_KEYS = ("residual_rms_N", "even_terms_significant")
SWEEP_KEYS = ("rows_count", "half_power_rows_count", "phase_read_as", "well_frequency_Hz",
              "well_frequency_ci95_Hz", "total_damping_ratio", "total_damping_ci95_ratio",
              "misfit_ratio", "response_level_ratio", "response_level_ci95_ratio",
              "largest_amplitude_m", "backbone_shift_Hz", "load_ohm", "total_damping_N_s_per_m",
              "mechanical_damping_N_s_per_m", "electrical_damping_N_s_per_m",
              "electrical_damping_ci95_N_s_per_m", "reactance_ratio", "flux_linkage_V_s_per_m",
              "flux_linkage_ci95_V_s_per_m", "predicted_flux_linkage_V_s_per_m",
              "coupling_N_per_V", "coupling_ci95_N_per_V", "predicted_coupling_N_per_V",
              "mechanical_well_frequency_Hz", "mechanical_well_frequency_ci95_Hz",
              "predicted_well_frequency_Hz", "predicted_well_frequency_interval_Hz",
              "predicted_from", "well_frequency_agrees", "remanence_scale_ratio",
              "remanence_scale_ci95_ratio", "remanence_scale_per_gap_per_m")
STEP_KEYS = ("frequency_Hz", "base_amplitude_mps2", "measured_amplitude_m",
             "predicted_amplitude_m", "design_amplitude_m", "measured_phase_rad",
             "predicted_phase_rad")


def change_rows(result) -> list[dict]:
    rows = []
    for change in result.changes:
        unit, scale = CALIBRATION_DISPLAY.get(change.unit_SI, (change.unit_SI, 1.0))
        lo, hi = change.ci95_SI
        rows.append({
            **json_value(change),
            "previous_text": format_number(change.previous_SI, 4, scale),
            "value_text": format_number(change.value_SI, 4, scale),
            "ci95_text": f"{format_number(lo, 4, scale)}–{format_number(hi, 4, scale)}",
            "unit": unit,
        })
    return rows


def show_calibration(result, fmt: str) -> None:
    if fmt == "json":
        emit_json(result)
        return
    if fmt == "csv":
        emit_csv(result.changes, ("key", "previous_SI", "value_SI", "ci95_SI",
                                  "standard_error_SI", "unit_SI", "source"))
        return
    console = print_rows(f"Calibrated values: {result.out_file}", change_rows(result),
                         CHANGE_COLUMNS)
    if result.ringdown is not None:
        print_record(f"Ring-down {result.ringdown.source} (the log decrement is adopted)",
                     result.ringdown, columns(*RINGDOWN_KEYS))
    if result.magnets is not None:
        print_record(f"Magnets from {result.magnets.source}", result.magnets,
                     columns(*MAGNET_KEYS))
    if result.sweep is not None:
        shown = [column(k, digits=6) if k == "well_frequency_Hz" else column(k)
                 for k in SWEEP_KEYS]
        print_record(f"Stepped sine {result.sweep.source} (the receptance about the well)",
                     result.sweep, shown)
        keys = STEP_KEYS if result.sweep.phase_read_as else STEP_KEYS[:-2]
        print_rows(f"Stepped sine {result.sweep.source}: measured and predicted, per step",
                   result.sweep_steps,
                   [column(k, digits=4) if k == "frequency_Hz" else column(k) for k in keys])
    if result.stiffness is not None:
        from rich.table import Table

        table = Table(title=f"Restoring force from {result.stiffness.source}",
                      header_style="bold")
        for name in ("term", "value", "95 % CI", "unit"):
            table.add_column(name, justify="left" if name in ("term", "unit") else "right")
        for row in result.stiffness.coefficients:
            lo, hi = row.ci95_SI
            table.add_row(f"k{row.power_exponent}", format_number(row.value_SI, 4),
                          f"{format_number(lo, 4)}–{format_number(hi, 4)}", row.unit_SI)
        console_for(table).print(table)
        print_record("Restoring-force fit", result.stiffness, columns(*STIFFNESS_KEYS))
    if result.tolerances:
        where = ("as comments at the end of the case (this version reads no [tolerances] "
                 "section)" if result.tolerances_written_as == "comments" else
                 "in its [tolerances] section")
        console.print(f"tolerances (one standard error of each fit), {where}:", markup=False,
                      highlight=False)
        for t in result.tolerances:
            console.print(f'  "{t.key}" = {t.entry}  ({t.note})', markup=False,
                          highlight=False)
    console.print(f"wrote {result.out_file}", markup=False, highlight=False)
    print_lines(console, result.warnings)


# --- sweeps and basins -----------------------------------------------------------------------
SWEEP_ROW_KEYS = ("direction", "frequency_Hz", "amplitude_mps2", "peak_m", "mean_power_W",
                  "interwell_share", "orbit")
JUMP_KEYS = ("direction", "frequency_Hz", "amplitude_mps2", "from", "to")


def _swept(result, what: str) -> str:
    """The swept quantity's key: frequency_Hz or amplitude_mps2."""
    return "frequency_Hz" if (result.over == "frequency") == (what == "swept") \
        else "amplitude_mps2"


def show_sweep(result, fmt: str) -> None:
    if fmt == "json":
        emit_json(result)
        return
    if fmt == "csv":
        emit_csv(result.rows, SWEEP_ROW_KEYS)
        return
    swept, fixed = _swept(result, "swept"), _swept(result, "fixed")
    rate = "rate_Hz_per_s" if result.over == "frequency" else "rate_mps2_per_s"
    step = "step_Hz" if result.over == "frequency" else "step_mps2"
    value = column(fixed)
    console = print_rows(
        f"Slow {result.over} sweep at {value.show(getattr(result, fixed)[0])} {value.unit}",
        [json_value(r) for r in result.rows],
        columns(swept, "peak_m", "mean_power_W", "interwell_share", "orbit", "direction"),
        footer=(f"{columns(rate)[0].label} {column(rate).show(getattr(result, rate))} "
                f"{column(rate).unit}, step {column(step).show(getattr(result, step))} "
                f"{column(step).unit}; {result.start}; load {format_ohm(result.load_ohm)} "
                f"({result.load_note}). {result.rate_note}. Interwell share: of the paths "
                "that cross between the wells."))
    if result.jumps:
        print_rows("Jumps from one orbit to another", [json_value(j) for j in result.jumps],
                   columns("direction", swept, "from", "to"),
                   footer="where the beam leaves its orbit: the first step on the new one")
    else:
        console.print("no jumps: the beam follows one orbit along the whole sweep",
                      markup=False, highlight=False)
    if result.interwell_held:
        rows = [{"direction": h.direction,
                 "range_text": column(swept).show(getattr(h, swept)).replace(", ", " → "),
                 "mean_power_W": h.mean_power_W} for h in result.interwell_held]
        unit = column(swept).unit
        print_rows("Where the large interwell orbit is held", rows,
                   [column("direction"), Column("range_text", "range, in sweep order", unit,
                                                text=True), column("mean_power_W")])
    elif any(r.interwell_share for r in result.rows):
        console.print("the beam hops between the wells but never settles on the periodic "
                      "interwell orbit", markup=False, highlight=False)
    print_lines(console, result.warnings)


BASIN_KEYS = ("rank", "kind", "well", "period", "share", "ci95_share", "mean_power_W",
              "hop_rate_per_s", "max_abs_x_m", "lyapunov_per_s", "high_power")


def show_basins(result, fmt: str) -> None:
    if fmt == "json":
        emit_json(result)
        return
    if fmt == "csv":
        emit_csv(result.attractors, BASIN_KEYS)
        return
    f, a = column("frequency_Hz"), column("amplitude_mps2")
    high = column("high_power_share")
    console = print_rows(
        f"Basins of attraction at {f.show(result.frequency_Hz)} Hz, "
        f"{a.show(result.amplitude_mps2)} g", result.attractors, columns(*BASIN_KEYS),
        footer=(f"{result.starts_count} starts on a grid over the tip's deflection and speed at "
                f"the crest of the forcing, each run {result.transient_periods_count} periods "
                f"and averaged over {result.window_periods_count}; share: basin stability (of "
                "the starts, with its 95 % sampling interval); period 0: long-period or not "
                f"settled; load {format_ohm(result.load_ohm)} ({result.load_note})."))
    if result.high_power_share is not None:
        console.print(f"starts that end on the high-power side (within half the best orbit's "
                      f"power): {high.show(result.high_power_share)} %", markup=False,
                      highlight=False)
    print_lines(console, result.notes, prefix="note: ", style="dim")
