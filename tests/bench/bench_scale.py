"""Benchmark at scale: sheetfit refresh against plain read-fit-write pipelines.

Run from the repository root with the project's venv (not part of the test suite; pytest
collects only ``test_*.py``, and nothing here is named so):

    python tests/bench/bench_scale.py --rows 10000,100000 --recalc --json bench.json

For each size and model kind (least squares; neighbour mean, k = 10) one seeded book is
written (xlsxwriter ``constant_memory``: rows are streamed, so a 1,000,000-row book costs
no more memory than a small one). Then, each in its own process, with the plain pipeline
first and sheetfit second in every repeat:

- sheetfit: ``sheetfit.refresh.refresh(book, out)``;
- least-squares pipeline: ``pandas.read_excel`` (openpyxl) + statsmodels OLS +
  ``DataFrame.to_excel`` of fitted values and residuals;
- neighbour-mean pipeline: ``pandas.read_excel`` + z-scores (population SD, as sheetfit)
  + scikit-learn ``KNeighborsRegressor(n_neighbors=10)``, fitted values leave-one-out
  (``kneighbors()`` without X leaves each row out of its own neighbours, as sheetfit does)
  + ``to_excel`` of fitted values and residuals.

Wall time is the parent's ``perf_counter`` around ``subprocess.run`` (interpreter start
and imports included); peak memory is the child's own ``ru_maxrss``. With ``--repeat N``
each figure is the median of N runs. ``--recalc`` (sizes up to 100,000 rows) also times
LibreOffice loading sheetfit's output with a hard recalculation on load and exporting
one small sheet, as one ``soffice --convert-to`` process on a fresh profile.

``--agree`` first checks, on 1,000-row books, that both sides fit the same values (the
largest difference of the fitted values is printed; about 5e-12 when measured).
Everything is written under a temporary folder (``--keep DIR`` keeps the books there).
"""

from __future__ import annotations

import argparse
import itertools
import json
import os
import platform
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
import zipfile
from dataclasses import asdict, dataclass, field
from pathlib import Path

import numpy as np
import xlsxwriter

SEED = 20_110  # numpy default_rng seed of every book (the size and kind are mixed in below)
K = 10  # neighbours of the neighbour-mean model, as in the issue
RECALC_LIMIT = 100_000  # LibreOffice timings only up to this many rows (slow above)
SHEET_ROWS = 1_048_576  # the sheet's row limit: data rows + 1 header row must fit

# Attribute headers (an invented depot-shipment scenario); the 1,000,000-row least-squares
# book has a fifth attribute, as issue 11 asks.
ATTRS = ["weight_kg", "distance_km", "stops", "pallets", "wait_min"]
RESPONSE = "cost"

SHEETFIT_CHILD = """
import resource, sys
from sheetfit.refresh import refresh
refresh(sys.argv[1], sys.argv[2])
print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)
"""

LS_CHILD = """
import resource, sys
import pandas as pd, statsmodels.api as sm
book, out, attrs = sys.argv[1], sys.argv[2], sys.argv[3].split(",")
df = pd.read_excel(book, sheet_name="Data", engine="openpyxl")
res = sm.OLS(df[df.columns[0]], sm.add_constant(df[attrs])).fit()
pd.DataFrame({"fitted": res.fittedvalues, "residual": res.resid}).to_excel(out, index=False)
print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)
"""

NM_CHILD = """
import resource, sys
import pandas as pd
from sklearn.neighbors import KNeighborsRegressor
book, out, attrs, k = sys.argv[1], sys.argv[2], sys.argv[3].split(","), int(sys.argv[4])
df = pd.read_excel(book, sheet_name="Data", engine="openpyxl")
x = df[attrs]
z = ((x - x.mean()) / x.std(ddof=0)).to_numpy()
y = df[df.columns[0]].to_numpy()
knn = KNeighborsRegressor(n_neighbors=k).fit(z, y)
_, idx = knn.kneighbors()  # no X: each row's k nearest other rows (leave-one-out)
fitted = y[idx].mean(axis=1)
pd.DataFrame({"fitted": fitted, "residual": y - fitted}).to_excel(out, index=False)
print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)
"""

# LibreOffice setting "recalculation on file load" for OOXML: 0 = always (1 = never,
# 2 = ask). Opened as is, LibreOffice keeps cached values (docs/engine-facts.md, E2).
RECALC_XCU = """<?xml version="1.0" encoding="UTF-8"?>
<oor:items xmlns:oor="http://openoffice.org/2001/registry" \
xmlns:xs="http://www.w3.org/2001/XMLSchema" \
xmlns:xsi="http://www.w3.org/2001/XMLSchema-instance">
<item oor:path="/org.openoffice.Office.Calc/Formula/Load">\
<prop oor:name="OOXMLRecalcMode" oor:op="fuse"><value>{mode}</value></prop></item>
</oor:items>
"""


@dataclass
class Side:
    """One side's medians over the repeats: wall seconds and peak RSS (MiB)."""

    seconds: float
    peak_mib: float
    runs: list[dict[str, float]] = field(default_factory=list)


@dataclass
class Row:
    rows: int
    model: str
    attributes: int
    sheetfit: Side
    baseline: Side
    time_ratio: float
    peak_ratio: float
    book_bytes: int
    out_bytes: int
    out_bytes_per_row: float
    added_bytes_per_row: float
    arrays_mib: float
    sheetfit_beyond_arrays_mib: float
    baseline_beyond_arrays_mib: float
    beyond_arrays_growth_bytes_per_row: float | None = None
    lo_recalc_seconds: float | None = None


# --- books -------------------------------------------------------------------------------


def make_data(n: int, p: int, kind: str) -> tuple[np.ndarray, np.ndarray]:
    """Seeded shipment-like data: n rows, p attributes, a response with noise (invented)."""
    rng = np.random.default_rng([SEED, n, p, 0 if kind == "least_squares" else 1])
    lows = np.array([50.0, 5.0, 1.0, 1.0, 0.0])[:p]
    highs = np.array([2000.0, 400.0, 12.0, 26.0, 90.0])[:p]
    x = rng.uniform(lows, highs, size=(n, p)).round(1)
    rates = np.array([0.12, 1.9, 14.0, 6.5, 0.8])[:p]
    if kind == "least_squares":
        y = 85.0 + x @ rates + rng.normal(0, 40, n)
    else:  # a curved surface, where averaging neighbours earns its place
        y = 85.0 + x @ rates + 0.004 * x[:, 1] ** 2 + rng.normal(0, 40, n)
    return x, y.round(2)


def write_book(path: Path, n: int, p: int, kind: str) -> None:
    """The book: Data (header + n rows, streamed) and, for a neighbour model, Opts."""
    if n + 1 > SHEET_ROWS:
        raise ValueError(f"{n} rows and a header do not fit in one sheet ({SHEET_ROWS} rows)")
    x, y = make_data(n, p, kind)
    wb = xlsxwriter.Workbook(str(path), {"constant_memory": True})
    ws = wb.add_worksheet("Data")
    ws.write_row(0, 0, [RESPONSE] + ATTRS[:p])
    block = np.column_stack([y, x])
    for start in range(0, n, 50_000):  # tolist() per chunk: Python floats, bounded memory
        for i, values in enumerate(block[start:start + 50_000].tolist(), start + 1):
            ws.write_row(i, 0, values)
    last = n + 1
    end_col = chr(ord("A") + p)
    model = "ls" if kind == "least_squares" else "nm"
    wb.define_name(f"sf_{model}_y", f"=Data!$A$1:$A${last}")
    wb.define_name(f"sf_{model}_x", f"=Data!$B$1:${end_col}${last}")
    if kind == "neighbour_mean":
        opts = wb.add_worksheet("Opts")
        for i, pair in enumerate([("setting", "value"), ("method", "neighbour_mean"),
                                  ("k", K)]):
            opts.write_row(i, 0, list(pair))
        wb.define_name("sf_nm_opts", "=Opts!$A$1:$B$3")
    wb.close()


# --- processes ---------------------------------------------------------------------------


def run_child(args: list[str]) -> dict[str, float]:
    """Wall seconds (parent's clock) and the child's own peak RSS in MiB."""
    t = time.perf_counter()
    done = subprocess.run([sys.executable, *args], capture_output=True, text=True, check=False)
    wall = time.perf_counter() - t
    if done.returncode != 0:
        raise RuntimeError(f"{args[:2]} exited {done.returncode}:\n{done.stderr[-3000:]}")
    return {"seconds": wall, "peak_mib": int(done.stdout.split()[-1]) / 1024}


def median_side(runs: list[dict[str, float]]) -> Side:
    return Side(statistics.median(r["seconds"] for r in runs),
                statistics.median(r["peak_mib"] for r in runs), runs)


# --- LibreOffice ---------------------------------------------------------------------------


def sheet_number(book: Path, title: str) -> int:
    """1-based position of a sheet in the workbook (the CSV filter picks a sheet by it)."""
    with zipfile.ZipFile(book) as z:
        text = z.read("xl/workbook.xml").decode("utf-8")
    names = re.findall(r'<sheet\b[^>]*?\bname="([^"]*)"', text)
    if title not in names:
        raise RuntimeError(f"{book.name} has no sheet {title!r} (sheets: {names})")
    return names.index(title) + 1


def soffice_convert(book: Path, sheet: int, workdir: Path, *, recalc: bool) -> tuple[float, str]:
    """Time one ``soffice --convert-to csv`` of one sheet on a fresh profile.

    Returns (wall seconds, the CSV text). The profile is made afresh with only the
    recalculation-on-load setting (always, or never for the self-check's control).
    The conversion's exit status says nothing (docs/engine-facts.md, E4): the CSV must exist.
    """
    exe = shutil.which("soffice") or "/usr/lib/libreoffice/program/soffice"
    run_dir = Path(tempfile.mkdtemp(prefix="lo-", dir=workdir))
    profile, outdir = run_dir / "profile", run_dir / "out"
    (profile / "user").mkdir(parents=True)
    outdir.mkdir()
    xcu = RECALC_XCU.format(mode=0 if recalc else 1)
    (profile / "user" / "registrymodifications.xcu").write_text(xcu, encoding="utf-8")
    csv_filter = f"csv:Text - txt - csv (StarCalc):44,34,76,1,,0,false,true,false,false,false,{sheet}"
    env = {**os.environ, "SAL_USE_VCLPLUGIN": "svp"}
    t = time.perf_counter()
    subprocess.run([exe, f"-env:UserInstallation={profile.as_uri()}", "--headless",
                    "--invisible", "--norestore", "--nolockcheck", "--nologo",
                    "--convert-to", csv_filter, "--outdir", str(outdir), str(book)],
                   capture_output=True, env=env, timeout=3600, check=False)
    wall = time.perf_counter() - t
    outs = sorted(outdir.glob("*.csv"))
    if not outs:
        raise RuntimeError(f"LibreOffice wrote no CSV for {book}")
    text = outs[0].read_text(encoding="utf-8")
    shutil.rmtree(run_dir, ignore_errors=True)
    return wall, text


def lo_selfcheck(workdir: Path) -> float:
    """Prove the hard recalculation happens: a formula =1+1 cached as 5 must export 2
    (and 5 with recalculation off). Returns the conversion time of this tiny book, which
    is LibreOffice's start-up and export overhead in every recalc figure."""
    book = workdir / "recalc_selfcheck.xlsx"
    wb = xlsxwriter.Workbook(str(book))
    wb.add_worksheet("First").write(0, 0, "first")
    wb.add_worksheet("Check").write_formula(0, 0, "=1+1", None, 5)
    wb.close()
    seconds, text = soffice_convert(book, 2, workdir, recalc=True)
    _, control = soffice_convert(book, 2, workdir, recalc=False)
    if text.strip() != "2" or control.strip() != "5":
        raise RuntimeError(f"hard recalculation on load did not behave: {text!r}, {control!r}")
    return seconds


# --- the runs ------------------------------------------------------------------------------


def arrays_bytes(n: int, p: int, kind: str) -> int:
    """The numeric arrays a fit cannot do without: the response and the design columns
    (n × (p + 1) doubles; least squares adds the intercept column, the neighbour model its
    standard units), and for the neighbour model the index (k row numbers and k distances,
    8 bytes each, per row)."""
    size = n * (p + 1) * 8
    if kind == "neighbour_mean":
        size += n * K * 16
    return size


def bench(n: int, kind: str, workdir: Path, repeat: int, recalc: bool) -> Row:
    p = 5 if (kind == "least_squares" and n >= 1_000_000) else 4
    book = workdir / f"{kind}_{n}.xlsx"
    t = time.perf_counter()
    write_book(book, n, p, kind)
    print(f"  book {book.name}: {book.stat().st_size / 2**20:.1f} MiB written in "
          f"{time.perf_counter() - t:.1f} s", file=sys.stderr)
    attrs = ",".join(ATTRS[:p])
    base_runs, ours_runs = [], []
    out = workdir / f"{kind}_{n}_sheetfit.xlsx"
    for r in range(repeat):  # alternating, the plain pipeline first in every repeat
        base_out = workdir / f"{kind}_{n}_baseline.xlsx"
        if kind == "least_squares":
            base_runs.append(run_child(["-c", LS_CHILD, str(book), str(base_out), attrs]))
        else:
            base_runs.append(run_child(["-c", NM_CHILD, str(book), str(base_out), attrs,
                                        str(K)]))
        out.unlink(missing_ok=True)
        ours_runs.append(run_child(["-c", SHEETFIT_CHILD, str(book), str(out)]))
        print(f"  run {r + 1}/{repeat}: baseline {base_runs[-1]['seconds']:.1f} s, "
              f"sheetfit {ours_runs[-1]['seconds']:.1f} s", file=sys.stderr)
    base, ours = median_side(base_runs), median_side(ours_runs)
    arrays = arrays_bytes(n, p, kind) / 2**20
    row = Row(
        rows=n, model=kind, attributes=p, sheetfit=ours, baseline=base,
        time_ratio=ours.seconds / base.seconds, peak_ratio=ours.peak_mib / base.peak_mib,
        book_bytes=book.stat().st_size, out_bytes=out.stat().st_size,
        out_bytes_per_row=out.stat().st_size / n,
        added_bytes_per_row=(out.stat().st_size - book.stat().st_size) / n,
        arrays_mib=arrays,
        sheetfit_beyond_arrays_mib=ours.peak_mib - arrays,
        baseline_beyond_arrays_mib=base.peak_mib - arrays,
    )
    if recalc and n <= RECALC_LIMIT:
        sheet = sheet_number(out, "sf index")  # a small sheet: the export adds little
        times = [soffice_convert(out, sheet, workdir, recalc=True)[0] for _ in range(repeat)]
        row.lo_recalc_seconds = statistics.median(times)
    return row


def small_book(workdir: Path, runs: int = 5) -> dict[str, object]:
    """A 100-row least-squares book refreshed by ``python -m sheetfit refresh`` in a new
    process: wall time including interpreter start, median of ``runs``."""
    book = workdir / "small_100.xlsx"
    write_book(book, 100, 4, "least_squares")
    times = []
    for i in range(runs):
        out = workdir / f"small_100_out_{i}.xlsx"
        t = time.perf_counter()
        done = subprocess.run([sys.executable, "-m", "sheetfit", "refresh", str(book),
                               "--out", str(out)], capture_output=True, text=True,
                              check=False)
        times.append(time.perf_counter() - t)
        if done.returncode != 0:
            raise RuntimeError(f"sheetfit refresh exited {done.returncode}: {done.stderr}")
    return {"rows": 100, "seconds_median": statistics.median(times), "seconds": times}


def agreement(workdir: Path, n: int = 1000) -> dict[str, float]:
    """Both sides do the same job: on n-row books, the largest difference between
    sheetfit's cached fitted values (the ``sf_<model>_fitted`` range) and the plain
    pipeline's, per model kind. Raises above 1e-9 × the response's scale (both are
    double-precision solutions of the same problem; measured: about 5e-12 on 1,000 rows)."""
    import openpyxl
    import pandas as pd

    found = {}
    for kind in ("least_squares", "neighbour_mean"):
        model = "ls" if kind == "least_squares" else "nm"
        book = workdir / f"agree_{kind}.xlsx"
        write_book(book, n, 4, kind)
        out, base = workdir / f"agree_{kind}_sheetfit.xlsx", workdir / f"agree_{kind}_plain.xlsx"
        child = LS_CHILD if kind == "least_squares" else NM_CHILD
        run_child(["-c", child, str(book), str(base), ",".join(ATTRS[:4]), str(K)])
        out.unlink(missing_ok=True)
        run_child(["-c", SHEETFIT_CHILD, str(book), str(out)])
        wb = openpyxl.load_workbook(out, data_only=True)
        sheet, ref = wb.defined_names[f"sf_{model}_fitted"].attr_text.split("!")
        ours = np.array([c.value for row in wb[sheet.strip("'")][ref.replace("$", "")]
                         for c in row], dtype=float)
        theirs = pd.read_excel(base, engine="openpyxl")["fitted"].to_numpy(dtype=float)
        y = make_data(n, 4, kind)[1]
        if ours.shape != theirs.shape:
            raise RuntimeError(f"{kind}: {ours.size} fitted values against {theirs.size}")
        gap = float(np.max(np.abs(ours - theirs)))
        if gap > 1e-9 * float(np.max(np.abs(y))):
            raise RuntimeError(f"{kind}: sheetfit and the plain pipeline differ by {gap:g}")
        found[kind] = gap
    return found


# --- report ----------------------------------------------------------------------------------


def add_growth(rows: list[Row]) -> None:
    """Per model, how sheetfit's memory beyond the arrays grows per added data row."""
    for kind in {r.model for r in rows}:
        mine = sorted((r for r in rows if r.model == kind), key=lambda r: r.rows)
        for a, b in itertools.pairwise(mine):
            extra = (b.sheetfit_beyond_arrays_mib - a.sheetfit_beyond_arrays_mib) * 2**20
            b.beyond_arrays_growth_bytes_per_row = extra / (b.rows - a.rows)


def markdown(rows: list[Row], small: dict[str, object] | None, lo_overhead: float | None) -> str:
    def f(v: float | None, fmt: str) -> str:
        return "—" if v is None else format(v, fmt)

    lines = [
        ("| rows | model | sheetfit s / MiB | plain s / MiB | time × | peak × "
         "| out MiB | B/row (added) | sheetfit − arrays MiB (growth B/row) | LO recalc s |"),
        "|---:|---|---:|---:|---:|---:|---:|---:|---:|---:|",
    ]
    for r in rows:
        lines.append(
            f"| {r.rows:,} | {r.model.replace('_', ' ')} ×{r.attributes} "
            f"| {r.sheetfit.seconds:.1f} / {r.sheetfit.peak_mib:.0f} "
            f"| {r.baseline.seconds:.1f} / {r.baseline.peak_mib:.0f} "
            f"| {r.time_ratio:.2f} | {r.peak_ratio:.2f} | {r.out_bytes / 2**20:.1f} "
            f"| {r.out_bytes_per_row:.0f} ({r.added_bytes_per_row:.0f}) "
            f"| {r.sheetfit_beyond_arrays_mib:.0f} "
            f"({f(r.beyond_arrays_growth_bytes_per_row, ',.0f')}) "
            f"| {f(r.lo_recalc_seconds, '.1f')} |"
        )
    if small is not None:
        lines.append("")
        lines.append(f"Small book: 100 rows, least squares, `python -m sheetfit refresh` in a "
                     f"new process: {small['seconds_median']:.2f} s (median of "
                     f"{len(small['seconds'])})."  # type: ignore[arg-type]
                     )
    if lo_overhead is not None:
        lines.append(f"LibreOffice start-up + export overhead (a one-formula book): "
                     f"{lo_overhead:.1f} s, included in every LO recalc figure.")
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--rows", default="10000,100000",
                        help="comma-separated sizes (e.g. 10000,100000,200000,1000000)")
    parser.add_argument("--models", default="least_squares,neighbour_mean",
                        help="comma-separated: least_squares, neighbour_mean")
    parser.add_argument("--repeat", type=int, default=1, help="runs per side; medians")
    parser.add_argument("--recalc", action="store_true",
                        help=f"time LibreOffice load + hard recalculation (≤ {RECALC_LIMIT:,} rows)")
    parser.add_argument("--agree", action="store_true",
                        help="first check on 1,000-row books that both sides fit the same values")
    parser.add_argument("--no-small", action="store_true", help="skip the 100-row line")
    parser.add_argument("--json", type=Path, help="also write the figures as JSON here")
    parser.add_argument("--keep", type=Path, help="write the books in this folder and keep them")
    args = parser.parse_args(argv)
    sizes = [int(s.replace("_", "")) for s in args.rows.split(",") if s.strip()]
    kinds = [k.strip() for k in args.models.split(",") if k.strip()]
    for k in kinds:
        if k not in ("least_squares", "neighbour_mean"):
            parser.error(f"unknown model kind {k!r}")
    if args.repeat < 1:
        parser.error("--repeat must be at least 1")

    if args.keep is not None:
        args.keep.mkdir(parents=True, exist_ok=True)
        workdir = args.keep
        cleanup = None
    else:
        cleanup = tempfile.TemporaryDirectory(prefix="sheetfit-bench-")
        workdir = Path(cleanup.name)
    try:
        agree = agreement(workdir) if args.agree else None
        if agree is not None:
            print(f"agreement (largest |fitted difference|): {agree}", file=sys.stderr)
        lo_overhead = lo_selfcheck(workdir) if args.recalc else None
        rows = []
        for n in sizes:
            for kind in kinds:
                print(f"{n:,} rows, {kind}", file=sys.stderr)
                rows.append(bench(n, kind, workdir, args.repeat, args.recalc))
                print(f"  {json.dumps(asdict(rows[-1]))}", file=sys.stderr)  # kept if cut short
        add_growth(rows)
        small = None if args.no_small else small_book(workdir)
    finally:
        if cleanup is not None:
            cleanup.cleanup()
    print(markdown(rows, small, lo_overhead))
    if args.json is not None:
        report = {
            "date": time.strftime("%Y-%m-%d"),
            "machine": {"cpus": os.cpu_count(), "python": platform.python_version(),
                        "platform": platform.platform()},
            "seed": SEED, "k": K, "repeat": args.repeat,
            "order": "per repeat: plain pipeline first, then sheetfit",
            "rows": [asdict(r) for r in rows],
            "small_book": small,
            "lo_overhead_seconds": lo_overhead,
            "agreement_max_abs_fitted_difference": agree,
        }
        args.json.write_text(json.dumps(report, indent=2), encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main())
