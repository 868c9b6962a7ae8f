"""Find the models declared with defined names and turn their cells into arrays.

A declaration is a defined name ``sf_<model>_<role>`` (roles y, x, new, opts, key, newkey,
rule), workbook- or sheet-scoped. The ``declare`` package checks everything that comes out
of the named ranges (one place, one wording): references, lengths, headers, values,
settings. Messages name the file, the defined name, the sheet and the cell. What the
numbers themselves must satisfy (enough rows, no constant attribute, ...) is checked by
the numeric core (``sheetfit.fit.checks``) and placed on the cells by the refresh.

This module reads one model from start to end; its steps live beside it: ``ranges.py``
(names → areas), ``rows.py`` (data rows → used rows, left-out rows, arrays), ``roles.py``
(new rows, identifiers, rule, settings), ``data.py`` (the types returned).
"""


from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import Protocol

from ..a1 import cell_ref
from ..errors import Context, DataError, DeclarationError, NoModelsError
from ..owned import INPUT_ROLES
from ..reader.package import Package
from ..reader.values import BookValues
from ..settings import MethodSettings
from .data import (
    Column,
    Keys,
    KeyValue,
    LeftOut,
    ModelData,
    NewRows,
    RuleCells,
    describe_value,
)
from .fingerprint import DigestMemo, record_inputs, settings_text
from .levels import Coding, code_levels, text_columns
from .ranges import (
    Decl,
    Ranges,
    areas_of,
    collect,
    columns_of,
    has_header,
    last_row,
    refuse_unsaved,
    trim,
)
from .roles import read_keys, read_new, read_rule, read_settings
from .rows import (
    check_headers,
    check_numeric_columns,
    data_columns,
    expand,
    leave_out_totals,
    make_column,
    read_rows,
)

__all__ = [
    "Column",
    "KeyValue",
    "Keys",
    "LeftOut",
    "MethodReading",
    "ModelData",
    "NewRows",
    "RuleCells",
    "describe_value",
    "find_models",
]


class MethodReading(MethodSettings, Protocol):
    """What reading a declaration needs to know of its method (a registry record)."""

    @property
    def title(self) -> str: ...

    @property
    def labels(self) -> bool: ...

    @property
    def max_attributes(self) -> int | None: ...

    @property
    def text_attributes(self) -> bool: ...

    @property
    def check(self) -> Callable[[ModelData], None] | None: ...

    @property
    def compares_rule(self) -> bool: ...


def find_models(pkg: Package, values: BookValues, file: str,
                methods: Mapping[str, MethodReading]) -> list[ModelData]:
    """Every model declared in the book, checked and read, in order of model name.

    ``methods`` is the method registry (sheetfit.methods.REGISTRY).
    """
    decls = collect(pkg, file)
    if not decls:
        raise NoModelsError(
            "no models are declared",
            Context(file),
            hint="define names sf_<model>_y and sf_<model>_x pointing at the response "
            "and attribute cells",
        )
    memo: DigestMemo = {}  # cell digests of ranges several models share, computed once
    return [_read_model(decls[k], pkg, values, file, methods, memo) for k in sorted(decls)]


def _read_model(decl: Decl, pkg: Package, values: BookValues, file: str,
                methods: Mapping[str, MethodReading], memo: DigestMemo) -> ModelData:
    tag = decl.tag
    for role in ("y", "x"):
        if role not in decl.names:
            raise DeclarationError(
                f"model '{tag}' has no {role} declaration",
                Context(file, f"sf_{tag}_{role}"),
                hint=f"define sf_{tag}_{role}",
            )
    dy, dx = decl.names["y"], decl.names["x"]
    ranges: Ranges = {}
    settings = read_settings(decl, pkg, values, file, methods, ranges)
    method = methods[settings.method]
    y_areas, x_areas = areas_of(dy, pkg, file), areas_of(dx, pkg, file)
    last = last_row(y_areas + x_areas, values)
    y_areas, x_areas = trim(y_areas, last), trim(x_areas, last)
    refuse_unsaved("y", dy, y_areas, values, file)
    refuse_unsaved("x", dx, x_areas, values, file)
    if len(y_areas) != 1 or y_areas[0].n_cols != 1:
        raise DataError(
            "the response must be one column", Context(file, dy.name, y_areas[0].sheet,
                                                       y_areas[0].a1()),
            hint="point sf_..._y at a single column",
        )
    ya = y_areas[0]
    ranges["y"], ranges["x"] = (dy.name, [ya]), (dx.name, x_areas)
    for a in x_areas:
        if a.n_rows != ya.n_rows:
            raise DataError(
                f"x has {a.n_rows} rows in {a.a1()} but y has {ya.n_rows} in {ya.a1()}",
                Context(file, dx.name, a.sheet, a.a1()),
                hint="make the y and x ranges cover the same rows",
            )
    y_cols, x_cols = columns_of([ya]), columns_of(x_areas)
    header = has_header(y_cols + x_cols, values)
    offset = 1 if header else 0
    n_rows = ya.n_rows - offset
    ycol = make_column(ya, ya.col1, header, values, offset)
    xcols = [make_column(a, c, header, values, offset) for a, c in x_cols]
    check_headers(xcols, dx, file)
    cells = data_columns([ycol] + xcols, n_rows, values)
    cat = text_columns(cells[1:]) if method.text_attributes else [False] * len(xcols)
    used, left, Y, X, texts = read_rows(ycol, xcols, cells, method.labels, cat)
    num = [j for j, t in enumerate(cat) if not t]
    keep, left = leave_out_totals(ycol, used, left, Y,
                                  X if len(num) == X.shape[1] else X[:, num], method.labels,
                                  len(num) < len(cat))
    if not keep.all():  # else no copies: a million rows of X are 40 MB each
        used, Y, X = used[keep], Y[keep], X[keep]
        texts = {j: [t for t, k in zip(col, keep) if k] for j, col in texts.items()}
    ctx = Context(file, dy.name, ycol.sheet, cell_ref(ycol.first_row, ycol.col))
    most = method.max_attributes
    if most is not None and len(xcols) > most:
        raise DataError(
            f"a {method.title} uses {'one attribute' if most == 1 else f'{most} attributes'}"
            f", x has {len(xcols)}",
            Context(file, dx.name), hint="declare fewer x columns for this model",
        )
    if n_rows == 0:
        raise DataError(
            "the declared ranges hold no data rows yet", ctx,
            hint="type or paste your rows under the headers",
        )
    check_numeric_columns([c for c, t in zip(xcols, cat) if not t],
                          [cv for cv, t in zip(cells[1:], cat) if not t], n_rows, dx, file)
    if len(used) == 0:
        raise DataError(
            f"no rows with numbers in both y and x ({len(left)} rows, all left out)", ctx,
            hint="fill in the data or point the names at it",
        )
    codings: dict[int, Coding] = {}
    source = xcols
    if any(cat):
        where = Context(file, decl.names["opts"].name if "opts" in decl.names else dx.name)
        coded = code_levels([xcols[j].name for j in texts], list(texts.values()),
                            settings.values.get("baseline"), where)
        codings = dict(zip(texts, coded, strict=True))
        xcols, X = expand(xcols, X, texts, codings)
    elif settings.values.get("baseline") is not None:
        code_levels([], [], settings.values.get("baseline"), Context(file, dx.name))
    new = (read_new(decl, pkg, values, file, source, ranges, codings) if "new" in decl.names
           else None)
    if "newkey" in decl.names and new is None:
        raise DeclarationError(
            f"model '{tag}' names identifiers of new rows but declares no new rows",
            Context(file, decl.names["newkey"].name), hint=f"define sf_{tag}_new or drop the name",
        )
    keys = (read_keys(decl.names["key"], pkg, values, file, ya, header, ranges)
            if "key" in decl.names else None)
    rule = read_rule(decl.names["rule"], pkg, values, file) if "rule" in decl.names else None
    if "rule" in decl.names:
        ranges["rule"] = (decl.names["rule"].name, areas_of(decl.names["rule"], pkg, file))
    if rule is not None and not method.compares_rule:
        raise DeclarationError(
            f"a {method.title} model has no coefficients to compare with a rule",
            Context(file, rule.name), hint="declare the rule on a least-squares model")
    names = {role: d.name for role, d in decl.names.items()}
    model = ModelData(tag, file, settings, ycol, xcols, n_rows, used, left, Y, X, new, names,
                      keys, rule, baselines={c.name: c.baseline for c in codings.values()},
                      level_counts={c.name: dict(c.counts) for c in codings.values()})
    if method.check is not None:
        method.check(model)
    used_settings = settings_text(settings.values, ["method"] + [r.name for r in method.rules])
    model.record = record_inputs(tag, ranges, values, used_settings, INPUT_ROLES, memo)
    return model

