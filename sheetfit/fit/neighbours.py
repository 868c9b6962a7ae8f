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

The search uses a k-d tree and never compares all pairs; candidates are re-measured
with the exact formula and the set is widened until no row tied at the k-th place can be
missing. Correctly rounded row sums are computed in double-double arithmetic and proved
correctly rounded row by row; the few rows whose proof fails fall back to ``math.fsum``.
"""

from __future__ import annotations

import math
import numbers
from collections.abc import Sequence
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

import numpy as np
from scipy.spatial import cKDTree

from sheetfit.errors import DataError, SettingError
from sheetfit.fit._dd import two_sum

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
#: Distances that agree to this many significant digits are ties (lower row first).
TIE_DIGITS = 12
_EPS = float(np.finfo(np.float64).eps)
# Two distances whose relative gap exceeds this cannot round to the same 12 digits
# (the gap between 12-digit decimals is at most 1e-11 relative); margin of two.
_TIE_GAP = 2e-11
# Relative widening of the k-th distance when gathering candidates: far above the
# ~1e-15 gap between the tree's distances and the exact formula, far below any real gap.
_WIDEN = 1e-9
_MARGIN = 5
_CHUNK = 4_000_000  # elements per block of candidate differences


# ---------------------------------------------------------------- correctly rounded sums


def _finish(
    hi: np.ndarray, lo: np.ndarray, exact: np.ndarray, lost: np.ndarray, m: int, A: np.ndarray
) -> np.ndarray:
    """Round hi + lo; rows where that cannot be proved the correctly rounded sum use fsum.

    hi + lo is the exact sum where ``exact`` holds (rounding hi + lo once is then what
    fsum gives, halfway cases to even included); elsewhere lo is off by at most ``lost``.
    """
    s, e = two_sum(hi, lo)
    bound = lost * (1 + 4 * m * _EPS)
    # s is the rounding of the exact sum if that lies within half the gap to either
    # neighbouring float (compared doubled: half the smallest gap is not a float)
    gap = np.minimum(s - np.nextafter(s, -np.inf), np.nextafter(s, np.inf) - s)
    unsure = np.flatnonzero(~(exact | (2 * (np.abs(e) + bound) < gap)))
    out = np.asarray(s, dtype=np.float64)
    for i in unsure.tolist():
        out[i] = math.fsum(A[i, :m].tolist())
    return out


def _prefix_fsums(A: np.ndarray, ks: Sequence[int]) -> dict[int, np.ndarray]:
    """For each k in ks, the correctly rounded sum of the first k columns of each row."""
    want = set(ks)
    out: dict[int, np.ndarray] = {}
    r = A.shape[0]
    hi = np.zeros(r)
    lo = np.zeros(r)
    lost = np.zeros(r)  # what adding the errors into lo has rounded away, in magnitude
    for c in range(max(want)):
        hi, e = two_sum(hi, A[:, c])
        lo, e2 = two_sum(lo, e)
        lost += np.abs(e2)
        if c + 1 in want:
            out[c + 1] = _finish(hi, lo, lost == 0, lost, c + 1, A)
    return out


def _fsum_rows(A: np.ndarray) -> np.ndarray:
    """Correctly rounded sum of each row (what math.fsum gives), vectorised."""
    m = A.shape[1]
    if m <= 2:  # one addition is a single rounding already
        return A.sum(axis=1) if m else np.zeros(A.shape[0])
    return _prefix_fsums(A, [m])[m]


# ---------------------------------------------------------------------- standard units


@dataclass(frozen=True)
class Scaling:
    """Standard units: per-attribute mean and population SD (mean 0 and SD 1 when off)."""

    mean_: np.ndarray
    sd_: np.ndarray
    on: bool

    def transform(self, X: np.ndarray) -> np.ndarray:
        """(X − mean_) / sd_ element by element in float64; a copy of X when scaling is off."""
        X = _as_table(X, self.mean_.shape[0])
        return (X - self.mean_) / self.sd_ if self.on else X.copy()


def standard_units(
    X_train: np.ndarray, on: bool = True, names: Sequence[str] | None = None
) -> Scaling:
    """The scaling that puts each training attribute in standard units (or none when off)."""
    X = _as_table(X_train, None)
    n, m = X.shape
    names = _names(names, m)
    if not on:
        return Scaling(_readonly(np.zeros(m)), _readonly(np.ones(m)), False)
    if n == 0:
        raise DataError("no rows to take standard units from")
    mean = np.empty(m)
    sd = np.empty(m)
    for j in range(m):
        col = X[:, j]
        mean[j] = math.fsum(col.tolist()) / n
        dev = col - mean[j]
        sd[j] = math.sqrt(math.fsum((dev * dev).tolist()) / n)
        if sd[j] == 0 or np.all(col == col[0]):
            raise DataError(
                f"attribute '{names[j]}' has the same value in every row, "
                "so it has no standard units",
                hint="remove it, or turn standard units off",
            )
    return Scaling(_readonly(mean), _readonly(sd), True)


# --------------------------------------------------------------------- neighbour search


def _tie_keys(D: np.ndarray) -> np.ndarray:
    """Each distance rounded to 12 significant digits, formatted only where it matters.

    Rounding is monotone, so a distance with no other distance within the tie gap in its
    row keeps its own value as its key without changing any order or any tie.
    """
    S = np.sort(D, axis=1)
    a, b = S[:, :-1], S[:, 1:]
    close = (b != a) & np.isfinite(b) & (b - a <= _TIE_GAP * b)
    keys = D.copy()
    if close.any():
        vals = np.unique(np.concatenate([a[close], b[close]]))
        rounded = np.array([float(f"{v:.{TIE_DIGITS}g}") for v in vals.tolist()])
        pos = np.minimum(np.searchsorted(vals, D), vals.size - 1)
        hit = vals[pos] == D
        keys[hit] = rounded[pos[hit]]
    return keys


def _exact_distances(Q: np.ndarray, Z: np.ndarray, J: np.ndarray) -> np.ndarray:
    """Distance of each query row to its candidate rows J by the exact formula."""
    r, K = J.shape
    diff = Q[:, None, :] - Z[J]
    sq = (diff * diff).reshape(r * K, -1)
    return np.sqrt(_fsum_rows(sq)).reshape(r, K)


def _order(D: np.ndarray, J: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Sort each row's candidates by (12-digit distance, row index)."""
    idx = np.lexsort((J, _tie_keys(D)), axis=-1)
    return np.take_along_axis(D, idx, axis=1), np.take_along_axis(J, idx, axis=1)


def _search(
    tree: cKDTree, Z: np.ndarray, Q: np.ndarray, kk: int, self_rows: np.ndarray | None
) -> tuple[np.ndarray, np.ndarray]:
    """The first kk neighbours (indices, exact distances) of each query row, in order.

    With ``self_rows`` the query rows are training rows and each is excluded from its own
    list. A row is finished when the tree's farthest candidate lies beyond its kk-th
    exact distance widened by 1e-9; otherwise it is searched again with twice as many.
    """
    n, m = Z.shape
    r = Q.shape[0]
    J_out = np.empty((r, kk), dtype=np.int64)
    D_out = np.empty((r, kk))
    pending = np.arange(r)
    K = min(n, kk + (self_rows is not None) + _MARGIN)
    while pending.size:
        retry = []
        step = max(1, _CHUNK // (K * max(m, 1)))
        for start in range(0, pending.size, step):
            rows = pending[start : start + step]
            dt, jt = tree.query(Q[rows], k=K, workers=-1)
            dt, jt = dt.reshape(rows.size, K), jt.reshape(rows.size, K).astype(np.int64)
            D = _exact_distances(Q[rows], Z, jt)
            if self_rows is not None:
                own = jt == self_rows[rows][:, None]
                D[own] = np.inf
                jt[own] = n
            Ds, Js = _order(D, jt)
            done = (dt[:, -1] > Ds[:, kk - 1] * (1 + _WIDEN)) if K < n else np.ones(rows.size, bool)
            J_out[rows[done]] = Js[done, :kk]
            D_out[rows[done]] = Ds[done, :kk]
            retry.append(rows[~done])
        pending = np.concatenate(retry)
        K = min(n, 2 * K)
    return J_out, D_out


# ------------------------------------------------------------------------------- checks


def _readonly(a: np.ndarray) -> np.ndarray:
    a.setflags(write=False)
    return a


def _names(names: Sequence[str] | None, m: int) -> list[str]:
    out = [f"x{j + 1}" for j in range(m)] if names is None else [str(s) for s in names]
    if len(out) != m:
        raise DataError(f"{len(out)} attribute names given for {m} attribute columns")
    return out


def _as_table(X: np.ndarray, m: int | None, what: str = "row") -> np.ndarray:
    """X as a finite float64 table (rows × attributes); a vector is one attribute."""
    X = np.array(X, dtype=np.float64)
    if X.ndim == 1:
        X = X.reshape(-1, 1) if m in (None, 1) else X.reshape(1, -1)
    if X.ndim != 2 or X.shape[1] == 0 or (m is not None and X.shape[1] != m):
        need = "at least one" if m is None else str(m)
        raise DataError(f"the {what}s need {need} attribute columns, given shape {X.shape}")
    bad = np.argwhere(~np.isfinite(X))
    if bad.size:
        i, j = bad[0]
        raise DataError(f"{what} {i + 1}: attribute {j + 1} is not a finite number ({X[i, j]})")
    return X


def _check_settings(k: Any, on: Any, n: int) -> int | None:
    if not isinstance(on, bool | np.bool_):
        raise SettingError(f"setting standard_units: allowed true or false, given {on!r}")
    if n < 2:
        raise DataError(f"a neighbour model needs at least 2 rows, given {n}")
    if k is None:
        return None
    if isinstance(k, bool | np.bool_) or not isinstance(k, int | np.integer):
        raise SettingError(f"k must be a whole number, given {k!r}")
    if not 1 <= k < n:
        raise SettingError(
            f"k must be at least 1 and less than the number of rows ({n}), given {k}"
        )
    return int(k)


def _label_text(v: Any) -> str:
    return f"'{v}'" if isinstance(v, str) else f"'{v:.15g}'"


def _parse_labels(labels: Sequence[str | float] | np.ndarray) -> tuple[np.ndarray, list[Any]]:
    """Class codes (indices into the sorted classes) and the sorted classes."""
    vals = labels.tolist() if isinstance(labels, np.ndarray) else list(labels)
    first: dict[str, int] = {}
    canon: list[Any] = []
    for i, v in enumerate(vals):
        if isinstance(v, str):
            first.setdefault("text", i)
            canon.append(v)
        elif isinstance(v, numbers.Real) and not isinstance(v, bool | np.bool_):
            first.setdefault("number", i)
            if not math.isfinite(float(v)):
                raise DataError(f"row {i + 1}: the class label is not a finite number ({v})")
            canon.append(float(v))
        else:
            raise DataError(f"row {i + 1}: a class label must be a number or text, given {v!r}")
    if len(first) == 2:
        t, u = first["text"], first["number"]
        raise DataError(
            f"y mixes numbers and text (row {u + 1} is {vals[u]!r}, row {t + 1} is "
            f"{vals[t]!r}); class labels must be all numbers or all text"
        )
    classes = sorted(set(canon))
    code = {c: i for i, c in enumerate(classes)}
    return np.array([code[c] for c in canon], dtype=np.int64), classes


def _position_votes(codes: np.ndarray, n_classes: int) -> np.ndarray:
    """For each position of each row, how many positions of that row hold the same class."""
    r, k = codes.shape
    g = (codes + (np.arange(r, dtype=np.int64) * n_classes)[:, None]).ravel()
    _, inv, cnt = np.unique(g, return_inverse=True, return_counts=True)
    return cnt[inv].reshape(r, k)


def _vote(codes: np.ndarray, n_classes: int) -> tuple[np.ndarray, np.ndarray]:
    """Winning class code and its votes: first position whose class has the most votes."""
    v = _position_votes(codes, n_classes)
    pos = np.argmax(v, axis=1)  # argmax returns the first position of the maximum
    rows = np.arange(codes.shape[0])
    return codes[rows, pos], v[rows, pos]


# ------------------------------------------------------------------ estimators, results


@dataclass(frozen=True)
class Prediction:
    """Neighbours of new rows, in order, with their exact distances and the prediction."""

    neighbours: np.ndarray
    distances: np.ndarray
    value: np.ndarray


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

    def share(self, cls: str | float) -> np.ndarray:
        """Share of each row's k neighbours that are in class cls."""
        return np.mean(self.codes == _class_index(self.classes, cls), axis=1)


def _class_index(classes: list[Any], cls: str | float) -> int:
    for i, c in enumerate(classes):
        if type(c) is type(cls) and c == cls:
            return i
        number = isinstance(cls, numbers.Real) and not isinstance(cls, bool)
        if isinstance(c, float) and number and c == float(cls):
            return i
    listed = ", ".join(_label_text(c) for c in classes)
    raise DataError(f"class {_label_text(cls)} is not one of the classes ({listed})")


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
        self.X_ = _readonly(X)
        self.names_ = list(names)
        self.scaling_ = scaling
        self.Z_ = _readonly(Z)
        self._tree = tree
        self.k_ = k
        self.k_given_ = k_given
        self._order_J = order_J
        self._order_D = order_D
        self.k_table_ = k_table

    @cached_property
    def n_(self) -> int:
        """Number of training rows."""
        return int(self.X_.shape[0])

    @cached_property
    def neighbours_(self) -> np.ndarray:
        """Each training row's k_ neighbours (row indices, nearest first, itself excluded)."""
        return _readonly(self._order_J[:, : self.k_].copy())

    @cached_property
    def distances_(self) -> np.ndarray:
        """Exact distances in standard units to the neighbours in neighbours_."""
        return _readonly(self._order_D[:, : self.k_].copy())

    def _neighbours_of(self, X_new: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        Q = self.scaling_.transform(_as_table(X_new, len(self.names_), "new row"))
        return _search(self._tree, self.Z_, Q, self.k_, None)


def _fit_search(
    X: np.ndarray, names: Sequence[str] | None, k: int | None, on: bool
) -> tuple[np.ndarray, list[str], Scaling, np.ndarray, cKDTree, int, np.ndarray, np.ndarray]:
    """Checks shared by both models, standard units, and each row's ordered neighbours."""
    X = _as_table(X, None)
    n, m = X.shape
    names_ = _names(names, m)
    kk = _check_settings(k, on, n)
    scaling = standard_units(X, bool(on), names_)
    Z = scaling.transform(X)
    tree = cKDTree(Z)
    table_max = min(TABLE_MAX_K, n - 1)
    depth = max(kk or 0, table_max)
    J, D = _search(tree, Z, Z, depth, np.arange(n))
    return X, names_, scaling, Z, tree, table_max, J, D


class NeighbourMean:
    """k nearest neighbours regression: the average response of the k most similar rows."""

    def __init__(self, k: int | None = None, standard_units: bool = True) -> None:
        self.k = k
        self.standard_units = standard_units

    def fit(
        self, X: np.ndarray, y: np.ndarray, names: Sequence[str] | None = None
    ) -> NeighbourMeanResult:
        """Find each row's neighbours, the leave-one-out k table and the fitted means."""
        y = np.array(y, dtype=np.float64)
        n_x = np.asarray(X).shape[0] if np.ndim(X) else 0
        if y.ndim != 1 or y.shape[0] != n_x:
            raise DataError(
                f"the response must be one column with a value for each of the {n_x} rows, "
                f"given shape {y.shape}"
            )
        bad = np.flatnonzero(~np.isfinite(y))
        if bad.size:
            raise DataError(f"row {bad[0] + 1}: the response is not a finite number ({y[bad[0]]})")
        X, names_, scaling, Z, tree, table_max, J, D = _fit_search(
            X, names, self.k, self.standard_units
        )
        n = X.shape[0]
        Y = y[J]
        ks = list(range(1, table_max + 1))
        sums = _prefix_fsums(Y, ks + ([int(self.k)] if self.k is not None else []))
        table = []
        for k in ks:
            res = y - sums[k] / k
            table.append((k, math.sqrt(math.fsum((res * res).tolist()) / n)))
        k_ = int(self.k) if self.k is not None else _best_k(table)
        return NeighbourMeanResult(
            X=X, names=names_, scaling=scaling, Z=Z, tree=tree, k=k_,
            k_given=self.k is not None, order_J=J, order_D=D, k_table=table,
            y=y, fitted=sums[k_] / k_,
        )  # fmt: skip


def _best_k(table: list[tuple[int, float]]) -> int:
    """The k with the smallest error; among equal errors the smallest k."""
    return min(table, key=lambda t: (t[1], t[0]))[0]


class NeighbourMeanResult(_Base):
    """A fitted neighbour-mean model: leave-one-out fitted values and the k table."""

    def __init__(self, *, y: np.ndarray, fitted: np.ndarray, **kw: Any) -> None:
        super().__init__(**kw)
        self.y_ = _readonly(y)
        self.fitted_ = _readonly(fitted)

    def __repr__(self) -> str:
        return f"NeighbourMeanResult(n={self.n_}, k={self.k_}, rmse={self.rmse_:.6g})"

    @cached_property
    def resid_(self) -> np.ndarray:
        """Leave-one-out residuals y − fitted_."""
        return _readonly(self.y_ - self.fitted_)

    @cached_property
    def rmse_(self) -> float:
        """Leave-one-out root mean squared residual, sqrt(fsum(resid²) / n)."""
        return math.sqrt(math.fsum((self.resid_ * self.resid_).tolist()) / self.n_)

    @cached_property
    def nb_y_(self) -> np.ndarray:
        """The responses of each row's k_ neighbours, in neighbour order."""
        return _readonly(self.y_[self.neighbours_])

    @cached_property
    def nb_min_(self) -> np.ndarray:
        """Smallest response among each row's neighbours."""
        return _readonly(self.nb_y_.min(axis=1))

    @cached_property
    def nb_median_(self) -> np.ndarray:
        """Median response among each row's neighbours (mean of the middle two for even k)."""
        return _readonly(np.median(self.nb_y_, axis=1))

    @cached_property
    def nb_max_(self) -> np.ndarray:
        """Largest response among each row's neighbours."""
        return _readonly(self.nb_y_.max(axis=1))

    def predict(self, X_new: np.ndarray) -> MeanPrediction:
        """Mean response of the k_ nearest training rows to each new row; never refits."""
        J, D = self._neighbours_of(X_new)
        Y = self.y_[J]
        value = _fsum_rows(Y) / self.k_
        return MeanPrediction(
            J, D, value, Y.min(axis=1), np.median(Y, axis=1), Y.max(axis=1)
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
        codes, classes = _parse_labels(labels)
        n_x = np.asarray(X).shape[0] if np.ndim(X) else 0
        if codes.shape[0] != n_x:
            raise DataError(f"y has {codes.shape[0]} labels but the attributes have {n_x} rows")
        if len(classes) == 1:
            raise DataError(
                f"y holds only one class, {_label_text(classes[0])}; a vote needs two or more"
            )
        X, names_, scaling, Z, tree, table_max, J, D = _fit_search(
            X, names, self.k, self.standard_units
        )
        n = X.shape[0]
        C = codes[J]
        table = []
        # Votes per position, grown one neighbour at a time across the k table.
        v = np.zeros((n, table_max), dtype=np.int64)
        rows = np.arange(n)
        for k in range(1, table_max + 1):
            new = C[:, k - 1 : k]
            v[:, : k - 1] += C[:, : k - 1] == new
            v[:, k - 1] = np.sum(C[:, :k] == new, axis=1)
            pos = np.argmax(v[:, :k], axis=1)
            table.append((k, math.fsum((C[rows, pos] != codes).tolist()) / n))
        k_ = int(self.k) if self.k is not None else _best_k(table)
        pred, votes = _vote(C[:, :k_], len(classes))
        return NeighbourVoteResult(
            X=X, names=names_, scaling=scaling, Z=Z, tree=tree, k=k_,
            k_given=self.k is not None, order_J=J, order_D=D, k_table=table,
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
        self.classes_ = _readonly(np.array(classes, dtype=object))
        self.y_code_ = _readonly(codes)
        self.fitted_code_ = _readonly(pred)
        self.votes_ = _readonly(votes)

    def __repr__(self) -> str:
        return f"NeighbourVoteResult(n={self.n_}, k={self.k_}, error_rate={self.error_rate_:.6g})"

    @cached_property
    def y_(self) -> np.ndarray:
        """The training labels (numbers as floats), as an object array."""
        return _readonly(self.classes_[self.y_code_])

    @cached_property
    def fitted_(self) -> np.ndarray:
        """Leave-one-out predicted class of each training row (object array of labels)."""
        return _readonly(self.classes_[self.fitted_code_])

    @cached_property
    def score_(self) -> np.ndarray:
        """Share of the k_ neighbours in the predicted class, votes / k."""
        return _readonly(self.votes_ / self.k_)

    @cached_property
    def correct_(self) -> np.ndarray:
        """Whether each row's leave-one-out class is its actual class."""
        return _readonly(self.fitted_code_ == self.y_code_)

    @cached_property
    def error_rate_(self) -> float:
        """Share of rows whose leave-one-out class is wrong."""
        return math.fsum((~self.correct_).tolist()) / self.n_

    @cached_property
    def confusion_(self) -> np.ndarray:
        """Counts by actual class (rows) and predicted class (columns), in classes_ order."""
        C = len(self.classes_)
        flat = np.bincount(self.y_code_ * C + self.fitted_code_, minlength=C * C)
        return _readonly(flat.reshape(C, C))

    @cached_property
    def precision_(self) -> np.ndarray:
        """Per class: of the rows predicted in it, the share actually in it (nan if none)."""
        return _readonly(_ratio(np.diag(self.confusion_), self.confusion_.sum(axis=0)))

    @cached_property
    def recall_(self) -> np.ndarray:
        """Per class: of the rows actually in it, the share predicted in it (nan if none)."""
        return _readonly(_ratio(np.diag(self.confusion_), self.confusion_.sum(axis=1)))

    @cached_property
    def base_rate_(self) -> np.ndarray:
        """Share of each class among the training rows."""
        return _readonly(np.bincount(self.y_code_, minlength=len(self.classes_)) / self.n_)

    def share(self, cls: str | float) -> np.ndarray:
        """Share of each training row's k_ neighbours that are in class cls."""
        c = _class_index(list(self.classes_), cls)
        return np.mean(self.y_code_[self.neighbours_] == c, axis=1)

    def predict(self, X_new: np.ndarray) -> VotePrediction:
        """Class voted by the k_ nearest training rows to each new row; never refits."""
        J, D = self._neighbours_of(X_new)
        codes = self.y_code_[J]
        pred, votes = _vote(codes, len(self.classes_))
        return VotePrediction(
            J, D, self.classes_[pred], votes, votes / self.k_, list(self.classes_), codes
        )


def _ratio(num: np.ndarray, den: np.ndarray) -> np.ndarray:
    out = np.full(num.shape, math.nan)
    ok = den > 0
    out[ok] = num[ok] / den[ok]
    return out
