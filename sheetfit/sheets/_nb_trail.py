"""The audit trail's extent on a neighbour model's neighbours sheet (setting ``trail``).

The trail shows, row by row, the k neighbours, their distances and the prediction built
from them: n·k cells, which no spreadsheet opens comfortably at hundreds of thousands
of rows. The setting chooses how many data rows it shows:

* ``all``: every data row;
* ``auto`` (the default): every data row up to :data:`TRAIL_ALL_UP_TO` rows; above, an
  audit sample of :data:`TRAIL_SAMPLE` data rows;
* ``new``: no data row (the new rows only).

New rows are always in the trail. The sample is a simple random sample without
replacement, drawn with numpy's default generator and a stated seed, listed in sheet-row
order, so the same book gives the same rows at every refresh.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..words import plural

__all__ = ["TRAIL_ALL_UP_TO", "TRAIL_SAMPLE", "TRAIL_SEED", "TRAIL_WORDS", "Trail",
           "trail_of"]

#: ``auto`` shows every data row up to this many rows. At k = 10 the full trail of
#: 20,000 rows is about 700,000 cells (480,000 of them formulas); LibreOffice loaded the
#: whole 20,000-row book in 7.5 s and recalculated it in 1.5 s here. The cost grows as n·k.
TRAIL_ALL_UP_TO = 20_000
#: Above that, ``auto`` shows this many data rows (an audit sample).
TRAIL_SAMPLE = 2_000
#: The seed of the sample's generator (numpy.random.default_rng), stated on the sheets.
TRAIL_SEED = 20_261_202

#: The setting's values in words, for the settings table and the refusal message.
TRAIL_WORDS = (f"all, auto (every data row up to {TRAIL_ALL_UP_TO:,} rows, above that an "
               f"audit sample of {TRAIL_SAMPLE:,}) or new (new rows only)")


@dataclass(frozen=True)
class Trail:
    """Which data rows the neighbours sheet shows, and how that was decided."""

    rows: np.ndarray  # 0-based positions among the rows used, ascending
    n: int  # data rows in all
    extent: str  # the setting: all, auto or new
    seed: int | None  # the sample's seed; None when no sample was drawn

    @property
    def full(self) -> bool:
        return len(self.rows) == self.n

    def words(self, nbrs_title: str) -> str:
        """What the trail shows, in one plain sentence for the sheets (empty when full)."""
        if self.full:
            return ""
        if self.seed is None:
            return (f"The neighbours sheet '{nbrs_title}' shows the new rows only (setting "
                    f"trail = {self.extent}); the {plural(self.n, 'data row')} show sheetfit's "
                    "computed fitted values, written as values, not formulas.")
        return (f"Audit sample: the neighbours sheet '{nbrs_title}' shows every new row and "
                f"{len(self.rows):,} of the {self.n:,} data rows (setting trail = "
                f"{self.extent}), a simple random sample without replacement drawn by "
                f"numpy.random.default_rng({self.seed}).choice({self.n}, {len(self.rows)}, "
                "replace=False), listed in sheet-row order; rows not in the sample show "
                "sheetfit's computed value, written as a value, not a formula.")


def trail_of(n: int, extent: str, seed: int = TRAIL_SEED) -> Trail:
    """The data rows (0-based among the rows used) in the trail for the setting ``extent``."""
    if extent == "all" or (extent == "auto" and n <= TRAIL_ALL_UP_TO):
        return Trail(np.arange(n, dtype=np.int64), n, extent, None)
    if extent == "new":
        return Trail(np.zeros(0, dtype=np.int64), n, extent, None)
    if extent != "auto":
        raise ValueError(f"unknown trail extent {extent!r}")
    size = min(TRAIL_SAMPLE, n)
    picked = np.random.default_rng(seed).choice(n, size, replace=False)
    return Trail(np.sort(picked).astype(np.int64), n, extent, seed)
