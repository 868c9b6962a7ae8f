"""One summary per fitted model: feeds the index sheet, the CLI report and (later) the HTTP reply."""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .declare.model import ModelData
from .owned import sheet_title

__all__ = ["METHOD_WORDS", "ModelSummary", "fingerprint", "summarise"]

METHOD_WORDS = {
    "least_squares": "least squares",
    "strip_mean": "strip mean",
    "neighbour_mean": "neighbour mean",
    "neighbour_vote": "neighbour vote",
}


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
    fingerprint: str
    figures: list[str] = field(default_factory=list)
    cautions: list[str] = field(default_factory=list)
    status: str = "fitted"

    def text(self) -> str:
        """A few plain lines for the command line."""
        lines = [
            (f"model {self.tag}: {METHOD_WORDS.get(self.method, self.method)}, "
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


def _rows(n: int, what: str = "row") -> str:
    return f"{n} {what}" + ("" if n == 1 else "s")


def _common_cautions(model: ModelData) -> list[str]:
    out: list[str] = []
    if model.left_out:
        n = len(model.left_out)
        out.append(f"{_rows(n, 'data row')} left out of the fit; sheet "
                   f"'{sheet_title(model.tag, 'fitted')}' lists {'it' if n == 1 else 'them'} "
                   "with the reason")
    if model.new is not None:
        lo, hi = model.X.min(axis=0), model.X.max(axis=0)
        outside = np.flatnonzero(((model.new.X < lo) | (model.new.X > hi)).any(axis=1))
        if outside.size:
            first = model.new.columns[0]
            rows = ", ".join(str(first.row_of(int(i))) for i in outside[:10])
            more = "…" if outside.size > 10 else ""
            out.append(f"{_rows(int(outside.size), 'new row')} outside the fitted range of the "
                       f"attributes ('{first.sheet}' {'row' if outside.size == 1 else 'rows'} "
                       f"{rows}{more}): extrapolated, read with care")
    return out


def _least_squares(model: ModelData, res: Any) -> tuple[list[str], list[str]]:
    r2 = "R² (uncentred)" if res.r2_uncentred_ else "R²"
    coefs = ", ".join(f"{t} {float(c):.6g}" for t, c in zip(res.terms_, res.coef_))
    figures = [coefs, f"{r2} {float(res.r2_):.6f}, RMSE {float(res.rmse_):.6g}"]
    cautions = []
    if res.r2_uncentred_:
        cautions.append("no intercept: R² is uncentred (about zero) and reads higher than a "
                        "centred R²")
    if res.df_resid_ < 10:
        cautions.append(f"only {res.df_resid_} residual degrees of freedom: R² and the residual "
                        "SD are unstable")
    return figures, cautions


def _neighbours(model: ModelData, res: Any) -> tuple[list[str], list[str]]:
    how = "given" if res.k_given_ else "chosen by leave-one-out error"
    figures = [f"k = {res.k_} ({how}), standard units {'on' if res.scaling_.on else 'off'}"]
    if model.settings.method == "neighbour_vote":
        figures.append(f"leave-one-out error rate {float(res.error_rate_):.4f}")
    else:
        figures.append(f"leave-one-out RMSE {float(res.rmse_):.6g}")
    cautions = []
    table_end = len(res.k_table_)
    if not res.k_given_ and res.k_ == table_end and table_end < len(model.used) - 1:
        cautions.append(f"k = {res.k_} was chosen at the end of the k table; a larger k may "
                        "do as well or better (set k to try)")
    if not res.scaling_.on and len(model.xs) > 1:
        sd = model.X.std(axis=0)
        if sd.min() > 0 and sd.max() / sd.min() > 10:
            cautions.append(f"standard units are off and the attributes' spreads differ "
                            f"{sd.max() / sd.min():.0f}-fold: the widest attribute dominates "
                            "the distances")
    return figures, cautions


def _strip(model: ModelData, res: Any) -> tuple[list[str], list[str]]:
    figures = [(f"width {float(model.settings['width']):g}, {len(res.centres_)} centres "
                f"({res.grid_kind_} grid), leave-one-out RMSE {float(res.rmse_):.6g}")]
    cautions = []
    empty = int(np.sum(np.asarray(res.count_) == 0))
    if empty:
        cautions.append(f"{_rows(empty, 'strip')} empty: no rows within ± width (left blank)")
    unfitted = len(model.used) - int(res.n_fitted_)
    if unfitted:
        cautions.append(f"{_rows(unfitted)} with no other row in its strip: no fitted value")
    return figures, cautions


_BY_METHOD = {
    "least_squares": _least_squares,
    "neighbour_mean": _neighbours,
    "neighbour_vote": _neighbours,
    "strip_mean": _strip,
}


def summarise(model: ModelData, res: Any, extra: list[str]) -> ModelSummary:
    """The summary of a fitted model; ``extra`` holds cautions raised during the fit."""
    figures, cautions = _BY_METHOD[model.settings.method](model, res)
    return ModelSummary(
        tag=model.tag,
        method=model.settings.method,
        response=model.y.name,
        attributes=model.attribute_names,
        n_used=len(model.used),
        n_left_out=len(model.left_out),
        n_new=0 if model.new is None else model.new.n,
        fingerprint=fingerprint(model),
        figures=figures,
        cautions=_common_cautions(model) + cautions + extra,
    )
