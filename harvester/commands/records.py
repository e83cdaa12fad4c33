"""Typed result records: what each command answers, in SI, under the keys scripts rely on.

A result record is a frozen dataclass whose field names are its JSON keys.  A key carries its
SI unit as a suffix (`gap_m`, `barrier_J`, `onset_mps2`, `k3_N_per_m3`); a dimensionless key
says so by name (`gain_ratio`, `share`, `margin`, `samples_count`); text, flags and nested
records carry none.  `si_unit` reads the unit back from a key, so the record, its JSON, its CSV
and every display of it (`harvester.report.columns`) agree on one name and one unit.

Adding a quantity to a command is one field on its record and one entry in the column
registry; nothing else copies keys by hand.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields, is_dataclass

SIGNIFICANT_DIGITS = 12  # JSON and CSV numbers: enough for any input, no float noise

# key suffix → SI unit, longest match first (a key "k3_N_per_m3" is in N/m³, not in m³)
SUFFIX_UNITS = (
    ("_N_s_per_m", "N·s/m"),
    ("_V_s_per_m", "V·s/m"),
    ("_m2_s4_per_Hz", "(m/s²)²/Hz"),
    ("_N_per_m3", "N/m³"),
    ("_N_per_m", "N/m"),
    ("_N_per_V", "N/V"),
    ("_N_m2", "N·m²"),
    ("_kg_per_m", "kg/m"),
    ("_rad_per_s", "rad/s"),
    ("_per_m2", "1/m²"),
    ("_per_m", "1/m"),
    ("_Hz_per_s", "Hz/s"),
    ("_mps2_per_s", "m/s³"),
    ("_per_mps2", "s²/m"),
    ("_per_s", "1/s"),
    ("_per_h", "1/h"),
    ("_A_m2", "A·m²"),
    ("_mps2", "m/s²"),
    ("_mps", "m/s"),
    ("_ohm", "Ω"),
    ("_years", "year"),
    ("_degC", "°C"),
    ("_Hz", "Hz"),
    ("_rad", "rad"),
    ("_kg", "kg"),
    ("_Pa", "Pa"),
    ("_m", "m"),
    ("_J", "J"),
    ("_W", "W"),
    ("_V", "V"),
    ("_A", "A"),
    ("_N", "N"),
    ("_F", "F"),
    ("_H", "H"),
    ("_T", "T"),
    ("_K", "K"),
    ("_s", "s"),
)
# keys that are dimensionless by name: a ratio, a share, a count, a margin, a strain ...
DIMENSIONLESS_SUFFIXES = ("_ratio", "_share", "share", "_fraction", "_factor", "_count",
                          "margin", "_strain", "_probability", "probability", "_correlation",
                          "_damage", "_exponent", "_dimension")
DIMENSIONLESS_NAMES = frozenset({
    "delta", "coupling_k2", "electrical_delta", "eigenvalue", "seed", "period", "well",
    "correlation_dimension", "rank", "layers", "count",
})
# a value whose unit is given beside it: in SI (a check's value and limit: Pa, m, V or
# strain, beside `unit_SI`) or in a display unit (a material's value, beside `unit_display`)
SI_BESIDE = "_SI"
DISPLAY_BESIDE = "_display"


def si_unit(key: str) -> str | None:
    """The SI unit a numeric JSON key carries: "m/s²" for `onset_mps2`, "" for a key that is
    dimensionless by name, "SI" or "display" for a value whose unit stands beside it, None for
    a key that names no unit (which a numeric result must not have).

    >>> si_unit("k3_N_per_m3"), si_unit("gain_ratio"), si_unit("length")
    ('N/m³', '', None)
    """
    if key.endswith(SI_BESIDE):
        return "SI"
    if key.endswith(DISPLAY_BESIDE):
        return "display"
    for suffix, unit in SUFFIX_UNITS:
        if key.endswith(suffix):
            return unit
    if key in DIMENSIONLESS_NAMES or key.endswith(DIMENSIONLESS_SUFFIXES):
        return ""
    return None


def json_value(value):
    """A value for JSON or CSV: records as dicts, tuples as lists, numpy scalars as Python
    numbers, floats to 12 significant digits, NaN and ±inf as None (JSON has neither)."""
    if isinstance(value, Record):
        return value.to_json()
    if is_dataclass(value) and not isinstance(value, type):
        return {f.name: json_value(getattr(value, f.name)) for f in fields(value)}
    if isinstance(value, dict):
        return {str(k): json_value(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [json_value(v) for v in value]
    if hasattr(value, "item") and callable(value.item):  # numpy scalar
        value = value.item()
    if isinstance(value, float):
        if not math.isfinite(value):
            return None
        return float(f"{value:.{SIGNIFICANT_DIGITS}g}")
    return value


@dataclass(frozen=True)
class Record:
    """Base of every result record: its fields are its JSON keys, in order."""

    def to_json(self) -> dict:
        return {f.name: json_value(getattr(self, f.name)) for f in fields(self)}
