"""Bootstrap percentile intervals for a least-squares fit: rows resampled with replacement.

Resample ``b`` (0-based) takes the rows ``rng.integers(0, n, size=(resamples, n))[b]``
with ``rng = numpy.random.default_rng(seed)``; the fit is refitted on those rows and the
coefficients and the predictions of the new rows are kept. The interval at ``level`` is
the pair of quantiles (1 − level)/2 and (1 + level)/2 of the kept values (numpy's
default "linear" quantile, Hyndman and Fan type 7). Anyone can reproduce a run from the
seed, the number of resamples and this paragraph.

How the refits are done, all resamples of a batch at once (float64):

* each resample is a vector of row counts (how often each row was drawn), so its
  least-squares fit solves the weighted normal equations ``Xᵀ W X β = Xᵀ W y``;
* the design is first orthogonalised once: ``X / ‖columns‖ = Q R`` (Householder QR).
  In the basis Q the weighted Gram matrix ``Qᵀ W Q`` is close to the identity for any
  reasonable resample, so it is solved accurately whatever the conditioning of X,
  which is left to one triangular solve with R;
* only the change from the full-sample fit is solved for: y = ŷ + e with ŷ in the
  column space, so ``β_b = β̂ + R⁻¹ (QᵀWQ)⁻¹ QᵀW e``, divided by the column norms.
  The result's own coefficients (accurate to the last digit) carry the bulk, and the
  rounding of the float solve is relative to the size of the residuals, not of y;
* ``Qᵀ W Q`` and ``Qᵀ W e`` for a batch are two matrix products of the counts matrix
  (batch × n) with the row-wise products ``qᵢ qᵢᵀ`` (n × p²) and ``qᵢ eᵢ`` (n × p).

A resample whose design is rank deficient (a term constant or absent in the rows drawn,
e.g. an indicator whose level was not drawn) has no least-squares solution: it is
skipped and counted, never solved. The test is the smallest eigenvalue of ``Qᵀ W Q``
relative to its largest (at or below ``SINGULAR``). When more than ``SKIP_CAUTION`` of
the resamples are skipped the intervals describe only the resamples where every term
could be estimated, and a :class:`~sheetfit.errors.BootstrapCaution` says so.

Numeric code only: arrays in, arrays out, no workbook knowledge.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np

from sheetfit.errors import BootstrapCaution, SettingError
from sheetfit.fit import checks
from sheetfit.fit._arrays import readonly
from sheetfit.fit.leastsq import LeastSquaresResult, _design

__all__ = [
    "DEFAULT_RESAMPLES",
    "DEFAULT_SEED",
    "METHOD",
    "SINGULAR",
    "SKIP_CAUTION",
    "Bootstrap",
    "bootstrap",
]

DEFAULT_RESAMPLES = 2000
DEFAULT_SEED = 1
#: What the sheets record as the method.
METHOD = "percentile, rows resampled with replacement"
#: A resample whose weighted Gram matrix in the orthogonal basis has smallest/largest
#: eigenvalue at or below this is rank deficient. For a full-rank resample the ratio is
#: about (share of rows that pin down the weakest direction)², far above this; an absent
#: term gives rounding noise, about 1e-16.
SINGULAR = 1e-12
#: Share of skipped resamples above which the intervals carry a caution (5 %).
SKIP_CAUTION = 0.05
#: Cells of the counts matrix (batch × rows) worked on at once; about 64 MB of float64.
_BATCH_CELLS = 8_000_000


@dataclass(frozen=True)
class Bootstrap:
    """Percentile intervals from refits on resampled rows, and how they were obtained.

    ``coefs`` holds every kept resample's coefficients (kept × p) and ``preds`` their
    predictions of the new rows (kept × new rows).
    """

    level: float
    resamples: int
    seed: int
    method: str
    skipped: int
    coef_lo: np.ndarray
    coef_hi: np.ndarray
    pred_lo: np.ndarray
    pred_hi: np.ndarray
    coefs: np.ndarray
    preds: np.ndarray

    @property
    def kept(self) -> int:
        """Resamples refitted and used for the intervals."""
        return self.resamples - self.skipped


def _count(name: str, value: object, lo: int) -> int:
    if isinstance(value, bool | np.bool_) or not isinstance(value, int | np.integer):
        raise SettingError(f"the bootstrap {name} must be a whole number, given {value!r}")
    if int(value) < lo:
        raise SettingError(f"the bootstrap {name} must be at least {lo}, given {value!r}")
    return int(value)


def bootstrap(res: LeastSquaresResult, X_new: np.ndarray | None = None,
              resamples: int = DEFAULT_RESAMPLES, seed: int = DEFAULT_SEED,
              level: float = 0.95) -> Bootstrap:
    """Percentile intervals for each coefficient and each new row's prediction."""
    resamples = _count("number of resamples", resamples, 1)
    seed = _count("seed", seed, 0)
    level = checks.check_level(level)
    design = np.asarray(res.design_, dtype=np.float64)
    n, p = design.shape
    norms = np.linalg.norm(design, axis=0)
    q, r = np.linalg.qr(design / norms)
    e = np.asarray(res.resid_, dtype=np.float64)
    qq = (q[:, :, None] * q[:, None, :]).reshape(n, p * p)
    qe = q * e[:, None]
    beta = np.asarray(res.coef_, dtype=np.float64)

    rng = np.random.default_rng(seed)
    batch = max(1, min(resamples, _BATCH_CELLS // n))
    kept: list[np.ndarray] = []
    skipped = 0
    for start in range(0, resamples, batch):
        b = min(batch, resamples - start)
        idx = rng.integers(0, n, size=(b, n))
        flat = (idx + (np.arange(b) * n)[:, None]).ravel()
        w = np.bincount(flat, minlength=b * n).reshape(b, n).astype(np.float64)
        gram = (w @ qq).reshape(b, p, p)
        rhs = w @ qe
        eig = np.linalg.eigvalsh(gram)
        ok = eig[:, 0] > SINGULAR * eig[:, -1]
        skipped += int(b - ok.sum())
        if not ok.any():
            continue
        gamma = np.linalg.solve(gram[ok], rhs[ok][:, :, None])[:, :, 0]
        delta = np.linalg.solve(r, gamma.T).T / norms
        kept.append(beta + delta)
    coefs = np.vstack(kept) if kept else np.empty((0, p))

    if X_new is None:
        preds = np.empty((coefs.shape[0], 0))
    else:
        X_new = checks.new_rows(X_new, res.names_)
        d_new = _design(X_new, res.intercept_, res.degree_)
        base = d_new @ beta
        preds = base[None, :] + (coefs - beta) @ d_new.T
    if skipped > SKIP_CAUTION * resamples:
        warnings.warn(BootstrapCaution(
            f"{skipped} of {resamples} bootstrap resamples ({skipped / resamples:.0%}) could "
            "not be refitted (some term was constant or absent in the rows drawn) and were "
            "skipped: the intervals describe only the resamples where every term could be "
            "estimated and may be too narrow; a term with very few rows (a rare level) is "
            "the usual cause"), stacklevel=2)
    a = (1 - level) / 2
    if coefs.shape[0] == 0:
        nan_p, nan_m = np.full(p, math.nan), np.full(preds.shape[1], math.nan)
        lo_c, hi_c, lo_p, hi_p = nan_p, nan_p.copy(), nan_m, nan_m.copy()
    else:
        lo_c, hi_c = np.quantile(coefs, [a, 1 - a], axis=0)
        if preds.shape[1]:
            lo_p, hi_p = np.quantile(preds, [a, 1 - a], axis=0)
        else:
            lo_p, hi_p = np.empty(0), np.empty(0)
    return Bootstrap(level, resamples, seed, METHOD, skipped, readonly(lo_c), readonly(hi_c),
                     readonly(lo_p), readonly(hi_p), readonly(coefs), readonly(preds))
