"""The case-file schema: pydantic models whose fields are SI floats after validation.

Every dimensional value arrives as a string with a unit ("12 mm", "0.3 g") and leaves as an SI
float; a wrong dimension, a missing unit, a non-positive size, NaN or an unknown key is a
validation error that names the key.  Sanity limits reject absurd inputs (a 10 m beam, a grid of
a billion frequencies) with the limit named.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Annotated, Any, Literal, get_args, get_origin

from pydantic import BaseModel, BeforeValidator, ConfigDict, Field, model_validator

from harvester.units import STANDARD_GRAVITY, UnitError, to_si

# Sanity limits: far outside any cantilever harvester, so they only catch typos and junk.
MAX_LENGTH_M = 2.0
MAX_MAGNET_SIZE_M = 0.2
MAX_FREQUENCY_HZ = 20_000.0
MAX_ACCELERATION_MPS2 = 1000 * STANDARD_GRAVITY
MAX_GRID_POINTS = 2_000
MAX_GAPS = 200
MAX_STIFFNESS_TERMS = 5
KELVIN_AT_0_DEGC = 273.15
# a magnet's remanence coefficient is quoted about 20 °C (common practice in makers' data)
REFERENCE_TEMPERATURE_K = KELVIN_AT_0_DEGC + 20.0
MIN_TEMPERATURE_K = KELVIN_AT_0_DEGC - 100.0  # far outside any harvester's service: typos only
MAX_TEMPERATURE_K = KELVIN_AT_0_DEGC + 400.0


@dataclass(frozen=True)
class SIUnit:
    """The SI unit a validated field holds, as the suffix its key takes in JSON output
    ("m" for a length: `length` → `length_m`; see `case_si_dict`)."""

    suffix: str


def _quantity(dimension: str, *, minimum: float | None = 0.0, inclusive: bool = False,
              maximum: float | None = None, limit_text: str = ""):
    """A BeforeValidator turning a unit string into an SI float within bounds."""

    def parse(value: object) -> float:
        number = to_si(value, dimension)
        if minimum is not None:
            ok = number >= minimum if inclusive else number > minimum
            if not ok:
                bound = "≥" if inclusive else ">"
                sign = "non-negative" if inclusive else "positive"
                raise ValueError(f"{value!r} must be {bound} {minimum:g} (SI)" if minimum
                                 else f"{value!r} must be {sign}")
        if maximum is not None and number > maximum:
            raise ValueError(f"{value!r} is beyond the limit of {limit_text}")
        return number

    return BeforeValidator(parse)


Length = Annotated[float, _quantity("length", maximum=MAX_LENGTH_M, limit_text="2 m"),
                  SIUnit("m")]
MagnetSize = Annotated[float, _quantity("length", maximum=MAX_MAGNET_SIZE_M,
                                        limit_text="200 mm"), SIUnit("m")]
Mass = Annotated[float, _quantity("mass", maximum=100.0, limit_text="100 kg"), SIUnit("kg")]
MassOrZero = Annotated[float, _quantity("mass", inclusive=True, maximum=100.0,
                                        limit_text="100 kg"), SIUnit("kg")]
Frequency = Annotated[float, _quantity("frequency", maximum=MAX_FREQUENCY_HZ,
                                       limit_text="20 kHz"), SIUnit("Hz")]
Acceleration = Annotated[float, _quantity("acceleration", maximum=MAX_ACCELERATION_MPS2,
                                          limit_text="1000 g"), SIUnit("mps2")]
Resistance = Annotated[float, _quantity("resistance"), SIUnit("ohm")]
ResistanceOrZero = Annotated[float, _quantity("resistance", inclusive=True), SIUnit("ohm")]
InductanceOrZero = Annotated[float, _quantity("inductance", inclusive=True), SIUnit("H")]
Capacitance = Annotated[float, _quantity("capacitance"), SIUnit("F")]
Voltage = Annotated[float, _quantity("voltage"), SIUnit("V")]
FluxLinkage = Annotated[float, _quantity("flux linkage"), SIUnit("V_s_per_m")]
Coupling = Annotated[float, _quantity("coupling", minimum=None), SIUnit("N_per_V")]
Damping = Annotated[float, _quantity("damping", inclusive=True), SIUnit("N_s_per_m")]
Stiffness = Annotated[float, _quantity("stiffness"), SIUnit("N_per_m")]
Remanence = Annotated[float, _quantity("magnetic flux density", maximum=2.0, limit_text="2 T"),
                    SIUnit("T")]


def _gap(value: object) -> float:
    number = to_si(value, "length")
    if not number > 0.0:
        raise ValueError(f"{value!r}: the magnets would touch or overlap; the gap is face to "
                         "face at rest and must be > 0")
    if number > MAX_LENGTH_M:
        raise ValueError(f"{value!r} is beyond the limit of 2 m")
    return number


def _offset(value: object) -> float:
    """A length that may be negative (a position off an axis), within the magnet-size limit."""
    number = to_si(value, "length")
    if abs(number) > MAX_MAGNET_SIZE_M:
        raise ValueError(f"{value!r} is beyond the limit of ±200 mm")
    return number


def _signed_acceleration(value: object) -> float:
    """An acceleration of either sign (a component along an axis), within ±1000 g."""
    number = to_si(value, "acceleration")
    if abs(number) > MAX_ACCELERATION_MPS2:
        raise ValueError(f"{value!r} is beyond the limit of ±1000 g")
    return number


def _temperature(value: object) -> float:
    """A temperature [K] from e.g. "60 degC" or "333 K", between MIN and MAX_TEMPERATURE_K."""
    number = to_si(value, "temperature")
    if not MIN_TEMPERATURE_K <= number <= MAX_TEMPERATURE_K:
        raise ValueError(f"{value!r} is outside {MIN_TEMPERATURE_K - KELVIN_AT_0_DEGC:g} … "
                         f"{MAX_TEMPERATURE_K - KELVIN_AT_0_DEGC:g} °C")
    return number


def _ratio(value: object) -> float:
    number = to_si(value, "dimensionless")
    if not 0.0 < number < 1.0:
        raise ValueError(f"{value!r} must be between 0 and 1 (e.g. 0.01 or \"1 %\")")
    return number


def _positive_number(value: object) -> float:
    number = to_si(value, "dimensionless")
    if not number > 0.0:
        raise ValueError(f"{value!r} must be a positive number")
    return number


def _load_resistance(value: object) -> float | None:
    """A resistance, or "matched" (returned as None: the solver searches for it)."""
    if isinstance(value, str) and value.strip().lower() == "matched":
        return None
    number = to_si(value, "resistance")
    if not number > 0.0:
        raise ValueError(f"{value!r} must be positive, or \"matched\"")
    return number


def _stiffness_terms(value: object) -> tuple[float, ...] | dict[int, float]:
    """The odd series as a list [k1, k3, …], or a table keyed by power {x0 = "…N",
    x1 = "…N/m", x2 = "…N/m^2", …} (a dict from power to coefficient, SI)."""
    if isinstance(value, dict):
        return _stiffness_table(value)
    if not isinstance(value, (list, tuple)) or not value:
        raise ValueError("expected a list such as [\"-120 N/m\", \"2.5e6 N/m^3\"], or a table "
                         "keyed by power such as { x1 = \"-40 N/m\", x2 = \"2e3 N/m^2\", "
                         "x3 = \"4e6 N/m^3\" }")
    if len(value) > MAX_STIFFNESS_TERMS:
        raise ValueError(f"at most {MAX_STIFFNESS_TERMS} odd-power terms (k1 … k9)")
    return tuple(to_si(v, f"k{2 * i + 1} stiffness") for i, v in enumerate(value))


MAX_STIFFNESS_POWER = 2 * MAX_STIFFNESS_TERMS - 1  # x0 … x9, as far as the list form reaches


def _stiffness_table(table: dict) -> dict[int, float]:
    """{power: coefficient [N/m^power]} from { x0 = "…", x1 = "…", … }, each key's unit
    checked: N for x0, N/m for x1, N/m^p for x_p."""
    if not table:
        raise ValueError("an empty table; expected e.g. { x1 = \"-40 N/m\", x3 = \"4e6 N/m^3\" }")
    terms = {}
    for key, text in table.items():
        power = int(key[1:]) if isinstance(key, str) and key[:1] == "x" and key[1:].isdigit() \
            else None
        if power is None or power > MAX_STIFFNESS_POWER or key != f"x{power}":
            raise ValueError(f"key {key!r}: expected x0 … x{MAX_STIFFNESS_POWER}, the power of x "
                             "the coefficient multiplies")
        unit = "N" if power == 0 else "N/m" if power == 1 else f"N/m^{power}"
        try:
            if power % 2:
                terms[power] = to_si(text, f"k{power} stiffness")
            else:
                # an even power has no dimension of its own in harvester.units: x_p·m^(p−1) is
                # a stiffness (N/m) with the same SI number
                if not isinstance(text, str):
                    raise UnitError(f"{text!r} has no unit; write it as a string with a unit")
                terms[power] = to_si(f"{text} * m^{power - 1}", "stiffness")
        except UnitError as exc:
            reason = str(exc) if power % 2 else "not a coefficient in " + unit
            raise ValueError(f"{key} = {text!r}: {reason}; expected e.g. \"1 {unit}\"") from None
    if not any(terms.values()):
        raise ValueError("every term is zero")
    return terms


Gap = Annotated[float, BeforeValidator(_gap), SIUnit("m")]
Offset = Annotated[float, BeforeValidator(_offset), SIUnit("m")]
SignedAcceleration = Annotated[float, BeforeValidator(_signed_acceleration), SIUnit("mps2")]
Temperature = Annotated[float, BeforeValidator(_temperature), SIUnit("K")]
Ratio = Annotated[float, BeforeValidator(_ratio)]
PositiveNumber = Annotated[float, BeforeValidator(_positive_number)]
LoadResistance = Annotated[float | None, BeforeValidator(_load_resistance), SIUnit("ohm")]
StiffnessTerms = Annotated[tuple[float, ...] | dict[int, float], BeforeValidator(_stiffness_terms),
                          SIUnit("SI")]


class Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)


# --- beam and transducers --------------------------------------------------------------------
class Layer(Strict):
    material: str
    thickness: Length


class PiezoLayers(Strict):
    material: str
    thickness: Length
    layers: Literal[1, 2] = 2
    wiring: Literal["series", "parallel"] = "series"


class Coil(Strict):
    flux_linkage: FluxLinkage
    resistance: ResistanceOrZero
    inductance: InductanceOrZero = 0.0


class Beam(Strict):
    length: Length
    width: Length
    substrate: Layer
    piezo: PiezoLayers | None = None
    coil: Coil | None = None

    @model_validator(mode="after")
    def _one_transducer(self):
        if self.piezo is not None and self.coil is not None:
            raise ValueError("give either piezo or coil, not both")
        return self


# --- magnets ---------------------------------------------------------------------------------
class DiscShape(Strict):
    diameter: MagnetSize
    length: MagnetSize


class TipMagnet(Strict):
    material: str
    block: tuple[MagnetSize, MagnetSize, MagnetSize] | None = None
    disc: DiscShape | None = None
    extra_mass: MassOrZero = 0.0  # mount, glue, clamp at the tip
    remanence: Remanence | None = None  # overrides the material's (e.g. from a calibration)

    @model_validator(mode="after")
    def _one_shape(self):
        if (self.block is None) == (self.disc is None):
            raise ValueError("give exactly one shape: block = [axial, width, deflection] "
                             "or disc = { diameter, length }")
        return self


class FixedMagnet(TipMagnet):
    gap: Gap  # face to face at rest
    offset: Offset = 0.0  # its centre off the beam's axis, along the deflection (+x)


class Mounting(Strict):
    """[mounting]: how the harvester sits in gravity.

    gravity : the component of gravity along the tip deflection (+x), e.g. "1 g" for a beam
        whose deflection is vertical and whose +x points down; default 0 (deflection
        horizontal).  The weight of the beam and the tip body acts through the forcing mass.
    """

    gravity: SignedAcceleration = 0.0


class TemperatureRange(Strict):
    min: Temperature
    max: Temperature

    @model_validator(mode="after")
    def _ordered(self):
        if not self.max > self.min:
            raise ValueError("temperature.max must be above temperature.min")
        return self


def _temperature_spec(value: object) -> TemperatureRange | float | None:
    """One temperature ("60 degC") or a range { min = "…", max = "…" }."""
    if value is None:
        return None
    if isinstance(value, dict):
        unknown = sorted(set(value) - {"min", "max"})
        if unknown or len(value) != 2:
            raise ValueError("expected a value such as \"60 degC\" or a range "
                             "{ min = \"-20 degC\", max = \"70 degC\" }")
        low, high = _temperature(value["min"]), _temperature(value["max"])
        if not high > low:
            raise ValueError("temperature.max must be above temperature.min")
        return TemperatureRange(min=value["min"], max=value["max"])
    return _temperature(value)


ServiceTemperature = Annotated[TemperatureRange | float | None,
                               BeforeValidator(_temperature_spec), SIUnit("K")]


class Environment(Strict):
    """[environment]: the service temperature, one value or a range { min, max }.

    The magnets' remanence follows it (`harvester.build.remanence_at`); over a range the
    nominal design is evaluated at its middle and `compare` and the note show both ends.
    """

    temperature: ServiceTemperature = None

    @property
    def nominal_K(self) -> float:
        """The temperature the nominal design is evaluated at [K]: the value, the middle of a
        range, or the magnets' reference temperature (20 °C) when none is given."""
        t = self.temperature
        if t is None:
            return REFERENCE_TEMPERATURE_K
        if isinstance(t, TemperatureRange):
            return 0.5 * (t.min + t.max)
        return t

    @property
    def range_K(self) -> tuple[float, float] | None:
        """(min, max) [K] of a range; None for one value or none."""
        t = self.temperature
        return (t.min, t.max) if isinstance(t, TemperatureRange) else None

    @property
    def highest_K(self) -> float:
        """The highest service temperature [K] (the nominal one without a range)."""
        window = self.range_K
        return window[1] if window else self.nominal_K


# --- losses, load, excitation ----------------------------------------------------------------
class Losses(Strict):
    damping_ratio: Ratio


class Load(Strict):
    resistance: LoadResistance = None


class Tone(Strict):
    frequency: Frequency
    amplitude: Acceleration


class Band(Strict):
    low: Frequency
    high: Frequency
    rms: Acceleration

    @model_validator(mode="after")
    def _ordered(self):
        if not self.high > self.low:
            raise ValueError("band.high must be above band.low")
        return self


class PsdTable(Strict):
    file: str
    frequency_unit: str = "Hz"
    psd_unit: Literal["g^2/Hz", "(m/s^2)^2/Hz"] = "g^2/Hz"
    # between rows: straight lines on log-log axes (test-profile corners), straight lines
    # (dense estimates), or "auto": linear for a dense, evenly spaced table, else log-log
    interpolation: Literal["auto", "loglog", "linear"] = "auto"


class Record(Strict):
    file: str
    time_unit: Literal["s", "ms"] = "s"
    acceleration_unit: Literal["g", "m/s^2"] = "g"


class Excitation(Strict):
    tone: Tone | None = None
    band: Band | None = None
    psd: PsdTable | None = None
    record: Record | None = None

    @model_validator(mode="after")
    def _one_kind(self):
        given = [k for k in ("tone", "band", "psd", "record") if getattr(self, k) is not None]
        if len(given) != 1:
            raise ValueError("give exactly one of tone, band, psd, record"
                             + (f" (got {', '.join(given)})" if given else ""))
        return self

    @property
    def kind(self) -> str:
        return next(k for k in ("tone", "band", "psd", "record") if getattr(self, k) is not None)


# --- study and limits ------------------------------------------------------------------------
class FrequencyGrid(Strict):
    start: Frequency = Field(alias="from")
    stop: Frequency = Field(alias="to")
    count: int = Field(ge=1, le=MAX_GRID_POINTS)

    @model_validator(mode="after")
    def _ordered(self):
        if self.count > 1 and not self.stop > self.start:
            raise ValueError("frequencies.to must be above frequencies.from")
        return self


class AmplitudeGrid(Strict):
    start: Acceleration = Field(alias="from")
    stop: Acceleration = Field(alias="to")
    count: int = Field(ge=1, le=MAX_GRID_POINTS)


class Study(Strict):
    gaps: list[Gap] = Field(default_factory=list, max_length=MAX_GAPS)
    frequencies: FrequencyGrid | None = None
    amplitudes: AmplitudeGrid | None = None


YEAR_S = 365.25 * 86400.0  # the Julian year, as pint's "year"
DEFAULT_DESIGN_LIFE_S = 10.0 * YEAR_S
MAX_DESIGN_LIFE_S = 1000.0 * YEAR_S
DesignLife = Annotated[float, _quantity("time", maximum=MAX_DESIGN_LIFE_S,
                                        limit_text="1000 years"), SIUnit("s")]


def _marin_factor(value: object) -> float:
    number = to_si(value, "dimensionless")
    if not 0.0 < number <= 1.0:
        raise ValueError(f"{value!r} must be a factor in (0, 1] (1: as the specimen data)")
    return number


MarinFactor = Annotated[float, BeforeValidator(_marin_factor), SIUnit("factor")]


class Marin(Strict):
    """Marin factors on the substrate's long-life fatigue strength, S_e = k_a k_b k_e S_e′
    (Budynas & Nisbett, *Shigley's Mechanical Engineering Design*, ch. 6).  Each defaults to
    1, the specimen data as the material file gives them: a polished rotating-beam or
    reverse-bending specimen, of its own size, at 50 % reliability.

    surface : k_a, e.g. 0.7–0.9 for a rolled or machined strip (Shigley's k_a = a S_ut^b)
    size : k_b; 1 for a thin strip in bending (Shigley's formula starts at 2.79 mm)
    reliability : k_e, 0.897 / 0.868 / 0.814 / 0.753 for 90 / 95 / 99 / 99.9 % (Shigley
        table 6-5, memory)
    """

    surface: MarinFactor = 1.0
    size: MarinFactor = 1.0
    reliability: MarinFactor = 1.0

    @property
    def product(self) -> float:
        return self.surface * self.size * self.reliability


class Limits(Strict):
    """[limits]: what a design must stay within.

    safety_factor : checks warn below it (default 1.5)
    travel : room for the tip body to move before it strikes a stop (no check without it)
    max_voltage : highest voltage the electronics accept (no check without it)
    design_life : service life the substrate must reach under the excitation (default
        "10 years", `DEFAULT_DESIGN_LIFE_S`), for the fatigue-life (Miner) check
    marin : Marin factors on the long-life fatigue strength (`Marin`, each default 1)
    """

    safety_factor: PositiveNumber = 1.5
    travel: Length | None = None
    max_voltage: Voltage | None = None
    design_life: DesignLife = DEFAULT_DESIGN_LIFE_S
    marin: Marin = Field(default_factory=Marin)


# --- the interface circuit and the sensor node ------------------------------------------------
MAX_VOLTAGE_V = 1000.0
MAX_POWER_W = 10.0
MAX_STORE_F = 100.0
MAX_REPORT_INTERVAL_S = 7.0 * 86400.0

DiodeDrop = Annotated[float, _quantity("voltage", inclusive=True, maximum=10.0,
                                       limit_text="10 V"), SIUnit("V")]
VoltageOrZero = Annotated[float, _quantity("voltage", inclusive=True, maximum=MAX_VOLTAGE_V,
                                           limit_text="1 kV"), SIUnit("V")]
NodeVoltage = Annotated[float, _quantity("voltage", maximum=MAX_VOLTAGE_V, limit_text="1 kV"),
                        SIUnit("V")]
StoreCapacitance = Annotated[float, _quantity("capacitance", maximum=MAX_STORE_F,
                                              limit_text="100 F"), SIUnit("F")]
Power = Annotated[float, _quantity("power", maximum=MAX_POWER_W, limit_text="10 W"), SIUnit("W")]
PowerOrZero = Annotated[float, _quantity("power", inclusive=True, maximum=MAX_POWER_W,
                                         limit_text="10 W"), SIUnit("W")]
Duration = Annotated[float, _quantity("time", maximum=MAX_REPORT_INTERVAL_S,
                                      limit_text="7 days"), SIUnit("s")]


def _store_voltage(value: object) -> float | None:
    """A store voltage, or "matched" (returned as None: the solver searches for it)."""
    if isinstance(value, str) and value.strip().lower() == "matched":
        return None
    number = to_si(value, "voltage")
    if not 0.0 < number <= MAX_VOLTAGE_V:
        raise ValueError(f"{value!r} must be positive and at most 1 kV, or \"matched\"")
    return number


StoreVoltage = Annotated[float | None, BeforeValidator(_store_voltage), SIUnit("V")]


class Store(Strict):
    """[circuit].store: a store that holds its voltage (a cell, a regulated converter input):
    `voltage`, a value or "matched"; or a storage capacitor with the DC load across it:
    `capacitance`, `load` (a value or "matched") and its `initial` voltage (default 0 V)."""

    voltage: StoreVoltage = None
    capacitance: StoreCapacitance | None = None
    load: LoadResistance = None
    initial: VoltageOrZero = 0.0

    @model_validator(mode="after")
    def _one_kind(self):
        given = self.model_fields_set
        if ("voltage" in given) == (self.capacitance is not None):
            raise ValueError("give either voltage = \"3.3 V\" (or \"matched\"), or "
                             "capacitance = \"470 uF\" with load = \"100 kohm\"")
        if "voltage" in given and given & {"load", "initial"}:
            raise ValueError("load and initial belong to a capacitor store "
                             "(capacitance = \"470 uF\")")
        if self.capacitance is not None and "load" not in given:
            raise ValueError("a capacitor store needs the DC load across it: load = "
                             "\"100 kohm\" or \"matched\"")
        return self

    @property
    def is_capacitor(self) -> bool:
        return self.capacitance is not None

    @property
    def matched(self) -> bool:
        """The store voltage (or a capacitor's load) is to be found: "matched"."""
        return (self.load if self.is_capacitor else self.voltage) is None


class Circuit(Strict):
    """[circuit]: what the transducer works into.  `interface = "resistor"` (the default):
    the resistance of [load]; `"bridge"`: a full-wave diode bridge with `diode_drop` per diode
    (0: ideal) into `store`."""

    interface: Literal["resistor", "bridge"] = "resistor"
    diode_drop: DiodeDrop = 0.0
    store: Store | None = None

    @model_validator(mode="after")
    def _complete(self):
        if self.interface == "bridge" and self.store is None:
            raise ValueError("a bridge needs its store: store = { voltage = \"3.3 V\" } or "
                             "{ capacitance = \"470 uF\", load = \"100 kohm\" }")
        if self.interface == "resistor" and self.model_fields_set & {"diode_drop", "store"}:
            raise ValueError("diode_drop and store belong to interface = \"bridge\"")
        return self

    @property
    def is_bridge(self) -> bool:
        return self.interface == "bridge"


class Node(Strict):
    """[node]: the sensor node the harvester powers.  Its consumption as `average_power`, or as
    a duty cycle: `active_power` for `active_time` once every `report_interval`, and
    `sleep_power` in between (default 0).  Optionally the start-up threshold of its
    power-management stage: it starts once its input reaches `start_voltage` with at least
    `start_power` available (common practice for boost converters that start from a
    harvester)."""

    average_power: Power | None = None
    active_power: Power | None = None
    active_time: Duration | None = None
    report_interval: Duration | None = None
    sleep_power: PowerOrZero = 0.0
    start_voltage: NodeVoltage | None = None
    start_power: PowerOrZero | None = None

    @model_validator(mode="after")
    def _one_consumption(self):
        cycle = [self.active_power, self.active_time, self.report_interval]
        if self.average_power is not None:
            if any(c is not None for c in cycle) or "sleep_power" in self.model_fields_set:
                raise ValueError("give either average_power, or the duty cycle active_power, "
                                 "active_time, report_interval (and sleep_power), not both")
            return self
        if any(c is None for c in cycle):
            raise ValueError("give the node's consumption: average_power = \"20 uW\", or "
                             "active_power, active_time and report_interval (and sleep_power)")
        if not self.active_time < self.report_interval:
            raise ValueError("active_time must be shorter than report_interval")
        return self


# --- build tolerances ------------------------------------------------------------------------
# [tolerances]: the case paths a build tolerance may be given for, with their dimension
TOLERANCE_PATHS = {
    "fixed_magnet.gap": "length",
    "fixed_magnet.offset": "length",
    "tip_magnet.remanence": "magnetic flux density",
    "fixed_magnet.remanence": "magnetic flux density",
    "tip_magnet.extra_mass": "mass",
    "beam.length": "length",
    "beam.width": "length",
    "beam.substrate.thickness": "length",
    "beam.piezo.thickness": "length",
    "losses.damping_ratio": "dimensionless",
    "environment.temperature": "temperature",
    "mounting.gravity": "acceleration",
    # a [reduced] case's damping and the transducers' couplings (what `calibrate` writes)
    "reduced.damping": "damping",
    "beam.coil.flux_linkage": "flux linkage",
    "reduced.coil.flux_linkage": "flux linkage",
    "reduced.piezo.coupling": "coupling",
}
# paths whose nominal value may be zero: a tolerance on them cannot be a percentage
ABSOLUTE_ONLY = ("fixed_magnet.offset", "environment.temperature", "mounting.gravity")
TOLERANCE_UNITS = {"length": "m", "magnetic flux density": "T", "mass": "kg", "dimensionless": "",
                    "temperature": "K", "acceleration": "m/s²", "damping": "N·s/m",
                    "flux linkage": "V·s/m", "coupling": "N/V"}


class ToleranceSpec(Strict):
    """One build tolerance: how a case value scatters from build to build."""

    path: str  # the case value it applies to, e.g. "fixed_magnet.gap"
    distribution: Literal["normal", "uniform"]
    width_SI: float  # standard deviation (normal) or half-width (uniform), in unit_SI
    relative: bool  # width_SI is instead a fraction of the nominal value (given in %)
    unit_SI: str  # the SI unit of the value at `path`


def _tolerance_width(path: str, text: object) -> tuple[float, bool]:
    """(width, relative) of one tolerance: a percentage of the nominal value, or a value in
    the path's dimension (a temperature as a difference, in K)."""
    dimension = TOLERANCE_PATHS[path]
    if isinstance(text, str) and text.strip().endswith("%"):
        if path in ABSOLUTE_ONLY:
            raise ValueError(f"{path}: {text!r}: give it in the value's unit, not as a "
                             "percentage (its nominal value may be zero)")
        return to_si(text, "dimensionless"), True
    if dimension == "temperature" and isinstance(text, str) and any(
            unit in text.lower() for unit in ("degc", "°c", "degf", "°f", "celsius")) \
            and "delta" not in text.lower():
        raise ValueError(f"{path}: {text!r}: give a temperature difference in K (e.g. "
                         "\"3 K\")")
    return to_si(text, dimension), False


def _tolerances(value: object) -> tuple[dict, ...]:
    """[tolerances] { "path" = { sd = "…" } | { uniform = "…" } } → ToleranceSpec fields."""
    if not isinstance(value, dict):
        raise ValueError("expected a table keyed by case path, e.g. "
                         "\"fixed_magnet.gap\" = { sd = \"0.1 mm\" }")
    specs = []
    for path, spec in value.items():
        if path not in TOLERANCE_PATHS:
            raise ValueError(f"{path!r}: no tolerance can be given for it; known: "
                             f"{', '.join(TOLERANCE_PATHS)}")
        if not isinstance(spec, dict) or len(spec) != 1 or next(iter(spec)) not in (
                "sd", "uniform"):
            raise ValueError(f"{path}: expected {{ sd = \"…\" }} (normal, standard deviation) "
                             "or { uniform = \"…\" } (uniform, ± half-width)")
        kind, text = next(iter(spec.items()))
        try:
            width, relative = _tolerance_width(path, text)
        except UnitError as exc:
            raise ValueError(f"{path}: {exc}") from None
        if not (math.isfinite(width) and width >= 0.0):
            raise ValueError(f"{path}: {text!r} must be ≥ 0")
        specs.append(dict(path=path, distribution="normal" if kind == "sd" else "uniform",
                          width_SI=width, relative=relative,
                          unit_SI=TOLERANCE_UNITS[TOLERANCE_PATHS[path]]))
    return tuple(specs)


Tolerances = Annotated[tuple[ToleranceSpec, ...], BeforeValidator(_tolerances)]


# --- reduced model given directly ------------------------------------------------------------
class ReducedPiezo(Strict):
    coupling: Coupling
    capacitance: Capacitance


class ReducedCoil(Coil):
    pass


class Reduced(Strict):
    mass: Mass
    # [k1, k3, …] (odd powers), or a table keyed by power { x0 = "N", x1 = "N/m", x2 = …}
    stiffness: StiffnessTerms
    damping: Damping
    forcing_mass: Mass | None = None
    linear_stiffness: Stiffness | None = None  # the same beam without magnets (the baseline)
    piezo: ReducedPiezo | None = None
    coil: ReducedCoil | None = None

    @property
    def odd_stiffness(self) -> tuple[float, ...]:
        """(k1, k3, k5, …) [N/m, N/m³, …] of either form."""
        if not isinstance(self.stiffness, dict):
            return self.stiffness
        top = max((p for p in self.stiffness if p % 2), default=1)
        return tuple(self.stiffness.get(p, 0.0) for p in range(1, top + 1, 2))

    @property
    def even_stiffness(self) -> tuple[float, ...]:
        """(k0, k2, k4, …) [N, N/m², …] of the table form; empty for the list form."""
        if not isinstance(self.stiffness, dict):
            return ()
        top = max((p for p in self.stiffness if p % 2 == 0 and self.stiffness[p]), default=-1)
        return tuple(self.stiffness.get(p, 0.0) for p in range(0, top + 1, 2))

    @model_validator(mode="after")
    def _checks(self):
        if self.piezo is not None and self.coil is not None:
            raise ValueError("give either reduced.piezo or reduced.coil, not both")
        if isinstance(self.stiffness, dict):
            top = max(p for p, k in self.stiffness.items() if k)
            if top % 2 == 0 or self.stiffness[top] < 0.0:
                raise ValueError(f"stiffness: the highest power, x{top}, must be odd with a "
                                 "positive coefficient, or the force cannot hold the beam on "
                                 "both sides (it would have no stable position)")
            return self
        k1 = self.stiffness[0]
        k3 = self.stiffness[1] if len(self.stiffness) > 1 else 0.0
        if k1 <= 0.0 and k3 <= 0.0:
            raise ValueError("stiffness: with k1 ≤ 0 a positive k3 is needed to hold the beam "
                             "(otherwise the oscillator has no stable position)")
        if not math.isfinite(k1):
            raise ValueError("stiffness must be finite")
        return self


# --- the whole case --------------------------------------------------------------------------
class Case(Strict):
    title: str = ""
    notes: str = ""
    beam: Beam | None = None
    tip_magnet: TipMagnet | None = None
    fixed_magnet: FixedMagnet | None = None
    losses: Losses | None = None
    load: Load = Field(default_factory=Load)
    excitation: Excitation | None = None
    reduced: Reduced | None = None
    study: Study = Field(default_factory=Study)
    limits: Limits = Field(default_factory=Limits)
    mounting: Mounting = Field(default_factory=Mounting)
    environment: Environment = Field(default_factory=Environment)
    tolerances: Tolerances = ()
    circuit: Circuit = Field(default_factory=Circuit)
    node: Node | None = None

    @model_validator(mode="after")
    def _complete(self):
        if self.node is not None and not self.circuit.is_bridge:
            raise ValueError("a [node] runs on DC: give [circuit] interface = \"bridge\" and "
                             "its store")
        if self.circuit.is_bridge and not self._has_transducer():
            raise ValueError("[circuit] interface = \"bridge\" needs a transducer (a piezo or "
                             "a coil) to rectify")
        if self.reduced is not None:
            extra = [k for k in ("beam", "tip_magnet", "fixed_magnet", "losses")
                     if getattr(self, k) is not None]
            if extra:
                raise ValueError(f"a [reduced] case takes no {', '.join(extra)}")
            return self
        missing = [k for k in ("beam", "tip_magnet", "losses") if getattr(self, k) is None]
        if missing:
            raise ValueError(f"missing section(s) {', '.join('[' + m + ']' for m in missing)} "
                             "(or give the coefficients directly in [reduced])")
        return self

    @property
    def is_reduced(self) -> bool:
        return self.reduced is not None

    def _has_transducer(self) -> bool:
        if self.reduced is not None:
            return self.reduced.piezo is not None or self.reduced.coil is not None
        return self.beam is not None and (self.beam.piezo is not None
                                          or self.beam.coil is not None)

    @property
    def has_piezo(self) -> bool:
        if self.reduced is not None:
            return self.reduced.piezo is not None
        return self.beam is not None and self.beam.piezo is not None


# --- the validated case as JSON --------------------------------------------------------------
def _unit_suffix(annotation: Any) -> str | None:
    """The SIUnit suffix of a field's type, looking through Optional, tuple and list."""
    for extra in getattr(annotation, "__metadata__", ()):
        if isinstance(extra, SIUnit):
            return extra.suffix
    for arg in get_args(annotation):
        if arg is type(None) or arg is Ellipsis:
            continue
        found = _unit_suffix(arg)
        if found is not None:
            return found
    return None


def case_si_dict(model: BaseModel) -> dict:
    """The validated case (or one of its sections) as a JSON-ready dict whose keys carry the
    SI unit of their values: `beam.length` → `beam.length_m`, `fixed_magnet.gap` → `gap_m`.
    Sections without a value are left out."""
    out: dict = {}
    for name, info in type(model).model_fields.items():
        value = getattr(model, name)
        if value is None or value == () or value == []:
            continue
        key = info.alias if info.alias and info.alias != name else name
        if isinstance(value, BaseModel):
            out[key] = case_si_dict(value)
            continue
        if isinstance(value, (list, tuple)) and value and isinstance(value[0], BaseModel):
            out[key] = [case_si_dict(v) for v in value]
            continue
        suffix = _unit_suffix(info.annotation) if get_origin(info.annotation) is not Literal \
            else None
        if suffix is None:
            for extra in info.metadata:
                if isinstance(extra, SIUnit):
                    suffix = extra.suffix
        if isinstance(value, dict):  # a force series by power: { x0 = N, x1 = N/m, … }
            value = {f"x{power}_SI": k for power, k in sorted(value.items())}
            suffix = None
        out[f"{key}_{suffix}" if suffix else key] = list(value) if isinstance(value, tuple) \
            else value
    return out
