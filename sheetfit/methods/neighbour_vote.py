"""The neighbour-vote method: the most common class among the k most similar past rows."""

from __future__ import annotations

from ..declare.model import ModelData
from ..errors import Context, SettingError
from ..fit.neighbours import NeighbourVote, NeighbourVoteResult
from ..labels import label_text, labels_equal
from ..settings import Rule, label
from ..sheets.charts_methods import neighbour_vote_charts
from ..sheets.neighbours import plan_neighbour_vote
from ..words import clip
from . import _neighbours
from .base import Method

__all__ = ["METHOD"]


def _fit(model: ModelData) -> NeighbourVoteResult:
    st = model.settings
    est = NeighbourVote(k=st["k"], standard_units=bool(st["standard_units"]))
    return est.fit(model.X, list(model.Y), names=model.attribute_names)


def _figures(model: ModelData, res: NeighbourVoteResult) -> list[str]:
    return [_neighbours.k_figure(res), f"leave-one-out error rate {float(res.error_rate_):.4f}"]


def _check(model: ModelData) -> None:
    """The focus class, when given, must be one of the classes in y (as EXACT compares)."""
    focus = model.settings["focus"]
    if focus is None or any(labels_equal(v, focus) for v in model.Y):
        return
    classes = sorted({label_text(v) for v in model.Y})
    raise SettingError(
        f"focus '{clip(label_text(focus))}' is not one of the classes in y "
        f"({', '.join(clip(c, 30) for c in classes[:10])}{' ...' if len(classes) > 10 else ''})",
        Context(model.file, model.names.get("opts")),
        hint="write the class exactly as in the data (capitals count)",
    )


def _key_figures(model: ModelData, res: NeighbourVoteResult) -> list[tuple[str, float]]:
    return [("k", float(res.k_)), ("leave-one-out error rate", float(res.error_rate_))]


METHOD: Method[NeighbourVoteResult] = Method(
    word="neighbour_vote",
    title="neighbour vote",
    description="the most common class among the k most similar rows (k nearest neighbours)",
    rules=_neighbours.RULES + (
        Rule("focus", "one of the classes in y", None, label,
             "the class a work list ranks new rows by (default: the rarest class)"),
    ),
    labels=True,
    check=_check,
    fit=_fit,
    plan=plan_neighbour_vote,
    figures=_figures,
    cautions=_neighbours.cautions,
    key_figures=_key_figures,
    standing=_neighbours.VOTE_STANDING,
    charts=neighbour_vote_charts,
)
