"""Turn a trace (a shaker record against the model) into a note: the comparison, the record's
time history, the measured and predicted sections side by side, the correlation sum with its
fitted range, and the hop-time histogram.

The tables carry the command line's keys and SI values in their CSV and JSON; the figures are
SVG from `harvester.report.svg`.
"""

from __future__ import annotations

import hashlib
import math
import re
from datetime import date
from html import escape

import numpy as np

from harvester import __version__
from harvester.report.columns import Column, column, columns
from harvester.report.design_note import CAUTIONS
from harvester.report.note import Figure, Note, Section, Table
from harvester.report.svg import Axis, Series, line_plot
from harvester.report.views import (
    TRACE_COLUMNS,
    TRACE_CSV_KEYS,
    TRACE_RECORD_KEYS,
    trace_rows,
    trace_verdict,
)

HISTORY_PERIODS = 40  # forcing periods of the time history shown (a tone)
HISTORY_SECONDS = 10.0  # seconds shown of a random record
SECTION_PX = 400  # each of the two section panels is this many pixels square
HISTOGRAM_BINS = 24
TRACE_CAUTIONS = (
    CAUTIONS[0],
    "One record of one prototype: other units, mounts and the site differ from it. A model that "
    "agrees with this record is checked at this excitation only; re-test where it matters, and "
    "keep the design margins.",
    "Measurement chain: the comparison is only as good as the sensors' calibration, the "
    "accelerometer's mounting and the recorder's clock. Check them before trusting a "
    "disagreement, or an agreement.",
    next(c for c in CAUTIONS if c.startswith("Strong magnets")),
)
PIEZO_CAUTION = next(c for c in CAUTIONS if c.startswith("High voltage"))
ORBIT_KEYS = ("kind", "well", "period", "share", "mean_power_W", "hop_rate_per_s",
              "max_abs_x_m", "lyapunov_per_s")
SI_COLUMNS = [Column("key", "quantity key", text=True),
              Column("measured_SI", "measured (SI)"), Column("predicted_SI", "predicted (SI)"),
              Column("measured_ci95_SI", "measured 95 % CI (SI)", separator="–"),
              Column("predicted_interval_SI", "predicted interval (SI)", separator="–"),
              Column("difference_SI", "difference (SI)"),
              Column("unit_SI", "SI unit", text=True),
              Column("inside_interval", "inside interval"),
              Column("agreement", "agrees", text=True), Column("note", "note", text=True)]


def trace_note(study, paper: str = "A4") -> Note:
    """The trace note of a `commands.trace.TraceStudy`."""
    answer = study.answer
    sections = [_comparison_section(study), _history_section(study),
                _section_section(study), _correlation_section(study), _hop_section(study)]
    subtitle = (f"{answer.source} against {answer.case_file}, harvester {__version__}, "
                f"{date.today().isoformat()}")
    from harvester.model import PiezoCircuit

    piezo = isinstance(study.model.transducer, PiezoCircuit)
    return Note(title=f"Shaker record against the model: {study.title}", subtitle=subtitle,
                sections=tuple(s for s in sections if s),
                cautions=TRACE_CAUTIONS + ((PIEZO_CAUTION,) if piezo else ()),
                flags=tuple(_flags(answer)), paper=paper)


def _flags(answer) -> list[tuple[str, str]]:
    flags = []
    for row in trace_rows(answer):
        if row["agreement"] in ("no", "off plan"):
            flags.append(("warn", f"{row['quantity']}: measured {row['measured_text']}, "
                                  f"predicted {row['predicted_text']} {row['unit']}".rstrip()))
        elif row["agreement"] == "yes":
            flags.append(("pass", f"{row['quantity']}: measured {row['measured_text']}, "
                                  f"predicted {row['predicted_text']} {row['unit']}".rstrip()))
    return flags


def _comparison_section(study) -> Section:
    answer = study.answer
    rows = trace_rows(answer)
    display = Table("Measured against predicted", TRACE_COLUMNS,
                    [[row[c.key] for c in TRACE_COLUMNS] for row in rows],
                    note="Measured values with their 95 % intervals; the model's prediction for "
                         "the measured excitation with its interval. The forcing rows compare "
                         "the test's excitation with the case's planned one.")
    data = Table("Measured against predicted (SI)", SI_COLUMNS,
                 [[row[k] for k in TRACE_CSV_KEYS] for row in rows], inline=False)
    record_rows = [[c.label, c.show(getattr(answer, c.key)), c.unit]
                   for c in columns(*TRACE_RECORD_KEYS) if getattr(answer, c.key) is not None]
    record = Table("The record and its section",
                   [Column("quantity", "quantity", text=True),
                    Column("value_text", "value", text=True), Column("unit", "unit", text=True)],
                   record_rows)
    tables = [display, data, record]
    if answer.predicted_orbits:
        tables.append(Table("Predicted orbits at the measured excitation",
                            columns(*ORBIT_KEYS),
                            [[getattr(o, k) for k in ORBIT_KEYS] for o in answer.predicted_orbits]))
    paragraphs = [trace_verdict(answer) + ".", f"Method: {answer.method}."]
    paragraphs += list(answer.notes) + list(answer.warnings)
    return Section("Measured against predicted", paragraphs=paragraphs, tables=tables)


def _response(study) -> tuple[np.ndarray, str, str, float]:
    """The record's observable for the figures: values in display units, its label and unit,
    and the display scale."""
    record = study.response
    for values, label, unit, scale in (
            (record.tip_displacement_m, "tip deflection", "mm", 1e3),
            (record.tip_velocity_mps, "tip velocity", "mm/s", 1e3),
            (record.voltage_V, "load voltage", "V", 1.0)):
        if values is not None:
            return values * scale, label, unit, scale
    raise ValueError("a response record has a displacement, a velocity or a voltage")


def _history_section(study) -> Section:
    from harvester.model import analyse_wells

    record, measured = study.response, study.result.measured
    forcing = measured.forcing
    values, label, unit, scale = _response(study)
    span = (HISTORY_PERIODS / forcing.frequency_Hz if forcing.kind == "tone"
            else HISTORY_SECONDS)
    shown = record.time_s <= record.time_s[0] + span
    t = record.time_s[shown]
    series = [Series(f"measured {label}", t, values[shown])]
    section = measured.section  # of the same observable
    if section is not None:
        inside = section.time_s <= t[-1]
        series.append(Series("section samples (once per forcing period)",
                             section.time_s[inside], section.value[inside] * scale,
                             line=False, markers=True))
    wells = analyse_wells(study.model)
    if label == "tip deflection" and wells.regime == "bistable":
        for well in sorted(wells.wells_m):
            series.append(Series(f"model well {well * 1e3:.3g} mm", [t[0], t[-1]],
                                 [well * 1e3, well * 1e3], dashed=True))
    seconds = t[-1] - t[0]
    figure = Figure(
        "Time history",
        line_plot(series, x_axis=Axis("time", "s"), y_axis=Axis(label, unit),
                  title=f"The first {seconds:.3g} s of the record",
                  description=f"Measured {label} against time over the first {seconds:.3g} s "
                              "of the record, with the section samples marked and the model's "
                              "well positions as dashed lines."),
        caption="Read whether the tip stays in one well, swings across both regularly or hops "
                "at irregular times, and how far beyond the model's wells it swings. The "
                f"base acceleration: {_forcing_text(forcing)}.")
    return Section("Time history", figures=[figure])


def _forcing_text(forcing) -> str:
    acc = column("forcing_amplitude_mps2")
    if forcing.kind == "tone":
        return (f"a {forcing.frequency_Hz:.4g} Hz tone of {acc.show(forcing.amplitude_mps2)} g "
                f"({100 * forcing.line_share:.0f} % of its variance in the line)")
    return f"broadband, {acc.show(forcing.rms_mps2)} g RMS"


def _section_section(study) -> Section | None:
    measured, predicted = study.result.measured.section, study.result.predicted_section
    if measured is None:
        return None
    if predicted is not None and predicted.quantity != measured.quantity:
        predicted = None  # the model's section is of the deflection: not comparable
    axes = [s for s in (measured, predicted) if s is not None]
    value_unit, rate_unit, scale = {"tip_displacement": ("mm", "mm/s", 1e3),
                                    "tip_velocity": ("mm/s", "mm/s²", 1e3),
                                    "voltage": ("V", "V/s", 1.0)}[measured.quantity]
    name = measured.quantity.replace("_", " ")
    x = np.concatenate([s.value for s in axes]) * scale
    y = np.concatenate([s.rate for s in axes]) * scale
    limits = (_padded(x), _padded(y))
    panels = []
    for s, title in ((measured, "measured"), (predicted, "model, from the record's first "
                                                        "section state")):
        if s is None:
            continue
        panels.append(line_plot(
            [Series(f"{title} ({s.value.size} points)", s.value * scale, s.rate * scale,
                    line=False, markers=True)],
            x_axis=Axis(name, value_unit, limits=limits[0]),
            y_axis=Axis(f"rate of the {name}", rate_unit, limits=limits[1]),
            title=title.split(",")[0].capitalize(), width=SECTION_PX, height=SECTION_PX))
    phase = math.degrees(measured.phase_rad)
    description = (f"Stroboscopic sections at forcing phase {phase:.3g}°: the {name} against "
                   "its rate once per forcing period, measured on the left and the model's on "
                   "the right, on the same axes.")
    figure = Figure("Stroboscopic sections", side_by_side(panels, "Measured and predicted "
                                                          "stroboscopic sections", description),
                    caption="Read whether the two clouds have the same shape: a few points for "
                            "a periodic orbit, a folded band for a chaotic one, and whether "
                            "they fill the same region. The model runs from the record's first "
                            "section state at the measured forcing.")
    return Section("Stroboscopic sections", figures=[figure])


def _padded(values: np.ndarray) -> tuple[float, float]:
    low, high = float(np.min(values)), float(np.max(values))
    margin = 0.05 * (high - low) or 1.0
    return low - margin, high + margin


def side_by_side(panels: list[str], title: str, description: str) -> str:
    """SVG panels (each a whole `<svg>` from `svg.line_plot`) set next to each other in one
    `<svg>` with its own title and description."""
    sizes = [tuple(float(v) for v in re.search(r'width="([\d.]+)" height="([\d.]+)"',
                                                 panel).groups()) for panel in panels]
    width, height = sum(w for w, _ in sizes), max(h for _, h in sizes)
    parts, left = [], 0.0
    for panel, (w, _) in zip(panels, sizes):
        parts.append(panel.strip().replace("<svg ", f'<svg x="{left:g}" y="0" ', 1))
        left += w
    ident = "fig-" + hashlib.sha256("\n".join([title, *panels]).encode()).hexdigest()[:12]
    return "\n".join([
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{width:g}" height="{height:g}" '
        f'viewBox="0 0 {width:g} {height:g}" role="img" '
        f'aria-labelledby="{ident}-title {ident}-desc">',
        f'<title id="{ident}-title">{escape(title)}</title>',
        f'<desc id="{ident}-desc">{escape(description)}</desc>',
        *parts, "</svg>"])


def _correlation_section(study) -> Section | None:
    measured = study.result.measured.correlation
    predicted = study.result.predicted_correlation
    series = []
    for corr, label in ((measured, "record"), (predicted, "model")):
        if corr is None or corr.radius.size == 0:
            continue
        series.append(Series(f"{label}: C(r)", corr.radius, corr.correlation_sum))
        if corr.scaling_range is not None:
            lo, hi = corr.scaling_range
            inside = (corr.radius >= lo) & (corr.radius <= hi)
            series.append(Series(f"{label}: fitted range, slope {corr.dimension:.3g}",
                                 corr.radius[inside], corr.correlation_sum[inside],
                                 line=False, markers=True))
    if not series:
        return None
    figure = Figure(
        "Correlation sum",
        line_plot(series, x_axis=Axis("radius r (section units: × well position)", log=True),
                  y_axis=Axis("correlation sum C(r)", log=True),
                  title="Correlation sum of the sections against radius",
                  description="Correlation sum C(r) of the measured and the model's sections "
                              "against radius on logarithmic axes, with the points of each "
                              "fitted scaling range marked."),
        caption="Read the slope over the marked stretch: it is the correlation dimension "
                "(Grassberger & Procaccia 1983). A straight stretch over half a decade or more "
                "is needed; below it the points are too few (or the noise fills the small "
                "scales), above it the set's finite size bends the curve.")
    return Section("Correlation dimension", figures=[figure])


def _hop_section(study) -> Section | None:
    hops = study.result.measured.hops
    if hops is None or hops.dwell_times_s.size < 2:
        return None
    dwell = hops.dwell_times_s
    edges = np.histogram_bin_edges(dwell, bins=min(HISTOGRAM_BINS, max(4, dwell.size // 4)))
    counts, _ = np.histogram(dwell, bins=edges)
    x, y = _steps(edges, counts)
    series = [Series(f"measured ({dwell.size} stays)", x, y)]
    rate = study.answer.predicted_hop_rate_per_s
    if rate:
        expected = dwell.size * (np.exp(-rate * edges[:-1]) - np.exp(-rate * edges[1:]))
        px, py = _steps(edges, expected)
        series.append(Series(f"hops at random at the predicted rate {rate:.3g}/s", px, py,
                             dashed=True))
    figure = Figure(
        "Time in a well between hops",
        line_plot(series, x_axis=Axis("time in a well between hops", "s"),
                  y_axis=Axis("stays"),
                  title="Histogram of the stays in a well between hops",
                  description="Histogram of the times the tip stayed in one well between "
                              "successive hops, with the counts a Poisson process at the "
                              "predicted hop rate would give."),
        caption="Read how long the tip stays in a well before it hops again. Under a tone, "
                "stays cluster near multiples of half a forcing period; the dashed steps show "
                "what hops at the predicted mean rate would give if they came at random "
                "(a Poisson process): a guide to the scale, not a prediction of the shape.")
    return Section("Hops", figures=[figure],
                   paragraphs=[f"{hops.count} hops in {hops.duration_s:.3g} s; time below and "
                               f"above the saddle {100 * hops.time_share[0]:.0f} % and "
                               f"{100 * hops.time_share[1]:.0f} %."])


def _steps(edges: np.ndarray, heights: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """A histogram's outline: x at each edge twice, y stepping between bin heights."""
    x = np.repeat(edges, 2)[1:-1]
    y = np.repeat(heights, 2)
    return np.concatenate(([edges[0]], x, [edges[-1]])), np.concatenate(([0.0], y, [0.0]))
