"""What the two neighbour methods share: the k and standard-units settings, figures, cautions."""

from __future__ import annotations

from ..declare.model import ModelData
from ..fit.neighbours import NeighbourMeanResult, NeighbourVoteResult
from ..settings import Rule, choice, k_value, yes_no
from ..sheets._nb_trail import TRAIL_WORDS

__all__ = ["MEAN_STANDING", "RULES", "VOTE_STANDING", "cautions", "k_figure"]

RULES = (
    Rule("k", "a whole number of at least 1, or auto", None, k_value,
         "how many nearest neighbours; auto picks the k with the smallest leave-one-out error"),
    Rule("standard_units", "yes or no", True, yes_no,
         "measure distances in standard units (z = (x - mean) / SD)"),
    Rule("trail", TRAIL_WORDS, "auto", choice(("all", "auto", "new")),
         "which data rows the neighbours sheet shows step by step (new rows always); the "
         "others show sheetfit's fitted value as a value"),
)


def k_figure(res: NeighbourMeanResult | NeighbourVoteResult) -> str:
    how = "given" if res.k_given_ else "chosen by leave-one-out error"
    return f"k = {res.k_} ({how}), standard units {'on' if res.scaling_.on else 'off'}"


def cautions(model: ModelData, res: NeighbourMeanResult | NeighbourVoteResult) -> list[str]:
    out = []
    table_end = len(res.k_table_)
    if not res.k_given_ and res.k_ == table_end and table_end < res.n_ - 1:
        out.append(f"k = {res.k_} was chosen at the end of the k table; a larger k may "
                   "do as well or better (set k to try)")
    if not res.scaling_.on and len(res.names_) > 1:
        sd = res.X_.std(axis=0)
        if sd.min() > 0 and sd.max() / sd.min() > 10:
            out.append(f"standard units are off and the attributes' spreads differ "
                       f"{sd.max() / sd.min():.0f}-fold: the widest attribute dominates "
                       "the distances")
    return out


_SHARED = (
    ("An estimate from similar past rows is only as good as the similarity: check that the "
    "attributes are the ones that make cases alike (unscaled attributes let the widest one "
    "dominate)."),
    ("The residuals and error figures are leave-one-out: a row is never its own neighbour, "
    "so they are honest estimates of the error on a new row."),
    ("A new row unlike every past row (outside their range) still gets neighbours; its "
    "estimate is flagged as extrapolated."),
)
#: What a neighbour mean is, and how to read it (on its own sheets and the index).
MEAN_STANDING = _SHARED + (
    ("Read each estimate with the spread of its neighbours' values (smallest, median, "
    "largest) beside it."),
)
#: What a neighbour vote is, and how to read it.
VOTE_STANDING = _SHARED + (
    ("An error rate alone can mislead when one class is rare: read the confusion matrix, "
    "the base rates, precision and recall."),
    ("The work list ranks; where to cut it is a choice of the cost of a missed case against "
    "a needless follow-up."),
)
