"""Time a refresh of an example book over HTTP (``sheetfit serve``'s app on uvicorn, this
machine's loopback) against the command line and an in-process ``refresh()``.

    python tests/bench/bench_serve.py [BOOK] [RUNS]

Prints the median and the fastest of RUNS (default 7) for each way; the first HTTP request,
which starts the fork server, is timed on its own.
"""

from __future__ import annotations

import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import httpx

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from serving import AUTH, serving

from sheetfit.refresh import refresh

ROOT = Path(__file__).resolve().parents[2]


def _times(fn, runs: int) -> list[float]:  # type: ignore[no-untyped-def]
    out = []
    for _ in range(runs):
        start = time.perf_counter()
        fn()
        out.append(time.perf_counter() - start)
    return out


def _line(what: str, t: list[float]) -> str:
    return f"{what:<40} median {statistics.median(t):6.3f} s   fastest {min(t):6.3f} s"


def main() -> None:
    book = Path(sys.argv[1]) if len(sys.argv) > 1 else ROOT / "example_books" / \
        "delivery_costs.xlsx"
    runs = int(sys.argv[2]) if len(sys.argv) > 2 else 7
    data = book.read_bytes()
    with tempfile.TemporaryDirectory() as tmp, serving() as base, \
            httpx.Client(base_url=base, headers=AUTH, timeout=120) as client:
        out = Path(tmp) / "out.xlsx"

        def http() -> None:
            r = client.post("/books/refresh", params={"name": book.name}, content=data)
            r.raise_for_status()

        def cli() -> None:
            subprocess.run([sys.executable, "-m", "sheetfit", "refresh", str(book), "--out",
                            str(out)], check=True, capture_output=True)

        def inproc() -> None:
            refresh(book, out)

        first = _times(http, 1)
        print(f"{book.name}, {runs} runs each")
        print(_line("HTTP, first request (fork server starts)", first))
        print(_line("HTTP POST /books/refresh", _times(http, runs)))
        print(_line("sheetfit refresh --out (new process)", _times(cli, runs)))
        print(_line("refresh() in this process", _times(inproc, runs)))


if __name__ == "__main__":
    main()
