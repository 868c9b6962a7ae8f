"""Charts: what each chart part plots, read back from the written package; one set of charts
after a second refresh; what LibreOffice draws of them (PDF pages turned into pixels).

Every chart series reads a helper column on the model's charts sheet; these tests follow
each series' range to the helper formulas and from there to the cells they point at,
and compare those with the ranges the book's own defined names hold (the declarations
``sf_<model>_y`` / ``_x`` and the output names ``sf_<model>_fitted`` …).
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import zipfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest
from books import entries, invoices, line_rows, make_book, soffice_convert
from engine.cached import cached_formula_values
from lxml import etree

from sheetfit.reader.package import open_package, parse_rels, rels_part_of
from sheetfit.refresh import refresh

ROOT = Path(__file__).resolve().parents[1]
EXAMPLES = sorted((ROOT / "example_books").glob("*.xlsx"))
C = "http://schemas.openxmlformats.org/drawingml/2006/chart"
A = "http://schemas.openxmlformats.org/drawingml/2006/main"
CHART_TYPE = "application/vnd.openxmlformats-officedocument.drawingml.chart+xml"
_PARSER = etree.XMLParser(resolve_entities=False, no_network=True)
_REF = re.compile(r"((?:'(?:[^']|'')+'|[A-Za-z_][\w.]*)!\$?[A-Z]{1,3}\$?\d+)")
_RANGE = re.compile(r"^(?:'((?:[^']|'')+)'|([^'!]+))!\$?([A-Z]{1,3})\$?(\d+)(?::\$?([A-Z]{1,3})\$?(\d+))?$")


# ---------------------------------------------------------------- reading charts back


@dataclass(frozen=True)
class Plotted:
    part: str
    title: str
    kind: str
    series: list[tuple[str, str | None, str]]  # name, x (or categories) range, y range

    def one(self, name: str) -> tuple[str | None, str]:
        found = [(x, y) for n, x, y in self.series if n == name]
        assert len(found) == 1, (name, self.series)
        return found[0]


def _text(el: etree._Element | None, path: str) -> str:
    if el is None:
        return ""
    return "".join(t.text or "" for t in el.iterfind(path, {"c": C, "a": A}))


def _plotted(part: str, data: bytes) -> Plotted:
    root = etree.fromstring(data, _PARSER)
    ns = {"c": C}
    plot = root.find("c:chart/c:plotArea", ns)
    kind = next(etree.QName(e).localname for e in plot if etree.QName(e).localname.endswith("Chart"))
    series = []
    for ser in plot.iterfind(".//c:ser", ns):
        name = _text(ser, "c:tx//c:v")
        x = ser.find("c:xVal//c:f", ns)
        if x is None:
            x = ser.find("c:cat//c:f", ns)
        y = ser.find("c:yVal//c:f", ns)
        if y is None:
            y = ser.find("c:val//c:f", ns)
        series.append((name, x.text if x is not None else None, y.text))
    return Plotted(part, _text(root.find("c:chart/c:title", ns), ".//a:t"), kind, series)


def charts_of(path: Path) -> dict[str, list[Plotted]]:
    """The charts of every owned sheet, found through its rels (sheet → drawing → charts)."""
    ent = {n.lower(): d for n, d in entries(path).items()}
    out: dict[str, list[Plotted]] = {}
    for s in open_package(path).owned_sheets():
        rels = ent.get(rels_part_of(s.part).lower())
        for r in parse_rels(rels, s.part) if rels else []:
            if not r.type.endswith("/drawing"):
                continue
            for cr in parse_rels(ent[rels_part_of(r.part).lower()], r.part):
                if cr.type.endswith("/chart"):
                    out.setdefault(s.name, []).append(_plotted(cr.part, ent[cr.part.lower()]))
    return out


def _cells(text: str) -> list[list[str]]:
    """The cells of a range reference, as rows of 'Sheet!A1' without $ (sheet unquoted)."""
    m = _RANGE.match(text.lstrip("="))
    assert m, text
    sheet = (m.group(1) or "").replace("''", "'") or m.group(2)
    from sheetfit.a1 import col_index, col_letter

    c1, r1 = col_index(m.group(3)), int(m.group(4))
    c2 = col_index(m.group(5)) if m.group(5) else c1
    r2 = int(m.group(6)) if m.group(6) else r1
    return [[f"{sheet}!{col_letter(c)}{r}" for c in range(c1, c2 + 1)] for r in range(r1, r2 + 1)]


def _norm(ref: str) -> str:
    sheet, cell = ref.rsplit("!", 1)
    if sheet.startswith("'"):
        sheet = sheet[1:-1].replace("''", "'")
    return f"{sheet}!{cell.replace('$', '')}"


class Book:
    """A refreshed book: its defined names, formula cells and charts."""

    def __init__(self, path: Path) -> None:
        self.path = path
        self.names = {d.name.lower(): d.text for d in open_package(path).defined_names
                      if d.local_sheet_id is None}
        self.formulas = {f"{s}!{a}": c for (s, a), c in cached_formula_values(path).items()}
        self.charts = charts_of(path)

    def name(self, name: str, col: int = 0) -> list[str]:
        return [row[col] for row in _cells(self.names[name.lower()])]

    def targets(self, rng: str) -> list[list[str]]:
        """For each cell of a chart range: the cells its helper formula refers to."""
        out = []
        for (cell,) in _cells(rng):
            f = self.formulas.get(cell)
            out.append([] if f is None else [_norm(r) for r in _REF.findall(f.formula)])
        return out

    def values(self, rng: str) -> list[object]:
        return [self.formulas[c].value for (c,) in _cells(rng)]


def _on_sheet(rng: str | None, title: str) -> None:
    assert rng is not None and _cells(rng)[0][0].startswith(title + "!"), (rng, title)


def _data_column(book: Book, role_name: str, targets: list[list[str]]) -> list[int]:
    """Each helper reads one cell of the declared column, rows increasing; returns the rows."""
    text = book.names[role_name.lower()]  # e.g. Deliveries!$B:$B or Data!$A$1:$A$40
    sheet, cells = text.rsplit("!", 1)
    sheet = sheet[1:-1].replace("''", "'") if sheet.startswith("'") else sheet
    col = re.match(r"\$?([A-Z]+)", cells).group(1)
    rows = []
    for t in targets:
        m = re.fullmatch(rf"{re.escape(sheet)}!{col}(\d+)", t[0]) if len(t) == 1 else None
        assert m, (t, text)
        rows.append(int(m.group(1)))
    assert rows == sorted(set(rows))
    return rows


# ---------------------------------------------------------------- fixtures


@pytest.fixture(scope="module")
def refreshed(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    d = tmp_path_factory.mktemp("charts")
    out = {}
    for book in EXAMPLES:
        out[book.stem] = refresh(book, d / book.name).target
    return out


# ---------------------------------------------------------------- what the charts read


def test_least_squares_charts_read_data_coefficients_fitted_and_residuals(refreshed):
    book = Book(refreshed["delivery_costs"])
    line, resid, order, _ = book.charts["sf bykm charts"]
    assert line.kind == "scatterChart" and "against km driven" in line.title
    x, y = line.one("data")
    for rng in (x, y):
        _on_sheet(rng, "sf bykm charts")
    n = len(book.name("sf_bykm_fitted"))
    rows_y = _data_column(book, "sf_bykm_y", book.targets(y))
    rows_x = _data_column(book, "sf_bykm_x", book.targets(x))
    assert rows_x == rows_y and len(rows_y) == n
    lx, ly = line.one("fitted line")
    coef = set(book.name("sf_bykm_coef"))
    assert len(coef) == 2 and all(set(t) == coef for t in book.targets(ly))
    assert all(set(t) == {_cells(x)[0][0]} for t in book.targets(lx))  # MIN, MAX of the x
    # residuals against fitted: exactly the cells of the output names, in row order
    rx, ry = resid.one("residual")
    assert [t[0] for t in book.targets(ry)] == book.name("sf_bykm_resid")
    assert [t[0] for t in book.targets(rx)] == book.name("sf_bykm_fitted")
    zx, zy = resid.one("zero")
    assert len(_cells(zy)) == len(_cells(zx)) == 2
    assert [t[0] for t in book.targets(zx)] == [book.name("sf_bykm_fitted")[0]] * 2
    # the rows carry identifiers (months): the residuals again, in sheet order
    assert "in row order" in order.title
    ox, oy = order.one("residual")
    assert [t[0] for t in book.targets(oy)] == book.name("sf_bykm_resid")

    # the two models on delivery cost compared by their leave-one-out RMSE cells
    (compare,) = [c for c in book.charts["sf bykm charts"] if c.kind == "barChart"]
    _, loo = compare.one("leave-one-out RMSE")
    assert [t[0] for t in book.targets(loo)] == (book.name("sf_bykm_loo")
                                                 + book.name("sf_route_loo"))
    import python_calamine

    wb = python_calamine.load_workbook(str(book.path))
    for tag in ("bykm", "route"):
        sheet, cell = book.name(f"sf_{tag}_loo")[0].split("!")
        r = int(re.sub(r"[A-Z]+", "", cell)) - 1
        label = wb.get_sheet_by_name(sheet).to_python(skip_empty_area=False)[r][0]
        assert label == "leave-one-out RMSE"  # the cell the name holds is that figure

    route = Book(refreshed["delivery_costs"]).charts["sf route charts"][0]
    ox, oy = route.one("rows")
    assert [t[0] for t in book.targets(ox)] == book.name("sf_route_fitted")
    assert _data_column(book, "sf_route_y", book.targets(oy)) == rows_y
    dx, dy = route.one("observed = fitted")
    assert dx == dy and len(_cells(dx)) == 2


def test_strip_neighbour_and_comparison_charts(refreshed):
    book = Book(refreshed["field_jobs"])
    curve, resid, order, compare = book.charts["sf byhours charts"]
    assert "in row order" in order.title
    cx, cy = curve.one("strip mean")
    assert [t[0] for t in book.targets(cx)] == book.name("sf_byhours_centres")
    assert [t[0] for t in book.targets(cy)] == book.name("sf_byhours_means")
    dx, dy = curve.one("data")
    assert _data_column(book, "sf_byhours_x", book.targets(dx)) == _data_column(
        book, "sf_byhours_y", book.targets(dy))
    rx, ry = resid.one("residual")
    assert [t[0] for t in book.targets(ry)] == book.name("sf_byhours_resid")
    # one chart comparing the two models on cost: their leave-one-out error cells
    assert compare.kind == "barChart" and "leave-one-out RMSE" in compare.title
    _, loo = compare.one("leave-one-out RMSE")
    assert [t[0] for t in book.targets(loo)] == (book.name("sf_byhours_loo")
                                                 + book.name("sf_similar_loo"))
    diag, sresid, sorder = book.charts["sf similar charts"]
    assert [t[0] for t in book.targets(sorder.one("residual")[1])] == book.name(
        "sf_similar_resid")
    fx, fy = diag.one("rows")
    assert [t[0] for t in book.targets(fx)] == book.name("sf_similar_fitted")
    assert len(_data_column(book, "sf_similar_y", book.targets(fy))) == len(
        book.name("sf_similar_fitted"))
    rx, ry = sresid.one("residual")
    assert [t[0] for t in book.targets(ry)] == book.name("sf_similar_resid")
    assert [t[0] for t in book.targets(rx)] == book.name("sf_similar_fitted")


def test_vote_confusion_chart_reads_the_confusion_matrix(refreshed):
    book = Book(refreshed["open_invoices"])
    (conf,) = book.charts["sf late charts"]  # three attributes: no scatter in two of them
    assert conf.kind == "barChart"
    names = [s[0] for s in conf.series]
    assert names == ["predicted late", "predicted on time"]
    for b, name in enumerate(names):
        cats, vals = conf.one(name)
        _on_sheet(cats, "sf late charts")
        assert [t[0] for t in book.targets(vals)] == book.name("sf_late_confusion", b)


def test_vote_with_two_attributes_plots_classes_in_standard_units(engine, tmp_path: Path):
    rows = invoices(60, 5)
    p = make_book(tmp_path / "paid.xlsx", {"Paid": rows, "Opts": [["method", "neighbour_vote"]]},
                  {"sf_late_y": "Paid!$A$1:$A$61", "sf_late_x": "Paid!$B$1:$C$61",
                   "sf_late_opts": "Opts!$A$1:$B$1"})
    refresh(p)
    book = Book(p)
    scatter, conf = book.charts["sf late charts"]
    assert "in standard units" in scatter.title and conf.kind == "barChart"
    assert [s[0] for s in scatter.series] == ["late", "on time"]
    z1, z2 = book.name("sf_late_z", 0), book.name("sf_late_z", 1)
    for label in ("late", "on time"):
        x, y = scatter.one(label)
        assert [t[0] for t in book.targets(x)] == z1
        # each point: IF(EXACT(the row's label, the class), its z of the 2nd attribute, NA())
        tg = book.targets(y)
        assert [t[-1] for t in tg] == z2
        assert [t[0] for t in tg] == [f"Paid!A{r}" for r in range(2, 62)]
        plotted = sum(isinstance(v, float) for v in book.values(y))
        assert plotted == sum(r[0] == label for r in rows[1:])  # counted from the data
    from engine.compare import assert_cached_values_hold

    assert_cached_values_hold(p, engine)


def test_above_the_limit_every_kth_row_is_plotted_and_the_title_says_so(tmp_path: Path):
    n = 6001  # MAX_POINTS is 5000: every 2nd row
    p = make_book(tmp_path / "big.xlsx", {"Data": line_rows(n)},
                  {"sf_big_y": f"Data!$A$1:$A${n + 1}", "sf_big_x": f"Data!$B$1:$B${n + 1}"})
    refresh(p)
    book = Book(p)
    line, resid = book.charts["sf big charts"]
    for chart in (line, resid):
        assert chart.title.endswith("(every 2nd of 6,001 rows)"), chart.title
    x, y = line.one("data")
    assert _data_column(book, "sf_big_y", book.targets(y)) == list(range(2, n + 2, 2))
    assert _data_column(book, "sf_big_x", book.targets(x)) == list(range(2, n + 2, 2))
    _, ry = resid.one("residual")
    assert [t[0] for t in book.targets(ry)] == book.name("sf_big_resid")[::2]


# ---------------------------------------------------------------- one set of charts


def _chart_inventory(path: Path) -> tuple[list[str], list[str], int, int]:
    ent = entries(path)
    charts = sorted(n for n in ent if re.fullmatch(r"xl/charts/chart\d+\.xml", n))
    drawings = sorted(n for n in ent if re.fullmatch(r"xl/drawings/drawing\d+\.xml", n))
    rels = sum(1 for n in ent if n.endswith(".rels"))
    overrides = ent["[Content_Types].xml"].decode().count(CHART_TYPE)
    return charts, drawings, rels, overrides


@pytest.mark.parametrize("book", EXAMPLES, ids=[p.stem for p in EXAMPLES])
def test_second_refresh_leaves_one_set_of_charts(book: Path, tmp_path: Path):
    p = tmp_path / book.name
    shutil.copyfile(book, p)
    refresh(p)
    first = _chart_inventory(p)
    planned = sum(len(v) for v in charts_of(p).values())
    assert planned >= 1 and len(first[0]) == planned == first[3]
    refresh(p)
    assert _chart_inventory(p) == first
    reached = {c.part for v in charts_of(p).values() for c in v}
    assert reached == set(first[0])


# ---------------------------------------------------------------- what LibreOffice draws


def _pages_text(pdf: Path) -> list[str]:
    out = subprocess.run(["pdftotext", "-layout", str(pdf), "-"], capture_output=True,
                         check=True, timeout=120).stdout.decode()
    return [" ".join(p.split()) for p in out.split("\f")]


def _ppm(pdf: Path, page: int, stem: Path, fmt: str) -> Path:
    flag = ["-png"] if fmt == "png" else []  # PPM is pdftoppm's own default
    subprocess.run(["pdftoppm", *flag, "-r", "72", "-f", str(page), "-l", str(page),
                    "-singlefile", str(pdf), str(stem)], check=True, timeout=120)
    return stem.with_suffix("." + ("png" if fmt == "png" else "ppm"))


def _read_ppm(path: Path) -> np.ndarray:
    data = path.read_bytes()
    parts = data.split(maxsplit=4)
    if parts[0] != b"P6":
        raise ValueError("not a binary PPM")
    w, h = int(parts[1]), int(parts[2])
    return np.frombuffer(parts[4][: w * h * 3], dtype=np.uint8).reshape(h, w, 3)


def marked_rows(img: np.ndarray) -> int:
    """How many pixel rows hold plotted marks: saturated colour (series colours are blue,
    orange …; frames, grid, text and reference lines are grey or black). A legend's
    colour keys fill a band a few rows high; points and bars spread over many rows."""
    rgb = img.astype(int)
    colour = (rgb.max(axis=2) - rgb.min(axis=2)) > 60
    return int(np.count_nonzero(colour.any(axis=1)))


#: Fewest pixel rows (at 72 dpi) with marks for a chart that plots its data; a legend alone
#: covers < 12 (measured on the empty-chart control below: 6 or fewer).
MIN_MARKED_ROWS = 40


def _png_dir(tmp_path: Path) -> Path:
    d = Path(os.environ.get("SHEETFIT_CHART_PNGS", tmp_path / "chart-pngs"))
    d.mkdir(parents=True, exist_ok=True)
    return d


def _chart_pages(pdf: Path, titles: list[str]) -> dict[str, int]:
    pages = _pages_text(pdf)
    found = {}
    for t in titles:
        key = " ".join(t.split())[:40]
        hits = [i + 1 for i, text in enumerate(pages) if key in text]
        assert len(hits) == 1, f"chart {t!r} on pages {hits}"
        found[t] = hits[0]
    return found


def test_libreoffice_draws_marks_in_every_chart(refreshed, tmp_path: Path, capsys):
    """Each example book exported to PDF: every chart's page holds plotted marks."""
    out = _png_dir(tmp_path)
    counts = {}
    for stem, path in refreshed.items():
        pdf = soffice_convert(path, tmp_path / "pdf", "pdf")
        titles = [c.title for v in charts_of(path).values() for c in v]
        for k, (title, page) in enumerate(_chart_pages(pdf, titles).items()):
            _ppm(pdf, page, out / f"{stem}-chart{k + 1}", "png")
            img = _read_ppm(_ppm(pdf, page, tmp_path / f"{stem}-{k}", "ppm"))
            counts[title] = marked_rows(img)
    with capsys.disabled():
        print("\nmarked pixel rows per chart:", counts)
        print(f"\nchart pages as PNG: {out}")
    empty = {t: n for t, n in counts.items() if n < MIN_MARKED_ROWS}
    assert not empty, empty


def test_the_mark_check_fails_on_an_empty_chart(refreshed, tmp_path: Path):
    """Control: the same book with every series pointed at empty cells draws frames and
    legends only, and the check says so."""
    src = refreshed["delivery_costs"]
    bad = tmp_path / "empty.xlsx"
    with zipfile.ZipFile(src) as zin, zipfile.ZipFile(bad, "w") as zout:
        for info in zin.infolist():
            data = zin.read(info)
            if re.fullmatch(r"xl/charts/chart\d+\.xml", info.filename):
                text = data.decode()
                text = re.sub(r"<c:f>('[^']+')!\$[A-Z]+\$\d+:\$[A-Z]+\$\d+</c:f>",
                              r"<c:f>\1!$Z$900:$Z$910</c:f>", text)
                text = re.sub(r"<c:pt idx=\"\d+\"><c:v>[^<]*</c:v></c:pt>", "", text)
                data = text.encode()
            zout.writestr(info, data)
    pdf = soffice_convert(bad, tmp_path / "pdf", "pdf")
    titles = [c.title for v in charts_of(bad).values() for c in v]
    for k, page in enumerate(_chart_pages(pdf, titles).values()):
        img = _read_ppm(_ppm(pdf, page, tmp_path / f"empty-{k}", "ppm"))
        print("empty chart, marked rows:", marked_rows(img))
        assert marked_rows(img) < 12


def test_names_that_read_like_formulas_stay_text_in_charts(tmp_path: Path):
    """Headers and class labels starting with '=' are chart text, never a chart formula."""
    rows = [["=SUM(9,9)", "+qty", "@home"]] + [
        ["=9-9" if r[0] == "late" else "@late", r[1], r[2]] for r in invoices(30, 3)[1:]]
    p = make_book(tmp_path / "h.xlsx", {"D": rows, "O": [["method", "neighbour_vote"]]},
                  {"sf_h_y": "D!$A$1:$A$31", "sf_h_x": "D!$B$1:$C$31", "sf_h_opts": "O!$A$1:$B$1"})
    refresh(p)
    (scatter, conf) = charts_of(p)["sf h charts"]
    assert [s[0] for s in scatter.series] == [" =9-9", "@late"]  # a leading space keeps it text
    assert conf.title.startswith("Model h — =SUM(9,9)")
    for part, data in entries(p).items():
        if part.startswith("xl/charts/"):
            root = etree.fromstring(data, _PARSER)
            assert not root.findall(f".//{{{C}}}tx/{{{C}}}strRef"), part


def test_attached_parts_are_numbered_above_every_name_in_use():
    """A rendered drawing and its charts get numbers above any in the user's package, an
    orphaned rels part's name included; rels are rewritten to the new names."""
    from sheetfit.writer._graft_parts import attached_of, place, taken_names

    rel = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
    pkg_rel = "http://schemas.openxmlformats.org/package/2006/relationships"

    def rels(*items: tuple[str, str, str]) -> bytes:
        body = "".join(f'<Relationship Id="{i}" Type="{rel}/{t}" Target="{g}"/>'
                       for i, t, g in items)
        return f'<Relationships xmlns="{pkg_rel}">{body}</Relationships>'.encode()

    rendered = {
        "xl/worksheets/_rels/sheet1.xml.rels": rels(("rId1", "drawing", "../drawings/drawing1.xml")),
        "xl/drawings/drawing1.xml": b"<d/>",
        "xl/drawings/_rels/drawing1.xml.rels": rels(("rId1", "chart", "../charts/chart1.xml"),
                                                    ("rId2", "chart", "../charts/chart2.xml")),
        "xl/charts/chart1.xml": b"<c1/>",
        "xl/charts/chart2.xml": b"<c2/>",
    }
    ct = ('<Types><Override PartName="/xl/drawings/drawing1.xml" ContentType="D"/>'
          '<Override PartName="/xl/charts/chart1.xml" ContentType="C"/>'
          '<Override PartName="/xl/charts/chart2.xml" ContentType="C"/></Types>')
    att = attached_of("xl/worksheets/sheet1.xml", rendered.get, ct)
    assert att is not None and list(att.parts) == ["xl/drawings/drawing1.xml",
                                                   "xl/charts/chart1.xml", "xl/charts/chart2.xml"]
    taken = taken_names({"xl/charts/chart3.xml", "xl/drawings/_rels/drawing5.xml.rels",
                         "xl/worksheets/sheet9.xml"})
    out, by_type = place([("xl/worksheets/sheet10.xml", att)], taken, "xl", "xl")
    names = dict(out)
    assert by_type == {"D": ["xl/drawings/drawing6.xml"],
                       "C": ["xl/charts/chart4.xml", "xl/charts/chart5.xml"]}
    assert b'Target="../drawings/drawing6.xml"' in names["xl/worksheets/_rels/sheet10.xml.rels"]
    d_rels = names["xl/drawings/_rels/drawing6.xml.rels"]
    assert b'Id="rId1"' in d_rels and b'Target="../charts/chart4.xml"' in d_rels
    assert b'Target="../charts/chart5.xml"' in d_rels
    assert names["xl/charts/chart5.xml"] == b"<c2/>"


def test_comparison_only_between_like_errors(tmp_path: Path):
    """Two votes on one response are compared by error rate; a neighbour mean on the same
    (numeric class code) column is not put beside them: an RMSE is not an error rate."""
    rows = invoices(40, 2, numeric=True)
    opts = {"v1": [["method", "neighbour_vote"], ["k", 3]],
            "v2": [["method", "neighbour_vote"], ["k", 7]],
            "m": [["method", "neighbour_mean"]]}
    sheets = {"D": rows, **{f"O{t}": o for t, o in opts.items()}}
    names = {}
    for t, o in opts.items():
        names |= {f"sf_{t}_y": "D!$A$1:$A$41", f"sf_{t}_x": "D!$B$1:$C$41",
                  f"sf_{t}_opts": f"O{t}!$A$1:$B${len(o)}"}
    p = make_book(tmp_path / "codes.xlsx", sheets, names)
    refresh(p)
    book = Book(p)
    compare = book.charts["sf v1 charts"][-1]
    assert compare.title == "outcome: leave-one-out error rate of the models on it"
    _, loo = compare.one("leave-one-out error rate")
    assert [t[0] for t in book.targets(loo)] == book.name("sf_v1_loo") + book.name("sf_v2_loo")
    assert all("of the models" not in c.title for c in book.charts["sf m charts"])


def test_a_column_s_extremes_found_a_block_at_a_time() -> None:
    """What the zero line and the axis bounds read of a million-row column (its finite
    smallest and largest) is found block by block in a lazy column, and equals numpy's
    min and max of the finite numbers; texts, logicals, nan and infinity are skipped."""
    from sheetfit.sheets.charts import extremes, numbers
    from sheetfit.vectors import BLOCK, Lazy

    rng = np.random.default_rng(17)
    v = rng.normal(50, 20, 3 * BLOCK + 11)
    v[[5, BLOCK + 3]] = [np.inf, np.nan]
    v[2 * BLOCK + 7] = -1e9  # the smallest, in the third block
    lazy = Lazy(len(v), lambda a, b: v[a:b].copy())
    finite = v[np.isfinite(v)]
    want = [float(finite.min()), float(finite.max())]
    assert extremes(lazy).tolist() == want == extremes(v).tolist()
    mixed = ["", "text", True, 3.5, float("nan"), -2.0, None]
    assert extremes(mixed).tolist() == [-2.0, 3.5] == [min(numbers(mixed)), max(numbers(mixed))]
    assert extremes(Lazy(2, lambda a, b: np.array([np.nan, np.inf])[a:b])).size == 0
