"""One summary per fitted model: feeds the index sheet, the CLI report and (later) the HTTP reply."""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field

import numpy as np

from .declare.model import ModelData
from .fit.leastsq import LeastSquaresResult
from .owned import sheet_title

__all__ = ["ModelSummary", "fingerprint", "summarise"]

METHOD_WORDS = {"least_squares": "least squares"}


@dataclass
class ModelSummary:
    """What a reader needs to know about one model after a refresh."""

    tag: str
    method: str
    response: str
    attributes: list[str]
    n_used: int
    n_left_out: int
    n_new: int
    terms: list[str]
    coef: list[float]
    r2: float
    r2_uncentred: bool
    rmse: float
    fingerprint: str
    cautions: list[str] = field(default_factory=list)
    status: str = "fitted"

    def text(self) -> str:
        """A few plain lines for the command line."""
        r2 = "R² (uncentred)" if self.r2_uncentred else "R²"
        coefs = ", ".join(f"{t} {c:.6g}" for t, c in zip(self.terms, self.coef))
        lines = [
            (f"model {self.tag}: {METHOD_WORDS.get(self.method, self.method)}, "
             f"{self.response} on {', '.join(self.attributes)}"),
            (f"  rows used {self.n_used}, left out {self.n_left_out}"
             + (f", predicted {self.n_new} new" if self.n_new else "")),
            f"  {coefs}",
            f"  {r2} {self.r2:.6f}, RMSE {self.rmse:.6g}",
        ]
        lines += [f"  caution: {c}" for c in self.cautions]
        return "\n".join(lines)


def fingerprint(model: ModelData) -> str:
    """Short SHA-256 of the values and settings a model was fitted from."""
    h = hashlib.sha256()
    h.update(model.tag.encode())
    h.update(repr(sorted(model.settings.values.items())).encode())
    for arr in (model.used, model.Y, model.X):
        h.update(np.ascontiguousarray(arr).tobytes())
    if model.new is not None:
        h.update(np.ascontiguousarray(model.new.X).tobytes())
    return h.hexdigest()[:16]


def _rows(n: int, what: str = "row") -> str:
    return f"{n} {what}" + ("" if n == 1 else "s")


def _cautions(model: ModelData, res: LeastSquaresResult, extra: list[str]) -> list[str]:
    out: list[str] = []
    if model.left_out:
        n = len(model.left_out)
        out.append(f"{_rows(n, 'data row')} left out of the fit; sheet "
                   f"'{sheet_title(model.tag, 'fitted')}' lists {'it' if n == 1 else 'them'} "
                   "with the reason")
    if res.r2_uncentred:
        out.append("no intercept: R² is uncentred (about zero) and reads higher than a "
                   "centred R²")
    if res.df_resid < 10:
        out.append(f"only {res.df_resid} residual degrees of freedom: R² and the residual SD "
                   "are unstable")
    if model.new is not None and res.degree >= 1:
        lo, hi = model.X.min(axis=0), model.X.max(axis=0)
        outside = np.flatnonzero(((model.new.X < lo) | (model.new.X > hi)).any(axis=1))
        if outside.size:
            first = model.new.columns[0]
            rows = ", ".join(str(first.row_of(int(i))) for i in outside[:10])
            more = "…" if outside.size > 10 else ""
            out.append(f"{_rows(int(outside.size), 'new row')} outside the fitted range of the "
                       f"attributes ('{first.sheet}' {'row' if outside.size == 1 else 'rows'} "
                       f"{rows}{more}): extrapolated, read with care")
    out += extra
    return out


def summarise(model: ModelData, res: LeastSquaresResult, extra: list[str]) -> ModelSummary:
    """The summary of a fitted least-squares model; ``extra`` holds cautions raised in the fit."""
    return ModelSummary(
        tag=model.tag,
        method=model.settings["method"],
        response=model.y.name,
        attributes=model.attribute_names,
        n_used=len(model.used),
        n_left_out=len(model.left_out),
        n_new=0 if model.new is None else model.new.n,
        terms=list(res.terms),
        coef=[float(c) for c in res.coef_],
        r2=float(res.r2),
        r2_uncentred=bool(res.r2_uncentred),
        rmse=float(res.rmse),
        fingerprint=fingerprint(model),
        cautions=_cautions(model, res, extra),
    )
