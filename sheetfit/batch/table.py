"""The end of a batch, whichever runner ran it: the table, the count per status, the report.

The table has one row per book (book, models, status, seconds, message), messages clipped
so each row fits the terminal's width, books shown by their path below the folder (for a
pattern: below the deepest folder holding them all); the count line gives every status. ``--report``
writes the same rows, unclipped, as CSV or JSON (chosen by the file's suffix).
"""

from __future__ import annotations

import csv
import io
import json
import os
import tempfile
from collections.abc import Sequence
from pathlib import Path

from sheetfit.batch.outcome import STATUSES, Outcome
from sheetfit.words import clip

__all__ = ["COLUMNS", "REPORT_KINDS", "common_root", "counts", "report_kind", "table", "write_report"]

COLUMNS = ("book", "models", "status", "seconds", "message")
REPORT_KINDS = (".csv", ".json")
_MIN_MESSAGE = 20


def _shown(book: str, root: Path | None) -> str:
    if root is None:
        return book
    try:
        return Path(book).relative_to(root).as_posix()
    except ValueError:
        return book


def common_root(books: Sequence[Path]) -> Path | None:
    """The deepest folder holding every book (the table shows paths below it)."""
    try:
        return Path(os.path.commonpath([Path(b).parent for b in books])) if books else None
    except ValueError:  # absolute and relative paths mixed
        return None


def _message(o: Outcome) -> str:
    """The message on one line, without the book's path it may start with (the row has it)."""
    text = " ".join(o.message.split())
    for sep in (": ", ", "):
        if text.startswith(o.book + sep):
            return text[len(o.book) + len(sep):]
    return text


def _cells(o: Outcome, root: Path | None) -> list[str]:
    return [_shown(o.book, root), str(o.models), o.status, f"{o.seconds:.2f}", _message(o)]


def table(outcomes: Sequence[Outcome], width: int = 100, root: Path | None = None) -> str:
    """The outcomes as a text table at most ``width`` characters wide (the message is
    clipped to fit; a very long book path is clipped from its start). With ``root``, books
    are shown by their path below it."""
    rows = [list(COLUMNS)] + [_cells(o, root) for o in outcomes]
    widths = [max(len(r[c]) for r in rows) for c in range(4)]
    fixed = sum(widths[1:]) + 2 * 4  # the narrow columns and the gaps
    book_cap = max(10, min(width // 2, width - fixed - _MIN_MESSAGE))
    if widths[0] > book_cap:
        widths[0] = book_cap
        for r in rows[1:]:
            if len(r[0]) > book_cap:
                r[0] = "…" + r[0][len(r[0]) - book_cap + 1:]
    room = max(_MIN_MESSAGE, width - widths[0] - fixed)
    lines = []
    for r in rows:
        book, models, status, seconds = r[0].ljust(widths[0]), r[1].rjust(widths[1]), \
            r[2].ljust(widths[2]), r[3].rjust(widths[3])
        lines.append(f"{book}  {models}  {status}  {seconds}  {clip(r[4], room)}".rstrip())
    return "\n".join(lines)


def counts(outcomes: Sequence[Outcome]) -> str:
    """One line: how many books, and how many ended in each status (every status named)."""
    each = ", ".join(f"{sum(o.status == s for o in outcomes)} {s}" for s in STATUSES)
    return f"{len(outcomes)} book{'s' if len(outcomes) != 1 else ''}: {each}"


def report_kind(path: str | Path) -> str | None:
    """``.csv`` or ``.json`` for a report path (by its suffix, any case); None otherwise."""
    suffix = Path(path).suffix.lower()
    return suffix if suffix in REPORT_KINDS else None


def _render(kind: str, outcomes: Sequence[Outcome]) -> str:
    rows = [{c: o.as_dict()[c] for c in COLUMNS} for o in outcomes]
    if kind == ".json":
        return json.dumps(rows, indent=2, ensure_ascii=False) + "\n"
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=COLUMNS, lineterminator="\n")
    writer.writeheader()
    writer.writerows(rows)
    return buf.getvalue()


def write_report(path: str | Path, outcomes: Sequence[Outcome]) -> None:
    """Write the rows to ``path`` (CSV or JSON by its suffix), replacing it in one rename."""
    target = Path(path)
    kind = report_kind(target)
    if kind is None:
        raise ValueError(f"a report is .csv or .json, not {target.name}")
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp",
                               dir=target.parent if str(target.parent) else ".")
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="") as f:
            f.write(_render(kind, outcomes))
        os.chmod(tmp, 0o666 & ~_umask())
        os.replace(tmp, target)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask
