"""Benchmark: books per minute on a local Dask cluster against one process, book by book.

Run from the repository root with the cluster extra installed (not part of the tests):

    python tests/bench/bench_cluster.py [BOOKS] [WORKERS ...]     # default: 40 books; 1 2 4

A folder of BOOKS copies of ``example_books/*.xlsx`` (taken in turn) is refreshed
in place:

- ``in-process``: one fresh Python process refreshing the books one after another with
  ``refresh_one`` (what ``--jobs 1`` does), its imports included;
- ``cluster N``: ``run_on_cluster`` on a ``LocalCluster`` of N worker processes of one
  thread each, timed from the first submission to the last outcome (the workers import
  sheetfit on their first book, which is counted; starting the cluster is reported
  apart, as a real cluster is started once and kept).

Each configuration gets fresh copies and the same fixed refresh time; every book must
come back refreshed.
"""

from __future__ import annotations

import datetime as dt
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

EXAMPLES = Path(__file__).resolve().parents[2] / "example_books"
NOW = dt.datetime(2026, 1, 31, 18, 0, tzinfo=dt.UTC)

IN_PROCESS = """
import sys, time, datetime as dt
from pathlib import Path
t0 = time.perf_counter()
from sheetfit.batch import refresh_one
now = dt.datetime(2026, 1, 31, 18, 0, tzinfo=dt.UTC)
outs = [refresh_one(p, now=now) for p in sorted(Path(sys.argv[1]).glob("*.xlsx"))]
assert all(o.status == "refreshed" for o in outs), outs
print(time.perf_counter() - t0)
"""


def _folder(root: Path, name: str, count: int) -> Path:
    folder = root / name
    folder.mkdir()
    examples = sorted(EXAMPLES.glob("*.xlsx"))
    for i in range(count):
        src = examples[i % len(examples)]
        shutil.copy(src, folder / f"{i:03d}-{src.name}")
    return folder


def _in_process(folder: Path) -> float:
    start = time.perf_counter()
    subprocess.run([sys.executable, "-c", IN_PROCESS, str(folder)], check=True,
                   capture_output=True, text=True, timeout=1800)
    return time.perf_counter() - start


def _on_cluster(folder: Path, workers: int) -> tuple[float, float]:
    from distributed import Client, LocalCluster

    from sheetfit.batch.cluster import run_on_cluster

    start = time.perf_counter()
    with LocalCluster(processes=True, n_workers=workers, threads_per_worker=1,
                      dashboard_address=":0") as cluster, \
            Client(cluster, timeout=60, set_as_default=False) as client:
        client.wait_for_workers(workers, timeout=120)
        up = time.perf_counter() - start
        books = sorted(folder.glob("*.xlsx"))
        start = time.perf_counter()
        outs = run_on_cluster(books, client, {"now": NOW})
        took = time.perf_counter() - start
    assert all(o.status == "refreshed" for o in outs), outs
    return up, took


def main() -> None:
    count = int(sys.argv[1]) if len(sys.argv) > 1 else 40
    sizes = [int(a) for a in sys.argv[2:]] or [1, 2, 4]
    with tempfile.TemporaryDirectory(prefix="sheetfit-bench-") as tmp:
        root = Path(tmp)
        rows = [("in-process (--jobs 1)", None, _in_process(_folder(root, "local", count)))]
        for n in sizes:
            up, took = _on_cluster(_folder(root, f"cluster{n}", count), n)
            rows.append((f"cluster, {n} worker{'s' if n > 1 else ''}", up, took))
    print(f"{count} books (copies of example_books/*.xlsx)")
    print(f"{'run':<24}{'seconds':>9}{'books/min':>11}{'cluster start':>15}")
    for name, up, took in rows:
        start = f"{up:.1f} s" if up is not None else "—"
        print(f"{name:<24}{took:>9.1f}{count / took * 60:>11.0f}{start:>15}")


if __name__ == "__main__":
    main()
