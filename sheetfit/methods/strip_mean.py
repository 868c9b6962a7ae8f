"""The strip-mean method: the graph of averages of y in strips of x."""

from __future__ import annotations

import numpy as np

from ..declare.model import ModelData
from ..fit.strip import StripMean, StripMeanResult
from ..settings import Rule, positive
from ..sheets.charts_methods import strip_charts
from ..sheets.strip import FEW_IN_STRIP, plan_strip
from ..words import plural
from .base import Forecasts, Method

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
    if model.new is not None:
        near = res.means_at(model.new.X[:, 0])[0].tolist()
        few = [i for i, c in enumerate(near) if c < FEW_IN_STRIP]
        if few:
            first = model.new.columns[0]
            where = ", ".join(f"row {first.row_of(i)} ({plural(int(near[i]), 'data row')})"
                              for i in few[:10])
            out.append(f"{plural(len(few), 'new row')} with fewer than {FEW_IN_STRIP} data rows "
                       f"within ± width of its value ('{first.sheet}' {where}"
                       f"{'…' if len(few) > 10 else ''}): the estimate is the mean of the "
                       "nearest strip and rests on few or no similar cases")
    return out


def _key_figures(model: ModelData, res: StripMeanResult) -> list[tuple[str, float]]:
    return [("width", float(model.settings["width"])), ("leave-one-out RMSE", float(res.rmse_))]


def _forecasts(model: ModelData, res: StripMeanResult, new: object) -> Forecasts:
    return np.asarray(new, dtype=float), None, None, None

#: What a strip mean is, and how to read it (on its own sheets and the index).
STANDING = (
    ("A strip mean describes the data between the smallest and largest attribute values "
    "seen; beyond them it repeats the end strip's mean."),
    ("The residuals and the RMSE are leave-one-out: each row is fitted without itself, an "
    "honest estimate of the error on a new row."),
    ("A strip with few rows gives an unsteady mean; read the rows-in-strip count beside "
    "each estimate."),
)


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
    key_figures=_key_figures,
    forecasts=_forecasts,
    standing=STANDING,
    charts=strip_charts,
)
