"""Largest Lyapunov exponents of Rössler, Chua and Duffing against published or recorded values."""

from __future__ import annotations

import numpy as np
import pytest

import solvers
from suite.systems import get_system


def _spectrum(name, t_end, dt=0.01):
    s = get_system(name)
    return s, solvers.lyapunov_spectrum(s.rhs(), s.default_y0(), s.params, dt=dt, t_end=t_end,
                                        transient=s.transient)


@pytest.mark.slow
def test_rossler_largest_exponent_matches_sprott():
    s, res = _spectrum("rossler", 5000.0)
    # Sprott (2003), from memory: (0.0714, 0, -5.3943). Rössler's slow spiral needs thousands of
    # time units; over 5000 the running estimate still moves by ~5 % (measured), hence rtol 0.1.
    assert res.exponents[0] == pytest.approx(0.0714, rel=0.1)
    assert res.exponents[1] == pytest.approx(0.0, abs=0.005)
    assert res.exponents[2] == pytest.approx(-5.3943, rel=0.01)
    assert s.measured_lyapunov_exponent == pytest.approx(res.exponents[0], rel=0.1)


@pytest.mark.slow
def test_rossler_exponent_sum_is_the_mean_divergence():
    """Sum of exponents = time average of tr J = a + <x> - c (closed-form trace)."""
    s = get_system("rossler")
    y_on = solvers.solve_scipy(s.rhs(), (0.0, 100.0), s.default_y0(), s.params, rtol=1e-10, atol=1e-12).y[-1]
    res = solvers.lyapunov_spectrum(s.rhs(), y_on, s.params, dt=0.01, t_end=500.0, transient=0.0)
    sol = solvers.solve_scipy(s.rhs(), (0.0, 500.0), y_on, s.params, t_eval=np.linspace(0.0, 500.0, 50001),
                              rtol=1e-10, atol=1e-12)
    mean_x = np.trapezoid(sol.y[:, 0], sol.t) / 500.0
    assert res.exponents.sum() == pytest.approx(s.params["a"] + mean_x - s.params["c"], abs=0.01)
    assert res.exponents[0] > 0.03


@pytest.mark.slow
def test_chua_largest_exponent_matches_sprott():
    s, res = _spectrum("chua", 3000.0)
    # Sprott (2003), from memory: (0.3271, 0, -2.5197) for alpha=9, beta=100/7, a=8/7, b=5/7.
    assert res.exponents[0] == pytest.approx(0.3271, rel=0.05)
    assert res.exponents[2] == pytest.approx(-2.5197, rel=0.03)
    assert s.measured_lyapunov_exponent == pytest.approx(res.exponents[0], rel=0.05)


def test_chua_is_chaotic_on_the_double_scroll():
    s = get_system("chua")
    res = solvers.largest_lyapunov_exponent(s.rhs(), s.default_y0(), s.params, dt=0.02, t_end=200.0,
                                            transient=50.0)
    assert res.exponents[0] > 0.2  # Sprott (2003), from memory: 0.3271
    sol = solvers.solve_scipy(s.rhs(), (0.0, 120.0), s.default_y0(), s.params,
                              t_eval=np.linspace(50.0, 120.0, 701), rtol=1e-7, atol=1e-9)
    # double scroll: the orbit visits both outer equilibria x = +-1.5 (closed form, default parameters)
    assert sol.y[:, 0].max() > 1.0 and sol.y[:, 0].min() < -1.0


def test_duffing_exponents_sum_to_minus_damping():
    """Phase-space volume contracts at rate delta (closed form), and the attractor is chaotic."""
    s = get_system("duffing")
    res = solvers.lyapunov_spectrum(s.rhs(), s.default_y0(), s.params, dt=0.02, t_end=1000.0,
                                    transient=50.0)
    assert res.exponents.sum() == pytest.approx(-s.params["delta"], abs=1e-6)
    # recorded by this suite (0.11 over 5000 time units); finite-time scatter ~10 % (measured)
    assert res.exponents[0] == pytest.approx(s.measured_lyapunov_exponent, rel=0.3)


def test_duffing_start_states_lie_at_forcing_phase_zero():
    s = get_system("duffing")
    starts = s.initial_conditions(2, seed=3)
    assert starts.shape == (2, 2) and np.all(np.isfinite(starts))
    # the same state reached by integrating from an earlier start state over whole periods
    period = s.forcing_period
    spacing = period * max(1, round(5.0 * s.time_unit / period))
    sol = solvers.solve_scipy(s.rhs(), (0.0, spacing), starts[0], s.params, t_eval=[0.0, spacing],
                              rtol=1e-11, atol=1e-12)
    np.testing.assert_allclose(sol.y[-1], starts[1], atol=1e-4 * (1 + np.abs(starts[1]).max()))
