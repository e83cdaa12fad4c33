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

# Okabe & Ito (2008), "Color Universal Design": distinguishable under the common colour-vision
# deficiencies; yellow is left out because it vanishes on white.
SERIES_COLOURS = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000")
MARKER_SHAPES = ("circle", "square", "triangle", "diamond")
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
CHAR_PX = 0.6 * FONT_PX  # mean glyph advance, to size the legend and margins


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


def _axes(
    x_scale: _Scale, y_scale: _Scale, x_axis: Axis, y_axis: Axis, *, grid: bool = True
) -> list[str]:
    """Frame, grid (optional), ticks, tick labels and axis titles around the plot area."""
    left, right = x_scale.pixel_low, x_scale.pixel_high
    bottom, top = y_scale.pixel_low, y_scale.pixel_high
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
        parts.append(_text(x, bottom + 17, label))
    for y, label in zip(map(y_scale, y_ticks), y_labels, strict=True):
        parts.append(
            f'<line x1="{_px(left - 4)}" y1="{_px(y)}" x2="{_px(left)}" '
            f'y2="{_px(y)}" stroke="#444"/>'
        )
        parts.append(_text(left - 7, y + 4, label, anchor="end"))
    parts.append("</g>")
    parts.append(_text((left + right) / 2, bottom + 38, x_axis.title, extra=' class="axis-title"'))
    y_mid = (top + bottom) / 2
    parts.append(
        _text(
            16,
            y_mid,
            y_axis.title,
            extra=f' class="axis-title" transform="rotate(-90 16 {_px(y_mid)})"',
        )
    )
    return parts


def _svg(
    width: int,
    height: int,
    title: str,
    body: list[str],
    clipped: list[str] = (),
    area: dict[str, float] | None = None,
) -> str:
    """Wrap the figure; `clipped` parts are cut to the plot `area`.

    The clip-path id is a hash of the content, so it is stable and two figures inlined in one
    page do not share it.
    """
    parts = list(body)
    if clipped:
        digest = hashlib.sha256("\n".join([*body, *clipped]).encode()).hexdigest()[:12]
        parts += [
            f'<clipPath id="clip-{digest}"><rect x="{_px(area["left"])}" '
            f'y="{_px(area["top"])}" width="{_px(area["right"] - area["left"])}" '
            f'height="{_px(area["bottom"] - area["top"])}"/></clipPath>',
            f'<g class="data" clip-path="url(#clip-{digest})">',
            *clipped,
            "</g>",
        ]
    heading = [_text(width / 2, 18, title, extra=' font-weight="bold"')] if title else []
    return (
        "\n".join(
            [
                f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" '
                f'viewBox="0 0 {width} {height}" role="img" font-family="{FONT}" '
                f'font-size="{FONT_PX}">',
                f"<title>{escape(title)}</title>",
                f'<rect width="{width}" height="{height}" fill="#ffffff"/>',
                *heading,
                *parts,
                "</svg>",
            ]
        )
        + "\n"
    )


def _plot_area(width: int, height: int, title: str, right_margin: float) -> dict[str, float]:
    return {
        "left": 70.0,
        "right": width - right_margin,
        "top": 30.0 if title else 12.0,
        "bottom": height - 48.0,
    }


# -- figures ----------------------------------------------------------------------------------


def line_plot(
    series: Sequence[Series],
    *,
    x_axis: Axis,
    y_axis: Axis,
    title: str = "",
    width: int = 640,
    height: int = 400,
) -> str:
    """Several curves on shared axes, with optional bands and markers, as an SVG string.

    Points that are not finite (or not positive on a log axis) break the curve.  A series with
    ``line=False, markers=True`` is a scatter.
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

    legend_chars = max((len(s.label) for s in series), default=0)
    legend_width = 40 + CHAR_PX * legend_chars if series else 0.0
    area = _plot_area(width, height, title, 16 + min(legend_width, 0.4 * width))
    x_scale = _Scale(*_data_limits(all_x, x_axis), x_axis.log, area["left"], area["right"])
    y_scale = _Scale(*_data_limits(all_y, y_axis), y_axis.log, area["bottom"], area["top"])

    body = _axes(x_scale, y_scale, x_axis, y_axis)
    data: list[str] = []
    for index, (s, (x, y, lower, upper)) in enumerate(zip(series, arrays, strict=True)):
        colour = SERIES_COLOURS[index % len(SERIES_COLOURS)]
        shape = MARKER_SHAPES[index % len(MARKER_SHAPES)]
        fine_x = _plottable(x, x_axis.log)
        if s.band:
            fine = fine_x & _plottable(lower, y_axis.log) & _plottable(upper, y_axis.log)
            for run in _runs(fine):
                xs = x_scale(x[run])
                outline = _polyline(
                    np.concatenate((xs, xs[::-1])),
                    np.concatenate((y_scale(upper[run]), y_scale(lower[run])[::-1])),
                )
                data.append(f'<path d="{outline} Z" fill="{colour}" fill-opacity="0.18"/>')
        keep = fine_x & _plottable(y, y_axis.log)
        if s.line:
            dash = ' stroke-dasharray="6 4"' if s.dashed else ""
            for run in _runs(keep):
                data.append(
                    f'<path d="{_polyline(x_scale(x[run]), y_scale(y[run]))}" fill="none" '
                    f'stroke="{colour}" stroke-width="2"{dash}/>'
                )
        if s.markers:
            data += [
                _marker(shape, px, py, colour)
                for px, py in zip(x_scale(x[keep]), y_scale(y[keep]), strict=True)
            ]
    if not all_x.size:
        body.append(
            _text((area["left"] + area["right"]) / 2, (area["top"] + area["bottom"]) / 2, "no data")
        )
    body += _legend(series, area["right"] + 12, area["top"] + 4)
    return _svg(width, height, title, body, data, area)


def _legend(series: Sequence[Series], x: float, y: float) -> list[str]:
    parts = ['<g class="legend">'] if series else []
    for index, s in enumerate(series):
        colour = SERIES_COLOURS[index % len(SERIES_COLOURS)]
        row = y + 18 * index
        if s.band:
            parts.append(
                f'<rect x="{_px(x)}" y="{_px(row - 6)}" width="24" height="12" '
                f'fill="{colour}" fill-opacity="0.18"/>'
            )
        if s.line:
            dash = ' stroke-dasharray="6 4"' if s.dashed else ""
            parts.append(
                f'<line x1="{_px(x)}" y1="{_px(row)}" x2="{_px(x + 24)}" '
                f'y2="{_px(row)}" stroke="{colour}" stroke-width="2"{dash}/>'
            )
        if s.markers or not s.line:
            parts.append(_marker(MARKER_SHAPES[index % len(MARKER_SHAPES)], x + 12, row, colour))
        parts.append(_text(x + 30, row + 4, s.label, anchor="start"))
    return parts + (["</g>"] if series else [])


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
) -> str:
    """A colour grid of `values[i, j]` at (x[j], y[i]) with a colour bar, as an SVG string.

    For a threshold map: x frequency, y gap, value the hop-onset acceleration.  Cells that are
    not finite (no threshold found, a flagged result) are grey and named in the key by
    `missing_label`, never silently coloured.
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

    bar_label_chars = max(len(value_axis.title), len(missing_label))
    area = _plot_area(width, height, title, 100 + CHAR_PX * min(bar_label_chars, 12))
    x_scale = _Scale(float(x_edges[0]), float(x_edges[-1]), x_axis.log, area["left"], area["right"])
    y_scale = _Scale(float(y_edges[0]), float(y_edges[-1]), y_axis.log, area["bottom"], area["top"])
    value_scale = _Scale(*_value_limits(grid, value_axis), value_axis.log, 0.0, 1.0)

    body = ['<g class="cells" shape-rendering="crispEdges">']
    cell_x, cell_y = x_scale(x_edges), y_scale(y_edges)
    drawable = _plottable(grid, value_axis.log)
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
    body += _axes(x_scale, y_scale, x_axis, y_axis, grid=False)
    body += _colour_bar(
        value_scale,
        value_axis,
        area,
        missing=not drawable.all(),
        missing_label=missing_label,
    )
    return _svg(width, height, title, body)


def _colour_bar(
    value_scale: _Scale, axis: Axis, area: dict[str, float], *, missing: bool, missing_label: str
) -> list[str]:
    """A vertical key of stacked colour steps with ticks, and a grey swatch for missing cells."""
    x, width = area["right"] + 14, 14.0
    top, bottom = area["top"] + 4, area["bottom"] - (30 if missing else 0)
    bar = _Scale(value_scale.low, value_scale.high, value_scale.log, bottom, top)
    steps = 48
    parts = ['<g class="colour-bar" shape-rendering="crispEdges">']
    for k in range(steps):
        y0 = bottom + (top - bottom) * k / steps
        y1 = bottom + (top - bottom) * (k + 1) / steps
        parts.append(
            f'<rect x="{_px(x)}" y="{_px(y1)}" width="{width}" height="{_px(y0 - y1)}" '
            f'fill="{colour_of((k + 0.5) / steps)}"/>'
        )
    parts.append(
        f'<rect x="{_px(x)}" y="{_px(top)}" width="{width}" height="{_px(bottom - top)}" '
        'fill="none" stroke="#444"/>'
    )
    ticks, labels = bar.ticks()
    for tick, label in zip(ticks, labels, strict=True):
        y = bar(tick)
        parts.append(
            f'<line x1="{_px(x + width)}" y1="{_px(y)}" x2="{_px(x + width + 4)}" '
            f'y2="{_px(y)}" stroke="#444"/>'
        )
        parts.append(_text(x + width + 7, y + 4, label, anchor="start"))
    label_x = x + width + 60
    mid = (top + bottom) / 2
    parts.append(
        _text(
            label_x,
            mid,
            axis.title,
            extra=f' class="axis-title" transform="rotate(90 {_px(label_x)} {_px(mid)})"',
        )
    )
    if missing:
        parts.append(
            f'<rect x="{_px(x)}" y="{_px(area["bottom"] - 14)}" width="{width}" '
            f'height="14" fill="{MISSING_COLOUR}" stroke="#444"/>'
        )
        parts.append(_text(x + width + 7, area["bottom"] - 3, missing_label, anchor="start"))
    return parts + ["</g>"]
