"""Temperature: the magnets' remanence at the service temperature, its range and its limits.

References used here:
- B_r(T) = B_r(20 °C)(1 + α (T − 20 °C)), the reversible change that magnet makers quote about
  20 °C (common practice from makers' data; Furlani 2001, *Permanent Magnet and
  Electromechanical Devices*, ch. 2, memory): a case at a temperature must give exactly the
  answer of the same case with the remanence overridden to B_r(T).
- NdFeB N grades: α ≈ −0.09 … −0.12 %/K and a maximum operating temperature of 80 °C (common
  practice from makers' data).
"""

from __future__ import annotations

import json
from dataclasses import replace
from pathlib import Path

import pytest

from harvester.build import REFERENCE_TEMPERATURE_K, build, remanence_at
from harvester.case.load import parse_case
from harvester.commands.compare import GapTask, evaluate_gap
from harvester.commands.records import json_value
from harvester.commands.statics import wells_result
from harvester.materials import find_material

CASE = """
[beam]
length = "45 mm"
width = "10 mm"
substrate = {{ material = "spring-steel-1095", thickness = "0.25 mm" }}
coil = {{ flux_linkage = "3 V*s/m", resistance = "680 ohm", inductance = "25 mH" }}

[tip_magnet]
material = "NdFeB-N42"
disc = {{ diameter = "8 mm", length = "4 mm" }}
{tip_remanence}

[fixed_magnet]
material = "NdFeB-N35"
disc = {{ diameter = "8 mm", length = "4 mm" }}
gap = "{gap}"
{fixed_remanence}

[losses]
damping_ratio = 0.01

[load]
resistance = "750 ohm"

[excitation]
tone = {{ frequency = "10 Hz", amplitude = "0.4 g" }}
{environment}
"""


def loaded(path: Path, *, gap="9.75 mm", environment="", tip="", fixed=""):
    text = CASE.format(gap=gap, environment=environment, tip_remanence=tip,
                       fixed_remanence=fixed)
    path.write_text(text)
    return parse_case(text, path)


@pytest.mark.parametrize("grade", ["NdFeB-N35", "NdFeB-N42", "NdFeB-N52"])
def test_magnet_materials_carry_their_temperature_data(grade):
    # common practice from makers' data: −0.09 … −0.13 %/K for N grades, 80 °C maximum
    magnet = find_material(grade, "magnet")
    assert -0.0013 <= magnet.get("remanence_temperature_coefficient") <= -0.0009
    assert magnet.get("max_operating_temperature") == pytest.approx(273.15 + 80.0)
    assert "remanence_temperature_coefficient" in magnet.sources


@pytest.mark.parametrize("celsius", [60.0, -20.0])
def test_wells_at_a_temperature_is_the_case_with_the_remanence_of_that_temperature(
        tmp_path, celsius):
    # the same answer, key for key, as the remanence overridden to B_r(T) at 20 °C
    hot = loaded(tmp_path / "hot.toml", environment=f'[environment]\ntemperature = '
                                                     f'"{celsius} degC"')
    kelvin = hot.case.environment.nominal_K
    overrides = []
    for grade in ("NdFeB-N42", "NdFeB-N35"):
        material = find_material(grade, "magnet")
        br = remanence_at(material.get("remanence"),
                          material.get("remanence_temperature_coefficient"), kelvin)
        assert br == pytest.approx(material.get("remanence") * (
            1 + material.get("remanence_temperature_coefficient") * (celsius - 20.0)),
            rel=1e-12)
        overrides.append(f'remanence = "{br!r} T"')
    measured = loaded(tmp_path / "measured.toml", tip=overrides[0], fixed=overrides[1])
    assert measured.case.environment.nominal_K == REFERENCE_TEMPERATURE_K
    at_temperature = json_value(wells_result(hot))
    as_overridden = json_value(wells_result(measured))
    assert at_temperature == as_overridden
    cold = json_value(wells_result(loaded(tmp_path / "room.toml")))
    assert (cold["barrier_J"] > at_temperature["barrier_J"]) == (celsius > 20.0)


def test_a_temperature_range_is_evaluated_in_its_middle(tmp_path):
    ranged = loaded(tmp_path / "range.toml", environment='[environment]\ntemperature = '
                                                         '{ min = "-20 degC", max = "60 degC" }')
    middle = loaded(tmp_path / "middle.toml", environment='[environment]\ntemperature = '
                                                          '"20 degC"')
    assert json_value(wells_result(ranged)) == json_value(wells_result(middle))


def test_above_the_maximum_operating_temperature_warns(tmp_path):
    hot = loaded(tmp_path / "hot.toml", environment='[environment]\ntemperature = '
                                                    '{ min = "20 degC", max = "95 degC" }')
    warnings = wells_result(hot).warnings
    assert sum("maximum operating temperature" in w for w in warnings) == 2
    room = loaded(tmp_path / "room.toml")
    assert not any("maximum operating temperature" in w for w in wells_result(room).warnings)


def test_compare_flags_a_gap_that_changes_regime_inside_the_range(tmp_path):
    # a gap just inside the critical gap at 20 °C: bistable when cold (stronger magnets),
    # monostable when hot; a gap well inside stays bistable at both ends
    room = loaded(tmp_path / "room.toml")
    critical = build(room, magnet_model="dipole").critical_gap_m
    environment = '[environment]\ntemperature = { min = "-30 degC", max = "70 degC" }'
    case = loaded(tmp_path / "range.toml", environment=environment)
    edge = evaluate_gap(GapTask(case_path=str(case.path), gap_m=critical * 0.995,
                                magnet_model="dipole", hop_map=False, tone_starts=8))
    assert edge.regimes_at_ends == ("bistable", "monostable")
    assert edge.regime_changes_in_range
    assert edge.barriers_at_ends_J[0] > 0.0 == edge.barriers_at_ends_J[1]
    assert any("regime changes inside" in w for w in edge.warnings)
    assert [t - 273.15 for t in edge.temperatures_at_ends_K] == pytest.approx([-30.0, 70.0])
    deep = evaluate_gap(GapTask(case_path=str(case.path), gap_m=critical * 0.8,
                                magnet_model="dipole", hop_map=False, tone_starts=8))
    assert deep.regimes_at_ends == ("bistable", "bistable") and not deep.regime_changes_in_range
    assert deep.barriers_at_ends_J[0] > deep.barriers_at_ends_J[1]
    json.dumps(json_value(edge))  # the row stays JSON
    from harvester.report.design_note import _temperature_table

    (table,) = _temperature_table([edge, deep])  # the note shows both ends and flags the edge
    assert [row[1:] for row in table.rows] == [
        [r.regimes_at_ends, r.barriers_at_ends_J, r.regime_changes_in_range]
        for r in (edge, deep)]
    assert f"{edge.gap_m * 1e3:.3g} mm (flagged)" in table.note
    assert _temperature_table([replace(deep, regimes_at_ends=())]) == []
