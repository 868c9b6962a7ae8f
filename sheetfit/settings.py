"""Model settings declared as data: name, allowed values, default, methods, one parser.

Every message about a bad setting has the same shape: which setting, what is
allowed, what was given.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

from .errors import Context, SettingError

__all__ = ["METHODS", "REQUIRED", "RULES", "Rule", "Settings", "parse_settings"]

#: Methods a model can use; the words are sheetfit's own.
METHODS = ("least_squares", "strip_mean", "neighbour_mean", "neighbour_vote")
_NEIGHBOUR = ("neighbour_mean", "neighbour_vote")

_TRUE = {"yes", "true", "1", "on"}
_FALSE = {"no", "false", "0", "off"}


def _yes_no(raw: Any) -> bool:
    word = str(raw).strip().lower()
    if isinstance(raw, float) and raw in (0.0, 1.0):
        word = str(int(raw))
    if word in _TRUE:
        return True
    if word in _FALSE:
        return False
    raise ValueError


def _integer(lo: int, hi: int) -> Callable[[Any], int]:
    def parse(raw: Any) -> int:
        value = float(raw)
        if value != int(value) or not lo <= value <= hi:
            raise ValueError
        return int(value)

    return parse


def _k(raw: Any) -> int | None:
    if isinstance(raw, str) and raw.strip().lower() == "auto":
        return None
    return _integer(1, 10_000)(raw)


def _positive(raw: Any) -> float:
    value = float(raw)
    if not (math.isfinite(value) and value > 0):
        raise ValueError
    return value


def _choice(options: tuple[str, ...]) -> Callable[[Any], str]:
    def parse(raw: Any) -> str:
        word = str(raw).strip().lower().replace(" ", "_").replace("-", "_")
        if word not in options:
            raise ValueError
        return word

    return parse


def _label(raw: Any) -> str | float:
    if isinstance(raw, float):
        return raw
    text = str(raw)
    if not text.strip():
        raise ValueError
    return text


@dataclass(frozen=True)
class Rule:
    """One setting: its name, allowed values (in words), default, methods, and parser."""

    name: str
    allowed: str
    default: Any
    parse: Callable[[Any], Any]
    meaning: str
    methods: tuple[str, ...] = METHODS


RULES: dict[str, Rule] = {
    r.name: r
    for r in (
        Rule("method", " or ".join(METHODS), "least_squares", _choice(METHODS),
             "how the model is fitted"),
        Rule("intercept", "yes or no", True, _yes_no,
             "whether the model has a constant term", ("least_squares",)),
        Rule("degree", "a whole number from 1 to 10", 1, _integer(1, 10),
             "polynomial degree in the one attribute (2 adds x^2, ...)", ("least_squares",)),
        Rule("k", "a whole number of at least 1, or auto", None, _k,
             "how many nearest neighbours; auto picks the k with the smallest "
             "leave-one-out error", _NEIGHBOUR),
        Rule("standard_units", "yes or no", True, _yes_no,
             "measure distances in standard units (z = (x - mean) / SD)", _NEIGHBOUR),
        Rule("focus", "one of the classes in y", None, _label,
             "the class a work list ranks new rows by (default: the rarest class)",
             ("neighbour_vote",)),
        Rule("width", "a number greater than 0", None, _positive,
             "half-width of each strip: rows with |x - centre| <= width", ("strip_mean",)),
    )
}

#: Settings a method cannot do without.
REQUIRED = {"strip_mean": ("width",)}


@dataclass(frozen=True)
class Settings:
    """The settings of one model, after parsing; unset ones take their defaults."""

    values: Mapping[str, Any]
    given: frozenset[str]

    def __getitem__(self, name: str) -> Any:
        return self.values[name]

    @property
    def method(self) -> str:
        return str(self.values["method"])


def parse_settings(pairs: list[tuple[str, Any, str]], context: Context) -> Settings:
    """Parse (setting, raw value, cell address) triples into Settings, refusing bad ones.

    ``context`` names the file, the ``opts`` defined name and the sheet; the cell of
    the offending pair is filled in.
    """
    values = {name: rule.default for name, rule in RULES.items()}
    given: dict[str, str] = {}
    for key, raw, cell in pairs:
        name = str(key).strip().lower().replace(" ", "_")
        where = Context(context.file, context.name, context.sheet, cell)
        rule = RULES.get(name)
        if rule is None:
            raise SettingError(
                f"unknown setting '{key}'",
                where,
                hint="known settings: " + ", ".join(RULES),
            )
        if name in given:
            raise SettingError(f"setting '{rule.name}' is given twice", where)
        try:
            values[name] = rule.parse(raw)
        except (ValueError, TypeError, OverflowError):
            raise SettingError(
                f"setting '{rule.name}' must be {rule.allowed}, not '{raw}'", where
            ) from None
        given[name] = cell
    method = values["method"]
    for name, cell in given.items():
        if method not in RULES[name].methods:
            raise SettingError(
                f"setting '{name}' does not apply to method {method}",
                Context(context.file, context.name, context.sheet, cell),
                hint=f"it applies to {' and '.join(RULES[name].methods)}",
            )
    for name in REQUIRED.get(method, ()):
        if name not in given:
            rule = RULES[name]
            raise SettingError(
                f"method {method} needs the setting '{name}' ({rule.meaning})",
                Context(context.file, context.name, context.sheet),
                hint=f"add a row '{name}' with {rule.allowed}",
            )
    return Settings(values, frozenset(given))
