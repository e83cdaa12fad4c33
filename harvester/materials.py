"""Material data: one TOML file per material in materials/, every value with its source.

Values are unit strings in the files and SI floats here.  Piezoelectric materials also get the
plane-stress constants used by the beam model (Erturk & Inman 2011, Piezoelectric Energy
Harvesting, App. E):  c̄11 = 1/s11E,  ē31 = d31/s11E,  ε̄33S = ε33T − d31²/s11E.
"""

from __future__ import annotations

import difflib
import math
import tomllib
from dataclasses import dataclass, field
from functools import lru_cache
from importlib import resources
from pathlib import Path

from harvester.errors import CaseError
from harvester.units import UnitError, to_si

VACUUM_PERMITTIVITY = 8.8541878128e-12  # F/m (CODATA 2018)

# property name → dimension expected in the file
PROPERTY_DIMENSIONS = {
    "density": "density",
    "youngs_modulus": "pressure",
    "yield_strength": "pressure",
    "ultimate_strength": "pressure",
    "fatigue_strength": "pressure",
    "short_life_fatigue_strength": "pressure",
    "compliance_s11E": "compliance",
    "d31": "piezoelectric charge constant",
    "relative_permittivity_33T": "dimensionless",
    "max_tensile_stress": "pressure",
    "max_tensile_strain": "dimensionless",
    "curie_temperature": "temperature",
    "remanence": "magnetic flux density",
    "max_operating_temperature": "temperature",
    "remanence_temperature_coefficient": "temperature coefficient",
}
# properties that are a strength at a number of cycles (`cycles = …` beside the value), with the
# count assumed when the file gives none
CYCLE_COUNTED = {"fatigue_strength": 1e7, "short_life_fatigue_strength": 1e3}
REQUIRED = {
    "substrate": ("density", "youngs_modulus", "ultimate_strength", "fatigue_strength"),
    "piezo": ("density", "compliance_s11E", "d31", "relative_permittivity_33T"),
    "magnet": ("density", "remanence", "remanence_temperature_coefficient",
               "max_operating_temperature"),
}


def temperature_coefficient(text: object) -> float:
    """A relative change per kelvin [1/K] from e.g. "-0.12 %/K" or "-1.2e-3 1/K".

    >>> round(temperature_coefficient("-0.12 %/K"), 12)
    -0.0012
    """
    if not isinstance(text, str) or any(u in text.lower() for u in ("degc", "°c", "degf")):
        raise UnitError(f"{text!r}: expected a coefficient per kelvin, e.g. \"-0.12 %/K\"")
    return to_si(f"{text} * K", "dimensionless")


@dataclass(frozen=True)
class Material:
    """A material's SI properties, each with the source it came from."""

    key: str  # file stem, e.g. "pzt-5a"
    name: str
    kind: str  # "substrate" | "piezo" | "magnet"
    description: str
    values: dict[str, float]
    sources: dict[str, str]
    fatigue_cycles: float | None = None
    aliases: tuple[str, ...] = field(default_factory=tuple)
    short_life_cycles: float | None = None  # cycles of `short_life_fatigue_strength`

    def get(self, prop: str) -> float:
        return self.values[prop]

    @property
    def sn_points(self) -> tuple[tuple[float, float], tuple[float, float]] | None:
        """The two points (cycles, fatigue strength [Pa]) of the S–N line, shorter life first:
        `short_life_fatigue_strength` and `fatigue_strength`; None unless both are given."""
        if "short_life_fatigue_strength" not in self.values or not self.fatigue_cycles:
            return None
        return ((self.short_life_cycles, self.values["short_life_fatigue_strength"]),
                (self.fatigue_cycles, self.values["fatigue_strength"]))

    # plane-stress piezo constants (Erturk & Inman 2011, App. E)
    @property
    def youngs_modulus_Pa(self) -> float:
        if self.kind == "piezo":
            return 1.0 / self.values["compliance_s11E"]
        return self.values["youngs_modulus"]

    @property
    def e31_C_per_m2(self) -> float:
        return self.values["d31"] / self.values["compliance_s11E"]

    @property
    def permittivity_S_F_per_m(self) -> float:
        eps_t = self.values["relative_permittivity_33T"] * VACUUM_PERMITTIVITY
        return eps_t - self.values["d31"] ** 2 / self.values["compliance_s11E"]


def _parse(key: str, text: str, origin: str) -> Material:
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise CaseError(f"malformed TOML ({exc})", file=origin) from None
    kind = data.get("kind")
    if kind not in REQUIRED:
        raise CaseError(f"kind must be one of {sorted(REQUIRED)}, got {kind!r}", file=origin)
    values: dict[str, float] = {}
    sources: dict[str, str] = {}
    cycles: dict[str, float] = {}
    for prop, entry in data.get("properties", {}).items():
        if prop not in PROPERTY_DIMENSIONS:
            raise CaseError(f"unknown property; known: {sorted(PROPERTY_DIMENSIONS)}",
                            file=origin, key=f"properties.{prop}")
        if not isinstance(entry, dict) or "value" not in entry or "source" not in entry:
            raise CaseError("each property needs { value = \"…\", source = \"…\" }",
                            file=origin, key=f"properties.{prop}")
        try:
            if PROPERTY_DIMENSIONS[prop] == "temperature coefficient":
                values[prop] = temperature_coefficient(entry["value"])
            else:
                values[prop] = to_si(entry["value"], PROPERTY_DIMENSIONS[prop])
        except UnitError as exc:
            raise CaseError(str(exc), file=origin, key=f"properties.{prop}") from None
        sources[prop] = str(entry["source"])
        if prop in CYCLE_COUNTED:
            try:
                cycles[prop] = float(entry.get("cycles", CYCLE_COUNTED[prop]))
            except (TypeError, ValueError):
                cycles[prop] = math.nan
            if not (math.isfinite(cycles[prop]) and cycles[prop] >= 1.0):
                raise CaseError(f"cycles = {entry.get('cycles')!r}; expected a number ≥ 1",
                                file=origin, key=f"properties.{prop}.cycles")
    missing = [p for p in REQUIRED[kind] if p not in values]
    if missing:
        raise CaseError(f"missing properties {missing} for a {kind}", file=origin)
    short = cycles.get("short_life_fatigue_strength")
    if short is not None and not (
        short < cycles.get("fatigue_strength", 0.0)
        and values["short_life_fatigue_strength"] > values["fatigue_strength"]
    ):
        raise CaseError("the S–N line falls with life: short_life_fatigue_strength needs fewer "
                        "cycles and a higher strength than fatigue_strength", file=origin,
                        key="properties.short_life_fatigue_strength")
    return Material(
        key=key,
        name=str(data.get("name", key)),
        kind=kind,
        description=str(data.get("description", "")),
        values=values,
        sources=sources,
        fatigue_cycles=cycles.get("fatigue_strength"),
        aliases=tuple(str(a) for a in data.get("aliases", ())),
        short_life_cycles=cycles.get("short_life_fatigue_strength"),
    )


def material_folder():
    """materials/ as installed (package data `harvester.materials_data`), or in a source tree.

    An installed harvester (editable or not) ships the files as package data; running from a
    checkout without installing (python -m harvester in the repository) finds the folder beside
    the package.
    """
    try:
        return resources.files("harvester.materials_data")
    except ModuleNotFoundError:
        return Path(__file__).resolve().parent.parent / "materials"


@lru_cache(maxsize=1)
def all_materials() -> dict[str, Material]:
    """Every material shipped in materials/, keyed by file stem."""
    folder = material_folder()
    found: dict[str, Material] = {}
    for item in sorted(folder.iterdir(), key=lambda p: p.name):
        if item.name.endswith(".toml"):
            key = item.name[: -len(".toml")]
            found[key] = _parse(key, item.read_text(encoding="utf-8"), f"materials/{item.name}")
    return found


def _normalise(name: str) -> str:
    return "".join(ch for ch in name.lower() if ch.isalnum())


def find_material(name: str, kind: str | None = None) -> Material:
    """Look a material up by file stem, name or alias (case and punctuation ignored).

    Raises KeyError with a did-you-mean suggestion when nothing matches.
    """
    table = all_materials()
    wanted = _normalise(str(name))
    for mat in table.values():
        names = (mat.key, mat.name, *mat.aliases)
        if any(_normalise(n) == wanted for n in names) and (kind is None or mat.kind == kind):
            return mat
    choices = [m.key for m in table.values() if kind is None or m.kind == kind]
    close = difflib.get_close_matches(str(name).lower(), choices, n=1, cutoff=0.4)
    hint = f"; did you mean {close[0]!r}?" if close else ""
    label = f"{kind} material" if kind else "material"
    raise KeyError(f"unknown {label} {name!r}{hint} (known: {', '.join(choices)})")
