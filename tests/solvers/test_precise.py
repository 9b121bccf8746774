import mpmath
import numpy as np
import pytest

from solvers import MPNumber, cross_check, solve_mpmath, solve_scipy

from _solver_fields import LORENZ_PARAMS, decay, lorenz63


def test_exponential_to_twenty_digits():
    t = [0.0, 0.5, 1.0]
    sol = solve_mpmath(decay, [1.0], t, {"k": 1.0}, dps=30)
    assert sol.success
    with mpmath.workdps(30):
        for i, ti in enumerate(t):
            # closed form exp(-t), evaluated by mpmath at 30 digits
            assert abs(sol.extra["y_mp"][i, 0] - mpmath.exp(-mpmath.mpf(ti))) < mpmath.mpf("1e-20")


def test_trig_field_through_array_namespace():
    # a forced pendulum written with array_namespace (np.sin / np.cos on object arrays of MPNumber)
    from solvers import array_namespace

    def pendulum(t, y, p):
        xp = array_namespace(y)
        return xp.stack([y[1], -p["g"] * xp.sin(y[0]) + 0.1 * xp.cos(t)])

    t = [0.0, 0.25]
    sol = solve_mpmath(pendulum, [1.0, 0.0], t, {"g": 9.81}, dps=20)
    ref = solve_scipy(pendulum, (0.0, 0.25), [1.0, 0.0], {"g": 9.81}, t_eval=t, rtol=1e-13, atol=1e-14)
    assert sol.success
    np.testing.assert_allclose(sol.y, ref.y, rtol=1e-11, atol=1e-12)  # scipy DOP853 at rtol 1e-13


def test_mpnumber_elementwise_functions():
    with mpmath.workdps(30):
        a = np.array([MPNumber(0.5), MPNumber(2.0)], dtype=object)
        s = np.sin(a) ** 2 + np.cos(a) ** 2
        assert all(abs((v - 1).v) < mpmath.mpf("1e-28") for v in s)  # identity sin^2 + cos^2 = 1
        e = np.exp(np.log(a))
        assert abs((e[1] - 2.0).v) < mpmath.mpf("1e-28")


def test_cross_check_is_order_one_inside_the_horizon_and_large_beyond():
    p = LORENZ_PARAMS
    short = cross_check(lorenz63, [1.0, 1.0, 20.0], np.linspace(0.0, 2.0, 21), p)
    # tolerance-relative difference of O(1) (common practice: < 100) over two time units
    assert short < 100.0
    long = cross_check(lorenz63, [1.0, 1.0, 20.0], np.linspace(0.0, 20.0, 21), p)
    assert long > 1e3  # past the predictability horizon the runs disagree (Lorenz 1963)


def test_backward_time_is_rejected():
    with pytest.raises(ValueError, match="non-decreasing"):
        solve_mpmath(decay, [1.0], [1.0, 0.0], {"k": 1.0})
