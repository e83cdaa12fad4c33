"""Figures stay on their canvas, keep their series apart and carry alt text.

How a text's extent is estimated (the same way the layout does, so that a figure that passes
here has every text inside its view box):

- width: `svg.text_width`, a sum of per-character advances, each the largest advance of its
  character group in DejaVu Sans (the first face of the font stack and the widest) and
  Liberation Sans (metric-compatible with Arial and Helvetica), 1.2 times that for bold, and
  1 em for any character not listed. `test_width_estimate_never_falls_short_of_the_fonts`
  checks it against the fonts' own advance widths, and the Chromium test against a browser.
- horizontal placement from text-anchor: start, middle or end at x;
- height: 0.93 em above the baseline and 0.24 em below (DejaVu Sans: ascent 0.928 em, descent
  0.236 em), font size inherited from the nearest ancestor that sets one;
- a rotate(a cx cy) transform turns the box's corners about (cx, cy).

Check values from outside the project: the fonts' metric tables (read with fontTools, which
matplotlib depends on), Tol (2012) "Colour Schemes", SRON/EPS/TN/09-002, and a real browser.
"""

import doctest
import html
import json
import math
import re
import shutil
import subprocess
import tempfile
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest

from harvester.report import svg
from harvester.report.note import Figure, Note, Section, note_html
from harvester.report.svg import (
    ADVANCE_EM,
    BOLD_FACTOR,
    FONT_PX,
    TEXT_ASCENT_EM,
    TEXT_DESCENT_EM,
    TOL_QUALITATIVE,
    Axis,
    Series,
    category_map,
    heat_map,
    line_plot,
    text_width,
)

SVG = "{http://www.w3.org/2000/svg}"
SLACK_PX = 0.11  # coordinates are written rounded to 0.1 px

# 40 characters, with the wide glyphs of real labels (capitals, digits, "m", units)
LONG_LABELS = [f"Gap {k:2d} mm, Mode W: matched load 47kΩ (m)" for k in range(1, 13)]
assert all(len(label) == 40 for label in LONG_LABELS)
SHORT_LABELS = [f"{k} mm" for k in range(4, 16)]


# -- reading a figure back --------------------------------------------------------------------


def _boxes(document: str) -> list[tuple[str, tuple[float, float, float, float], float]]:
    """Each <text>: its content, estimated extent (x0, y0, x1, y1) and width, in view-box px."""
    root = ET.fromstring(document)
    parent = {child: node for node in root.iter() for child in node}

    def inherited(element, name, default):
        while element is not None:
            if element.get(name) is not None:
                return element.get(name)
            element = parent.get(element)
        return default

    boxes = []
    for element in root.iter(f"{SVG}text"):
        content = element.text or ""
        size = float(inherited(element, "font-size", 16))
        bold = inherited(element, "font-weight", "normal") == "bold"
        width = text_width(content, size, bold=bold)
        x, y = float(element.get("x")), float(element.get("y"))
        shift = {"start": 0.0, "middle": 0.5, "end": 1.0}[element.get("text-anchor", "start")]
        x0, x1 = x - shift * width, x + (1 - shift) * width
        y0, y1 = y - TEXT_ASCENT_EM * size, y + TEXT_DESCENT_EM * size
        corners = [(x0, y0), (x1, y0), (x0, y1), (x1, y1)]
        transform = element.get("transform")
        if transform:
            angle, cx, cy = map(
                float, re.fullmatch(r"rotate\((\S+) (\S+) (\S+)\)", transform).groups()
            )
            c, s = math.cos(math.radians(angle)), math.sin(math.radians(angle))
            corners = [
                (cx + c * (u - cx) - s * (v - cy), cy + s * (u - cx) + c * (v - cy))
                for u, v in corners
            ]
        us, vs = zip(*corners, strict=True)
        boxes.append((content, (min(us), min(vs), max(us), max(vs)), width))
    return boxes


def _view_box(document: str) -> tuple[float, float, float, float]:
    root = ET.fromstring(document)
    view = tuple(map(float, root.get("viewBox").split()))
    assert (view[2], view[3]) == (float(root.get("width")), float(root.get("height")))
    return view


def _plot_frame(document: str) -> tuple[float, float, float, float]:
    """The plot area's outline: the first unfilled rectangle drawn."""
    rect = next(r for r in ET.fromstring(document).iter(f"{SVG}rect") if r.get("fill") == "none")
    x, y = float(rect.get("x")), float(rect.get("y"))
    return x, y, x + float(rect.get("width")), y + float(rect.get("height"))


def _overlap(a, b) -> bool:
    return (
        a[0] < b[2] - SLACK_PX
        and b[0] < a[2] - SLACK_PX
        and a[1] < b[3] - SLACK_PX
        and b[1] < a[3] - SLACK_PX
    )


def _assert_on_canvas(document: str) -> None:
    left, top, width, height = _view_box(document)
    for content, (x0, y0, x1, y1), _ in _boxes(document):
        inside = (
            x0 >= left - SLACK_PX
            and y0 >= top - SLACK_PX
            and x1 <= left + width + SLACK_PX
            and y1 <= top + height + SLACK_PX
        )
        assert inside, f"{content!r} at {(x0, y0, x1, y1)} leaves the view box {width}×{height}"


def _assert_texts_apart(document: str) -> None:
    """No two texts overlap, and none but 'no data' overlaps the plot area."""
    boxes = _boxes(document)
    frame = _plot_frame(document)
    for k, (content, box, _) in enumerate(boxes):
        if content != "no data":
            assert not _overlap(box, frame), f"{content!r} overlaps the plot area"
        for other, other_box, _ in boxes[k + 1 :]:
            assert not _overlap(box, other_box), f"{content!r} overlaps {other!r}"


def _assert_accessible(document: str) -> tuple[str, str]:
    """role="img", and aria-labelledby naming a non-empty <title> and <desc>."""
    root = ET.fromstring(document)
    assert root.get("role") == "img"
    ids = root.get("aria-labelledby").split()
    found = {element.get("id"): element for element in root.iter() if element.get("id")}
    title, desc = (found[i] for i in ids)
    assert (title.tag, desc.tag) == (f"{SVG}title", f"{SVG}desc")
    assert title.text.strip() and desc.text.strip()
    return title.text, desc.text


def _series_strokes(document: str) -> list[tuple[str, str]]:
    """(stroke colour, dash pattern) of each line drawn in the plot area."""
    root = ET.fromstring(document)
    paths = root.findall(f".//{SVG}g[@class='data']/{SVG}path[@stroke]")
    return [(p.get("stroke"), p.get("stroke-dasharray", "")) for p in paths]


def _looks(document: str) -> list[tuple[str, str, tuple[str, ...]]]:
    """(colour, dash pattern, marker shapes) of each series' line in the plot area.

    The plot area holds each series in turn: its band, its line, then its markers.
    """
    looks = []
    for element in ET.fromstring(document).find(f".//{SVG}g[@class='data']"):
        if element.tag == f"{SVG}path" and element.get("stroke"):
            looks.append([element.get("stroke"), element.get("stroke-dasharray", ""), set()])
        elif element.tag != f"{SVG}path":
            looks[-1][2].add(element.tag.removeprefix(SVG))
    return [(colour, dash, tuple(sorted(shapes))) for colour, dash, shapes in looks]


def _curves(n: int, labels, **kwargs) -> list[Series]:
    x = np.linspace(-3.0, 3.0, 161)
    return [Series(labels[k], x, 0.5 * (k - 5) * x**2 + 0.25 * x**4, **kwargs) for k in range(n)]


# -- layout -----------------------------------------------------------------------------------


@pytest.mark.parametrize("labels", [SHORT_LABELS, LONG_LABELS], ids=["short", "long"])
@pytest.mark.parametrize("n", range(1, 13))
def test_line_plot_keeps_every_text_on_the_canvas_and_every_series_distinct(n, labels):
    for width in (640, 480):  # the note's size, and a narrower one
        document = line_plot(
            _curves(n, labels),
            x_axis=Axis("tip deflection", "mm"),
            y_axis=Axis("potential energy", "µJ"),
            title="Potential energy of the beam and magnets by gap",
            width=width,
        )
        _assert_on_canvas(document)
        _assert_texts_apart(document)
        _assert_accessible(document)
        frame = _plot_frame(document)
        assert frame[3] - frame[1] >= svg.MIN_PLOT_HEIGHT - SLACK_PX
        assert frame[2] - frame[0] >= 0.6 * width  # the legend never eats the plot
        strokes = _series_strokes(document)
        assert len(strokes) == n
        assert len({colour for colour, _ in strokes}) == n, "a colour repeats"
        assert {c for c, _ in strokes} == set(TOL_QUALITATIVE[n - 1])


@pytest.mark.parametrize("n", range(1, 13))
def test_series_stay_apart_in_greyscale(n):
    # Without colour, a series is its dash pattern and whether it carries markers and of which
    # shape: no two series of up to 12 may share all three.
    document = line_plot(_curves(n, SHORT_LABELS), x_axis=Axis("x", "mm"), y_axis=Axis("U", "µJ"))
    looks = [(dash, shapes) for _, dash, shapes in _looks(document)]
    assert len(looks) == n and len(set(looks)) == n, looks
    legend = ET.fromstring(document).find(f".//{SVG}g[@class='legend']")
    assert len(legend.findall(f"{SVG}line")) == n  # the key shows each line's style


def test_a_dashed_reference_curve_is_never_solid_and_scatter_keeps_its_markers():
    x = [1.0, 2.0, 3.0]
    document = line_plot(
        [
            Series("same beam without magnets", x, [1.0, 2.0, 3.0], dashed=True),
            Series("with magnets", x, [2.0, 3.0, 5.0], markers=True),
            Series("measured", x, [2.5, 3.5, 4.5], line=False, markers=True),
        ],
        x_axis=Axis("gap", "mm"),
        y_axis=Axis("power", "µW"),
    )
    (reference, reference_dash), (_, dash) = _series_strokes(document)
    assert reference_dash != "" and dash == ""
    data = ET.fromstring(document).find(f".//{SVG}g[@class='data']")
    assert len(data.findall(f"{SVG}path[@stroke]")) == 2  # the scatter draws no line
    assert len([m for m in data if m.tag != f"{SVG}path"]) == 6  # 3 + 3 markers
    assert reference == TOL_QUALITATIVE[2][0]  # Tol's three-colour set for three series


def test_more_than_twelve_series_reuse_colours_but_not_looks():
    # The documented behaviour past 12: the 12 colours repeat and dash and markers separate.
    document = line_plot(
        _curves(14, [f"s{k}" for k in range(14)]), x_axis=Axis("x"), y_axis=Axis("y")
    )
    looks = _looks(document)
    assert len({colour for colour, _, _ in looks}) == 12 and len(set(looks)) == 14
    _assert_on_canvas(document)


def test_long_titles_and_axis_titles_wrap_inside_the_canvas():
    words = "energy stored in the beam and the magnet pair at the candidate gap " * 3
    document = line_plot(
        _curves(3, LONG_LABELS),
        x_axis=Axis(words.strip(), "µJ"),
        y_axis=Axis(words.strip(), "µJ"),
        title=words.strip() + " Supercalifragilisticexpialidocious" * 3,
    )
    _assert_on_canvas(document)
    _assert_texts_apart(document)
    empty = line_plot([], x_axis=Axis("x" * 200), y_axis=Axis("y"), title="T" * 120)
    _assert_on_canvas(empty)


def test_heat_map_keeps_colour_bar_labels_and_the_missing_key_on_the_canvas():
    frequencies = np.linspace(5.0, 200.0, 30)
    gaps = np.linspace(4.0, 15.0, 12)
    onset = np.outer(np.linspace(1.0, 3.0, 12), np.sqrt(frequencies)) * 1e-5
    onset[3, 4] = np.nan
    for value_axis, missing in [
        (Axis("hop onset", "g", log=True), "monostable or no hopping found"),
        (Axis("tone amplitude at which hopping starts, from rest in a well", "m/s²"), "x" * 90),
    ]:
        document = heat_map(
            frequencies,
            gaps,
            onset,
            x_axis=Axis("frequency", "Hz"),
            y_axis=Axis("magnet gap", "mm"),
            value_axis=value_axis,
            missing_label=missing,
            title="Tone amplitude needed to start hopping, for every candidate gap and frequency",
        )
        _assert_on_canvas(document)
        _assert_texts_apart(document)
        title, description = _assert_accessible(document)
        assert "grey cells" in description and value_axis.title in description


def _basins(n: int = 60) -> np.ndarray:
    """A map of three interleaved categories and a few missing cells, like a basin map."""
    x, v = np.meshgrid(np.linspace(-1.5, 1.5, n), np.linspace(-1.5, 1.5, n))
    codes = (np.floor(2.0 * np.arctan2(v, x) + 3.0 * np.hypot(x, v)) % 3).astype(int)
    codes[:2, :3] = -1
    return codes


@pytest.mark.parametrize("labels", [SHORT_LABELS[:3], LONG_LABELS[:7]], ids=["short", "long"])
def test_category_map_keeps_its_key_on_the_canvas_and_its_categories_apart(labels):
    codes = _basins() % len(labels)
    codes[:2, :3] = -1
    for width in (640, 480):
        document = category_map(np.linspace(-4, 4, 60), np.linspace(-0.4, 0.4, 60), codes,
                                labels, x_axis=Axis("initial tip deflection", "mm"),
                                y_axis=Axis("initial tip speed", "m/s"),
                                missing_label="strikes the stops", title="Basins of attraction",
                                width=width)
        _assert_on_canvas(document)
        _assert_texts_apart(document)
        title, description = _assert_accessible(document)
        assert title == "Basins of attraction" and all(label in description for label in labels)
        cells = ET.fromstring(document).find(f".//{SVG}g[@class='cells']")
        fills = [path.get("fill") for path in cells]
        # one path per category present, in Tol's (2012) set for that many, and grey for the
        # missing cells, each drawn once
        assert fills == [*TOL_QUALITATIVE[len(labels) - 1][:len(fills) - 1], svg.MISSING_COLOUR]
        legend = ET.fromstring(document).find(f".//{SVG}g[@class='legend']")
        assert len(legend.findall(f"{SVG}rect")) == len(labels) + 1
    with pytest.raises(ValueError, match="names no category"):
        category_map([0.0, 1.0], [0.0], [[0, 3]], ["a", "b"], x_axis=Axis("x"), y_axis=Axis("y"))


def test_alt_text_is_passed_in_or_built_from_the_axes_and_survives_inlining_in_the_note():
    # WAI-ARIA 1.1 (W3C 2017): role="img" takes its accessible name from the elements that
    # aria-labelledby names, so each id must be unique in the page the figure is inlined in.
    x = [1.0, 2.0]
    given = line_plot(
        [Series("a", x, x)], x_axis=Axis("gap", "mm"), y_axis=Axis("power", "µW"),
        description="Power rises with the gap.",
    )  # fmt: skip
    assert _assert_accessible(given) == ("power [µW] against gap [mm]", "Power rises with the gap.")
    built = _assert_accessible(
        line_plot(
            _curves(8, SHORT_LABELS), x_axis=Axis("gap", "mm", log=True), y_axis=Axis("U", "µJ")
        )
    )[1]
    assert built.startswith("Line plot of U [µJ] against gap [mm] (log scale), 8 series: 4 mm")
    assert built.endswith("and 2 more.")
    figures = [
        Figure("Power", given),
        Figure("Map", heat_map([1.0, 2.0], [1.0], [[1.0, np.nan]], x_axis=Axis("f", "Hz"),
                               y_axis=Axis("gap", "mm"), value_axis=Axis("onset", "g"))),
    ]  # fmt: skip
    page = note_html(Note("t", sections=[Section("s", figures=figures)]))
    inlined = re.findall(r"<svg.*?</svg>", page, re.S)
    assert len(inlined) == 2
    for document in inlined:
        _assert_accessible(document)
        for name in ET.fromstring(document).get("aria-labelledby").split():
            assert page.count(f'id="{name}"') == 1


def test_width_estimate_never_falls_short_of_the_fonts():
    # The fonts' own advance widths (hmtx) and vertical metrics (hhea): DejaVu Sans as
    # matplotlib ships it, and Liberation Sans (metric-compatible with Arial) if installed.
    matplotlib = pytest.importorskip("matplotlib")
    ttlib = pytest.importorskip("fontTools.ttLib")
    from matplotlib import font_manager

    fonts = Path(matplotlib.get_data_path()) / "fonts" / "ttf"
    faces = [(fonts / "DejaVuSans.ttf", False), (fonts / "DejaVuSans-Bold.ttf", True)]
    try:
        liberation = font_manager.FontProperties(family="Liberation Sans")
        faces.append((Path(font_manager.findfont(liberation, fallback_to_default=False)), False))
    except ValueError:
        pass  # not installed: DejaVu Sans, the widest of the stack, is still checked
    listed = "".join(chars for _, chars in ADVANCE_EM)
    printable = "".join(chr(c) for c in range(32, 127))
    sentence = "same beam without magnets, gap 10 mm"
    for path, bold in faces:
        font = ttlib.TTFont(path)
        per_em = font["head"].unitsPerEm
        cmap, metrics = font.getBestCmap(), font["hmtx"]

        def advance(character):
            return metrics[cmap[ord(character)]][0] / per_em * FONT_PX  # noqa: B023

        for character in set(listed + printable + "µ²³°×·–—Ωαβ±≤≥"):
            if ord(character) in cmap:
                estimate = text_width(character, bold=bold)
                assert estimate >= advance(character) - 1e-9, (path.name, character)
        assert font["hhea"].ascent / per_em <= TEXT_ASCENT_EM
        assert -font["hhea"].descent / per_em <= TEXT_DESCENT_EM
        # and not wastefully wide: a legend sized by it still fits its text closely
        real = sum(advance(c) for c in sentence)
        assert text_width(sentence, bold=bold) <= 1.35 * real, path.name
    assert BOLD_FACTOR >= 1.0


def test_examples_in_the_docstrings_run():
    result = doctest.testmod(svg)
    assert result.failed == 0 and result.attempted >= 2


def test_colour_sets_are_tols_and_distinct():
    # Tol (2021), "Colour Schemes", SRON/EPS/TN/09-002 issue 3.2, the "muted" qualitative
    # scheme (pale grey for missing data left out), which issue 2.2 (2012) gives for 9 series.
    muted = ["#332288", "#88CCEE", "#44AA99", "#117733", "#999933", "#DDCC77", "#CC6677",
             "#882255", "#AA4499"]  # fmt: skip
    assert list(TOL_QUALITATIVE[8]) == muted
    for n, colours in enumerate(TOL_QUALITATIVE, start=1):
        assert len(colours) == n and len(set(colours)) == n
        assert set(colours) <= set(TOL_QUALITATIVE[-1]) | {"#4477AA"}  # 1-4 add a mid blue


# -- in a real browser ------------------------------------------------------------------------

# Runs in the page: every text's box as the browser lays it out, relative to its own <svg>,
# and its advance (getComputedTextLength), written into the DOM for --dump-dom to print.
MEASURE = """
const figures = [...document.querySelectorAll("svg")].map(figure => {
  const canvas = figure.getBoundingClientRect();
  return {width: canvas.width, height: canvas.height,
          texts: [...figure.querySelectorAll("text")].map(t => {
            const r = t.getBoundingClientRect();
            return {text: t.textContent, length: t.getComputedTextLength(),
                    box: [r.left - canvas.left, r.top - canvas.top,
                          r.right - canvas.left, r.bottom - canvas.top]};
          })};
});
document.getElementById("out").textContent = JSON.stringify(figures);
"""


def test_chromium_draws_every_text_inside_the_canvas(tmp_path):
    chromium = shutil.which("chromium") or "/usr/bin/chromium"
    if not Path(chromium).exists():
        pytest.skip("headless Chromium (/usr/bin/chromium) is not installed")
    figures = [
        line_plot(_curves(12, LONG_LABELS), x_axis=Axis("tip deflection", "mm"),
                  y_axis=Axis("potential energy", "µJ"), title="Potential energy by gap"),
        line_plot(_curves(12, SHORT_LABELS), x_axis=Axis("x", "mm"), y_axis=Axis("U", "µJ")),
        heat_map(np.linspace(5.0, 200.0, 30), [6.0, 8.0, 10.0], np.outer([1, 2, np.nan],
                 np.arange(30.0) + 1), x_axis=Axis("frequency", "Hz"),
                 y_axis=Axis("magnet gap", "mm"), value_axis=Axis("hop onset", "g", log=True),
                 missing_label="monostable or no hopping found", title="Hop onset"),
        category_map(np.linspace(-4, 4, 60), np.linspace(-0.4, 0.4, 60), _basins(),
                     LONG_LABELS[:3], x_axis=Axis("initial tip deflection", "mm"),
                     y_axis=Axis("initial tip speed", "m/s"), missing_label="strikes the stops",
                     title="Basins of attraction"),
    ]  # fmt: skip
    page = tmp_path / "figures.html"
    page.write_text(
        '<!DOCTYPE html><html><head><meta charset="utf-8"></head><body style="margin:0">'
        + "".join(f"<div>{figure}</div>" for figure in figures)
        + f'<pre id="out"></pre><script>{MEASURE}</script></body></html>'
    )
    with tempfile.TemporaryDirectory() as profile:
        result = subprocess.run(
            [chromium, "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
             "--disable-background-networking", "--disable-component-update",
             f"--user-data-dir={profile}", "--dump-dom", page.as_uri()],
            capture_output=True, text=True, timeout=60,
        )  # fmt: skip
    found = re.search(r'<pre id="out">(.*?)</pre>', result.stdout, re.S)
    assert found and found.group(1), result.stderr[-2000:]
    measured = json.loads(html.unescape(found.group(1)))
    assert len(measured) == len(figures)
    for figure, document in zip(measured, figures, strict=True):
        estimates = _boxes(document)
        assert len(figure["texts"]) == len(estimates)
        for text, (content, _, width) in zip(figure["texts"], estimates, strict=True):
            x0, y0, x1, y1 = text["box"]
            assert x0 >= -0.5 and y0 >= -0.5, text
            assert x1 <= figure["width"] + 0.5 and y1 <= figure["height"] + 0.5, text
            # the estimate is an upper bound of the advance the browser gives the text
            assert text["text"] == content and text["length"] <= width + 0.05, text
