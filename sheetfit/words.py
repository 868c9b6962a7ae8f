"""Plain words shared by the sheets, the summaries and the command line."""

from __future__ import annotations

__all__ = ["plural"]


def plural(n: int, what: str) -> str:
    """'1 row', '2 rows': a count and its noun."""
    return f"{n} {what}" + ("" if n == 1 else "s")
