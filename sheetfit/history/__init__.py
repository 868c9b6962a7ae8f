"""The book over time: the input record, the refresh log, forecasts and their outcomes, and
each model's documentation sheet.

A refresh calls :func:`read_history` while the book's values are open (before the graft
replaces the owned sheets) and :func:`plan_history` after the models are fitted; the
sheets it returns go after the models' own.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from ..declare.model import ModelData
from ..fit.results import Fitted
from ..reader.package import Package
from ..reader.values import BookValues
from ..sheets.plan import SheetPlan
from ..summary import ModelSummary
from .inputs import plan_inputs

__all__ = ["Previous", "plan_history", "read_history"]


@dataclass
class Previous:
    """What the previous refresh left that the next one carries forward."""


def read_history(pkg: Package, values: BookValues) -> Previous:
    """Read the owned history sheets of the book as it is (before they are replaced)."""
    return Previous()


def plan_history(fits: list[tuple[ModelData, Fitted[Any]]], summaries: list[ModelSummary],
                 before: Previous, stamp: str, version: str) -> list[SheetPlan]:
    """Plans of the history sheets for this refresh."""
    records = [m.record for m, _ in fits if m.record is not None]
    return [plan_inputs(records)]
