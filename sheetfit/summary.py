"""One summary per fitted model: feeds the index sheet, the CLI report and (later) the HTTP reply."""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .declare.model import ModelData
from .fit.results import Fitted
from .methods.base import Method
from .owned import sheet_title
from .words import plural

__all__ = ["ModelSummary", "fingerprint", "summarise"]

@dataclass
class ModelSummary:
    """What a reader needs to know about one model after a refresh."""

    tag: str
    method: str
    title: str
    response: str
    attributes: list[str]
    n_used: int
    n_left_out: int
    n_new: int
    fingerprint: str
    figures: list[str] = field(default_factory=list)
    cautions: list[str] = field(default_factory=list)
    status: str = "fitted"
    standing: list[str] = field(default_factory=list)  # what the method is (its record's)
    sheets: list[str] = field(default_factory=list)  # titles of the model's sheets, in order

    def text(self) -> str:
        """A few plain lines for the command line."""
        lines = [
            (f"model {self.tag}: {self.title}, "
             f"{self.response} on {', '.join(self.attributes)}"),
            (f"  rows used {self.n_used}, left out {self.n_left_out}"
             + (f", predicted {self.n_new} new" if self.n_new else "")),
        ]
        lines += [f"  {f}" for f in self.figures]
        lines += [f"  caution: {c}" for c in self.cautions]
        return "\n".join(lines)


def fingerprint(model: ModelData) -> str:
    """Short SHA-256 of the values and settings a model was fitted from."""
    h = hashlib.sha256()
    h.update(model.tag.encode())
    h.update(repr(sorted(model.settings.values.items())).encode())
    for arr in (model.used, model.Y, model.X):
        if arr.dtype == object:
            h.update(repr([(type(v).__name__, v) for v in arr]).encode())
        else:
            h.update(np.ascontiguousarray(arr).tobytes())
    if model.new is not None:
        h.update(np.ascontiguousarray(model.new.X).tobytes())
    return h.hexdigest()[:16]


def _common_cautions(model: ModelData, fitted: Fitted[Any]) -> list[str]:
    out: list[str] = []
    if model.left_out:
        n = len(model.left_out)
        out.append(f"{plural(n, 'data row')} left out of the fit; sheet "
                   f"'{sheet_title(model.tag, 'fitted')}' lists {'it' if n == 1 else 'them'} "
                   "with the reason")
    outside = fitted.extrapolated  # the numeric core's ExtrapolationCaution, on the cells
    if model.new is not None and outside:
        first = model.new.columns[0]
        rows = ", ".join(str(first.row_of(i)) for i in outside[:10])
        more = "…" if len(outside) > 10 else ""
        out.append(f"{plural(len(outside), 'new row')} outside the fitted range of the "
                   f"attributes ('{first.sheet}' {'row' if len(outside) == 1 else 'rows'} "
                   f"{rows}{more}): extrapolated, read with care")
    return out


def summarise(model: ModelData, method: Method[Any], fitted: Fitted[Any]) -> ModelSummary:
    """The summary of a fitted model: its method's figures, then every caution."""
    res = fitted.result
    return ModelSummary(
        tag=model.tag,
        method=method.word,
        title=method.title,
        response=model.y.name,
        attributes=model.attribute_names,
        n_used=len(model.used),
        n_left_out=len(model.left_out),
        n_new=0 if model.new is None else model.new.n,
        fingerprint=fingerprint(model),
        figures=method.figures(model, res),
        cautions=_common_cautions(model, fitted) + method.cautions(model, res) + fitted.cautions,
        standing=list(method.standing),
    )
