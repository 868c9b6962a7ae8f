"""Benchmark and accuracy of the bootstrap: 2000 resamples of 10,000 rows × 3 attributes.

Run from the repository root (not part of the test suite):

    python tests/bench/bench_bootstrap.py [ROWS] [RESAMPLES]

Prints the best of three wall times of ``bootstrap`` (seeded invented data), the time of
a plain per-resample ``numpy.linalg.lstsq`` loop on the same draws (extrapolated from
200 resamples), and the largest relative difference of the bootstrap's coefficients from
the core's own refit of the same rows (accurate to the last digit) and from lstsq's.
"""

from __future__ import annotations

import sys
import time

import numpy as np

from sheetfit.fit import LeastSquares
from sheetfit.fit.bootstrap import bootstrap


def main(rows: int = 10_000, resamples: int = 2000) -> None:
    rng = np.random.default_rng(3)
    X = rng.normal(50, 10, size=(rows, 3))
    y = 100 + X @ np.array([2.0, -1.0, 0.5]) + rng.normal(0, 5, rows)
    res = LeastSquares().fit(X, y)
    best = min(_timed(lambda: bootstrap(res, X[:5], resamples, seed=7)) for _ in range(3))
    print(f"bootstrap: {resamples} resamples of {rows} rows × 3 attributes: {best:.2f} s")
    draws = np.random.default_rng(7).integers(0, rows, size=(resamples, rows))
    d = np.asarray(res.design_)
    few = min(200, resamples)
    t0 = time.perf_counter()
    plain = np.array([np.linalg.lstsq(d[r], y[r], rcond=None)[0] for r in draws[:few]])
    loop = (time.perf_counter() - t0) * resamples / few
    print(f"plain lstsq loop (extrapolated from {few}): {loop:.2f} s")
    ours = bootstrap(res, None, few, seed=7).coefs
    core = np.array([LeastSquares().fit(X[r], y[r]).coef_ for r in draws[:20]])
    print(f"max relative difference from the core's refit (20 resamples): "
          f"bootstrap {np.max(np.abs(ours[:20] - core) / np.abs(core)):.1e}, "
          f"lstsq {np.max(np.abs(plain[:20] - core) / np.abs(core)):.1e}")


def _timed(f) -> float:  # type: ignore[no-untyped-def]
    t0 = time.perf_counter()
    f()
    return time.perf_counter() - t0


if __name__ == "__main__":
    main(*(int(a) for a in sys.argv[1:3]))
