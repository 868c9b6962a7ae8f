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
from .declare.model import ModelData, find_models
from .errors import Context, DataError, SettingError, SheetfitCaution, SheetfitError
from .fit.leastsq import LeastSquares
from .reader.package import Package, open_package
from .reader.values import BookValues
from .sheets.index import plan_index
from .sheets.leastsq import plan_least_squares
from .sheets.neighbours import plan_neighbours
from .sheets.plan import BookPlan, SheetPlan
from .sheets.strip import plan_strip
from .summary import ModelSummary, summarise
from .writer.graft import OutputName, graft
from .writer.render import render

__all__ = ["RefreshReport", "fit_model", "plan_book", "refresh"]


@dataclass
class RefreshReport:
    """What a refresh did: where it wrote, and one summary per model."""

    source: Path
    target: Path
    refreshed: str
    models: list[ModelSummary]

    def text(self) -> str:
        head = f"refreshed {self.target}" + (
            "" if self.target == self.source else f" (from {self.source})"
        )
        return "\n".join([head] + [m.text() for m in self.models])


def _estimator(model: ModelData) -> Callable[[], Any]:
    """The fit of a declared model by its method (numeric core only, no workbook)."""
    st, names = model.settings, model.attribute_names
    if st.method == "least_squares":
        est = LeastSquares(intercept=bool(st["intercept"]), degree=int(st["degree"]))
        return lambda: est.fit(model.X, model.Y, names=names)
    if st.method.startswith("neighbour_"):
        from .fit.neighbours import NeighbourMean, NeighbourVote
    if st.method == "neighbour_mean":
        nm = NeighbourMean(k=st["k"], standard_units=bool(st["standard_units"]))
        return lambda: nm.fit(model.X, model.Y, names=names)
    if st.method == "neighbour_vote":
        nv = NeighbourVote(k=st["k"], standard_units=bool(st["standard_units"]))
        return lambda: nv.fit(model.X, list(model.Y), names=names)
    from .fit.strip import StripMean

    sm = StripMean(width=float(st["width"]))
    return lambda: sm.fit(model.X[:, 0], model.Y)


#: Sheet planner per method: (model, result, version) -> object with .sheets and .names.
PLANNERS: dict[str, Callable[[ModelData, Any, str], Any]] = {
    "least_squares": plan_least_squares,
    "neighbour_mean": plan_neighbours,
    "neighbour_vote": plan_neighbours,
    "strip_mean": plan_strip,
}


def fit_model(model: ModelData) -> tuple[Any, list[str]]:
    """Fit one declared model; refusals from the numeric core get the model's context."""
    run = _estimator(model)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", SheetfitCaution)
        try:
            res = run()
        except SettingError as exc:
            ctx = Context(model.file, model.names.get("opts", model.names.get("x")))
            raise SettingError(exc.message, ctx, exc.hint) from None
        except DataError as exc:
            ctx = Context(model.file, model.names.get("x"), model.xs[0].sheet)
            raise type(exc)(exc.message, ctx, exc.hint) from None
    cautions = [str(w.message) for w in caught if issubclass(w.category, SheetfitCaution)]
    return res, cautions


def plan_book(
    fits: list[tuple[ModelData, Any, list[str]]], refreshed: str
) -> tuple[BookPlan, list[ModelSummary]]:
    """Plans of every owned sheet (index first) and the output names, plus the summaries."""
    sheets: list[SheetPlan] = []
    names: list[tuple[str, str]] = []
    summaries = []
    for model, res, cautions in fits:
        planned = PLANNERS[model.settings.method](model, res, __version__)
        sheets += planned.sheets
        names += planned.names
        summaries.append(summarise(model, res, cautions))
    return BookPlan([plan_index(summaries, refreshed, __version__)] + sheets, names), summaries


def _values(pkg: Package, path: Path) -> BookValues:
    """A values reader for the package's worksheets; the caller closes it."""
    parts = {s.name: s.part for s in pkg.sheets if "chartsheet" not in s.part.lower()}
    return BookValues(path, parts, pkg.date1904)


def refresh(book: str | Path, out: str | Path | None = None,
            now: dt.datetime | None = None) -> RefreshReport:
    """Refresh every declared model of ``book``; write to ``out`` (default: the book itself).

    Raises a SheetfitError (with file, name, sheet and cell) for input that cannot be
    used; the workbook is then untouched.
    """
    source = Path(book)
    target = Path(out) if out is not None else source
    file = source.name
    try:
        pkg = open_package(source)
        with _values(pkg, source) as values:
            models = find_models(pkg, values, file)
        fits = [(m, *fit_model(m)) for m in models]
        stamp = (now or dt.datetime.now(dt.UTC)).strftime("%Y-%m-%d %H:%M:%S UTC")
        plan, summaries = plan_book(fits, stamp)
        with tempfile.TemporaryDirectory(prefix="sheetfit-") as tmp:
            rendered = render(plan, Path(tmp) / "owned.xlsx", date1904=pkg.date1904)
            graft(pkg, rendered, [OutputName(n, t) for n, t in plan.names], target)
    except SheetfitError as exc:
        raise exc.with_file(file) from None
    return RefreshReport(source, target, stamp, summaries)
