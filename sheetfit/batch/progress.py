"""The progress bar of a batch on stderr (rich), shown only when stderr is a terminal."""

from __future__ import annotations

import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path

from sheetfit.batch.outcome import Outcome

__all__ = ["progress"]


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
