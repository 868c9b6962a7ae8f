"""The neighbour-average core: standard units, the exact tie rule, leave-one-out, refusals."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.neighbors import KNeighborsClassifier, KNeighborsRegressor
from sklearn.preprocessing import StandardScaler

from sheetfit.errors import DataError, ExtrapolationCaution, SettingError
from sheetfit.fit import neighbours as nb
from sheetfit.fit._sums import prefix_fsums
from sheetfit.fit.neighbours import (
    NeighbourMean,
    NeighbourVote,
    Scaling,
    standard_units,
)


def _rng(seed: int = 20240611) -> np.random.Generator:
    return np.random.default_rng(seed)


# --------------------------------------------------------------- brute-force reference


def _ref_distance(Z: np.ndarray, a: np.ndarray) -> list[float]:
    """The contract's distance, one pair at a time: sqrt(fsum of products d·d)."""
    out = []
    for row in Z.tolist():
        diffs = [u - v for u, v in zip(a.tolist(), row, strict=True)]
        out.append(math.sqrt(math.fsum([d * d for d in diffs])))
    return out


def _ref_order(Z: np.ndarray, a: np.ndarray, k: int, skip: int | None) -> list[tuple[int, float]]:
    """The contract's neighbour order over all rows: (12-digit distance, row), self dropped."""
    d = _ref_distance(Z, a)
    cand = sorted((float(f"{v:.12g}"), j) for j, v in enumerate(d) if j != skip)
    return [(j, d[j]) for _, j in cand[:k]]


def _ref_vote(classes: list[object]) -> tuple[object, int]:
    """The contract's vote: class at the first position attaining the most votes."""
    votes = [classes.count(c) for c in classes]
    m = votes.index(max(votes))
    return classes[m], votes[m]


def _check_against_reference(X: np.ndarray, y: np.ndarray, k: int, on: bool) -> None:
    res = NeighbourMean(k=k, standard_units=on).fit(X, y)
    for i in range(X.shape[0]):
        ref = _ref_order(res.Z_, res.Z_[i], k, skip=i)
        assert res.neighbours_[i].tolist() == [j for j, _ in ref], f"row {i}"
        assert res.distances_[i].tolist() == [d for _, d in ref], f"row {i}"
        assert res.fitted_[i] == math.fsum(y[[j for j, _ in ref]].tolist()) / k
    # Each entry of the k table repeats the leave-one-out RMSE of a fit with that k.
    for kk, err in res.k_table_[:: max(1, len(res.k_table_) // 4)]:
        again = NeighbourMean(k=kk, standard_units=on).fit(X, y)
        assert err == again.rmse_


# ------------------------------------------------------------------------ standard units


def test_standard_units_by_hand() -> None:
    """x = 1, 2, 3, 4: mean 2.5, population SD sqrt(1.25) (hand arithmetic)."""
    s = standard_units(np.array([[1.0], [2.0], [3.0], [4.0]]))
    assert s.mean_.tolist() == [2.5]
    # deviations −1.5, −0.5, 0.5, 1.5; squares sum to 5; 5 / 4 = 1.25 (exact in binary)
    assert s.sd_.tolist() == [math.sqrt(1.25)]
    assert s.on
    z = s.transform(np.array([2.5, 4.0]))
    assert z.tolist() == [[0.0], [1.5 / math.sqrt(1.25)]]


def test_standard_units_match_population_scaler() -> None:
    """Means and SDs equal scikit-learn's StandardScaler, which divides by n (ddof 0)."""
    X = _rng().normal(3.0, 7.0, size=(500, 4))
    s = standard_units(X)
    ref = StandardScaler().fit(X)  # scikit-learn StandardScaler: population SD
    np.testing.assert_allclose(s.mean_, ref.mean_, rtol=1e-13, atol=0)
    np.testing.assert_allclose(s.sd_, ref.scale_, rtol=1e-13, atol=0)
    np.testing.assert_allclose(s.transform(X), ref.transform(X), rtol=1e-12, atol=1e-13)
    # and the contract's own arithmetic, exactly: fsum mean, fsum of products d·d over n
    col = X[:, 2].tolist()
    mean = math.fsum(col) / len(col)
    assert s.mean_[2] == mean
    assert s.sd_[2] == math.sqrt(math.fsum([(v - mean) * (v - mean) for v in col]) / len(col))


def test_standard_units_off_is_identity() -> None:
    """With standard units off, mean 0 and SD 1 are reported and rows are unchanged copies."""
    X = np.array([[1.0, 5.0], [2.0, 5.0], [7.0, 5.0]])
    s = standard_units(X, on=False)
    assert (s.mean_.tolist(), s.sd_.tolist(), s.on) == ([0.0, 0.0], [1.0, 1.0], False)
    Z = s.transform(X)
    assert Z.tolist() == X.tolist() and Z is not X


def test_constant_attribute_refused_in_standard_units() -> None:
    """A constant attribute has no standard units; the message names it."""
    X = np.array([[1.0, 5.0], [2.0, 5.0], [7.0, 5.0]])
    with pytest.raises(DataError, match=r"attribute 'stops' has the same value \(5\) in every used row"):
        standard_units(X, names=["km", "stops"])
    with pytest.raises(DataError, match=r"attribute 'stops' .* so it has no standard units"):
        NeighbourMean(k=1).fit(X, np.arange(3.0), names=["km", "stops"])
    assert NeighbourMean(k=1, standard_units=False).fit(X, np.arange(3.0)).k_ == 1


# ------------------------------------------------------------------- hand-worked examples


def test_mean_by_hand_with_tie_at_kth_place() -> None:
    """x = 0, 2, 3, 4, 7 and y = 10…50, k = 2, raw units; distances worked out by hand."""
    X = np.array([0.0, 2.0, 3.0, 4.0, 7.0])
    y = np.array([10.0, 20.0, 30.0, 40.0, 50.0])
    res = NeighbourMean(k=2, standard_units=False).fit(X, y)
    # row 0 (x=0): d = 2, 3, 4, 7 to rows 1–4 → rows 1, 2 → (20 + 30) / 2 = 25
    # row 1 (x=2): d = 2, 1, 2, 5 to rows 0, 2, 3, 4 → row 2, then rows 0 and 3 tie at 2:
    #              the lower row 0 wins → (30 + 10) / 2 = 20
    # row 2 (x=3): d = 3, 1, 1, 4 → rows 1 and 3 tie at 1 → (20 + 40) / 2 = 30
    # row 3 (x=4): d = 4, 2, 1, 3 → rows 2, 1 → (30 + 20) / 2 = 25
    # row 4 (x=7): d = 7, 5, 4, 3 → rows 3, 2 → (40 + 30) / 2 = 35
    assert res.neighbours_.tolist() == [[1, 2], [2, 0], [1, 3], [2, 1], [3, 2]]
    assert res.distances_.tolist() == [[2, 3], [1, 2], [1, 1], [1, 2], [3, 4]]
    assert res.fitted_.tolist() == [25.0, 20.0, 30.0, 25.0, 35.0]
    assert res.resid_.tolist() == [-15.0, 0.0, 0.0, 15.0, 15.0]
    # RMSE = sqrt((225 + 0 + 0 + 225 + 225) / 5) = sqrt(135)
    assert res.rmse_ == math.sqrt(135.0)
    assert res.nb_min_.tolist() == [20, 10, 20, 20, 30]
    assert res.nb_median_.tolist() == [25, 20, 30, 25, 35]
    assert res.nb_max_.tolist() == [30, 30, 40, 30, 40]
    assert res.k_given_ and res.k_ == 2


def test_twelve_digit_tie_lower_row_wins() -> None:
    """Distances 1 + 1e-14 (row 1) and 1 (row 2) agree to 12 digits: row 1 comes first."""
    X = np.array([0.0, -(1.0 + 1e-14), 1.0, 5.0])
    res = NeighbourMean(k=1, standard_units=False).fit(X, np.array([0.0, 1.0, 2.0, 3.0]))
    assert res.neighbours_[0].tolist() == [1]  # by raw distance row 2 would be nearer
    assert res.distances_[0].tolist() == [1.0 + 1e-14]
    # 1 + 1e-10 does not agree with 1 to 12 digits: the nearer row 2 comes first.
    X2 = np.array([0.0, -(1.0 + 1e-10), 1.0, 5.0])
    res2 = NeighbourMean(k=1, standard_units=False).fit(X2, np.array([0.0, 1.0, 2.0, 3.0]))
    assert res2.neighbours_[0].tolist() == [2]


def test_mean_by_hand_in_standard_units() -> None:
    """Corners of a 1 × 2 rectangle: standard units make both sides equal (hand arithmetic)."""
    X = np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 2.0], [1.0, 2.0]])
    y = np.array([1.0, 2.0, 4.0, 8.0])
    res = NeighbourMean(k=2).fit(X, y)
    # means 0.5 and 1, population SDs 0.5 and 1 → Z = (±1, ±1): corners of a square.
    assert res.scaling_.mean_.tolist() == [0.5, 1.0] and res.scaling_.sd_.tolist() == [0.5, 1.0]
    assert res.Z_.tolist() == [[-1, -1], [1, -1], [-1, 1], [1, 1]]
    # side 2, diagonal sqrt(8): each row's two side-neighbours tie at 2, lower row first.
    assert res.neighbours_.tolist() == [[1, 2], [0, 3], [0, 3], [1, 2]]
    assert res.distances_.tolist() == [[2, 2]] * 4
    # fitted: (2 + 4) / 2 = 3; (1 + 8) / 2 = 4.5; (1 + 8) / 2 = 4.5; (2 + 4) / 2 = 3
    assert res.fitted_.tolist() == [3.0, 4.5, 4.5, 3.0]
    # In raw units row 0's nearest is row 1 (distance 1 against 2 to row 2).
    raw = NeighbourMean(k=1, standard_units=False).fit(X, y)
    assert raw.neighbours_[0].tolist() == [1] and raw.distances_[0].tolist() == [1.0]


def test_tied_vote_nearest_class_wins() -> None:
    """Two votes each: the class of the nearest neighbour wins (rows worked by hand)."""
    X = np.array([0.0, 1.0, 2.0, 3.0, 4.0, 10.0])
    labels = ["a", "b", "b", "a", "a", "b"]
    res = NeighbourVote(k=4, standard_units=False).fit(X, labels)
    # row 0: neighbours rows 1 (b), 2 (b), 3 (a), 4 (a) → 2 against 2, nearest is b
    assert res.neighbours_[0].tolist() == [1, 2, 3, 4]
    assert res.fitted_[0] == "b" and res.votes_[0] == 2 and res.score_[0] == 0.5
    # row 3 (x=3): d = 3, 2, 1, 1, 7 → rows 2 (b), 4 (a) tie at 1, then 1 (b), 0 (a):
    # 2 against 2 and the nearest (row 2) is b
    assert res.neighbours_[3].tolist() == [2, 4, 1, 0]
    assert res.fitted_[3] == "b"
    assert res.share("a")[3] == 0.5 and res.share("b")[3] == 0.5
    # New row at 0.5 among five classes in order c, a, a, c, b: c and a have 2 votes each;
    # c sits at the nearest position, so c wins although "a" sorts first.
    Xt = np.array([1.0, 2.0, 3.0, 4.0, 5.0, 100.0])
    for labs, want in ((["c", "a", "a", "c", "b", "b"], "c"), (["a", "c", "c", "a", "b", "b"], "a")):
        pred = NeighbourVote(k=5, standard_units=False).fit(Xt, labs).predict(np.array([0.5]))
        assert pred.neighbours.tolist() == [[0, 1, 2, 3, 4]]
        assert pred.distances.tolist() == [[0.5, 1.5, 2.5, 3.5, 4.5]]
        assert pred.value.tolist() == [want] and pred.votes.tolist() == [2]
        assert pred.score.tolist() == [0.4] and pred.share("b").tolist() == [0.2]


def test_vote_summaries_by_hand() -> None:
    """Confusion matrix, precision, recall and base rate of the hand example above."""
    X = np.array([0.0, 1.0, 2.0, 3.0, 4.0, 10.0])
    res = NeighbourVote(k=1, standard_units=False).fit(X, ["a", "b", "b", "a", "a", "b"])
    # k = 1 nearest (ties to the lower row): 0→1 b, 1→0 a, 2→1 b, 3→2 b, 4→3 a, 5→4 a
    assert res.neighbours_[:, 0].tolist() == [1, 0, 1, 2, 3, 4]
    assert res.fitted_.tolist() == ["b", "a", "b", "b", "a", "a"]
    assert res.correct_.tolist() == [False, False, True, False, True, False]
    assert res.error_rate_ == 4 / 6
    # actual a: rows 0, 3, 4 → predicted b, b, a; actual b: rows 1, 2, 5 → a, b, a
    assert res.confusion_.tolist() == [[1, 2], [2, 1]]
    assert res.precision_.tolist() == [1 / 3, 1 / 3]
    assert res.recall_.tolist() == [1 / 3, 1 / 3]
    assert res.base_rate_.tolist() == [0.5, 0.5]
    assert res.classes_.tolist() == ["a", "b"]


def test_numeric_labels_by_value_and_precision_nan() -> None:
    """Numeric labels compare by value (1 and 1.0 are one class); an unpredicted class has nan."""
    X = np.array([0.0, 0.1, 0.2, 5.0, 9.0, 9.1, 9.2])
    res = NeighbourVote(k=2, standard_units=False).fit(X, [1, 1.0, 1, 3, 2, 2.0, 2])
    assert res.classes_.tolist() == [1.0, 2.0, 3.0]
    assert 3.0 not in res.fitted_.tolist()  # row 3 alone in class 3 is never predicted
    assert math.isnan(res.precision_[2]) and res.recall_[2] == 0.0
    assert res.share(2)[4] == 1.0


# --------------------------------------------------------------- independent engine


@pytest.mark.parametrize("k", [1, 4, 9])
def test_mean_matches_scikit_learn(k: int) -> None:
    """Leave-one-out and new-row means equal scikit-learn's brute k-NN, to 1e-12."""
    rng = _rng(k)
    X = rng.normal(size=(300, 3)) * [1.0, 40.0, 0.01]
    y = X @ [2.0, 0.1, 300.0] + rng.normal(size=300)
    res = NeighbourMean(k=k).fit(X, y)
    Z = StandardScaler().fit_transform(X)  # scikit-learn StandardScaler: population SD
    # scikit-learn KNeighborsRegressor (brute): leave-one-out by querying k + 1, dropping self
    knn = KNeighborsRegressor(n_neighbors=k + 1, algorithm="brute").fit(Z, y)
    dist, idx = knn.kneighbors(Z)
    assert np.all(idx[:, 0] == np.arange(300))  # tie-free data: each row is its own nearest
    np.testing.assert_array_equal(res.neighbours_, idx[:, 1:])
    np.testing.assert_allclose(res.distances_, dist[:, 1:], rtol=1e-12, atol=0)
    np.testing.assert_allclose(res.fitted_, y[idx[:, 1:]].mean(axis=1), rtol=1e-12, atol=1e-12)
    Xn = rng.normal(size=(50, 3)) * [1.0, 40.0, 0.01]
    ref = KNeighborsRegressor(n_neighbors=k, algorithm="brute").fit(Z, y)
    pred = res.predict(Xn)
    Zn = (Xn - X.mean(axis=0)) / X.std(axis=0)
    np.testing.assert_array_equal(pred.neighbours, ref.kneighbors(Zn)[1])
    np.testing.assert_allclose(pred.value, ref.predict(Zn), rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize("k", [1, 5, 11])
def test_vote_matches_scikit_learn(k: int) -> None:
    """Two classes and odd k (no tied votes): classes equal scikit-learn's brute k-NN."""
    rng = _rng(100 + k)
    X = rng.normal(size=(400, 2))
    labels = np.where(X[:, 0] + 0.5 * rng.normal(size=400) > 0, "late", "on time")
    res = NeighbourVote(k=k).fit(X, labels.tolist())
    Z = StandardScaler().fit_transform(X)  # population SD
    # scikit-learn KNeighborsClassifier (brute): leave-one-out by k + 1 neighbours minus self
    knn = KNeighborsClassifier(n_neighbors=k + 1, algorithm="brute").fit(Z, labels)
    idx = knn.kneighbors(Z)[1]
    assert np.all(idx[:, 0] == np.arange(400))
    np.testing.assert_array_equal(res.neighbours_, idx[:, 1:])
    loo = np.array([max(set(r), key=r.count) for r in labels[idx[:, 1:]].tolist()])
    np.testing.assert_array_equal(res.fitted_.astype(str), loo)
    Xn = rng.normal(size=(60, 2))
    Zn = (Xn - X.mean(axis=0)) / X.std(axis=0)
    ref = KNeighborsClassifier(n_neighbors=k, algorithm="brute").fit(Z, labels)
    pred = res.predict(Xn)
    np.testing.assert_array_equal(pred.value.astype(str), ref.predict(Zn))
    late = list(ref.classes_).index("late")
    np.testing.assert_allclose(pred.share("late"), ref.predict_proba(Zn)[:, late], rtol=1e-15)


# ------------------------------------------------------- tie rule against brute force


@pytest.mark.parametrize(
    ("n", "m", "levels", "k", "on"),
    [
        (40, 1, 3, 7, True),
        (60, 2, 3, 5, False),
        (80, 2, 4, 25, True),
        (120, 3, 2, 10, True),
        (150, 3, 3, 30, False),
        (200, 2, 5, 1, True),
    ],
)
def test_grid_with_duplicates_matches_brute_force(
    n: int, m: int, levels: int, k: int, on: bool
) -> None:
    """Integer grids full of duplicates: KD-tree path equals the O(n²) reference exactly."""
    rng = _rng(n * 10 + m)
    X = rng.integers(0, levels, size=(n, m)).astype(float)
    y = rng.normal(size=n).round(2)
    _check_against_reference(X, y, k, on)


@pytest.mark.parametrize("chunk", [1, 97, 2_000])
def test_search_in_small_blocks_matches_brute_force(chunk: int, monkeypatch) -> None:
    """The search takes query rows a block at a time (``_search._CHUNK`` elements of
    candidate differences); with blocks of one row, of a few rows and of a few dozen, a
    duplicate-rich grid still equals the O(n²) reference exactly (a block written to the
    wrong rows, or a row left out between blocks, fails it)."""
    from sheetfit.fit import _search

    monkeypatch.setattr(_search, "_CHUNK", chunk)
    rng = _rng(4242)
    X = rng.integers(0, 4, size=(150, 3)).astype(float)
    y = rng.normal(size=150).round(2)
    _check_against_reference(X, y, 12, True)


@pytest.mark.parametrize("rows", [1, 7, 64])
def test_fit_in_row_blocks_matches_brute_force(rows: int, monkeypatch) -> None:
    """The fit searches and builds the k table a block of training rows at a time
    (``neighbours._FIT_ROWS``), keeping each k's sum of squares as exact parts; with
    blocks of 1, 7 and 64 rows a duplicate-rich grid still equals the O(n²) reference
    (neighbours, distances, fitted means), and every k-table entry equals the RMSE of a
    fit with that k. The vote's k table equals each refit's error rate, and its classes
    and votes those of the fit in one block."""
    from sheetfit.fit import neighbours

    rng = _rng(977)
    X = rng.integers(0, 4, size=(150, 3)).astype(float)
    y = rng.normal(size=150).round(2)
    labels = rng.choice(["late", "on time", "early"], 150)
    whole = NeighbourVote(k=None).fit(X, labels)
    monkeypatch.setattr(neighbours, "_FIT_ROWS", rows)
    _check_against_reference(X, y, 12, True)
    chosen = NeighbourMean().fit(X, y)  # k chosen by the table built in blocks
    assert chosen.rmse_ == min(err for _, err in chosen.k_table_)
    blocked = NeighbourVote(k=None).fit(X, labels)
    assert blocked.k_table_ == whole.k_table_ and blocked.k_ == whole.k_
    assert blocked.fitted_code_.tolist() == whole.fitted_code_.tolist()
    assert blocked.votes_.tolist() == whole.votes_.tolist()
    assert blocked.distances_.tolist() == whole.distances_.tolist()
    for kk, err in blocked.k_table_[::6]:
        assert err == NeighbourVote(k=kk).fit(X, labels).error_rate_


@settings(max_examples=40, deadline=None)
@given(
    rows=st.lists(
        st.tuples(st.integers(-3, 3), st.integers(0, 2), st.sampled_from([0.1, 0.2, 0.3])),
        min_size=3,
        max_size=40,
    ),
    k=st.integers(1, 12),
)
def test_hypothesis_grids_match_brute_force(rows: list[tuple[int, int, float]], k: int) -> None:
    """Generated grids (with decimals that are not exact in binary) follow the exact rule."""
    X = np.array(rows, dtype=float)
    X[0, np.all(X == X[0], axis=0)] += 1.0  # no constant attribute: standard units exist
    k = min(k, X.shape[0] - 1)
    _check_against_reference(X, np.arange(X.shape[0], dtype=float), k, True)


def test_new_rows_match_brute_force_without_self_exclusion() -> None:
    """New rows equal to training rows keep them as neighbours at distance 0, lower row first."""
    rng = _rng(7)
    X = rng.integers(0, 3, size=(90, 2)).astype(float)
    y = rng.normal(size=90)
    res = NeighbourMean(k=6).fit(X, y)
    Xn = np.vstack([X[:10], rng.integers(-1, 4, size=(10, 2)).astype(float)])
    pred = res.predict(Xn)
    Zn = res.scaling_.transform(Xn)
    for i in range(Xn.shape[0]):
        ref = _ref_order(res.Z_, Zn[i], 6, skip=None)
        assert pred.neighbours[i].tolist() == [j for j, _ in ref]
        assert pred.distances[i].tolist() == [d for _, d in ref]
        assert pred.value[i] == math.fsum(y[[j for j, _ in ref]].tolist()) / 6
        assert pred.nb_median[i] == np.median(y[[j for j, _ in ref]])
    assert pred.distances[:10, 0].tolist() == [0.0] * 10


def test_vote_matches_brute_force_on_grid() -> None:
    """Leave-one-out votes and the vote k table follow the contract's rule on a tied grid."""
    rng = _rng(11)
    X = rng.integers(0, 3, size=(70, 2)).astype(float)
    labels = rng.choice(["x", "y", "z"], size=70).tolist()
    res = NeighbourVote().fit(X, labels)
    for kk, err in res.k_table_:
        wrong = 0
        for i in range(70):
            order = _ref_order(res.Z_, res.Z_[i], kk, skip=i)
            cls, votes = _ref_vote([labels[j] for j, _ in order])
            wrong += cls != labels[i]
            if kk == res.k_:
                assert (res.fitted_[i], res.votes_[i]) == (cls, votes)
        assert err == wrong / 70, f"k = {kk}"


# ------------------------------------------------------------------------ k selection


def test_chosen_k_is_smallest_argmin_of_table() -> None:
    """Without k the chosen k has the least leave-one-out error; equal errors → smaller k."""
    rng = _rng(3)
    X = rng.normal(size=(120, 2))
    y = np.sin(3 * X[:, 0]) + 0.3 * rng.normal(size=120)
    res = NeighbourMean().fit(X, y)
    errs = [e for _, e in res.k_table_]
    assert [k for k, _ in res.k_table_] == list(range(1, 26))
    assert res.k_ == 1 + errs.index(min(errs)) and not res.k_given_
    assert res.rmse_ == min(errs)
    # A constant response fits every k exactly: all errors 0, so k = 1.
    flat = NeighbourMean().fit(X, np.full(120, 2.5))
    assert {e for _, e in flat.k_table_} == {0.0} and flat.k_ == 1
    # Two far clusters labelled by cluster: error 0 for many k; the smallest is chosen.
    Xc = np.concatenate([rng.normal(size=(10, 1)), 100 + rng.normal(size=(10, 1))])
    vote = NeighbourVote().fit(Xc, ["a"] * 10 + ["b"] * 10)
    assert vote.k_table_[0][1] == 0.0 and vote.k_table_[5][1] == 0.0 and vote.k_ == 1
    assert len(vote.k_table_) == 19  # the table stops at n − 1


def test_given_k_beyond_table() -> None:
    """A given k above 25 is used as it is; the table still stops at 25."""
    rng = _rng(5)
    X = rng.integers(0, 4, size=(45, 2)).astype(float)
    y = rng.normal(size=45)
    res = NeighbourMean(k=30).fit(X, y)
    assert res.k_ == 30 and res.k_given_ and len(res.k_table_) == 25
    assert res.neighbours_.shape == (45, 30) and res.distances_.shape == (45, 30)
    _check_against_reference(X, y, 30, True)


# ------------------------------------------------------------------------------ refusals


@pytest.mark.parametrize("k", [0, -1, 6, 9])
def test_refuses_k_out_of_range(k: int) -> None:
    """k must be between 1 and n − 1."""
    X, y = np.arange(6.0), np.arange(6.0)
    with pytest.raises(
        SettingError, match=r"k must be at least 1 and less than the number of rows \(6\)"
    ):
        NeighbourMean(k=k).fit(X, y)
    with pytest.raises(SettingError, match=r"k must be at least 1"):
        NeighbourVote(k=k).fit(X, ["a", "b"] * 3)


def test_refuses_bad_settings() -> None:
    """k must be a whole number and standard_units a yes/no; checked in fit, not the constructor."""
    model = NeighbourMean(k=2.5)  # type: ignore[arg-type]
    with pytest.raises(SettingError, match=r"k must be a whole number, given 2\.5"):
        model.fit(np.arange(6.0), np.arange(6.0))
    with pytest.raises(SettingError, match=r"setting standard_units"):
        NeighbourMean(standard_units="yes").fit(np.arange(6.0), np.arange(6.0))  # type: ignore[arg-type]


def test_refuses_one_class() -> None:
    """A vote needs at least two classes; the message names the one there is."""
    with pytest.raises(DataError, match=r"y holds only one class, 'late'; a vote needs two or more"):
        NeighbourVote(k=1).fit(np.arange(4.0), ["late"] * 4)


def test_refuses_mixed_label_types() -> None:
    """Labels are all numbers or all text."""
    with pytest.raises(DataError, match=r"y mixes numbers and text"):
        NeighbourVote(k=1).fit(np.arange(4.0), ["late", 1, "on time", 0])


def test_refuses_non_finite_values() -> None:
    """Attributes and (for the mean) the response must be finite numbers."""
    X = np.array([[0.0, 1.0], [1.0, np.nan], [2.0, 0.0]])
    with pytest.raises(DataError, match=r"row 2: attribute x2 is not a finite number"):
        NeighbourMean(k=1).fit(X, np.arange(3.0))
    with pytest.raises(DataError, match=r"row 3: the response is not a finite number"):
        NeighbourMean(k=1).fit(np.arange(3.0), np.array([1.0, 2.0, np.inf]))
    res = NeighbourMean(k=1).fit(np.arange(3.0), np.arange(3.0))
    with pytest.raises(DataError, match=r"new row 1: attribute x1 is not a finite number"):
        res.predict(np.array([np.nan]))
    with pytest.raises(DataError, match=r"class 'c' is not one of the classes"):
        NeighbourVote(k=1).fit(np.arange(4.0), ["a", "b"] * 2).share("c")


# ------------------------------------------------------------------------ exact sums


@settings(max_examples=200, deadline=None)
@given(
    st.lists(
        st.lists(
            st.floats(allow_nan=False, allow_infinity=False, min_value=-1e30, max_value=1e30),
            min_size=3,
            max_size=8,
        ).map(lambda r: (r + [0.0] * 8)[:8]),
        min_size=1,
        max_size=20,
    )
)
def test_row_sums_are_correctly_rounded(rows: list[list[float]]) -> None:
    """The vectorised row sums equal math.fsum (correct rounding), cancellation included."""
    A = np.array(rows)
    A[:, 4] = -A[:, 0]  # force heavy cancellation in every row
    got = prefix_fsums(A, list(range(1, 9)))
    for k, sums in got.items():
        assert sums.tolist() == [math.fsum(r[:k]) for r in A.tolist()]


def test_public_names() -> None:
    """The module's public list holds the estimators, results, predictions and scaling."""
    assert sorted(nb.__all__) == sorted(
        ["TABLE_MAX_K", "TIE_DIGITS", "MeanPrediction", "NeighbourMean", "NeighbourMeanResult",
         "NeighbourVote", "NeighbourVoteResult", "Prediction", "Scaling", "VotePrediction",
         "standard_units"]
    )  # fmt: skip
    assert isinstance(NeighbourMean(k=1).fit(np.arange(3.0), np.arange(3.0)).scaling_, Scaling)


def test_prediction_outside_the_fitted_range_is_cautioned() -> None:
    """Both neighbour models caution on new rows outside the training range (0-based rows)."""
    X = np.array([[0.0, 0.0], [1.0, 2.0], [2.0, 1.0], [3.0, 3.0]])
    for res in (NeighbourMean(k=2).fit(X, np.arange(4.0)),
                NeighbourVote(k=2).fit(X, ["a", "b", "a", "b"])):
        with pytest.warns(ExtrapolationCaution) as caught:
            res.predict(np.array([[1.0, 1.0], [4.0, 1.0]]))
        assert [w.message.rows for w in caught] == [[1]]
