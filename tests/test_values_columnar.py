"""Our column reader (``reader/_columnar.py``): its bulk number parse equals Python's
``float`` bit for bit, chunk cuts change nothing, every shape it does not take is handed
to the other readers (which give the same values), and a stray far cell costs one entry."""

from __future__ import annotations

import io
import math
from pathlib import Path

import numpy as np
import pytest
from books import READERS, every_kind_book, only_reader, same_value

from sheetfit.a1 import col_letter
from sheetfit.reader import _columnar as columnar
from sheetfit.reader._columnar import Irregular, read_columns
from sheetfit.reader._sheetxml import TEXT_CAP, stream_sheet
from sheetfit.reader.columns import Mixed, column_values
from sheetfit.reader.package import open_package
from sheetfit.refresh import _values

HEAD = (b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
        b'<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main">'
        b'<dimension ref="A1"/><sheetData>')
TAIL = b'</sheetData><pageMargins left="0.7"/></worksheet>'
STRINGS = ["zero", "one & <two>"]


def _part(rows: list[list[str]]) -> bytes:
    """A sheet part of rows of ready-made cell elements (row numbers from 1)."""
    body = b"".join(f'<row r="{r}">{"".join(cells)}</row>'.encode()
                    for r, cells in enumerate(rows, start=1))
    return HEAD + body + TAIL


def _both(part: bytes, chunk: int) -> tuple:
    """(column reader, streaming parse) of the same part."""
    mine = read_columns(io.BytesIO(part), lambda: STRINGS, chunk=chunk)
    theirs = stream_sheet(io.BytesIO(part), STRINGS)
    return mine, theirs


def _assert_same(mine, theirs, rows: int, cols: int) -> None:
    """Every cell of the rectangle (one row and column beyond) the same raw value."""
    assert mine.errors == theirs.errors
    assert mine.unsaved == theirs.unsaved
    for r in range(1, rows + 2):
        for c in range(1, cols + 2):
            a, b = mine.cells.raw(r, c), theirs.rows.get(r, {}).get(c, "")
            assert type(a) is type(b), (r, c, a, b)
            assert a == b or (isinstance(a, float) and math.isnan(a) and math.isnan(b)), (r, c)


def test_bulk_numbers_equal_float_bit_for_bit(monkeypatch) -> None:
    """200,000 seeded doubles over the whole exponent range written with repr (17
    significant digits where needed), plus short decimals as people type them, subnormals,
    signed zeros and the extremes: the numbers the reader parses in bulk (numpy's text
    parser) are exactly ``float`` of the same text, through 1 KiB chunks."""
    rng = np.random.default_rng(20261202)
    mant = rng.standard_normal(200_000)
    exps = rng.integers(-300, 300, 200_000).astype(float)
    values = [repr(float(v)) for v in mant * 10.0 ** exps]
    values += [f"{v:.2f}" for v in rng.uniform(-1e6, 1e6, 5000)]
    values += ["0", "-0", "1E-5", "4.9E-324", "2.2250738585072014E-308",
               "1.7976931348623157E+308", "123456789012345678901234567890", "0.1", "+7"]
    width = 7
    rows = [[f'<c r="{col_letter(c + 1)}{r + 1}" s="3"><v>{values[r * width + c]}</v></c>'
             for c in range(width) if r * width + c < len(values)]
            for r in range(math.ceil(len(values) / width))]
    def one_by_one(*args):
        raise AssertionError("a number cell was read one by one, not in bulk")

    monkeypatch.setattr(columnar, "_one_value", one_by_one)
    read = read_columns(io.BytesIO(_part(rows)), list, chunk=1 << 10)
    flat = [read.cells.raw(r + 1, c + 1) for r in range(len(rows)) for c in range(width)
            if r * width + c < len(values)]
    want = [float(v) for v in values]
    assert all(type(x) is float for x in flat)
    assert [math.copysign(1, x) for x in flat] == [math.copysign(1, x) for x in want]
    assert np.array_equal(np.array(flat), np.array(want))
    assert isinstance(read.cells.column(1, 1, len(rows)), np.ndarray)  # held as an array


def _mixed_rows() -> list[list[str]]:
    """Every kind of cell the format allows in sheet data, with the awkward corners."""
    return [
        ['<c r="A1" t="s"><v>1</v></c>',
         '<c r="B1" t="inlineStr"><is><t>in &amp; out</t></is></c>',
         ('<c r="C1" t="inlineStr"><is><r><t>ri</t></r><r><rPr><b/></rPr>'
          '<t xml:space="preserve">ch </t></r><rPh><t>x</t></rPh></is></c>')],
        ['<c r="A2"><v>1.5</v></c>', '<c r="B2" t="n"><v>-2.5E-3</v></c>',
         '<c r="C2" s="1"/>', '<c r="D2"><v></v></c>', '<c r="E2"><v> </v></c>',
         '<c r="F2"><v>nan</v></c>', '<c r="G2"><v>twelve</v></c>'],
        ['<c r="A3" t="b"><v>1</v></c>', '<c r="B3" t="b"><v>0</v></c>',
         '<c r="C3" t="e"><v>#DIV/0!</v></c>', '<c r="D3" t="e"/>',
         '<c r="E3"><f>A2*2</f><v>3</v></c>', '<c r="F3"><f>A2*2</f></c>',
         '<c r="G3" t="str"><f>"a"&amp;"b"</f><v>a&#10;b&lt;</v></c>',
         '<c r="H3" t="d"><v>2024-02-29T13:45:30</v></c>', '<c r="I3" t="s"><v>9</v></c>',
         '<c r="J3"><f t="shared" ref="J3:J4" si="0"/></c>'],
        ['<c r="A4" t="str"><v>line\r\nend</v></c>', '<c r="B4"><v>1_000</v></c>',
         '<c r="C4" t="n"><v>7</v></c>', '<c r="J4"><f t="shared" si="0"/><v>2</v></c>'],
    ]


@pytest.mark.parametrize("chunk", [1, 64, 1 << 20])
def test_every_kind_of_cell_as_the_streaming_parse_reads_it(chunk: int) -> None:
    """Shared, inline and rich strings, logicals, errors with and without text, formulas
    with and without a result (shared formulas too), text results with entities and line
    ends, ISO dates, blank and text values in number cells, nan: the column reader gives the
    raw value the streaming parse (defusedxml) gives, for every cell, whatever the chunk."""
    mine, theirs = _both(_part(_mixed_rows()), chunk)
    _assert_same(mine, theirs, 4, 10)
    assert mine.cells.raw(1, 2) == "in & out" and mine.cells.raw(1, 3) == "rich "
    assert mine.cells.raw(3, 7) == "a\nb<" and mine.cells.raw(4, 1) == "line\nend"
    assert mine.unsaved == {(3, 6), (3, 10)} and mine.errors == {(3, 3): "#DIV/0!",
                                                                  (3, 4): "#N/A"}


@pytest.mark.parametrize("shape, part", [
    ("prefixed", HEAD.replace(b"<worksheet xmlns=", b"<x:worksheet xmlns:x=")
     .replace(b"<sheetData>", b"<x:sheetData>") + b'<x:row r="1"><x:c r="A1"><x:v>1</x:v>'
     b"</x:c></x:row></x:sheetData></x:worksheet>"),
    ("no reference", _part([['<c><v>1</v></c>', '<c><v>2</v></c>']])),
    ("out of order", _part([['<c r="B1"><v>1</v></c>', '<c r="A1"><v>2</v></c>']])),
    ("given twice", _part([['<c r="A1"><v>1</v></c>', '<c r="A1"><v>2</v></c>']])),
    ("comment", _part([['<!-- a note --><c r="A1"><v>1</v></c>']])),
    ("unknown entity", _part([['<c r="A1" t="str"><v>&nbsp;</v></c>']])),
    ("lower-case reference", _part([['<c r="a1"><v>1</v></c>']])),
    ("single quotes", _part([["<c r='A1'><v>1</v></c>"]])),
    ("no sheet data end", HEAD + b'<row r="1"><c r="A1"><v>1</v></c></row>'),
    ("inline string tag with a space", _part([['<c r="A1" t="inlineStr"><is ><t>x</t></is></c>']])),
])
def test_shapes_it_does_not_take_are_refused_not_guessed(shape: str, part: bytes) -> None:
    """Each shape outside the plain one raises Irregular (the caller then reads the part
    with another reader) instead of returning values that might be wrong."""
    with pytest.raises(Irregular):
        read_columns(io.BytesIO(part), list, chunk=64)


def test_a_stray_far_cell_costs_one_entry_not_a_rectangle() -> None:
    """A table of 3 rows plus one number in row 1,048,576 of column XFD: the column store
    holds 3 + 1 numbers (no array of a million rows), and reads them back where they are."""
    rows = [[f'<c r="A{r}"><v>{r}</v></c>'] for r in (1, 2, 3)]
    part = _part(rows).replace(
        b"</sheetData>", b'<row r="1048576"><c r="XFD1048576"><v>42</v></c></row></sheetData>')
    read = read_columns(io.BytesIO(part), list)
    sizes = {c: len(col.numbers) for c, col in read.cells.columns.items()}
    assert sizes == {1: 3, 16384: 1}
    assert read.cells.raw(1_048_576, 16384) == 42.0
    assert read.cells.last_row(1, 16384) == 1_048_576
    far = read.cells.column(16384, 1_048_575, 1_048_576)
    assert isinstance(far, Mixed) and far.tolist() == ["", 42.0]
    view = read.cells.column(1, 1, 3)
    assert isinstance(view, np.ndarray) and not view.flags.writeable
    assert view.tolist() == [1.0, 2.0, 3.0]


def test_gaps_in_a_column_keep_their_rows() -> None:
    """Numbers with gaps (rows 1, 2, 5, 9) keep their rows: raw and column put each back
    in its own row and blanks between."""
    part = _part([[f'<c r="A{r}"><v>{r * 1.5}</v></c>'] if r in (1, 2, 5, 9) else []
                  for r in range(1, 10)])
    mine, theirs = _both(part, 32)
    _assert_same(mine, theirs, 9, 1)
    gaps = mine.cells.column(1, 1, 10)
    assert isinstance(gaps, Mixed)  # numbers in place, not a list of Python floats
    assert gaps.tolist() == [1.5, 3.0, "", "", 7.5, "", "", "", 13.5, ""]


@pytest.mark.parametrize("reader", READERS)
def test_a_refresh_reads_with_each_reader_and_the_default_is_ours(reader, tmp_path, monkeypatch
                                                                  ) -> None:
    """The every-kind book through ``BookValues``: each reader is used when the earlier ones
    are switched off, and all give the cells the column reader gives."""
    path = every_kind_book(tmp_path / "kinds.xlsx")
    pkg = open_package(path)
    with _values(pkg, path) as values:
        default = values.sheet("Data")
        assert values.readers["Data"] == "columnar"
    with monkeypatch.context() as m:
        only_reader(m, reader)
        with _values(pkg, path) as values:
            sv = values.sheet("Data")
            assert values.readers["Data"] == reader
            for r in range(1, 42):
                for c in range(1, 28):
                    a, b = sv.get(r, c), default.get(r, c)
                    if a.kind == "number" and reader == "fast":  # dates: to the microsecond
                        assert a.number == pytest.approx(b.number, rel=0, abs=1e-10)
                    else:
                        assert same_value(a, b), (r, c)


def test_shared_strings_by_byte_search_equal_the_hardened_parse(tmp_path) -> None:
    """The shared strings read by byte searches equal the defusedxml parse on the
    every-kind book, every example book and a crafted table (entities and character
    references, CR LF, preserved spaces, empty items both ways, rich runs, a phonetic run,
    a 40,000-character item capped); prefixed or commented tables are refused."""
    import zipfile

    from sheetfit.reader._sheetxml import read_shared_strings

    long = "y" * 40_000
    crafted = ('<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
               '<sst xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main" '
               'count="8" uniqueCount="8"><si><t>a &amp; b &lt;c&gt; &#233;&#x263A;</t></si>'
               '<si><t xml:space="preserve">  two\r\nlines </t></si><si><t/></si><si/>'
               '<si><r><rPr><b/></rPr><t>ri</t></r><r><t xml:space="preserve">ch </t></r>'
               '</si><si><t>kanji</t><rPh sb="0" eb="1"><t>kana</t></rPh>'
               '<phoneticPr fontId="1"/></si>'
               f'<si><t>{long}</t></si><si><t>"quoted" \'single\'</t></si></sst>').encode()
    parts = [crafted]
    books = [every_kind_book(tmp_path / "kinds.xlsx"), *sorted(
        (Path(__file__).parents[1] / "example_books").glob("*.xlsx"))]
    for book in books:
        with zipfile.ZipFile(book) as z:
            parts += [z.read(n) for n in z.namelist() if n.endswith("sharedStrings.xml")]
    assert len(parts) >= 2
    for data in parts:
        want = read_shared_strings(io.BytesIO(data))
        assert columnar.shared_strings(data) == want
        assert columnar.shared_strings(bytearray(data)) == want
    got = columnar.shared_strings(crafted)
    assert got[:6] == ["a & b <c> é☺", "  two\nlines ", "", "", "rich ", "kanji"]
    assert len(got[6]) == TEXT_CAP
    for bad in (crafted.replace(b"<sst xmlns=", b"<x:sst xmlns:x=").replace(b"<si>", b"<x:si>"),
                crafted.replace(b"<si/>", b"<!-- note --><si/>")):
        with pytest.raises(Irregular):
            columnar.shared_strings(bad)


def test_a_mixed_column_classifies_as_its_list_does() -> None:
    """A stretch of numbers with other cells among them (a header, text, a logical, an
    empty text, a long text, an error and a formula without its result over numbers)
    gives the same arrays as the same raw values one by one."""
    number = np.array([np.nan, 1.5, np.nan, -0.0, np.nan, np.nan, 7.0, np.nan, 2.5, np.nan])
    has = ~np.isnan(number)
    others = {0: "cost", 2: True, 4: "", 5: "x" * (TEXT_CAP + 50), 9: " lvl "}
    mixed = Mixed(number.copy(), has, others)
    errors, unsaved = {(18, 3): "#N/A"}, {(16, 3)}
    a = column_values("S", 3, 10, mixed, errors, unsaved, False)
    b = column_values("S", 3, 10, mixed.tolist(), errors, unsaved, False)
    assert a.kind.tolist() == b.kind.tolist()
    assert np.array_equal(a.number, b.number, equal_nan=True)
    assert a.text == b.text and len(a.text[5]) == TEXT_CAP
    assert [a.value(i) for i in range(len(a))] == [b.value(i) for i in range(len(b))]
