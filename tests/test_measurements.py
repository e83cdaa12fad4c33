"""Test records of a prototype: SI conversion by header or argument, and every bad record named
in one line (a CaseError, exit 2 at the command line)."""

from pathlib import Path

import numpy as np
import pytest

from harvester.case.measurements import (
    read_force_deflection,
    read_response_record,
    read_ringdown,
)
from harvester.errors import CaseError

G_N = 9.80665  # standard gravity [m/s²], by definition (3rd CGPM, 1901)


def write(tmp_path: Path, name: str, header: str | None, columns: list[np.ndarray]) -> Path:
    rows = [",".join(f"{float(v)!r}" for v in row) for row in zip(*columns)]
    path = tmp_path / name
    path.write_text("\n".join(([header] if header else []) + rows) + "\n", encoding="utf-8")
    return path


def shaker(n: int = 2000, fs: float = 1000.0):
    t = np.arange(n) / fs
    return t, 0.3 * np.cos(2 * np.pi * 25.0 * t), 2.0 * np.sin(2 * np.pi * 25.0 * t + 0.4)


def one_line(exc: pytest.ExceptionInfo, *words: str) -> None:
    text = str(exc.value)
    assert "\n" not in text
    for word in words:
        assert word in text, (word, text)


def test_header_names_columns_and_units(tmp_path):
    # 1 g = 9.80665 m/s² (3rd CGPM, 1901); 1 mm = 1e-3 m; 1 ms = 1e-3 s
    t, a, x = shaker()
    path = write(tmp_path, "run.csv", "time [ms], base acceleration [g], tip_displacement (mm), "
                 "voltage [V]", [1e3 * t, a, x, 0.5 * x])
    record = read_response_record(path, load_ohm=47e3)
    assert record.sample_rate_Hz == pytest.approx(1000.0, rel=1e-9)
    np.testing.assert_allclose(record.base_acceleration_mps2, a * G_N, rtol=1e-12)
    np.testing.assert_allclose(record.tip_displacement_m, x * 1e-3, rtol=1e-12)
    np.testing.assert_allclose(record.voltage_V, 0.5 * x, rtol=1e-12)
    assert record.tip_velocity_mps is None and record.load_ohm == 47e3
    assert record.warnings == ()
    short = write(tmp_path, "short-names.csv", "t_s, accel_m/s^2, x_um", [t, a, x])
    record = read_response_record(short)
    np.testing.assert_allclose(record.base_acceleration_mps2, a, rtol=1e-12)
    np.testing.assert_allclose(record.tip_displacement_m, x * 1e-6, rtol=1e-12)


def test_units_and_columns_as_arguments(tmp_path):
    t, a, x = shaker()
    bare = write(tmp_path, "bare.csv", None, [t, a, x])
    record = read_response_record(bare, columns=["time", "acceleration", "velocity"],
                                  units={"base_acceleration": "g", "tip_velocity": "mm/s"})
    np.testing.assert_allclose(record.tip_velocity_mps, x * 1e-3, rtol=1e-12)
    np.testing.assert_allclose(record.base_acceleration_mps2, a * G_N, rtol=1e-12)
    half = write(tmp_path, "half.csv", "time [s], base_acceleration, tip_displacement [mm]",
                 [t, a, x])
    record = read_response_record(half, units={"base_acceleration": "m/s^2"})
    np.testing.assert_allclose(record.base_acceleration_mps2, a, rtol=1e-12)


@pytest.mark.parametrize("header, kwargs, words", [
    ("time [s], base_acceleration, tip_displacement [mm]", {}, ["column 2", "no unit"]),
    ("time [s], base_acceleration [g], tip_speed [mm/s]", {}, ["column 3", "tip_speed"]),
    ("time [s], base_acceleration [g], voltage [V]", {}, ["load resistance"]),
    ("time [s], tip_displacement [mm], voltage [V]", {"load_ohm": 1e3},
     ["no base_acceleration"]),
    ("time [s], base_acceleration [g], tip_displacement [mm]",
     {"units": {"tip_displacement": "m"}}, ["column 3", "'mm'", "'m'"]),
    ("time [s], base_acceleration [g], tip_displacement [kg]", {}, ["unit 'kg'", "length"]),
    (None, {}, ["no header row"]),
])
def test_column_errors_name_the_column(tmp_path, header, kwargs, words):
    t, a, x = shaker()
    path = write(tmp_path, "bad.csv", header, [t, a, x])
    with pytest.raises(CaseError) as exc:
        read_response_record(path, **kwargs)
    one_line(exc, "bad.csv", *words)


HEADER = "time [s], base_acceleration [g], tip_displacement [mm]"


def test_bad_records_are_rejected_with_the_row(tmp_path):
    t, a, x = shaker()
    backwards = t.copy()
    backwards[700] = backwards[698]
    with pytest.raises(CaseError) as exc:
        read_response_record(write(tmp_path, "back.csv", HEADER, [backwards, a, x]))
    one_line(exc, "back.csv", "row 702", "does not increase")
    with pytest.raises(CaseError) as exc:
        read_response_record(write(tmp_path, "short.csv", HEADER, [t[:100], a[:100], x[:100]]))
    one_line(exc, "short.csv", "100 samples", "at least 256")
    holed = x.copy()
    holed[50] = np.nan
    with pytest.raises(CaseError) as exc:
        read_response_record(write(tmp_path, "nan.csv", HEADER, [t, a, holed]))
    one_line(exc, "nan.csv", "row 52", "not a number")
    # flat tops: the displacement sensor saturated at 1.8 mm on every swing (about 17 % of the
    # samples sit in runs at the extreme value)
    clipped = np.clip(x, -2.5, 1.8)
    with pytest.raises(CaseError) as exc:
        read_response_record(write(tmp_path, "clip.csv", HEADER, [t, a, clipped]))
    one_line(exc, "clip.csv", "tip displacement", "clipped", "1.8")


def test_ringdown_and_force_table_readers(tmp_path):
    t = np.arange(500) / 1000.0
    decay = np.exp(-3 * t) * np.cos(2 * np.pi * 20 * t)
    ring = read_ringdown(write(tmp_path, "ring.csv", "time [s], voltage [mV]", [t, decay]))
    assert ring.quantity == "voltage"
    np.testing.assert_allclose(ring.response, decay * 1e-3, rtol=1e-12)
    with pytest.raises(CaseError) as exc:
        read_ringdown(write(tmp_path, "two.csv", "time [s], voltage [V], x [mm]",
                            [t, decay, decay]))
    one_line(exc, "two.csv", "expected one of")
    x = np.linspace(-5, 5, 11)
    table = read_force_deflection(write(tmp_path, "fd.csv", "x [mm], force [mN]", [x, x**3]))
    np.testing.assert_allclose(table.deflection_m, x * 1e-3, rtol=1e-12)
    np.testing.assert_allclose(table.force_N, x**3 * 1e-3, rtol=1e-12)
    bare = read_force_deflection(write(tmp_path, "bare.csv", None, [x, x]),
                                 units={"deflection": "mm", "force": "N"})
    np.testing.assert_allclose(bare.force_N, x, rtol=1e-12)
    with pytest.raises(CaseError) as exc:
        read_force_deflection(write(tmp_path, "few.csv", "x [mm], force [mN]", [x[:5], x[:5]]))
    one_line(exc, "few.csv", "5 row(s)", "at least 8")
