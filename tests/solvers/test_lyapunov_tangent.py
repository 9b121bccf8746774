"""The two tangent paths of lyapunov_spectrum (vmapped jvp of the step map, stage Jacobian matrices) agree."""

import jax.numpy as jnp
import numpy as np
import pytest

from solvers import lyapunov_spectrum, make_etdrk4_step
from solvers.lyapunov import _tangent_mode

from _solver_fields import LORENZ_PARAMS, LORENZ_SPECTRUM, lorenz63

L96_PARAMS = {"F": 8.0}


def lorenz96(t, y, p):
    """Lorenz (1996) ring: dx_i/dt = (x_{i+1} - x_{i-2}) x_{i-1} - x_i + F (written here: solvers knows no system)."""
    return (jnp.roll(y, -1) - jnp.roll(y, 2)) * jnp.roll(y, 1) - y + p["F"]


def l96_start(n, seed):
    rng = np.random.default_rng(seed)
    return 8.0 + rng.normal(0.0, 1.0, n)


def spectrum(f, y0, p, tangent, **kw):
    res = lyapunov_spectrum(f, y0, p, tangent=tangent, **kw)
    assert res.success and res.tangent == tangent
    return res


@pytest.mark.parametrize("k", [10, 6])
def test_paths_give_the_same_numbers_over_a_short_run(k):
    # over 3 time units both paths compute the same derivative of the same RK4 map: equal up to round-off
    y0 = l96_start(10, seed=1)
    kw = dict(dt=0.01, t_end=3.0, transient=0.0, n_exponents=k)
    a = spectrum(lorenz96, y0, L96_PARAMS, "jvp", **kw)
    b = spectrum(lorenz96, y0, L96_PARAMS, "matrix", **kw)
    np.testing.assert_allclose(b.exponents, a.exponents, rtol=0, atol=1e-9)
    np.testing.assert_allclose(b.history, a.history, rtol=0, atol=1e-9)


def test_lorenz96_n10_paths_agree_within_statistical_error():
    y0 = l96_start(10, seed=2)
    kw = dict(dt=0.01, t_end=220.0, transient=20.0)
    a = spectrum(lorenz96, y0, L96_PARAMS, "jvp", **kw)
    b = spectrum(lorenz96, y0, L96_PARAMS, "matrix", **kw)
    # finite-time estimates over 200 time units scatter by a few hundredths between runs (common
    # practice: error ~ 1/sqrt(T)); here the two paths share the state trajectory up to round-off
    np.testing.assert_allclose(b.exponents, a.exponents, rtol=0, atol=0.02)
    assert b.exponents[0] > 0.5  # chaotic at F = 8 (measured 1.2 for N = 10)
    # tr J = -N everywhere (the advection term is trace-free): the exponents sum to -N (closed form);
    # RK4's tangent map reproduces it to O(dt^4)
    assert b.exponents.sum() == pytest.approx(-10.0, abs=1e-4)
    assert a.exponents.sum() == pytest.approx(-10.0, abs=1e-4)


def test_lorenz63_matrix_path_matches_published_values_and_trace():
    kw = dict(dt=0.01, t_end=420.0, transient=20.0)
    a = spectrum(lorenz63, [1.0, 1.0, 20.0], LORENZ_PARAMS, "jvp", **kw)
    b = spectrum(lorenz63, [1.0, 1.0, 20.0], LORENZ_PARAMS, "matrix", **kw)
    np.testing.assert_allclose(b.exponents, a.exponents, rtol=0, atol=0.02)  # statistical error, as above
    # Sprott, Chaos and Time-Series Analysis (2003): 0.9056, 0, -14.5723; 400 time units -> 4 %
    assert b.exponents[0] == pytest.approx(LORENZ_SPECTRUM[0], rel=0.04)
    assert b.exponents[2] == pytest.approx(LORENZ_SPECTRUM[2], rel=0.04)
    # divergence of the Lorenz field: the constant -(sigma + 1 + beta) (closed form)
    p = LORENZ_PARAMS
    assert b.exponents.sum() == pytest.approx(-(p["sigma"] + 1.0 + p["beta"]), rel=1e-4)


def test_matrix_path_on_a_time_dependent_linear_field():
    # y' = diag(a1 + b cos t, a2, ..., a9) y: the exponents are the time averages of the diagonal (closed form)
    diag = np.array([0.1, -0.5, 0.3, -1.0, 0.0, -2.0, 0.2, -0.1, -3.0])
    b, t0, t_end = 2.0, 0.7, 10.0

    def forced(t, y, p):
        return (jnp.asarray(diag) + jnp.zeros(9).at[0].set(b * jnp.cos(t))) * y

    res = spectrum(forced, np.ones(9), {}, "matrix", dt=0.001, t_end=t_end, transient=0.0, t0=t0)
    expected = diag.copy()
    expected[0] += b * (np.sin(t0 + t_end) - np.sin(t0)) / t_end
    np.testing.assert_allclose(res.exponents, np.sort(expected)[::-1], atol=1e-8)


def test_auto_chooses_the_matrix_path_for_many_vectors_of_a_moderate_system():
    # same counts as the short-run test above: served from the compile cache
    res = lyapunov_spectrum(lorenz96, l96_start(10, seed=1), L96_PARAMS, dt=0.01, t_end=3.0, transient=0.0)
    assert res.tangent == "matrix"
    # the rule itself (documented in lyapunov_spectrum): matrix for 8 < d <= 96 and 2 k >= d, without a step map
    assert _tangent_mode("auto", None, 10, 5) == "matrix"
    assert _tangent_mode("auto", None, 10, 4) == "jvp"
    assert _tangent_mode("auto", None, 3, 3) == "jvp"
    assert _tangent_mode("auto", None, 97, 97) == "jvp"
    assert _tangent_mode("auto", lambda t, y, dt, p: y, 40, 40) == "jvp"
    assert _tangent_mode("jvp", None, 40, 40) == "jvp"


def test_bad_tangent_arguments():
    with pytest.raises(ValueError, match="tangent must be one of"):
        lyapunov_spectrum(lorenz63, [1.0, 1.0, 20.0], LORENZ_PARAMS, tangent="qr")
    etd = make_etdrk4_step(np.array([-1.0, -2.0]), lambda u, p: -(u**2), 0.05)
    with pytest.raises(ValueError, match="needs the vector field"):
        lyapunov_spectrum(None, np.zeros(2), {}, dt=0.05, t_end=1.0, transient=0.0,
                          step=lambda t, y, dt, p: etd(y, p), tangent="matrix")
