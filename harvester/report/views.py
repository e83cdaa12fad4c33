"""What each command shows: which keys, in which display units."""

from __future__ import annotations

from harvester.report.render import Column, emit_json, emit_record, emit_rows

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
    Column("fit_rms_error", "force fit error (RMS)", "%", 100.0, 2),
]

CHECK_COLUMNS = [
    Column("bending_stiffness_N_m2", "bending stiffness EI", "mN·m²", 1e3),
    Column("mass_per_length_kg_per_m", "mass per length", "g/m", 1e3),
    Column("tip_mass_kg", "tip mass (magnet + extra)", "g", 1e3),
    Column("tip_mass_ratio", "tip mass ratio R", ""),
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
] + WELLS_COLUMNS


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
