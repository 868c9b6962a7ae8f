"""The book over time: the input record, the refresh log, forecasts and their outcomes, and
each model's documentation sheet.

A refresh calls :func:`read_history` while the book's values are open (before the graft
replaces the owned sheets) and :func:`plan_history` after the models are fitted; the
sheets it returns go after the models' own.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from ..declare.model import ModelData
from ..fit.results import Fitted
from ..methods import REGISTRY
from ..owned import FORECAST_SHEET, LOG_SHEET, SHEET_KINDS
from ..reader.package import Package
from ..reader.values import BookValues
from ..sheets.index import back_link
from ..sheets.plan import SheetPlan
from ..summary import ModelSummary
from .about import UserCells, plan_about, read_about
from .forecasts import Forecast, outcomes, plan_forecasts, read_forecasts, register
from .inputs import plan_inputs
from .log import LogRow, log_rows, plan_log, read_log

__all__ = ["Previous", "plan_history", "read_history"]

_ABOUT = " " + SHEET_KINDS["about"]


@dataclass
class Previous:
    """What the previous refresh left that the next one carries forward."""

    log: list[LogRow] = field(default_factory=list)
    forecasts: list[Forecast] = field(default_factory=list)
    #: Model (case-folded) -> what the user typed on its documentation sheet.
    about: dict[str, UserCells] = field(default_factory=dict)


def read_history(pkg: Package, values: BookValues) -> Previous:
    """Read the owned history sheets of the book as it is (before they are replaced).

    Only sheets carrying sheetfit's marker are read; a book refreshed before these sheets
    existed starts a new log and register.
    """
    owned = [s.name for s in pkg.owned_sheets() if s.is_worksheet]
    low = {t.casefold() for t in owned}
    before = Previous()
    if LOG_SHEET in low:
        before.log = read_log(values)
    if FORECAST_SHEET in low:
        before.forecasts = read_forecasts(values)
    for title in owned:
        if title.startswith("sf ") and title.endswith(_ABOUT) and len(title) > 3 + len(_ABOUT):
            tag = title[3:-len(_ABOUT)]
            before.about[tag.casefold()] = read_about(values, tag)
    return before


def plan_history(fits: list[tuple[ModelData, Fitted[Any]]], summaries: list[ModelSummary],
                 before: Previous, stamp: str, version: str) -> list[SheetPlan]:
    """Plans of the history sheets for this refresh: each model's documentation sheet, the
    input record, the log and (when it holds any forecast) the forecast register.

    Each model's outcome sentence, when it has one, is added to its summary's figures, so
    the command line shows it too.
    """
    entries = []
    forecast_entries = []
    for (model, fitted), summary in zip(fits, summaries):
        method = REGISTRY[model.settings.method]
        figures = method.key_figures(model, fitted.result) if method.key_figures else []
        entries.append((model, method.title, figures))
        fc = None
        if method.forecasts is not None and fitted.new is not None:
            fc = method.forecasts(model, fitted.result, fitted.new)
        forecast_entries.append((model, fc))
    log = log_rows(before.log, entries, stamp, version)
    register_rows = register(before.forecasts, forecast_entries, stamp)
    last_line = {row.model.casefold(): row.text() for row in log}
    sheets: list[SheetPlan] = []
    sentences: list[tuple[str, str]] = []
    for (model, _), summary in zip(fits, summaries):
        method = REGISTRY[model.settings.method]
        sentence = outcomes(register_rows, model.tag).sentence()
        names = ["method"] + [r.name for r in method.rules]
        sheets.append(plan_about(model, summary, names, before.about.get(model.tag.casefold(), {}),
                                 last_line.get(model.tag.casefold(), ""), sentence))
        if sentence:
            sentences.append((model.tag, sentence))
            summary.figures.append(f"forecasts: {sentence}")
    records = [m.record for m, _ in fits if m.record is not None]
    sheets += [plan_inputs(records), plan_log(log)]
    if register_rows:
        sheets.append(plan_forecasts(register_rows, sentences))
    for s in sheets:
        back_link(s)
    return sheets
