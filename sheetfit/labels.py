"""Class labels as the spreadsheet treats them: how they read as text, when two are equal."""

from __future__ import annotations

__all__ = ["label_text", "labels_equal"]


def label_text(label: object) -> str:
    """A class label as a spreadsheet shows it when joined into text (37 -> '37')."""
    if isinstance(label, float):
        return str(int(label)) if label.is_integer() and abs(label) < 1e15 else repr(label)
    return str(label)


def labels_equal(a: object, b: object) -> bool:
    """What EXACT(a, b) says of two class labels: text case-sensitively, numbers by value."""
    if isinstance(a, float) and isinstance(b, float):
        return a == b
    return label_text(a) == label_text(b)
