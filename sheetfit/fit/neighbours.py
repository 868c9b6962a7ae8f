"""Neighbour-average models: the mean or the vote of the k most similar past rows.

The arithmetic follows fixed definitions so that a spreadsheet can repeat it cell by cell:

* **standard units**: each attribute minus its mean, divided by its population standard
  deviation (root mean square of the deviations, dividing by n). Means and sums of
  squares are correctly rounded sums (``math.fsum``).
* **distance** between rows i and j: ``sqrt(fsum((Z[i,c] - Z[j,c]) * (Z[i,c] - Z[j,c])))``,
  what ``SQRT(SUMXMY2(row_i, row_j))`` gives. A square is always the product ``d * d``
  (correctly rounded); Python's ``d ** 2`` goes through the C library's ``pow`` and
  differs in the last bit about once in a thousand values, so it is never used.
* **neighbour order**: by distance rounded to 12 significant digits, then by row index;
  distances that agree to 12 digits are ties and the lower row comes first. Training
  rows are predicted leave-one-out: a row is never its own neighbour (a duplicate of it
  at another row is).
* **mean**: ``fsum(y of the k neighbours) / k``; **vote**: the class most common among
  the k neighbours, and among tied classes the class of the nearest neighbour.

The pieces live in their own modules: standard units in ``scaling``, the search and the
tie rule in ``_search``, correctly rounded row sums in ``_sums``, class labels and votes
in ``_classes``; the checks of the input in ``checks``.
"""

from __future__ import annotations

import math
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field
from functools import cached_property
from typing import TYPE_CHECKING, Any

import numpy as np

if TYPE_CHECKING:  # scipy's neighbour search is imported when a neighbour model is fitted
    from scipy.spatial import cKDTree

from sheetfit.errors import DataError
from sheetfit.fit import checks
from sheetfit.fit._arrays import divide, readonly
from sheetfit.fit._classes import class_index, label_repr, parse_labels, position_votes, vote
from sheetfit.fit._search import TIE_DIGITS, exact_distances, search
from sheetfit.fit._sums import (
    exact_dot,
    exact_parts,
    exact_sum,
    fsum_rows,
    iter_prefix_fsums,
    prefix_fsums,
)
from sheetfit.fit.scaling import Scaling, attribute_stats, standard_units

__all__ = [
    "TABLE_MAX_K",
    "TIE_DIGITS",
    "MeanPrediction",
    "NeighbourMean",
    "NeighbourMeanResult",
    "NeighbourVote",
    "NeighbourVoteResult",
    "Prediction",
    "Scaling",
    "VotePrediction",
    "standard_units",
]

#: The k table (leave-one-out error for each k) runs from 1 to min(TABLE_MAX_K, n − 1).
TABLE_MAX_K = 25


@dataclass(frozen=True)
class Prediction:
    """Neighbours of new rows, in order, with their exact distances and the prediction.

    ``Z`` holds the new rows in the units the distances were measured in.
    """

    neighbours: np.ndarray
    distances: np.ndarray
    value: np.ndarray
    Z: np.ndarray


@dataclass(frozen=True)
class MeanPrediction(Prediction):
    """A neighbour-mean prediction with the spread of the neighbours' responses."""

    nb_min: np.ndarray
    nb_median: np.ndarray
    nb_max: np.ndarray


@dataclass(frozen=True)
class VotePrediction(Prediction):
    """A neighbour-vote prediction: winning class, its votes and its share of the k."""

    votes: np.ndarray
    score: np.ndarray
    classes: list[Any] = field(repr=False)
    codes: np.ndarray = field(repr=False)

    @property
    def position_votes(self) -> np.ndarray:
        """For each neighbour of each row, how many of the row's k neighbours share its class."""
        return position_votes(self.codes, len(self.classes))

    def share(self, cls: str | float) -> np.ndarray:
        """Share of each row's k neighbours that are in class cls."""
        return np.mean(self.codes == class_index(self.classes, cls), axis=1)


class _Base:
    """What both neighbour results share: the scaling, the tree and the ordered lists."""

    def __init__(
        self,
        *,
        X: np.ndarray,
        names: list[str],
        scaling: Scaling,
        Z: np.ndarray,
        tree: cKDTree,
        k: int,
        k_given: bool,
        order_J: np.ndarray,
        order_D: np.ndarray,
        k_table: list[tuple[int, float]],
    ) -> None:
        self.X_ = readonly(X)
        self.names_ = list(names)
        self.scaling_ = scaling
        self.Z_ = readonly(Z)
        self._tree = tree
        self.k_ = k
        self.k_given_ = k_given
        # only the chosen k of each row's ordered list is kept: the search's deeper table
        # (25 a row for the k table, 400 bytes a row) is let go with the fit
        self._order_J = readonly(np.ascontiguousarray(order_J[:, :k]))
        self._order_D = readonly(np.ascontiguousarray(order_D[:, :k]))
        self.k_table_ = k_table

    @cached_property
    def n_(self) -> int:
        """Number of training rows."""
        return int(self.X_.shape[0])

    @cached_property
    def neighbours_(self) -> np.ndarray:
        """Each training row's k_ neighbours (row indices, nearest first, itself excluded)."""
        return self._order_J

    @cached_property
    def distances_(self) -> np.ndarray:
        """Exact distances in standard units to the neighbours in neighbours_."""
        return self._order_D

    @cached_property
    def X_mean_(self) -> np.ndarray:
        """Mean of each attribute over the training rows (fsum / n), scaling on or off."""
        return self.scaling_.mean_ if self.scaling_.on else readonly(attribute_stats(self.X_)[0])

    @cached_property
    def X_sd_(self) -> np.ndarray:
        """Population SD of each attribute over the training rows, scaling on or off."""
        return self.scaling_.sd_ if self.scaling_.on else readonly(attribute_stats(self.X_)[1])

    def _neighbours_of(self, X_new: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        X_new = checks.new_rows(X_new, self.names_)
        checks.warn_outside(self.X_.min(axis=0), self.X_.max(axis=0), X_new)
        Q = readonly(self.scaling_.transform(X_new))
        return (*search(self._tree, self.Z_, Q, self.k_, None), Q)


#: Training rows whose neighbours and k table are worked out together: the search's
#: ordered lists (25 a row for the k table) and their responses exist only for a block.
_FIT_ROWS = 1 << 15


@dataclass(frozen=True)
class _Search:
    """Standard units, the tree, and the ordered neighbours of every training row, found a
    block of rows at a time (``blocks``) to the depth the k table needs and kept in
    ``order`` as int32 (n < 2**31: a sheet has 2**20 rows) until k is chosen."""

    X: np.ndarray
    names: list[str]
    scaling: Scaling
    Z: np.ndarray
    tree: cKDTree
    table_max: int
    depth: int
    order: np.ndarray

    def blocks(self) -> Iterator[tuple[int, int, np.ndarray]]:
        """(a, b, the neighbours of rows a..b-1 in order, ``depth`` a row, itself never),
        each block also written to ``order``."""
        n = self.Z.shape[0]
        for a in range(0, n, _FIT_ROWS):
            b = min(n, a + _FIT_ROWS)
            J, _ = search(self.tree, self.Z, self.Z[a:b], self.depth, np.arange(a, b))
            self.order[a:b] = J
            yield a, b, J
            del J  # not held while the next block is searched

    def chosen(self, k: int) -> np.ndarray:
        """The first k neighbours of every row (int64, its own array: the deeper table
        can go)."""
        return np.ascontiguousarray(self.order[:, :k], dtype=np.int64)

    def distances(self, J: np.ndarray) -> np.ndarray:
        """The exact distances of every training row to its neighbours ``J`` (the values
        the search measured them by: the same formula on the same rows)."""
        D = np.empty(J.shape)
        step = max(1, _FIT_ROWS // max(1, J.shape[1]))
        for a in range(0, J.shape[0], step):
            D[a:a + step] = exact_distances(self.Z[a:a + step], self.Z, J[a:a + step])
        return D


def _fit_search(X: np.ndarray, names: Sequence[str] | None, k: int | None,
                on: bool) -> _Search:
    """Checks shared by both models, standard units, and the tree to search."""
    X, names_ = checks.as_table(X, names)
    n = X.shape[0]
    on = checks.check_flag("standard_units", on)
    checks.enough_rows(n, 2, "a neighbour model")
    kk = checks.check_k(k, n)
    scaling = standard_units(X, on, names_)
    Z = scaling.transform(X)
    from scipy.spatial import cKDTree  # here, not at start-up: a least-squares book needs none

    tree = cKDTree(Z)
    table_max = min(TABLE_MAX_K, n - 1)
    depth = max(kk or 0, table_max)
    return _Search(X, names_, scaling, Z, tree, table_max, depth,
                   np.empty((n, depth), dtype=np.int32))


class NeighbourMean:
    """k nearest neighbours regression: the average response of the k most similar rows."""

    def __init__(self, k: int | None = None, standard_units: bool = True) -> None:
        self.k = k
        self.standard_units = standard_units

    def fit(
        self, X: np.ndarray, y: np.ndarray, names: Sequence[str] | None = None
    ) -> NeighbourMeanResult:
        """Find each row's neighbours, the leave-one-out k table and the fitted means."""
        X, names = checks.as_table(X, names)
        y = checks.response(y, X.shape[0])
        sr = _fit_search(X, names, self.k, self.standard_units)
        n, table_max = sr.X.shape[0], sr.table_max
        ks = list(range(1, table_max + 1))
        # each k's sum of squared leave-one-out residuals, as exact parts per block
        parts: dict[int, list[float]] = {k: [] for k in ks}
        for a, b, Jb in sr.blocks():
            yb = y[a:b]
            for k, total in iter_prefix_fsums(y[Jb], ks):
                res = yb - total / k
                parts[k] += exact_parts(res * res)
            del Jb
        table = [(k, math.sqrt(math.fsum(parts[k]) / n)) for k in ks]
        k_ = int(self.k) if self.k is not None else _best_k(table)
        J = sr.chosen(k_)
        fitted = np.empty(n)
        for a in range(0, n, _FIT_ROWS):
            b = min(n, a + _FIT_ROWS)
            fitted[a:b] = prefix_fsums(y[J[a:b]], [k_])[k_] / k_
        return NeighbourMeanResult(
            X=sr.X, names=sr.names, scaling=sr.scaling, Z=sr.Z, tree=sr.tree, k=k_,
            k_given=self.k is not None, order_J=J, order_D=sr.distances(J), k_table=table,
            y=y, fitted=fitted,
        )  # fmt: skip


def _best_k(table: list[tuple[int, float]]) -> int:
    """The k with the smallest error; among equal errors the smallest k."""
    return min(table, key=lambda t: (t[1], t[0]))[0]


class NeighbourMeanResult(_Base):
    """A fitted neighbour-mean model: leave-one-out fitted values and the k table."""

    def __init__(self, *, y: np.ndarray, fitted: np.ndarray, **kw: Any) -> None:
        super().__init__(**kw)
        self.y_ = readonly(y)
        self.fitted_ = readonly(fitted)

    def __repr__(self) -> str:
        return f"NeighbourMeanResult(n={self.n_}, k={self.k_}, rmse={self.rmse_:.6g})"

    @cached_property
    def resid_(self) -> np.ndarray:
        """Leave-one-out residuals y − fitted_."""
        return readonly(self.y_ - self.fitted_)

    @cached_property
    def rmse_(self) -> float:
        """Leave-one-out root mean squared residual, sqrt(fsum(resid²) / n)."""
        return math.sqrt(exact_dot(self.resid_, self.resid_) / self.n_)

    @cached_property
    def y_sd_(self) -> float:
        """Population SD of y: the RMSE of predicting every row by the mean, for comparison."""
        return float(attribute_stats(self.y_.reshape(-1, 1))[1][0])

    @cached_property
    def nb_y_(self) -> np.ndarray:
        """The responses of each row's k_ neighbours, in neighbour order."""
        return readonly(self.y_[self.neighbours_])

    @cached_property
    def nb_min_(self) -> np.ndarray:
        """Smallest response among each row's neighbours."""
        return readonly(self.nb_y_.min(axis=1))

    @cached_property
    def nb_median_(self) -> np.ndarray:
        """Median response among each row's neighbours (mean of the middle two for even k)."""
        return readonly(np.median(self.nb_y_, axis=1))

    @cached_property
    def nb_max_(self) -> np.ndarray:
        """Largest response among each row's neighbours."""
        return readonly(self.nb_y_.max(axis=1))

    def predict(self, X_new: np.ndarray) -> MeanPrediction:
        """Mean response of the k_ nearest training rows to each new row; never refits."""
        J, D, Q = self._neighbours_of(X_new)
        Y = self.y_[J]
        value = fsum_rows(Y) / self.k_
        return MeanPrediction(
            J, D, value, Q, Y.min(axis=1), np.median(Y, axis=1), Y.max(axis=1)
        )


class NeighbourVote:
    """k nearest neighbours classification: the most common class among the k most similar rows."""

    def __init__(self, k: int | None = None, standard_units: bool = True) -> None:
        self.k = k
        self.standard_units = standard_units

    def fit(
        self,
        X: np.ndarray,
        labels: Sequence[str | float] | np.ndarray,
        names: Sequence[str] | None = None,
    ) -> NeighbourVoteResult:
        """Find each row's neighbours, the leave-one-out k table and the fitted classes."""
        X, names = checks.as_table(X, names)
        codes, classes = parse_labels(checks.labels_table(labels, X.shape[0]))
        if len(classes) == 1:
            raise DataError(
                f"y holds only one class, {label_repr(classes[0])}; a vote needs two or more"
            )
        sr = _fit_search(X, names, self.k, self.standard_units)
        n, table_max = sr.X.shape[0], sr.table_max
        wrong = [0] * table_max  # rows whose leave-one-out class is wrong, for each k
        for a, b, Jb in sr.blocks():
            C = codes[Jb]
            # votes per position, grown one neighbour at a time across the k table
            v = np.zeros((b - a, table_max), dtype=np.int64)
            rows = np.arange(b - a)
            for k in range(1, table_max + 1):
                new = C[:, k - 1 : k]
                v[:, : k - 1] += C[:, : k - 1] == new
                v[:, k - 1] = np.sum(C[:, :k] == new, axis=1)
                pos = np.argmax(v[:, :k], axis=1)
                wrong[k - 1] += int(np.count_nonzero(C[rows, pos] != codes[a:b]))
            del Jb, C, v
        table = [(k, wrong[k - 1] / n) for k in range(1, table_max + 1)]
        k_ = int(self.k) if self.k is not None else _best_k(table)
        J = sr.chosen(k_)
        pred = np.empty(n, dtype=np.int64)
        votes = np.empty(n, dtype=np.int64)
        for a in range(0, n, _FIT_ROWS):
            b = min(n, a + _FIT_ROWS)
            pred[a:b], votes[a:b] = vote(codes[J[a:b]], len(classes))
        return NeighbourVoteResult(
            X=sr.X, names=sr.names, scaling=sr.scaling, Z=sr.Z, tree=sr.tree, k=k_,
            k_given=self.k is not None, order_J=J, order_D=sr.distances(J), k_table=table,
            codes=codes, classes=classes, pred=pred, votes=votes,
        )  # fmt: skip


class NeighbourVoteResult(_Base):
    """A fitted neighbour-vote model: leave-one-out classes, confusion matrix, base rates."""

    def __init__(
        self,
        *,
        codes: np.ndarray,
        classes: list[Any],
        pred: np.ndarray,
        votes: np.ndarray,
        **kw: Any,
    ) -> None:
        super().__init__(**kw)
        self.classes_ = readonly(np.array(classes, dtype=object))
        self.y_code_ = readonly(codes)
        self.fitted_code_ = readonly(pred)
        self.votes_ = readonly(votes)

    def __repr__(self) -> str:
        return f"NeighbourVoteResult(n={self.n_}, k={self.k_}, error_rate={self.error_rate_:.6g})"

    @cached_property
    def y_(self) -> np.ndarray:
        """The training labels (numbers as floats), as an object array."""
        return readonly(self.classes_[self.y_code_])

    @cached_property
    def fitted_(self) -> np.ndarray:
        """Leave-one-out predicted class of each training row (object array of labels)."""
        return readonly(self.classes_[self.fitted_code_])

    @cached_property
    def position_votes_(self) -> np.ndarray:
        """For each of each row's k_ neighbours, how many of the k_ share its class."""
        return readonly(position_votes(self.y_code_[self.neighbours_], len(self.classes_)))

    @cached_property
    def score_(self) -> np.ndarray:
        """Share of the k_ neighbours in the predicted class, votes / k."""
        return readonly(self.votes_ / self.k_)

    @cached_property
    def correct_(self) -> np.ndarray:
        """Whether each row's leave-one-out class is its actual class."""
        return readonly(self.fitted_code_ == self.y_code_)

    @cached_property
    def error_rate_(self) -> float:
        """Share of rows whose leave-one-out class is wrong."""
        return exact_sum(~self.correct_) / self.n_

    @cached_property
    def confusion_(self) -> np.ndarray:
        """Counts by actual class (rows) and predicted class (columns), in classes_ order."""
        C = len(self.classes_)
        flat = np.bincount(self.y_code_ * C + self.fitted_code_, minlength=C * C)
        return readonly(flat.reshape(C, C))

    @cached_property
    def precision_(self) -> np.ndarray:
        """Per class: of the rows predicted in it, the share actually in it (nan if none)."""
        return readonly(divide(np.diag(self.confusion_), self.confusion_.sum(axis=0)))

    @cached_property
    def recall_(self) -> np.ndarray:
        """Per class: of the rows actually in it, the share predicted in it (nan if none)."""
        return readonly(divide(np.diag(self.confusion_), self.confusion_.sum(axis=1)))

    @cached_property
    def base_rate_(self) -> np.ndarray:
        """Share of each class among the training rows."""
        return readonly(np.bincount(self.y_code_, minlength=len(self.classes_)) / self.n_)

    def share(self, cls: str | float) -> np.ndarray:
        """Share of each training row's k_ neighbours that are in class cls."""
        c = class_index(list(self.classes_), cls)
        return np.mean(self.y_code_[self.neighbours_] == c, axis=1)

    def predict(self, X_new: np.ndarray) -> VotePrediction:
        """Class voted by the k_ nearest training rows to each new row; never refits."""
        J, D, Q = self._neighbours_of(X_new)
        codes = self.y_code_[J]
        pred, votes = vote(codes, len(self.classes_))
        return VotePrediction(
            J, D, self.classes_[pred], Q, votes, votes / self.k_, list(self.classes_), codes
        )
