"""What a worker process runs for a request: refresh a book, inspect it, or call a function.

Each task returns plain data (dicts and lists that pickle and serialise as JSON) and
raises SheetfitError for a refusal, exactly as the command line's core does. Every number
comes from the refresh core: ``refresh`` itself, or its ``read_models``, ``fit_model``
and ``plan_book``; the functions are ``sheetfit.functions``.
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Callable
from pathlib import Path
from typing import Any

from .. import functions
from ..declare.model import ModelData
from ..errors import SheetfitError
from ..methods import REGISTRY
from ..reader.package import open_package
from ..refresh import fit_model, plan_book, read_models, refresh
from ..summary import ModelSummary
from ..words import clip

__all__ = ["FUNCTIONS", "call_function", "inspect_book", "refresh_book", "refusal"]

OnPhase = Callable[[str], None]

#: The worksheet functions the service offers, by name (``sheetfit.functions.__all__``).
FUNCTIONS: dict[str, Callable[..., list[list[Any]]]] = {
    name: getattr(functions, name) for name in functions.__all__
    if callable(getattr(functions, name))
}


def refusal(exc: SheetfitError) -> dict[str, Any]:
    """A refusal as the service reports it: the command line's line, and its parts."""
    c = exc.context
    return {"status": "refused", "exit": 2, "message": clip(exc.message, 400),
            "hint": clip(exc.hint, 200) if exc.hint else None,
            "file": c.file, "name": c.name, "sheet": c.sheet, "cell": c.cell,
            "line": exc.render()}


def _summary(m: ModelSummary) -> dict[str, Any]:
    return {"model": m.tag, "method": m.method, "title": m.title, "response": m.response,
            "attributes": list(m.attributes), "rows_used": m.n_used,
            "rows_left_out": m.n_left_out, "new_rows": m.n_new, "fingerprint": m.fingerprint,
            "figures": list(m.figures), "cautions": list(m.cautions), "status": m.status}


def _plain(value: Any) -> Any:
    """A setting's value as JSON carries it (numbers that are not finite become text)."""
    if value is None or isinstance(value, bool | int | str):
        return value
    if isinstance(value, float):
        return value if math.isfinite(value) else str(value)
    return str(value)


def _settings(model: ModelData) -> list[dict[str, Any]]:
    """The settings that apply to the model's method: value, given or default, meaning."""
    method = REGISTRY[model.settings.method]
    names = ["method"] + [r.name for r in method.rules]
    meaning = {r.name: r.meaning for r in method.rules}
    meaning["method"] = method.description
    return [{"name": n, "value": _plain(model.settings[n]), "given": n in model.settings.given,
             "meaning": meaning[n]} for n in names]


def refresh_book(src: str, out: str, now: dt.datetime | None,
                 on_phase: OnPhase) -> dict[str, Any]:
    """Refresh ``src`` into ``out`` (the refresh core, as ``sheetfit refresh --out``)."""
    report = refresh(src, out, now, on_phase=on_phase)
    return {"file": Path(src).name, "refreshed": report.refreshed,
            "models": [_summary(m) for m in report.models]}


def inspect_book(src: str, now: dt.datetime | None, on_phase: OnPhase) -> dict[str, Any]:
    """Read and fit every declared model of ``src`` as a refresh does, writing nothing."""
    path = Path(src)
    try:
        on_phase("read")
        models = read_models(open_package(path), path, path.name)
        on_phase("fit")
        fits = [(m, fit_model(m)) for m in models]
        stamp = (now or dt.datetime.now(dt.UTC)).strftime("%Y-%m-%d %H:%M:%S UTC")
        _plan, summaries = plan_book(fits, stamp)
    except SheetfitError as exc:
        raise exc.with_file(path.name) from None
    return {"file": path.name,
            "models": [_summary(s) | {"settings": _settings(m)}
                       for (m, _f), s in zip(fits, summaries, strict=True)]}


def call_function(name: str, args: dict[str, Any]) -> list[list[Any]]:
    """Call the worksheet function ``name`` with ``args`` (it never raises for bad input)."""
    return FUNCTIONS[name](**args)
