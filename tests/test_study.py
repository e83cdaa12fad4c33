"""Candidate-gap study: the recommendation rule, executors that agree, and the design note."""

from __future__ import annotations

import json
import math
import tempfile
from pathlib import Path

import pytest

from harvester.case.load import load_case
from harvester.commands.compare import GapRow, compare_result, recommend
from harvester.commands.power import CheckRow
from harvester.report.design_note import build_note
from harvester.report.note import write_note

DATA = Path(__file__).resolve().parent / "data"
SMALL = DATA / "small-study.toml"


def _row(gap_mm, power, levels, ci=0.1):
    """A candidate row: `gap_mm` None for the magnet-free beam; power with a ±ci interval."""
    checks = tuple(CheckRow(check=f"check {i}", short_name=f"c{i}", level=lev, value_SI=1.0,
                            limit_SI=2.0 if lev == "pass" else 0.5, unit_SI="Pa",
                            margin=2.0 if lev == "pass" else 0.5, basis="")
                   for i, lev in enumerate(levels))
    worst = min(checks, key=lambda c: ({"fail": 0, "warn": 1, "pass": 2}[c.level], c.margin))
    return GapRow(
        gap_m=None if gap_mm is None else gap_mm / 1e3,
        regime="magnet-free" if gap_mm is None else "bistable", critical_gap_m=None,
        wells_m=(), barrier_J=0.0, well_frequency_Hz=10.0, linear_frequency_Hz=10.0,
        k1_N_per_m=1.0, k3_N_per_m3=0.0, force_coefficients_SI=(0.0, 1.0), fit_window_m=None,
        mean_power_W=power, ci95_W=(power * (1 - ci), power * (1 + ci)), gain_ratio=None,
        hop_rate_per_s=0.0, interwell_share=None, rms_voltage_V=None, load_ohm=1e5,
        load_note="", orbits=(), onset_mps2=None, onset_frequency_Hz=None, melnikov_mps2=None,
        stop_mps2=None, hop_status=None, x_min_m=0.0, x_max_m=0.0, checks=checks,
        omitted_checks=(), worst_check=worst.short_name, worst_level=worst.level,
        worst_margin=worst.margin, hop_map=(), warnings=())


def test_recommendation_is_the_most_power_among_candidates_that_pass_everything():
    rows = [_row(None, 1e-4, ["pass"]), _row(6, 9e-4, ["fail", "pass"]),
            _row(8, 5e-4, ["pass", "warn"]), _row(10, 3e-4, ["pass", "pass"]),
            _row(12, 1e-4, ["pass", "pass"])]
    index, reason = recommend(rows)
    assert index == 3 and "10 mm" in reason and "3×" in reason
    index, reason = recommend([_row(6, 9e-4, ["fail"]), _row(8, 5e-4, ["warn"])])
    assert index is None and "no candidate passes" in reason


def test_a_gap_is_never_recommended_below_the_magnet_free_beam():
    # the magnet-free beam delivers more within the same limits: leave out the fixed magnet
    rows = [_row(None, 5e-4, ["pass"]), _row(8, 2e-4, ["pass"]), _row(10, 4e-4, ["pass"])]
    index, reason = recommend(rows)
    assert index == 0 and reason.startswith("leave out the fixed magnet")
    # a gap ahead of it only inside the intervals cannot be told apart from it
    rows = [_row(None, 5e-4, ["pass"], ci=0.2), _row(8, 5.5e-4, ["pass"], ci=0.2)]
    index, reason = recommend(rows)
    assert index == 0 and "cannot be told apart" in reason and "--starts" in reason
    index, reason = recommend(rows, broadband=True)
    assert index == 0 and "--ci" in reason
    # where the magnet-free beam fails a check, a passing gap is recommended and says why
    rows = [_row(None, 9e-4, ["fail"]), _row(8, 2e-4, ["pass"])]
    index, reason = recommend(rows)
    assert index == 1 and "magnet-free beam fails" in reason


def test_a_gap_that_needs_a_lucky_start_is_passed_over_where_another_passes():
    # the orbit a machine run up to speed reaches is the one the beam delivers on (issue of
    # coexisting attractors: Stanton, Owens & Mann 2012, J. Sound Vib. 331:3617); where the
    # best gap by the mean over random starts needs a lucky start, the best gap that a run-up
    # carries to its high-power orbit is chosen, and the reason names the one passed over
    from dataclasses import replace

    rows = [_row(None, 1e-6, ["pass"], ci=0.01),
            replace(_row(9, 8e-4, ["pass"]), needs_lucky_start=True, upsweep_power_W=2e-5),
            replace(_row(10, 5e-4, ["pass"]), needs_lucky_start=False, upsweep_power_W=5e-4)]
    index, reason = recommend(rows)
    assert index == 2 and reason.startswith("10 mm")
    assert "passed over for needing a lucky start" in reason and reason.endswith(": 9 mm")
    # where every passing gap needs a lucky start, the best is named with the caveat
    rows[2] = replace(rows[2], needs_lucky_start=True, upsweep_power_W=1e-5)
    index, reason = recommend(rows)
    assert index == 1 and "needs a lucky start" in reason and "20 µW" in reason


@pytest.fixture(scope="module")
def in_process():
    return compare_result(load_case(SMALL), seed=5)


def test_comparison_rows_carry_the_contract(in_process):
    data = in_process.to_json()
    assert [r["gap_m"] for r in data["rows"]] == [None, 0.008, 0.012]
    free = data["rows"][0]
    assert free["regime"] == "magnet-free" and free["gain_ratio"] == pytest.approx(1.0)
    for row in data["rows"][1:]:
        for key in ("regime", "barrier_J", "well_frequency_Hz", "onset_mps2", "stop_mps2",
                    "mean_power_W", "ci95_W", "gain_ratio", "checks", "worst_check",
                    "worst_level", "worst_margin"):
            assert key in row, key
        # bistable exactly when the gap is below the critical gap (k1 < 0: Guckenheimer &
        # Holmes 1983, §2.2, the pitchfork of the straight beam)
        assert (row["regime"] == "bistable") == (row["gap_m"] < row["critical_gap_m"])
        assert row["gain_ratio"] == pytest.approx(row["mean_power_W"] / free["mean_power_W"],
                                                  rel=1e-9)
    assert "recommended_gap_m" in data and data["recommendation"]
    # under the tone, the magnet-free beam is linear: one steady state at each frequency, which
    # every start and every run-up reaches (Thomson & Dahleh 1998, Theory of Vibration with
    # Applications, ch. 3); 1 %: the run-up's averaging window against the orbit mix's
    assert free["high_power_share"] == pytest.approx(1.0)
    assert free["upsweep_reaches_high_power"] is True and free["needs_lucky_start"] is False
    assert free["upsweep_power_W"] == pytest.approx(free["mean_power_W"], rel=0.01)
    for row in data["rows"]:
        assert row["needs_lucky_start"] is (not row["upsweep_reaches_high_power"])
    json.dumps(data)  # JSON-ready


def test_process_pool_gives_identical_results(in_process):
    pooled = compare_result(load_case(SMALL), seed=5, workers=2)
    assert pooled.to_json() == in_process.to_json()


def test_dask_cluster_gives_identical_results(in_process):
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False,
                                  protocol="tcp", dashboard_address=None) as cluster:
        remote = compare_result(load_case(SMALL), seed=5, cluster=cluster.scheduler_address)
    assert remote.to_json() == in_process.to_json()


def test_design_note_renders_with_figures_and_tables(tmp_path):
    from test_note import VISIBILITY_PROBE, _browser_tools, _WebDriver

    written = write_note(build_note(load_case(SMALL), seed=5), tmp_path / "note")
    names = {p.name for p in written}
    assert {"note.md", "note.html"} <= names
    assert any(n.endswith(".csv") for n in names) and any(n.endswith(".svg") for n in names)
    html = (tmp_path / "note" / "note.html").read_text(encoding="utf-8")
    for heading in ("What to build", "Candidates", "The chosen design", "Double well",
                    "Hop thresholds", "Mean power", "Stress and safety checks", "Appendix",
                    "Cautions"):
        assert heading in html, heading
    # the answer comes before any section
    assert html.index("What to build") < html.index("<h2>1. Candidates")
    # self-contained: nothing fetched (the SVG namespace URI is an identifier, not a fetch)
    assert "https://" not in html and "<script" not in html
    assert "src=" not in html and "@import" not in html
    chromium, driver = _browser_tools()
    with tempfile.TemporaryDirectory() as profile:
        browser = _WebDriver(chromium, driver, profile)
        try:
            browser.call("POST", f"{browser.session}/window/rect", {"width": 1024,
                                                                     "height": 900})
            browser.call("POST", f"{browser.session}/url",
                         {"url": (tmp_path / "note" / "note.html").as_uri()})
            page = browser.call("POST", f"{browser.session}/execute/sync",
                                {"script": VISIBILITY_PROBE, "args": []})
            width = browser.call("POST", f"{browser.session}/execute/sync", {
                "script": "const d = document.documentElement; return [d.scrollWidth, "
                          "d.clientWidth, window.innerWidth];", "args": []})
        finally:
            browser.close()
    # at 1024 px nothing runs off the page: a wide table scrolls inside its own box
    scroll, client, inner = width
    assert inner <= 1024 and scroll == client, width
    # potential, hop map, power by gap, power vs frequency
    assert len(page["svgs"]) >= 4 and len(page["tables"]) >= 5
    for element in page["svgs"] + page["tables"]:
        assert element["width"] > 100 and element["height"] > 20, element
        assert element["display"] != "none" and element["visibility"] == "visible", element
    assert all(s["shapes"] > 20 for s in page["svgs"])
    # the note's tables carry the command line's keys and SI values: the CSV matches the JSON
    gaps_csv = next(p for p in written if p.name.startswith("table-1-") and p.suffix == ".csv")
    gaps_json = json.loads(gaps_csv.with_suffix(".json").read_text(encoding="utf-8"))
    header, _, second = gaps_csv.read_text(encoding="utf-8").splitlines()[:3]
    assert header.split(",")[:2] == ["gap_m", "regime"]
    assert gaps_json["rows"][0]["gap_m"] is None  # the magnet-free beam
    assert math.isclose(float(second.split(",")[0]), gaps_json["rows"][1]["gap_m"])


def test_printed_note_keeps_every_column_of_the_candidate_table(tmp_path):
    # the note printed as an engineer files it (headless Chromium, A4): every column header of
    # Table 1 is on the page, nothing cut off at the right edge; the PDF text is read back with
    # pypdf (test-only reference reader of ISO 32000 files)
    from test_note import _browser_tools

    pypdf = pytest.importorskip("pypdf")
    from harvester.report.pdf import print_pdf

    _browser_tools()
    written = write_note(build_note(load_case(SMALL), seed=5), tmp_path / "note")
    assert print_pdf(tmp_path / "note" / "note.html", tmp_path / "note" / "note.pdf") is None
    reader = pypdf.PdfReader(tmp_path / "note" / "note.pdf")
    # A4 is 595.28 × 841.89 pt (ISO 216)
    box = reader.pages[0].mediabox
    assert float(box.width) == pytest.approx(595.28, abs=1.0)
    assert float(box.height) == pytest.approx(841.89, abs=1.0)
    text = " ".join(page.extract_text() for page in reader.pages)
    words = set(text.replace("-\n", "").split())
    table = json.loads(next(p for p in written if p.name.startswith("table-1-")
                            and p.suffix == ".json").read_text(encoding="utf-8"))
    for column in table["columns"]:
        for word in column["label"].split():
            assert word in words or word in text, (column["label"], word)
    assert text.index("What to build") < text.index("Table 1")
