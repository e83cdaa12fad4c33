"""Candidate-gap study: the recommendation rule, executors that agree, and the design note."""

from __future__ import annotations

import json
import math
import tempfile
from pathlib import Path

import pytest

from harvester.analysis.study import compare_gaps, recommend
from harvester.case.load import load_case
from harvester.report.design_note import build_note
from harvester.report.note import write_note

DATA = Path(__file__).resolve().parent / "data"
SMALL = DATA / "small-study.toml"


def _row(gap_mm, power, levels):
    checks = [{"name": f"check {i}", "level": lev, "margin": 2.0 if lev == "pass" else 0.5}
              for i, lev in enumerate(levels)]
    worst = min(checks, key=lambda c: ({"fail": 0, "warn": 1, "pass": 2}[c["level"]],
                                       c["margin"]))
    return {"gap_m": gap_mm / 1e3, "mean_power_W": power, "checks": checks, "worst": worst,
            "gain_over_linear": None}


def test_recommendation_is_the_most_power_among_gaps_that_pass_everything():
    rows = [_row(6, 9e-4, ["fail", "pass"]), _row(8, 5e-4, ["pass", "warn"]),
            _row(10, 3e-4, ["pass", "pass"]), _row(12, 1e-4, ["pass", "pass"])]
    index, reason = recommend(rows)
    assert index == 2 and "10 mm" in reason and "2 of 4" in reason
    index, reason = recommend([_row(6, 9e-4, ["fail"]), _row(8, 5e-4, ["warn"])])
    assert index is None and "no candidate gap passes" in reason


@pytest.fixture(scope="module")
def in_process():
    return compare_gaps(load_case(SMALL), seed=5)


def test_comparison_rows_carry_the_contract(in_process):
    data = in_process.to_dict()
    assert [round(r["gap_m"] * 1e3, 6) for r in data["rows"]] == [8.0, 12.0]
    for row in data["rows"]:
        for key in ("regime", "barrier_J", "well_frequency_Hz", "onset_mps2", "mean_power_W",
                    "ci95_W", "gain_over_linear", "checks", "worst"):
            assert key in row, key
        # bistable exactly when the gap is below the critical gap (k1 < 0; harvester/METHODS.md §3)
        assert (row["regime"] == "bistable") == (row["gap_m"] < row["critical_gap_m"])
    json.dumps(data)  # JSON-ready


def test_process_pool_gives_identical_results(in_process):
    pooled = compare_gaps(load_case(SMALL), seed=5, workers=2)
    assert pooled.to_dict() == in_process.to_dict()


def test_dask_cluster_gives_identical_results(in_process):
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False,
                                  protocol="tcp", dashboard_address=None) as cluster:
        remote = compare_gaps(load_case(SMALL), seed=5, cluster=cluster.scheduler_address)
    assert remote.to_dict() == in_process.to_dict()


def test_design_note_renders_with_figures_and_tables(tmp_path):
    from test_note import VISIBILITY_PROBE, _browser_tools, _WebDriver

    written = write_note(build_note(load_case(SMALL), seed=5), tmp_path / "note")
    names = {p.name for p in written}
    assert {"note.md", "note.html"} <= names
    assert any(n.endswith(".csv") for n in names) and any(n.endswith(".svg") for n in names)
    html = (tmp_path / "note" / "note.html").read_text(encoding="utf-8")
    for heading in ("Double well", "Hop thresholds", "Mean power", "Stresses and safety",
                    "Cautions"):
        assert heading in html, heading
    # self-contained: nothing fetched (the SVG namespace URI is an identifier, not a fetch)
    assert "https://" not in html and "<script" not in html
    assert "src=" not in html and "@import" not in html
    chromium, driver = _browser_tools()
    with tempfile.TemporaryDirectory() as profile:
        browser = _WebDriver(chromium, driver, profile)
        try:
            browser.call("POST", f"{browser.session}/url",
                         {"url": (tmp_path / "note" / "note.html").as_uri()})
            page = browser.call("POST", f"{browser.session}/execute/sync",
                                {"script": VISIBILITY_PROBE, "args": []})
        finally:
            browser.close()
    # potential, hop map, power by gap, power vs frequency
    assert len(page["svgs"]) >= 4 and len(page["tables"]) >= 6
    for element in page["svgs"] + page["tables"]:
        assert element["width"] > 100 and element["height"] > 20, element
        assert element["display"] != "none" and element["visibility"] == "visible", element
    assert all(s["shapes"] > 20 for s in page["svgs"])
    # values in the CSV are full precision and match the JSON
    gaps_csv = next(p for p in written if p.name.startswith("table-1-") and p.suffix == ".csv")
    gaps_json = json.loads(gaps_csv.with_suffix(".json").read_text(encoding="utf-8"))
    first = gaps_csv.read_text(encoding="utf-8").splitlines()[1].split(",")[0]
    assert math.isclose(float(first), gaps_json["rows"][0]["gap_mm"])
