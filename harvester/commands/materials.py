"""`harvester materials`: the material table, every value with its source."""

from __future__ import annotations

from dataclasses import dataclass

from harvester.commands.records import Record

# the SI unit of each property dimension, and the unit people read it in
UNITS = {
    "pressure": ("Pa", "MPa", 1e-6),
    "density": ("kg/m³", "kg/m³", 1.0),
    "compliance": ("m²/N", "10⁻¹² m²/N", 1e12),
    "piezoelectric charge constant": ("C/N", "pm/V", 1e12),
    "magnetic flux density": ("T", "T", 1.0),
    "temperature": ("K", "°C", 1.0),
    "temperature coefficient": ("1/K", "%/K", 100.0),
    "dimensionless": ("", "", 1.0),
}


@dataclass(frozen=True)
class MaterialRow(Record):
    """One property of one material: in SI and as people read it, with its source."""

    material: str
    kind: str  # "substrate" | "piezo" | "magnet"
    property: str
    value_SI: float
    unit_SI: str
    value_display: float
    unit_display: str
    source: str


@dataclass(frozen=True)
class MaterialsResult(Record):
    materials: tuple[MaterialRow, ...]


def materials_result() -> MaterialsResult:
    from harvester.materials import PROPERTY_DIMENSIONS, all_materials

    rows = []
    for mat in all_materials().values():
        for prop, value in mat.values.items():
            si, display, scale = UNITS[PROPERTY_DIMENSIONS[prop]]
            shown = value - 273.15 if display == "°C" else value * scale
            rows.append(MaterialRow(material=mat.key, kind=mat.kind, property=prop,
                                    value_SI=value, unit_SI=si, value_display=shown,
                                    unit_display=display, source=mat.sources[prop]))
    return MaterialsResult(tuple(rows))
