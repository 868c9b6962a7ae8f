"""Numeric models: numpy arrays in, results objects out; nothing here knows about workbooks."""

from sheetfit.fit.leastsq import LeastSquares, LeastSquaresResult
from sheetfit.fit.neighbours import NeighbourMean, NeighbourVote, standard_units
from sheetfit.fit.strip import StripMean

__all__ = [
    "LeastSquares",
    "LeastSquaresResult",
    "NeighbourMean",
    "NeighbourVote",
    "StripMean",
    "standard_units",
]
