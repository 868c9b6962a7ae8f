"""Progress on stderr (rich), shown only when stderr is a terminal: the bar of a batch,
and the phases of one book's refresh."""

from __future__ import annotations

import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path

from sheetfit.batch.outcome import Outcome

__all__ = ["PHASES", "phases", "progress"]

#: The phases a refresh reports through ``refresh(on_phase=...)``, in order.
PHASES = ("read", "fit", "write", "graft")


@contextmanager
def progress(total: int) -> Iterator[Callable[[Outcome], None]]:
    """Yield the callback a runner calls with each outcome; it advances the bar (if any).

    The bar disappears when the block ends, so the table that follows stands alone.
    """
    if not sys.stderr.isatty():
        yield lambda _outcome: None
        return
    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    columns = (TextColumn("refreshing"), BarColumn(), MofNCompleteColumn(),
               TimeElapsedColumn(), TextColumn("{task.fields[last]}"))
    with Progress(*columns, console=Console(stderr=True), transient=True) as bar:
        task = bar.add_task("books", total=total, last="")

        def advance(outcome: Outcome) -> None:
            bar.update(task, advance=1, last=f"{Path(outcome.book).name}: {outcome.status}")

        yield advance


@contextmanager
def phases(book: str | Path) -> Iterator[Callable[[str], None]]:
    """Yield the ``on_phase`` callback of one book's refresh; it moves a status line (if any).

    The line shows the book, a bar of the four phases and the phase under way; it
    disappears when the block ends, so the summary that follows stands alone.
    """
    if not sys.stderr.isatty():
        yield lambda _phase: None
        return
    from rich.console import Console
    from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

    columns = (TextColumn("refreshing {task.description}"), BarColumn(bar_width=12),
               TextColumn("{task.fields[phase]}"), TimeElapsedColumn())
    with Progress(*columns, console=Console(stderr=True), transient=True) as bar:
        task = bar.add_task(Path(book).name, total=len(PHASES), phase="")

        def on_phase(name: str) -> None:
            done = PHASES.index(name) if name in PHASES else 0
            bar.update(task, completed=done, phase=name)

        yield on_phase
