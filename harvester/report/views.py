"""What each command shows: which keys, in which display units."""

from __future__ import annotations

from harvester.report.render import Column, emit_json, emit_record, emit_rows, format_number

G = 9.80665  # m/s² per g

WELLS_COLUMNS = [
    Column("regime", "regime"),
    Column("gap_m", "magnet gap (face to face)", "mm", 1e3),
    Column("critical_gap_m", "critical gap", "mm", 1e3),
    Column("wells_m", "stable positions", "mm", 1e3),
    Column("barrier_J", "barrier ΔU", "µJ", 1e6),
    Column("well_frequency_Hz", "well frequency", "Hz"),
    Column("linear_frequency_Hz", "magnet-free frequency", "Hz"),
    Column("effective_mass_kg", "effective mass", "g", 1e3),
    Column("forcing_mass_kg", "forcing mass", "g", 1e3),
    Column("damping_N_s_per_m", "mechanical damping", "mN·s/m", 1e3),
    Column("k1_N_per_m", "k1", "N/m"),
    Column("k3_N_per_m3", "k3", "N/m³"),
    Column("fit_terms", "force fit: odd terms", ""),
    Column("fit_window_m", "force fit: window ±", "mm", 1e3),
    Column("fit_well_error", "force fit: well position error", "%", 100.0, 2),
    Column("fit_barrier_error", "force fit: barrier error", "%", 100.0, 2),
    Column("fit_rms_error", "force fit error (RMS)", "%", 100.0, 2),
]

CHECK_COLUMNS = [
    Column("bending_stiffness_N_m2", "bending stiffness EI", "mN·m²", 1e3),
    Column("mass_per_length_kg_per_m", "mass per length", "g/m", 1e3),
    Column("tip_mass_kg", "tip mass (magnet + extra)", "g", 1e3),
    Column("tip_mass_ratio", "tip mass ratio R", ""),
    Column("tip_mass_offset_ratio", "tip mass centre beyond tip e/L", ""),
    Column("eigenvalue", "first-mode eigenvalue λ1", ""),
    Column("short_circuit_frequency_Hz", "f short circuit (no magnets)", "Hz"),
    Column("open_circuit_frequency_Hz", "f open circuit (no magnets)", "Hz"),
    Column("effective_mass_kg", "effective mass at tip", "g", 1e3),
    Column("forcing_mass_kg", "forcing mass at tip", "g", 1e3),
    Column("tip_stiffness_N_per_m", "tip stiffness (exact mode)", "N/m"),
    Column("static_stiffness_N_per_m", "tip stiffness 3EI/L³", "N/m"),
    Column("slope_per_deflection_per_m", "tip slope per deflection", "rad/m"),
    Column("coupling_N_per_V", "piezo coupling θ", "mN/V", 1e3),
    Column("capacitance_F", "piezo capacitance", "nF", 1e9),
    Column("tip_magnet_moment_A_m2", "tip magnet moment", "A·m²"),
    Column("fixed_magnet_moment_A_m2", "fixed magnet moment", "A·m²"),
    Column("magnet_stiffness_at_rest_N_per_m", "magnet stiffness at rest", "N/m"),
]
CHECK_COLUMNS += [c for c in WELLS_COLUMNS if c.key not in {d.key for d in CHECK_COLUMNS}]


def show_wells(payload: dict, warnings: list[str], fmt: str) -> None:
    emit_record("Double-well analysis", payload, WELLS_COLUMNS, fmt, warnings)


def show_check(payload: dict, warnings: list[str], fmt: str) -> None:
    if fmt == "json":
        emit_json(payload)
        return
    derived = payload["derived"]
    columns = [c for c in CHECK_COLUMNS if derived.get(c.key) is not None]
    title = payload["design"].get("title") or "Design check"
    emit_record(title, derived, columns, fmt, warnings)


def show_materials(fmt: str) -> None:
    from harvester.materials import PROPERTY_DIMENSIONS, all_materials

    units = {"pressure": ("MPa", 1e-6), "density": ("kg/m³", 1.0),
             "compliance": ("10⁻¹² m²/N", 1e12), "piezoelectric charge constant": ("pm/V", 1e12),
             "magnetic flux density": ("T", 1.0), "temperature": ("°C", 1.0),
             "dimensionless": ("", 1.0)}
    rows = []
    for mat in all_materials().values():
        for prop, value in mat.values.items():
            unit, scale = units[PROPERTY_DIMENSIONS[prop]]
            display = value - 273.15 if unit == "°C" else value * scale
            rows.append({"material": mat.key, "kind": mat.kind, "property": prop,
                         "value_SI": value, "display": display, "unit": unit,
                         "source": mat.sources[prop]})
    if fmt == "json":
        emit_json({"materials": rows})
        return
    if fmt == "csv":
        emit_rows("", {}, rows, [Column(k, k) for k in ("material", "kind", "property",
                                                        "value_SI", "unit", "source")], "csv")
        return
    from rich.console import Console
    from rich.table import Table

    from harvester.report.render import format_number

    table = Table(title="Materials (materials/*.toml)", show_lines=False, header_style="bold")
    for name in ("material", "property"):
        table.add_column(name, no_wrap=True)
    table.add_column("value", justify="right")
    table.add_column("unit")
    table.add_column("source", overflow="fold")
    previous = None
    for row in rows:
        table.add_row(row["material"] if row["material"] != previous else "", row["property"],
                      format_number(row["display"], 4), row["unit"], row["source"])
        previous = row["material"]
    Console().print(table)


# --- hop thresholds --------------------------------------------------------------------------
THRESHOLD_COLUMNS = [
    Column("frequency_Hz", "f", "Hz", digits=3),
    Column("melnikov_mps2", "Melnikov", "m/s²", digits=3),
    Column("melnikov_mps2", "Melnikov", "g", 1 / G, 3),
    Column("onset_mps2", "onset", "m/s²", digits=3),
    Column("onset_mps2", "onset", "g", 1 / G, 3),
    Column("certain_mps2", "certain", "m/s²", digits=3),
    Column("certain_mps2", "certain", "g", 1 / G, 3),
    Column("interwell_exists_mps2", "orbit exists", "m/s²", digits=2),
    Column("interwell_exists_mps2", "orbit exists", "g", 1 / G, 2),
    Column("note", "note", text=True),
]


def show_thresholds(table, fmt: str) -> None:
    payload = {"rows": list(table.rows), "load_ohm": table.load_ohm,
               "load_note": table.load_note, "frequencies": table.grid_note}
    columns = [c for c in THRESHOLD_COLUMNS if (fmt == "table" or c.unit != "g")
               and (c.key != "note" or any(r.get("note") for r in table.rows))]
    footer = (f"load {format_ohm(table.load_ohm)} ({table.load_note}); frequencies: "
              f"{table.grid_note}. Melnikov is a necessary condition (lower bound); onset: the "
              "beam at rest in a well starts hopping; certain: no intrawell orbit remains; "
              "orbit exists: some start ends in interwell motion (to a factor 2^(1/4)).")
    warnings = [f"{r['frequency_Hz']:.3g} Hz: {r['note']}" for r in table.rows
                if r.get("flagged") and r.get("note")]
    emit_rows("Interwell hop thresholds (base acceleration amplitude)", payload,
              list(table.rows), columns, fmt, warnings if fmt == "table" else None, footer)


def format_ohm(value: float) -> str:
    from harvester.report.render import format_number

    if value is None or value != value or value == float("inf"):
        return "open circuit"
    for scale, unit in ((1e6, "MΩ"), (1e3, "kΩ")):
        if value >= scale:
            return f"{format_number(value / scale, 3)} {unit}"
    return f"{format_number(value, 3)} Ω"


# --- mean power ------------------------------------------------------------------------------
POWER_COLUMNS = [
    Column("mean_power_W", "mean load power", "µW", 1e6),
    Column("ci95_W", "95 % confidence interval", "µW", 1e6),
    Column("linear_power_W", "same beam without magnets", "µW", 1e6),
    Column("gain_over_linear", "gain over magnet-free", "×", digits=3),
    Column("hop_rate_per_s", "hop rate", "1/s", digits=3),
    Column("rms_voltage_V", "RMS load voltage", "V", digits=3),
    Column("rms_current_A", "RMS load current", "mA", 1e3, 3),
    Column("input_power_W", "power drawn from the base", "µW", 1e6),
    Column("max_abs_x_m", "largest tip deflection", "mm", 1e3, 3),
]
ORBIT_COLUMNS = [
    # "interwell" with a period is the interwell-periodic orbit of the JSON
    Column("kind", "orbit", words=(("interwell-periodic", "interwell"),), text=True),
    Column("well", "well", words=((1, "x > 0"), (-1, "x < 0"), (0, "both"))),
    Column("period", "period", "T"),
    Column("share", "share", "%", 100.0, 3),
    Column("mean_power_W", "power", "µW", 1e6),
    Column("hop_rate_per_s", "hops", "1/s", digits=3),
    Column("max_abs_x_m", "max |x|", "mm", 1e3, 3),
    Column("lyapunov_per_s", "λ max", "1/s", digits=3),
]
FAST_COLUMNS = [
    Column("kind", "branch", text=True),
    Column("mean_power_W", "mean power", "µW", 1e6, 3),
    Column("rms_displacement_m", "RMS deflection", "mm", 1e3, 3),
    Column("mean_offset_m", "mean offset", "mm", 1e3, 3),
    Column("equivalent_stiffness_N_per_m", "equivalent stiffness", "N/m", digits=3),
]
SWEEP_COLUMNS = [
    Column("frequency_Hz", "frequency", "Hz", digits=3),
    Column("mean_power_W", "bistable", "µW", 1e6, 3),
    Column("linear_power_W", "magnet-free", "µW", 1e6, 3),
    Column("gain_over_linear", "gain", "×", digits=3),
    Column("hop_rate_per_s", "hop rate", "1/s", digits=3),
    Column("dominant_orbit", "main orbit", text=True),
]
LEVEL_STYLE = {"fail": "bold white on red", "warn": "bold yellow", "pass": "green"}


def show_power(prediction, fmt: str) -> None:
    payload = prediction.to_dict()
    if fmt == "json":
        emit_json(payload)
        return
    if fmt == "csv":
        rows = payload["sweep"] or [payload]
        columns = SWEEP_COLUMNS if payload["sweep"] else POWER_COLUMNS
        emit_rows("", payload, rows, columns, "csv")
        return
    from rich.console import Console

    console = Console()
    show_check_table(console, prediction.checks)
    if payload.get("spectrum"):
        spectrum = payload["spectrum"]
        peaks = ", ".join(f"{p['frequency_Hz']:.3g} Hz ({100 * p['variance_share']:.0f} % of "
                          "the variance)" for p in spectrum.get("peaks", []))
        low, high = spectrum["frequency_range_Hz"]
        console.print(f"excitation: {prediction.excitation}, RMS "
                      f"{spectrum['rms_mps2'] / G:.3g} g ({spectrum['rms_mps2']:.3g} m/s²), "
                      f"{low:.3g}–{high:.3g} Hz"
                      + (f"; peaks {peaks}" if peaks else ""), markup=False, highlight=False)
    columns = [c for c in POWER_COLUMNS if payload.get(c.key) is not None]
    emit_record(f"Mean power ({prediction.excitation})", payload, columns, "table")
    console.print(f"load {format_ohm(prediction.load_ohm)} ({prediction.load_note})",
                  markup=False, highlight=False)
    if payload.get("ci95_note"):
        console.print(payload["ci95_note"], style="dim", markup=False, highlight=False)
    # under random excitation there are no separate attractors: the table above says it all
    if payload.get("orbits") and prediction.excitation == "tone":
        emit_rows("Orbit mix", payload, payload["orbits"], ORBIT_COLUMNS, "table",
                  footer="share: of the initial states; period in forcing periods T; λ max: "
                         "largest Lyapunov exponent (chaotic orbits)")
    fast = payload.get("fast_estimate")
    if fast and fast.get("branches"):
        emit_rows("Fast estimate (approximate; the Monte Carlo above is the reference)", payload,
                  fast["branches"], FAST_COLUMNS, "table", footer=fast["method"])
    if payload["sweep"]:
        emit_rows("Frequency sweep at the case's amplitude", payload, payload["sweep"],
                  SWEEP_COLUMNS, "table")
    for line in payload["warnings"]:
        console.print("warning: ", style="bold yellow", end="")
        console.print(line, markup=False, highlight=False)
    for line in payload["omitted_checks"]:
        console.print(f"not checked: {line}", style="dim", markup=False, highlight=False)


def show_check_table(console, checks) -> None:
    """Safety checks with the failed ones first and in red: never buried."""
    from rich.markup import escape
    from rich.table import Table

    order = {"fail": 0, "warn": 1, "pass": 2}
    table = Table(title="Stress and safety checks", header_style="bold")
    for name in ("check", "result", "value", "limit", "margin"):
        table.add_column(name, justify="left" if name in ("check", "result") else "right")
    ranked = sorted(checks, key=lambda c: order[c.level])
    for check in ranked:
        unit, scale = _display_unit(check.unit)
        table.add_row(escape(check.name), f"[{LEVEL_STYLE[check.level]}]{check.level.upper()}[/]",
                      escape(f"{format_number(check.value * scale, 3)} {unit}"),
                      escape(f"{format_number(check.limit * scale, 3)} {unit}"),
                      format_number(check.margin, 3))
    console.print(table)
    failed = [c.name for c in checks if c.level == "fail"]
    if failed:
        console.print(f"[bold white on red] FAILED: {escape(', '.join(failed))} [/]")
    for check in ranked:
        if check.level != "pass":
            console.print(f"  {check.name}: ", style=LEVEL_STYLE[check.level], end="")
            console.print(check.basis, markup=False, highlight=False)


def _display_unit(unit: str) -> tuple[str, float]:
    return {"Pa": ("MPa", 1e-6), "m": ("mm", 1e3), "-": ("µε", 1e6)}.get(unit, (unit, 1.0))


# --- candidate gaps --------------------------------------------------------------------------
COMPARE_COLUMNS = [
    Column("mark", ""),
    Column("gap_m", "gap", "mm", 1e3, 3),
    Column("regime", "regime", text=True),
    Column("barrier_J", "barrier", "µJ", 1e6, 3),
    Column("well_frequency_Hz", "well f", "Hz", digits=3),
    Column("onset_text", "hop onset", "g"),
    Column("power_text", "power (95 % CI)", "µW"),
    Column("gain_over_linear", "gain", "×", digits=3),
    Column("hop_rate_per_s", "hops", "1/s", digits=3),
    Column("worst_check", "worst check (margin)", text=True),
]
CSV_COMPARE_COLUMNS = [
    Column(k, k) for k in ("gap_m", "regime", "critical_gap_m", "barrier_J",
                           "well_frequency_Hz", "onset_mps2", "melnikov_mps2", "mean_power_W",
                           "ci95_W", "linear_power_W", "gain_over_linear", "hop_rate_per_s",
                           "load_ohm", "worst_check", "worst_level", "worst_margin",
                           "recommended")]


# short names for the gap table's "worst check" column (the full names are in the JSON and note)
SHORT_CHECK_NAMES = {
    "substrate fatigue (Goodman)": "Goodman",
    "substrate yield (Langer)": "Langer",
    "ceramic tensile strain": "ceramic ε",
    "ceramic tensile stress": "ceramic σ",
    "tip travel": "travel",
    "magnet clearance": "clearance",
    "open-circuit voltage": "voltage",
    "open-circuit voltage (touch hazard)": "touch voltage",
}


def comparison_rows(comparison) -> list[dict]:
    """Rows flattened for display: worst check, its level and margin, the recommendation."""
    rows = []
    for i, row in enumerate(comparison.rows):
        worst = row.get("worst") or {}
        flat = dict(row)
        low, high = row.get("ci95_W") or (None, None)
        power = row.get("mean_power_W")
        onset = row.get("onset_mps2")
        flat.update(onset_text=format_number(onset, 3, 1 / G) + ("†" if row.get("onset_note")
                                                                 else ""),
                    power_text=(f"{format_number(power, 3, 1e6)} ({format_number(low, 2, 1e6)}"
                                f"–{format_number(high, 2, 1e6)})") if power is not None
                    else "—",
                    worst_check=(f"{worst['level'].upper()} "
                                 f"{SHORT_CHECK_NAMES.get(worst['name'], worst['name'])} "
                                 f"({format_number(worst['margin'], 2)})") if worst else "—",
                    worst_level=worst.get("level"), worst_margin=worst.get("margin"),
                    recommended=(i == comparison.recommended),
                    mark="★" if i == comparison.recommended else "")
        rows.append(flat)
    return rows


def show_comparison(comparison, fmt: str) -> None:
    if fmt == "json":
        emit_json(comparison.to_dict())
        return
    rows = comparison_rows(comparison)
    if fmt == "csv":
        emit_rows("", {}, rows, CSV_COMPARE_COLUMNS, "csv")
        return
    footer = (f"★ recommended: {comparison.reason}" if comparison.recommended is not None
              else f"no recommendation: {comparison.reason}")
    gaps_by_note: dict[str, list[str]] = {}
    for r in comparison.rows:
        if r.get("onset_note"):
            gaps_by_note.setdefault(r["onset_note"], []).append(f"{r['gap_m'] * 1e3:.3g}")
    if gaps_by_note:
        footer += "\n† " + "; ".join(f"{', '.join(gaps)} mm: {note}"
                                     for note, gaps in gaps_by_note.items())
    emit_rows("Candidate magnet gaps", {}, rows, COMPARE_COLUMNS, "table", footer=footer)
    from rich.console import Console

    failed = [f"{r['gap_m'] * 1e3:.3g} mm ({r['worst']['name']})" for r in comparison.rows
              if r.get("worst") and r["worst"]["level"] == "fail"]
    if failed:
        Console().print(f"FAILED checks at: {', '.join(failed)}", style="bold white on red",
                        markup=False, highlight=False)
