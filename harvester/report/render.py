"""Print result records as a rich table, JSON or CSV.

JSON and CSV are for scripts: SI values under the record's keys (which carry their units), 12
significant digits, JSON alone on stdout.  Tables are for people: the registry's labels and
display units (`harvester.report.columns`), a few significant figures, verdicts in colour.
"""

from __future__ import annotations

import csv
import io
import json
import sys
from collections.abc import Iterable, Sequence

from harvester.commands.records import json_value, si_unit
from harvester.report.columns import LEVEL_STYLE, Column

FORMATS = ("table", "json", "csv")
MAX_PIPED_WIDTH = 240
TEXT_COLUMN_WIDTH = 44  # a column of sentences wraps here rather than widening the table


def emit_json(result) -> None:
    """A record (or a dict of them) as JSON on stdout, SI keys and values."""
    sys.stdout.write(json.dumps(json_value(result), indent=2, ensure_ascii=False,
                                allow_nan=False) + "\n")


def _value(row, key: str):
    return row.get(key) if isinstance(row, dict) else getattr(row, key, None)


def csv_cell(value) -> str:
    """A cell for CSV: SI, 12 significant digits, true/false, "" for nothing."""
    value = json_value(value)
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, list):
        return ";".join(csv_cell(v) for v in value)
    return str(value)


def csv_text(rows: Iterable, keys: Sequence[str]) -> str:
    """Rows as CSV: a header of record keys (each carrying its SI unit), SI values."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(keys)
    writer.writerows([[csv_cell(_value(row, k)) for k in keys] for row in rows])
    return buffer.getvalue()


def emit_csv(rows: Iterable, keys: Sequence[str]) -> None:
    sys.stdout.write(csv_text(rows, keys))


def emit_record_csv(record, columns: Sequence[Column]) -> None:
    """One record as CSV: a row per quantity with its key, SI value and SI unit."""
    rows = [{"key": c.key, "value_SI": _value(record, c.key), "unit_SI": si_unit(c.key) or ""}
            for c in columns]
    emit_csv(rows, ("key", "value_SI", "unit_SI"))


def console_for(table=None):
    """A console for stdout: the terminal's width on a terminal; piped or redirected, wide
    enough that `table` never wraps (a file has no width to fit)."""
    from rich.console import Console

    console = Console()
    if table is not None and not console.is_terminal:
        natural = console.measure(table, options=console.options.update(
            max_width=MAX_PIPED_WIDTH)).maximum
        console = Console(width=min(max(console.width, natural), MAX_PIPED_WIDTH))
    return console


def _cell(column: Column, value) -> str:
    from rich.markup import escape

    shown = escape(column.show(value))
    if column.level and value in LEVEL_STYLE:
        return f"[{LEVEL_STYLE[value]}]{shown}[/]"
    return shown


def print_record(title: str, record, columns: Sequence[Column], *, skip_empty: bool = True):
    """One record as a two-column table (quantity, value with its unit)."""
    from rich.markup import escape
    from rich.table import Table

    table = Table(title=escape(title), show_header=True, header_style="bold")
    table.add_column("quantity")
    table.add_column("value", justify="right")
    table.add_column("unit")
    for col in columns:
        value = _value(record, col.key)
        if skip_empty and value in (None, (), []):
            continue
        table.add_row(escape(col.label), _cell(col, value), escape(col.unit))
    console = console_for(table)
    console.print(table)
    return console


def print_rows(title: str, rows: Sequence, columns: Sequence[Column], *, footer: str = ""):
    """Many records as a table, one row each, headers with their display units."""
    from rich.markup import escape
    from rich.table import Table

    table = Table(title=escape(title), show_header=True, header_style="bold")
    for col in columns:
        header = f"{col.label}\n[{col.unit}]" if col.unit else col.label
        if col.numeric():
            table.add_column(escape(header), justify="right")
        else:
            table.add_column(escape(header), justify="left", overflow="fold",
                             max_width=TEXT_COLUMN_WIDTH)
    for row in rows:
        table.add_row(*(_cell(c, _value(row, c.key)) for c in columns))
    console = console_for(table)
    console.print(table)
    if footer:
        console.print(footer, markup=False, highlight=False)
    return console


def print_lines(console, lines: Iterable[str], *, prefix: str = "warning: ",
                style: str = "bold yellow") -> None:
    for line in lines:
        console.print(prefix, style=style, end="")
        console.print(line, markup=False, highlight=False)
