"""Which books a batch refresh covers: every workbook under a folder, or matching a pattern.

A folder is searched recursively for ``**/*.xlsx`` (the suffix in any case); a pattern
(an argument containing ``*``, ``?`` or ``[``) is expanded like a shell glob, with ``**``
matching any depth of folders. Either way the books come back sorted, each real file
once, and without the side files that sit beside workbooks: hidden files and folders
(which covers sheetfit's own ``.sheetfit-*`` lock and temporary files and the
``.~lock.NAME#`` files of spreadsheet programs), ``~$NAME`` owner files, and the
``NAME.before-refresh.xlsx`` backups ``--backup`` keeps.
"""

from __future__ import annotations

import glob
import os
from pathlib import Path

__all__ = ["FOLDER_PATTERN", "discover", "is_batch", "is_side_file"]

#: What a folder is searched for (documented in the README).
FOLDER_PATTERN = "**/*.xlsx"

_MAGIC = frozenset("*?[")
_BACKUP_SUFFIX = ".before-refresh.xlsx"


def is_batch(arg: str | Path) -> bool:
    """True when ``arg`` names a folder, or is a pattern that is not itself an existing file."""
    path = Path(arg)
    if path.is_dir():
        return True
    return not path.exists() and any(c in _MAGIC for c in str(arg))


def is_side_file(name: str) -> bool:
    """A file beside workbooks that is not one: hidden, an owner file, or a backup."""
    return (name.startswith((".", "~$"))
            or name.lower().endswith(_BACKUP_SUFFIX))


def _under(folder: Path) -> list[Path]:
    found = []
    for here, dirs, files in os.walk(folder):
        dirs[:] = [d for d in dirs if not d.startswith(".")]
        found += [Path(here, f) for f in files
                  if f.lower().endswith(".xlsx") and not is_side_file(f)]
    return found


def _matching(pattern: str) -> list[Path]:
    return [Path(p) for p in glob.glob(pattern, recursive=True)
            if os.path.isfile(p) and not is_side_file(os.path.basename(p))]


def discover(arg: str | Path) -> list[Path]:
    """The books ``arg`` (a folder or a pattern) covers, sorted by path, each real file once."""
    path = Path(arg)
    books = _under(path) if path.is_dir() else _matching(str(arg))
    seen: set[str] = set()
    unique = []
    for book in sorted(books, key=lambda p: p.parts):
        real = os.path.realpath(book)
        if real not in seen:
            seen.add(real)
            unique.append(book)
    return unique
