"""The neighbour-mean method: the average response of the k most similar past rows."""

from __future__ import annotations

from ..declare.model import ModelData
from ..fit.neighbours import NeighbourMean, NeighbourMeanResult
from ..sheets.charts_methods import neighbour_mean_charts
from ..sheets.neighbours import plan_neighbour_mean
from . import _neighbours
from .base import Method

__all__ = ["METHOD"]


def _fit(model: ModelData) -> NeighbourMeanResult:
    st = model.settings
    est = NeighbourMean(k=st["k"], standard_units=bool(st["standard_units"]))
    return est.fit(model.X, model.Y, names=model.attribute_names)


def _figures(model: ModelData, res: NeighbourMeanResult) -> list[str]:
    return [_neighbours.k_figure(res), f"leave-one-out RMSE {float(res.rmse_):.6g}"]


METHOD: Method[NeighbourMeanResult] = Method(
    word="neighbour_mean",
    title="neighbour mean",
    description="the mean response of the k most similar rows (k nearest neighbours)",
    rules=_neighbours.RULES,
    fit=_fit,
    plan=plan_neighbour_mean,
    figures=_figures,
    cautions=_neighbours.cautions,
    standing=_neighbours.MEAN_STANDING,
    charts=neighbour_mean_charts,
)
