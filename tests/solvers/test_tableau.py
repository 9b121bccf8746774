import numpy as np
import pytest

from solvers import DOPRI5, HEUN2, RK3, RK4, ButcherTableau


@pytest.mark.parametrize("tab", [HEUN2, RK3, RK4, DOPRI5])
def test_builtin_tableaux_satisfy_invariants(tab):
    # rows of A sum to c and weights sum to 1 (Butcher, Numerical Methods for ODEs, 2008, ch. 3)
    np.testing.assert_allclose(tab.A.sum(axis=1), tab.c, atol=1e-15)
    assert abs(tab.b.sum() - 1.0) < 1e-15
    assert np.all(np.triu(tab.A) == 0.0)


def test_dopri5_is_fsal():
    # last row of A equals b (Dormand & Prince 1980): first-same-as-last
    np.testing.assert_array_equal(DOPRI5.A[-1], DOPRI5.b)
    assert DOPRI5.fsal and DOPRI5.order == 5 and DOPRI5.error_order == 4


def test_row_sum_mismatch_is_rejected():
    with pytest.raises(ValueError, match="row 1 of A sums"):
        ButcherTableau("bad", A=[[0, 0], [0.4, 0]], b=[0.5, 0.5], c=[0, 0.5], order=2)


def test_weights_not_summing_to_one_are_rejected():
    with pytest.raises(ValueError, match="weights b sum"):
        ButcherTableau("bad", A=[[0, 0], [1, 0]], b=[0.5, 0.6], c=[0, 1], order=2)


def test_implicit_tableau_is_rejected():
    with pytest.raises(ValueError, match="strictly lower triangular"):
        ButcherTableau("bad", A=[[0.5, 0], [0.5, 0.5]], b=[0.5, 0.5], c=[0.5, 1.0], order=2)


def test_bad_embedded_weights_are_rejected():
    with pytest.raises(ValueError, match="b_error"):
        ButcherTableau("bad", A=[[0, 0], [1, 0]], b=[0.5, 0.5], c=[0, 1], order=2, b_error=[0.9, 0.0])


def test_coefficients_are_read_only():
    with pytest.raises(ValueError):
        RK4.A[1, 0] = 3.0
