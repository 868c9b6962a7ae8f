"""Stream a worksheet part: the small rendered part with the plan's column runs merged in.

The renderer writes each sheet's loose cells, widths, panes and print setup with
xlsxwriter; the long column runs (``sheets.columns.Run``) never enter it. At graft
time this module splices the runs' cells into the converted part's ``sheetData``,
row by row, a chunk of rows at a time, so a 200,000-row sheet never exists as one
string or as one Python object per cell. Cells are written as xlsxwriter writes them
(and ``_graft_sheet.convert_sheet`` leaves them): inline strings, the formula's cached
value typed ``str``/``b``/``e`` like xlsxwriter does, every float with all its digits.
"""

from __future__ import annotations

import re
import string
from collections.abc import Iterator, Sequence
from typing import Any

import numpy as np

from ..a1 import cell_ref, col_index, col_letter
from ..sheets.columns import Run, Span, Template
from ..vectors import blocks, is_numeric
from .dotted import with_prefixes

__all__ = ["CHUNK_ROWS", "stream_sheet"]

#: Rows rendered per chunk: about 1–3 MB of XML on a wide sheet.
CHUNK_ROWS = 4096

_ERRORS = frozenset(("#DIV/0!", "#N/A", "#NAME?", "#NULL!", "#NUM!", "#REF!", "#VALUE!"))
_CTRL_ESCAPE = re.compile("(_x[0-9a-fA-F]{4}_)")
_CTRL = re.compile(r"([\x00-\x08\x0b-\x1f])")
_ROW = re.compile(r"<row(?=[\s/>])([^>]*?)(?:/>|>(.*?)</row>)", re.DOTALL)
_R_ATTR = re.compile(r'\sr="(\d+)"')
_SPANS = re.compile(r'\sspans="[^"]*"')
_CELL_R = re.compile(r'<c\s[^>]*?\br="([A-Z]+)\d+"')
_DIM = re.compile(r'<dimension ref="([^"]*)"\s*/>')


def _esc(text: str) -> str:
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")


def _inline(text: str) -> str:
    """An inline string's ``<is>`` body, escaped as xlsxwriter escapes shared strings."""
    text = _CTRL.sub(lambda m: f"_x{ord(m.group(1)):04X}_", _CTRL_ESCAPE.sub(r"_x005F\1", text))
    space = ' xml:space="preserve"' if text[:1].isspace() or text[-1:].isspace() else ""
    return f"<is><t{space}>{_esc(text)}</t></is>"


def _value_cells(refs: list[str], values: Sequence[object], s: str) -> list[str]:
    out = []
    for ref, v in zip(refs, values, strict=True):
        if v is None:
            out.append(f'<c r="{ref}"{s}/>' if s else "")
        elif isinstance(v, bool):
            out.append(f'<c r="{ref}"{s} t="b"><v>{int(v)}</v></c>')
        elif isinstance(v, (int, float)):
            out.append(f'<c r="{ref}"{s}><v>{float(v)!r}</v></c>')
        else:
            out.append(f'<c r="{ref}"{s} t="inlineStr">{_inline(str(v))}</c>')
    return out


def _formula_cells(refs: list[str], felems: list[str], values: Sequence[object],
                   s: str) -> list[str]:
    """Formula cells from their ``<f>`` elements and cached values (typed as xlsxwriter does)."""
    out = []
    for ref, f, v in zip(refs, felems, values, strict=True):
        if isinstance(v, float):
            out.append(f'<c r="{ref}"{s}>{f}<v>{v!r}</v></c>')
        elif isinstance(v, bool):  # as the general renderer caches a logical: its text
            out.append(f'<c r="{ref}"{s} t="str">{f}<v>{"TRUE" if v else "FALSE"}</v></c>')
        elif v is None or isinstance(v, int):
            out.append(f'<c r="{ref}"{s}>{f}<v>{0 if v is None else v}</v></c>')
        elif v == "":
            out.append(f'<c r="{ref}"{s} t="str">{f}<v></v></c>')
        elif v in _ERRORS:
            out.append(f'<c r="{ref}"{s} t="e">{f}<v>{v}</v></c>')
        else:
            out.append(f'<c r="{ref}"{s} t="str">{f}<v>{_esc(str(v))}</v></c>')
    return out


#: Formulas at least this long are written once per run as a shared formula (OOXML
#: §18.3.1.40: the first cell holds the text, the others point at it); shorter ones, such
#: as a plain reference to a data cell that ``sheetfit check`` reads back, in full.
SHARE_MIN = 24
_CELL_TOKEN = re.compile(r"(?<![A-Za-z0-9_$.])\$?[A-Za-z]{1,3}[0-9]+(?![0-9(])")
_ROW_PART = re.compile(r"(?:^|[^A-Za-z0-9_.])\$?[A-Za-z]{1,3}$")
_TEXT_CONST = re.compile(r'"[^"]*"')
_QUOTED_SHEET = re.compile(r"'[^']*'")


def shareable(run: Run) -> bool:
    """Whether every cell's formula is the first one's moved down row by row: each
    placeholder is the row of a relative reference and its vector goes up by one a row,
    and the literal text holds no reference with a relative row (text constants and
    quoted sheet names aside). Anything unsure is written in full."""
    t = run.formula
    if t is None or run.n < 2 or len(t.text) < SHARE_MIN:
        return False
    for a in t.args:
        if a is None:
            continue
        if not (is_numeric(a) and a.dtype.kind in "iu"  # type: ignore[union-attr]
                and getattr(a, "ndim", 1) == 1):
            return False
        if not _steps_of_one(a):
            return False
    literal = []
    for text, field, _, _ in string.Formatter().parse(t.text):
        literal.append(text)
        if field is not None and not _ROW_PART.search(text):
            return False  # a placeholder that is not the row of a reference
    bare = _QUOTED_SHEET.sub("", _TEXT_CONST.sub("", "\x00".join(literal)))
    return _CELL_TOKEN.search(bare) is None

def _steps_of_one(a: Any) -> bool:
    """Whether an integer vector goes up by exactly one from each item to the next."""
    prev = None
    for x in blocks(a):
        if len(x) and prev is not None and int(x[0]) != prev + 1:
            return False
        if not np.all(np.diff(x) == 1):
            return False
        if len(x):
            prev = int(x[-1])
    return True


def _shifted(text: str, by: int) -> str:
    """A format string with every positional field moved up by ``by`` (literals kept)."""
    out = []
    for literal, field, spec, conv in string.Formatter().parse(text):
        out.append(literal.replace("{", "{{").replace("}", "}}"))
        if field is not None:
            out.append("{" + str(int(field) + by) + ("!" + conv if conv else "")
                       + (":" + spec if spec else "") + "}")
    return "".join(out)


def _finite(values: Any) -> np.ndarray:
    """A chunk of a numeric run as floats; NaN or infinity has no cell form (SheetPlan.run
    refuses them in arrays; a lazy vector's chunks are checked here as they are made)."""
    x = np.asarray(values, dtype=float)
    if not np.isfinite(x).all():
        raise ValueError("a run of numbers holds NaN or infinity")
    return x


def _results(values: Any) -> list[str]:
    """Formulas' cached values with 17 significant digits (``%.17g``, which round-trips
    every double), formatted by one ``%`` over the chunk: about twice as fast as ``repr``
    per value. A spreadsheet recalculates these; plain values keep ``_reprs``."""
    x = _finite(values).tolist()
    return ("%.17g\x00" * len(x) % tuple(x)).split("\x00")[:-1]


def _reprs(values: Any) -> list[str]:
    """Every float's repr, made in one C loop (a list's repr) rather than one call each."""
    x = _finite(values).tolist()
    return repr(x)[1:-1].split(", ") if x else []


def _piece(run: Run, a: int, b: int, style: int | None,
           si: int | None = None) -> tuple[str, list[Any]]:
    """Items a..b-1 of a run as a format fragment (placeholders from 0) and the columns
    that fill it, one entry per row: the cell's XML, or "" for an unstyled blank. With
    ``si`` the run is written as shared formula number ``si``."""
    letter = col_letter(run.col + 1)
    first = run.row0 + 1
    s = f' s="{style}"' if style else ""
    rows = range(first + a, first + b)
    v, t = run.values, run.formula
    numeric = is_numeric(v)
    if numeric and t is None:
        return f'<c r="{letter}{{0}}"{s}><v>{{1}}</v></c>', [rows, _reprs(v[a:b])]
    follower = f'<f t="shared" si="{si}"/>'
    if si is not None and a > 0 and numeric:
        return f'<c r="{letter}{{0}}"{s}>{follower}<v>{{1}}</v></c>', [rows, _results(v[a:b])]
    if si is None and numeric and t is not None and all(
            x is None or is_numeric(x) for x in t.args):
        body = _shifted(_esc(with_prefixes(t.text[1:])), 1)
        cols: list[Any] = [rows] + [rows if x is None else np.asarray(x[a:b]).tolist()
                                    for x in t.args]
        frag = f'<c r="{letter}{{0}}"{s}><f>{body}</f><v>{{{len(t.args) + 1}}}</v></c>'
        return frag, cols + [_results(v[a:b])]
    refs = [f"{letter}{r}" for r in rows]
    values = run.scalars(a, b)
    if t is None:
        return "{0}", [_value_cells(refs, values, s)]
    if si is not None:
        felems = [follower] * (b - a)
        if a == 0:
            text = _esc(with_prefixes(t.render(first, 0, 1)[0][1:]))
            felems[0] = (f'<f t="shared" ref="{letter}{first}:{letter}{run.last + 1}" '
                         f'si="{si}">{text}</f>')
        return "{0}", [_formula_cells(refs, felems, values, s)]
    if any(x is not None and not is_numeric(x)
           and any(isinstance(e, str) for e in x[a:b]) for x in t.args):
        forms = [_esc(with_prefixes(f[1:])) for f in t.render(first, a, b)]  # text: escape each
    else:  # numbers only: prefix and escape the template once
        forms = Template(_esc(with_prefixes(t.text[1:])), t.args).render(first, a, b)
    return "{0}", [_formula_cells(refs, [f"<f>{f}</f>" for f in forms], values, s)]


def _run_chunk(run: Run, a: int, b: int, style: int | None,
               si: int | None = None) -> list[str]:
    """Cell XML of items a..b-1 of a run (empty strings for unstyled blanks)."""
    frag, cols = _piece(run, a, b, style, si)
    if frag == "{0}":
        return list(cols[0])
    fmt = frag.format
    return [fmt(*c) for c in zip(*cols, strict=True)]


def _uniform(runs: Sequence[Run], start: int, stop: int,
             styles: dict[str, int | None], shared: dict[int, int]) -> str:
    """Rows start … stop-1 when every run covers all of them and no loose cell is there:
    one format call per row over the runs' fragments side by side."""
    frags, cols = ['<row r="{0}">'], [range(start, stop)]
    for u in runs:
        a = start - 1 - u.row0
        frag, more = _piece(u, a, a + stop - start, styles[u.style], shared.get(id(u)))
        frags.append(_shifted(frag, len(cols)))
        cols += more
    fmt = ("".join(frags) + "</row>").format
    return "".join([fmt(*c) for c in zip(*cols, strict=True)])


def _loose_rows(data: str) -> dict[int, tuple[str, list[tuple[int, str]]]]:
    """Row number → (row attributes without spans, [(column, cell XML)]) of the rendered part."""
    rows: dict[int, tuple[str, list[tuple[int, str]]]] = {}
    for m in _ROW.finditer(data):
        attrs = _SPANS.sub("", m.group(1))
        r = _R_ATTR.search(attrs)
        if r is None:
            raise ValueError("a rendered row without its number")
        cells = []
        body = m.group(2) or ""
        starts = [c.start() for c in re.finditer(r"<c(?=[\s/>])", body)] + [len(body)]
        for k in range(len(starts) - 1):
            xml = body[starts[k]:starts[k + 1]]
            ref = _CELL_R.match(xml)
            if ref is None:
                raise ValueError("a rendered cell without its address")
            cells.append((col_index(ref.group(1)), xml))
        rows[int(r.group(1))] = (attrs, cells)
    return rows


def _dimension(head: str, runs: Sequence[Run], wide: dict[int, list[Span]]) -> str:
    """The ``<dimension>`` element widened to take in the runs and spans."""
    m = _DIM.search(head)
    if m is None or not (runs or wide):
        return head
    r1, c1, r2, c2 = 1 << 30, 1 << 30, 0, 0
    for part in m.group(1).split(":"):
        cm = re.fullmatch(r"([A-Z]+)(\d+)", part)
        if cm:
            c, r = col_index(cm.group(1)), int(cm.group(2))
            r1, c1, r2, c2 = min(r1, r), min(c1, c), max(r2, r), max(c2, c)
    for u in runs:
        r1, r2 = min(r1, u.row0 + 1), max(r2, u.last + 1)
        c1, c2 = min(c1, u.col + 1), max(c2, u.col + 1)
    for r, sps in wide.items():
        for sp in sps:
            r1, r2 = min(r1, r), max(r2, r)
            c1, c2 = min(c1, sp.col0 + 1), max(c2, sp.col0 + sp.n)
    ref = cell_ref(r1, c1) if (r1, c1) == (r2, c2) else f"{cell_ref(r1, c1)}:{cell_ref(r2, c2)}"
    return head[:m.start()] + f'<dimension ref="{ref}"/>' + head[m.end():]


#: Cell XML of a span built and handed on this many characters at a time.
_SPAN_BYTES = 1 << 20


def _span_row(r: int, attrs: str, cells: list[tuple[int, str]], spans: Sequence[Span],
              styles: dict[str, int | None]) -> Iterator[bytes]:
    """Row ``r`` holding ``spans``, merged with its other ``cells`` (column, XML) in column
    order, in pieces of about ``_SPAN_BYTES``: a span's cells are made one at a time."""
    pending = sorted(cells, key=lambda t: t[0])
    out: list[str] = [f"<row{attrs}>"]
    size = 0
    for sp in sorted(spans, key=lambda sp: sp.col0):
        s = f' s="{styles[sp.style]}"' if styles[sp.style] else ""
        while pending and pending[0][0] < sp.col0 + 1:
            out.append(pending.pop(0)[1])
        for k in range(sp.n):
            ref = f"{col_letter(sp.col0 + k + 1)}{r}"
            cell = _value_cells([ref], [sp.values[k]], s)[0]
            out.append(cell)
            size += len(cell)
            if size >= _SPAN_BYTES:
                yield "".join(out).encode("utf-8")
                out, size = [], 0
    out += [x for _, x in pending]
    out.append("</row>")
    yield "".join(out).encode("utf-8")


def stream_sheet(xml: bytes, runs: Sequence[Run], styles: dict[str, int | None],
                 spans: Sequence[Span] = ()) -> Iterator[bytes]:
    """The converted worksheet part ``xml`` with ``runs`` and ``spans`` merged into its
    sheetData, as UTF-8 chunks. ``styles`` gives each run and span style's final ``s``
    index (None: default)."""
    text = xml.decode("utf-8")
    runs = [u for u in runs if u.n]
    m = re.search(r"<sheetData\s*/>|<sheetData>(.*?)</sheetData>", text, re.DOTALL)
    if m is None:
        raise ValueError("rendered worksheet without sheetData")
    loose = _loose_rows(m.group(1) or "")
    wide: dict[int, list[Span]] = {}  # 1-based row -> its spans
    for sp in spans:
        if sp.n:
            wide.setdefault(sp.row + 1, []).append(sp)
    yield (_dimension(text[:m.start()], runs, wide) + "<sheetData>").encode("utf-8")
    lines = [*loose, *wide]
    if runs:
        top = min(min(u.row0 + 1 for u in runs), min(lines, default=1 << 30))
        bottom = max(max(u.last + 1 for u in runs), max(lines, default=0))
    else:
        top, bottom = min(lines, default=1), max(lines, default=0)
    ordered = sorted(runs, key=lambda u: u.col)
    shared = {id(u): k for k, u in enumerate(u for u in ordered if shareable(u))}
    for start in range(top, bottom + 1, CHUNK_ROWS):
        stop = min(bottom + 1, start + CHUNK_ROWS)  # sheet rows start … stop-1
        size = stop - start
        inside = [u for u in ordered if u.row0 + 1 <= stop - 1 and u.last + 1 >= start]
        if inside and all(u.row0 + 1 <= start and u.last + 1 >= stop - 1 for u in inside) \
                and not any(start <= r < stop for r in lines):
            yield _uniform(inside, start, stop, styles, shared).encode("utf-8")
            continue
        cols: list[list[str]] = []  # per run: cell XML of every row of the chunk ("" none)
        by_col: list[int] = []
        for u in ordered:
            a, b = max(0, start - 1 - u.row0), min(u.n, stop - 1 - u.row0)
            if a < b:
                lead = u.row0 + 1 + a - start
                cols.append([""] * lead + _run_chunk(u, a, b, styles[u.style], shared.get(id(u)))
                            + [""] * (size - lead - (b - a)))
                by_col.append(u.col + 1)
        out: list[str] = []
        for r, *cells in zip(range(start, stop), *cols, strict=True):
            if r in wide:
                if out:
                    yield "".join(out).encode("utf-8")
                    out = []
                attrs, extra = loose.get(r, (f' r="{r}"', []))
                yield from _span_row(r, attrs, [(c, x) for c, x in zip(by_col, cells, strict=True)
                                                if x] + extra, wide[r], styles)
                continue
            if r in loose:
                attrs, extra = loose[r]
                merged = sorted([(c, x) for c, x in zip(by_col, cells, strict=True) if x]
                                + extra, key=lambda t: t[0])
                body = "".join(x for _, x in merged)
                out.append(f"<row{attrs}>{body}</row>" if body else f"<row{attrs}/>")
                continue
            body = "".join(cells)
            if body:
                out.append(f'<row r="{r}">{body}</row>')
        if out:
            yield "".join(out).encode("utf-8")
    yield ("</sheetData>" + text[m.end():]).encode("utf-8")
