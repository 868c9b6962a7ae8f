"""Text attributes (a region, a product line) as 0/1 indicator columns, for methods that allow it.

An attribute column is a **text attribute** when more of its non-blank data cells hold
text than numbers. Each text is a *level*; levels are told apart exactly as
``EXACT`` (and ``sheetfit.labels.labels_equal``) tells text apart: case and spaces
count, so "North", "north" and "North " are three levels (a stray space shows up as
a level with very few rows, which the least-squares caution names).

The attribute becomes one 0/1 indicator column per level except the **baseline**, in
the order the levels first appear in the rows used. The baseline is the most frequent
level (ties: the first in sheet order) unless the ``baseline`` setting names one. Each
indicator is a :class:`~sheetfit.declare.model.Column` on the source cells with its
``level`` set, named ``<attribute> = <level>`` (e.g. ``region = North``); its coefficient
is the difference from the baseline level with the other attributes held fixed. On
the sheets an indicator's value is the formula ``IF(EXACT(cell,"level"),1,0)``.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from ..errors import Context, DataError, SettingError
from ..labels import labels_equal
from ..reader.values import NUMBER, TEXT, ColumnValues, Value
from ..words import clip

__all__ = ["MAX_LEVEL", "Coding", "code_levels", "indicators", "is_level", "text_columns"]

#: Longest level a formula can name: a text constant in a formula holds 255 characters.
MAX_LEVEL = 255


@dataclass(frozen=True)
class Coding:
    """How one text attribute is coded: its levels in sheet order, the baseline first."""

    name: str
    baseline: str
    levels: tuple[str, ...]  # the indicator levels, in order (baseline excluded)
    counts: dict[str, int]

    def known(self) -> list[str]:
        return [self.baseline, *self.levels]

    def match(self, text: str) -> str | None:
        """The level equal to ``text`` (EXACT's rule), or None."""
        return next((lv for lv in self.known() if labels_equal(lv, text)), None)


def is_level(v: Value) -> bool:
    """A cell that names a level: text with something other than spaces in it."""
    return v.kind == TEXT and bool(v.text.strip())


def text_columns(cells: Sequence[ColumnValues]) -> list[bool]:
    """For each attribute column's data cells: is it a text attribute (more text than numbers)?"""
    return [int(cv.levels().sum()) > int(cv.of_kind(NUMBER).sum()) for cv in cells]


def _baselines(setting: tuple[str, ...] | None, names: list[str],
               where: Context) -> list[str | None]:
    if setting is None:
        return [None] * len(names)
    if not names:
        raise SettingError("setting 'baseline' is given but x has no text attribute", where,
                           hint="remove the setting")
    if len(setting) != len(names):
        raise SettingError(
            f"setting 'baseline' names {len(setting)} level(s) but x has {len(names)} text "
            f"attribute(s) ({', '.join(clip(n) for n in names)})",
            where, hint="give one level per text attribute, in the order of x, separated by ;",
        )
    return [s or None for s in setting]


def code_levels(names: list[str], texts: list[list[str]], setting: tuple[str, ...] | None,
                where: Context) -> list[Coding]:
    """The coding of each text attribute from its texts in the rows used.

    ``names`` are the text attributes' names, ``texts[k]`` the level of each used row in
    attribute k; ``setting`` is the parsed ``baseline`` setting (None when not given).
    """
    chosen = _baselines(setting, names, where)
    codings = []
    for name, col, want in zip(names, texts, chosen, strict=True):
        counts: dict[str, int] = {}
        for t in col:  # dict keys keep sheet order; EXACT equality is string equality
            counts[t] = counts.get(t, 0) + 1
        long = next((t for t in counts if len(t) > MAX_LEVEL), None)
        if long is not None:
            raise DataError(
                f"text attribute '{clip(name)}' has a level longer than {MAX_LEVEL} "
                f"characters ('{clip(long)}'), which a formula cannot name", where,
                hint="shorten the text in those cells")
        if want is None:
            top = max(counts.values())
            base = next(t for t, c in counts.items() if c == top)
        else:
            found = next((t for t in counts if labels_equal(t, want)), None)
            if found is None:
                raise SettingError(
                    f"setting 'baseline': '{clip(want)}' is not a level of '{clip(name)}' in "
                    f"the rows used (levels: {', '.join(clip(t) for t in counts)})", where,
                    hint="levels match exactly, capitals and spaces included")
            base = found
        if len(counts) < 2:
            raise DataError(
                f"text attribute '{clip(name)}' has a single level ('{clip(base)}') in the "
                "rows used, so it cannot tell rows apart", where,
                hint="leave it out of x")
        codings.append(Coding(name, base, tuple(t for t in counts if t != base), counts))
    return codings


def indicators(texts: list[str], coding: Coding) -> np.ndarray:
    """0/1 columns (rows × indicator levels) for the given levels of one attribute."""
    out = np.zeros((len(texts), len(coding.levels)))
    for k, level in enumerate(coding.levels):
        out[:, k] = [1.0 if labels_equal(t, level) else 0.0 for t in texts]
    return out

