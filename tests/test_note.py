"""The design-note writer and its SVG figures.

Check values come from outside the project: the XML parser of the standard library (well-formed
output, escaping), the definition of a logarithmic scale, Heckbert's nice-number labels,
matplotlib's viridis colour map, Python's own float repr (full-precision round trip) and a real
browser (headless Chromium) for "the figures and tables are there and visible".
"""

import base64
import csv
import io
import json
import math
import os
import re
import shutil
import socket
import subprocess
import tempfile
import time
import urllib.request
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from harvester.report import note as note_module
from harvester.report.note import (
    Column,
    Figure,
    Note,
    Section,
    Table,
    note_html,
    note_markdown,
    unit_key,
    write_note,
)
from harvester.report.svg import (
    MISSING_COLOUR,
    VIRIDIS,
    Axis,
    Series,
    colour_of,
    heat_map,
    line_plot,
    linear_ticks,
    log_ticks,
    nice_step,
    tick_labels,
)

SVG = "{http://www.w3.org/2000/svg}"
TRICKY = "gap <12 mm> & \"R_load\" 'matched'"


# -- SVG ------------------------------------------------------------------------------------


def _texts(svg: str) -> list[str]:
    return [el.text for el in ET.fromstring(svg).iter(f"{SVG}text")]


def _tick_positions(svg: str, anchor: str) -> dict[str, float]:
    """Tick value → pixel position, read back from the SVG (x for the x axis, y for the y axis)."""
    root = ET.fromstring(svg)
    ticks = root.find(f".//{SVG}g[@class='ticks']")
    texts = [el for el in ticks.iter(f"{SVG}text") if el.get("text-anchor") == anchor]
    return {float(el.text): float(el.get("x" if anchor == "middle" else "y")) for el in texts}


def test_line_plot_is_well_formed_deterministic_and_escapes_text():
    series = [
        Series(TRICKY, [1, 2, 3], [1.0, 4.0, 9.0], band=([0.5, 3, 8], [1.5, 5, 10])),
        Series("scatter & markers", [1.5, 2.5], [2.0, 6.0], line=False, markers=True),
    ]
    axes = dict(x_axis=Axis("gap", "mm"), y_axis=Axis("stress <peak>", "MPa"))
    svg = line_plot(series, title=TRICKY, **axes)
    assert svg == line_plot(series, title=TRICKY, **axes)
    texts = _texts(svg)  # ElementTree (stdlib) raises on malformed XML or bad escaping
    assert TRICKY in texts and "stress <peak> [MPa]" in texts and "gap [mm]" in texts
    assert ET.fromstring(svg).find(f"{SVG}title").text == TRICKY
    root = ET.fromstring(svg)
    assert len(root.findall(f".//{SVG}path[@fill-opacity='0.18']")) == 1  # the band
    assert len(root.findall(f".//{SVG}g[@class='data']/{SVG}rect")) == 2  # square markers


def test_log_axis_places_points_by_their_logarithm():
    # A logarithmic axis maps x to a + b·log10(x): decades are equally spaced and the geometric
    # mean of two values lies halfway between them (definition of a log scale).
    x = np.array([3.0, 10.0, math.sqrt(10.0 * 100.0), 100.0, 300.0])
    svg = line_plot(
        [Series("power", x, x**2, markers=True)],
        x_axis=Axis("frequency", "Hz", log=True),
        y_axis=Axis("power", "W", log=True),
    )
    ticks = _tick_positions(svg, "middle")
    assert ticks[100] - ticks[10] == pytest.approx(ticks[20] - ticks[2], abs=0.15)
    assert ticks[5] - ticks[2] == pytest.approx(ticks[50] - ticks[20], abs=0.15)
    circles = ET.fromstring(svg).findall(f".//{SVG}g[@class='data']/{SVG}circle")
    cx = [float(c.get("cx")) for c in circles]
    assert cx[1] == pytest.approx(ticks[10], abs=0.15)
    assert cx[2] == pytest.approx((ticks[10] + ticks[100]) / 2, abs=0.15)
    # y = x² on log–log axes is a straight line of slope 2 in decades
    cy = [float(c.get("cy")) for c in circles]
    y_ticks = _tick_positions(svg, "end")
    decade_y = y_ticks[100.0] - y_ticks[1000.0]  # pixels per decade on y (y grows downwards)
    decade_x = ticks[100] - ticks[10]
    slope = -(cy[3] - cy[1]) / decade_y / ((cx[3] - cx[1]) / decade_x)
    assert slope == pytest.approx(2.0, abs=0.01)


def test_linear_axis_places_points_on_the_affine_map():
    svg = line_plot(
        [Series("onset", [0.0, 0.37, 0.93], [0.0, 1.0, 2.0], markers=True)],
        x_axis=Axis("gap", "mm"),
        y_axis=Axis("onset", "m/s²"),
    )
    ticks = _tick_positions(svg, "middle")
    per_unit = (ticks[0.8] - ticks[0]) / 0.8
    circles = ET.fromstring(svg).findall(f".//{SVG}g[@class='data']/{SVG}circle")
    assert float(circles[1].get("cx")) == pytest.approx(ticks[0] + 0.37 * per_unit, abs=0.15)


def test_missing_and_non_positive_points_break_the_curve_instead_of_bridging_it():
    # A NaN (an untrusted result) and a zero on a log axis cannot be drawn; the curve must stop
    # there rather than join its neighbours, so the plot never suggests a value that is missing.
    y = [1.0, 2.0, float("nan"), 4.0, 5.0, 0.0, 7.0, 8.0]
    svg = line_plot(
        [Series("power", list(range(1, 9)), y)],
        x_axis=Axis("gap", "mm"),
        y_axis=Axis("power", "W", log=True),
    )
    paths = ET.fromstring(svg).findall(f".//{SVG}g[@class='data']/{SVG}path")
    assert [p.get("d").count("L") + 1 for p in paths] == [2, 2, 2]
    empty = line_plot([], x_axis=Axis("gap", "mm"), y_axis=Axis("power", "W"))
    assert "no data" in _texts(empty)


def test_nice_steps_follow_heckbert():
    # Heckbert (1990), "Nice numbers for graph labels", Graphics Gems I, loose labelling worked
    # by hand for data 105…543 and five ticks: range nicenum(438) = 500, step nicenum(500/4,
    # rounded) = 100, so the labels are 100, 200, …, 600 (procedure recalled from memory).
    step = nice_step(543 - 105)
    assert step == 100
    low, high = math.floor(105 / step) * step, math.ceil(543 / step) * step
    assert linear_ticks(low, high, step) == [100.0, 200.0, 300.0, 400.0, 500.0, 600.0]


@settings(max_examples=200, deadline=None)
@given(st.floats(min_value=1e-12, max_value=1e12))
def test_nice_step_is_one_two_or_five_and_gives_three_to_eight_intervals(span):
    # The 1-2-5 rule (Heckbert 1990) with a target of five intervals: rounding the raw step by at
    # most a factor 1.5 down or 5/3 up keeps between 3 and 7.5 intervals.
    step = nice_step(span)
    mantissa = step / 10.0 ** math.floor(math.log10(step) + 1e-12)
    assert min(abs(mantissa - m) for m in (1.0, 2.0, 5.0)) < 1e-9
    assert 3.0 - 1e-9 <= span / step <= 7.5 + 1e-9


@settings(max_examples=200, deadline=None)
@given(
    st.floats(min_value=-1e7, max_value=1e7, allow_nan=False),
    st.floats(min_value=1e-6, max_value=1e7),
)
def test_tick_labels_read_back_as_the_tick_values(low, span):
    # A label must name its tick: float(label) recovers the tick to a small part of the step.
    step = nice_step(span)
    ticks = linear_ticks(low, low + span, step)
    for tick, label in zip(ticks, tick_labels(ticks, step=step), strict=True):
        assert float(label) == pytest.approx(tick, abs=1e-6 * step)
    decades = log_ticks(2e-7, 3e4)
    for tick, label in zip(decades, tick_labels(decades), strict=True):
        assert float(label) == pytest.approx(tick, rel=1e-12)


def test_viridis_matches_matplotlib():
    # Reference colour map: matplotlib's viridis (van der Walt & Smith 2015); our 33 samples
    # interpolated linearly in RGB must stay within 3/255 per channel (about 1 %, not visible)
    # of the full 256-entry map.
    matplotlib = pytest.importorskip("matplotlib")
    reference = matplotlib.colormaps["viridis"]
    for fraction in np.linspace(0.0, 1.0, 101):
        ours = colour_of(float(fraction))
        rgb = [int(ours[k : k + 2], 16) for k in (1, 3, 5)]
        expected = [round(255 * c) for c in reference(float(fraction))[:3]]
        assert max(abs(a - b) for a, b in zip(rgb, expected, strict=True)) <= 3, fraction


def test_heat_map_colours_extremes_and_greys_missing_cells():
    frequencies = [5.0, 10.0, 20.0, 40.0]
    gaps = [8.0, 10.0, 12.0]
    onset = np.array([[1.0, 2.0, 3.0, 4.0], [2.0, np.nan, 4.0, 5.0], [3.0, 4.0, 5.0, 6.0]])
    svg = heat_map(
        frequencies,
        gaps,
        onset,
        x_axis=Axis("frequency", "Hz", log=True),
        y_axis=Axis("gap", "mm"),
        value_axis=Axis("hop onset", "m/s²"),
        missing_label="no hop <2 g",
    )
    root = ET.fromstring(svg)
    cells = root.findall(f".//{SVG}g[@class='cells']/{SVG}rect")
    assert len(cells) == onset.size
    fills = [c.get("fill") for c in cells]  # row by row, y (gap) ascending
    assert fills[0] == VIRIDIS[0] and fills[-1] == VIRIDIS[-1]
    assert fills[5] == MISSING_COLOUR
    assert "no hop <2 g" in _texts(svg)
    # geometric cell edges on the log axis: the 10 Hz cell spans sqrt(5·10) … sqrt(10·20),
    # equal widths in log10 (definition of a log scale)
    widths = [float(c.get("width")) for c in cells[:4]]
    assert max(widths) - min(widths) <= 0.2
    with pytest.raises(ValueError, match="shape"):
        heat_map(
            frequencies, gaps, onset.T, x_axis=Axis("f"), y_axis=Axis("g"), value_axis=Axis("v")
        )


# -- note data and files --------------------------------------------------------------------


def _sample_note(flags=None) -> Note:
    f = np.geomspace(5.0, 200.0, 30)
    power = 1e-4 / (1 + ((f - 40.0) / 8.0) ** 2)
    power_figure = Figure(
        "Mean power vs frequency",
        line_plot(
            [Series("bistable", f, 1e6 * power, band=(0.8e6 * power, 1.2e6 * power))],
            x_axis=Axis("frequency", "Hz", log=True),
            y_axis=Axis("mean power", "µW"),
        ),
        "Shaded: 95 % interval.",
    )
    map_figure = Figure(
        "Hop threshold map",
        heat_map(
            f[::6],
            [8.0, 10.0, 12.0],
            np.outer([1.0, 1.5, 2.0], np.sqrt(f[::6])),
            x_axis=Axis("frequency", "Hz", log=True),
            y_axis=Axis("gap", "mm"),
            value_axis=Axis("hop onset", "m/s²"),
        ),
    )
    gaps = Table(
        "Candidate gaps",
        [
            Column("gap", "mm"),
            Column("hop onset", "m/s²"),
            Column("mean power", "W"),
            Column("bistable"),
            Column("orbit"),
        ],
        [
            [8.0, 1.23456789, 1.234567e-5, True, "chaotic"],
            [10.0, float("nan"), 2.0e-7, False, "intrawell"],
            [12.5, 0.0123456, np.float64(3.3e-6), np.bool_(True), None],
        ],
        note="No hop up to 2 g at 10 mm.",
    )
    limits = Table(
        "Stress",
        [Column("layer"), Column("peak stress", "MPa")],
        [["substrate", 180.25], ["ceramic", 31.5]],
    )
    return Note(
        title=TRICKY,
        subtitle="Invented pump skid, site 7",
        sections=[
            Section("Gap study", ["The <best> gap & why."], [gaps], [power_figure]),
            Section("Safety", ["Stresses at the root."], [limits], [map_figure]),
        ],
        cautions=["Strong magnets: keep tools away.", "Open-circuit voltage can exceed 50 V."],
        flags=flags
        if flags is not None
        else [
            ("pass", "tip travel within the limit"),
            ("warn", "fewer than 20 hops in the record"),
            ("fail", "substrate stress above the Goodman limit at 8 mm"),
        ],
    )


def _snapshot(directory) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(directory.iterdir())}


def test_column_keys_carry_the_unit():
    # The house convention for JSON keys: the SI unit in the name (`barrier_J`, `gap_m`,
    # `k1_N_per_m`; DEVELOPERS.md, house rules).
    assert Column("gap", "mm").key == "gap_mm"
    assert Column("hop onset", "m/s²").key == "hop_onset_m_per_s2"
    assert Column("k3", "N/m³").key == "k3_N_per_m3"
    assert Column("flux linkage", "V·s/m").key == "flux_linkage_V_s_per_m"
    assert Column("load", "kΩ").key == "load_kohm"
    assert Column("power", "µW").key == "power_uW"
    assert Column("orbit").key == "orbit"
    assert unit_key("g²/Hz") == "g2_per_Hz"
    with pytest.raises(ValueError, match="distinct keys"):
        Table("t", [Column("gap", "mm"), Column("Gap", "mm")], [])
    with pytest.raises(ValueError, match="row 1 has 1 values for 2 columns"):
        Table("t", [Column("a"), Column("b")], [[1.0]])


def test_write_note_writes_all_files_with_full_precision_data(tmp_path):
    note = _sample_note()
    paths = write_note(note, tmp_path / "note")
    names = [p.name for p in paths]
    assert names[-2:] == ["note.md", "note.html"]
    assert {
        "figure-1-mean-power-vs-frequency.svg",
        "figure-2-hop-threshold-map.svg",
        "table-1-candidate-gaps.csv",
        "table-1-candidate-gaps.json",
        "table-2-stress.csv",
        "table-2-stress.json",
    } <= set(names)
    assert all(p.is_file() for p in paths)
    assert sorted(names) == sorted(p.name for p in (tmp_path / "note").iterdir())
    assert not [p for p in tmp_path.iterdir() if p.name != "note"]  # no staging left behind

    # CSV: Python's float repr is the shortest string that reads back to the same double
    # (Python language reference, float.__repr__), so the full-precision round trip is exact.
    with open(tmp_path / "note" / "table-1-candidate-gaps.csv", newline="") as handle:
        rows = list(csv.DictReader(handle))
    assert list(rows[0]) == ["gap_mm", "hop_onset_m_per_s2", "mean_power_W", "bistable", "orbit"]
    assert float(rows[0]["hop_onset_m_per_s2"]) == 1.23456789
    assert float(rows[0]["mean_power_W"]) == 1.234567e-5
    assert math.isnan(float(rows[1]["hop_onset_m_per_s2"]))
    assert rows[2]["bistable"] == "true" and rows[2]["orbit"] == ""

    # JSON must be strict (RFC 8259 has no NaN): json.loads with a NaN hook that refuses.
    text = (tmp_path / "note" / "table-1-candidate-gaps.json").read_text()
    document = json.loads(text, parse_constant=lambda c: pytest.fail(f"non-JSON constant {c}"))
    assert document["rows"][0]["hop_onset_m_per_s2"] == 1.23456789
    assert document["rows"][1]["hop_onset_m_per_s2"] is None
    assert document["rows"][2]["mean_power_W"] == 3.3e-6 and document["rows"][2]["bistable"] is True
    assert document["columns"][1] == {
        "key": "hop_onset_m_per_s2",
        "name": "hop onset",
        "unit": "m/s²",
    }

    # Markdown and HTML show four significant figures (house style), not 17 digits.
    markdown = (tmp_path / "note" / "note.md").read_text()
    assert "| 1.235 |" in markdown and "| 0.01235 |" in markdown and "1.23456789" not in markdown
    assert "(figure-1-mean-power-vs-frequency.svg)" in markdown
    html = (tmp_path / "note" / "note.html").read_text()
    assert ">1.235<" in html and "1.23456789" not in html
    svg_file = (tmp_path / "note" / "figure-1-mean-power-vs-frequency.svg").read_text()
    assert ET.fromstring(svg_file).tag == f"{SVG}svg"


def test_failed_checks_come_first_and_text_is_escaped():
    note = _sample_note()
    html = note_html(note)
    first_section = html.index("<h2>1. Gap study")
    assert html.index('class="check-box fail"') < html.index('class="check-box warn"')
    assert html.index('class="check-box warn"') < html.index('class="check-box pass"')
    assert html.index("substrate stress above the Goodman limit") < first_section
    assert "&lt;12 mm&gt; &amp; &quot;R_load&quot;" in html and "<12 mm>" not in html
    assert "The &lt;best&gt; gap &amp; why." in html
    markdown = note_markdown(note)
    assert markdown.index("**FAIL:** substrate stress") < markdown.index("## 1. Gap study")
    assert "\\<12 mm>" in markdown and "R\\_load" in markdown  # CommonMark backslash escapes


def test_counts_stay_whole_and_flags_without_failures_show_no_red_box():
    table = Table(
        "Hops",
        [Column("seed"), Column("hops"), Column("rate", "1/s")],
        [[np.int64(7), 12, 0.123456]],
    )
    note = Note("t", sections=[Section("s", tables=[table])], flags=[("warn", "few hops")])
    assert "| 7 | 12 | 0.1235 |" in note_markdown(note)
    html = note_html(note)
    assert 'class="check-box warn"' in html and "check-box fail" not in html
    assert Column("rate", "1/s").key == "rate_1_per_s"


def test_html_is_self_contained():
    html = note_html(_sample_note())
    # The SVG namespace is an identifier, never fetched; nothing else may point outside.
    outside = html.replace('xmlns="http://www.w3.org/2000/svg"', "")
    for forbidden in ("<script", "<link", "@import", "src=", "url(http", "http://", "https://"):
        assert forbidden not in outside, forbidden
    assert html.count("<svg") == 2 and html.count("<table") == 2
    hrefs = re.findall(r'href="([^"]*)"', outside)
    assert hrefs and all(re.fullmatch(r"table-\d+-[a-z0-9-]+\.(csv|json)", h) for h in hrefs)


def test_figure_with_a_script_is_refused():
    with pytest.raises(ValueError, match="scripts"):
        Figure("bad", "<svg><script>alert(1)</script></svg>")
    with pytest.raises(ValueError, match="flag level"):
        Note("t", flags=[("error", "x")])


def test_failure_while_staging_leaves_previous_note_intact(tmp_path, monkeypatch):
    out = tmp_path / "note"
    write_note(_sample_note(flags=[("pass", "first version")]), out)
    before = _snapshot(out)
    real_write = note_module._write_file
    calls = []

    def write_then_fail(path, data):
        calls.append(path)
        if len(calls) == 3:
            raise OSError("disk full (simulated)")
        real_write(path, data)

    monkeypatch.setattr(note_module, "_write_file", write_then_fail)
    with pytest.raises(OSError, match="disk full"):
        write_note(_sample_note(), out)
    assert _snapshot(out) == before
    assert [p.name for p in tmp_path.iterdir()] == ["note"]


def test_failure_while_moving_into_place_restores_previous_note(tmp_path, monkeypatch):
    out = tmp_path / "note"
    write_note(_sample_note(flags=[("pass", "first version")]), out)
    (out / "my-own-notes.txt").write_text("kept")
    before = _snapshot(out)
    real_replace = os.replace
    calls = []

    def replace_then_fail(source, target):
        calls.append(target)
        if len(calls) == 4:  # three files of the new note are already in place
            raise OSError("interrupted (simulated)")
        real_replace(source, target)

    monkeypatch.setattr(note_module.os, "replace", replace_then_fail)
    with pytest.raises(OSError, match="interrupted"):
        write_note(_sample_note(flags=[("fail", "second version")]), out)
    monkeypatch.undo()
    assert _snapshot(out) == before
    assert [p.name for p in tmp_path.iterdir()] == ["note"]


def test_failure_on_a_fresh_directory_leaves_nothing(tmp_path, monkeypatch):
    real_replace = os.replace

    def replace_then_fail(source, target, calls=[]):  # noqa: B006 - a call counter
        calls.append(target)
        if len(calls) == 2:
            raise OSError("interrupted (simulated)")
        real_replace(source, target)

    monkeypatch.setattr(note_module.os, "replace", replace_then_fail)
    with pytest.raises(OSError):
        write_note(_sample_note(), tmp_path / "fresh")
    assert list(tmp_path.iterdir()) == []


# -- in a real browser ----------------------------------------------------------------------

CHROMIUM_ARGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--window-size=1000,900",
]

# Runs in the page: where each figure and table is, whether it is drawn, and whether it is the
# element actually on top at its own centre once scrolled into view.
VISIBILITY_PROBE = """
const report = el => {
  el.scrollIntoView({block: "start"});
  const r = el.getBoundingClientRect();
  const s = getComputedStyle(el);
  const hit = document.elementFromPoint(r.left + r.width / 2, r.top + Math.min(r.height / 2, 20));
  return {width: r.width, height: r.height, display: s.display, visibility: s.visibility,
          opacity: s.opacity, on_top: el.contains(hit), top: r.top + window.scrollY,
          shapes: el.querySelectorAll("path, rect, circle, polygon, line, text, td").length};
};
const fail = document.querySelector(".check-box.fail");
return {
  svgs: [...document.querySelectorAll("figure svg")].map(report),
  tables: [...document.querySelectorAll("table")].map(report),
  fail: fail && Object.assign(report(fail), {background: getComputedStyle(fail).backgroundColor}),
  first_section_top: document.querySelector("main > section:not(.checks)")
      .getBoundingClientRect().top + window.scrollY,
};
"""


def _browser_tools() -> tuple[str, str]:
    chromium = shutil.which("chromium") or shutil.which("chromium-browser")
    driver = shutil.which("chromedriver")
    if chromium and driver:
        return chromium, driver
    reason = (
        "headless Chromium is needed to render the note: "
        "apt-get install -y chromium chromium-driver"
    )
    if os.environ.get("CI"):
        pytest.fail(f"CI is set but {reason}")
    pytest.skip(reason)


class _WebDriver:
    """The W3C WebDriver protocol over loopback HTTP, enough to load a page and look at it."""

    def __init__(self, chromium: str, driver: str, profile: str):
        with socket.socket() as probe:
            probe.bind(("127.0.0.1", 0))
            self.port = probe.getsockname()[1]
        self.process = subprocess.Popen(
            [driver, f"--port={self.port}"], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL
        )
        # Loopback only: never route through a proxy from the environment.
        self.opener = urllib.request.build_opener(urllib.request.ProxyHandler({}))
        try:
            self._wait_until_ready(deadline=time.monotonic() + 10)
            options = {"binary": chromium, "args": [*CHROMIUM_ARGS, f"--user-data-dir={profile}"]}
            capabilities = {"browserName": "chrome", "goog:chromeOptions": options}
            session = self.call("POST", "/session", {"capabilities": {"alwaysMatch": capabilities}})
        except BaseException:
            self.process.terminate()
            self.process.wait(timeout=10)
            raise
        self.session = f"/session/{session['sessionId']}"

    def _wait_until_ready(self, deadline: float) -> None:
        while time.monotonic() < deadline and self.process.poll() is None:
            try:
                if self.call("GET", "/status")["ready"]:
                    return
            except OSError:
                pass  # not listening yet
            time.sleep(0.05)
        raise TimeoutError("chromedriver did not become ready within 10 s")

    def call(self, method: str, path: str, body: dict | None = None):
        data = None if body is None else json.dumps(body).encode()
        request = urllib.request.Request(
            f"http://127.0.0.1:{self.port}{path}",
            data=data,
            method=method,
            headers={"Content-Type": "application/json"},
        )
        with self.opener.open(request, timeout=30) as response:
            return json.loads(response.read())["value"]

    def close(self) -> None:
        try:
            self.call("DELETE", self.session)
        finally:
            self.process.terminate()
            self.process.wait(timeout=10)


def test_note_renders_in_headless_chromium_with_visible_figures_and_tables(tmp_path):
    chromium, driver = _browser_tools()
    write_note(_sample_note(), tmp_path / "note")
    with tempfile.TemporaryDirectory() as profile:
        browser = _WebDriver(chromium, driver, profile)
        try:
            url = (tmp_path / "note" / "note.html").as_uri()
            browser.call("POST", f"{browser.session}/url", {"url": url})
            page = browser.call(
                "POST", f"{browser.session}/execute/sync", {"script": VISIBILITY_PROBE, "args": []}
            )
            browser.call(
                "POST",
                f"{browser.session}/execute/sync",
                {"script": "window.scrollTo(0, 0);", "args": []},
            )
            png = base64.b64decode(browser.call("GET", f"{browser.session}/screenshot"))
        finally:
            browser.close()

    assert len(page["svgs"]) == 2 and len(page["tables"]) == 2
    for element in page["svgs"] + page["tables"]:
        assert element["width"] > 100 and element["height"] > 50, element
        assert element["display"] != "none" and element["visibility"] == "visible", element
        assert float(element["opacity"]) == 1.0 and element["on_top"], element
    assert [t["shapes"] for t in page["tables"]] == [3 * 5, 2 * 2]  # every cell rendered
    assert all(s["shapes"] > 20 for s in page["svgs"])
    fail = page["fail"]
    assert fail["on_top"] and fail["top"] < page["first_section_top"]
    red, green, blue = (int(v) for v in re.findall(r"\d+", fail["background"])[:3])
    assert red > green + 10 and red > blue + 10  # a red box

    # The first screen is not blank: it shows the title, the red box and the start of the note.
    image = pytest.importorskip("matplotlib.image").imread(io.BytesIO(png), format="png")
    grey = image[..., :3].mean(axis=2)
    assert grey.shape[0] > 500 and grey.shape[1] > 500
    assert (grey < 0.9).mean() > 0.01 and grey.std() > 0.05
