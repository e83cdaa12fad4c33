"""Small, self-contained SVG figures for the design note: lines, bands, markers and heat maps.

No plotting library and no network: each function returns one ``<svg>`` element as a string that
can be saved as a file or inlined in HTML.  The output depends only on the input (coordinates are
rounded to 0.1 px, ids are content hashes), so a note regenerated from the same study is
byte-identical and can be diffed.

    line_plot([Series("bistable", f, p, band=(p_lo, p_hi))],
              x_axis=Axis("frequency", "Hz", log=True), y_axis=Axis("mean power", "µW"))
    heat_map(f, gaps, onset, x_axis=Axis("frequency", "Hz"), y_axis=Axis("gap", "mm"),
             value_axis=Axis("hop onset", "m/s²"))
"""

from __future__ import annotations

import hashlib
import math
from collections.abc import Sequence
from dataclasses import dataclass
from html import escape

import numpy as np

# Qualitative colour schemes of Tol (2012), "Colour Schemes", SRON technical note
# SRON/EPS/TN/09-002, issue 2.2: one published set for each number of series from 1 to 12,
# chosen to stay distinct to readers with the common colour-vision deficiencies. The 9-colour
# set is the "muted" scheme of the note's later issue (Tol 2021, issue 3.2).
TOL_QUALITATIVE = (
    ("#4477AA",),
    ("#4477AA", "#CC6677"),
    ("#4477AA", "#DDCC77", "#CC6677"),
    ("#4477AA", "#117733", "#DDCC77", "#CC6677"),
    ("#332288", "#88CCEE", "#117733", "#DDCC77", "#CC6677"),
    ("#332288", "#88CCEE", "#117733", "#DDCC77", "#CC6677", "#AA4499"),
    ("#332288", "#88CCEE", "#44AA99", "#117733", "#DDCC77", "#CC6677", "#AA4499"),
    ("#332288", "#88CCEE", "#44AA99", "#117733", "#999933", "#DDCC77", "#CC6677", "#AA4499"),
    ("#332288", "#88CCEE", "#44AA99", "#117733", "#999933", "#DDCC77", "#CC6677", "#882255",
     "#AA4499"),
    ("#332288", "#88CCEE", "#44AA99", "#117733", "#999933", "#DDCC77", "#661100", "#CC6677",
     "#882255", "#AA4499"),
    ("#332288", "#6699CC", "#88CCEE", "#44AA99", "#117733", "#999933", "#DDCC77", "#661100",
     "#CC6677", "#882255", "#AA4499"),
    ("#332288", "#6699CC", "#88CCEE", "#44AA99", "#117733", "#999933", "#DDCC77", "#661100",
     "#CC6677", "#AA4466", "#882255", "#AA4499"),
)  # fmt: skip
SERIES_COLOURS = TOL_QUALITATIVE[-1]
# Dash patterns [px at stroke width 2], told apart in greyscale print; solid first. A series
# whose pattern repeats an earlier series' also gets sparse markers (see `line_plot`).
DASH_PATTERNS = ("", "7 3", "2 2", "9 3 2 3", "9 3 2 3 2 3", "15 4")
MARKER_SHAPES = ("circle", "square", "triangle", "diamond", "triangle-down", "cross")
SPARSE_MARKS = 8  # markers along a line that only needs them to be told apart: fewer clutter
# viridis (van der Walt & Smith 2015, the matplotlib default colour map) sampled at 33 evenly
# spaced points; perceptually uniform and readable in greyscale.
VIRIDIS = (
    "#440154", "#470d60", "#48186a", "#482374", "#472d7b", "#453781", "#424086", "#3e4989",
    "#3b528b", "#375b8d", "#33638d", "#2f6b8e", "#2c728e", "#297a8e", "#26828e", "#23898e",
    "#21918c", "#1f988b", "#1fa088", "#22a785", "#28ae80", "#32b67a", "#3fbc73", "#4ec36b",
    "#5ec962", "#70cf57", "#84d44b", "#98d83e", "#addc30", "#c2df23", "#d8e219", "#ece51b",
    "#fde725",
)  # fmt: skip
MISSING_COLOUR = "#bdbdbd"
FONT = "DejaVu Sans, Helvetica, Arial, sans-serif"
FONT_PX = 12

# Text is measured without a font engine, so the estimate must never fall short: each character
# counts as the largest advance [em] in its group, taken over DejaVu Sans (the first and widest
# face in FONT) and Liberation Sans (metric-compatible with Arial and Helvetica). Finer groups
# would be tighter; these overstate ordinary labels by 5-7 % in DejaVu Sans, about 20 % in
# Liberation Sans.
ADVANCE_EM = (
    (0.34, " .,:;'|ijl·/\\"),
    (0.42, "!()[]frtI-²³"),
    (0.64, 'abcdeghknopqsuvxyz0123456789FJLT$?*"_–°`{}µβ'),
    (0.84, "ABCDEGHKNOPQRSUVXYZw+=<>~^#×±≤≥&αΩ"),
)
WIDEST_EM = 1.02  # m, M, W, %, @ (1.015 em in Liberation Sans), em dash, anything unlisted
BOLD_FACTOR = 1.2  # every DejaVu Sans Bold glyph is within 1.2 times its group's advance
# The box a line of text occupies about its baseline (DejaVu Sans: ascent 0.928 em, descent
# 0.236 em; Liberation Sans 0.905 and 0.212).
TEXT_ASCENT_EM = 0.93
TEXT_DESCENT_EM = 0.24
LINE_PX = 15  # baseline-to-baseline distance of wrapped lines at FONT_PX

# Layout [px]. The plot area takes what the text and the key leave; rather than squeezing it
# below MIN_PLOT_HEIGHT the canvas grows.
PAD = 8  # empty border of the canvas
MIN_PLOT_HEIGHT = 180
LEGEND_RIGHT_FRACTION = 0.3  # widest legend kept beside the plot; wider ones go below it
SWATCH_PX = 30  # legend sample of line, dash pattern and marker
SWATCH_GAP = 6
LEGEND_ROW_PX = 18  # one-line legend entry; each further line adds LINE_PX
LEGEND_COLUMN_GAP = 18

_ADVANCE = {c: em for em, chars in ADVANCE_EM for c in chars}


@dataclass(frozen=True)
class Axis:
    """One axis: quantity name, unit, scale and optional fixed limits."""

    label: str
    unit: str = ""
    log: bool = False
    limits: tuple[float, float] | None = None

    @property
    def title(self) -> str:
        return f"{self.label} [{self.unit}]" if self.unit else self.label


@dataclass(frozen=True)
class Series:
    """One curve: y against x, optionally with a shaded band (lower, upper) at the same x."""

    label: str
    x: Sequence[float]
    y: Sequence[float]
    band: tuple[Sequence[float], Sequence[float]] | None = None
    line: bool = True
    markers: bool = False
    dashed: bool = False


# -- scales and ticks -------------------------------------------------------------------------


def nice_step(span: float, intervals: int = 5) -> float:
    """Tick spacing 1, 2 or 5 × 10^k giving about `intervals` intervals over `span`.

    Heckbert (1990), "Nice numbers for graph labels", Graphics Gems I, pp. 61–63.
    """
    raw = span / intervals
    exponent = math.floor(math.log10(raw))
    fraction = raw / 10.0**exponent
    nice = 1.0 if fraction < 1.5 else 2.0 if fraction < 3.0 else 5.0 if fraction < 7.0 else 10.0
    return nice * 10.0**exponent


def linear_ticks(low: float, high: float, step: float) -> list[float]:
    """Multiples of `step` within [low, high] (with a little rounding slack)."""
    first = math.ceil(low / step - 1e-9)
    last = math.floor(high / step + 1e-9)
    return [float(f"{k * step:.12g}") for k in range(first, last + 1)]


def log_ticks(low: float, high: float) -> list[float]:
    """Decades within [low, high]; 1-2-5 steps as well when fewer than three decades fit."""
    lo, hi = math.log10(low), math.log10(high)
    first, last = math.ceil(lo - 1e-9), math.floor(hi + 1e-9)
    if last - first >= 2:
        stride = max(1, math.ceil((last - first) / 8))
        return [10.0**k for k in range(first, last + 1, stride)]
    candidates = [m * 10.0**k for k in range(first - 1, last + 1) for m in (1.0, 2.0, 5.0)]
    return [float(f"{t:.12g}") for t in candidates if lo - 1e-9 <= math.log10(t) <= hi + 1e-9]


def _one_two_five(value: float, direction: int) -> float:
    """The nearest of 1, 2, 5 × 10^k below (direction −1) or above (+1) a positive value."""
    exponent = math.floor(math.log10(value))
    steps = [m * 10.0**k for k in (exponent - 1, exponent, exponent + 1) for m in (1.0, 2.0, 5.0)]
    steps = [float(f"{t:.12g}") for t in steps]
    if direction < 0:
        return max(t for t in steps if t <= value * (1 + 1e-9))
    return min(t for t in steps if t >= value * (1 - 1e-9))


def tick_labels(ticks: Sequence[float], *, step: float | None = None) -> list[str]:
    """Tick values with just enough digits to tell neighbours apart.

    Linear axes pass their `step`; log axes pass none and each tick is its own resolution.
    Scientific notation is used for the whole axis when any tick is ≥ 1e5 or finer than 1e-3.
    """
    finite = [abs(t) for t in ticks if t != 0.0]
    if not finite:
        return ["0" for _ in ticks]
    finest = step if step is not None else min(finite)
    scientific = max(finite) >= 1e5 or finest < 1e-3
    labels = []
    for t in ticks:
        resolution = step if step is not None else abs(t)
        if t == 0.0:
            labels.append("0")
        elif scientific:
            digits = max(0, math.floor(math.log10(abs(t))) - math.floor(math.log10(resolution)))
            mantissa, exponent = f"{t:.{digits}e}".split("e")
            labels.append(f"{mantissa}e{int(exponent)}")
        else:
            decimals = max(0, -math.floor(math.log10(resolution) + 1e-9))
            labels.append(f"{t:.{decimals}f}")
    return labels


@dataclass(frozen=True)
class _Scale:
    """Maps data values on one axis to pixels."""

    low: float
    high: float
    log: bool
    pixel_low: float
    pixel_high: float

    def __call__(self, value):
        f = np.log10 if self.log else np.asarray
        fraction = (f(value) - f(self.low)) / (f(self.high) - f(self.low))
        return self.pixel_low + fraction * (self.pixel_high - self.pixel_low)

    def ticks(self) -> tuple[list[float], list[str]]:
        if self.log:
            ticks = log_ticks(self.low, self.high)
            return ticks, tick_labels(ticks)
        step = nice_step(self.high - self.low)
        ticks = linear_ticks(self.low, self.high, step)
        return ticks, tick_labels(ticks, step=step)


def _plottable(values: np.ndarray, log: bool) -> np.ndarray:
    """Mask of values that can be drawn: finite, and positive on a log axis."""
    with np.errstate(invalid="ignore"):
        return np.isfinite(values) & ((values > 0) if log else True)


def _data_limits(values: np.ndarray, axis: Axis) -> tuple[float, float]:
    """Axis limits from the data: widened to whole ticks (linear) or decades (log)."""
    if axis.limits is not None:
        low, high = axis.limits
        if not low < high or (axis.log and low <= 0):
            raise ValueError(f"axis '{axis.label}': limits must be increasing (and > 0 if log)")
        return float(low), float(high)
    data = values[_plottable(values, axis.log)]
    if data.size == 0:
        return (1.0, 10.0) if axis.log else (0.0, 1.0)
    low, high = float(data.min()), float(data.max())
    if axis.log:
        low, high = _one_two_five(low, -1), _one_two_five(high, +1)
        return (low, high) if high > low else (low, 10.0 * low)
    if low == high:
        pad = abs(low) * 0.1 or 1.0
        low, high = low - pad, high + pad
    step = nice_step(high - low)
    return math.floor(low / step + 1e-9) * step, math.ceil(high / step - 1e-9) * step


# -- text -------------------------------------------------------------------------------------


def text_width(text: str, font_px: float = FONT_PX, *, bold: bool = False) -> float:
    """Upper estimate of the width [px] of one line of `text` set in FONT at `font_px`.

    The sum of per-character advances from ADVANCE_EM (WIDEST_EM for a character not listed),
    times BOLD_FACTOR for bold text; kerning only narrows text, so it is left out.

    >>> round(text_width("gap [mm]"), 1)
    61.7
    """
    em = sum(_ADVANCE.get(character, WIDEST_EM) for character in text)
    return em * font_px * (BOLD_FACTOR if bold else 1.0)


def wrap_text(
    text: str, max_px: float, font_px: float = FONT_PX, *, bold: bool = False
) -> list[str]:
    """`text` as lines no wider than `max_px` (by `text_width`), broken at spaces.

    A word wider than `max_px` on its own is split between characters (at least one per line).

    >>> wrap_text("same beam without magnets", 100)
    ['same beam', 'without', 'magnets']
    """
    if text_width(text, font_px, bold=bold) <= max_px:
        return [text] if text else []
    lines, line = [], ""
    for word in text.split():
        candidate = f"{line} {word}" if line else word
        if text_width(candidate, font_px, bold=bold) <= max_px:
            line = candidate
            continue
        if line:
            lines.append(line)
        while len(word) > 1 and text_width(word, font_px, bold=bold) > max_px:
            cut = 1
            while cut < len(word) - 1 and text_width(word[: cut + 1], font_px, bold=bold) <= max_px:
                cut += 1
            lines.append(word[:cut])
            word = word[cut:]
        line = word
    return [*lines, line] if line else lines


def _ascent(font_px: float = FONT_PX) -> float:
    return TEXT_ASCENT_EM * font_px


def _descent(font_px: float = FONT_PX) -> float:
    return TEXT_DESCENT_EM * font_px


# -- SVG pieces ------------------------------------------------------------------------------


def _px(value: float) -> str:
    text = f"{value:.1f}"
    return "0.0" if text == "-0.0" else text


def _text(x: float, y: float, content: str, *, anchor: str = "middle", extra: str = "") -> str:
    return f'<text x="{_px(x)}" y="{_px(y)}" text-anchor="{anchor}"{extra}>{escape(content)}</text>'


def _marker(shape: str, x: float, y: float, colour: str) -> str:
    r = 3.5
    if shape == "circle":
        return f'<circle cx="{_px(x)}" cy="{_px(y)}" r="{r}" fill="{colour}"/>'
    if shape == "square":
        return (
            f'<rect x="{_px(x - r)}" y="{_px(y - r)}" width="{2 * r}" height="{2 * r}" '
            f'fill="{colour}"/>'
        )
    if shape == "triangle":
        points = ((x, y - 1.2 * r), (x - 1.1 * r, y + 0.8 * r), (x + 1.1 * r, y + 0.8 * r))
    elif shape == "triangle-down":
        points = ((x, y + 1.2 * r), (x - 1.1 * r, y - 0.8 * r), (x + 1.1 * r, y - 0.8 * r))
    elif shape == "cross":
        a, b = 0.4 * r, 1.2 * r  # half the bar width, half the bar length
        points = (
            (x - a, y - b), (x + a, y - b), (x + a, y - a), (x + b, y - a), (x + b, y + a),
            (x + a, y + a), (x + a, y + b), (x - a, y + b), (x - a, y + a), (x - b, y + a),
            (x - b, y - a), (x - a, y - a),
        )  # fmt: skip
    else:
        points = ((x, y - 1.3 * r), (x + 1.3 * r, y), (x, y + 1.3 * r), (x - 1.3 * r, y))
    joined = " ".join(f"{_px(px)},{_px(py)}" for px, py in points)
    return f'<polygon points="{joined}" fill="{colour}"/>'


def _runs(keep: np.ndarray) -> list[slice]:
    """Contiguous stretches of True: a gap in the data breaks the line instead of bridging it."""
    edges = np.flatnonzero(np.diff(np.concatenate(([0], keep.astype(np.int8), [0]))))
    return [slice(int(a), int(b)) for a, b in zip(edges[::2], edges[1::2], strict=True)]


def _polyline(xs: np.ndarray, ys: np.ndarray) -> str:
    return "M" + " L".join(f"{_px(x)} {_px(y)}" for x, y in zip(xs, ys, strict=True))


# -- layout -----------------------------------------------------------------------------------

# Vertical offsets below the plot area [px]: the x tick labels' baseline, and the first baseline
# of the x-axis title (tick, gap, a tick label's height, gap, the title's ascent).
X_TICK_BASELINE = 17.0
X_TITLE_BASELINE = 38.0
TICK_LABEL_OFFSET = 7.0  # from the axis to the y tick labels' right end (tick 4 px, gap 3 px)
BLOCK_GAP = 10.0  # between the figure's text blocks (title, axis title, key)


@dataclass(frozen=True)
class _Frame:
    """Where the plot area and the texts around it go on a canvas of `width` × `height`.

    Heights are settled first (they depend only on the width), then the left margin from the
    y-axis title wrapped to the plot's height and the widest y tick label.
    """

    width: float
    height: float
    left: float
    right: float
    top: float
    bottom: float
    title: tuple[str, ...]
    x_title: tuple[str, ...]
    y_title: tuple[str, ...]
    below: float  # top of the block under the x-axis title (legend, missing-value key)

    def texts(self) -> list[str]:
        """The figure title, centred on the canvas, and both axis titles."""
        parts = [
            _text(self.width / 2, PAD + _ascent() + k * LINE_PX, line, extra=' font-weight="bold"')
            for k, line in enumerate(self.title)
        ]
        for k, line in enumerate(self.x_title):
            half = text_width(line) / 2
            centre = min(max((self.left + self.right) / 2, PAD + half), self.width - PAD - half)
            parts.append(
                _text(
                    centre,
                    self.bottom + X_TITLE_BASELINE + k * LINE_PX,
                    line,
                    extra=' class="axis-title"',
                )
            )
        middle = (self.top + self.bottom) / 2
        for k, line in enumerate(self.y_title):
            x = PAD + _ascent() + k * LINE_PX  # rotated −90°: the ascent points left
            parts.append(
                _text(
                    x,
                    middle,
                    line,
                    extra=f' class="axis-title" transform="rotate(-90 {_px(x)} {_px(middle)})"',
                )
            )
        return parts


def _frame(
    width: float,
    height: float,
    *,
    title: str,
    x_axis: Axis,
    y_axis: Axis,
    x_labels: Sequence[str],
    y_labels: Sequence[str],
    right_block: float = 0.0,
    below_block: float = 0.0,
) -> _Frame:
    """Lay out the plot area so every text lies on the canvas.

    `right_block` [px] is kept free right of the plot (legend or colour bar, its gap included);
    `below_block` [px] under the x-axis title. The canvas grows in height when the plot would
    otherwise be shorter than MIN_PLOT_HEIGHT.
    """
    title_lines = tuple(wrap_text(title, width - 2 * PAD, bold=True))
    x_lines = tuple(wrap_text(x_axis.title, width - 2 * PAD))
    top = (
        PAD + _ascent() + (len(title_lines) - 1) * LINE_PX + _descent() + BLOCK_GAP + _ascent() / 2
        if title_lines
        else PAD + _ascent()
    )
    under_axis = (
        X_TITLE_BASELINE + (len(x_lines) - 1) * LINE_PX if x_lines else X_TICK_BASELINE
    ) + _descent()
    below_stack = under_axis + (BLOCK_GAP + below_block if below_block else 0.0) + PAD
    height = max(float(height), top + MIN_PLOT_HEIGHT + below_stack)
    bottom = height - below_stack

    y_lines = tuple(wrap_text(y_axis.title, bottom - top))
    y_title_edge = PAD + _ascent() + (len(y_lines) - 1) * LINE_PX + _descent() if y_lines else PAD
    widest_y = max((text_width(label) for label in y_labels), default=0.0)
    first_x, last_x = (text_width(x_labels[i]) / 2 if x_labels else 0.0 for i in (0, -1))
    left = max(y_title_edge + BLOCK_GAP / 2 + widest_y + TICK_LABEL_OFFSET, PAD + first_x)
    right = width - PAD - max(right_block, last_x, PAD)
    return _Frame(
        float(width),
        height,
        left,
        right,
        top,
        bottom,
        title_lines,
        x_lines,
        y_lines,
        bottom + under_axis + BLOCK_GAP,
    )


def _axes(frame: _Frame, x_scale: _Scale, y_scale: _Scale, *, grid: bool = True) -> list[str]:
    """Frame, grid (optional), ticks, tick labels and axis titles around the plot area."""
    left, right, top, bottom = frame.left, frame.right, frame.top, frame.bottom
    x_ticks, x_labels = x_scale.ticks()
    y_ticks, y_labels = y_scale.ticks()
    parts = []
    if grid:
        parts.append('<g class="grid" stroke="#e3e3e3" stroke-width="1">')
        parts += [
            f'<line x1="{_px(x)}" y1="{_px(top)}" x2="{_px(x)}" y2="{_px(bottom)}"/>'
            for x in map(x_scale, x_ticks)
        ]
        parts += [
            f'<line x1="{_px(left)}" y1="{_px(y)}" x2="{_px(right)}" y2="{_px(y)}"/>'
            for y in map(y_scale, y_ticks)
        ]
        parts.append("</g>")
    parts.append(
        f'<rect x="{_px(left)}" y="{_px(top)}" width="{_px(right - left)}" '
        f'height="{_px(bottom - top)}" fill="none" stroke="#444"/>'
    )
    parts.append('<g class="ticks" fill="#222">')
    for x, label in zip(map(x_scale, x_ticks), x_labels, strict=True):
        parts.append(
            f'<line x1="{_px(x)}" y1="{_px(bottom)}" x2="{_px(x)}" '
            f'y2="{_px(bottom + 4)}" stroke="#444"/>'
        )
        parts.append(_text(x, bottom + X_TICK_BASELINE, label))
    for y, label in zip(map(y_scale, y_ticks), y_labels, strict=True):
        parts.append(
            f'<line x1="{_px(left - 4)}" y1="{_px(y)}" x2="{_px(left)}" '
            f'y2="{_px(y)}" stroke="#444"/>'
        )
        parts.append(_text(left - TICK_LABEL_OFFSET, y + 4, label, anchor="end"))
    parts.append("</g>")
    return parts + frame.texts()


def _svg(
    frame: _Frame,
    title: str,
    description: str,
    body: list[str],
    clipped: Sequence[str] = (),
) -> str:
    """Wrap the figure with its accessible name and description; `clipped` parts are cut to the
    plot area.

    The ids (title, description, clip path) are a hash of the content, so they are stable and two
    different figures inlined in one page do not share them.
    """
    content = "\n".join([title, description, *body, *clipped])
    name = "fig-" + hashlib.sha256(content.encode()).hexdigest()[:12]
    parts = list(body)
    if clipped:
        parts += [
            f'<clipPath id="{name}-clip"><rect x="{_px(frame.left)}" y="{_px(frame.top)}" '
            f'width="{_px(frame.right - frame.left)}" height="{_px(frame.bottom - frame.top)}"/>'
            "</clipPath>",
            f'<g class="data" clip-path="url(#{name}-clip)">',
            *clipped,
            "</g>",
        ]
    width, height = round(frame.width), math.ceil(frame.height)
    return (
        "\n".join(
            [
                f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" '
                f'viewBox="0 0 {width} {height}" role="img" '
                f'aria-labelledby="{name}-title {name}-desc" font-family="{FONT}" '
                f'font-size="{FONT_PX}">',
                f'<title id="{name}-title">{escape(title)}</title>',
                f'<desc id="{name}-desc">{escape(description)}</desc>',
                f'<rect width="{width}" height="{height}" fill="#ffffff"/>',
                *parts,
                "</svg>",
            ]
        )
        + "\n"
    )


def _axis_phrase(axis: Axis) -> str:
    return f"{axis.title} (log scale)" if axis.log else axis.title


# -- legends ----------------------------------------------------------------------------------


@dataclass(frozen=True)
class _Key:
    """One legend entry: a sample of how its series is drawn, and its label wrapped into lines."""

    lines: tuple[str, ...]
    colour: str
    dash: str | None = None  # a line sample with this dash pattern; None for no line
    shape: str | None = None  # a marker in the sample
    band: bool = False  # a shaded box behind the sample
    box: bool = False  # a plain filled box with an outline (a heat map's missing cells)

    @property
    def width(self) -> float:
        return SWATCH_PX + SWATCH_GAP + max((text_width(line) for line in self.lines), default=0)

    @property
    def height(self) -> float:
        return LEGEND_ROW_PX + LINE_PX * max(len(self.lines) - 1, 0)

    def draw(self, x: float, y: float) -> list[str]:
        """The entry with its top-left corner at (x, y)."""
        middle = y + LEGEND_ROW_PX / 2
        parts = []
        if self.band:
            parts.append(
                f'<rect x="{_px(x)}" y="{_px(middle - 6)}" width="{SWATCH_PX}" height="12" '
                f'fill="{self.colour}" fill-opacity="0.18"/>'
            )
        if self.box:
            parts.append(
                f'<rect x="{_px(x + SWATCH_PX / 2 - 7)}" y="{_px(middle - 7)}" width="14" '
                f'height="14" fill="{self.colour}" stroke="#444"/>'
            )
        if self.dash is not None:
            dash = f' stroke-dasharray="{self.dash}"' if self.dash else ""
            parts.append(
                f'<line x1="{_px(x)}" y1="{_px(middle)}" x2="{_px(x + SWATCH_PX)}" '
                f'y2="{_px(middle)}" stroke="{self.colour}" stroke-width="2"{dash}/>'
            )
        if self.shape is not None:
            parts.append(_marker(self.shape, x + SWATCH_PX / 2, middle, self.colour))
        text_x = x + SWATCH_PX + SWATCH_GAP
        parts += [
            _text(text_x, middle + 4 + k * LINE_PX, line, anchor="start")
            for k, line in enumerate(self.lines)
        ]
        return parts


def _grid(keys: Sequence[_Key], width: float) -> tuple[int, list[float], float]:
    """Columns, row heights and column width for `keys` set in rows across `width`."""
    column = max(key.width for key in keys)
    columns = max(
        1, min(len(keys), int((width + LEGEND_COLUMN_GAP) // (column + LEGEND_COLUMN_GAP)))
    )
    rows = -(-len(keys) // columns)
    columns = -(-len(keys) // rows)  # as many entries in every row as the rows allow
    heights = [
        max(key.height for key in keys[r * columns : (r + 1) * columns]) for r in range(rows)
    ]
    return columns, heights, column


def _legend_below(keys: Sequence[_Key], frame: _Frame) -> list[str]:
    """Entries in rows under the x-axis title, centred on the canvas, left to right."""
    columns, heights, column = _grid(keys, frame.width - 2 * PAD)
    block = columns * column + (columns - 1) * LEGEND_COLUMN_GAP
    x0 = max(PAD, (frame.width - block) / 2)
    parts = ['<g class="legend">']
    y = frame.below
    for r, row_height in enumerate(heights):
        for c, key in enumerate(keys[r * columns : (r + 1) * columns]):
            parts += key.draw(x0 + c * (column + LEGEND_COLUMN_GAP), y)
        y += row_height
    return parts + ["</g>"]


def _legend_right(keys: Sequence[_Key], frame: _Frame) -> list[str]:
    parts = ['<g class="legend">']
    y = frame.top
    for key in keys:
        parts += key.draw(frame.right + BLOCK_GAP, y)
        y += key.height
    return parts + ["</g>"]


# -- figures ----------------------------------------------------------------------------------


@dataclass(frozen=True)
class _Style:
    """How one series is drawn: colour, dash pattern, marker shape and which points get one."""

    colour: str
    dash: str
    shape: str
    marks: str  # "all", "sparse" (a few along the line) or "none"


def _styles(series: Sequence[Series]) -> list[_Style]:
    """Colour, dash and marker for each series, so that no two of up to 12 look alike.

    Colours come from the Tol (2012) set for this many series. Dashed series take the dashed
    patterns first, so a reference curve is never solid; the others take the remaining patterns
    in order. A line series whose pattern an earlier series already has gets sparse markers,
    which keeps the series apart in greyscale print.
    """
    n = len(series)
    colours = TOL_QUALITATIVE[n - 1] if 0 < n <= len(TOL_QUALITATIVE) else SERIES_COLOURS
    dashes: list[str | None] = [None] * n
    dashed = [i for i, s in enumerate(series) if s.line and s.dashed]
    for k, i in enumerate(dashed):
        dashes[i] = DASH_PATTERNS[1 + k % (len(DASH_PATTERNS) - 1)]
    free = [p for p in DASH_PATTERNS if p not in dashes] or list(DASH_PATTERNS)
    plain = [i for i, s in enumerate(series) if s.line and not s.dashed]
    for k, i in enumerate(plain):
        dashes[i] = free[k % len(free)]
    styles, seen = [], set()
    for i, s in enumerate(series):
        if s.markers or not s.line:
            marks = "all"
        else:
            marks = "sparse" if dashes[i] in seen else "none"
            seen.add(dashes[i])
        styles.append(
            _Style(
                colours[i % len(colours)],
                dashes[i] or "",
                MARKER_SHAPES[i % len(MARKER_SHAPES)],
                marks,
            )
        )
    return styles


def _default_description(series: Sequence[Series], x_axis: Axis, y_axis: Axis) -> str:
    kind = "Scatter plot" if series and not any(s.line for s in series) else "Line plot"
    text = f"{kind} of {_axis_phrase(y_axis)} against {_axis_phrase(x_axis)}"
    if not series:
        return text + ", with no data."
    shown = [s.label for s in series[:6]]
    more = f" and {len(series) - 6} more" if len(series) > 6 else ""
    text += f", {len(series)} series: {', '.join(shown)}{more}."
    if any(s.band for s in series):
        text += " Shaded bands show each series' interval."
    return text


def line_plot(
    series: Sequence[Series],
    *,
    x_axis: Axis,
    y_axis: Axis,
    title: str = "",
    width: int = 640,
    height: int = 400,
    description: str | None = None,
) -> str:
    """Several curves on shared axes, with optional bands and markers, as an SVG string.

    Points that are not finite (or not positive on a log axis) break the curve.  A series with
    ``line=False, markers=True`` is a scatter.

    Series styles: up to 12 series get distinct colours (Tol 2012's qualitative set for that
    number of series) and, within the first six line series, distinct dash patterns (a series
    with ``dashed=True`` always gets a dashed one); a later line series repeating a pattern gets
    sparse markers, so every series stays distinct in greyscale too. Beyond 12 series the 12
    colours repeat and only the dash pattern and markers tell series apart, until, past 18,
    some series look alike: split such data over several figures.

    Layout: the legend sits right of the plot when it fits there (labels no wider than about
    30 % of `width`, rows no taller than the plot), otherwise in rows under the plot, labels
    wrapped at spaces; long titles wrap too. `height` is the canvas height unless the plot would
    become shorter than MIN_PLOT_HEIGHT: then the canvas grows downwards. Every text lies inside
    the view box by the estimate of `text_width`.

    Accessibility: the ``<svg>`` carries role="img", a ``<title>`` (`title`, or "y against x"
    when empty) and a ``<desc>``, `description` or, by default, one built from the axes and
    series labels; aria-labelledby names both.
    """
    arrays = []
    for s in series:
        x, y = np.asarray(s.x, dtype=float), np.asarray(s.y, dtype=float)
        lower, upper = (np.asarray(b, dtype=float) for b in s.band) if s.band else (y, y)
        if not (x.shape == y.shape == lower.shape == upper.shape) or x.ndim != 1:
            raise ValueError(f"series '{s.label}': x, y and band must be 1-D of equal length")
        arrays.append((x, y, lower, upper))
    all_x = np.concatenate([a[0] for a in arrays]) if arrays else np.empty(0)
    all_y = np.concatenate([np.concatenate(a[1:]) for a in arrays]) if arrays else np.empty(0)
    x_limits, y_limits = _data_limits(all_x, x_axis), _data_limits(all_y, y_axis)
    x_labels = _Scale(*x_limits, x_axis.log, 0.0, 1.0).ticks()[1]
    y_labels = _Scale(*y_limits, y_axis.log, 0.0, 1.0).ticks()[1]
    styles = _styles(series)

    def keys(max_label_px: float) -> list[_Key]:
        return [
            _Key(
                tuple(wrap_text(s.label, max_label_px)),
                style.colour,
                dash=style.dash if s.line else None,
                shape=style.shape if style.marks != "none" else None,
                band=s.band is not None,
            )
            for s, style in zip(series, styles, strict=True)
        ]

    layout = dict(title=title, x_axis=x_axis, y_axis=y_axis, x_labels=x_labels, y_labels=y_labels)
    frame = _frame(width, height, **layout)
    beside = keys(math.inf)
    right_block = BLOCK_GAP + max((key.width for key in beside), default=0.0)
    column_px = sum(key.height for key in beside)
    fits_beside = (
        right_block <= LEGEND_RIGHT_FRACTION * width and column_px <= frame.bottom - frame.top
    )
    if series and fits_beside:
        frame = _frame(width, height, right_block=right_block, **layout)
        legend = _legend_right(beside, frame)
    elif series:
        below = keys(width - 2 * PAD - SWATCH_PX - SWATCH_GAP)
        frame = _frame(width, height, below_block=sum(_grid(below, width - 2 * PAD)[1]), **layout)
        legend = _legend_below(below, frame)
    else:
        legend = []
    x_scale = _Scale(*x_limits, x_axis.log, frame.left, frame.right)
    y_scale = _Scale(*y_limits, y_axis.log, frame.bottom, frame.top)

    body = _axes(frame, x_scale, y_scale)
    data: list[str] = []
    for s, style, (x, y, lower, upper) in zip(series, styles, arrays, strict=True):
        fine_x = _plottable(x, x_axis.log)
        if s.band:
            fine = fine_x & _plottable(lower, y_axis.log) & _plottable(upper, y_axis.log)
            for run in _runs(fine):
                xs = x_scale(x[run])
                outline = _polyline(
                    np.concatenate((xs, xs[::-1])),
                    np.concatenate((y_scale(upper[run]), y_scale(lower[run])[::-1])),
                )
                data.append(f'<path d="{outline} Z" fill="{style.colour}" fill-opacity="0.18"/>')
        keep = fine_x & _plottable(y, y_axis.log)
        if s.line:
            dash = f' stroke-dasharray="{style.dash}"' if style.dash else ""
            for run in _runs(keep):
                data.append(
                    f'<path d="{_polyline(x_scale(x[run]), y_scale(y[run]))}" fill="none" '
                    f'stroke="{style.colour}" stroke-width="2"{dash}/>'
                )
        marked = np.flatnonzero(keep)
        if style.marks == "sparse":
            step = max(1, marked.size // SPARSE_MARKS)
            marked = marked[step // 2 :: step]
        if style.marks != "none":
            data += [
                _marker(style.shape, px, py, style.colour)
                for px, py in zip(x_scale(x[marked]), y_scale(y[marked]), strict=True)
            ]
    if not all_x.size:
        body.append(
            _text((frame.left + frame.right) / 2, (frame.top + frame.bottom) / 2, "no data")
        )
    body += legend
    name = title or f"{y_axis.title} against {x_axis.title}"
    if description is None:
        description = _default_description(series, x_axis, y_axis)
    return _svg(frame, name, description, body, data)


def _value_limits(grid: np.ndarray, axis: Axis) -> tuple[float, float]:
    """The colour range spans the data exactly, so the extremes get the end colours."""
    if axis.limits is not None:
        return _data_limits(grid.ravel(), axis)
    data = grid[_plottable(grid, axis.log)]
    if data.size == 0:
        return (1.0, 10.0) if axis.log else (0.0, 1.0)
    low, high = float(data.min()), float(data.max())
    if low == high:
        return (
            (low / 2, low * 2)
            if axis.log
            else (low - (abs(low) * 0.1 or 1.0), high + (abs(low) * 0.1 or 1.0))
        )
    return low, high


def colour_of(fraction: float) -> str:
    """viridis colour at `fraction` ∈ [0, 1], interpolated linearly in RGB between samples."""
    position = min(max(fraction, 0.0), 1.0) * (len(VIRIDIS) - 1)
    i = min(int(position), len(VIRIDIS) - 2)
    t = position - i
    a, b = (tuple(int(c[k : k + 2], 16) for k in (1, 3, 5)) for c in VIRIDIS[i : i + 2])
    return "#" + "".join(f"{round(p + t * (q - p)):02x}" for p, q in zip(a, b, strict=True))


def _cell_edges(centres: np.ndarray, log: bool) -> np.ndarray:
    """Cell boundaries halfway between centres (geometrically on a log axis)."""
    values = np.log10(centres) if log else centres
    if values.size == 1:
        half = 0.25 if log else (abs(values[0]) * 0.5 or 0.5)
        edges = np.array([values[0] - half, values[0] + half])
    else:
        middles = (values[1:] + values[:-1]) / 2
        edges = np.concatenate(
            (
                [values[0] - (middles[0] - values[0])],
                middles,
                [values[-1] + (values[-1] - middles[-1])],
            )
        )
    return 10.0**edges if log else edges


# Colour bar geometry [px]: its gap from the plot, its width, and the gap between its tick
# labels and its rotated title.
BAR_GAP = 14.0
BAR_WIDTH = 14.0
BAR_TITLE_GAP = 8.0


def heat_map(
    x: Sequence[float],
    y: Sequence[float],
    values,
    *,
    x_axis: Axis,
    y_axis: Axis,
    value_axis: Axis,
    title: str = "",
    missing_label: str = "no value",
    annotate: bool = False,
    width: int = 640,
    height: int = 400,
    description: str | None = None,
) -> str:
    """A colour grid of `values[i, j]` at (x[j], y[i]) with a colour bar, as an SVG string.

    For a threshold map: x frequency, y gap, value the hop-onset acceleration.  Cells that are
    not finite (no threshold found, a flagged result) are grey and named in a key under the plot
    by `missing_label`, never silently coloured.

    Layout and accessibility as for `line_plot`: texts wrap to stay on the canvas, and the
    ``<desc>`` is `description` or, by default, one naming the quantities, the colour range and
    what grey means.
    """
    xs, ys = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    grid = np.asarray(values, dtype=float)
    if grid.shape != (ys.size, xs.size) or xs.size == 0 or ys.size == 0:
        raise ValueError(
            f"values must have shape (len(y), len(x)) = {(ys.size, xs.size)}, got {grid.shape}"
        )
    for name, centres, axis in (("x", xs, x_axis), ("y", ys, y_axis)):
        if np.any(np.diff(centres) <= 0) or not np.all(np.isfinite(centres)):
            raise ValueError(f"{name} must be finite and strictly increasing")
        if axis.log and np.any(centres <= 0):
            raise ValueError(f"{name} must be positive on a log axis")
    x_edges, y_edges = _cell_edges(xs, x_axis.log), _cell_edges(ys, y_axis.log)
    x_limits = float(x_edges[0]), float(x_edges[-1])
    y_limits = float(y_edges[0]), float(y_edges[-1])
    value_limits = _value_limits(grid, value_axis)
    value_scale = _Scale(*value_limits, value_axis.log, 0.0, 1.0)
    bar_labels = value_scale.ticks()[1]
    drawable = _plottable(grid, value_axis.log)
    missing = not drawable.all()
    missing_key = _Key(
        tuple(wrap_text(missing_label, width - 2 * PAD - SWATCH_PX - SWATCH_GAP)),
        MISSING_COLOUR,
        box=True,
    )

    layout = dict(
        title=title,
        x_axis=x_axis,
        y_axis=y_axis,
        x_labels=_Scale(*x_limits, x_axis.log, 0.0, 1.0).ticks()[1],
        y_labels=_Scale(*y_limits, y_axis.log, 0.0, 1.0).ticks()[1],
        below_block=missing_key.height if missing else 0.0,
    )
    # the bar is as tall as the plot, whose height does not depend on the bar's width
    unbarred = _frame(width, height, **layout)
    bar_title = tuple(wrap_text(value_axis.title, unbarred.bottom - unbarred.top))
    right_block = (
        BAR_GAP
        + BAR_WIDTH
        + TICK_LABEL_OFFSET
        + max((text_width(label) for label in bar_labels), default=0.0)
        + (BAR_TITLE_GAP + (len(bar_title) - 1) * LINE_PX + _descent() + _ascent())
        * bool(bar_title)
    )
    frame = _frame(width, height, right_block=right_block, **layout)
    x_scale = _Scale(*x_limits, x_axis.log, frame.left, frame.right)
    y_scale = _Scale(*y_limits, y_axis.log, frame.bottom, frame.top)

    body = ['<g class="cells" shape-rendering="crispEdges">']
    cell_x, cell_y = x_scale(x_edges), y_scale(y_edges)
    for i in range(ys.size):
        for j in range(xs.size):
            value, usable = grid[i, j], drawable[i, j]
            fill = colour_of(float(value_scale(value))) if usable else MISSING_COLOUR
            body.append(
                f'<rect x="{_px(cell_x[j])}" y="{_px(cell_y[i + 1])}" '
                f'width="{_px(cell_x[j + 1] - cell_x[j])}" '
                f'height="{_px(cell_y[i] - cell_y[i + 1])}" fill="{fill}"/>'
            )
            if annotate and usable:
                ink = "#000000" if value_scale(value) > 0.55 else "#ffffff"
                body.append(
                    _text(
                        (cell_x[j] + cell_x[j + 1]) / 2,
                        (cell_y[i] + cell_y[i + 1]) / 2 + 4,
                        tick_labels([float(value)], step=abs(value) / 100)[0],
                        extra=f' fill="{ink}" font-size="10"',
                    )
                )
    body.append("</g>")
    body += _axes(frame, x_scale, y_scale, grid=False)
    body += _colour_bar(value_scale, frame, bar_title)
    if missing:
        body += _legend_below([missing_key], frame)
    name = title or f"{value_axis.title} by {x_axis.title} and {y_axis.title}"
    if description is None:
        low, high = value_limits
        description = (
            f"Colour map of {value_axis.title} over {_axis_phrase(x_axis)} and "
            f"{_axis_phrase(y_axis)}, {ys.size} by {xs.size} cells, coloured from dark purple "
            f"at {low:.3g} to yellow at {high:.3g}{' on a log scale' if value_axis.log else ''}"
            + (f"; grey cells: {missing_label}." if missing else ".")
        )
    return _svg(frame, name, description, body)


def _colour_bar(value_scale: _Scale, frame: _Frame, title: Sequence[str]) -> list[str]:
    """A vertical key of stacked colour steps right of the plot, with ticks and a title."""
    x = frame.right + BAR_GAP
    top, bottom = frame.top, frame.bottom
    bar = _Scale(value_scale.low, value_scale.high, value_scale.log, bottom, top)
    steps = 48
    parts = ['<g class="colour-bar" shape-rendering="crispEdges">']
    for k in range(steps):
        y0 = bottom + (top - bottom) * k / steps
        y1 = bottom + (top - bottom) * (k + 1) / steps
        # half a pixel of overlap: steps rounded to 0.1 px would otherwise leave hairline gaps
        parts.append(
            f'<rect x="{_px(x)}" y="{_px(y1)}" width="{BAR_WIDTH}" height="{_px(y0 - y1 + 0.5)}" '
            f'fill="{colour_of((k + 0.5) / steps)}"/>'
        )
    parts.append(
        f'<rect x="{_px(x)}" y="{_px(top)}" width="{BAR_WIDTH}" height="{_px(bottom - top)}" '
        'fill="none" stroke="#444"/>'
    )
    ticks, labels = bar.ticks()
    label_x = x + BAR_WIDTH + TICK_LABEL_OFFSET
    for tick, label in zip(ticks, labels, strict=True):
        y = bar(tick)
        parts.append(
            f'<line x1="{_px(x + BAR_WIDTH)}" y1="{_px(y)}" x2="{_px(x + BAR_WIDTH + 4)}" '
            f'y2="{_px(y)}" stroke="#444"/>'
        )
        parts.append(_text(label_x, y + 4, label, anchor="start"))
    widest = max((text_width(label) for label in labels), default=0.0)
    # rotated +90°, the text reads downwards with its ascent to the right, so the first line is
    # the rightmost one
    last = label_x + widest + BAR_TITLE_GAP + _descent()
    middle = (top + bottom) / 2
    for k, line in enumerate(title):
        baseline = last + (len(title) - 1 - k) * LINE_PX
        parts.append(
            _text(
                baseline,
                middle,
                line,
                extra=f' class="axis-title" transform="rotate(90 {_px(baseline)} {_px(middle)})"',
            )
        )
    return parts + ["</g>"]


def category_map(
    x: Sequence[float],
    y: Sequence[float],
    codes,
    categories: Sequence[str],
    *,
    x_axis: Axis,
    y_axis: Axis,
    title: str = "",
    missing_label: str = "no category",
    width: int = 640,
    height: int = 480,
    description: str | None = None,
) -> str:
    """A grid of categories, `codes[i, j]` ∈ {0 … len(categories) − 1} at (x[j], y[i]), each in
    its own colour and named in a key, as an SVG string.

    For a basin-of-attraction map: x the initial displacement, y the initial velocity, the code
    the attractor each start ends on.  A negative code is a cell with no category: grey, and
    named by `missing_label` in the key when any occurs.  Colours are Tol's (2012) qualitative
    set for that many categories (at most 12), so neighbouring basins stay apart for readers
    with the common colour-vision deficiencies.  The cells of one category along a row are drawn
    as one rectangle, and all of a category's rectangles as one path, so a 200 × 200 map stays
    a small file.

    Layout and accessibility as for `line_plot`: the key sits right of the plot when it fits
    there, otherwise under it; texts wrap to stay on the canvas; the ``<desc>`` is
    `description` or, by default, one naming the axes and the categories.
    """
    xs, ys = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    grid = np.asarray(codes)
    if grid.shape != (ys.size, xs.size) or xs.size == 0 or ys.size == 0:
        raise ValueError(
            f"codes must have shape (len(y), len(x)) = {(ys.size, xs.size)}, got {grid.shape}"
        )
    if not 0 < len(categories) <= len(TOL_QUALITATIVE):
        raise ValueError(f"between 1 and {len(TOL_QUALITATIVE)} categories, got {len(categories)}")
    if grid.max(initial=-1) >= len(categories):
        raise ValueError("a code names no category")
    for name, centres in (("x", xs), ("y", ys)):
        if np.any(np.diff(centres) <= 0) or not np.all(np.isfinite(centres)):
            raise ValueError(f"{name} must be finite and strictly increasing")
    colours = TOL_QUALITATIVE[len(categories) - 1]
    missing = bool((grid < 0).any())
    labels = [*categories, *([missing_label] if missing else [])]
    fills = [*colours, *([MISSING_COLOUR] if missing else [])]

    def keys(max_label_px: float) -> list[_Key]:
        return [
            _Key(tuple(wrap_text(label, max_label_px)), fill, box=True)
            for label, fill in zip(labels, fills, strict=True)
        ]

    x_edges, y_edges = _cell_edges(xs, False), _cell_edges(ys, False)
    x_limits = float(x_edges[0]), float(x_edges[-1])
    y_limits = float(y_edges[0]), float(y_edges[-1])
    layout = dict(
        title=title,
        x_axis=x_axis,
        y_axis=y_axis,
        x_labels=_Scale(*x_limits, False, 0.0, 1.0).ticks()[1],
        y_labels=_Scale(*y_limits, False, 0.0, 1.0).ticks()[1],
    )
    frame = _frame(width, height, **layout)
    beside = keys(LEGEND_RIGHT_FRACTION * width - BLOCK_GAP - SWATCH_PX - SWATCH_GAP)
    right_block = BLOCK_GAP + max(key.width for key in beside)
    if sum(key.height for key in beside) <= frame.bottom - frame.top:
        frame = _frame(width, height, right_block=right_block, **layout)
        legend = _legend_right(beside, frame)
    else:
        below = keys(width - 2 * PAD - SWATCH_PX - SWATCH_GAP)
        frame = _frame(width, height, below_block=sum(_grid(below, width - 2 * PAD)[1]), **layout)
        legend = _legend_below(below, frame)
    x_scale = _Scale(*x_limits, False, frame.left, frame.right)
    y_scale = _Scale(*y_limits, False, frame.bottom, frame.top)
    cell_x, cell_y = x_scale(x_edges), y_scale(y_edges)

    body = ['<g class="cells" shape-rendering="crispEdges" stroke="none">']
    for code, fill in zip([*range(len(categories)), *([-1] if missing else [])], fills,
                          strict=True):
        pieces = []
        for i in range(ys.size):
            inside = (grid[i] == code) if code >= 0 else (grid[i] < 0)
            for run in _runs(inside):
                x0, x1 = cell_x[run.start], cell_x[run.stop]
                top, bottom = cell_y[i + 1], cell_y[i]
                pieces.append(f"M{_px(x0)} {_px(top)}H{_px(x1)}V{_px(bottom)}H{_px(x0)}Z")
        if pieces:
            body.append(f'<path fill="{fill}" d="{"".join(pieces)}"/>')
    body.append("</g>")
    body += _axes(frame, x_scale, y_scale, grid=False)
    body += legend
    name = title or f"{y_axis.title} against {x_axis.title} by category"
    if description is None:
        description = (
            f"Map over {x_axis.title} and {y_axis.title}, {ys.size} by {xs.size} cells, "
            f"each coloured by its category: {'; '.join(labels)}."
        )
    return _svg(frame, name, description, body)
