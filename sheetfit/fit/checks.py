"""Checks on the numbers and settings a model is fitted from: each refusal is raised here, once.

Every estimator of the numeric core calls these, so a refusal reads the same whether
it comes from a workbook refresh or from a direct call. Messages name attributes by
their names and rows by their 1-based position in the arrays; a refusal about one
attribute column carries ``column`` (0-based) so that the workbook layer can name the
cells. Nothing here knows about workbooks.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence
from typing import Any

import numpy as np

from sheetfit.errors import ConditioningCaution, DataError, ExtrapolationCaution, SettingError
from sheetfit.words import clip

__all__ = [
    "CONDITION_CAUTION",
    "DEGREE_RANGE",
    "K_LIMIT",
    "as_table",
    "check_degree",
    "check_flag",
    "check_k",
    "check_level",
    "check_positive",
    "enough_rows",
    "enough_rows_for_terms",
    "labels_table",
    "new_rows",
    "not_constant",
    "one_attribute",
    "response",
    "warn_conditioning",
    "warn_outside",
]

#: Allowed polynomial degrees (inclusive).
DEGREE_RANGE = (1, 10)
#: Largest k a setting may ask for (the fit further needs k < rows).
K_LIMIT = 10_000
#: Condition number of the unit-scaled design above which the attributes are cautioned as
#: strongly collinear. Belsley, Kuh and Welsch, *Regression Diagnostics* (1980) read
#: condition indices of this design above 30 as moderate and above 100 as strong
#: dependencies (stated from memory).
CONDITION_CAUTION = 100.0


def _names(names: Sequence[str] | None, m: int) -> list[str]:
    out = [f"x{j + 1}" for j in range(m)] if names is None else [str(s) for s in names]
    if len(out) != m:
        raise DataError(f"{len(out)} attribute names given for {m} attribute columns")
    if len({s.casefold() for s in out}) != m:
        raise DataError(f"attribute names repeat: {', '.join(map(clip, out))}")
    return out


def _finite(X: np.ndarray, names: list[str], what: str) -> None:
    bad = np.argwhere(~np.isfinite(X))
    if bad.size:
        i, j = bad[0]
        raise DataError(f"{what} {i + 1}: attribute {clip(names[j])} is not a finite number ({X[i, j]})",
                        column=int(j))


def as_table(X: Any, names: Sequence[str] | None = None) -> tuple[np.ndarray, list[str]]:
    """The attributes as a finite float64 table (rows × attributes) and their names.

    A vector is one attribute. Unnamed attributes are called x1, x2, …
    """
    X = np.asarray(X, dtype=np.float64)  # read, never written: no copy of a float table
    if X.ndim == 1:
        X = X.reshape(-1, 1)
    if X.ndim != 2 or X.shape[1] == 0:
        raise DataError(f"the attributes must be a table with at least one column, given shape "
                        f"{X.shape}")
    out = _names(names, X.shape[1])
    _finite(X, out, "row")
    return X, out


def new_rows(X_new: Any, names: Sequence[str]) -> np.ndarray:
    """Rows to predict: finite, with the fitted model's attribute columns."""
    m = len(names)
    X = np.array(X_new, dtype=np.float64)
    if X.ndim == 1:
        X = X.reshape(-1, 1) if m == 1 else X.reshape(1, -1)
    if X.ndim != 2 or X.shape[1] != m:
        raise DataError(f"new rows need {m} attribute columns ({', '.join(map(clip, names))}), "
                        f"given shape {X.shape}")
    _finite(X, list(names), "new row")
    return X


def response(y: Any, n: int, what: str = "the attributes have") -> np.ndarray:
    """The response as finite float64 numbers, one for each of the n rows."""
    y = np.array(y, dtype=np.float64)
    if y.ndim == 2 and y.shape[1] == 1:
        y = y[:, 0]
    if y.ndim != 1:
        raise DataError(f"the response must be one column of numbers, given shape {y.shape}")
    if y.shape[0] != n:
        raise DataError(f"the response has {y.shape[0]} rows but {what} {n}; they must cover "
                        "the same rows")
    bad = np.flatnonzero(~np.isfinite(y))
    if bad.size:
        raise DataError(f"row {bad[0] + 1}: the response is not a finite number ({y[bad[0]]})")
    return y


def labels_table(labels: Any, n: int) -> list[Any]:
    """Class labels as a list, one for each of the n rows."""
    vals = labels.tolist() if isinstance(labels, np.ndarray) else list(labels)
    if len(vals) != n:
        raise DataError(f"y has {len(vals)} labels but the attributes have {n} rows")
    return vals


def one_attribute(X: np.ndarray, names: list[str], why: str) -> None:
    """Refuse more than one attribute column."""
    if X.shape[1] != 1:
        raise DataError(f"{why} needs exactly one attribute, given {X.shape[1]} "
                        f"({', '.join(map(clip, names))})",
                        hint="declare one attribute column for this model")


def enough_rows(n: int, need: int, what: str) -> None:
    """Refuse fewer than ``need`` rows."""
    if n < need:
        raise DataError(f"{n} usable row{'' if n == 1 else 's'}; {what} needs at least {need}",
                        hint="add rows")


def enough_rows_for_terms(n: int, terms: list[str]) -> None:
    """Refuse fewer rows than parameters."""
    p = len(terms)
    if n < p:
        raise DataError(
            f"{n} usable rows but the model has {p} parameters ({', '.join(terms)})",
            hint="add rows or reduce the attributes or degree",
        )


def not_constant(X: np.ndarray, names: list[str], so: str, hint: str) -> None:
    """Refuse an attribute with the same value in every row (``so`` says why it matters)."""
    if X.shape[0] == 0:
        return
    same = np.all(X == X[0], axis=0)
    if same.any():
        j = int(np.flatnonzero(same)[0])
        raise DataError(
            f"attribute '{clip(names[j])}' has the same value ({X[0, j]:g}) in every used row, so {so}",
            hint=hint, column=j,
        )


def warn_outside(lo: np.ndarray, hi: np.ndarray, X: np.ndarray) -> None:
    """Caution (ExtrapolationCaution) when rows to predict leave the fitted range [lo, hi]."""
    outside = np.flatnonzero(((X < lo) | (X > hi)).any(axis=1))
    if outside.size:
        n = int(outside.size)
        warnings.warn(ExtrapolationCaution(
            f"{n} new row{'' if n == 1 else 's'} outside the fitted range of the attributes: "
            "extrapolated, read with care", outside.tolist()), stacklevel=3)


def warn_conditioning(condition_number: float, polynomial: bool = False) -> None:
    """Caution (ConditioningCaution) when the attributes (or powers) are strongly collinear."""
    if condition_number > CONDITION_CAUTION:
        what = "the powers of x are" if polynomial else "the attributes are"
        warnings.warn(ConditioningCaution(
            f"{what} strongly collinear (condition number {condition_number:.3g} of the "
            f"design with unit-length columns, above {CONDITION_CAUTION:g}): each "
            "coefficient moves a lot with small changes in the data; read them together, "
            "not one by one" + ("; centring x (x minus its mean) before taking powers "
                                "lowers it" if polynomial else "")), stacklevel=3)


def check_flag(name: str, value: Any) -> bool:
    """A yes/no setting given to the numeric core as a Python value."""
    if not isinstance(value, bool | np.bool_):
        raise SettingError(f"setting {name}: allowed true or false, given {value!r}")
    return bool(value)


def check_degree(degree: Any) -> int:
    """The polynomial degree, a whole number within DEGREE_RANGE."""
    lo, hi = DEGREE_RANGE
    if isinstance(degree, bool) or not isinstance(degree, int | np.integer) \
            or not lo <= degree <= hi:
        raise SettingError(
            f"setting degree: allowed a whole number from {lo} to {hi}, given {degree!r}"
        )
    return int(degree)


def check_positive(name: str, value: Any) -> float:
    """A setting that must be a finite number greater than 0."""
    ok = isinstance(value, int | float | np.integer | np.floating) and not isinstance(value, bool)
    if not ok or not math.isfinite(float(value)) or float(value) <= 0:
        raise SettingError(f"setting {name}: allowed a positive number, given {value!r}")
    return float(value)


def check_k(k: Any, n: int) -> int | None:
    """The number of neighbours: None (choose it), or a whole number from 1 to n − 1."""
    if k is None:
        return None
    if isinstance(k, bool | np.bool_) or not isinstance(k, int | np.integer):
        raise SettingError(f"k must be a whole number, given {k!r}")
    if not 1 <= k < n:
        raise SettingError(
            f"k must be at least 1 and less than the number of rows ({n}), given {k}",
            hint="lower k or add rows",
        )
    return int(k)


def check_level(level: Any) -> float:
    """A confidence level: a number strictly between 0 and 1 (0.95 for 95 %)."""
    if isinstance(level, bool | np.bool_) or not isinstance(level, int | float | np.number):
        raise SettingError(f"the confidence level must be a number, given {level!r}")
    value = float(level)
    if not 0.5 <= value < 1:
        raise SettingError(
            f"the confidence level must be at least 0.5 and below 1, given {level!r}",
            hint="give it as a share, e.g. 0.95 for 95 %",
        )
    return value
