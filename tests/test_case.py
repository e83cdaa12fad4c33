"""Case files: unit checking, one-line errors naming file and key, and no traceback on junk."""

from __future__ import annotations

import math
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from harvester.build import build
from harvester.case.load import load_case, parse_case
from harvester.errors import CaseError
from harvester.units import STANDARD_GRAVITY, UnitError, to_si

CASES = Path(__file__).resolve().parent.parent / "cases"
DEMO = CASES / "pump-skid-piezo.toml"


def _variant(tmp_path: Path, old: str, new: str) -> Path:
    text = DEMO.read_text(encoding="utf-8")
    assert old in text, f"demo case no longer contains {old!r}"
    path = tmp_path / "variant.toml"
    path.write_text(text.replace(old, new, 1), encoding="utf-8")
    return path


def _error(path: Path) -> str:
    with pytest.raises(CaseError) as info:
        load_case(path)
    message = str(info.value)
    assert "\n" not in message
    return message


# --- units ---------------------------------------------------------------------------------------
def test_standard_gravity_and_gram_are_told_apart():
    # standard gravity g_n = 9.80665 m/s² exactly (3rd CGPM, 1901)
    assert to_si("0.3 g", "acceleration") == pytest.approx(0.3 * 9.80665, rel=1e-12)
    assert STANDARD_GRAVITY == 9.80665
    # the same letter is a gram where a mass is expected (SI brochure, 9th ed., 2019)
    assert to_si("12 g", "mass") == pytest.approx(0.012, rel=1e-12)
    # g²/Hz → (m/s²)²/Hz multiplies by g_n²
    assert to_si("0.02 g^2/Hz", "acceleration PSD") == pytest.approx(0.02 * 9.80665**2, rel=1e-12)


@pytest.mark.parametrize(
    "text, dimension, si",
    [
        ("150 kohm", "resistance", 150e3),
        ("12 mH", "inductance", 12e-3),
        ("15 nF", "capacitance", 15e-9),
        ("-171 pm/V", "piezoelectric charge constant", -171e-12),
        ("16.4e-12 m^2/N", "compliance", 16.4e-12),
        ("5 µm", "length", 5e-6),
        ("2.5e6 N/m^3", "k3 stiffness", 2.5e6),
        ("1.2 %", "dimensionless", 0.012),
    ],
)
def test_units_reduce_to_si(text, dimension, si):
    # SI prefixes and derived units (SI brochure, 9th ed., 2019)
    assert to_si(text, dimension) == pytest.approx(si, rel=1e-12)


@pytest.mark.parametrize("value", ["12", 12, "12 kg", "nan mm", "inf mm", "", "mm", True])
def test_bad_lengths_are_rejected(value):
    with pytest.raises(UnitError):
        to_si(value, "length")


# --- the demo case -------------------------------------------------------------------------------
def test_demo_case_reduces_to_si():
    case = load_case(DEMO).case
    assert case.beam.length == pytest.approx(0.060)
    assert case.beam.piezo.thickness == pytest.approx(0.19e-3)
    assert case.fixed_magnet.gap == pytest.approx(8e-3)
    assert case.excitation.tone.amplitude == pytest.approx(0.3 * 9.80665)
    assert case.load.resistance is None  # "matched"
    assert case.study.frequencies.count == 30


# --- one-line errors that name the key -----------------------------------------------------------
@pytest.mark.parametrize(
    "old, new, key, words",
    [
        ('length = "60 mm"', 'length = "60 kg"', "beam.length", "not a length"),
        ('length = "60 mm"', 'length = "60"', "beam.length", "no unit"),
        ('length = "60 mm"', "length = 60", "beam.length", "no unit"),
        ('length = "60 mm"', 'length = "-60 mm"', "beam.length", "positive"),
        ('length = "60 mm"', 'length = "nan mm"', "beam.length", "finite"),
        ('length = "60 mm"', 'length = "60 km"', "beam.length", "limit"),
        ('width = "15 mm"', 'widht = "15 mm"', "beam.widht", "did you mean 'width'"),
        ('"PZT-5A"', '"PZT-5Q"', "beam.piezo.material", "unknown piezo material"),
        ('"brass-c26000"', '"PZT-5A"', "beam.substrate.material", "unknown substrate"),
        ('gap = "8 mm"', 'gap = "0 mm"', "fixed_magnet.gap", "overlap"),
        ('gap = "8 mm"', 'gap = "-3 mm"', "fixed_magnet.gap", "overlap"),
        ("count = 30", "count = 1000000000", "study.frequencies.count", "limit of 2000"),
        ("damping_ratio = 0.012", "damping_ratio = 1.5", "losses.damping_ratio", "between 0"),
        ('amplitude = "0.3 g"', 'amplitude = "0.3 Hz"', "excitation.tone.amplitude",
         "not an acceleration"),
        ('resistance = "matched"', 'resistance = "best"', "load.resistance", "resistance"),
    ],
)
def test_errors_name_file_key_and_expectation(tmp_path, old, new, key, words):
    message = _error(_variant(tmp_path, old, new))
    assert "variant.toml" in message
    assert key in message
    assert words in message


def test_malformed_toml_and_missing_file(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text("[beam\nlength = ", encoding="utf-8")
    assert "malformed TOML" in _error(bad)
    assert "not found" in _error(tmp_path / "absent.toml")


def test_two_excitations_and_missing_sections(tmp_path):
    both = _variant(tmp_path, 'tone = { frequency = "24.6 Hz", amplitude = "0.3 g" }',
                    'tone = { frequency = "24.6 Hz", amplitude = "0.3 g" }\n'
                    'band = { low = "5 Hz", high = "50 Hz", rms = "0.1 g" }')
    assert "exactly one of tone, band, psd, record" in _error(both)
    path = tmp_path / "bare.toml"
    path.write_text('title = "x"\n', encoding="utf-8")
    assert "missing section" in _error(path)


def test_reduced_case_with_coil(tmp_path):
    text = """
[reduced]
mass = "5 g"
stiffness = ["-40 N/m", "4e6 N/m^3"]
damping = "0.01 N*s/m"
linear_stiffness = "160 N/m"
coil = { flux_linkage = "1.5 V*s/m", resistance = "300 ohm", inductance = "0 H" }
[load]
resistance = "500 ohm"
"""
    case = parse_case(text, tmp_path / "reduced.toml").case
    assert case.reduced.stiffness == (-40.0, 4e6)
    assert case.reduced.coil.inductance == 0.0
    assert case.load.resistance == 500.0


REDUCED_TABLE = """
[reduced]
mass = "5 g"
stiffness = {{ {terms} }}
damping = "0.01 N*s/m"
"""


def test_reduced_stiffness_table_keyed_by_power(tmp_path):
    # unit conversions as above (pint): 2 N/mm² = 2e6 N/m², 30 mN = 0.03 N
    terms = 'x0 = "30 mN", x1 = "-40 N/m", x2 = "2 N/mm^2", x3 = "4e6 N/m^3"'
    case = parse_case(REDUCED_TABLE.format(terms=terms), tmp_path / "table.toml").case
    assert case.reduced.odd_stiffness == pytest.approx((-40.0, 4e6))
    assert case.reduced.even_stiffness == pytest.approx((0.03, 2e6))
    model = build(parse_case(REDUCED_TABLE.format(terms=terms), tmp_path / "table.toml")).model
    assert model.stiffness == pytest.approx((-40.0, 4e6))
    assert model.even_stiffness == pytest.approx((0.03, 2e6))
    assert not model.is_symmetric
    # the list form is the odd series, as before
    odd = parse_case(REDUCED_TABLE.format(terms='x1 = "-40 N/m", x3 = "4e6 N/m^3"'),
                     tmp_path / "odd.toml").case
    assert odd.reduced.odd_stiffness == (-40.0, 4e6) and odd.reduced.even_stiffness == ()


@pytest.mark.parametrize("terms, words", [
    ('x1 = "-40 N/m", x2 = "2e3 N/m^3", x3 = "4e6 N/m^3"', "x2 = '2e3 N/m^3'"),
    ('x1 = "-40 N/m", x2 = "2e3", x3 = "4e6 N/m^3"', "N/m^2"),
    ('x0 = "3 kg", x3 = "4e6 N/m^3"', "x0 = '3 kg'"),
    ('x1 = "-40 N/m", x3 = "4e6 N/m"', "x3"),
    ('x1 = "-40 N/m", y3 = "4e6 N/m^3"', "'y3'"),
    ('x1 = "-40 N/m", x12 = "4e6 N/m^12"', "x0 … x9"),
    ('x1 = "-40 N/m", x4 = "2e3 N/m^4"', "highest power, x4"),
    ('x1 = "-40 N/m", x3 = "-4e6 N/m^3"', "highest power, x3"),
])
def test_reduced_stiffness_table_errors_name_the_term(tmp_path, terms, words):
    message = _error_text(tmp_path, REDUCED_TABLE.format(terms=terms))
    assert "reduced" in message and "stiffness" in message
    assert words in message


REDUCED = REDUCED_TABLE.format(terms='x1 = "-40 N/m", x3 = "4e6 N/m^3"')


def test_environment_mounting_and_tolerances_in_si(tmp_path):
    # pint: 60 °C = 333.15 K; "1.5 %" = 0.015; "1 g" along an acceleration = 9.80665 m/s²
    text = REDUCED + """
[environment]
temperature = { min = "-20 degC", max = "60 degC" }
[mounting]
gravity = "-1 g"
[tolerances]
"fixed_magnet.gap" = { sd = "0.1 mm" }
"beam.length" = { uniform = "1.5 %" }
"environment.temperature" = { sd = "3 K" }
"""
    case = parse_case(text, tmp_path / "env.toml").case
    assert case.environment.range_K == pytest.approx((253.15, 333.15))
    assert case.environment.nominal_K == pytest.approx(293.15)
    assert case.mounting.gravity == pytest.approx(-STANDARD_GRAVITY)
    gap, length, temperature = case.tolerances
    assert (gap.path, gap.distribution, gap.width_SI, gap.relative) == (
        "fixed_magnet.gap", "normal", pytest.approx(1e-4), False)
    assert (length.distribution, length.width_SI, length.relative) == (
        "uniform", pytest.approx(0.015), True)
    assert temperature.width_SI == pytest.approx(3.0) and temperature.unit_SI == "K"


@pytest.mark.parametrize("section, words", [
    ('[environment]\ntemperature = "60"', "no unit"),
    ('[environment]\ntemperature = "-300 degC"', "outside"),
    ('[environment]\ntemperature = { min = "70 degC", max = "-20 degC" }', "above"),
    ('[environment]\ntemperature = { low = "0 degC", max = "20 degC" }', "range"),
    ('[mounting]\ngravity = "1 mm"', "acceleration"),
    ('[tolerances]\n"beam.lenght" = { sd = "1 mm" }', "'beam.lenght'"),
    ('[tolerances]\n"beam.length" = { sd = "1 kg" }', "not a length"),
    ('[tolerances]\n"beam.length" = { spread = "1 mm" }', "uniform"),
    ('[tolerances]\n"beam.length" = { sd = "-1 mm" }', "≥ 0"),
    ('[tolerances]\n"fixed_magnet.offset" = { sd = "5 %" }', "percentage"),
    ('[tolerances]\n"environment.temperature" = { sd = "3 degC" }', "difference in K"),
])
def test_environment_mounting_and_tolerance_errors(tmp_path, section, words):
    message = _error_text(tmp_path, REDUCED + section + "\n")
    assert words in message, message


def _error_text(tmp_path, text: str) -> str:
    path = tmp_path / "bad-table.toml"
    path.write_text(text, encoding="utf-8")
    return _error(path)


def test_missing_data_file_is_named(tmp_path):
    tone = 'tone = { frequency = "24.6 Hz", amplitude = "0.3 g" }'
    psd = 'psd = { file = "site.csv", psd_unit = "g^2/Hz" }'
    text = DEMO.read_text(encoding="utf-8").replace(tone, psd)
    with pytest.raises(CaseError, match=r"excitation\.psd\.file.*site\.csv"):
        parse_case(text, tmp_path / "psd.toml")


# --- junk never gives a traceback -------------------------------------------------------------
toml_scalars = st.one_of(
    st.integers(), st.floats(allow_nan=True, allow_infinity=True), st.booleans(),
    st.text(max_size=20), st.sampled_from(["12 mm", "nan mm", "1e400 mm", "0.3 g", "-1 mm",
                                           "3 kohm", "matched", "12 g", "1 N/m^3"]),
)
section_names = st.sampled_from(["beam", "tip_magnet", "fixed_magnet", "losses", "load",
                                 "excitation", "reduced", "study", "limits", "bogus"])
key_names = st.sampled_from(["length", "width", "substrate", "piezo", "coil", "material",
                             "block", "disc", "gap", "damping_ratio", "resistance", "tone",
                             "mass", "stiffness", "damping", "gaps", "frequencies", "travel",
                             "thickness", "x"])


def _toml_value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        return repr(value)
    return '"' + value.replace("\\", "\\\\").replace('"', '\\"').replace("\n", "\\n") + '"'


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.dictionaries(section_names, st.dictionaries(key_names, toml_scalars, max_size=5),
                       max_size=6))
def test_random_structured_junk_only_raises_case_error(tmp_path_factory, data):
    lines = []
    for section, entries in data.items():
        lines.append(f"[{section}]")
        lines += [f"{k} = {_toml_value(v)}" for k, v in entries.items()]
    path = tmp_path_factory.mktemp("junk") / "junk.toml"
    try:
        parse_case("\n".join(lines), path)
    except CaseError as exc:
        assert "\n" not in str(exc)


@settings(max_examples=150, deadline=None)
@given(st.text(max_size=300))
def test_random_text_only_raises_case_error(tmp_path_factory, text):
    path = tmp_path_factory.mktemp("junk") / "junk.toml"
    try:
        parse_case(text, path)
    except CaseError:
        pass


@settings(max_examples=60, deadline=None)
@given(st.text(max_size=40))
def test_random_value_in_demo_case_only_raises_case_error(tmp_path_factory, junk):
    text = DEMO.read_text(encoding="utf-8").replace('"60 mm"', _toml_value(junk), 1)
    try:
        parse_case(text, tmp_path_factory.mktemp("junk") / "case.toml")
    except CaseError:
        pass
