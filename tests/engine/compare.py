"""Comparing cached formula values with recalculated ones, and the assert helper tests use.

:func:`compare_books` puts a book's cached cells (``cached.py``) beside the engine's
fresh ones (``recalculated.py``); :func:`compare_to_cached` recalculates a book and
compares; :func:`assert_cached_values_hold` fails a test with a readable list.
"""

from __future__ import annotations

import math
import os
from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING

from .cached import CachedCell, cached_formula_values
from .recalculated import RecalcCell

if TYPE_CHECKING:
    from .process import Engine

__all__ = [
    "Mismatch",
    "MismatchList",
    "assert_cached_values_hold",
    "compare_books",
    "compare_to_cached",
]

# Engine error codes without a spreadsheet error literal, and the literals a file may
# carry for them (LibreOffice reports e.g. SQRT(-1) and VALUE("x") both as Err:502).
_ERROR_EQUIVALENTS: dict[int, frozenset[str]] = {
    502: frozenset({"#VALUE!", "#NUM!"}),
    503: frozenset({"#NUM!"}),
    504: frozenset({"#VALUE!"}),
    519: frozenset({"#VALUE!"}),
    521: frozenset({"#NULL!"}),
    523: frozenset({"#NUM!"}),
    532: frozenset({"#DIV/0!"}),
    32767: frozenset({"#N/A"}),
}


@dataclass(frozen=True)
class Mismatch:
    """A formula cell whose cached value the engine does not reproduce."""

    sheet: str
    address: str
    formula: str
    cached: object
    recalculated: object
    reason: str

    def __str__(self) -> str:
        return (
            f"'{self.sheet}'!{self.address}: {self.reason}; formula {self.formula!r}, "
            f"cached {self.cached!r}, recalculated {self.recalculated!r}"
        )


class MismatchList(list[Mismatch]):
    """The mismatches of one check, plus how many formula cells were checked."""

    def __init__(self, items: list[Mismatch], checked: int) -> None:
        super().__init__(items)
        self.checked = checked

    def report(self, limit: int = 20) -> str:
        lines = [f"{len(self)} of {self.checked} formula cells do not hold their cached value:"]
        lines += [f"  {m}" for m in self[:limit]]
        if len(self) > limit:
            lines.append(f"  ... and {len(self) - limit} more")
        return "\n".join(lines)


#: Probability functions are held to an absolute tolerance instead: LibreOffice's
#: T.DIST.2T of |t| < 1e-7 returns 0.99999996797730 whatever t is (measured on NIST StRD
#: Wampler5, docs/engine-facts.md E6), 4e-9 from the true value; a p-value's 8th digit
#: never decides anything.
PROBABILITY_FUNCTIONS = ("T.DIST", "F.DIST", "CHISQ.DIST")
PROBABILITY_ABS = 1e-7


def _compare_cell(cached: CachedCell, fresh: RecalcCell, rel: float, abs_: float) -> str | None:
    """Why the fresh value does not reproduce the cached one, or None when it does."""
    if any(f in cached.formula for f in PROBABILITY_FUNCTIONS):
        abs_ = max(abs_, PROBABILITY_ABS)
    if fresh.is_error:
        if cached.kind == "e" and (
            cached.value == fresh.error
            or cached.value in _ERROR_EQUIVALENTS.get(fresh.error_code, frozenset())
        ):
            return None
        return "the engine shows an error"
    if cached.kind == "none":
        return "no cached value in the file"
    if cached.kind == "e":
        return "cached an error, the engine computes a value"
    got = fresh.value
    if cached.kind == "s":
        if not isinstance(got, str):
            return "cached text, the engine computes a number"
        return None if got == cached.value else "text differs"
    if not isinstance(got, float):
        return "cached a number, the engine computes text"
    want = float(cached.value)  # type: ignore[arg-type]
    if not (math.isfinite(want) and abs(want - got) <= max(rel * abs(got), abs_)):
        return f"numbers differ by {abs(want - got):.3g}"
    return None


def compare_books(
    cached: Mapping[tuple[str, str], CachedCell],
    fresh: Mapping[tuple[str, str], RecalcCell],
    *,
    rel: float = 1e-9,
    abs_: float = 1e-12,
) -> MismatchList:
    """Compare cached and recalculated formula cells; either side missing is a mismatch."""
    out: list[Mismatch] = []
    for key, cell in cached.items():
        now = fresh.get(key)
        if now is None:
            out.append(
                Mismatch(*key, cell.formula, cell.value, None, "the engine reports no formula here")
            )
            continue
        reason = _compare_cell(cell, now, rel, abs_)
        if reason is not None:
            formula = cell.formula + (f" [{cell.note}]" if cell.note else "")
            shown = now.error if now.is_error else now.value
            out.append(Mismatch(*key, formula, cell.value, shown, reason))
    for key, now in fresh.items():
        if key not in cached:
            shown = now.error if now.is_error else now.value
            out.append(
                Mismatch(*key, now.formula, None, shown, "formula cell missing from the file")
            )
    return MismatchList(out, checked=len(cached.keys() | fresh.keys()))


def compare_to_cached(
    path: str | os.PathLike[str], engine: Engine, rel: float = 1e-9, abs_: float = 1e-12
) -> MismatchList:
    """Recalculate the book and list every formula cell whose cached value does not hold.

    Numbers match when |cached - recalculated| <= max(rel * |recalculated|, abs_);
    text must be equal; an engine error matches only the same cached error. The
    returned list carries ``.checked``, the number of formula cells compared.
    """
    fresh = engine.recalculate(path)
    return compare_books(cached_formula_values(path), fresh.cells, rel=rel, abs_=abs_)


def assert_cached_values_hold(
    path: str | os.PathLike[str],
    engine: Engine,
    rel: float = 1e-9,
    abs_: float = 1e-12,
    *,
    min_checked: int = 1,
) -> int:
    """Fail with a readable list unless every cached formula value holds; return the count.

    Also fails when fewer than ``min_checked`` formula cells were found, so a book
    without formulas cannot pass by accident.
    """
    mismatches = compare_to_cached(path, engine, rel=rel, abs_=abs_)
    if mismatches:
        raise AssertionError(f"{path}: {mismatches.report()}")
    if mismatches.checked < min_checked:
        raise AssertionError(
            f"{path}: only {mismatches.checked} formula cells found, expected >= {min_checked}"
        )
    return mismatches.checked
