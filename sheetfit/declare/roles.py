"""The optional roles of a declaration: new rows, identifiers, the rule in use, settings."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import replace

import numpy as np

from ..a1 import cell_ref, col_letter, quote_sheet
from ..errors import Context, DataError, DeclarationError
from ..reader.columns import CODE
from ..reader.package import DefinedName, Package
from ..reader.values import BLANK, NUMBER, TEXT, BookValues, ColumnValues, Value
from ..settings import MethodSettings, Settings, parse_settings
from ..words import clip
from .data import Column, Keys, KeyValue, NewRows, RuleCells, describe_value
from .levels import Coding, is_level
from .ranges import Decl, Ranges, areas_of, columns_of, has_header, last_row, refuse_unsaved, trim
from .refs import Area
from .rows import data_columns, expand, make_column

__all__ = ["read_keys", "read_new", "read_rule", "read_settings"]


def read_new(
    decl: Decl, pkg: Package, values: BookValues, file: str, xcols: list[Column],
    ranges: Ranges,
    codings: dict[int, Coding] | None = None,
) -> NewRows:
    """The new rows, their text attributes coded as in the data (``codings`` by x column)."""
    codings = codings or {}
    d = decl.names["new"]
    areas = areas_of(d, pkg, file)
    areas = trim(areas, last_row(areas, values))
    refuse_unsaved("the new rows", d, areas, values, file)
    ranges["new"] = (d.name, areas)
    rows = {a.n_rows for a in areas}
    if len(rows) != 1:
        raise DataError("the areas of the new rows have different numbers of rows",
                        Context(file, d.name))
    cols_ac = columns_of(areas)
    if len(cols_ac) != len(xcols):
        raise DataError(
            f"new rows have {len(cols_ac)} columns but x has {len(xcols)}",
            Context(file, d.name, areas[0].sheet, areas[0].a1()),
            hint="give the new rows the same columns as x, in the same order",
        )
    header = has_header(cols_ac, values)
    offset = 1 if header else 0
    cols = [make_column(a, c, header, values, offset) for a, c in cols_ac]
    if header:
        for c, xc in zip(cols, xcols):
            if c.name.casefold() != xc.name.casefold():
                raise DataError(
                    f"new-row column '{clip(c.name)}' stands where x has '{clip(xc.name)}'",
                    Context(file, d.name, c.sheet, cell_ref(c.first_row - 1, c.col)),
                    hint="put the new-row columns in the order of x",
                )
    n = rows.pop() - offset
    cells = data_columns(cols, n, values)
    X = np.empty((n, len(cols)))
    bad = np.zeros((n, len(cols)), dtype=bool)
    texts: dict[int, list[str]] = {}
    for j, cv in enumerate(cells):
        if j in codings:
            found = [codings[j].match(cv.text[i]) if level else None
                     for i, level in enumerate(cv.levels().tolist())]
            bad[:, j] = [lv is None for lv in found]
            texts[j] = [lv or "" for lv in found]
            X[:, j] = np.nan
        else:
            bad[:, j] = ~cv.of_kind(NUMBER)
            X[:, j] = cv.number
    if bad.any():  # the first unusable cell, row by row, left to right
        i, j = divmod(int(np.flatnonzero(bad.ravel())[0]), len(cols))
        c, v = cols[j], cells[j].value(i)
        if j in codings:
            _new_level(v, codings[j], c, i, d, file)  # raises, saying why
        raise DataError(
            f"a new row holds {describe_value(v)} where a number is needed",
            Context(file, d.name, c.sheet, cell_ref(c.row_of(i), c.col)),
            hint="fill it in or shorten the range of new rows",
        )
    if n == 0:
        raise DataError("the new rows range holds no rows", Context(file, d.name))
    keys = (read_keys(decl.names["newkey"], pkg, values, file, areas[0], header, ranges,
                       "newkey") if "newkey" in decl.names else None)
    if codings:
        named = [replace(c, name=xc.name) for c, xc in zip(cols, xcols)]
        cols, X = expand(named, X, texts, codings)
    return NewRows(cols, X, keys)


def _new_level(v: Value, coding: Coding, c: Column, i: int, d: DefinedName, file: str) -> str:
    """The level a new row's text-attribute cell names; a level the data lack is refused."""
    where = Context(file, d.name, c.sheet, cell_ref(c.row_of(i), c.col))
    known = ", ".join(f"'{clip(t)}'" for t in coding.known())
    if not is_level(v):
        raise DataError(
            f"a new row holds {describe_value(v)} where a level of text attribute "
            f"'{clip(coding.name)}' is needed (known levels: {known})", where,
            hint="type one of the known levels")
    level = coding.match(v.text)
    if level is None:
        raise DataError(
            f"new row level '{clip(v.text)}' of '{clip(coding.name)}' does not occur in the "
            f"rows fitted (known levels: {known}), so the model has no coefficient for it",
            where, hint="levels match exactly, capitals and spaces included; use a known "
            "level or add rows with this level to the data")
    return level


def read_keys(d: DefinedName, pkg: Package, values: BookValues, file: str, like: Area,
               header: bool, ranges: Ranges, role: str = "key") -> Keys:
    """Identifier columns that must cover the same sheet rows as ``like`` (y's or new's area).

    Whole columns take the rows of ``like``; the header row, when the model has one,
    names the columns. Any cell content is accepted: identifiers are shown, never fitted.
    """
    areas = [a.with_rows(like.row1, like.row2) if a.whole_columns else a
             for a in areas_of(d, pkg, file)]
    for a in areas:
        if (a.row1, a.row2) != (like.row1, like.row2):
            raise DataError(
                f"identifiers in {a.a1()} do not cover the rows of the range they name "
                f"({like.a1()})",
                Context(file, d.name, a.sheet, a.a1()),
                hint="point the identifier name at the same rows as the data it names",
            )
    ranges[role] = (d.name, areas)
    offset = 1 if header else 0
    cols: list[Column] = []
    vals: list[list[KeyValue]] = []
    for a, c in columns_of(areas):
        sv = values.sheet(a.sheet)
        name = sv.get(like.row1, c).text.strip() if header else ""
        code = values.number_format(a.sheet, like.row1 + offset, c)
        shown = None if not code or code.strip().lower() in ("general", "@") else code
        col = Column(name or col_letter(c), a.sheet, c, like.row1 + offset, fmt=shown)
        cols.append(col)
        vals.append(_key_values(data_columns([col], like.n_rows - offset, values)[0]))
    return Keys(cols, vals)


def read_rule(d: DefinedName, pkg: Package, values: BookValues, file: str) -> RuleCells:
    """The rule's coefficients: numbers in a column or a row, read in order."""
    cells: list[str] = []
    nums: list[float] = []
    for a in areas_of(d, pkg, file):
        if a.whole_columns:
            raise DataError("the rule's coefficients must be a few cells, not whole columns",
                            Context(file, d.name, a.sheet, a.a1()),
                            hint="point the name at the cells holding the rule's coefficients")
        sv = values.sheet(a.sheet)
        for r in range(a.row1, a.row2 + 1):
            for c in range(a.col1, a.col2 + 1):
                v = sv.get(r, c)
                if v.kind != NUMBER:
                    raise DataError(
                        f"the rule's coefficients hold {describe_value(v)} where a number is "
                        "needed", Context(file, d.name, a.sheet, cell_ref(r, c)),
                        hint="give the rule's coefficients as numbers, intercept first")
                cells.append(f"{quote_sheet(a.sheet)}!{cell_ref(r, c)}")
                nums.append(v.number)
    return RuleCells(d.name, cells, np.array(nums))


def _key_values(cv: ColumnValues) -> list[KeyValue]:
    """What each identifier cell shows: its number, its text, or None for a blank."""
    out: list[KeyValue] = cv.number.tolist()
    for i in np.flatnonzero(~cv.of_kind(NUMBER)).tolist():
        out[i] = None if cv.kind[i] == CODE[BLANK] else cv.text.get(i, "")
    return out


def read_settings(decl: Decl, pkg: Package, values: BookValues, file: str,
              methods: Mapping[str, MethodSettings], ranges: Ranges) -> Settings:
    d = decl.names.get("opts")
    if d is None:
        return parse_settings([], Context(file), methods)
    areas = areas_of(d, pkg, file)
    areas = trim(areas, last_row(areas, values))
    refuse_unsaved("the settings", d, areas, values, file)
    if len(areas) != 1 or areas[0].n_cols != 2:
        raise DeclarationError(
            "settings must be one range of two columns (setting, value)", Context(file, d.name),
        )
    a = areas[0]
    ranges["opts"] = (d.name, areas)
    sv = values.sheet(a.sheet)
    pairs = []
    for r in range(a.row1, a.row2 + 1):
        key, val = sv.get(r, a.col1), sv.get(r, a.col1 + 1)
        if key.kind == BLANK and val.kind == BLANK:
            continue
        if r == a.row1 and key.text.strip().lower() == "setting" \
                and val.text.strip().lower() == "value":
            continue
        raw: object = val.number if val.kind == NUMBER else val.text
        if key.kind != TEXT or val.kind == BLANK:
            raise DeclarationError(
                "each settings row needs a setting name and a value",
                Context(file, d.name, a.sheet, cell_ref(r, a.col1)),
            )
        pairs.append((key.text, raw, cell_ref(r, a.col1 + 1)))
    return parse_settings(pairs, Context(file, d.name, a.sheet), methods)
