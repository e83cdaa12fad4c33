"""`harvester trace` and `harvester calibrate` as a user runs them: the JSON contract, the trace
note, bad records (exit 2 with one line), and the calibrated case through the other commands."""

from __future__ import annotations

import importlib.util
import json
import math
import re
import subprocess
import sys
import tomllib
from pathlib import Path

import numpy as np
import pytest
from test_measured import UNIT_FREQUENCY, synthesise, unit_double_well

from harvester.analysis.calibration import Tolerance, tolerance_text
from harvester.case.load import parse_case

ROOT = Path(__file__).resolve().parent.parent
CASES = ROOT / "cases"
PROTOTYPE = CASES / "prototype-test"
CONVEYOR = CASES / "oscillating-conveyor-coil.toml"
UNIT_WELL = ROOT / "tests" / "data" / "unit-double-well.toml"
TWINS = ("forcing_frequency_Hz", "forcing_amplitude_mps2", "hop_rate_per_s", "orbit",
         "correlation_dimension", "lyapunov_per_s", "mean_power_W")


def run(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "harvester", *args], capture_output=True,
                          text=True, timeout=300, cwd=ROOT)


def write_record(path: Path, time_s, acceleration_mps2, displacement_m) -> Path:
    rows = "\n".join(f"{t:.9g},{a:.9g},{x:.9g}"
                     for t, a, x in zip(time_s, acceleration_mps2, displacement_m))
    path.write_text("time [s], base_acceleration [m/s^2], tip_displacement [m]\n" + rows + "\n",
                    encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def chaotic_record(tmp_path_factory) -> Path:
    """1200 periods of the canonical chaotic double well (δ = 0.25, γ = 0.30, ω = 1;
    Guckenheimer & Holmes 1983, §2.2) with 0.1 % displacement noise, as a CSV."""
    record = synthesise(unit_double_well(0.25), 0.30, UNIT_FREQUENCY, 1200, per_period=16,
                        noise_m=0.001)
    return write_record(tmp_path_factory.mktemp("trace") / "chaotic.csv", record.time_s,
                        record.base_acceleration_mps2, record.tip_displacement_m)


# -- trace --------------------------------------------------------------------------------------
def test_trace_json_contract_and_note(chaotic_record, tmp_path):
    # The record is the model's own response, so the forcing found is the tone written (exact
    # up to the fit), the orbit is chaotic on both sides (the canonical double well at
    # γ = 0.30 is chaotic: Guckenheimer & Holmes 1983, §2.2) and the model agrees with it.
    out = tmp_path / "note"
    result = run("trace", str(chaotic_record), "--case", str(UNIT_WELL), "--format", "json",
                 "--out", str(out))
    assert result.returncode == 0, result.stderr
    data = json.loads(result.stdout)
    for key in TWINS:
        assert key in data and f"predicted_{key}" in data, key
    assert data["forcing_frequency_Hz"] == pytest.approx(UNIT_FREQUENCY, rel=1e-6)
    assert data["predicted_forcing_frequency_Hz"] == pytest.approx(UNIT_FREQUENCY, rel=1e-12)
    assert data["forcing_amplitude_mps2"] == pytest.approx(0.30, rel=1e-3)
    assert data["orbit"] == data["predicted_orbit"] == "chaotic"
    for name, unit in (("hop_rate", "per_s"), ("correlation", "dimension"),
                       ("lyapunov", "per_s"), ("forcing_amplitude", "mps2")):
        measured, predicted = data[f"{name}_{unit}"], data[f"predicted_{name}_{unit}"]
        assert data[f"{name}_difference_{unit}"] == pytest.approx(measured - predicted)
        low, high = data[f"{name}_ci95_{unit}"]
        assert low <= measured <= high
    # the section of a dissipative forced double well has a dimension between 1 and 2
    # (common practice; Grassberger & Procaccia 1983, Physica D 9:189)
    assert 1.0 < data["correlation_dimension"] < 2.0
    assert data["hop_rate_inside_interval"] and data["model_agrees"]
    assert data["mean_power_W"] is None and data["mean_power_inside_interval"] is None
    assert data["indicative"] == ["lyapunov_per_s"]
    assert data["hop_count"] > 0 and sum(data["well_time_share"]) == pytest.approx(1.0)
    assert data["section_points_count"] >= 1199  # one per forcing period in the record
    # the note: Markdown, HTML, its tables and the four figures, each an accessible SVG
    figures = sorted(out.glob("figure-*.svg"))
    assert [re.sub(r"figure-\d+-", "", f.stem) for f in figures] == [
        "time-history", "stroboscopic-sections", "correlation-sum",
        "time-in-a-well-between-hops"]
    for figure in figures:
        svg = figure.read_text(encoding="utf-8")
        assert svg.startswith("<svg") and "<title" in svg and "<desc" in svg
    html = (out / "note.html").read_text(encoding="utf-8")
    assert "Measured against predicted" in html and "Cautions" in html
    table = (out / "table-2-measured-against-predicted-si.csv").read_text(encoding="utf-8")
    assert table.splitlines()[0].startswith("key,measured_SI,predicted_SI")


def test_trace_table_and_csv(chaotic_record):
    table = run("trace", str(chaotic_record), "--case", str(UNIT_WELL))
    assert table.returncode == 0, table.stderr
    assert "measured (95 % CI)" in table.stdout and "the model agrees" in table.stdout
    csv = run("trace", str(chaotic_record), "--case", str(UNIT_WELL), "--format", "csv")
    lines = csv.stdout.splitlines()
    assert lines[0].startswith("key,measured_SI,predicted_SI") and len(lines) == 1 + len(TWINS)


def _tone_rows(n: int, per_period: int = 32, *, seed: int = 0):
    t = np.arange(n) / (per_period * UNIT_FREQUENCY)
    a = 0.3 * np.cos(t)
    x = np.sin(t + 0.3) + 1e-3 * np.random.default_rng(seed).standard_normal(n)
    return t, a, x


def _non_monotonic(path: Path) -> Path:
    t, a, x = _tone_rows(4096)
    t[2000], t[2001] = t[2001], t[2000]
    return write_record(path, t, a, x)


def _too_short(path: Path) -> Path:
    return write_record(path, *_tone_rows(40 * 32))  # 40 forcing periods


def _no_forcing_line(path: Path) -> Path:
    t, _, x = _tone_rows(4096)
    return write_record(path, t, np.random.default_rng(1).standard_normal(t.size), x)


def _clipped(path: Path) -> Path:
    t, a, x = _tone_rows(4096)
    return write_record(path, t, a, np.minimum(x, 0.8))


@pytest.mark.parametrize("make, words", [
    (_non_monotonic, "does not increase"),
    (_too_short, "too short"),
    (_no_forcing_line, "no forcing line"),
    (_clipped, "clipped"),
], ids=["non-monotonic-time", "too-short", "no-forcing-line", "clipped"])
def test_bad_records_exit_2_with_one_line(tmp_path, make, words):
    record = make(tmp_path / "bad.csv")
    result = run("trace", str(record), "--case", str(UNIT_WELL), "--format", "json")
    assert result.returncode == 2, result.stderr
    assert result.stdout == "" and "Traceback" not in result.stderr
    line, = result.stderr.strip().splitlines()
    assert "bad.csv" in line and words in line, line


def test_trace_options_are_checked(chaotic_record):
    for args, words in ((("--units", "speed=mm"), "names no column"),
                        (("--load", "12 mm"), "--load")):
        result = run("trace", str(chaotic_record), "--case", str(UNIT_WELL), *args)
        assert result.returncode == 2 and words in result.stderr, result.stderr
        assert len(result.stderr.strip().splitlines()) == 1


# -- calibrate ----------------------------------------------------------------------------------
def prototype_script():
    """cases/make_prototype_test.py, which synthesised the demo tests from known values."""
    spec = importlib.util.spec_from_file_location("make_prototype_test",
                                                  CASES / "make_prototype_test.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_calibrate_recovers_the_prototype_and_runs_through_wells(tmp_path):
    # The demo tests were synthesised from a known prototype (damping 1.3 × the design's,
    # remanence 0.96 × the material's, gap 0.10 mm wider: make_prototype_test.py) with sensor
    # noise: each calibrated value's 95 % interval holds the value the tests were made from
    # (intervals from Student's t on the decrement's slope, Thomson & Dahleh 1998 §2.6, and from
    # the Jacobian of the magnet fit, Björck 1996 §9.1).  The calibrated file is a case like
    # any other: `wells` reads it.
    out = tmp_path / "calibrated.toml"
    result = run("calibrate", str(CONVEYOR), "--ringdown", str(PROTOTYPE / "ringdown.csv"),
                 "--force-deflection", str(PROTOTYPE / "force-deflection.csv"), "--out",
                 str(out), "--format", "json")
    assert result.returncode == 0, result.stderr
    data = json.loads(result.stdout)
    script = prototype_script()
    design = tomllib.loads(CONVEYOR.read_text(encoding="utf-8"))
    changes = {c["key"]: c for c in data["changes"]}
    truth = {
        "losses.damping_ratio": script.DAMPING_SHARE * design["losses"]["damping_ratio"],
        "tip_magnet.remanence": script.REMANENCE_SHARE * changes["tip_magnet.remanence"][
            "previous_SI"],
        "fixed_magnet.gap": changes["fixed_magnet.gap"]["previous_SI"] + script.GAP_OFFSET_M,
    }
    for key, value in truth.items():
        low, high = changes[key]["ci95_SI"]
        assert low <= value <= high, (key, value, low, high)
    assert out.read_text(encoding="utf-8") == data["case_text"]
    assert data["tolerances_written_as"] == "table"  # the case schema has [tolerances]
    assert {t["key"] for t in data["tolerances"]} == {
        "losses.damping_ratio", "tip_magnet.remanence", "fixed_magnet.gap"}
    wells = run("wells", str(out), "--format", "json")
    assert wells.returncode == 0, wells.stderr
    assert json.loads(wells.stdout)["gap_m"] == pytest.approx(truth["fixed_magnet.gap"],
                                                              abs=2e-5)


@pytest.mark.slow
def test_calibrated_case_runs_through_compare_and_trace(tmp_path):
    out = tmp_path / "calibrated.toml"
    calibrate = run("calibrate", str(CONVEYOR), "--ringdown", str(PROTOTYPE / "ringdown.csv"),
                    "--force-deflection", str(PROTOTYPE / "force-deflection.csv"), "--out",
                    str(out))
    assert calibrate.returncode == 0, calibrate.stderr
    compare = run("compare", str(out), "--format", "json")
    assert compare.returncode == 0, compare.stderr
    assert "recommended_gap_m" in json.loads(compare.stdout)
    trace = run("trace", str(PROTOTYPE / "shaker-14Hz.csv"), "--case", str(out), "--format",
                "json")
    assert trace.returncode == 0, trace.stderr
    assert json.loads(trace.stdout)["load_ohm"] == pytest.approx(750.0)


REDUCED_CASE = '''title = "bench double well"

[reduced]
mass = "5 g"
stiffness = ["-30 N/m", "3e6 N/m^3"]
damping = "0.01 N*s/m"

[load]
resistance = "47 kohm"
'''


def test_calibrate_a_reduced_case_from_a_force_table(tmp_path):
    # F = k1 x + k3 x³ with 1 mN of noise, read back by least squares: each coefficient's
    # 95 % interval holds the value the table was made from (Björck 1996, Numerical Methods
    # for Least Squares Problems, §1.1; one table, so this holds in 95 % of tables: the seed is
    # fixed), and the case's stiffness list is replaced by the fit's odd terms.
    case = tmp_path / "bench.toml"
    case.write_text(REDUCED_CASE, encoding="utf-8")
    x = np.linspace(-6e-3, 6e-3, 41)
    force = -40.0 * x + 4e6 * x**3 + 1e-3 * np.random.default_rng(3).standard_normal(x.size)
    table = tmp_path / "fd.csv"
    table.write_text("deflection [mm], force [N]\n" + "\n".join(
        f"{1e3 * a:.6g},{b:.9g}" for a, b in zip(x, force)) + "\n", encoding="utf-8")
    result = run("calibrate", str(case), "--force-deflection", str(table), "--format", "json")
    assert result.returncode == 0, result.stderr
    data = json.loads(result.stdout)
    changes = {c["key"]: c for c in data["changes"]}
    for key, value in (("reduced.stiffness[0]", -40.0), ("reduced.stiffness[1]", 4e6)):
        low, high = changes[key]["ci95_SI"]
        assert low <= value <= high
    assert changes["reduced.stiffness[0]"]["previous_SI"] == -30.0
    assert data["out_file"] == str(tmp_path / "bench-calibrated.toml")
    written = parse_case((tmp_path / "bench-calibrated.toml").read_text(encoding="utf-8"),
                         case)
    assert written.case.reduced.stiffness[0] == pytest.approx(changes["reduced.stiffness[0]"][
        "value_SI"], rel=1e-4)
    nothing = run("calibrate", str(case))
    assert nothing.returncode == 2 and "--ringdown" in nothing.stderr


def test_tolerances_as_comments_or_as_a_table():
    # Without a [tolerances] schema the entries are comments that read as the table once
    # uncommented; a second calibration replaces them rather than adding another block.
    text = 'title = "t"\n\n[losses]\ndamping_ratio = 0.01\n'
    tolerances = [Tolerance("fixed_magnet.gap", 8.3e-6, 9.85e-3, "mm", "fit"),
                  Tolerance("losses.damping_ratio", 3.4e-5, 0.013, "%", "decay")]
    once = tolerance_text(text, tolerances, as_table=False)
    twice = tolerance_text(once, tolerances[:1], as_table=False)
    assert once.count("# [tolerances]") == twice.count("# [tolerances]") == 1
    assert '# "losses.damping_ratio" = { sd = "0.26 %" }' in once
    assert "damping_ratio" not in twice.split("# [tolerances]")[1]
    uncommented = "\n".join(line[2:].split("  #")[0] if line.startswith('# "') else
                            line.replace("# [tolerances]", "[tolerances] #")
                            for line in once.splitlines())
    table = tomllib.loads(uncommented)["tolerances"]
    assert table["fixed_magnet.gap"] == {"sd": "0.0083 mm"}
    as_table = tomllib.loads(tolerance_text(text, tolerances, as_table=True))
    assert as_table["tolerances"]["losses.damping_ratio"] == {"sd": "0.26 %"}
    assert math.isclose(as_table["losses"]["damping_ratio"], 0.01)


def test_random_record_reports_its_rms_and_no_section(tmp_path):
    # Gaussian white base acceleration of standard deviation σ = 0.15 g: the batch-means
    # interval of the mean square (Schmeiser 1982, Oper. Res. 30:556) holds σ² and so the RMS
    # interval holds σ (one seeded record); a random record has no section, so no dimension
    # and no exponent, and the forcing is compared with the case's planned band by its RMS.
    rng = np.random.default_rng(5)
    t = np.arange(40_000) / 1000.0
    sigma = 0.15 * 9.80665
    record = write_record(tmp_path / "random.csv", t, sigma * rng.standard_normal(t.size),
                          np.convolve(rng.standard_normal(t.size), np.ones(50) / 50, "same")
                          * 3e-3)
    result = run("trace", str(record), "--case", str(CASES / "fan-housing-coil.toml"),
                 "--load", "100 ohm", "--format", "json")
    assert result.returncode == 0, result.stderr
    data = json.loads(result.stdout)
    assert data["forcing_kind"] == "random" and data["forcing_frequency_Hz"] is None
    low, high = data["forcing_amplitude_ci95_mps2"]
    assert low <= sigma <= high
    assert data["correlation_dimension"] is None and data["lyapunov_per_s"] is None
    assert data["section_points_count"] == 0 and data["indicative"] == []


def test_calibrated_case_elsewhere_than_its_data_files_is_refused(tmp_path):
    # the PSD case names its data file relative to itself: written into another folder the
    # calibrated case would not find it, which is said in one line before anything is written
    out = tmp_path / "calibrated.toml"
    result = run("calibrate", str(CASES / "pump-skid-psd.toml"), "--ringdown",
                 str(PROTOTYPE / "ringdown.csv"), "--out", str(out))
    assert result.returncode == 2 and not out.exists()
    line, = result.stderr.strip().splitlines()
    assert "pump-skid-psd.csv" in line and "beside it" in line
