"""Refresh a workbook: read declarations, fit every model, plan, render and graft the results.

This is the one core that every surface (command line, later the HTTP backend and
worksheet functions) calls.
"""

from __future__ import annotations

import datetime as dt
import tempfile
import warnings
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from . import __version__
from ._memory import release
from .carry import read_kept
from .declare.model import ModelData, find_models
from .errors import (
    Context,
    DataError,
    ExtrapolationCaution,
    SettingError,
    SheetfitCaution,
    SheetfitError,
)
from .history import plan_history, read_history
from .methods import REGISTRY, Fitted
from .reader.package import Package, open_package
from .reader.values import BookValues
from .sheets.charts import ChartEntry, plan_chart_sheets
from .sheets.index import finish_model_sheets, plan_index
from .sheets.plan import BookPlan, SheetPlan
from .summary import ModelSummary, summarise
from .writer.graft import OutputName, graft
from .writer.render import render
from .writer.target import DEFAULT_WAIT, backup_path, destination, exclusive

__all__ = ["RefreshReport", "fit_model", "plan_book", "read_models", "refresh"]


@dataclass
class RefreshReport:
    """What a refresh did: where it wrote, the backup it kept, one summary per model."""

    source: Path
    target: Path
    refreshed: str
    models: list[ModelSummary]
    backup: Path | None = None

    def text(self) -> str:
        head = f"refreshed {self.target}" + (
            "" if self.target == self.source else f" (from {self.source})"
        )
        if self.backup is not None:
            head += f"; the previous file is kept as {self.backup}"
        return "\n".join([head] + [m.text() for m in self.models])


def _place(exc: SheetfitError, model: ModelData) -> SheetfitError:
    """Put a refusal from the numeric core on the model's cells: name, sheet, cell span."""
    if isinstance(exc, SettingError):
        return exc.with_context(Context(model.file, model.names.get("opts", model.names.get("x"))))
    x_name = model.names.get("x")
    if exc.column is not None and 0 <= exc.column < len(model.xs):
        col = model.xs[exc.column]
        return exc.with_context(Context(model.file, x_name, col.sheet,
                                        col.span(0, model.n_rows - 1)))
    return exc.with_context(Context(model.file, x_name, model.xs[0].sheet))


def fit_model(model: ModelData) -> Fitted[Any]:
    """Fit one declared model and predict its new rows; refusals get the model's cells."""
    method = REGISTRY[model.settings.method]
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", SheetfitCaution)
        try:
            res = method.fit(model)
            new = res.predict(model.new.X) if model.new is not None else None
            extra = method.extra(model, res) if method.extra is not None else None
        except (SettingError, DataError) as exc:
            raise _place(exc, model) from None
    extrapolated: list[int] = []
    cautions: list[str] = []
    for w in caught:
        if isinstance(w.message, ExtrapolationCaution):
            extrapolated += w.message.rows
        elif issubclass(w.category, SheetfitCaution):
            cautions.append(str(w.message))
    return Fitted(res, new, cautions, sorted(set(extrapolated)), extra)


def plan_book(
    fits: list[tuple[ModelData, Fitted[Any]]], refreshed: str
) -> tuple[BookPlan, list[ModelSummary]]:
    """Plans of every owned sheet (index first) and the output names, plus the summaries."""
    sheets: list[SheetPlan] = []
    names: list[tuple[str, str]] = []
    summaries = []
    entries = []
    for model, fitted in fits:
        method = REGISTRY[model.settings.method]
        planned = method.plan(model, fitted, __version__)
        entries.append(ChartEntry(model, fitted, planned, method.charts, method.labels))
        summaries.append(summarise(model, method, fitted))
    charts = plan_chart_sheets(entries)  # each model's charts sheet follows its own sheets
    for e, summary in zip(entries, summaries):
        chart_sheets = charts.get(e.model.tag, [])
        summary.sheets = [s.title for s in e.planned.sheets + chart_sheets]
        # the charts sheet keeps its own column widths: its charts are placed by them
        finish_model_sheets(e.planned.sheets, summary)
        sheets += e.planned.sheets + chart_sheets
        names += e.planned.names
    index = plan_index(summaries, refreshed, __version__)
    index.fit_columns()
    return BookPlan([index] + sheets, names), summaries


def _values(pkg: Package, path: Path) -> BookValues:
    """A values reader for the package's worksheets; the caller closes it."""
    parts = {s.name: s.part for s in pkg.sheets if s.is_worksheet}
    return BookValues(path, parts, pkg.date1904, pkg.workbook_part)


def read_models(pkg: Package, path: Path, file: str,
                values: BookValues | None = None) -> list[ModelData]:
    """Every declared model of an opened book, read as a refresh reads it (with the notes
    people typed on its owned sheets); the service's inspection reads books through this.
    ``values``: a values reader of ``pkg`` the caller holds open (and closes), else one of
    its own."""
    if values is None:
        with _values(pkg, path) as own:
            return read_models(pkg, path, file, own)
    models = find_models(pkg, values, file, REGISTRY)
    for m in models:  # notes people typed on owned sheets, put back after
        m.kept = read_kept(values, m.tag)
    return models


def refresh(book: str | Path, out: str | Path | None = None,
            now: dt.datetime | None = None, *, force: bool = False, backup: bool = False,
            wait: float = DEFAULT_WAIT,
            on_phase: Callable[[str], None] | None = None) -> RefreshReport:
    """Refresh every declared model of ``book``; write to ``out`` (default: the book itself).

    Before any work, the target is checked (``writer.target.destination``): a read-only
    file or one open in a spreadsheet program is refused unless ``force``; a missing or
    read-only folder, or a folder given as ``out``, is refused. A symbolic link is
    followed and its target refreshed. The refresh holds sheetfit's lock on the target,
    waiting up to ``wait`` seconds for another refresh of it. With ``backup`` the file
    being replaced is kept as ``writer.target.backup_path`` of it.

    ``on_phase``, if given, is called with "read", "fit", "write" (plan and render) and
    "graft" as the refresh enters each phase; an exception it raises abandons the refresh
    (the workbook untouched).

    Raises a SheetfitError (with file, name, sheet and cell) for input that cannot be
    used or a target that cannot be written; the workbook is then untouched.
    """
    source = Path(book)
    file = source.name
    phase = on_phase or (lambda _phase: None)
    try:
        dest = destination(source, out, force=force, backup=backup)
        target = Path(out) if out is not None else source
        with exclusive(dest, wait):
            kept = backup_path(dest.path) if backup and dest.exists else None
            phase("read")
            pkg = open_package(source)
            with _values(pkg, source) as values:  # one reader: each sheet read once
                models = read_models(pkg, source, file, values)
                before = read_history(pkg, values)  # the log, forecasts, notes to carry on
            del values  # the cells read stay in memory no longer than the read phase
            release()
            phase("fit")
            fits = [(m, fit_model(m)) for m in models]
            release()
            phase("write")
            stamp = (now or dt.datetime.now(dt.UTC)).strftime("%Y-%m-%d %H:%M:%S UTC")
            plan, summaries = plan_book(fits, stamp)
            plan.sheets += plan_history(fits, summaries, before, stamp, __version__)
            with tempfile.TemporaryDirectory(prefix="sheetfit-") as tmp:
                rendered = render(plan, Path(tmp) / "owned.xlsx", date1904=pkg.date1904)
                release()
                phase("graft")
                graft(pkg, rendered, [OutputName(n, t) for n, t in plan.names], dest)
    except SheetfitError as exc:
        raise exc.with_file(file) from None
    return RefreshReport(source, target, stamp, summaries, kept)
