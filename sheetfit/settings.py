"""Model settings declared as data: name, allowed values, default, one parser.

Each method's record (sheetfit.methods) lists the rules it accepts; this module knows
no method by name. Every message about a bad setting has the same shape: which
setting, what is allowed, what was given.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any, Protocol

from .errors import Context, SettingError
from .fit.checks import K_LIMIT
from .words import clip

__all__ = [
    "MethodSettings",
    "Rule",
    "Settings",
    "all_rules",
    "amount_or_sd",
    "choice",
    "count_or_auto",
    "integer",
    "k_value",
    "label",
    "levels",
    "parse_settings",
    "positive",
    "share",
    "yes_no",
]

_TRUE = {"yes", "true", "1", "on"}
_FALSE = {"no", "false", "0", "off"}


def yes_no(raw: Any) -> bool:
    word = str(raw).strip().lower()
    if isinstance(raw, float) and raw in (0.0, 1.0):
        word = str(int(raw))
    if word in _TRUE:
        return True
    if word in _FALSE:
        return False
    raise ValueError


def integer(lo: int, hi: int) -> Callable[[Any], int]:
    def parse(raw: Any) -> int:
        value = float(raw)
        if value != int(value) or not lo <= value <= hi:
            raise ValueError
        return int(value)

    return parse


def count_or_auto(hi: int) -> Callable[[Any], int | None]:
    """A whole number from 0 to hi, or "auto" (None: the method decides)."""
    def parse(raw: Any) -> int | None:
        if isinstance(raw, str) and raw.strip().lower() == "auto":
            return None
        return integer(0, hi)(raw)

    return parse


def k_value(raw: Any) -> int | None:
    if isinstance(raw, str) and raw.strip().lower() == "auto":
        return None
    return integer(1, K_LIMIT)(raw)


def positive(raw: Any) -> float:
    value = float(raw)
    if not (math.isfinite(value) and value > 0):
        raise ValueError
    return value


def share(lo: float, hi: float) -> Callable[[Any], float]:
    """A number from lo to hi; a percentage ("95%") is read as its share."""
    def parse(raw: Any) -> float:
        text = str(raw).strip()
        value = float(text[:-1]) / 100 if text.endswith("%") else float(raw)
        if not (math.isfinite(value) and lo <= value <= hi):
            raise ValueError
        return value

    return parse


def amount_or_sd(raw: Any) -> tuple[str, float]:
    """An amount ("250") or a multiple of the residual SD ("2 sd"): ("amount"|"sd", value)."""
    text = str(raw).strip().lower()
    kind = "amount"
    if text.endswith("sd"):
        kind, text = "sd", text[:-2].strip().rstrip("×*x").strip()
    value = float(text.replace(",", "")) if isinstance(raw, str) or kind == "sd" else float(raw)
    if not (math.isfinite(value) and value > 0):
        raise ValueError
    return kind, value


def choice(options: tuple[str, ...]) -> Callable[[Any], str]:
    def parse(raw: Any) -> str:
        word = str(raw).strip().lower().replace(" ", "_").replace("-", "_")
        if word not in options:
            raise ValueError
        return word

    return parse


def label(raw: Any) -> str | float:
    if isinstance(raw, float):
        return raw
    text = str(raw)
    if not text.strip():
        raise ValueError
    return text


def levels(raw: Any) -> tuple[str, ...]:
    """One level name, or several separated by ";" (spaces around each are dropped)."""
    from .labels import label_text

    parts = tuple(p.strip() for p in label_text(raw).split(";"))
    if not any(parts):
        raise ValueError
    return parts


@dataclass(frozen=True)
class Rule:
    """One setting: its name, allowed values (in words), default, parser and meaning."""

    name: str
    allowed: str
    default: Any
    parse: Callable[[Any], Any]
    meaning: str


class MethodSettings(Protocol):
    """What the settings parser needs to know of a method: its word and its rules."""

    @property
    def word(self) -> str: ...

    @property
    def rules(self) -> tuple[Rule, ...]: ...

    @property
    def required(self) -> tuple[str, ...]: ...


def _method_rule(methods: Mapping[str, MethodSettings]) -> Rule:
    words = tuple(methods)
    return Rule("method", " or ".join(words), words[0], choice(words), "how the model is fitted")


def all_rules(methods: Mapping[str, MethodSettings]) -> dict[str, Rule]:
    """Every setting a book may use: method first, then each method's own, in registry order."""
    rules = {"method": _method_rule(methods)}
    for m in methods.values():
        for r in m.rules:
            rules.setdefault(r.name, r)
    return rules


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


def parse_settings(pairs: list[tuple[str, Any, str]], context: Context,
                   methods: Mapping[str, MethodSettings]) -> Settings:
    """Parse (setting, raw value, cell address) triples into Settings, refusing bad ones.

    ``methods`` is the method registry. ``context`` names the file, the ``opts`` defined
    name and the sheet; the cell of the offending pair is filled in.
    """
    rules = all_rules(methods)
    values = {name: rule.default for name, rule in rules.items()}
    given: dict[str, str] = {}
    for key, raw, cell in pairs:
        name = str(key).strip().lower().replace(" ", "_")
        where = Context(context.file, context.name, context.sheet, cell)
        rule = rules.get(name)
        if rule is None:
            raise SettingError(
                f"unknown setting '{clip(key)}'",
                where,
                hint="known settings: " + ", ".join(rules),
            )
        if name in given:
            raise SettingError(f"setting '{rule.name}' is given twice", where)
        try:
            values[name] = rule.parse(raw)
        except (ValueError, TypeError, OverflowError):
            raise SettingError(
                f"setting '{rule.name}' must be {rule.allowed}, not '{clip(raw)}'", where
            ) from None
        given[name] = cell
    method = methods[values["method"]]
    own = {r.name for r in method.rules} | {"method"}
    for name, cell in given.items():
        if name not in own:
            users = [m.word for m in methods.values() if any(r.name == name for r in m.rules)]
            raise SettingError(
                f"setting '{name}' does not apply to method {method.word}",
                Context(context.file, context.name, context.sheet, cell),
                hint=f"it applies to {' and '.join(users)}",
            )
    for name in method.required:
        if name not in given:
            rule = rules[name]
            raise SettingError(
                f"method {method.word} needs the setting '{name}' ({rule.meaning})",
                Context(context.file, context.name, context.sheet),
                hint=f"add a row '{name}' with {rule.allowed}",
            )
    return Settings(values, frozenset(given))
