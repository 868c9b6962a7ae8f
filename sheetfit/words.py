"""Plain words shared by the sheets, the summaries and the command line."""

from __future__ import annotations

__all__ = ["CLIP", "clip", "plural"]

#: Characters of a user's text (a header, a value, a setting) that a message repeats.
CLIP = 60


def plural(n: int, what: str) -> str:
    """'1 row', '2 rows': a count and its noun."""
    return f"{n} {what}" + ("" if n == 1 else "s")


def clip(text: object, limit: int = CLIP) -> str:
    """A user's text as a message repeats it: on one line, at most ``limit`` characters.

    Line breaks and runs of white space become one space; a longer text keeps its first
    ``limit - 1`` characters and ends in "…", so no message carries a whole cell.
    """
    raw = str(text)
    one = " ".join(raw[: 4 * limit + 8].split())
    if len(one) <= limit and len(raw) <= 4 * limit + 8:
        return one
    return one[: limit - 1].rstrip() + "…"
