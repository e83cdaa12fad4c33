"""Progress bars on stderr (never on stdout, so JSON stays clean)."""

from __future__ import annotations

import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager


@contextmanager
def progress_bar(label: str) -> Iterator[Callable[[float, float], None]]:
    """Yield a callback `update(done, total)` drawing a bar on stderr while the work runs.

    Nothing is drawn when stderr is not a terminal (pipes, CI logs).
    """
    if not sys.stderr.isatty():
        yield lambda done, total: None
        return
    from rich.console import Console
    from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

    with Progress(TextColumn("{task.description}"), BarColumn(), TextColumn(
            "{task.percentage:>3.0f}%"), TimeElapsedColumn(),
            console=Console(stderr=True), transient=True) as bar:
        task = bar.add_task(label, total=1.0)

        def update(done: float, total: float) -> None:
            bar.update(task, completed=float(done), total=float(total) or 1.0)

        yield update
