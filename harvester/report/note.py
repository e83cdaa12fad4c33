"""Write a design note: Markdown, self-contained HTML, tables as CSV and JSON, figures as SVG.

The note is data first: a `Note` of `Section`s holding paragraphs, `Table`s and `Figure`s, plus
the checks (`flags`) and the cautions.  `write_note` renders it all in memory, writes the files
into a staging directory beside the output directory and moves each into place with an atomic
rename; if anything fails, the files already moved are put back, so a failed run never leaves a
half-written note or damages the previous one.

Tables hold SI values under registry columns: Markdown and HTML show them in the columns'
display units and figures, CSV and JSON keep SI (12 significant digits) under the keys the
command line's JSON uses.  Failed checks open the note in a red box, before any result.
"""

from __future__ import annotations

import csv
import io
import json
import os
import re
import shutil
import tempfile
import unicodedata
from collections.abc import Sequence
from dataclasses import dataclass
from html import escape, unescape
from pathlib import Path

from harvester import __version__
from harvester.commands.records import json_value
from harvester.report.columns import Column
from harvester.report.render import csv_cell

FLAG_LEVELS = ("fail", "warn", "pass")
PAPER_SIZES = {"A4": "A4", "Letter": "letter"}  # CSS @page size names
FLAG_HEADINGS = {"fail": "Failed checks", "warn": "Warnings", "pass": "Passed checks"}



def _slug(text: str, limit: int = 40) -> str:
    ascii_text = unicodedata.normalize("NFKD", text).encode("ascii", "ignore").decode()
    slug = re.sub(r"-+", "-", re.sub(r"[^A-Za-z0-9]", "-", ascii_text)).strip("-").lower()
    return slug[:limit].strip("-") or "untitled"


@dataclass(frozen=True)
class Table:
    """Rows of SI values under registry columns (`harvester.report.columns`), with an optional
    note below: people read the columns' display units, CSV and JSON get the SI values under
    the same keys as the command line's JSON."""

    title: str
    columns: Sequence[Column]
    rows: Sequence[Sequence]
    note: str = ""
    inline: bool = True  # False: written as CSV/JSON only, the pages carry a pointer to them

    def __post_init__(self) -> None:
        keys = [c.key for c in self.columns]
        if len(set(keys)) != len(keys):
            raise ValueError(f"table '{self.title}': columns must have distinct keys, got {keys}")
        for number, row in enumerate(self.rows, start=1):
            if len(row) != len(self.columns):
                raise ValueError(
                    f"table '{self.title}': row {number} has {len(row)} values "
                    f"for {len(self.columns)} columns"
                )


@dataclass(frozen=True)
class Figure:
    """A figure: one ``<svg>`` element (see `harvester.report.svg`), a title and a caption."""

    title: str
    svg: str
    caption: str = ""  # what to read from the figure

    @property
    def alt(self) -> str:
        """What the figure shows, for readers who cannot see it: the SVG's own <desc>."""
        found = re.search(r"<desc[^>]*>(.*?)</desc>", self.svg, re.S)
        return unescape(found.group(1)).strip() if found else self.title

    def __post_init__(self) -> None:
        text = self.svg.strip()
        if not (text.startswith("<svg") and text.endswith("</svg>")):
            raise ValueError(f"figure '{self.title}': svg must be a single <svg> element")
        if re.search(r"<script|<foreignObject|<[^>]*\son[a-z]+\s*=|javascript:", text, re.I):
            raise ValueError(f"figure '{self.title}': svg must not contain scripts")


@dataclass(frozen=True)
class Section:
    title: str
    paragraphs: Sequence[str] = ()
    tables: Sequence[Table] = ()
    figures: Sequence[Figure] = ()


@dataclass(frozen=True)
class Note:
    """A whole design note; `flags` are (level, text) with level "fail", "warn" or "pass"."""

    title: str
    subtitle: str = ""
    sections: Sequence[Section] = ()
    cautions: Sequence[str] = ()
    flags: Sequence[tuple[str, str]] = ()
    answer: Sequence[tuple[str, str]] = ()  # (label, text): what to build and why, first
    paper: str = "A4"  # "A4" | "Letter": the printed page

    def __post_init__(self) -> None:
        for level, _ in self.flags:
            if level not in FLAG_LEVELS:
                raise ValueError(f"flag level must be one of {FLAG_LEVELS}, got {level!r}")
        if self.paper not in PAPER_SIZES:
            raise ValueError(f"paper must be one of {sorted(PAPER_SIZES)}, got {self.paper!r}")


# -- cell values ----------------------------------------------------------------------------


def _numeric_column(table: Table, index: int) -> bool:
    column = table.columns[index]
    values = [json_value(row[index]) for row in table.rows if row[index] is not None]
    return column.numeric() and bool(values) and all(
        isinstance(v, (int, float, list)) and not isinstance(v, bool) for v in values)


def table_csv(table: Table) -> str:
    """The table as CSV: a header of column keys (each with its SI unit), then SI rows."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow([c.key for c in table.columns])
    writer.writerows([[csv_cell(v) for v in row] for row in table.rows])
    return buffer.getvalue()


def table_json(table: Table) -> str:
    """The table as JSON: title, note, columns (key, label, display unit) and rows of SI
    values keyed by column key, the same keys as the command line's JSON."""
    document = {
        "title": table.title,
        "note": table.note,
        "columns": [{"key": c.key, "label": c.label, "unit_display": c.unit}
                    for c in table.columns],
        "rows": [
            {c.key: json_value(v) for c, v in zip(table.columns, row, strict=True)}
            for row in table.rows
        ],
    }
    return json.dumps(document, indent=2, ensure_ascii=False, allow_nan=False) + "\n"


# -- file names -----------------------------------------------------------------------------


def _file_names(note: Note) -> tuple[dict, dict]:
    """Number tables and figures through the note and name their files.

    Returns ``{(section, table): (number, stem)}`` and ``{(section, figure): (number, name)}``
    with zero-based section and item positions.
    """
    tables, figures = {}, {}
    for s, section in enumerate(note.sections):
        for t, table in enumerate(section.tables):
            number = len(tables) + 1
            tables[s, t] = (number, f"table-{number}-{_slug(table.title)}")
        for f, figure in enumerate(section.figures):
            number = len(figures) + 1
            figures[s, f] = (number, f"figure-{number}-{_slug(figure.title)}.svg")
    return tables, figures


def _ordered_flags(note: Note) -> dict[str, list[str]]:
    return {level: [text for lv, text in note.flags if lv == level] for level in FLAG_LEVELS}


# -- Markdown -------------------------------------------------------------------------------


def _md(text: str) -> str:
    """Plain text for Markdown: characters that would start markup are backslash-escaped."""
    return re.sub(r"([\\`*_<])", r"\\\1", text).replace("\n", " ")


def _md_cell(text: str) -> str:
    return _md(text).replace("|", "\\|")


def note_markdown(note: Note) -> str:
    """The note as Markdown: checks first, then sections with tables and linked SVG figures."""
    table_names, figure_names = _file_names(note)
    lines = [f"# {_md(note.title)}", ""]
    if note.subtitle:
        lines += [f"*{_md(note.subtitle)}*", ""]
    if note.answer:
        lines += ["## What to build", ""]
        lines += [f"- **{_md(label)}:** {_md(text)}" for label, text in note.answer]
        lines.append("")
    flags = _ordered_flags(note)
    if flags["fail"]:
        lines.append(f"> **{FLAG_HEADINGS['fail']} ({len(flags['fail'])})**")
        lines += [f"> - **FAIL:** {_md(text)}" for text in flags["fail"]]
        lines.append("")
    for level in ("warn", "pass"):
        if flags[level]:
            lines += [f"**{FLAG_HEADINGS[level]}**", ""]
            lines += [f"- {level.upper()}: {_md(text)}" for text in flags[level]]
            lines.append("")
    for s, section in enumerate(note.sections):
        lines += [f"## {s + 1}. {_md(section.title)}", ""]
        for paragraph in section.paragraphs:
            lines += [_md(paragraph), ""]
        for t, table in enumerate(section.tables):
            lines += _md_table(table, *table_names[s, t])
        for f, figure in enumerate(section.figures):
            fig_number, file_name = figure_names[s, f]
            alt = figure.alt
            lines += [f"![{_md(alt)}]({file_name})", ""]
            caption = f" {_md(figure.caption)}" if figure.caption else ""
            lines += [f"*Figure {fig_number}: {_md(figure.title)}.*{caption}", ""]
    if note.cautions:
        lines += ["## Cautions", ""]
        lines += [f"- {_md(text)}" for text in note.cautions]
        lines.append("")
    lines += ["---", f"*Written by harvester {__version__}.*", ""]
    return "\n".join(lines)


def _pointer(table: Table, number: int, stem: str) -> str:
    return (f"Table {number}: {table.title}: {len(table.rows)} rows, in the data files "
            f"{stem}.csv and {stem}.json (not printed here).")


def _md_table(table: Table, number: int, stem: str) -> list[str]:
    if not table.inline:
        return [f"{_md(_pointer(table, number, stem))} Data: [{stem}.csv]({stem}.csv) · "
                f"[{stem}.json]({stem}.json)", ""]
    lines = [f"**Table {number}: {_md(table.title)}**", ""]
    numeric = [_numeric_column(table, i) for i in range(len(table.columns))]
    lines.append("| " + " | ".join(_md_cell(c.header) for c in table.columns) + " |")
    lines.append("|" + "|".join("---:" if n else ":---" for n in numeric) + "|")
    for row in table.rows:
        lines.append("| " + " | ".join(_md_cell(c.show(v)) for c, v in
                                       zip(table.columns, row, strict=True)) + " |")
    if not table.rows:
        lines.append("| " + " | ".join("" for _ in table.columns) + " |")
    lines.append("")
    if table.note:
        lines += [f"*{_md(table.note)}*", ""]
    lines += [f"Data: [{stem}.csv]({stem}.csv) · [{stem}.json]({stem}.json)", ""]
    return lines


# -- HTML -----------------------------------------------------------------------------------

_CSS = """
body { font-family: "DejaVu Sans", Helvetica, Arial, sans-serif; color: #1d1d1d;
       margin: 0; background: #ffffff; line-height: 1.45; }
main { max-width: 60rem; margin: 0 auto; padding: 1.5rem; }
h1 { margin-bottom: 0.2rem; }
.subtitle { color: #555555; margin-top: 0; }
.answer { border: 2px solid #1f4e79; border-radius: 6px; padding: 0.6rem 1rem; margin: 1rem 0;
          background: #eef4fa; }
.answer h2 { margin: 0.2rem 0 0.5rem 0; font-size: 1.25rem; color: #1f4e79; }
.answer dl { display: grid; grid-template-columns: max-content 1fr; gap: 0.25rem 0.8rem;
             margin: 0; }
.answer dt { font-weight: bold; }
.answer dd { margin: 0; }
.check-box { border: 2px solid; border-radius: 6px; padding: 0.6rem 1rem; margin: 1rem 0; }
.check-box h2 { font-size: 1.05rem; margin: 0.2rem 0 0.4rem 0; }
.check-box ul { margin: 0; padding-left: 1.2rem; }
.check-box.fail { border-color: #b00020; background: #fde7ea; color: #6d0014; }
.check-box.fail h2 { color: #b00020; }
.check-box.warn { border-color: #b26a00; background: #fff4e0; }
.check-box.pass { border-color: #2e7d32; background: #edf7ee; }
.table-wrap { overflow-x: auto; max-width: 100%; margin: 1rem 0 0.3rem 0; }
table { border-collapse: separate; border-spacing: 0; font-size: 0.88rem; }
caption { text-align: left; font-weight: bold; padding-bottom: 0.3rem; }
th, td { border: 1px solid #c8c8c8; border-width: 0 1px 1px 0; padding: 0.2rem 0.45rem; }
tr > :first-child { border-left-width: 1px; }
thead tr:first-child > * { border-top-width: 1px; }
th { background: #f1f1f1; vertical-align: bottom; }
td { background: #ffffff; }
tr > :first-child { position: sticky; left: 0; z-index: 1; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
.unit { font-weight: normal; color: #555555; }
.table-note, .downloads, .pointer { font-size: 0.85rem; color: #444444; margin: 0.2rem 0 1rem 0; }
figure { margin: 1.2rem 0; break-inside: avoid; }
figure svg { max-width: 100%; height: auto; display: block; }
figcaption { font-size: 0.9rem; color: #333333; margin-top: 0.3rem; }
.cautions { border-left: 4px solid #b26a00; padding-left: 1rem; }
footer { color: #666666; font-size: 0.85rem; margin-top: 2rem; }
@media print {
  main { max-width: none; padding: 0; }
  body { font-size: 10pt; line-height: 1.3; }
  h2 { break-after: avoid; }
  .table-wrap { overflow: visible; }
  table { font-size: 7.5pt; width: 100%; }
  th, td { padding: 0.1rem 0.25rem; }
  thead { display: table-header-group; }
  tr, figure, .answer, .check-box { break-inside: avoid; }
  caption { break-after: avoid; }
  tr > :first-child { position: static; }
  a { color: inherit; text-decoration: none; }
  figure svg { max-height: 11cm; width: auto; margin: 0 auto; }
}
"""


def _page_css(paper: str) -> str:
    return f"@page {{ size: {PAPER_SIZES[paper]}; margin: 14mm 12mm; }}"


def note_html(note: Note) -> str:
    """The note as one self-contained HTML page: inline CSS and SVG, no scripts, no fetches."""
    table_names, figure_names = _file_names(note)
    out = [
        "<!DOCTYPE html>",
        '<html lang="en">',
        '<head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{escape(note.title)}</title>",
        f"<style>{_CSS}{_page_css(note.paper)}</style></head>",
        "<body><main>",
        f"<header><h1>{escape(note.title)}</h1>",
    ]
    if note.subtitle:
        out.append(f'<p class="subtitle">{escape(note.subtitle)}</p>')
    out.append("</header>")
    if note.answer:
        out.append('<section class="answer" aria-label="What to build"><h2>What to build</h2>'
                   "<dl>")
        out += [f"<dt>{escape(label)}</dt><dd>{escape(text)}</dd>" for label, text in note.answer]
        out.append("</dl></section>")
    flags = _ordered_flags(note)
    if note.flags:
        out.append('<section class="checks" aria-label="Checks">')
        for level in FLAG_LEVELS:
            if flags[level]:
                role = ' role="alert"' if level == "fail" else ""
                out.append(f'<div class="check-box {level}"{role}>')
                out.append(f"<h2>{FLAG_HEADINGS[level]} ({len(flags[level])})</h2><ul>")
                out += [f"<li>{escape(text)}</li>" for text in flags[level]]
                out.append("</ul></div>")
        out.append("</section>")
    for s, section in enumerate(note.sections):
        out.append(f"<section><h2>{s + 1}. {escape(section.title)}</h2>")
        out += [f"<p>{escape(paragraph)}</p>" for paragraph in section.paragraphs]
        for t, table in enumerate(section.tables):
            out += _html_table(table, *table_names[s, t])
        for f, figure in enumerate(section.figures):
            fig_number, _ = figure_names[s, f]
            caption = f" {escape(figure.caption)}" if figure.caption else ""
            alt = escape(figure.alt, quote=True)
            out.append(f'<figure id="figure-{fig_number}" role="group" aria-label="{alt}">')
            out.append(figure.svg.strip())
            out.append(
                f"<figcaption><strong>Figure {fig_number}: {escape(figure.title)}.</strong>"
                f"{caption}</figcaption></figure>"
            )
        out.append("</section>")
    if note.cautions:
        out.append('<section class="cautions"><h2>Cautions</h2><ul>')
        out += [f"<li>{escape(text)}</li>" for text in note.cautions]
        out.append("</ul></section>")
    out.append(f"<footer>Written by harvester {escape(__version__)}.</footer>")
    out.append("</main></body></html>")
    return "\n".join(out) + "\n"


def _html_table(table: Table, number: int, stem: str) -> list[str]:
    if not table.inline:
        return [f'<p class="pointer" id="table-{number}">{escape(_pointer(table, number, stem))}'
                f' Data: <a href="{stem}.csv">{stem}.csv</a> · '
                f'<a href="{stem}.json">{stem}.json</a></p>']
    numeric = [_numeric_column(table, i) for i in range(len(table.columns))]
    out = [
        f'<div class="table-wrap"><table id="table-{number}">',
        f"<caption>Table {number}: {escape(table.title)}</caption>",
        "<thead><tr>",
    ]
    for column in table.columns:
        unit = f'<br><span class="unit">[{escape(column.unit)}]</span>' if column.unit else ""
        out.append(f"<th>{escape(column.label)}{unit}</th>")
    out.append("</tr></thead><tbody>")
    opening = ['<td class="num">' if n else "<td>" for n in numeric]
    for row in table.rows:
        cells = (f"{td}{escape(c.show(v))}</td>" for td, c, v in
                 zip(opening, table.columns, row, strict=True))
        out.append("<tr>" + "".join(cells) + "</tr>")
    out.append("</tbody></table></div>")
    if table.note:
        out.append(f'<p class="table-note">{escape(table.note)}</p>')
    out.append(
        f'<p class="downloads">Data: <a href="{stem}.csv">{stem}.csv</a> · '
        f'<a href="{stem}.json">{stem}.json</a></p>'
    )
    return out


# -- writing --------------------------------------------------------------------------------


def note_files(note: Note) -> dict[str, bytes]:
    """Every file of the note by name, in the order they are moved into place.

    Figures and tables come first and note.md / note.html last, so the pages never link to a
    file that is not there yet.
    """
    table_names, figure_names = _file_names(note)
    files: dict[str, bytes] = {}
    for s, section in enumerate(note.sections):
        for f, figure in enumerate(section.figures):
            files[figure_names[s, f][1]] = figure.svg.strip().encode() + b"\n"
        for t, table in enumerate(section.tables):
            stem = table_names[s, t][1]
            files[f"{stem}.csv"] = table_csv(table).encode()
            files[f"{stem}.json"] = table_json(table).encode()
    files["note.md"] = note_markdown(note).encode()
    files["note.html"] = note_html(note).encode()
    return files


def _write_file(path: Path, data: bytes) -> None:
    with open(path, "wb") as handle:
        handle.write(data)
        handle.flush()
        os.fsync(handle.fileno())


def _keep_copy(source: Path, copy: Path) -> None:
    """Keep the previous version without ever removing it from its place."""
    try:
        os.link(source, copy)
    except OSError:
        shutil.copy2(source, copy)


def write_note(note: Note, out_dir: str | os.PathLike) -> list[Path]:
    """Write the note into `out_dir` (created if needed) and return the paths written.

    Writes note.md, note.html, ``figure-N-*.svg`` and ``table-N-*.csv`` / ``.json``.  All files
    are rendered and written to a staging directory in `out_dir`'s parent first, then each is
    renamed into place (``os.replace``, atomic on one file system).  On any error the files
    already replaced are restored from copies of their previous versions and the new ones
    removed, so the previous note survives intact.  Files of an older note that this note does
    not have are left alone.
    """
    out_dir = Path(out_dir).absolute()
    files = note_files(note)
    out_dir.parent.mkdir(parents=True, exist_ok=True)
    staging = Path(
        tempfile.mkdtemp(prefix=f".{out_dir.name}-", suffix=".partial", dir=out_dir.parent)
    )
    created_dir = not out_dir.exists()
    try:
        fresh, previous = staging / "new", staging / "previous"
        fresh.mkdir()
        previous.mkdir()
        for name, data in files.items():
            _write_file(fresh / name, data)
        out_dir.mkdir(exist_ok=True)
        _move_into_place(list(files), fresh, previous, out_dir)
    except BaseException:
        if created_dir and out_dir.is_dir() and not any(out_dir.iterdir()):
            out_dir.rmdir()
        raise
    finally:
        shutil.rmtree(staging, ignore_errors=True)
    return [out_dir / name for name in files]


def _move_into_place(names: list[str], fresh: Path, previous: Path, out_dir: Path) -> None:
    done: list[tuple[str, bool]] = []
    try:
        for name in names:
            target = out_dir / name
            existed = target.exists()
            if existed:
                _keep_copy(target, previous / name)
            os.replace(fresh / name, target)
            done.append((name, existed))
    except BaseException:
        for name, existed in reversed(done):
            if existed:
                os.replace(previous / name, out_dir / name)
            else:
                (out_dir / name).unlink(missing_ok=True)
        raise
