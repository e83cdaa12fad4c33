"""The command line: JSON contract, exit codes, one-line errors (run as a user would)."""

from __future__ import annotations

import json
import math
import subprocess
import sys
import tomllib
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
CASES = ROOT / "cases"
PIEZO = CASES / "pump-skid-piezo.toml"
COIL = CASES / "fan-housing-coil.toml"
MU0 = 4e-7 * math.pi


def run(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "harvester", *args], capture_output=True,
                          text=True, timeout=300, cwd=ROOT)


@pytest.mark.parametrize("case", [PIEZO, COIL])
def test_wells_json_contract(case):
    result = run("wells", str(case), "--format", "json")
    assert result.returncode == 0, result.stderr
    data = json.loads(result.stdout)
    for key in ("regime", "critical_gap_m", "wells_m", "barrier_J", "well_frequency_Hz",
                "linear_frequency_Hz", "effective_mass_kg", "k1_N_per_m", "k3_N_per_m3"):
        assert key in data, key
    assert data["regime"] in ("monostable", "bistable")
    # consistency with the closed forms of the double well (Kovacic & Brennan 2011, The Duffing
    # Equation, Wiley, ch. 1) for the fitted model: the regime follows the sign of k1, and
    # k1 < 0 exactly when the gap is below critical
    assert (data["k1_N_per_m"] < 0) == (data["regime"] == "bistable")
    assert (data["gap_m"] < data["critical_gap_m"]) == (data["regime"] == "bistable")


def test_gap_option_moves_across_the_critical_gap():
    wide = json.loads(run("wells", str(PIEZO), "--gap", "40 mm", "--format", "json").stdout)
    assert wide["regime"] == "monostable" and wide["barrier_J"] == 0.0
    narrow_gap = 0.5 * wide["critical_gap_m"]
    narrow = json.loads(run("wells", str(PIEZO), "--gap", f"{narrow_gap * 1e3:.4f} mm",
                            "--format", "json").stdout)
    assert narrow["regime"] == "bistable" and narrow["barrier_J"] > 0.0
    # barrier of k1 x²/2 + k3 x⁴/4 is k1²/(4 k3) when only two terms are fitted (Kovacic &
    # Brennan 2011, ch. 1)
    if len(narrow["stiffness_SI"]) == 2:
        assert narrow["barrier_J"] == pytest.approx(
            narrow["k1_N_per_m"] ** 2 / (4 * narrow["k3_N_per_m3"]), rel=1e-9)


def test_check_reports_design_and_derived_values():
    result = run("check", str(PIEZO), "--format", "json")
    assert result.returncode == 0, result.stderr
    data = json.loads(result.stdout)
    assert set(data) >= {"design", "derived", "wells", "data_files", "warnings"}
    # the design's keys carry their SI units, and its numbers have no float noise
    assert data["design"]["beam"]["length_m"] == 0.06
    assert data["design"]["study"]["gaps_m"][5] == 0.009
    assert data["design"]["load"] == {"resistance": "matched"}
    # the open-circuit frequency is above short circuit: ω_oc² = ω_sc² + θ²/(C m) (Erturk &
    # Inman 2009, Smart Mater. Struct. 18:025009)
    derived = data["derived"]
    assert derived["open_circuit_frequency_Hz"] > derived["short_circuit_frequency_Hz"]
    assert any("magnet" in w for w in data["warnings"])


@pytest.mark.parametrize("fmt", ["table", "csv"])
def test_table_and_csv_views(fmt):
    result = run("wells", str(COIL), "--format", fmt)
    assert result.returncode == 0, result.stderr
    # people read labels in display units; scripts read the JSON keys in SI
    assert ("critical gap" if fmt == "table" else "critical_gap_m,") in result.stdout


def test_bad_input_is_exit_2_with_one_line(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text(PIEZO.read_text(encoding="utf-8").replace('"0.1 mm"', '"0.1"'),
                   encoding="utf-8")
    result = run("wells", str(bad))
    assert result.returncode == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and "beam.substrate.thickness" in lines[0] and "Traceback" not in \
        result.stderr
    missing = run("wells", str(tmp_path / "nope.toml"))
    assert missing.returncode == 2 and "not found" in missing.stderr
    gap = run("wells", str(PIEZO), "--gap", "-1 mm")
    assert gap.returncode == 2 and "--gap" in gap.stderr


def test_materials_lists_every_source():
    result = run("materials", "--format", "json")
    assert result.returncode == 0
    rows = json.loads(result.stdout)["materials"]
    keys = {row["material"] for row in rows}
    assert {"pzt-5a", "pzt-5h", "brass-c26000", "phosphor-bronze-c51000", "spring-steel-1095",
            "stainless-301-full-hard", "aluminium-6061-t6", "beryllium-copper-c17200", "fr-4",
            "ndfeb-n35", "ndfeb-n42", "ndfeb-n52"} <= keys
    assert all(row["source"].strip() for row in rows)
    # plane-stress PZT-5A constants (Erturk & Inman 2011, App. E): 1/s11E = 61.0 GPa
    (pzt,) = [r for r in rows if r["material"] == "pzt-5a" and r["property"] == "compliance_s11E"]
    assert 1.0 / pzt["value_SI"] == pytest.approx(61.0e9, rel=2e-3)
    assert pzt["unit_SI"] == "m²/N" and pzt["unit_display"] == "10⁻¹² m²/N"
    assert pzt["value_display"] == pytest.approx(pzt["value_SI"] * 1e12, rel=1e-9)
    # a modulus in Pa beside its SI unit, shown in MPa (ASM handbook: 6061-T6, 68.9 GPa)
    (al,) = [r for r in rows if r["material"] == "aluminium-6061-t6"
             and r["property"] == "youngs_modulus"]
    assert (al["value_SI"], al["unit_SI"]) == (68.9e9, "Pa")
    assert (al["value_display"], al["unit_display"]) == (68900.0, "MPa")
    csv_rows = run("materials", "--format", "csv").stdout.splitlines()
    assert csv_rows[0].split(",")[:5] == ["material", "kind", "property", "value_SI", "unit_SI"]


DATA = ROOT / "tests" / "data"
PROTOTYPE = CASES / "prototype-test"


def test_hop_json_gives_the_melnikov_bound_of_the_canonical_double_well():
    # u'' + 0.25u' − u + u³ = γ cos τ in SI with unit scales: γ_M = 4δ cosh(πω/2)/(3√2 πω)
    # = 0.18825 (Guckenheimer & Holmes 1983, §4.5)
    result = run("hop", str(DATA / "unit-double-well.toml"), "--format", "json")
    assert result.returncode == 0, result.stderr
    (row,) = json.loads(result.stdout)["rows"]
    assert set(row) >= {"frequency_Hz", "melnikov_mps2", "onset_mps2", "certain_mps2"}
    assert row["melnikov_mps2"] == pytest.approx(0.18825, abs=5e-5)
    # the Melnikov criterion is necessary for hopping, so the numerical onset lies above it;
    # γ = 0.3 already gives chaotic hopping (common practice; harvester/METHODS.md §5)
    assert row["melnikov_mps2"] <= row["onset_mps2"] <= row["certain_mps2"] <= 0.3


def test_power_json_matches_the_white_noise_identity():
    # velocity-damped transducer under (nearly) white base acceleration of one-sided PSD G:
    # P = m G c_e/(4(c_m + c_e)) for any potential (Caughey 1963; Daqaq 2012, Nonlinear Dyn.
    # 69:1063; Halvorsen 2008, J. Microelectromech. Syst. 17:1061)
    result = run("power", str(DATA / "resistive-coil-band.toml"), "--format", "json",
                 "--seed", "3")
    assert result.returncode == 0, result.stderr
    data = json.loads(result.stdout)
    for key in ("mean_power_W", "ci95_W", "hop_rate_per_s", "rms_voltage_V", "linear_power_W",
                "orbits"):
        assert key in data, key
    g = 9.80665
    psd = g**2 / (300.0 - 0.5)
    c_e = 1.0**2 / 50.0
    exact = 0.01 * psd * c_e / (4 * (0.02 + c_e))
    low, high = data["ci95_W"]
    # the band stops at 300 Hz, well above the beam's response (≈ 14 Hz): 2 % allowance
    assert low * 0.98 <= exact <= high * 1.02
    assert data["hop_rate_per_s"] > 0.0
    # the fast estimate rides along, labelled approximate (Gaussian closure: Roberts & Spanos
    # 1990); for a velocity-damped transducer it obeys the same identity within 10 %
    assert "approximate" in data["fast_estimate_method"]
    assert max(b["mean_power_W"] for b in data["fast_estimate"]) == pytest.approx(
        exact, rel=0.10)
    assert {o["kind"] for o in data["orbits"]} <= {"intrawell", "interwell-periodic", "chaotic"}
    # the Kramers well-to-well rate (Hänggi, Talkner & Borkovec 1990, Rev. Mod. Phys. 62:251)
    # rides beside the counted rate with the regime it holds in; this barrier is low against
    # the noise (about 0.8 k_BT), so the note must say the formulas need ≳ 5 k_BT
    assert data["kramers_hop_rate_per_s"] > 0.0
    assert "k_BT" in data["kramers_note"] and "≳ 5" in data["kramers_note"]
    # the gain is over the magnet-free beam on the same sample paths
    assert data["gain_ratio"] == pytest.approx(data["mean_power_W"] / data["linear_power_W"],
                                               rel=1e-9)


def test_power_under_a_tone_reports_the_orbit_mix():
    result = run("power", str(PIEZO), "--format", "json", "--no-sweep")
    assert result.returncode == 0, result.stderr
    data = json.loads(result.stdout)
    shares = [o["share"] for o in data["orbits"]]
    assert sum(shares) == pytest.approx(1.0 - data["flagged_share"], abs=1e-9)
    # share-weighted mean of the attractors' powers (the orbit mix, harvester/METHODS.md §5)
    mixed = sum(o["share"] * o["mean_power_W"] for o in data["orbits"])
    assert data["mean_power_W"] == pytest.approx(mixed, rel=1e-9)
    assert data["ci95_W"][0] <= data["mean_power_W"] <= data["ci95_W"][1]
    # each of the n = 32 starts is one sample of the power: Student's interval (Student 1908,
    # Biometrika 6:1) with the sample variance Σ share (P − mean)² · n/(n − 1); t(0.975, 31) =
    # 2.0395 (statistical tables)
    n, mean = 32, data["mean_power_W"]
    variance = sum(o["share"] * (o["mean_power_W"] - mean) ** 2 for o in data["orbits"])
    half = 2.0395 * math.sqrt(variance * n / (n - 1) / n)
    assert data["ci95_W"][1] - mean == pytest.approx(half, rel=1e-3)
    assert "rule of three" in data["ci95_note"]
    assert {c["level"] for c in data["checks"]} <= {"pass", "warn", "fail"}
    # the ceramic stress takes the field of the predicted voltage, σ1 = c̄11 ε1 − ē31 E3 (IEEE
    # Std 176-1987), bounded by the open-circuit swing θ(x_max − x_min)/C_p (Erturk & Inman
    # 2009, Smart Mater. Struct. 18:025009)
    (ceramic,) = [c for c in data["checks"] if c["check"] == "ceramic tensile stress"]
    assert "E3" in ceramic["basis"] and "predicted" in ceramic["basis"]


def test_orbit_mix_table_names_wells_and_periods():
    # the table view shows the JSON's coded fields as words and whole periods, one row per orbit
    data = json.loads(run("power", str(PIEZO), "--format", "json", "--no-sweep").stdout)
    table = run("power", str(PIEZO), "--no-sweep").stdout
    mix = table[table.index("Orbit mix"):].splitlines()
    words = {1: "x > 0", -1: "x < 0", 0: "both"}
    for orbit in data["orbits"]:
        shown = "interwell" if orbit["kind"] == "interwell-periodic" else orbit["kind"]
        period = "—" if orbit["period"] is None else str(orbit["period"])
        assert any(shown in line and words[orbit["well"]] in line
                   and f"│ {period:>6} │" in line for line in mix), (orbit, mix)


def test_piped_gap_table_keeps_one_line_per_gap():
    # piped output has no width to fit: each candidate stays on one line with its regime and
    # its worst check, rather than being folded into an 80-column terminal's cells
    study = ROOT / "tests" / "data" / "small-study.toml"
    data = json.loads(run("compare", str(study), "--format", "json").stdout)
    table = run("compare", str(study)).stdout.splitlines()
    for row in data["rows"]:
        gap = "no magnet" if row["gap_m"] is None else f"{row['gap_m'] * 1e3:.3g}"
        assert any(gap in line and row["regime"] in line and row["worst_level"].upper() in line
                   for line in table), (gap, table)
    from harvester.report.columns import format_number

    # every missing onset is explained under the table, each candidate named once with its unit
    notes = next((line for line in table if line.startswith("† ")), "")
    for row in data["rows"]:
        if row["onset_mps2"] is None:
            name = ("no magnet" if row["gap_m"] is None
                    else f"{format_number(row['gap_m'], 3, 1e3)} mm")
            assert name + ":" in notes or name + "," in notes, (name, notes)
    assert "no magnet mm" not in notes


@pytest.mark.slow
@pytest.mark.parametrize("case", sorted(CASES.glob("*.toml")), ids=lambda p: p.stem)
def test_every_demo_case_writes_its_note(case, tmp_path):
    # the demos are the README's examples: each must run end to end (every gap, the hop map,
    # power, checks) and write its note with one table row per candidate: the magnet-free
    # beam, then each gap
    result = run("note", str(case), "--out", str(tmp_path), "--pdf")
    assert result.returncode == 0, result.stderr[-2000:]
    # printed as filed (A4, headless Chromium where installed): a few pages, not fifty
    if (tmp_path / "note.pdf").is_file():
        pypdf = pytest.importorskip("pypdf")
        assert len(pypdf.PdfReader(tmp_path / "note.pdf").pages) <= 12
    gaps = tomllib.loads(case.read_text(encoding="utf-8"))["study"]["gaps"]
    rows = json.loads((tmp_path / "table-1-candidate-gaps.json").read_text(encoding="utf-8"))
    assert len(rows["rows"]) == len(gaps) + 1
    assert rows["rows"][0]["regime"] == "magnet-free" and rows["rows"][0]["gap_m"] is None


def _numeric_keys(data, path=""):
    """Every key of a JSON document whose value is a number (or a list of numbers)."""
    if isinstance(data, dict):
        for key, value in data.items():
            numbers = isinstance(value, (int, float)) and not isinstance(value, bool)
            listed = isinstance(value, list) and value and all(
                isinstance(v, (int, float)) and not isinstance(v, bool) for v in value)
            if numbers or listed:
                yield key, f"{path}.{key}"
            else:
                yield from _numeric_keys(value, f"{path}.{key}")
    elif isinstance(data, list):
        for i, value in enumerate(data):
            yield from _numeric_keys(value, f"{path}[{i}]")


def _digits(data):
    if isinstance(data, dict):
        for value in data.values():
            yield from _digits(value)
    elif isinstance(data, list):
        for value in data:
            yield from _digits(value)
    elif isinstance(data, float):
        yield len(repr(data).split("e")[0].replace("-", "").replace(".", "").strip("0"))


@pytest.mark.parametrize("args", [
    ("check", str(PIEZO)), ("check", str(CASES / "pump-skid-psd.toml")),
    ("wells", str(COIL)), ("hop", str(DATA / "unit-double-well.toml")),
    ("power", str(DATA / "resistive-coil-band.toml")), ("materials",),
    ("power", str(DATA / "bridge-node.toml")),
    ("wells", str(DATA / "unequal-wells.toml")), ("check", str(DATA / "unequal-wells.toml")),
    ("trace", str(PROTOTYPE / "shaker-14Hz.csv"), "--case",
     str(PROTOTYPE / "conveyor-calibrated.toml")),
    ("calibrate", str(CASES / "oscillating-conveyor-coil.toml"), "--ringdown",
     str(PROTOTYPE / "ringdown.csv"), "--force-deflection",
     str(PROTOTYPE / "force-deflection.csv"), "--sweep", str(PROTOTYPE / "sweep.csv"),
     "--out", "{tmp}/calibrated.toml"),
    ("sweep", str(DATA / "unit-double-well.toml"), "--from", "0.1 Hz", "--to", "0.3 Hz"),
    ("sweep", str(DATA / "unit-double-well.toml"), "--over", "amplitude", "--to", "0.3 g"),
    ("basins", str(DATA / "unit-double-well.toml"), "--points", "20"),
    ("spread", str(DATA / "tolerant-tone.toml"), "--samples", "6", "--subsample", "1",
     "--magnet-model", "dipole"),
], ids=lambda a: "-".join(Path(x).stem if "/" in x else x.replace(" ", "") for x in a[:2] + a[2:4]))
def test_every_json_key_carries_its_unit(args, tmp_path):
    # the house convention: a numeric key ends in its SI unit (`barrier_J`, `gap_m`,
    # `k3_N_per_m3`) or says by name that it is dimensionless (`gain_ratio`, `share`); numbers
    # carry at most 12 significant digits (no float noise such as 0.009000000000000001)
    from harvester.commands.records import si_unit

    args = [a.replace("{tmp}", str(tmp_path)) for a in args]
    result = run(*args, "--format", "json")
    assert result.returncode == 0, result.stderr
    data = json.loads(result.stdout)
    missing = sorted({path for key, path in _numeric_keys(data) if si_unit(key) is None})
    assert not missing, missing
    assert max(_digits(data), default=0) <= 12


def test_version_and_help_read_plainly():
    from harvester import __version__

    version = run("--version")
    assert version.returncode == 0 and version.stdout.strip() == f"harvester {__version__}"
    for command in ("check", "wells", "hop", "power", "compare", "spread", "note", "materials",
                    "trace", "calibrate", "sweep", "basins"):
        text = run(command, "--help").stdout
        assert "Example:" in text, command
        for internal in ("<bool>", "{case}", "{CASE}", " .gap", "the case's .frequencies"):
            assert internal not in text, (command, internal)


def test_check_reads_every_data_file(tmp_path):
    # a PSD file that check does not read would pass check and fail later: check reads it,
    # summarises it, and a broken one is bad input (exit 2, one line)
    data = json.loads(run("check", str(CASES / "pump-skid-psd.toml"), "--format",
                          "json").stdout)
    (psd,) = data["data_files"]
    assert psd["content"] == "psd" and psd["rows_count"] > 2 and psd["rms_mps2"] > 0
    case = tmp_path / "case.toml"
    case.write_text((CASES / "pump-skid-psd.toml").read_text(encoding="utf-8"),
                    encoding="utf-8")
    (tmp_path / "pump-skid-psd.csv").write_text("frequency,psd\n1,0.1\n2,-0.1\n3,0.1\n",
                                                encoding="utf-8")
    broken = run("check", str(case))
    assert broken.returncode == 2 and "Traceback" not in broken.stderr
    assert len(broken.stderr.strip().splitlines()) == 1 and "pump-skid-psd.csv" in broken.stderr


def test_wells_reports_both_wells_of_an_unequal_double_well():
    # F = k1 x + k2 x² + k3 x³: wells at the roots of k3 x² + k2 x + k1 = 0, saddle at 0,
    # barriers U(0) − U(x_w) with U = k1x²/2 + k2x³/3 + k3x⁴/4 (the quadratic formula and the
    # potential of the force: Kovacic & Brennan 2011, The Duffing Equation, ch. 1, for the form)
    data = json.loads(run("wells", str(DATA / "unequal-wells.toml"), "--format", "json").stdout)
    k1, k2, k3 = -40.0, 2e3, 4e6
    root = math.sqrt(k2**2 - 4 * k3 * k1)
    left, right = (-k2 - root) / (2 * k3), (-k2 + root) / (2 * k3)

    def u(x):
        return k1 * x**2 / 2 + k2 * x**3 / 3 + k3 * x**4 / 4

    assert data["wells_m"] == pytest.approx([left, right], rel=1e-9)
    assert data["saddle_m"] == pytest.approx(0.0, abs=1e-12)
    assert data["barriers_J"] == pytest.approx([-u(left), -u(right)], rel=1e-9)
    assert data["barrier_J"] == pytest.approx(min(-u(left), -u(right)), rel=1e-9)
    assert data["force_coefficients_SI"][:4] == pytest.approx([0.0, k1, k2, k3], abs=1e-9)
    # each well's small-oscillation frequency √(F'(x_w)/m)/(2π)
    for x, f in zip((left, right), data["well_frequencies_Hz"]):
        assert f == pytest.approx(math.sqrt((k1 + 2 * k2 * x + 3 * k3 * x**2) / 0.01)
                                  / (2 * math.pi), rel=1e-9)


def test_spread_prints_its_tables_and_refuses_a_case_without_tolerances():
    case = str(DATA / "tolerant-tone.toml")
    table = run("spread", case, "--samples", "5", "--statics", "--magnet-model", "dipole")
    assert table.returncode == 0, table.stderr
    assert "What to tighten" in table.stdout and "stay bistable" in table.stdout
    csv = run("spread", case, "--samples", "5", "--statics", "--format", "csv")
    assert csv.returncode == 0, csv.stderr
    assert csv.stdout.splitlines()[0].startswith("quantity,unit_SI,nominal_SI,mean_SI")
    bad = run("spread", str(DATA / "small-study.toml"), "--samples", "5")
    assert bad.returncode == 2
    assert bad.stderr.count("\n") == 1 and "no [tolerances]" in bad.stderr
