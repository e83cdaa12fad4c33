"""The `harvester` command: parse the arguments, call one function, render the answer.

Heavy modules (scipy, numba, pint) are imported inside the commands so that `--help` and the
static commands start quickly.  Bad input exits with code 2 and one line on stderr; anything
else unexpected exits with code 1 (set HARVESTER_DEBUG=1 for the traceback).
"""

from __future__ import annotations

import os
import sys
from enum import Enum
from pathlib import Path
from typing import Annotated

import typer
from typer.core import TyperCommand

app = typer.Typer(
    name="harvester",
    help="Design calculator for bistable (magnet-coupled) cantilever vibration energy "
    "harvesters. Preliminary design aid: verify by test and defer to applicable design codes.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
)


def _version(value: bool) -> None:
    if value:
        from harvester import __version__

        typer.echo(f"harvester {__version__}")
        raise typer.Exit()


@app.callback()
def _main(version: Annotated[bool, typer.Option(
        "--version", help="Print the version and exit.", callback=_version,
        is_eager=True)] = False) -> None:
    """Design calculator for bistable (magnet-coupled) cantilever vibration energy harvesters.

    Preliminary design aid: verify by test and defer to applicable design codes.
    """


class Format(str, Enum):
    table = "table"
    json = "json"
    csv = "csv"


class MagnetModel(str, Enum):
    exact = "exact"
    dipole = "dipole"


class PlainUsage(TyperCommand):
    """Usage lines name a required argument plainly (CASE), not in braces."""

    def collect_usage_pieces(self, ctx) -> list[str]:
        return [p[1:-1] if p.startswith("{") and p.endswith("}") else p
                for p in super().collect_usage_pieces(ctx)]


CaseArg = Annotated[Path, typer.Argument(help="Case file (TOML).", show_default=False,
                                          metavar="CASE")]
FormatOpt = Annotated[Format, typer.Option("--format", "-f", help="Output format.")]
MagnetOpt = Annotated[MagnetModel, typer.Option(
    "--magnet-model", help="Magnet force model: exact (surface charges) or dipole.")]


def _fail(message: str, code: int) -> None:
    typer.echo(f"harvester: {message}", err=True)
    raise typer.Exit(code)


def _run(job):
    """Run a command body, turning bad input into exit 2 and surprises into exit 1."""
    from harvester.errors import CaseError

    try:
        return job()
    except CaseError as exc:
        _fail(str(exc), 2)
    except OSError as exc:  # unreadable data file, unwritable output folder, ...
        _fail(f"{exc.filename or ''}: {exc.strerror or exc}", 2)
    except typer.Exit:
        raise
    except KeyboardInterrupt:
        _fail("interrupted", 130)
    except Exception as exc:  # noqa: BLE001 - the last line of defence for users
        from harvester.commands.executor import ClusterUnavailable, TaskFailed

        if isinstance(exc, ClusterUnavailable):
            _fail(str(exc), 2)
        if isinstance(exc, TaskFailed) and isinstance(exc.__cause__, CaseError):
            _fail(str(exc.__cause__), 2)
        if os.environ.get("HARVESTER_DEBUG"):
            raise
        _fail(f"internal error: {type(exc).__name__}: {exc} (set HARVESTER_DEBUG=1 for "
              "details and please report it)", 1)


def _gap_option(text: str | None) -> float | None:
    from harvester.errors import CaseError
    from harvester.units import UnitError, to_si

    if text is None:
        return None
    try:
        gap = to_si(text, "length")
    except UnitError as exc:
        raise CaseError(str(exc), key="--gap") from None
    if not gap > 0.0:
        raise CaseError(f"{text!r}: the magnets would touch or overlap; the gap must be > 0",
                        key="--gap")
    return gap


@app.command(cls=PlainUsage)
def check(case: CaseArg, fmt: FormatOpt = Format.table,
          magnet_model: MagnetOpt = MagnetModel.exact) -> None:
    """The parsed design in SI, its derived beam, transducer and magnet properties, and every
    data file it names (read and checked).

    Example: harvester check cases/pump-skid-piezo.toml
    """
    def job():
        from harvester.case.load import load_case
        from harvester.commands.statics import check_result
        from harvester.report.views import show_check

        show_check(check_result(load_case(case), magnet_model.value), fmt.value)

    _run(job)


@app.command(cls=PlainUsage)
def wells(case: CaseArg,
          gap: Annotated[str | None, typer.Option(
              "--gap", metavar="GAP", help="Face-to-face magnet gap with a unit, e.g. \"7 mm\" "
              "(default: the gap in the case's [fixed_magnet] section).")] = None,
          fmt: FormatOpt = Format.table,
          magnet_model: MagnetOpt = MagnetModel.exact) -> None:
    """Static double-well analysis: regime, wells, barrier, critical gap, frequencies.

    Example: harvester wells cases/pump-skid-piezo.toml --gap "7 mm"
    """
    def job():
        from harvester.case.load import load_case
        from harvester.commands.statics import wells_result
        from harvester.report.views import show_wells

        show_wells(wells_result(load_case(case), _gap_option(gap), magnet_model.value),
                   fmt.value)

    _run(job)


SeedOpt = Annotated[int, typer.Option("--seed", metavar="N", help="Seed of every random "
                                     "ensemble (same seed, same answer).")]
StartsOpt = Annotated[int, typer.Option(
    "--starts", metavar="N", min=8, max=4096,
    help="Under a tone: random initial states in the orbit mix (more starts, a tighter "
    "interval).")]
CiOpt = Annotated[float, typer.Option(
    "--ci", metavar="FRACTION", min=0.005, max=0.5,
    help="Under random excitation: target half-width of the 95 % confidence interval of the "
    "mean power, relative (0.05 = ±5 %).")]


@app.command(cls=PlainUsage)
def hop(case: CaseArg, fmt: FormatOpt = Format.table, seed: SeedOpt = 0,
        magnet_model: MagnetOpt = MagnetModel.exact) -> None:
    """Hop thresholds vs frequency: Melnikov lower bound, numerical onset, certain hopping and
    where the beam strikes its stops.

    Example: harvester hop cases/pump-skid-piezo.toml --format csv
    """
    def job():
        from harvester.case.load import load_case
        from harvester.commands.hop import hop_result
        from harvester.report.progress import progress_bar
        from harvester.report.views import show_thresholds

        loaded = load_case(case)
        with progress_bar("hop thresholds") as update:
            result = hop_result(loaded, seed=seed, magnet_model=magnet_model.value,
                                progress=update)
        show_thresholds(result, fmt.value)

    _run(job)


@app.command(cls=PlainUsage)
def power(case: CaseArg, fmt: FormatOpt = Format.table, seed: SeedOpt = 0, ci: CiOpt = 0.05,
          starts: StartsOpt = 32,
          sweep: Annotated[bool, typer.Option(
              "--sweep/--no-sweep", help="Under a tone, also sweep the frequencies of the "
              "case's [study] section.")] = True,
          magnet_model: MagnetOpt = MagnetModel.exact) -> None:
    """Mean power under the case's tone, band, PSD or record, with safety checks.

    Compared with the same beam without magnets (at the case's load, or at its own best load
    for a "matched" one); the stress and safety checks use the predicted motion.

    Example: harvester power cases/fan-housing-coil.toml --seed 7
    """
    def job():
        from harvester.case.load import load_case
        from harvester.commands.power import power_result
        from harvester.report.progress import progress_bar
        from harvester.report.views import show_power

        loaded = load_case(case)
        with progress_bar("mean power") as update:
            result = power_result(loaded, seed=seed, ci=ci, sweep=sweep, starts=starts,
                                  magnet_model=magnet_model.value, progress=update)
        show_power(result, fmt.value)

    _run(job)


WorkersOpt = Annotated[int | None, typer.Option(
    "--workers", metavar="N", help="Run the candidates on N local processes.", min=1,
    max=256)]
ClusterOpt = Annotated[str | None, typer.Option(
    "--cluster", metavar="ADDRESS", help="Run on an existing Dask cluster, e.g. "
    "tcp://10.0.0.5:8786 (needs the 'cluster' extra on every worker).")]


@app.command(cls=PlainUsage)
def compare(case: CaseArg, fmt: FormatOpt = Format.table, seed: SeedOpt = 0, ci: CiOpt = 0.05,
            starts: StartsOpt = 32, workers: WorkersOpt = None, cluster: ClusterOpt = None,
            magnet_model: MagnetOpt = MagnetModel.exact) -> None:
    """The magnet-free beam and every candidate gap side by side, and which to build.

    One row per candidate: regime, barrier, hop onset, mean power with its interval, gain over
    the magnet-free beam and the worst stress margin.  A gap is recommended only where it
    passes every check and beats the magnet-free beam outside both intervals.

    Example: harvester compare cases/pump-skid-piezo.toml --workers 2
    """
    def job():
        from harvester.case.load import load_case
        from harvester.commands.compare import compare_result
        from harvester.report.progress import progress_bar
        from harvester.report.views import show_comparison

        loaded = load_case(case)
        random_site = loaded.case.excitation is not None and loaded.case.excitation.kind != "tone"
        with progress_bar("candidates") as update:
            result = compare_result(loaded, seed=seed, magnet_model=magnet_model.value,
                                    target_relative_half_width=ci, tone_starts=starts,
                                    hop_map=random_site, workers=workers, cluster=cluster,
                                    progress=update)
        show_comparison(result, fmt.value)

    _run(job)


@app.command(cls=PlainUsage)
def spread(case: CaseArg, fmt: FormatOpt = Format.table,
           samples: Annotated[int, typer.Option(
               "--samples", metavar="N", min=1, max=100_000,
               help="Sampled builds (the Monte Carlo over [tolerances]).")] = 500,
           seed: SeedOpt = 0,
           gap: Annotated[str | None, typer.Option(
               "--gap", metavar="GAP", help="Nominal face-to-face magnet gap with a unit, e.g. "
               "\"10 mm\" (default: the case's).")] = None,
           subsample: Annotated[int, typer.Option(
               "--subsample", metavar="N", min=0, max=100_000,
               help="Builds that also get the reference power (the full orbit mix or Monte "
               "Carlo) and every check.")] = 20,
           statics: Annotated[bool, typer.Option(
               "--statics", help="Only the double well of each build (fast).")] = False,
           workers: WorkersOpt = None, cluster: ClusterOpt = None,
           magnet_model: MagnetOpt = MagnetModel.exact) -> None:
    """The spread of a design over its build tolerances and service temperatures.

    Monte Carlo over the case's [tolerances] (and its temperature range): the barrier, hop
    onset, mean power and worst margin of every sampled build, how many stay bistable, stay in
    a well at the site or fail a check (with 95 % intervals), and which tolerance to tighten.

    Example: harvester spread cases/oscillating-conveyor-coil.toml --samples 500 --workers 2
    """
    def job():
        from harvester.case.load import load_case
        from harvester.commands.spread import spread_result
        from harvester.report.progress import progress_bar
        from harvester.report.views import show_spread

        loaded = load_case(case)
        with progress_bar("builds") as update:
            result = spread_result(loaded, samples=samples, seed=seed, gap_m=_gap_option(gap),
                                   subsample=subsample, statics_only=statics,
                                   magnet_model=magnet_model.value, workers=workers,
                                   cluster=cluster, progress=update)
        show_spread(result, fmt.value)

    _run(job)


class Over(str, Enum):
    frequency = "frequency"
    amplitude = "amplitude"


class Direction(str, Enum):
    up = "up"
    down = "down"
    both = "both"


class Start(str, Enum):
    positive = "positive"
    negative = "negative"
    both = "both"


def _quantity_option(text: str | None, dimension: str, key: str) -> float | None:
    """A value with a unit from an option, in SI; None when not given."""
    from harvester.errors import CaseError
    from harvester.units import UnitError, to_si

    if text is None:
        return None
    try:
        return to_si(text, dimension)
    except UnitError as exc:
        raise CaseError(str(exc), key=key) from None


def _rate_option(text: str | None, over: str) -> float | None:
    """A sweep rate such as "0.05 Hz/s" or "0.01 g/s" (per s, min or h), in SI."""
    from harvester.errors import CaseError

    if text is None:
        return None
    amount, slash, per = text.rpartition("/")
    dimension = "frequency" if over == "frequency" else "acceleration"
    try:
        if not slash:
            raise CaseError("no time unit")
        return _quantity_option(amount, dimension, "--rate") / _quantity_option(
            f"1 {per.strip()}", "time", "--rate")
    except CaseError:
        raise CaseError(f"{text!r}: a {over} sweep's rate is a {dimension} per unit of time, "
                        f"e.g. \"{'0.05 Hz/s' if over == 'frequency' else '0.01 g/s'}\"",
                        key="--rate") from None


FigureOpt = Annotated[Path | None, typer.Option(
    "--figure", metavar="FILE", help="Also write the figure as SVG to FILE.")]
GapOpt = Annotated[str | None, typer.Option(
    "--gap", metavar="GAP", help="Face-to-face magnet gap with a unit, e.g. \"7 mm\" (default: "
    "the case's).")]
FrequencyOpt = Annotated[str | None, typer.Option(
    "--frequency", metavar="F", help="Tone frequency with a unit, e.g. \"10 Hz\" (default: the "
    "case's tone).")]
AmplitudeOpt = Annotated[str | None, typer.Option(
    "--amplitude", metavar="A", help="Tone amplitude (base acceleration) with a unit, e.g. "
    "\"0.4 g\" (default: the case's tone).")]


@app.command(cls=PlainUsage)
def sweep(case: CaseArg,
          over: Annotated[Over, typer.Option("--over", help="Sweep the tone's frequency or "
                                             "its amplitude.")] = Over.frequency,
          direction: Annotated[Direction, typer.Option(
              "--direction", help="Sweep up, down or both ways.")] = Direction.both,
          rate: Annotated[str | None, typer.Option(
              "--rate", metavar="RATE", help="Sweep rate, e.g. \"0.05 Hz/s\" or \"0.01 g/s\" "
              "(default: slow enough for every step to settle; the output says how far the "
              "jumps move at twice the rate).")] = None,
          start: Annotated[str | None, typer.Option(
              "--from", metavar="VALUE", help="Low end of the sweep, e.g. \"5 Hz\" (default: "
              "[study] grid, or 0.25 × the operating frequency; amplitude: 0).")] = None,
          stop: Annotated[str | None, typer.Option(
              "--to", metavar="VALUE", help="High end of the sweep (default: [study] grid, or "
              "2.5 × the operating frequency; amplitude: twice the tone's).")] = None,
          frequency: FrequencyOpt = None, amplitude: AmplitudeOpt = None,
          well: Annotated[Start, typer.Option(
              "--start", help="The beam starts at rest in the well at x > 0 (positive), "
              "x < 0 (negative) or one path in each.")] = Start.positive,
          gap: GapOpt = None, figure: FigureOpt = None, fmt: FormatOpt = Format.table,
          magnet_model: MagnetOpt = MagnetModel.exact) -> None:
    """Follow the beam through a slow sweep of the tone: its orbit, jumps and hysteresis.

    The beam starts at rest in a well and is carried up, down or both ways; the output gives
    its peak deflection, mean power and interwell share along the way, the jumps from one
    orbit to another and where the large interwell orbit is held.

    Example: harvester sweep cases/oscillating-conveyor-coil.toml --direction both
    """
    def job():
        from harvester.case.load import load_case
        from harvester.commands.sweep import sweep_result
        from harvester.report.progress import progress_bar
        from harvester.report.views import show_sweep

        loaded = load_case(case)
        dimension = "frequency" if over == Over.frequency else "acceleration"
        with progress_bar("sweep") as update:
            result = sweep_result(
                loaded, over=over.value, direction=direction.value,
                rate=_rate_option(rate, over.value),
                frequency_Hz=_quantity_option(frequency, "frequency", "--frequency"),
                amplitude_mps2=_quantity_option(amplitude, "acceleration", "--amplitude"),
                start=_quantity_option(start, dimension, "--from"),
                stop=_quantity_option(stop, dimension, "--to"), well=well.value,
                gap_m=_gap_option(gap), magnet_model=magnet_model.value, progress=update)
        show_sweep(result, fmt.value)
        if figure is not None:
            from harvester.report.design_note import sweep_figure

            figure.write_text(sweep_figure(result), encoding="utf-8")

    _run(job)


@app.command(cls=PlainUsage)
def basins(case: CaseArg, frequency: FrequencyOpt = None, amplitude: AmplitudeOpt = None,
           gap: GapOpt = None,
           points: Annotated[int, typer.Option(
               "--points", metavar="N", min=20, max=1000,
               help="Starts along each axis of the grid (N × N in all).")] = 200,
           figure: FigureOpt = None, fmt: FormatOpt = Format.table,
           magnet_model: MagnetOpt = MagnetModel.exact) -> None:
    """Basins of attraction under a tone: which orbit each start ends on, each orbit's share
    of the starts (basin stability) and its mean power.

    Example: harvester basins cases/oscillating-conveyor-coil.toml --figure basins.svg
    """
    def job():
        from harvester.case.load import load_case
        from harvester.commands.basins import basins_result
        from harvester.report.progress import progress_bar
        from harvester.report.views import show_basins

        loaded = load_case(case)
        with progress_bar("basins") as update:
            result = basins_result(
                loaded, frequency_Hz=_quantity_option(frequency, "frequency", "--frequency"),
                amplitude_mps2=_quantity_option(amplitude, "acceleration", "--amplitude"),
                gap_m=_gap_option(gap), points=points, magnet_model=magnet_model.value,
                progress=update)
        show_basins(result, fmt.value)
        if figure is not None:
            from harvester.report.design_note import basin_figure

            figure.write_text(basin_figure(result), encoding="utf-8")

    _run(job)


class Paper(str, Enum):
    a4 = "A4"
    letter = "Letter"


@app.command(cls=PlainUsage)
def note(case: CaseArg,
         out: Annotated[Path, typer.Option("--out", "-o", metavar="FOLDER", help="Folder for "
                                           "the note (created; files in it are replaced "
                                           "atomically).")],
         seed: SeedOpt = 0, workers: WorkersOpt = None, cluster: ClusterOpt = None,
         pdf: Annotated[bool, typer.Option("--pdf", help="Also print note.pdf with headless "
                                           "Chromium, where it is installed.")] = False,
         paper: Annotated[Paper, typer.Option("--paper", help="Printed page size.")] = Paper.a4,
         magnet_model: MagnetOpt = MagnetModel.exact) -> None:
    """Write the design note (Markdown, self-contained HTML, CSV/JSON tables, SVG figures).

    Example: harvester note cases/pump-skid-piezo.toml --out note-pump-skid --pdf
    """
    def job():
        from harvester.case.load import load_case
        from harvester.report.design_note import build_note
        from harvester.report.note import write_note
        from harvester.report.progress import progress_bar

        loaded = load_case(case)
        with progress_bar("design note") as update:
            document = build_note(loaded, seed=seed, magnet_model=magnet_model.value,
                                  workers=workers, cluster=cluster, paper=paper.value,
                                  progress=update)
        written = write_note(document, out)
        typer.echo(f"wrote {len(written)} files to {out} (open {out / 'note.html'})")
        if pdf:
            from harvester.report.pdf import print_pdf

            problem = print_pdf(out / "note.html", out / "note.pdf")
            if problem is None:
                typer.echo(f"printed {out / 'note.pdf'} ({paper.value})")
            else:
                typer.echo(f"harvester: no PDF: {problem}", err=True)

    _run(job)


class ForcingKind(str, Enum):
    tone = "tone"
    random = "random"
    auto = "auto"


def _load_option(text: str | None) -> float | None:
    from harvester.errors import CaseError
    from harvester.units import UnitError, to_si

    if text is None:
        return None
    try:
        load = to_si(text, "resistance")
    except UnitError as exc:
        raise CaseError(str(exc), key="--load") from None
    if not load > 0.0:
        raise CaseError(f"{text!r}: a load resistance must be > 0", key="--load")
    return load


UnitsOpt = Annotated[str | None, typer.Option(
    "--units", metavar="NAME=UNIT,...", help="Units of columns whose header gives none, e.g. "
    "\"tip_displacement=mm,base_acceleration=g\" (time defaults to s).")]


@app.command(cls=PlainUsage)
def trace(record: Annotated[Path, typer.Argument(
              help="Shaker record (CSV): time, base acceleration, and tip displacement, tip "
              "velocity or the voltage across the load.", show_default=False,
              metavar="RECORD")],
          case: Annotated[Path, typer.Option("--case", metavar="CASE", show_default=False,
                                             help="Case file of the tested design.")],
          load: Annotated[str | None, typer.Option(
              "--load", metavar="R", help="Load the prototype was tested with, e.g. "
              "\"47 kohm\" (default: the case's [load] resistance).")] = None,
          forcing: Annotated[ForcingKind | None, typer.Option(
              "--forcing", help="Forcing in the base signal (default: the kind of the case's "
              "[excitation]).")] = None,
          units: UnitsOpt = None,
          column_names: Annotated[str | None, typer.Option(
              "--columns", metavar="NAME,...", help="Column names in order, for a record "
              "without a header row, e.g. time,base_acceleration,tip_displacement.")] = None,
          phase: Annotated[float, typer.Option(
              "--phase", metavar="DEGREES", help="Forcing phase of the stroboscopic section "
              "(0: where the base acceleration peaks).")] = 0.0,
          fmt: FormatOpt = Format.table, seed: SeedOpt = 0, starts: StartsOpt = 32,
          out: Annotated[Path | None, typer.Option(
              "--out", "-o", metavar="FOLDER", help="Also write a trace note with its figures "
              "into FOLDER (created; files in it are replaced atomically).")] = None,
          pdf: Annotated[bool, typer.Option("--pdf", help="With --out, also print note.pdf "
                                            "with headless Chromium, where it is "
                                            "installed.")] = False,
          magnet_model: MagnetOpt = MagnetModel.exact) -> None:
    """A shaker record of the built prototype against the model's prediction.

    From the record: the forcing, the stroboscopic section, hops and time in each well, the
    orbit class, the largest Lyapunov exponent, the correlation dimension of the section and
    the mean power into the load; beside each, the model's prediction for the measured
    excitation, the difference and whether it lies inside the prediction's interval.

    Example: harvester trace cases/prototype-test/shaker-14Hz.csv --case
    cases/prototype-test/conveyor-calibrated.toml --out trace-cv1
    """
    def job():
        import math

        from harvester.case.load import load_case
        from harvester.case.measurements import column_options, unit_options
        from harvester.commands.trace import trace_study
        from harvester.report.views import show_trace

        loaded = load_case(case)
        study = trace_study(loaded, record, load_ohm=_load_option(load),
                            forcing=forcing.value if forcing else None,
                            units=unit_options(units), columns=column_options(column_names),
                            phase_rad=math.radians(phase), seed=seed, starts=starts,
                            magnet_model=magnet_model.value)
        show_trace(study.answer, fmt.value)
        if out is not None:
            _write_trace_note(study, out, pdf)

    _run(job)


def _write_trace_note(study, out: Path, pdf: bool) -> None:
    from harvester.report.note import write_note
    from harvester.report.trace_note import trace_note

    written = write_note(trace_note(study), out)
    typer.echo(f"wrote {len(written)} files to {out} (open {out / 'note.html'})", err=True)
    if pdf:
        from harvester.report.pdf import print_pdf

        problem = print_pdf(out / "note.html", out / "note.pdf")
        if problem is None:
            typer.echo(f"printed {out / 'note.pdf'}", err=True)
        else:
            typer.echo(f"harvester: no PDF: {problem}", err=True)


@app.command(cls=PlainUsage)
def calibrate(case: CaseArg,
              ringdown: Annotated[Path | None, typer.Option(
                  "--ringdown", metavar="FILE", help="Free decay (CSV: time and the tip "
                  "displacement, tip velocity or voltage), in a well or of the magnet-free "
                  "beam, with no power drawn.")] = None,
              force_deflection: Annotated[Path | None, typer.Option(
                  "--force-deflection", metavar="FILE", help="Static force-deflection table "
                  "(CSV: deflection, force) with the magnets in place.")] = None,
              sweep: Annotated[Path | None, typer.Option(
                  "--sweep", metavar="FILE", help="Low-level stepped sine about one well "
                  "(CSV: frequency, base acceleration and tip displacement or load voltage "
                  "amplitudes, optionally the phase; or a time record of a stepped or slowly "
                  "swept sine), at the case's load.")] = None,
              out: Annotated[Path | None, typer.Option(
                  "--out", "-o", metavar="PATH", help="Calibrated case file to write "
                  "(default: beside the case, <name>-calibrated.toml).")] = None,
              units: UnitsOpt = None, fmt: FormatOpt = Format.table,
              magnet_model: MagnetOpt = MagnetModel.exact) -> None:
    """Write a calibrated case from tests on the built prototype.

    The ring-down gives the damping (log decrement, with the Hilbert envelope as a check and
    for amplitude dependence); the force-deflection table the restoring force: its
    coefficients for a [reduced] case, the magnets' effective remanence and the gap for a
    geometry case.  The stepped sine gives the in-well frequency and the total damping at the
    load: less the ring-down's damping, the coupling (a coil's flux linkage); its frequency
    checks the force table's magnets, or sets the remanence without one.  Every other command
    reads the calibrated case.

    Example: harvester calibrate cases/oscillating-conveyor-coil.toml --ringdown
    cases/prototype-test/ringdown.csv --force-deflection
    cases/prototype-test/force-deflection.csv --sweep cases/prototype-test/sweep.csv --out
    cases/prototype-test/conveyor-calibrated.toml
    """
    def job():
        from harvester.case.load import load_case
        from harvester.case.measurements import unit_options
        from harvester.commands.calibrate import calibrate_result
        from harvester.report.views import show_calibration

        result = calibrate_result(load_case(case), ringdown=ringdown,
                                  force_deflection=force_deflection, sweep=sweep, out=out,
                                  units=unit_options(units), magnet_model=magnet_model.value)
        Path(result.out_file).write_text(result.case_text, encoding="utf-8")
        show_calibration(result, fmt.value)

    _run(job)


@app.command(cls=PlainUsage)
def materials(fmt: FormatOpt = Format.table) -> None:
    """The material table with the source of every value.

    Example: harvester materials --format csv
    """
    def job():
        from harvester.commands.materials import materials_result
        from harvester.report.views import show_materials

        show_materials(materials_result(), fmt.value)

    _run(job)


def main() -> None:
    """Entry point of the `harvester` command."""
    try:
        app()
    except SystemExit as exc:
        code = exc.code if isinstance(exc.code, int) else (0 if exc.code is None else 1)
        sys.exit(code)
