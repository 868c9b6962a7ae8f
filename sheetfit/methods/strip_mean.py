"""The strip-mean method: the graph of averages of y in strips of x."""

from __future__ import annotations

import numpy as np

from ..declare.model import ModelData
from ..fit.strip import StripMean, StripMeanResult
from ..settings import Rule, positive
from ..sheets.charts_methods import strip_charts
from ..sheets.strip import plan_strip
from ..words import plural
from .base import Method

__all__ = ["METHOD"]


def _fit(model: ModelData) -> StripMeanResult:
    return StripMean(width=float(model.settings["width"])).fit(model.X[:, 0], model.Y)


def _figures(model: ModelData, res: StripMeanResult) -> list[str]:
    return [(f"width {float(model.settings['width']):g}, {len(res.centres_)} centres "
             f"({res.grid_kind_} grid), leave-one-out RMSE {float(res.rmse_):.6g}")]


def _cautions(model: ModelData, res: StripMeanResult) -> list[str]:
    out = []
    empty = int(np.sum(np.asarray(res.count_) == 0))
    if empty:
        out.append(f"{plural(empty, 'strip')} empty: no rows within ± width (left blank)")
    unfitted = res.n_ - int(res.n_fitted_)
    if unfitted:
        out.append(f"{plural(unfitted, 'row')} with no other row in its strip: no fitted value")
    return out


METHOD: Method[StripMeanResult] = Method(
    word="strip_mean",
    title="strip mean",
    description="the mean of y over the rows whose x lies within ± width of each centre",
    rules=(
        Rule("width", "a number greater than 0", None, positive,
             "half-width of each strip: rows with |x - centre| <= width"),
    ),
    required=("width",),
    max_attributes=1,
    fit=_fit,
    plan=plan_strip,
    figures=_figures,
    cautions=_cautions,
    charts=strip_charts,
)
