import numpy as np
import pytest

from solvers import solve_scipy

from _solver_fields import logistic, logistic_exact, oscillator, tol_rel_error


@pytest.mark.parametrize("method", ["DOP853", "RK45", "Radau", "LSODA"])
def test_logistic_closed_form(method):
    t = np.linspace(0.0, 5.0, 21)
    sol = solve_scipy(logistic, (0.0, 5.0), [0.1], {"r": 1.0, "K": 2.0}, method=method, t_eval=t,
                      rtol=1e-8, atol=1e-10)
    assert sol.success and sol.y.shape == (21, 1)
    # closed form; common practice: global error within ~100x the local tolerance for these methods
    assert tol_rel_error(sol.y[:, 0], logistic_exact(t, 0.1, 1.0, 2.0), 1e-8, 1e-10) < 100.0


def test_implicit_methods_get_a_jax_jacobian():
    sol = solve_scipy(oscillator, (0.0, 1.0), [1.0, 0.0], {"w": 3.0}, method="Radau")
    assert sol.extra["jacobian"] == "jax.jacfwd"
    fd = solve_scipy(oscillator, (0.0, 1.0), [1.0, 0.0], {"w": 3.0}, method="Radau", jac="fd")
    assert fd.extra["jacobian"] == "finite differences"


def test_non_traceable_field_falls_back_to_finite_differences():
    def numpy_only(t, y, p):
        return -np.asarray(y, dtype=float) * p["k"]  # np.asarray on a tracer fails

    sol = solve_scipy(numpy_only, (0.0, 1.0), [1.0], {"k": 1.0}, method="Radau", t_eval=[0.0, 1.0])
    assert sol.extra["jacobian"] == "finite differences"
    np.testing.assert_allclose(sol.y[-1, 0], np.exp(-1.0), rtol=1e-6)  # closed form


def test_unknown_method_names_the_closest():
    with pytest.raises(ValueError, match="did you mean DOP853"):
        solve_scipy(oscillator, (0.0, 1.0), [1.0, 0.0], {"w": 1.0}, method="DOP583")


def test_exception_in_field_is_a_status():
    def broken(t, y, p):
        if t > 0.5:
            raise FloatingPointError("boom")
        return -y

    sol = solve_scipy(broken, (0.0, 1.0), [1.0], {}, t_eval=[0.0, 1.0])
    assert sol.status == "failed" and "boom" in sol.message and sol.y.shape == (2, 1)


def test_accepted_steps_counted_with_and_without_t_eval():
    kw = dict(rtol=1e-8, atol=1e-10)
    own = solve_scipy(oscillator, (0.0, 3.0), [1.0, 0.0], {"w": 1.0}, **kw)
    grid = solve_scipy(oscillator, (0.0, 3.0), [1.0, 0.0], {"w": 1.0}, t_eval=[0.0, 1.5, 3.0], **kw)
    # without t_eval scipy returns one row per accepted step (plus the start)
    assert own.n_steps == len(own.t) - 1 == grid.n_steps > 0
