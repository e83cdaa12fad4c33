"""Unit strings at the edges: parse "12 mm", "0.3 g", "0.02 g^2/Hz" into SI floats.

In a case file `g` means standard gravity wherever an acceleration (or an acceleration PSD) is
expected, and gram wherever a mass is expected: "0.3 g" is 2.94 m/s², "12 g" of tip mass is
0.012 kg.  Everything below the case layer is SI floats.
"""

from __future__ import annotations

import math
import re
from functools import lru_cache

STANDARD_GRAVITY = 9.80665  # m/s², by definition (CGPM 1901)

# dimension name used in messages → pint dimensionality string
DIMENSIONS = {
    "length": "[length]",
    "mass": "[mass]",
    "frequency": "1/[time]",
    "acceleration": "[length]/[time]**2",
    "acceleration PSD": "[length]**2/[time]**3",
    "resistance": "[mass]*[length]**2/[time]**3/[current]**2",
    "inductance": "[mass]*[length]**2/[time]**2/[current]**2",
    "capacitance": "[current]**2*[time]**4/[mass]/[length]**2",
    "voltage": "[mass]*[length]**2/[time]**3/[current]",
    "flux linkage": "[mass]*[length]/[time]**2/[current]",  # V·s/m = N/A
    "coupling": "[current]*[time]/[length]",  # N/V = A·s/m
    "damping": "[mass]/[time]",
    "stiffness": "[mass]/[time]**2",
    "cubic stiffness": "[mass]/[time]**2/[length]**2",
    "pressure": "[mass]/[length]/[time]**2",
    "density": "[mass]/[length]**3",
    "compliance": "[length]*[time]**2/[mass]",
    "piezoelectric charge constant": "[current]*[time]**3/[mass]/[length]",
    "magnetic flux density": "[mass]/[time]**2/[current]",
    "temperature": "[temperature]",
    "time": "[time]",
    "velocity": "[length]/[time]",
    "force": "[mass]*[length]/[time]**2",
    "power": "[mass]*[length]**2/[time]**3",
    "dimensionless": "",
}
# odd-power stiffness coefficients k1 [N/m], k3 [N/m³], k5 [N/m⁵], … of a restoring force
for _j in range(1, 10, 2):
    DIMENSIONS[f"k{_j} stiffness"] = f"[mass]/[time]**2/[length]**{_j - 1}"
_LEADING_NUMBER = re.compile(r"^[-+]?(\d|\.\d|nan|inf)", re.IGNORECASE)
_G_TOKEN = re.compile(r"(?<![A-Za-z_])g(?![A-Za-z_0-9])")


@lru_cache(maxsize=1)
def registry():
    """The pint registry (created once, on first use, to keep start-up fast)."""
    import pint

    ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    return ureg


def _article(noun: str) -> str:
    return "an" if noun[:1].lower() in "aeiou" else "a"


class UnitError(ValueError):
    """A value that is not a number with a unit of the expected dimension."""


def _expects_gravity(dimension: str) -> bool:
    return dimension in ("acceleration", "acceleration PSD")


def to_si(value: object, dimension: str) -> float:
    """Parse `value` (a string such as "12 mm", or a bare number for dimensionless fields)
    and return it in SI base units as a float.

    Raises UnitError with a message saying what was expected.
    """
    if isinstance(value, bool):
        raise UnitError(f"expected a {dimension} with a unit, got {value!r}")
    if isinstance(value, (int, float)):
        if dimension == "dimensionless":
            number = float(value)
            if not math.isfinite(number):
                raise UnitError(f"expected a finite number, got {value!r}")
            return number
        raise UnitError(
            f"{value!r} has no unit; write it as a string with a unit, "
            f"e.g. \"{value} {_example_unit(dimension)}\""
        )
    if not isinstance(value, str):
        raise UnitError(f"expected a {dimension} as a string with a unit, got {value!r}")
    text = value.strip()
    if not text:
        raise UnitError(f"empty value; expected a {dimension} with a unit")
    if len(text) > 200:
        raise UnitError(f"value too long ({len(text)} characters); expected e.g. "
                        f"\"1 {_example_unit(dimension)}\"")
    if not _LEADING_NUMBER.match(text):
        raise UnitError(f"{value!r} does not start with a number; expected a {dimension}, "
                        f"e.g. \"1 {_example_unit(dimension)}\"")
    if _expects_gravity(dimension):
        text = _G_TOKEN.sub("g_n", text)
    text = text.replace("µ", "u").replace("μ", "u").replace("Ω", "ohm").replace("·", "*")
    ureg = registry()
    try:
        quantity = ureg.Quantity(text)
    except Exception:
        raise UnitError(
            f"cannot read {value!r} as a {dimension}; expected a number and a unit, "
            f"e.g. \"1 {_example_unit(dimension)}\""
        ) from None
    if not isinstance(quantity, ureg.Quantity):  # a bare number in a string
        quantity = ureg.Quantity(float(quantity), "")
    expected = DIMENSIONS[dimension]
    if quantity.dimensionless and expected != "":
        raise UnitError(
            f"{value!r} has no unit; expected {_article(dimension)} {dimension}, "
            f"e.g. \"{text} {_example_unit(dimension)}\""
        )
    if quantity.dimensionality != ureg.get_dimensionality(expected):
        raise UnitError(
            f"{value!r} is not {_article(dimension)} {dimension} (it has dimension "
            f"{quantity.dimensionality}); "
            f"expected e.g. \"1 {_example_unit(dimension)}\""
        )
    try:
        number = float(quantity.to_base_units().magnitude)
    except Exception:
        raise UnitError(f"cannot convert {value!r} to SI") from None
    if not math.isfinite(number):
        raise UnitError(f"{value!r} is not a finite number")
    return number


_EXAMPLES = {
    "length": "mm",
    "mass": "g",
    "frequency": "Hz",
    "acceleration": "g",
    "acceleration PSD": "g^2/Hz",
    "resistance": "kohm",
    "inductance": "mH",
    "capacitance": "nF",
    "voltage": "V",
    "flux linkage": "V*s/m",
    "coupling": "N/V",
    "damping": "N*s/m",
    "stiffness": "N/m",
    "cubic stiffness": "N/m^3",
    "pressure": "MPa",
    "density": "kg/m^3",
    "compliance": "m^2/N",
    "piezoelectric charge constant": "pm/V",
    "magnetic flux density": "T",
    "temperature": "degC",
    "time": "s",
    "velocity": "mm/s",
    "force": "mN",
    "power": "uW",
    "dimensionless": "",
}
_EXAMPLES.update({f"k{j} stiffness": f"N/m^{j}" if j > 1 else "N/m" for j in range(1, 10, 2)})


def _example_unit(dimension: str) -> str:
    return _EXAMPLES.get(dimension, "")
