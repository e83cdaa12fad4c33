"""Excitation files and bands: SI conversion, and every kind of bad input named in one line."""

import math
import tempfile
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from harvester.case.load import parse_case
from harvester.case.signals import band_psd, random_excitation, read_psd_csv, read_record_csv
from harvester.case.spectra import psd_variance
from harvester.errors import CaseError

G_N = 9.80665  # standard gravity [m/s²], by definition (3rd CGPM, 1901)


def write(tmp_path: Path, name: str, lines: list[str]) -> Path:
    path = tmp_path / name
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def record_lines(t: np.ndarray, a: np.ndarray) -> list[str]:
    return ["time_s,accel_g"] + [f"{float(ti)!r},{float(ai)!r}" for ti, ai in zip(t, a)]


def sine_record(n: int = 2000, fs: float = 1000.0) -> tuple[np.ndarray, np.ndarray]:
    t = np.arange(n) / fs
    return t, 0.5 * np.sin(2 * np.pi * 31.0 * t) + 0.01 * np.cos(2 * np.pi * 97.0 * t)


def assert_one_line_naming(exc: pytest.ExceptionInfo, *words: str) -> None:
    text = str(exc.value)
    assert "\n" not in text
    for word in words:
        assert word in text, (word, text)


# -- bands -----------------------------------------------------------------------------------


def test_band_gives_the_flat_psd_of_its_rms():
    # flat one-sided PSD: σ² = G (f_high − f_low)
    assert psd_variance(band_psd(10.0, 110.0, 2.0)) == pytest.approx(4.0, rel=1e-12)


@pytest.mark.parametrize(
    "low, high, rms, word",
    [
        (50.0, 20.0, 1.0, "high"),
        (-1.0, 20.0, 1.0, "low"),
        (1.0, 20.0, 0.0, "rms"),
        (1.0, math.nan, 1.0, "high"),
    ],
)
def test_band_rejects_nonsense(low, high, rms, word):
    with pytest.raises(CaseError) as exc:
        band_psd(low, high, rms, file="site.toml")
    assert_one_line_naming(exc, "site.toml", "excitation.band", word)


# -- PSD tables ------------------------------------------------------------------------------


def test_psd_table_is_converted_from_g2_per_hz(tmp_path):
    # 1 g²/Hz = g_n² (m/s²)²/Hz with g_n = 9.80665 m/s² (3rd CGPM, 1901)
    path = write(
        tmp_path,
        "site.csv",
        ["# pump skid, invented", "f_Hz, G_g2Hz", "10, 0.01", "20; 0.02", "40\t0.02"],
    )
    psd = read_psd_csv(path, psd_unit="g^2/Hz")
    np.testing.assert_allclose(psd.frequency_Hz, [10.0, 20.0, 40.0])
    np.testing.assert_allclose(
        psd.psd_m2_s4_per_Hz, np.array([0.01, 0.02, 0.02]) * G_N**2, rtol=1e-12
    )
    si = read_psd_csv(path, psd_unit="(m/s^2)^2/Hz")
    assert si.psd_m2_s4_per_Hz[0] == pytest.approx(0.01, rel=1e-12)


def test_dense_estimate_is_integrated_linearly_and_a_profile_log_log(tmp_path):
    # A dense, evenly spaced table (an estimate) is read with straight lines between rows, so its
    # variance is the trapezoid rule over the rows (exact for a piecewise-linear G): a narrow
    # line is not under-counted by log-log segments.  A corner profile keeps log-log segments
    # (straight in dB/octave, common practice for random-vibration test profiles), whose area
    # for a −6 dB/octave segment G0 (f0/f)² is G0 f0 (1 − f0/f1).
    f = np.arange(0.0, 100.0, 0.25)
    g = 1e-4 + 0.05 * np.exp(-0.5 * ((f - 24.6) / 0.3) ** 2)
    dense = write(tmp_path, "dense.csv", [f"{a:g}, {b:.9g}" for a, b in zip(f, g)])
    psd = read_psd_csv(dense, psd_unit="(m/s^2)^2/Hz")
    assert psd.interpolation == "linear"
    trapezoid = float(np.sum(0.5 * (g[1:] + g[:-1]) * np.diff(f)))
    assert psd_variance(psd) == pytest.approx(trapezoid, rel=1e-9)
    corners = write(tmp_path, "profile.csv", ["10, 0.04", "20, 0.01"])
    profile = read_psd_csv(corners, psd_unit="(m/s^2)^2/Hz")
    assert profile.interpolation == "loglog"
    assert psd_variance(profile) == pytest.approx(0.04 * 10.0 * (1.0 - 10.0 / 20.0), rel=1e-9)
    forced = read_psd_csv(dense, psd_unit="(m/s^2)^2/Hz", interpolation="loglog")
    assert psd_variance(forced) < 0.98 * trapezoid  # the line under-counted


@pytest.mark.parametrize(
    "lines, words",
    [
        (["10, 0.01", "20, 0.02", "15, 0.02"], ["row 3", "15", "increasing"]),
        (["10, 0.01", "10, 0.02"], ["row 2", "increasing"]),
        (["10, 0.01", "20, -0.02"], ["row 2", "-0.02", "negative"]),
        (["10, 0.01", "20, nan"], ["row 2", "nan", "finite"]),
        (["10, 0.01"], ["1 data row", "at least 2"]),
        (["10, 0.01", "20, 0.02, 5"], ["row 2", "3 value", "two columns"]),
        (["10, 0.01", "twenty, 0.02"], ["row 2", "twenty", "two numbers"]),
        (["-5, 0.01", "20, 0.02"], ["row 1", "-5", "negative"]),
        (["10, 0", "20, 0"], ["zero"]),
        (["f, G", "f2, G2", "1, 2"], ["row 2", "f2"]),
    ],
)
def test_psd_table_rejects_bad_rows(tmp_path, lines, words):
    path = write(tmp_path, "bad.csv", lines)
    with pytest.raises(CaseError) as exc:
        read_psd_csv(path)
    assert_one_line_naming(exc, "bad.csv", "excitation.psd", *words)


def test_psd_reader_names_a_missing_file_and_a_wrong_unit(tmp_path):
    with pytest.raises(CaseError) as exc:
        read_psd_csv(tmp_path / "nowhere.csv")
    assert_one_line_naming(exc, "nowhere.csv", "not found")
    path = write(tmp_path, "ok.csv", ["10, 1", "20, 1"])
    with pytest.raises(CaseError) as exc:
        read_psd_csv(path, psd_unit="g")
    assert_one_line_naming(exc, "ok.csv", "unit 'g'")


# -- records ---------------------------------------------------------------------------------


def test_record_is_converted_and_clean(tmp_path):
    t, a = sine_record()
    record = read_record_csv(
        write(tmp_path, "rec.csv", record_lines(t * 1e3, a)), time_unit="ms", acceleration_unit="g"
    )
    assert record.sample_rate_Hz == pytest.approx(1000.0, rel=1e-9)
    np.testing.assert_allclose(record.acceleration_mps2, a * G_N, rtol=1e-12)
    assert record.warnings == ()


def test_record_rejects_a_nan_row(tmp_path):
    t, a = sine_record()
    lines = record_lines(t, a)
    lines[101] = f"{float(t[100])!r},nan"
    with pytest.raises(CaseError) as exc:
        read_record_csv(write(tmp_path, "rec.csv", lines))
    assert_one_line_naming(exc, "rec.csv", "row 102", "nan", "1 such row")


def test_record_rejects_a_gap(tmp_path):
    t, a = sine_record()
    keep = np.ones(t.size, bool)
    keep[500:520] = False
    with pytest.raises(CaseError) as exc:
        read_record_csv(write(tmp_path, "rec.csv", record_lines(t[keep], a[keep])))
    assert_one_line_naming(exc, "rec.csv", "rows 501–502", "gap", "0.021 s")


def test_record_rejects_time_going_back(tmp_path):
    t, a = sine_record()
    t[700] = t[698]
    with pytest.raises(CaseError) as exc:
        read_record_csv(write(tmp_path, "rec.csv", record_lines(t, a)))
    assert_one_line_naming(exc, "rec.csv", "row 702", "does not increase")


def test_record_flags_small_jitter_and_rejects_large(tmp_path):
    t, a = sine_record()
    jittered = t.copy()
    jittered[1::2] += 3e-6  # 0.3 % and then 0.6 % of a 1 ms step
    record = read_record_csv(write(tmp_path, "rec.csv", record_lines(jittered, a)))
    assert len(record.warnings) == 1 and "uneven" in record.warnings[0]
    jittered[1::2] += 2e-5
    with pytest.raises(CaseError) as exc:
        read_record_csv(write(tmp_path, "rec2.csv", record_lines(jittered, a)))
    assert_one_line_naming(exc, "rec2.csv", "row", "resample")


def test_record_flags_a_little_clipping_and_rejects_much(tmp_path):
    t, a = sine_record()
    clipped = a.copy()
    clipped[300:305] = 0.8  # one run of five samples at the top of the range
    record = read_record_csv(write(tmp_path, "rec.csv", record_lines(t, clipped)))
    assert len(record.warnings) == 1
    assert "5 sample(s)" in record.warnings[0] and "row 302" in record.warnings[0]
    heavy = np.clip(a, -0.45, 0.45)  # a 0.5 amplitude sine cut at 90 %: about 29 % clipped
    with pytest.raises(CaseError) as exc:
        read_record_csv(write(tmp_path, "rec2.csv", record_lines(t, heavy)))
    assert_one_line_naming(exc, "rec2.csv", "clipped", "0.45")


def test_record_rejects_short_and_constant_records(tmp_path):
    t, a = sine_record(n=100)
    with pytest.raises(CaseError) as exc:
        read_record_csv(write(tmp_path, "short.csv", record_lines(t, a)))
    assert_one_line_naming(exc, "short.csv", "100 samples")
    t, a = sine_record()
    with pytest.raises(CaseError) as exc:
        read_record_csv(write(tmp_path, "flat.csv", record_lines(t, np.zeros_like(a))))
    assert_one_line_naming(exc, "flat.csv", "constant")


# -- from a case file ---------------------------------------------------------------------------

REDUCED = """
[reduced]
mass = "5 g"
stiffness = ["-40 N/m", "4e6 N/m^3"]
damping = "0.01 N*s/m"
[excitation]
"""


def test_case_excitation_becomes_a_psd(tmp_path):
    # band: σ² = G·(f_high − f_low); PSD table: rows converted from g²/Hz; record: Welch, and a
    # tone is not random excitation
    band = parse_case(
        REDUCED + 'band = { low = "10 Hz", high = "50 Hz", rms = "0.1 g" }', tmp_path / "band.toml"
    )
    excitation = random_excitation(band)
    assert excitation.summary.rms_mps2 == pytest.approx(0.1 * G_N, rel=1e-12)
    assert excitation.summary.frequency_range_Hz == (10.0, 50.0)

    write(tmp_path, "site.csv", ["10, 0.001", "100, 0.001"])
    table = parse_case(REDUCED + 'psd = { file = "site.csv" }', tmp_path / "psd.toml")
    assert random_excitation(table).psd.psd_m2_s4_per_Hz[0] == pytest.approx(0.001 * G_N**2)

    t, a = sine_record(n=4000)
    clipped = a.copy()
    clipped[300:305] = 0.8
    write(tmp_path, "rec.csv", record_lines(t, clipped))
    record = parse_case(REDUCED + 'record = { file = "rec.csv" }', tmp_path / "rec.toml")
    measured = random_excitation(record)
    assert measured.summary.peaks[0].frequency_Hz == pytest.approx(31.0, abs=1.0)
    assert len(measured.warnings) == 1 and "clipped" in measured.warnings[0]

    tone = parse_case(
        REDUCED + 'tone = { frequency = "20 Hz", amplitude = "0.1 g" }', tmp_path / "tone.toml"
    )
    assert random_excitation(tone) is None


# -- junk never escapes as anything but a CaseError -------------------------------------------

cells = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.integers(-(10**6), 10**6).map(str),
    st.sampled_from(["", "nan", "inf", "-", "1e999", "0x10", "g", "time", "1,5", "--1", "é"]),
    st.text(max_size=6),
)
junk_line = st.lists(cells, min_size=0, max_size=4).flatmap(
    lambda cs: st.sampled_from([",", ";", "\t", " ", ", "]).map(lambda sep: sep.join(cs))
)


@settings(max_examples=150, deadline=None)
@given(st.lists(junk_line, max_size=30), st.booleans())
def test_junk_rows_only_ever_raise_a_case_error(lines, as_record):
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "junk.csv"
        path.write_text("\n".join(lines), encoding="utf-8")
        reader = read_record_csv if as_record else read_psd_csv
        try:
            reader(path)
        except CaseError as exc:
            assert "junk.csv" in str(exc) and "\n" not in str(exc)
