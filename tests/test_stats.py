"""Bootstrap intervals and rank tests (suite/stats.py)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from suite.stats import bootstrap_ci, friedman_nemenyi, nemenyi_critical_difference


@pytest.mark.parametrize("k, q005", [(2, 1.960), (3, 2.343), (4, 2.569), (5, 2.728), (10, 3.164)])
def test_nemenyi_q_alpha_matches_demsar_table(k, q005):
    # Demšar 2006, J. Mach. Learn. Res. 7, Table 5(a): critical values q_0.05 of the Nemenyi test.
    n = 7
    cd = nemenyi_critical_difference(k, n, alpha=0.05)
    q = cd / np.sqrt(k * (k + 1) / (6 * n))
    assert q == pytest.approx(q005, abs=2e-3)


def test_demsar_worked_example_critical_difference():
    # Demšar 2006, section 3.2.4: four classifiers on 14 data sets, CD = 2.569*sqrt(4*5/(6*14)) = 1.25.
    assert nemenyi_critical_difference(4, 14) == pytest.approx(1.25, abs=0.01)


def test_friedman_statistic_matches_scipy_and_ranks_average():
    rng = np.random.default_rng(0)
    scores = rng.normal(size=(8, 4)) + np.array([0.0, 0.5, 1.0, 3.0])
    res = friedman_nemenyi(scores, ["a", "b", "c", "d"], higher_is_better=True)
    ref = stats.friedmanchisquare(*scores.T)  # scipy reference; ranking is invariant to the sign flip
    assert res.statistic == pytest.approx(ref.statistic)
    assert res.p_value == pytest.approx(ref.pvalue)
    assert sum(res.average_ranks) == pytest.approx(4 * 5 / 2)  # ranks 1..k sum to k(k+1)/2 per block
    assert np.argmin(res.average_ranks) == 3  # "d" is clearly best


def test_identical_learners_are_reported_not_significant():
    scores = np.tile([1.0, 1.0, 1.0], (6, 1)) + np.random.default_rng(1).normal(0, 1e-3, (6, 3))
    res = friedman_nemenyi(scores, ["x", "y", "z"])
    assert not res.significant()
    assert "NOT significantly different" in res.summary()


def test_clear_winner_forms_its_own_group():
    # "best" wins every block; p, q, r are exchangeable noise around 1.
    rng = np.random.default_rng(2)
    scores = np.column_stack([np.full(12, 10.0), rng.normal(1.0, 0.5, (12, 3))])
    res = friedman_nemenyi(scores, ["best", "p", "q", "r"])
    assert res.significant()
    assert res.cliques[0] == ("best",)
    assert any(set(c) == {"p", "q", "r"} for c in res.cliques)


def test_nan_scores_rank_last():
    scores = np.array([[1.0, np.nan], [2.0, np.nan], [3.0, 1.0]])
    res = friedman_nemenyi(scores, ["ok", "broken"])
    assert res.average_ranks[0] < res.average_ranks[1]


def test_bootstrap_interval_contains_the_median_and_needs_two_values():
    x = np.random.default_rng(3).normal(5.0, 1.0, 200)
    lo, hi = bootstrap_ci(x, seed=0)
    assert lo < np.median(x) < hi
    assert hi - lo < 0.6  # standard error of the median ≈ 1.2533·σ/√n = 0.089 (Efron & Tibshirani 1993)
    assert all(np.isnan(bootstrap_ci([1.0])))
    assert bootstrap_ci([2.0, 2.0, 2.0]) == (2.0, 2.0)


def test_shape_error_is_one_clear_line():
    with pytest.raises(ValueError, match="shape"):
        friedman_nemenyi(np.ones((3, 2)), ["a", "b", "c"])
