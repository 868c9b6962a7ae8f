"""Worksheet functions: array in, array out, the same numeric core as a refresh.

Each function takes cells the way an add-in host passes a range: a 2-D list (rows of
cells), blanks as ``None``, numbers as int or float, text as str. A single cell may be
passed as a plain value. The data (``y`` and ``x``) may start with a header row: when
every cell of the first row of y and x is text, that row names the columns (the rule a
refresh uses); without one the attributes are called x1, x2, ... Rows to predict
(``new_x``, ``centres``, ``rows``) follow the same rule on their own.

A data row with a blank, text (or a boolean, or a number that is not finite) in y or in
any x column is left out of the fit, as a refresh leaves it out, and so is a row that
looks like a total of the rows above it (``fit/totals.py``); row numbers in the
output (neighbours) count the data rows as given, header excluded, from 1. A row to
predict with such a cell gets a blank output row, so the output stays aligned with the
input. A neighbour vote reads y as class labels (numbers or text, blanks left out).

Every function returns a 2-D list whose first row is a header. It never raises into the
host: a refusal comes back as ``[[code, message]]``, the message being sheetfit's own
one-line refusal (``SheetfitError`` text), with the code a spreadsheet uses:

* ``#VALUE!`` wrong kinds or shapes: not a 2-D list, rows of different lengths, a cell
  that is no number, text or blank, y with more than one column, y and x of different
  lengths, an attribute column with text but no number, new rows with the wrong number of
  columns, an unknown method, a setting of the wrong kind (k not whole or below 1,
  degree outside 1-10, width not positive, a yes/no that is neither), repeated
  attribute names, a vote whose y mixes numbers and text; anything unexpected (an
  internal fault) too, its message starting "sheetfit fault";
* ``#N/A`` something missing: no data rows, no row complete in y and x, fewer usable
  rows than the model needs (least squares: its parameters; neighbours and strips: 2),
  only one class in a vote, a class asked for that is not in y;
* ``#NUM!`` the numbers cannot give an answer: collinear attributes (``CollinearError``),
  an attribute with the same value in every used row (with an intercept, or in
  standard units), k not less than the number of usable rows.

Numbers that do not exist (a standard error with as many rows as parameters, the mean
of an empty strip) are blank cells (``None``). Numerical cautions (collinearity,
extrapolation) are not part of the output.
"""

from __future__ import annotations

import functools
import math
import numbers
import warnings
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any

import numpy as np

from .errors import CollinearError, DataError, SettingError, SheetfitCaution, SheetfitError
from .fit import checks
from .fit.leastsq import LeastSquares, LeastSquaresResult
from .fit.neighbours import NeighbourMean, NeighbourVote, NeighbourVoteResult
from .fit.scaling import standard_units
from .fit.strip import StripMean
from .fit.totals import find_totals
from .fit.totals import reason as totals_reason
from .words import clip

__all__ = [
    "NA",
    "NUM",
    "VALUE",
    "fit_coefficients",
    "fit_predict",
    "fit_rmse",
    "loo_error",
    "neighbour_mean",
    "neighbour_vote",
    "standard_units_of",
    "strip_means",
]

VALUE, NA, NUM = "#VALUE!", "#N/A", "#NUM!"
Grid = list[list[Any]]
_METHODS = ("least_squares", "strip_mean", "neighbour_mean", "neighbour_vote")


class _Refusal(Exception):
    """A refusal on its way to the host: the error code and the one-line message."""

    def __init__(self, code: str, message: str) -> None:
        super().__init__(message)
        self.code = code
        self.message = message


def _host(fn: Callable[..., Grid]) -> Callable[..., Grid]:
    """Turn every refusal (and any fault) into the error value a host shows."""

    @functools.wraps(fn)
    def call(*args: Any, **kwargs: Any) -> Grid:
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", SheetfitCaution)
                return fn(*args, **kwargs)
        except _Refusal as r:
            return [[r.code, r.message]]
        except SheetfitError as exc:
            return [[VALUE, str(exc)]]
        except Exception as exc:  # noqa: BLE001 — a host must never see an exception
            return [[VALUE, f"sheetfit fault: {type(exc).__name__}: {clip(exc, 200)}"]]

    return call


# ---------------------------------------------------------------- cells in

def _is_number(v: Any) -> bool:
    return (isinstance(v, numbers.Real) and not isinstance(v, bool | np.bool_)
            and math.isfinite(float(v)))


def _describe(v: Any) -> str:
    if v is None:
        return "blank"
    if isinstance(v, str):
        return "blank text" if not v.strip() else f"text '{clip(v, 20)}'"
    if isinstance(v, bool | np.bool_):
        return f"{'TRUE' if v else 'FALSE'} (not a number)"
    return f"{v!r} (not a finite number)"


def _grid(cells: Any, what: str) -> Grid:
    """The cells as a rectangular list of rows; a single value is one cell."""
    if cells is None:
        raise _Refusal(NA, f"{what} is missing")
    if not isinstance(cells, list | tuple):
        cells = [[cells]]
    rows = [list(r) for r in cells if isinstance(r, list | tuple)]
    if len(rows) != len(cells):
        raise _Refusal(VALUE, f"{what} must be rows of cells (a list of lists)")
    if not rows:
        raise _Refusal(NA, f"{what} holds no rows")
    width = len(rows[0])
    if width == 0 or any(len(r) != width for r in rows):
        raise _Refusal(VALUE, f"{what}: every row must have the same number of cells (at least 1)")
    for i, r in enumerate(rows):
        for v in r:
            if v is not None and not isinstance(v, str | numbers.Real):
                raise _Refusal(VALUE, f"{what} row {i + 1}: a cell must be a number, text or "
                                      f"blank, given {type(v).__name__}")
    return rows


def _header(*grids: Grid) -> bool:
    """A first row of text only names the columns (the refresh's rule)."""
    return all(isinstance(v, str) for g in grids for v in g[0])


@dataclass
class _Data:
    """The data rows a fit uses, with where they came from."""

    names: list[str]
    X: np.ndarray
    Y: Any
    used: np.ndarray
    n_rows: int
    left_out: list[str]

    @property
    def n(self) -> int:
        return int(self.used.size)


def _names(header: list[Any] | None, m: int) -> list[str]:
    return [str(v).strip() for v in header] if header is not None \
        else [f"x{j + 1}" for j in range(m)]


def _data(y: Any, x: Any, labels: bool = False) -> _Data:
    """The rows complete in y and x (others left out), as the refresh reads a model."""
    yg, xg = _grid(y, "y"), _grid(x, "x")
    if len(yg[0]) != 1:
        raise _Refusal(VALUE, f"y must be one column, given {len(yg[0])}")
    head = None
    if _header(yg, xg):
        head, yg, xg = xg[0], yg[1:], xg[1:]
    if len(yg) != len(xg):
        raise _Refusal(VALUE, f"y has {len(yg)} data rows but x has {len(xg)}; they must "
                              "cover the same rows")
    if not xg:
        raise _Refusal(NA, "the ranges hold no data rows (only a header)")
    n, m = len(xg), len(xg[0])
    names = _names(head, m)
    for j in range(m):  # text but no number: a wrong kind; only blanks: rows missing
        if not any(_is_number(r[j]) for r in xg) and any(r[j] is not None for r in xg):
            raise _Refusal(VALUE, f"attribute '{clip(names[j])}' holds no numbers; distances "
                                  "and fits need numeric attributes")
    used: list[int] = []
    left: list[str] = []
    for i in range(n):
        yv = yg[i][0]
        ok_y = _is_number(yv) or (labels and isinstance(yv, str) and bool(yv.strip()))
        bad = None if ok_y else ("y", yv)
        if bad is None:
            bad = next(((f"'{clip(names[j])}'", v) for j, v in enumerate(xg[i])
                        if not _is_number(v)), None)
        if bad is None:
            used.append(i)
        else:
            left.append(f"data row {i + 1}: {_describe(bad[1])} in {bad[0]}")
    if not used:
        raise _Refusal(NA, f"no rows with numbers in both y and x ({n} rows, all left out; "
                           f"{left[0]})")
    X = np.array([[float(v) for v in xg[i]] for i in used], dtype=np.float64).reshape(-1, m)
    ys = [yg[i][0] for i in used]
    if labels:
        Y: Any = np.empty(len(ys), dtype=object)
        Y[:] = [v if isinstance(v, str) else float(v) for v in ys]
    else:
        Y = np.array([float(v) for v in ys], dtype=np.float64)
    return _without_totals(_Data(names, X, Y, np.array(used, dtype=np.int64), n, left), labels)


def _without_totals(d: _Data, labels: bool) -> _Data:
    """Rows that look like totals of the rows above them left out, as a refresh does."""
    Z = d.X if labels else np.column_stack([d.Y, d.X])
    found = find_totals(Z) if Z.shape[1] >= 2 else []
    if not found:
        return d
    what = "every attribute equals its sum" if labels else "y and every attribute equal their sums"
    keep = np.ones(d.n, dtype=bool)
    left = list(d.left_out)
    for t in found:
        keep[t.row] = False
        row = int(d.used[t.row]) + 1
        left.append(f"data row {row}: " + totals_reason(int(d.used[t.first]) + 1,
                                                         int(d.used[t.last]) + 1, t, what))
    return _Data(d.names, d.X[keep], d.Y[keep], d.used[keep], d.n_rows, left)


def _rows(cells: Any, m: int, what: str) -> tuple[np.ndarray, np.ndarray]:
    """Rows to predict: the complete ones as a table, and which rows they are."""
    g = _grid(cells, what)
    if _header(g):
        g = g[1:]
    if not g:
        raise _Refusal(NA, f"{what} holds no rows (only a header)")
    if len(g[0]) != m:
        raise _Refusal(VALUE, f"{what} have {len(g[0])} columns but x has {m}")
    ok = np.array([all(_is_number(v) for v in r) for r in g], dtype=bool)
    X = np.array([[float(v) for v in r] for r, good in zip(g, ok) if good],
                 dtype=np.float64).reshape(-1, m)
    return X, ok


# ---------------------------------------------------------------- settings

def _flag(name: str, v: Any) -> Any:
    """A yes/no setting as a host may pass it: TRUE/FALSE, 1/0, or the words."""
    if isinstance(v, bool | np.bool_):
        return bool(v)
    if _is_number(v) and float(v) in (0.0, 1.0):
        return bool(v)
    if isinstance(v, str) and v.strip().lower() in ("yes", "true", "no", "false"):
        return v.strip().lower() in ("yes", "true")
    return v  # the core refuses it in its own words


def _whole(v: Any) -> Any:
    """A whole number passed as a float (as hosts pass numbers) becomes an int."""
    if isinstance(v, float | np.floating) and math.isfinite(float(v)) and float(v).is_integer():
        return int(v)
    return v


def _k(v: Any) -> Any:
    if v is None or (isinstance(v, str) and v.strip().lower() in ("", "auto")):
        return None
    return _whole(v)


def _method(v: Any) -> str:
    word = v.strip().lower().replace(" ", "_") if isinstance(v, str) else v
    if word not in _METHODS:
        raise _Refusal(VALUE, f"method: allowed {', '.join(_METHODS)}, given {clip(v)!r}")
    return str(word)


@contextmanager
def _core(d: _Data | None, need: int = 0, k: Any = None) -> Iterator[None]:
    """Map a refusal of the numeric core to the host's error code."""
    try:
        yield
    except CollinearError as exc:
        raise _Refusal(NUM, str(exc)) from None
    except SettingError as exc:
        large = (d is not None and isinstance(k, int) and not isinstance(k, bool)
                 and k >= d.n >= 1)
        raise _Refusal(NUM if large else VALUE, str(exc)) from None
    except DataError as exc:
        code = VALUE
        if d is not None:
            col = exc.column
            if d.n < need or _one_class(d):
                code = NA
            elif col is not None and 0 <= col < d.X.shape[1] and bool(np.all(d.X[:, col]
                                                                             == d.X[0, col])):
                code = NUM
        raise _Refusal(code, str(exc)) from None


def _one_class(d: _Data) -> bool:
    return d.Y.dtype == object and len({v for v in d.Y.tolist()}) == 1


# ---------------------------------------------------------------- cells out

def _cell(v: Any) -> Any:
    """A value as a host cell: Python numbers and text, blank for a number that is not."""
    if isinstance(v, np.generic):
        v = v.item()
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v


def _spread(ok: np.ndarray, rows: list[list[Any]], width: int) -> Grid:
    """One output row per input row: the computed rows where ok, blanks elsewhere."""
    it = iter(rows)
    return [[_cell(v) for v in next(it)] if good else [None] * width for good in ok.tolist()]


def _positions(d: _Data, J: np.ndarray) -> np.ndarray:
    """Neighbour indices among the used rows → 1-based data row numbers as given."""
    return d.used[J] + 1


# ---------------------------------------------------------------- least squares

def _least_squares(d: _Data, intercept: Any, degree: Any) -> LeastSquaresResult:
    flag, deg = _flag("intercept", intercept), _whole(degree)
    m = 1 if isinstance(deg, int) and deg > 1 else d.X.shape[1]
    need = int(flag is True) + (deg if isinstance(deg, int) and deg > 1 else m)
    with _core(d, need=need):
        return LeastSquares(intercept=flag, degree=deg).fit(d.X, d.Y, names=d.names)


@_host
def fit_coefficients(y: Any, x: Any, intercept: Any = True, degree: Any = 1) -> Grid:
    """Coefficients of the least-squares fit of y on x, with their standard errors.

    One row per term, in the order of the coefficient sheet (``intercept`` first when
    there is one, then the attributes, or x, x^2, ... for a polynomial):
    ``[["term", "coefficient", "standard error"], ["intercept", b0, se0], ...]``.
    Rows with a blank or text in y or x are left out. The standard error is blank when
    there are as many rows as terms.
    """
    res = _least_squares(_data(y, x), intercept, degree)
    return [["term", "coefficient", "standard error"]] + [
        [t, _cell(c), _cell(s)] for t, c, s in zip(res.terms_, res.coef_, res.coef_se_)
    ]


@_host
def fit_predict(y: Any, x: Any, new_x: Any, intercept: Any = True, degree: Any = 1) -> Grid:
    """Least-squares predictions for the rows of ``new_x`` (same columns as x).

    ``[["prediction"], [v1], ...]``, one row per row of new_x; a row of new_x with a blank
    or text gets a blank prediction. Data rows with a blank or text are left out of the fit.
    """
    d = _data(y, x)
    res = _least_squares(d, intercept, degree)
    X, ok = _rows(new_x, d.X.shape[1], "new rows")
    with _core(None):
        pred = res.predict(X) if X.shape[0] else np.empty(0)
    return [["prediction"]] + _spread(ok, [[v] for v in pred.tolist()], 1)


# ---------------------------------------------------------------- strip mean

@_host
def strip_means(y: Any, x: Any, width: Any, centres: Any = None) -> Grid:
    """Mean of y over the rows whose x lies within ± ``width`` of each centre.

    ``[["centre", "rows in strip", "strip mean"], ...]``: at the given ``centres`` (one
    column; a blank or text centre gives a blank row), or, without centres, at every
    centre of the grid a refresh writes on the curve sheet. An empty strip has a blank
    mean. x is one column; data rows with a blank or text are left out.
    """
    d = _data(y, x)
    with _core(d, need=2):
        res = StripMean(width=_whole(width)).fit(d.X, d.Y)
    if centres is None:
        rows = zip(res.centres_.tolist(), res.count_.tolist(), res.mean_.tolist())
        return [["centre", "rows in strip", "strip mean"]] + [
            [_cell(c), _cell(n), _cell(v)] for c, n, v in rows]
    C, ok = _rows(centres, 1, "centres")
    with _core(None):
        count, mean = res.means_at(C) if C.shape[0] else (np.empty(0), np.empty(0))
    out = [[c, n, v] for c, n, v in zip(C[:, 0].tolist(), count.tolist(), mean.tolist())]
    return [["centre", "rows in strip", "strip mean"]] + _spread(ok, out, 3)


# ---------------------------------------------------------------- neighbours

def _neighbour_table(d: _Data, J: np.ndarray, D: np.ndarray, show: bool) -> list[list[Any]]:
    if not show:
        return [[] for _ in range(J.shape[0])]
    pos = _positions(d, J)
    return [p + q for p, q in zip(pos.tolist(), D.tolist())]


def _neighbour_header(k: int, show: bool) -> list[str]:
    if not show:
        return []
    return [f"neighbour {j}" for j in range(1, k + 1)] + \
        [f"distance {j}" for j in range(1, k + 1)]


@_host
def neighbour_mean(y: Any, x: Any, new_x: Any = None, k: Any = None,
                   standard_units: Any = True, neighbours: Any = False) -> Grid:
    """Mean y of the k nearest data rows to each row of ``new_x``.

    Without ``new_x``, each data row's leave-one-out mean (the fitted values a refresh
    writes; blank for a left-out row). ``k`` blank or "auto" is chosen by leave-one-out
    error (``loo_error`` shows the table). With ``neighbours`` true, each row also lists
    its k neighbours' data row numbers (1-based, as given, header excluded) and their
    distances: ``[["neighbour mean", "neighbour 1", ..., "distance 1", ...], ...]``.
    Data rows with a blank or text are left out.
    """
    d = _data(y, x)
    kk, show = _k(k), checks.check_flag("neighbours", _flag("neighbours", neighbours))
    with _core(d, need=2, k=kk):
        res = NeighbourMean(k=kk, standard_units=_flag("standard_units", standard_units)) \
            .fit(d.X, d.Y, names=d.names)
    head = [["neighbour mean"] + _neighbour_header(res.k_, show)]
    width = len(head[0])
    if new_x is None:
        extra = _neighbour_table(d, res.neighbours_, res.distances_, show)
        out = [[v] + e for v, e in zip(res.fitted_.tolist(), extra)]
        ok = np.zeros(d.n_rows, dtype=bool)
        ok[d.used] = True
        return head + _spread(ok, out, width)
    X, ok = _rows(new_x, d.X.shape[1], "new rows")
    if not X.shape[0]:
        return head + [[None] * width for _ in ok]
    with _core(None):
        p = res.predict(X)
    extra = _neighbour_table(d, p.neighbours, p.distances, show)
    return head + _spread(ok, [[v] + e for v, e in zip(p.value.tolist(), extra)], width)


@_host
def neighbour_vote(y: Any, x: Any, new_x: Any = None, k: Any = None,
                   standard_units: Any = True, neighbours: Any = False,
                   share_of: Any = None) -> Grid:
    """Class most common among the k nearest data rows to each row of ``new_x``.

    y holds class labels (numbers or text). Columns: ``class``, ``votes`` (how many of the
    k are in it), ``share <class>`` when ``share_of`` names a class (#N/A if no row of y
    is in it), then the neighbours and distances when ``neighbours`` is true. Without
    ``new_x``, each data row's leave-one-out vote (blank for a left-out row). Ties between
    classes go to the class of the nearest neighbour, as in a refresh.
    """
    d = _data(y, x, labels=True)
    kk, show = _k(k), checks.check_flag("neighbours", _flag("neighbours", neighbours))
    with _core(d, need=2, k=kk):
        res: NeighbourVoteResult = NeighbourVote(
            k=kk, standard_units=_flag("standard_units", standard_units)
        ).fit(d.X, d.Y, names=d.names)
    cls = None if share_of is None else (_whole(share_of) if not isinstance(share_of, str)
                                         else share_of)
    head = ["class", "votes"] + ([] if cls is None else [f"share {cls}"])
    head += _neighbour_header(res.k_, show)
    if new_x is None:
        value, votes, J, D = res.fitted_, res.votes_, res.neighbours_, res.distances_
        with _core(None):
            share = None if cls is None else _refuse_unknown(lambda: res.share(cls))
        ok = np.zeros(d.n_rows, dtype=bool)
        ok[d.used] = True
    else:
        X, ok = _rows(new_x, d.X.shape[1], "new rows")
        if not X.shape[0]:
            if cls is not None:
                _refuse_unknown(lambda: res.share(cls))
            return [head] + [[None] * len(head) for _ in ok]
        with _core(None):
            p = res.predict(X)
        value, votes, J, D = p.value, p.votes, p.neighbours, p.distances
        share = None if cls is None else _refuse_unknown(lambda: p.share(cls))
    extra = _neighbour_table(d, J, D, show)
    out = []
    for i, (v, n, e) in enumerate(zip(value.tolist(), votes.tolist(), extra)):
        out.append([v, n] + ([] if share is None else [float(share[i])]) + e)
    return [head] + _spread(ok, out, len(head))


def _refuse_unknown(fn: Callable[[], np.ndarray]) -> np.ndarray:
    try:
        return fn()
    except DataError as exc:
        raise _Refusal(NA, str(exc)) from None


# ---------------------------------------------------------------- errors

@_host
def fit_rmse(y: Any, x: Any, method: Any = "least_squares", intercept: Any = True,
             degree: Any = 1, k: Any = None, standard_units: Any = True,
             width: Any = None) -> Grid:
    """Root mean squared error of a fit: ``[["RMSE", "kind", "rows"], [v, kind, n]]``.

    Least squares: in sample (residuals of the fit itself), over the rows used. Neighbour
    mean and strip mean: leave-one-out (each row predicted without itself), over the rows
    with a fitted value. A neighbour vote has no RMSE (see ``loo_error``). Data rows with
    a blank or text are left out.
    """
    word = _method(method)
    if word == "neighbour_vote":
        raise _Refusal(VALUE, "a neighbour vote has no RMSE; loo_error gives its error rate")
    d = _data(y, x)
    if word == "least_squares":
        ls = _least_squares(d, intercept, degree)
        return [["RMSE", "kind", "rows"], [_cell(ls.rmse_), "in-sample", ls.n_]]
    if word == "neighbour_mean":
        kk = _k(k)
        with _core(d, need=2, k=kk):
            nm = NeighbourMean(k=kk, standard_units=_flag("standard_units", standard_units)) \
                .fit(d.X, d.Y, names=d.names)
        return [["RMSE", "kind", "rows"], [_cell(nm.rmse_), "leave-one-out", nm.n_]]
    with _core(d, need=2):
        sm = StripMean(width=_whole(width)).fit(d.X, d.Y)
    return [["RMSE", "kind", "rows"], [_cell(sm.rmse_), "leave-one-out", sm.n_fitted_]]


@_host
def loo_error(y: Any, x: Any, method: Any = "neighbour_mean", k: Any = None,
              standard_units: Any = True, width: Any = None) -> Grid:
    """Leave-one-out error: each data row predicted from the other rows.

    Neighbour mean (RMSE) and neighbour vote (error rate, the share of rows voted into
    a class not their own): the k table a refresh writes, k = 1 ... min(25, rows − 1),
    with ``chosen`` marking the k in use (``[["k", "leave-one-out RMSE", "chosen"], ...]``;
    a given k beyond the table is added as a last row). Strip mean:
    ``[["width", "leave-one-out RMSE", "rows"], [w, v, rows with a fitted value]]``.
    Least squares is refused (``fit_rmse`` gives its in-sample RMSE).
    """
    word = _method(method)
    if word == "least_squares":
        raise _Refusal(VALUE, "least squares has no leave-one-out error here; fit_rmse gives "
                              "its in-sample RMSE")
    if word == "strip_mean":
        d = _data(y, x)
        with _core(d, need=2):
            sm = StripMean(width=_whole(width)).fit(d.X, d.Y)
        return [["width", "leave-one-out RMSE", "rows"],
                [sm.width_, _cell(sm.rmse_), sm.n_fitted_]]
    vote = word == "neighbour_vote"
    d = _data(y, x, labels=vote)
    kk = _k(k)
    units = _flag("standard_units", standard_units)
    with _core(d, need=2, k=kk):
        res = (NeighbourVote if vote else NeighbourMean)(k=kk, standard_units=units) \
            .fit(d.X, d.Y, names=d.names)
    table = [(kt, e) for kt, e in res.k_table_]
    if res.k_ > len(table):
        table.append((res.k_, res.error_rate_ if isinstance(res, NeighbourVoteResult)
                      else res.rmse_))
    what = "leave-one-out error rate" if vote else "leave-one-out RMSE"
    return [["k", what, "chosen"]] + [
        [kt, _cell(e), "yes" if kt == res.k_ else None] for kt, e in table]


# ---------------------------------------------------------------- standard units

@_host
def standard_units_of(x: Any, rows: Any = None, y: Any = None) -> Grid:
    """Rows in standard units of the data: (value − mean) / SD, column by column.

    Mean and population SD over the rows of x complete in every attribute (and in y, when
    y is given: the rows a neighbour model of y on x uses). Without ``rows``, the data
    rows themselves (blank for a left-out row); with ``rows``, those rows (same columns
    as x; blank for a row with a blank or text). Header: the attribute names.
    """
    xg = _grid(x, "x")
    if y is None:
        y = [["y"]] + [[0.0]] * (len(xg) - 1) if _header(xg) else [[0.0]] * len(xg)
    d = _data(y, x)
    with _core(d, need=1):
        scaling = standard_units(d.X, True, d.names)
    head: list[Any] = [list(d.names)]
    m = d.X.shape[1]
    if rows is None:
        ok = np.zeros(d.n_rows, dtype=bool)
        ok[d.used] = True
        return head + _spread(ok, scaling.transform(d.X).tolist(), m)
    X, ok = _rows(rows, m, "rows")
    Z = scaling.transform(X) if X.shape[0] else np.empty((0, m))
    return head + _spread(ok, Z.tolist(), m)
