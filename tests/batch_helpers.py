"""What the batch tests hand the worker processes: an importable stand-in for refresh_one
that ends its own process (``os._exit``) on the book named ``dies.xlsx`` — only in a child
process, so the same run in one process refreshes that book as usual."""

from __future__ import annotations

import multiprocessing
import os
from pathlib import Path
from typing import Any

from sheetfit.batch.outcome import Outcome, refresh_one

DIES = "dies.xlsx"


def die_in_child(book: str | Path, **options: Any) -> Outcome:
    if Path(book).name == DIES and multiprocessing.parent_process() is not None:
        os._exit(70)
    return refresh_one(book, **options)
