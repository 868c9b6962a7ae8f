"""The method registry: one record per method, and the only list of the methods there are.

Adding a method: its numeric core in ``sheetfit/fit/``, its sheet planner in
``sheetfit/sheets/``, its record (a :class:`Method`) in a module here, and one entry in
``REGISTRY`` below. The first entry is the default method.
"""

from __future__ import annotations

from typing import Any

from ..fit.results import Fitted
from . import least_squares, neighbour_mean, neighbour_vote, strip_mean
from .base import Method

__all__ = ["REGISTRY", "Fitted", "Method"]

#: Every method, by the word a book's settings use for it; the first is the default.
REGISTRY: dict[str, Method[Any]] = {
    m.word: m
    for m in (least_squares.METHOD, strip_mean.METHOD, neighbour_mean.METHOD,
              neighbour_vote.METHOD)
}
