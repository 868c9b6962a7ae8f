"""The least-squares method: a line, plane or polynomial by least squares."""

from __future__ import annotations

from ..declare.model import ModelData
from ..errors import Context, DataError
from ..fit.checks import DEGREE_RANGE
from ..fit.leastsq import LeastSquares, LeastSquaresResult, _term_names
from ..settings import Rule, amount_or_sd, integer, share, yes_no
from ..sheets._ls_words import least_squares_cautions
from ..sheets.charts_methods import least_squares_charts
from ..sheets.leastsq import plan_least_squares
from .base import Method

__all__ = ["METHOD"]

_LO, _HI = DEGREE_RANGE


def _fit(model: ModelData) -> LeastSquaresResult:
    st = model.settings
    est = LeastSquares(intercept=bool(st["intercept"]), degree=int(st["degree"]))
    return est.fit(model.X, model.Y, names=model.attribute_names)


def _check(model: ModelData) -> None:
    """A declared rule has one coefficient per term, in the coefficient column's order."""
    rule = model.rule
    if rule is None:
        return
    st = model.settings
    degree = int(st["degree"])
    p = int(bool(st["intercept"])) + (degree if degree > 1 else len(model.xs))
    if len(rule.values) != p:
        terms = _term_names(model.attribute_names, bool(st["intercept"]), degree)
        raise DataError(
            f"the rule has {len(rule.values)} coefficients but the model has {p} terms "
            f"({', '.join(terms)})", Context(model.file, rule.name),
            hint="give one coefficient per term, in that order")


def _figures(model: ModelData, res: LeastSquaresResult) -> list[str]:
    r2 = "R² (uncentred)" if res.r2_uncentred_ else "R²"
    coefs = ", ".join(f"{t} {float(c):.6g}" for t, c in zip(res.terms_, res.coef_))
    return [coefs, f"{r2} {float(res.r2_):.6f}, RMSE {float(res.rmse_):.6g}"]


def _cautions(model: ModelData, res: LeastSquaresResult) -> list[str]:
    return least_squares_cautions(res)


METHOD: Method[LeastSquaresResult] = Method(
    word="least_squares",
    title="least squares",
    description="the line, plane or polynomial with the smallest sum of squared residuals",
    rules=(
        Rule("intercept", "yes or no", True, yes_no, "whether the model has a constant term"),
        Rule("degree", f"a whole number from {_LO} to {_HI}", 1, integer(_LO, _HI),
             "polynomial degree in the one attribute (2 adds x^2, ...)"),
        Rule("level", "a share from 0.5 to 0.999", 0.95, share(0.5, 0.999),
             "confidence level of the coefficient ranges and prediction intervals"),
        Rule("threshold", "an amount (250) or a multiple of the residual SD (2 sd)", None,
             amount_or_sd, "audit: list the rows whose actual differs from the fitted value "
             "by more than this, on an audit sheet"),
    ),
    check=_check,
    compares_rule=True,
    fit=_fit,
    plan=plan_least_squares,
    figures=_figures,
    cautions=_cautions,
    charts=least_squares_charts,
)
