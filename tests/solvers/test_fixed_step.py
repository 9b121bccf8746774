import jax
import jax.numpy as jnp
import numpy as np
import pytest

from solvers import HEUN2, RK3, RK4, integrate_fixed, rk_scan, rk_step, solve_scipy
from solvers._compile import clear_cache

from _solver_fields import (LORENZ_PARAMS, LORENZ_SPECTRUM, decay, logistic, logistic_exact, lorenz63,
                            observed_order, oscillator, tol_rel_error)


def test_rk4_harmonic_oscillator_closed_form():
    # closed form x = cos(w t), v = -w sin(w t)
    w, dt, n = 2.0, 1e-3, 5000
    sol = integrate_fixed(oscillator, [1.0, 0.0], 0.0, dt, n, {"w": w}, save_every=50)
    assert sol.success and sol.y.shape == (101, 2)
    exact = np.stack([np.cos(w * sol.t), -w * np.sin(w * sol.t)], axis=1)
    # global error C dt^4 with C ~ t w^5 / 120 ~ 1e-12 here: scored at rtol 1e-10, atol 1e-12
    assert tol_rel_error(sol.y, exact, 1e-10, 1e-12) < 1.0


def test_rk4_decay_and_logistic_closed_form():
    # RK4 relative error per step (k dt)^5 / 120 ~ 6e-13 at k dt = 0.0075; x 600 steps ~ 4e-10
    sol = integrate_fixed(decay, [2.0, -1.0], 0.0, 0.005, 600, {"k": 1.5})
    exact = np.array([2.0, -1.0])[None] * np.exp(-1.5 * sol.t)[:, None]  # closed form
    assert tol_rel_error(sol.y, exact, 1e-9, 1e-12) < 1.0
    sol = integrate_fixed(logistic, [0.1], 0.0, 0.01, 1000, {"r": 1.0, "K": 2.0})
    exact = logistic_exact(sol.t, 0.1, 1.0, 2.0)[:, None]  # closed form
    assert tol_rel_error(sol.y, exact, 1e-9, 1e-12) < 1.0


@pytest.mark.parametrize("tab", [HEUN2, RK3, RK4])
def test_measured_convergence_order(tab):
    # global error ~ C dt^p (Hairer, Nørsett & Wanner, Solving ODEs I, Thm II.3.4)
    # one compiled loop with a traced step count (rk_step is what is measured)
    run = jax.jit(lambda y0, dt, n: jax.lax.fori_loop(
        0, n, lambda i, y: rk_step(oscillator, i * dt, y, dt, {"w": 1.0}, tab), y0))
    t_end, errs, hs = 2.0, [], []
    for n in (20, 40, 80, 160):
        dt = t_end / n
        y = run(jnp.array([1.0, 0.0]), dt, n)
        errs.append(abs(float(y[0]) - np.cos(t_end)))  # closed form cos(t)
        hs.append(dt)
    assert abs(observed_order(hs, errs) - tab.order) < 0.15


def test_batched_matches_single_inside_horizon():
    # batched vs single differ only by round-off inside the predictability horizon (CPU-NOTES: 4e-15 at t=1)
    rng = np.random.default_rng(0)
    y0 = np.array([1.0, 1.0, 20.0]) + rng.standard_normal((5, 3))
    batch = integrate_fixed(lorenz63, y0, 0.0, 0.001, 2000, LORENZ_PARAMS, save_every=100)
    assert batch.y.shape == (5, 21, 3)
    for i in (0, 4):
        single = integrate_fixed(lorenz63, y0[i], 0.0, 0.001, 2000, LORENZ_PARAMS, save_every=100)
        np.testing.assert_allclose(batch.y[i], single.y, rtol=1e-11, atol=1e-11)


def test_rk4_matches_scipy_dop853_over_one_lyapunov_time():
    t_lyap = 1.0 / LORENZ_SPECTRUM[0]  # Sprott (2003)
    n = 2000
    dt = t_lyap / n
    y0 = np.array([1.0, 1.0, 20.0])
    sol = integrate_fixed(lorenz63, y0, 0.0, dt, n, LORENZ_PARAMS, save_every=100)
    ref = solve_scipy(lorenz63, (0.0, sol.t[-1]), y0, LORENZ_PARAMS, t_eval=sol.t, rtol=1e-13, atol=1e-13)
    # RK4 at dt ~ 5.5e-4 over one Lyapunov time: error ~1e-9, scored at rtol 1e-8
    assert tol_rel_error(sol.y, ref.y, 1e-8, 1e-8) < 1.0


def test_no_recompilation_on_second_call():
    clear_cache()
    traces = []

    def counted(t, y, p):
        traces.append(1)  # runs at trace time only
        return -p["k"] * y

    a = integrate_fixed(counted, [1.0, 2.0], 0.0, 0.01, 100, {"k": 1.0})
    n_traces = len(traces)
    assert n_traces > 0 and a.compile_seconds > 0
    b = integrate_fixed(counted, [3.0, 4.0], 0.5, 0.02, 100, {"k": 2.0})  # same shapes, new values
    assert len(traces) == n_traces and b.compile_seconds == 0.0
    np.testing.assert_allclose(b.y[-1], np.array([3.0, 4.0]) * np.exp(-2.0 * 2.0), rtol=1e-6)  # closed form; RK4 error ~1e-7 at k dt = 0.04
    integrate_fixed(counted, np.ones((3, 2)), 0.0, 0.01, 100, {"k": 1.0})  # new shape: compiles
    assert len(traces) > n_traces


def test_rk_scan_usable_inside_jit_and_grad():
    @jax.jit
    def final_x(w):
        ys = rk_scan(oscillator, jnp.array([1.0, 0.0]), 0.0, 0.01, 100, {"w": w}, save_every=10)
        return ys[-1, 0]

    assert rk_scan(oscillator, jnp.array([1.0, 0.0]), 0.0, 0.01, 100, {"w": 1.0}, save_every=10).shape == (11, 2)
    # d/dw cos(w t) = -t sin(w t) at t = 1 (closed form)
    np.testing.assert_allclose(jax.grad(final_x)(1.0), -np.sin(1.0), rtol=1e-7)


def test_non_autonomous_field_uses_step_times():
    # y' = cos(t): y = y0 + sin(t) - sin(t0) (closed form); t0 != 0 exercises the time offset
    f = lambda t, y, p: jnp.cos(t) * jnp.ones_like(y)
    sol = integrate_fixed(f, [0.0], 1.0, 0.01, 200, {})
    np.testing.assert_allclose(sol.y[:, 0], np.sin(sol.t) - np.sin(1.0), atol=1e-10)


def test_blow_up_is_a_status_not_an_exception():
    sol = integrate_fixed(lambda t, y, p: y * y, [1.0], 0.0, 0.01, 300, {})  # y = 1/(1-t) blows up at t=1
    assert sol.status == "failed" and "non-finite" in sol.message


def test_bad_arguments_name_the_problem():
    with pytest.raises(ValueError, match="multiple of save_every"):
        integrate_fixed(decay, [1.0], 0.0, 0.1, 10, {"k": 1.0}, save_every=3)
    with pytest.raises(ValueError, match="dt"):
        integrate_fixed(decay, [1.0], 0.0, 0.0, 10, {"k": 1.0})


def test_fresh_closures_of_the_same_field_share_compiled_code():
    # a system's rhs() returns a new closure per call; compiled code is keyed on code + closure contents
    clear_cache()
    traces = []

    def make_rhs(scale):
        def rhs(t, y, p):
            traces.append(1)
            return -scale * p["k"] * y

        return rhs

    integrate_fixed(make_rhs(1.0), [1.0], 0.0, 0.1, 10, {"k": 1.0})
    n = len(traces)
    integrate_fixed(make_rhs(1.0), [1.0], 0.0, 0.1, 10, {"k": 1.0})
    assert len(traces) == n
    other = integrate_fixed(make_rhs(2.0), [1.0], 0.0, 0.1, 10, {"k": 1.0})  # different closure value
    assert len(traces) > n
    np.testing.assert_allclose(other.y[-1, 0], np.exp(-2.0), rtol=1e-4)  # closed form; RK4 error 10 x 0.2^5/120 ~ 3e-5


def test_blow_up_is_a_failed_status_naming_the_first_bad_time_and_count():
    """y' = y^2, y(0) = 1 is 1/(1 - t) (closed form): infinite at t = 1, so RK4 overflows soon after."""
    from solvers import integrate_fixed

    f = lambda t, y, p: y ** 2  # noqa: E731
    sol = integrate_fixed(f, np.array([[1.0], [0.1]]), 0.0, 0.01, 300, {}, save_every=50)
    assert not sol.success
    # 1/(1 - t) passes every bound past t = 1; the second start, 1/(10 - t), stays finite to t = 3
    assert sol.message.startswith("non-finite state at t=") and "in 1 of 2 trajectories" in sol.message
    assert 1.0 <= float(sol.message.split("t=")[1].split()[0]) <= 3.0
