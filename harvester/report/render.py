"""Print results as a rich table, JSON or CSV.

JSON goes to stdout alone (no colour, no progress), keys carry their SI unit.  Tables convert to
display units named in the header and round to a few significant figures.
"""

from __future__ import annotations

import csv
import io
import json
import math
import sys
from dataclasses import dataclass

FORMATS = ("table", "json", "csv")


@dataclass(frozen=True)
class Column:
    """One displayed quantity: JSON key, label, display unit and the factor SI → display."""

    key: str
    label: str
    unit: str = ""
    scale: float = 1.0
    digits: int = 4
    words: tuple[tuple[object, str], ...] = ()  # coded values shown as words, e.g. ((1, "x > 0"),)
    text: bool = False  # a column of words: left-justified, folded rather than cut

    def show(self, value: object) -> str:
        """The value as the table shows it: its word, or the number in display units."""
        for code, word in self.words:
            if value == code:
                return word
        return format_number(value, self.digits, self.scale)


def format_number(value: object, digits: int = 4, scale: float = 1.0) -> str:
    """A number to `digits` significant figures; lists element-wise; None as "—"."""
    if value is None:
        return "—"
    if isinstance(value, bool) or isinstance(value, str):
        return str(value)
    if isinstance(value, int) and scale == 1.0:  # a count or a code, not a measurement
        return str(value)
    if isinstance(value, (list, tuple)):
        return ", ".join(format_number(v, digits, scale) for v in value) or "—"
    number = float(value) * scale
    if math.isnan(number):
        return "n/a"
    if math.isinf(number):
        return "∞" if number > 0 else "−∞"
    if number == 0.0:
        return "0"
    magnitude = math.floor(math.log10(abs(number)))
    if -3 <= magnitude < 6:
        decimals = max(digits - 1 - magnitude, 0)
        return f"{number:.{decimals}f}"
    return f"{number:.{digits - 1}e}"


def _clean(value):
    """JSON-safe: inf/NaN become None (JSON has no infinity); tuples become lists."""
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: _clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_clean(v) for v in value]
    if hasattr(value, "item") and callable(value.item):  # numpy scalar
        return _clean(value.item())
    return value


def emit_json(payload: dict) -> None:
    sys.stdout.write(json.dumps(_clean(payload), indent=2, ensure_ascii=False) + "\n")


def emit_record(title: str, payload: dict, columns: list[Column], fmt: str,
                warnings: list[str] | None = None) -> None:
    """A single result: a two-column table (quantity, value) or JSON/CSV of the payload."""
    if fmt == "json":
        emit_json(payload)
        return
    if fmt == "csv":
        lines = []
        for col in columns:
            value = payload.get(col.key)
            if isinstance(value, (list, tuple)):
                value = ";".join(f"{float(v) * col.scale:.12g}" for v in value)
            elif isinstance(value, (int, float)) and not isinstance(value, bool):
                value = f"{float(value) * col.scale:.12g}"
            lines.append([col.label, value, col.unit])
        _write_csv(["quantity", "value", "unit"], lines)
        return
    from rich.console import Console
    from rich.markup import escape
    from rich.table import Table

    table = Table(title=escape(title), show_header=True, header_style="bold")
    table.add_column("quantity")
    table.add_column("value", justify="right")
    table.add_column("unit")
    for col in columns:
        table.add_row(escape(col.label),
                      escape(col.show(payload.get(col.key))),
                      escape(col.unit))
    console = Console()
    console.print(table)
    _print_warnings(console, warnings)


def _console_for(table):
    """A console for `table`: the terminal's width on a terminal; piped or redirected, wide
    enough that the table never wraps (a file has no width to fit)."""
    from rich.console import Console

    console = Console()
    if not console.is_terminal:
        natural = console.measure(table, options=console.options.update(
            max_width=MAX_PIPED_WIDTH)).maximum
        console = Console(width=min(max(console.width, natural), MAX_PIPED_WIDTH))
    return console


MAX_PIPED_WIDTH = 240
TEXT_COLUMN_WIDTH = 44  # a column of sentences wraps here rather than widening the table


def emit_rows(title: str, payload: dict, rows: list[dict], columns: list[Column], fmt: str,
              warnings: list[str] | None = None, footer: str = "") -> None:
    """Many results: one row each (for example one per frequency or per gap)."""
    if fmt == "json":
        emit_json(payload)
        return
    if fmt == "csv":
        _write_csv([c.key for c in columns],
                   [[_csv_value(row.get(c.key)) for c in columns] for row in rows])
        return
    from rich.markup import escape
    from rich.table import Table

    table = Table(title=escape(title), show_header=True, header_style="bold")
    for col in columns:
        header = f"{col.label}\n[{col.unit}]" if col.unit else col.label
        if col.text or col.words:
            table.add_column(escape(header), justify="left", overflow="fold",
                             max_width=TEXT_COLUMN_WIDTH)
        else:
            table.add_column(escape(header), justify="right")
    for row in rows:
        table.add_row(*(escape(c.show(row.get(c.key))) for c in columns))
    console = _console_for(table)
    console.print(table)
    if footer:
        console.print(footer, markup=False, highlight=False)
    _print_warnings(console, warnings)


def _write_csv(header: list[str], rows: list[list]) -> None:
    buffer = io.StringIO()
    writer = csv.writer(buffer)
    writer.writerow(header)
    writer.writerows(rows)
    sys.stdout.write(buffer.getvalue())


def _csv_value(value):
    if value is None:
        return ""
    if isinstance(value, (list, tuple)):
        return ";".join(str(v) for v in value)
    return value


def _print_warnings(console, warnings: list[str] | None) -> None:
    for warning in warnings or []:
        console.print("warning: ", style="bold yellow", end="")
        console.print(warning, markup=False, highlight=False)
