"""The least-squares method: a line, plane or polynomial by least squares."""

from __future__ import annotations

import warnings

import numpy as np

from ..declare.model import ModelData
from ..errors import Context, DataError, FewRowsLevelCaution
from ..fit.bootstrap import DEFAULT_RESAMPLES, DEFAULT_SEED, Bootstrap, bootstrap
from ..fit.checks import DEGREE_RANGE
from ..fit.inference import intervals
from ..fit.leastsq import LeastSquares, LeastSquaresResult, _term_names
from ..settings import Rule, amount_or_sd, count_or_auto, integer, levels, share, yes_no
from ..sheets._ls_words import audit_threshold_caution, least_squares_cautions
from ..sheets.charts_methods import least_squares_charts
from ..sheets.leastsq import plan_least_squares
from .base import Forecasts, Method

__all__ = ["METHOD"]

_LO, _HI = DEGREE_RANGE
#: Levels of a text attribute with fewer rows than this get a caution. Common practice
#: (a rule of thumb, not a law): an indicator estimated from a handful of rows rests on
#: those rows alone, and one unusual row moves it a lot.
FEW_LEVEL_ROWS = 5


def _warn_few_rows(model: ModelData) -> None:
    for name, counts in model.level_counts.items():
        for level, count in counts.items():
            if count < FEW_LEVEL_ROWS:
                warnings.warn(FewRowsLevelCaution(
                    f"text attribute '{name}': level '{level}' has only {count} "
                    f"row{'' if count == 1 else 's'} (fewer than {FEW_LEVEL_ROWS}, a common "
                    "rule of thumb); what the model says about it rests on those rows alone"),
                    stacklevel=2)


def _fit(model: ModelData) -> LeastSquaresResult:
    _warn_few_rows(model)
    st = model.settings
    est = LeastSquares(intercept=bool(st["intercept"]), degree=int(st["degree"]))
    return est.fit(model.X, model.Y, names=model.attribute_names)


#: Above this many rows the bootstrap runs only when the setting asks for it: its cost grows
#: with rows × resamples (2000 resamples of 10,000 rows × 3 attributes: 1.25 s here).
BOOTSTRAP_ROWS = 20_000


def _bootstrap(model: ModelData, res: LeastSquaresResult) -> Bootstrap | None:
    """Percentile intervals by resampling rows (settings resamples and seed)."""
    st = model.settings.values
    count = st.get("resamples")
    if count is None:
        count = DEFAULT_RESAMPLES if res.n_ <= BOOTSTRAP_ROWS else 0
    if not count or res.df_resid_ <= 0:
        return None
    return bootstrap(res, None if model.new is None else model.new.X, resamples=int(count),
                     seed=int(st.get("seed", DEFAULT_SEED)),
                     level=float(st.get("level", 0.95)))


def _check(model: ModelData) -> None:
    """A polynomial has a numeric attribute; a declared rule has one coefficient per term,
    in the coefficient column's order."""
    if model.baselines and int(model.settings["degree"]) > 1:
        raise DataError(
            "a polynomial (degree above 1) needs one numeric attribute; "
            f"'{next(iter(model.baselines))}' is a text attribute",
            Context(model.file, model.names.get("opts", model.names.get("x"))),
            hint="fit degree 1, or use a numeric attribute")
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
    lines = [coefs, f"{r2} {float(res.r2_):.6f}, RMSE {float(res.rmse_):.6g}"]
    if model.baselines:
        lines.append("text attributes measured against baseline " + "; ".join(
            f"{name} = {level}" for name, level in model.baselines.items()))
    return lines


def _cautions(model: ModelData, res: LeastSquaresResult) -> list[str]:
    out = least_squares_cautions(res)
    audit = audit_threshold_caution(res, model.settings.values.get("threshold"),
                                    float(model.settings.values.get("level", 0.95)))
    return out + ([audit] if audit else [])


def _key_figures(model: ModelData, res: LeastSquaresResult) -> list[tuple[str, float]]:
    return [(str(t), float(c)) for t, c in zip(res.terms_, res.coef_)]


def _forecasts(model: ModelData, res: LeastSquaresResult, new: object) -> Forecasts:
    """The predictions and, with residual degrees of freedom left, the prediction interval
    for one new value at the model's level (the interval the result sheets show)."""
    point = np.asarray(new, dtype=float)
    if model.new is None or res.df_resid_ < 1:
        return point, None, None, None
    level = float(model.settings["level"])
    iv = intervals(res, model.new.X, level)
    return point, np.asarray(iv.obs_lo), np.asarray(iv.obs_hi), level

#: What a least-squares fit is, and how to read it (on its own sheets and the index).
STANDING = (
    ("A fitted line describes the data between the smallest and largest attribute values "
    "seen (the relevant range); outside it a prediction is an extrapolation. The intercept "
    "is the fixed part within that range, not the cost at zero activity."),
    ("The residuals are in-sample and understate the error on new rows; the leave-one-out "
     "RMSE does not, and is the figure to compare models and rules by."),
    ("Outliers and high-leverage rows pull the line; the residual sheet flags them "
     "(studentized residual, Cook's distance, leverage)."),
    ("Predicting from an extreme row: the next value tends to be closer to the average "
     "(regression toward the mean)."),
)

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
        Rule("resamples", "a whole number from 0 to 100000, or auto", None,
             count_or_auto(100_000), "bootstrap: how many resamples of the rows (auto: "
             f"{DEFAULT_RESAMPLES} up to {BOOTSTRAP_ROWS:,} rows, none above; 0: none)"),
        Rule("seed", "a whole number from 0 to 2147483647", DEFAULT_SEED,
             integer(0, 2**31 - 1), "bootstrap: the random seed, so a run can be repeated"),
        Rule("threshold", "an amount (250) or a multiple of the residual SD (2 sd)", None,
             amount_or_sd, "audit: list the rows whose actual differs from the fitted value "
             "by more than this, on an audit sheet"),
        Rule("baseline", "a level of each text attribute, separated by ; in the order of x",
             None, levels, "the level of a text attribute the others are measured against "
             "(default: its most frequent level)"),
    ),
    text_attributes=True,
    check=_check,
    compares_rule=True,
    extra=_bootstrap,
    fit=_fit,
    plan=plan_least_squares,
    figures=_figures,
    cautions=_cautions,
    key_figures=_key_figures,
    forecasts=_forecasts,
    standing=STANDING,
    charts=least_squares_charts,
)
