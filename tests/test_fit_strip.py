"""Graph of averages: strip means against pandas and closed forms, leave-one-out, refusals."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from sheetfit.errors import DataError, ExtrapolationCaution, SettingError
from sheetfit.fit import strip
from sheetfit.fit.strip import StripMean


def _rng(seed: int = 20240612) -> np.random.Generator:
    return np.random.default_rng(seed)


def _pandas_strips(x: np.ndarray, y: np.ndarray, centres: np.ndarray, w: float) -> pd.DataFrame:
    """Direct group computation: for each centre, the rows with |x − c| <= w·(1 + 1e-12)."""
    frame = pd.DataFrame({"x": x, "y": y})
    rows = []
    for c in centres:
        sel = frame.y[(frame.x - c).abs() <= w * (1 + 1e-12)]
        rows.append((sel.size, sel.sum(), sel.mean()))
    return pd.DataFrame(rows, columns=["count", "sum", "mean"])


@pytest.mark.parametrize(("n", "width", "kind"), [(60, 0.7, "distinct"), (2000, 0.4, "even")])
def test_matches_pandas_groups(n: int, width: float, kind: str) -> None:
    """Counts and means equal a pandas selection per centre (means to 1e-12 relative)."""
    rng = _rng(n)
    x = rng.normal(size=n).round(1 if kind == "distinct" else 6)
    y = 3.0 + x + rng.normal(size=n)
    res = StripMean(width).fit(x, y)
    assert res.grid_kind_ == kind
    ref = _pandas_strips(x, y, res.centres_, width)  # pandas boolean selection and mean
    np.testing.assert_array_equal(res.count_, ref["count"].to_numpy())
    np.testing.assert_allclose(res.mean_, ref["mean"].to_numpy(), rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(res.sum_, ref["sum"].to_numpy(), rtol=1e-12, atol=1e-12)
    # and the contract exactly: fsum of the strip's y
    for g in range(0, res.centres_.size, 17):
        sel = np.abs(x - res.centres_[g]) <= width * (1 + 1e-12)
        assert res.sum_[g] == math.fsum(y[sel].tolist())


def test_even_grid_by_definition() -> None:
    """More than 200 distinct values: 101 centres lo + j·step, step = (hi − lo) / 100."""
    x = np.linspace(-2.0, 5.0, 450)
    res = StripMean(0.3).fit(x, x * 2)
    step = (5.0 - -2.0) / 100
    assert res.grid_kind_ == "even" and res.centres_.size == 101 and res.step_ == step
    assert res.centres_.tolist() == [-2.0 + j * step for j in range(101)]
    # lookup: floor((x − lo) / step + 0.5), clipped to 0 … 100
    want = [min(100, max(0, math.floor((v + 2.0) / step + 0.5))) for v in x.tolist()]
    assert res.row_centre_.tolist() == want
    assert res.centre_index(np.array([-9.0, 99.0])).tolist() == [0, 100]


def test_line_closed_form() -> None:
    """x = 0…20, y = 3 + 2x, width 2: interior strip means lie on the line, 3 + 2c exactly."""
    x = np.arange(21.0)
    res = StripMean(2.0).fit(x, 3.0 + 2.0 * x)
    assert res.grid_kind_ == "distinct" and res.centres_.tolist() == x.tolist()
    # interior centre c = 2…18: rows c−2 … c+2, symmetric, so the mean is 3 + 2c
    assert res.count_[2:19].tolist() == [5] * 17
    assert res.mean_[2:19].tolist() == [3.0 + 2.0 * c for c in range(2, 19)]
    # edges by hand: c = 0 → x 0, 1, 2 → y 3, 5, 7 → mean 5; c = 1 → x 0…3 → y 3…9 → 6
    # c = 20 → x 18, 19, 20 → y 39, 41, 43 → 41; c = 19 → x 17…20 → y 37…43 → 40
    assert res.count_[[0, 1, 19, 20]].tolist() == [3, 4, 4, 3]
    assert res.mean_[[0, 1, 19, 20]].tolist() == [5.0, 6.0, 40.0, 41.0]
    # leave-one-out at an interior row: the four others are symmetric too → 3 + 2x again
    assert res.fitted_[10] == 23.0 and res.resid_[10] == 0.0
    # row 0: others in its strip are y 5, 7 → 6; residual 3 − 6 = −3
    assert res.fitted_[0] == 6.0 and res.resid_[0] == -3.0


def test_edge_allowance_counts_decimal_edges_in() -> None:
    """x = 0.1 and 0.4 are 0.3 apart in decimals though 0.4 − 0.1 > 0.3 in binary."""
    assert 0.4 - 0.1 > 0.3  # the rounding the allowance absorbs
    res = StripMean(0.3).fit(np.array([0.1, 0.4, 0.9]), np.array([1.0, 2.0, 4.0]))
    assert res.count_.tolist() == [2, 2, 1]
    assert res.mean_.tolist() == [1.5, 1.5, 4.0]


def test_empty_strips_are_nan_on_even_grid() -> None:
    """A gap in x leaves strips with no rows: their mean is nan, not zero."""
    rng = _rng(1)
    x = np.concatenate([rng.uniform(0, 1, 150), rng.uniform(9, 10, 150)])
    res = StripMean(0.5).fit(x, np.ones(300))
    assert res.grid_kind_ == "even"
    empty = res.count_ == 0
    # centres 0.1·j from x_min; those between about 1.5 and 8.5 are more than 0.5 from any x
    assert empty.sum() > 50 and np.all(np.isnan(res.mean_[empty]))
    assert np.all(res.sum_[empty] == 0.0) and np.all(res.mean_[~empty] == 1.0)
    assert np.isnan(res.predict(np.array([5.0]))[0])


def test_leave_one_out_by_hand() -> None:
    """Four rows worked by hand, width 1, distinct grid x = 0, 1, 3."""
    x = np.array([0.0, 1.0, 1.0, 3.0])
    y = np.array([2.0, 4.0, 8.0, 5.0])
    res = StripMean(1.0).fit(x, y)
    # strip c=0: x 0, 1, 1 → count 3, sum 14; c=1: x 0, 1, 1 (3 is 2 away) → 3, 14;
    # c=3: x 3 → 1, 5
    assert res.centres_.tolist() == [0.0, 1.0, 3.0]
    assert res.count_.tolist() == [3, 3, 1] and res.sum_.tolist() == [14.0, 14.0, 5.0]
    # row 0: (14 − 2) / 2 = 6; row 1: (14 − 4) / 2 = 5; row 2: (14 − 8) / 2 = 3;
    # row 3: alone in its strip → count − 1 = 0 → no fitted value
    assert res.row_centre_.tolist() == [0, 1, 1, 2]
    assert res.fitted_[:3].tolist() == [6.0, 5.0, 3.0] and math.isnan(res.fitted_[3])
    assert res.resid_[:3].tolist() == [-4.0, -1.0, 5.0]
    # RMSE over the 3 fitted rows: sqrt((16 + 1 + 25) / 3) = sqrt(14)
    assert res.n_fitted_ == 3 and res.rmse_ == math.sqrt(14.0)
    # predictions are the full strip means (no row left out); 0.4 looks up the nearer 0
    assert res.predict(np.array([1.0, 3.0, 0.4, 2.0])).tolist() == [14 / 3, 5.0, 14 / 3, 14 / 3]


def test_row_outside_its_even_strip_uses_full_mean() -> None:
    """On an even grid a narrow strip can miss its own row: the fit is then sum / count."""
    x = np.concatenate([np.arange(300.0), [0.4]])  # step 2.99; 0.4 looks up centre 0
    y = np.arange(301.0)
    res = StripMean(0.3).fit(x, y)
    assert res.grid_kind_ == "even" and res.row_centre_[-1] == 0
    assert not res.in_strip_[-1] and res.in_strip_[0]
    # centre 0 holds only x = 0 (y = 0): count 1, so row 0 itself has no fitted value
    assert res.count_[0] == 1 and math.isnan(res.fitted_[0])
    assert res.fitted_[-1] == 0.0  # the full strip mean, 0 / 1


@pytest.mark.parametrize("width", [0.0, -1.0, math.inf, math.nan, "wide", True])
def test_refuses_bad_width(width: object) -> None:
    """The width must be a positive finite number; checked in fit, not the constructor."""
    model = StripMean(width)  # type: ignore[arg-type]
    with pytest.raises(SettingError, match=r"setting width: allowed a positive number"):
        model.fit(np.arange(5.0), np.arange(5.0))


def test_refuses_bad_input() -> None:
    """Unknown grid, unequal lengths, non-finite values and a one-value even grid."""
    with pytest.raises(SettingError, match=r"setting centres: allowed auto, distinct, even"):
        StripMean(1.0, centres="log").fit(np.arange(5.0), np.arange(5.0))
    with pytest.raises(DataError, match=r"the response has 4 rows but the attribute has 5"):
        StripMean(1.0).fit(np.arange(5.0), np.arange(4.0))
    with pytest.raises(DataError, match=r"row 2: the response is not a finite number"):
        StripMean(1.0).fit(np.arange(3.0), np.array([1.0, np.nan, 2.0]))
    with pytest.raises(DataError, match=r"an even grid needs two or more values"):
        StripMean(1.0, centres="even").fit(np.ones(4), np.arange(4.0))


def test_forced_grids_agree_with_pandas() -> None:
    """A forced distinct grid over many values equals the pandas selection too."""
    rng = _rng(9)
    x = rng.uniform(0, 50, 500)
    y = rng.normal(size=500)
    res = StripMean(1.5, centres="distinct").fit(x, y)
    assert res.centres_.size == 500
    ref = _pandas_strips(x, y, res.centres_, 1.5)  # pandas boolean selection
    np.testing.assert_array_equal(res.count_, ref["count"].to_numpy())
    np.testing.assert_allclose(res.mean_, ref["mean"].to_numpy(), rtol=1e-12, atol=1e-12)


def test_public_names() -> None:
    """The module exposes the estimator, its result and the grid constants."""
    assert sorted(strip.__all__) == [
        "EDGE_ALLOWANCE", "EVEN_CENTRES", "MAX_DISTINCT", "StripMean", "StripMeanResult",
    ]  # fmt: skip


def test_prediction_outside_the_fitted_range_is_cautioned() -> None:
    """A new x beyond the smallest or largest fitted x is cautioned (0-based rows)."""
    res = StripMean(width=1.0).fit(np.array([1.0, 2.0, 3.0]), np.array([1.0, 2.0, 3.0]))
    with pytest.warns(ExtrapolationCaution) as caught:
        res.predict(np.array([0.5, 2.0, 3.0, 9.0]))
    assert [w.message.rows for w in caught] == [[0, 3]]
