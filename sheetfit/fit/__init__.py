"""Numeric models: numpy arrays in, results objects out; nothing here knows about workbooks."""

from sheetfit.fit.leastsq import LeastSquares, LeastSquaresResult

__all__ = ["LeastSquares", "LeastSquaresResult"]
