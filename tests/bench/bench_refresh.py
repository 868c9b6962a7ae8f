"""Benchmark: sheetfit refresh against a plain read-fit-write pipeline on the same book.

Run from the repository root (not part of the test suite):

    python tests/bench/bench_refresh.py [ROWS]

Each side runs in its own process; the report gives wall time and peak memory of both
and their ratios (sheetfit / baseline). The baseline reads with pandas, fits with
statsmodels OLS and writes fitted values and residuals as plain numbers with
DataFrame.to_excel — it writes no formulas and keeps none of the workbook, so the
ratio is the price of formula sheets with cached values and of grafting.
"""

from __future__ import annotations

import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import xlsxwriter

BASELINE = """
import sys, pandas as pd, statsmodels.api as sm
book, out = sys.argv[1], sys.argv[2]
df = pd.read_excel(book, sheet_name="Data", engine="openpyxl")
X = sm.add_constant(df[["a", "b"]])
res = sm.OLS(df["y"], X).fit()
pd.DataFrame({"fitted": res.fittedvalues, "resid": res.resid}).to_excel(out, index=False)
import resource; print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)
"""

SHEETFIT = """
import sys
from sheetfit.refresh import refresh
refresh(sys.argv[1], sys.argv[2])
import resource; print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)
"""


def make_book(path: Path, n: int) -> None:
    """A seeded book of n rows: y on two attributes, declared as a least-squares model."""
    rng = np.random.default_rng(2026)
    X = rng.normal(size=(n, 2))
    y = 4 + X @ np.array([1.5, -2.0]) + rng.normal(size=n)
    wb = xlsxwriter.Workbook(str(path), {"constant_memory": True})
    ws = wb.add_worksheet("Data")
    ws.write_row(0, 0, ["y", "a", "b"])
    for i in range(n):
        ws.write_row(i + 1, 0, [float(y[i]), float(X[i, 0]), float(X[i, 1])])
    wb.define_name("sf_bench_y", "=Data!$A:$A")
    wb.define_name("sf_bench_x", "=Data!$B:$C")
    wb.close()


def run(code: str, book: Path, out: Path) -> dict[str, float]:
    """Wall time and peak resident memory (MiB, reported by the child itself)."""
    t = time.perf_counter()
    done = subprocess.run([sys.executable, "-c", code, str(book), str(out)], check=True,
                          capture_output=True, text=True)
    wall = time.perf_counter() - t
    return {"seconds": wall, "peak_mib": int(done.stdout.split()[-1]) / 1024}


def main() -> None:
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 20_000
    with tempfile.TemporaryDirectory() as tmp:
        book = Path(tmp) / "bench.xlsx"
        make_book(book, n)
        base = run(BASELINE, book, Path(tmp) / "base_out.xlsx")
        ours = run(SHEETFIT, book, Path(tmp) / "sheetfit_out.xlsx")
    report = {
        "rows": n,
        "baseline": base,
        "sheetfit": ours,
        "time_ratio": ours["seconds"] / base["seconds"],
        "peak_ratio": ours["peak_mib"] / base["peak_mib"],
    }
    print(json.dumps(report, indent=2))


if __name__ == "__main__":
    main()
