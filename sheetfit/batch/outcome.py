"""One book's refresh as a plain, picklable outcome: refreshed, skipped, refused or fault."""

from __future__ import annotations

import datetime as dt
import time
import traceback
from collections.abc import Iterable
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

from sheetfit.errors import BookBusyError, NoModelsError, SheetfitError

__all__ = ["STATUSES", "Outcome", "refresh_one", "worst_exit"]

#: Every status a book can end in, and the exit status each one stands for in a run.
STATUSES = {"refreshed": 0, "skipped": 0, "refused": 2, "fault": 1}


@dataclass(frozen=True)
class Outcome:
    """What became of one book: its path, status, number of models, seconds and message.

    ``status`` is ``refreshed``; ``skipped`` (no models declared, or the book is held open by
    a spreadsheet program or another sheetfit: ``message`` says which); ``refused`` (the
    refusal's one line); or ``fault`` (an internal fault; the book untouched).
    """

    book: str
    status: str
    models: int
    seconds: float
    message: str

    def as_dict(self) -> dict[str, Any]:
        return asdict(self)


def refresh_one(book: str | Path, out: str | Path | None = None, *, force: bool = False,
                backup: bool = False, wait: float | None = None,
                now: dt.datetime | None = None) -> Outcome:
    """Refresh ``book`` (to ``out`` if given) and say how it went; never raises.

    Options are the command line's (``--force``, ``--backup``, ``--wait``); ``now`` fixes
    the refresh time written on the index sheet (tests compare runs byte for byte).
    """
    from sheetfit.refresh import refresh  # imported here: a worker process pays it once

    start = time.perf_counter()
    name = str(book)
    kwargs: dict[str, Any] = {"force": force, "backup": backup, "now": now}
    if wait is not None:
        kwargs["wait"] = wait

    def done(status: str, models: int, message: str) -> Outcome:
        return Outcome(name, status, models, round(time.perf_counter() - start, 3), message)

    try:
        report = refresh(book, out, **kwargs)
    except NoModelsError:
        return done("skipped", 0, "no models declared")
    except BookBusyError as exc:
        return done("skipped", 0, exc.render())
    except SheetfitError as exc:
        return done("refused", 0, exc.render())
    except Exception as exc:  # noqa: BLE001 - one book's fault must not stop the others
        where = traceback.extract_tb(exc.__traceback__)[-1:]
        at = f" at {Path(where[0].filename).name}:{where[0].lineno}" if where else ""
        return done("fault", 0, f"internal fault ({type(exc).__name__}: {exc}){at}")
    return done("refreshed", len(report.models),
                "; ".join(f"{m.tag}: {m.title}" for m in report.models))


def worst_exit(outcomes: Iterable[Outcome]) -> int:
    """The run's exit status: 1 if any book faulted, else 2 if any was refused, else 0."""
    codes = {STATUSES[o.status] for o in outcomes}
    return 1 if 1 in codes else 2 if 2 in codes else 0
