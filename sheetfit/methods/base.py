"""What a method is: one record with everything the rest of sheetfit needs to know of it.

A method brings its own numeric core (``sheetfit/fit/``), its own sheet planner
(``sheetfit/sheets/``) and this record; the registry (``sheetfit.methods``) lists the
records. Nothing outside a method's own modules and the registry names a method.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, Generic

import numpy as np

from ..declare.model import ModelData
from ..fit.results import Fitted, R
from ..settings import Rule
from ..sheets.plan import Planned, SheetPlan

__all__ = ["Fitted", "Forecasts", "Method", "R"]

#: Forecasts of a model's new rows: the point forecasts and, when the method gives one,
#: the low and high ends of a prediction interval for one new value and its level (else
#: None, None, None).
Forecasts = tuple[np.ndarray, np.ndarray | None, np.ndarray | None, float | None]

@dataclass(frozen=True)
class Method(Generic[R]):
    """One method: its word and description, settings, what it reads, fits, plans and says.

    ``fit`` runs the numeric core on a declared model's arrays (no workbook access);
    ``plan`` lays out the sheets from the fitted result; ``charts`` (optional) lays out
    the model's charts sheet from the result and the planned output names; ``figures``
    and ``cautions`` give the summary lines for the index sheet and the command line
    (``cautions``: what this fit's data give cause to say); ``standing`` are the cautions
    of what the method is, said of every model using it, on its own sheets and the index;
    ``check`` refuses declarations only this method cannot use (after the cells are read).
    """

    word: str
    title: str
    description: str
    rules: tuple[Rule, ...]
    fit: Callable[[ModelData], R]
    plan: Callable[[ModelData, Fitted[R], str], Planned]
    figures: Callable[[ModelData, R], list[str]]
    cautions: Callable[[ModelData, R], list[str]]
    required: tuple[str, ...] = ()
    labels: bool = False
    max_attributes: int | None = None
    #: Whether text attributes are read as 0/1 indicator columns (``declare/levels.py``);
    #: without it a text cell in x leaves its row out.
    text_attributes: bool = False
    check: Callable[[ModelData], None] | None = None
    #: The figures the refresh log follows from one refresh to the next, as
    #: (name, number) pairs; None when the method has none.
    key_figures: Callable[[ModelData, R], list[tuple[str, float]]] | None = None
    #: Numeric forecasts of the new rows (``Forecasts``), from the result and its
    #: predictions; None for a method whose forecasts are not numbers.
    forecasts: Callable[[ModelData, R, Any], Forecasts] | None = None
    standing: tuple[str, ...] = ()
    #: Whether a ``rule`` declaration (the coefficients in use today) can be compared.
    compares_rule: bool = False
    charts: Callable[[ModelData, Fitted[R], Planned], list[SheetPlan]] | None = None
    #: Work beside the fit, run where the fit's cautions are collected (least squares:
    #: the bootstrap); its value reaches the planner as ``Fitted.extra``.
    extra: Callable[[ModelData, R], object] | None = None
