"""The least-squares method: a line, plane or polynomial by least squares."""

from __future__ import annotations

from ..declare.model import ModelData
from ..fit.checks import DEGREE_RANGE
from ..fit.leastsq import LeastSquares, LeastSquaresResult
from ..settings import Rule, integer, yes_no
from ..sheets.charts_methods import least_squares_charts
from ..sheets.leastsq import plan_least_squares
from .base import Method

__all__ = ["METHOD"]

_LO, _HI = DEGREE_RANGE


def _fit(model: ModelData) -> LeastSquaresResult:
    st = model.settings
    est = LeastSquares(intercept=bool(st["intercept"]), degree=int(st["degree"]))
    return est.fit(model.X, model.Y, names=model.attribute_names)


def _figures(model: ModelData, res: LeastSquaresResult) -> list[str]:
    r2 = "R² (uncentred)" if res.r2_uncentred_ else "R²"
    coefs = ", ".join(f"{t} {float(c):.6g}" for t, c in zip(res.terms_, res.coef_))
    return [coefs, f"{r2} {float(res.r2_):.6f}, RMSE {float(res.rmse_):.6g}"]


def _cautions(model: ModelData, res: LeastSquaresResult) -> list[str]:
    out = []
    if res.r2_uncentred_:
        out.append("no intercept: R² is uncentred (about zero) and reads higher than a "
                   "centred R²")
    if res.df_resid_ < 10:
        out.append(f"only {res.df_resid_} residual degrees of freedom: R² and the residual "
                   "SD are unstable")
    return out


METHOD: Method[LeastSquaresResult] = Method(
    word="least_squares",
    title="least squares",
    description="the line, plane or polynomial with the smallest sum of squared residuals",
    rules=(
        Rule("intercept", "yes or no", True, yes_no, "whether the model has a constant term"),
        Rule("degree", f"a whole number from {_LO} to {_HI}", 1, integer(_LO, _HI),
             "polynomial degree in the one attribute (2 adds x^2, ...)"),
    ),
    fit=_fit,
    plan=plan_least_squares,
    figures=_figures,
    cautions=_cautions,
    charts=least_squares_charts,
)
