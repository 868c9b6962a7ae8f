"""Class labels for a vote: codes, the equality rule, and votes among each row's neighbours."""

from __future__ import annotations

import math
import numbers
from collections.abc import Sequence
from typing import Any

import numpy as np

from sheetfit.errors import DataError
from sheetfit.labels import labels_equal
from sheetfit.words import clip

__all__ = ["class_index", "label_repr", "parse_labels", "position_votes", "vote"]


def label_repr(v: Any) -> str:
    return f"'{clip(v)}'" if isinstance(v, str) else f"'{v:.15g}'"


def parse_labels(labels: Sequence[str | float] | np.ndarray) -> tuple[np.ndarray, list[Any]]:
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


def position_votes(codes: np.ndarray, n_classes: int) -> np.ndarray:
    """For each position of each row, how many positions of that row hold the same class."""
    r, k = codes.shape
    g = (codes + (np.arange(r, dtype=np.int64) * n_classes)[:, None]).ravel()
    _, inv, cnt = np.unique(g, return_inverse=True, return_counts=True)
    return cnt[inv].reshape(r, k)


def vote(codes: np.ndarray, n_classes: int) -> tuple[np.ndarray, np.ndarray]:
    """Winning class code and its votes: first position whose class has the most votes."""
    v = position_votes(codes, n_classes)
    pos = np.argmax(v, axis=1)  # argmax returns the first position of the maximum
    rows = np.arange(codes.shape[0])
    return codes[rows, pos], v[rows, pos]


def class_index(classes: Sequence[Any], cls: str | float) -> int:
    """Position of ``cls`` among the classes, equal as EXACT says (sheetfit.labels)."""
    for i, c in enumerate(classes):
        if labels_equal(c, cls):
            return i
    listed = ", ".join(label_repr(c) for c in classes)
    raise DataError(f"class {label_repr(cls)} is not one of the classes ({listed})")
