"""What one cell holds as sheetfit sees it: its kind and, for numbers, the float.

Both readers hand over raw cell values in one shape ("" for an empty cell, str, float or
int, bool, date and time objects); ``classify`` turns one into a :class:`Value`, and
``reader/columns.py`` does the same for a whole column at once.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from typing import Any

from ._sheetxml import TEXT_CAP

__all__ = ["BLANK", "ERROR", "NUMBER", "OTHER", "TEXT", "UNSAVED", "Value", "classify"]

BLANK, NUMBER, TEXT, ERROR, OTHER = "blank", "number", "text", "error", "other"
#: A formula cell stored without its result (written by a program that does not calculate).
UNSAVED = "unsaved"

_EPOCH_1900 = dt.datetime(1899, 12, 30)
_EPOCH_1904 = dt.datetime(1904, 1, 1)


@dataclass(frozen=True)
class Value:
    """One cell's content as sheetfit sees it: its kind and, for numbers, the float."""

    kind: str
    number: float = float("nan")
    text: str = ""


def classify(raw: Any, date1904: bool = False) -> Value:
    """The value of one raw cell (dates and times as serial numbers of the date system)."""
    if isinstance(raw, bool):
        return Value(OTHER, text=str(raw).upper())
    if isinstance(raw, (int, float)):
        return Value(NUMBER, float(raw))
    if isinstance(raw, str):
        return Value(BLANK) if raw == "" else Value(TEXT, text=raw[:TEXT_CAP])
    epoch = _EPOCH_1904 if date1904 else _EPOCH_1900
    if isinstance(raw, dt.datetime):
        return Value(NUMBER, (raw - epoch) / dt.timedelta(days=1))
    if isinstance(raw, dt.date):
        return Value(NUMBER, float((raw - epoch.date()).days))
    if isinstance(raw, dt.time):
        secs = raw.hour * 3600 + raw.minute * 60 + raw.second + raw.microsecond / 1e6
        return Value(NUMBER, secs / 86400.0)
    if isinstance(raw, dt.timedelta):
        return Value(NUMBER, raw / dt.timedelta(days=1))
    return Value(OTHER, text=str(raw)[:TEXT_CAP])
