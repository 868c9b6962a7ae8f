"""Reader for the NIST StRD linear least-squares files, and a table of how closely we match them.

Development tooling, not part of the shipped package: the tests use the reader, and
``python tests/reference/strd.py [DIR]`` prints the accuracy table quoted in README.md.
The files (in ``tests/reference/strd/``, sources in ``tests/reference/README.md``) are NIST's originals (CRLF, certified values from line 31, data from
line 61, Fortran exponents such as ``0.4E-03``, trailing dots such as ``557.``,
the word ``Infinity``). :func:`read_strd` turns one file into float64 arrays, the
model it certifies and the certified values; the command fits every file in DIR and prints the log relative error (LRE) of each certified
quantity.
"""

from __future__ import annotations

import math
import os
import re
import sys
import time
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np

__all__ = [
    "REFERENCE_DIR",
    "StrdCase",
    "case_lre",
    "lre",
    "main",
    "read_strd",
    "strd_dir",
    "strd_files",
]

#: Environment variable that points at the folder holding the ``*.dat`` files.
STRD_ENV = "SHEETFIT_STRD_DIR"
#: Highest LRE reported: the certified values carry 15 significant digits.
LRE_CAP = 15.0

_NUMBER = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[EeDd][-+]?\d+)?|[-+]?Infinity"
_PARAM_LINE = re.compile(rf"^\s*B(\d+)\s+({_NUMBER})\s+({_NUMBER})\s*$")
_LINES_RANGE = re.compile(r"lines\s+(\d+)\s+to\s+(\d+)")


@dataclass(frozen=True)
class StrdCase:
    """One StRD dataset: the data as float64, the certified model and its certified values."""

    name: str
    y: np.ndarray
    X: np.ndarray
    columns: tuple[str, ...]
    intercept: bool
    degree: int
    coef: np.ndarray
    coef_sd: np.ndarray
    resid_sd: float
    r2: float
    ss_regression: float
    ss_residual: float
    df_residual: int


def _number(text: str) -> float:
    """Parse one number as printed in the files (Fortran exponent, trailing dot, Infinity)."""
    text = text.strip().replace("D", "E").replace("d", "e")
    if text.lstrip("+-") == "Infinity":
        return -math.inf if text.startswith("-") else math.inf
    return float(text)


def read_strd(path: str | os.PathLike[str]) -> StrdCase:
    """Read one StRD linear regression file into a :class:`StrdCase`."""
    path = Path(path)
    lines = path.read_bytes().decode("ascii").splitlines()
    cert_range = _LINES_RANGE.search(lines[4])
    data_range = _LINES_RANGE.search(lines[5])
    if cert_range is None or data_range is None:
        raise ValueError(f"{path}: lines 5-6 do not give the certified and data line ranges")
    c0, c1 = (int(g) for g in cert_range.groups())
    d0, d1 = (int(g) for g in data_range.groups())

    params: dict[int, tuple[float, float]] = {}
    resid_sd = r2 = ss_reg = ss_res = math.nan
    df_res = -1
    cert = lines[c0 - 1 : c1]
    for i, line in enumerate(cert):
        m = _PARAM_LINE.match(line)
        if m:
            params[int(m.group(1))] = (_number(m.group(2)), _number(m.group(3)))
            continue
        words = line.split()
        if line.strip().startswith("Standard Deviation") and i > 0 and "Residual" in cert[i - 1]:
            resid_sd = _number(words[-1])
        elif words[:1] == ["R-Squared"]:
            r2 = _number(words[-1])
        elif words[:1] == ["Regression"] and len(words) >= 4:
            ss_reg = _number(words[2])
        elif words[:1] == ["Residual"] and len(words) >= 4:
            df_res, ss_res = int(words[1]), _number(words[2])

    header = lines[d0 - 2].split()
    if header[:1] != ["Data:"]:
        raise ValueError(f"{path}: line {d0 - 1} is not the 'Data:' column header")
    columns = tuple(header[1:])
    rows = [[_number(w) for w in ln.split()] for ln in lines[d0 - 1 : d1] if ln.strip()]
    data = np.array(rows, dtype=np.float64)
    if data.shape[1] != len(columns):
        raise ValueError(f"{path}: data rows do not match the header {columns}")

    intercept = 0 in params
    n_x = len(columns) - 1
    n_terms = len(params) - int(intercept)
    degree = n_terms if n_x == 1 else 1
    order = sorted(params)
    return StrdCase(
        name=path.stem,
        y=data[:, 0].copy(),
        X=data[:, 1:].copy(),
        columns=columns[1:],
        intercept=intercept,
        degree=degree,
        coef=np.array([params[k][0] for k in order]),
        coef_sd=np.array([params[k][1] for k in order]),
        resid_sd=resid_sd,
        r2=r2,
        ss_regression=ss_reg,
        ss_residual=ss_res,
        df_residual=df_res,
    )


#: This folder: the reference data the tests check against live beside this reader.
REFERENCE_DIR = Path(__file__).resolve().parent


def strd_dir() -> Path | None:
    """Folder of the StRD ``*.dat`` files: ``$SHEETFIT_STRD_DIR`` or ``tests/reference/strd``."""
    env = os.environ.get(STRD_ENV)
    folder = Path(env) if env else REFERENCE_DIR / "strd"
    return folder if folder.is_dir() else None


def strd_files(directory: str | os.PathLike[str] | None = None) -> list[Path]:
    """The ``*.dat`` files in the StRD folder, sorted by name (empty when the folder is missing)."""
    folder = Path(directory) if directory is not None else strd_dir()
    if folder is None or not folder.is_dir():
        return []
    return sorted(folder.glob("*.dat"))


def lre(estimate: float, certified: float) -> float:
    """Log relative error, capped at 15; absolute error when the certified value is 0."""
    if certified == estimate:
        return LRE_CAP
    if not (math.isfinite(estimate) and math.isfinite(certified)):
        return 0.0
    err = abs(estimate - certified)
    if certified != 0:
        err /= abs(certified)
    return min(LRE_CAP, max(0.0, -math.log10(err)))


def case_lre(case: StrdCase) -> dict[str, float]:
    """Fit one StRD case and return the minimum LRE of coefficients, SEs, residual SD and R²."""
    from sheetfit.errors import SheetfitCaution
    from sheetfit.fit.leastsq import LeastSquares

    with warnings.catch_warnings():  # the hard cases are collinear by design
        warnings.simplefilter("ignore", SheetfitCaution)
        res = LeastSquares(intercept=case.intercept, degree=case.degree).fit(
            case.X, case.y, names=list(case.columns)
        )
    out = {
        "coef": min(lre(e, c) for e, c in zip(res.coef_, case.coef, strict=True)),
        "se": min(lre(e, c) for e, c in zip(res.coef_se_, case.coef_sd, strict=True)),
        "resid_sd": lre(res.resid_sd_, case.resid_sd),
        "r2": lre(res.r2_, case.r2),
    }
    out["min"] = min(out.values())
    return out


def main(argv: list[str] | None = None) -> int:
    """Print the LRE table for every StRD file in DIR (default: tests/reference/strd)."""
    args = sys.argv[1:] if argv is None else argv
    folder = Path(args[0]) if args else strd_dir()
    files = strd_files(folder) if folder is not None else []
    if not files:
        where = folder if folder is not None else REFERENCE_DIR / "strd"
        print(
            f"no StRD files (*.dat) found in {where}; pass the folder as an argument "
            f"or set {STRD_ENV}",
            file=sys.stderr,
        )
        return 2
    print(f"{'dataset':<10} {'coef':>6} {'se':>6} {'res.sd':>6} {'R2':>6} {'min':>6} {'ms':>8}")
    overall = LRE_CAP
    for path in files:
        case = read_strd(path)
        t0 = time.perf_counter()
        row = case_lre(case)
        ms = (time.perf_counter() - t0) * 1e3
        overall = min(overall, row["min"])
        print(
            f"{case.name:<10} {row['coef']:6.2f} {row['se']:6.2f} {row['resid_sd']:6.2f} "
            f"{row['r2']:6.2f} {row['min']:6.2f} {ms:8.1f}"
        )
    print(f"overall minimum LRE: {overall:.2f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
