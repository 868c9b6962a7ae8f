"""The neighbour-mean method: the average response of the k most similar past rows."""

from __future__ import annotations

import numpy as np

from ..declare.model import ModelData
from ..fit.neighbours import MeanPrediction, NeighbourMean, NeighbourMeanResult
from ..sheets.charts_methods import neighbour_mean_charts
from ..sheets.neighbours import plan_neighbour_mean
from . import _neighbours
from .base import Forecasts, Method

__all__ = ["METHOD"]


def _fit(model: ModelData) -> NeighbourMeanResult:
    st = model.settings
    est = NeighbourMean(k=st["k"], standard_units=bool(st["standard_units"]))
    return est.fit(model.X, model.Y, names=model.attribute_names)


def _figures(model: ModelData, res: NeighbourMeanResult) -> list[str]:
    return [_neighbours.k_figure(res), f"leave-one-out RMSE {float(res.rmse_):.6g}"]


def _key_figures(model: ModelData, res: NeighbourMeanResult) -> list[tuple[str, float]]:
    return [("k", float(res.k_)), ("leave-one-out RMSE", float(res.rmse_))]


def _forecasts(model: ModelData, res: NeighbourMeanResult, new: object) -> Forecasts:
    if not isinstance(new, MeanPrediction):
        raise TypeError(f"neighbour-mean forecasts need a MeanPrediction, not {type(new)}")
    return np.asarray(new.value, dtype=float), None, None, None


METHOD: Method[NeighbourMeanResult] = Method(
    word="neighbour_mean",
    title="neighbour mean",
    description="the mean response of the k most similar rows (k nearest neighbours)",
    rules=_neighbours.RULES,
    fit=_fit,
    plan=plan_neighbour_mean,
    figures=_figures,
    cautions=_neighbours.cautions,
    key_figures=_key_figures,
    forecasts=_forecasts,
    standing=_neighbours.MEAN_STANDING,
    charts=neighbour_mean_charts,
)
