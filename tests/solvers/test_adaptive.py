import numpy as np
import pytest

from solvers import dopri5, solve_scipy

from _solver_fields import LORENZ_PARAMS, LORENZ_SPECTRUM, lorenz63, oscillator, tol_rel_error

T_EVAL = np.linspace(0.0, 1.0 / LORENZ_SPECTRUM[0], 41)  # one Lyapunov time (Sprott 2003)


def test_closed_form_oscillator_at_several_tolerances():
    # closed form x = cos t; error should track the tolerance (Hairer et al., Solving ODEs I, II.4)
    t = np.linspace(0.0, 10.0, 41)
    exact = np.stack([np.cos(t), -np.sin(t)], axis=1)
    errors, steps = [], []
    for tol in (1e-6, 1e-8, 1e-10):
        sol = dopri5(oscillator, [1.0, 0.0], t, {"w": 1.0}, rtol=tol, atol=tol)
        assert sol.success
        # global error over ~1.6 periods stays within a small multiple of the tolerance (common practice: < 10x)
        assert tol_rel_error(sol.y, exact, tol, tol) < 10.0
        errors.append(np.max(np.abs(sol.y - exact)))
        steps.append(sol.n_steps)
    assert errors[0] > errors[1] > errors[2]
    # a 5th-order method needs ~10^(2/5) = 2.5x more steps per 100x tighter tolerance (Hairer et al. II.4)
    ratio = steps[2] / steps[1]
    assert 1.8 < ratio < 3.5


def test_matches_scipy_dop853_on_lorenz_over_one_lyapunov_time():
    y0 = np.array([1.0, 1.0, 20.0])
    sol = dopri5(lorenz63, y0, T_EVAL, LORENZ_PARAMS, rtol=1e-10, atol=1e-10)
    ref = solve_scipy(lorenz63, (T_EVAL[0], T_EVAL[-1]), y0, LORENZ_PARAMS, t_eval=T_EVAL, rtol=1e-13, atol=1e-13)
    assert sol.success and ref.success
    assert tol_rel_error(sol.y, ref.y, 1e-10, 1e-10) < 20.0  # common practice: within ~10x the tolerance
    assert sol.nfev > 6 * sol.n_steps


def test_max_steps_failure_is_a_status():
    y0 = np.array([1.0, 1.0, 20.0])  # same shapes as the scipy comparison above: no new compilation
    short = dopri5(lorenz63, y0, T_EVAL, LORENZ_PARAMS, rtol=1e-10, atol=1e-10, max_steps=20)
    assert short.status == "failed" and "max_steps" in short.message
    assert short.y.shape == (T_EVAL.size, 3)
    assert np.isnan(short.y[-1]).all() and np.isfinite(short.y[0]).all()  # unreached outputs are NaN


@pytest.mark.slow  # compiles the batched solver (~5-10 s on a loaded 2-core box)
def test_batched_matches_single():
    rng = np.random.default_rng(1)
    y0 = np.array([1.0, 1.0, 20.0]) + rng.standard_normal((3, 3))
    batch = dopri5(lorenz63, y0, T_EVAL, LORENZ_PARAMS, rtol=1e-10, atol=1e-10)
    assert batch.y.shape == (3, T_EVAL.size, 3) and batch.success
    single = dopri5(lorenz63, y0[2], T_EVAL, LORENZ_PARAMS, rtol=1e-10, atol=1e-10)
    # each trajectory keeps its own step sequence under vmap: identical up to round-off
    np.testing.assert_allclose(batch.y[2], single.y, rtol=1e-12, atol=1e-12)
    short = dopri5(lorenz63, y0, T_EVAL, LORENZ_PARAMS, rtol=1e-10, atol=1e-10, max_steps=20)
    assert short.status == "failed" and "3 of 3 trajectories" in short.message


@pytest.mark.slow  # one more compilation (~5 s on a loaded 2-core box)
def test_blow_up_reports_failure():
    sol = dopri5(lambda t, y, p: y * y, [1.0], np.array([0.0, 0.5, 2.0]), {})  # y = 1/(1-t)
    assert sol.status == "failed"
    np.testing.assert_allclose(sol.y[1, 0], 2.0, rtol=1e-6)  # closed form 1/(1-0.5)


def test_bad_t_eval_is_rejected():
    with pytest.raises(ValueError, match="monotonic"):
        dopri5(oscillator, [1.0, 0.0], np.array([0.0, 1.0, 0.5]), {"w": 1.0})


def test_backward_in_time():
    t = np.linspace(10.0, 0.0, 41)  # same shapes as the closed-form test: no new compilation
    sol = dopri5(oscillator, [np.cos(10.0), -np.sin(10.0)], t, {"w": 1.0}, rtol=1e-10, atol=1e-12)
    assert sol.success
    np.testing.assert_allclose(sol.y[:, 0], np.cos(t), atol=1e-9)  # closed form cos t
