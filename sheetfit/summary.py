"""One summary per fitted model: feeds the index sheet, the CLI report and (later) the HTTP reply."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

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
    """The model's input fingerprint (recipe in ``declare/fingerprint.py`` and the README)."""
    if model.record is None:
        raise ValueError(f"model {model.tag} was not read with its input record")
    return model.record.fingerprint


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
