"""The one interface every fitted result offers, and the union of the results there are.

Learned values end in ``_`` on every result (``coef_``, ``k_``, ``fitted_``, ``rmse_`` …);
the constructor of an estimator only stores its settings.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Generic, Protocol, TypeAlias, TypeVar

import numpy as np

from sheetfit.fit.leastsq import LeastSquaresResult
from sheetfit.fit.neighbours import NeighbourMeanResult, NeighbourVoteResult
from sheetfit.fit.strip import StripMeanResult

__all__ = ["AnyResult", "FitResult", "Fitted", "R"]


class FitResult(Protocol):
    """What any fitted model offers: its size, its fitted values, predictions for new rows."""

    @property
    def n_(self) -> int: ...

    @property
    def fitted_(self) -> np.ndarray: ...

    def predict(self, X_new: np.ndarray) -> Any: ...


#: Every result the numeric core returns.
AnyResult: TypeAlias = (
    LeastSquaresResult | NeighbourMeanResult | NeighbourVoteResult | StripMeanResult
)


R = TypeVar("R", bound=FitResult)


@dataclass
class Fitted(Generic[R]):
    """A model's result, its predictions for the rows to predict, and fit-time cautions."""

    result: R
    new: Any | None = None
    cautions: list[str] = field(default_factory=list)
    #: Positions (0-based) of the rows to predict that lie outside the fitted range.
    extrapolated: list[int] = field(default_factory=list)
    #: What a method computes beside its fit (least squares: the bootstrap), or None.
    extra: Any = None
