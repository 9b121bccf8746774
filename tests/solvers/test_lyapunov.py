import jax.numpy as jnp
import numpy as np
import pytest

from solvers import (kaplan_yorke_dimension, largest_lyapunov_exponent, lyapunov_spectrum, make_etdrk4_step)

from _solver_fields import LORENZ_PARAMS, LORENZ_SPECTRUM, lorenz63

# A linear system with eigenvalues -1 +- 2i and 0.3: exponents are the real parts (closed form).
A_LINEAR = np.array([[-1.0, 2.0, 0.0], [-2.0, -1.0, 0.0], [0.0, 0.0, 0.3]])


def linear(t, y, p):
    return jnp.asarray(A_LINEAR) @ y


def test_linear_system_exponents_are_real_parts_of_eigenvalues():
    res = lyapunov_spectrum(linear, [1.0, 0.0, 1.0], {}, dt=0.01, t_end=50.0, transient=0.0)
    assert res.success
    expected = np.sort(np.linalg.eigvals(A_LINEAR).real)[::-1]  # closed form
    np.testing.assert_allclose(res.exponents, expected, atol=2e-3)
    assert res.history.shape == (500, 3) and res.n_steps == 5000


@pytest.fixture(scope="module")
def lorenz_result():
    return lyapunov_spectrum(lorenz63, [1.0, 1.0, 20.0], LORENZ_PARAMS, dt=0.01, t_end=800.0, transient=20.0)


def test_lorenz63_spectrum_matches_published_values(lorenz_result):
    lam = lorenz_result.exponents
    # Sprott, Chaos and Time-Series Analysis (2003): 0.9056, 0, -14.5723; short run -> 3 %
    assert lam[0] == pytest.approx(LORENZ_SPECTRUM[0], rel=0.03)
    assert lam[2] == pytest.approx(LORENZ_SPECTRUM[2], rel=0.03)
    assert abs(lam[1]) < 0.03 * LORENZ_SPECTRUM[0]
    # the Kaplan–Yorke dimension follows: Sprott (2003) gives 2.0621
    assert lorenz_result.kaplan_yorke_dimension == pytest.approx(2.0621, abs=0.01)


def test_sum_of_exponents_equals_trace_of_jacobian(lorenz_result):
    # the divergence of the Lorenz field is the constant -(sigma + 1 + beta), so the exponents sum to it
    # (a fact of the equations); RK4 reproduces the phase-volume contraction to O(dt^4)
    p = LORENZ_PARAMS
    trace = -(p["sigma"] + 1.0 + p["beta"])
    assert lorenz_result.exponents.sum() == pytest.approx(trace, rel=1e-4)


@pytest.mark.slow  # two more compilations
def test_largest_exponent_equals_first_of_spectrum():
    kw = dict(dt=0.01, t_end=60.0, transient=10.0)
    full = lyapunov_spectrum(lorenz63, [1.0, 1.0, 20.0], LORENZ_PARAMS, n_exponents=2, **kw)
    one = largest_lyapunov_exponent(lorenz63, [1.0, 1.0, 20.0], LORENZ_PARAMS, **kw)
    # Gram–Schmidt never changes the direction of the first vector: same numbers up to round-off
    np.testing.assert_allclose(one.exponents[0], full.exponents[0], rtol=1e-9)
    assert one.history.shape[1] == 1 and full.exponents.shape == (2,)


def test_non_autonomous_field_uses_time():
    a1, b, a2 = 0.1, 2.0, -0.5

    def forced(t, y, p):
        return jnp.stack([(a1 + b * jnp.cos(t)) * y[0], a2 * y[1]])

    t0, t_end = 0.7, 10.0
    res = lyapunov_spectrum(forced, [1.0, 1.0], {}, dt=0.001, t_end=t_end, transient=0.0, t0=t0)
    # closed form: (1/T) int_{t0}^{t0+T} (a1 + b cos t) dt
    lam1 = a1 + b * (np.sin(t0 + t_end) - np.sin(t0)) / t_end
    np.testing.assert_allclose(res.exponents, sorted([lam1, a2], reverse=True), atol=1e-8)


def test_user_step_map_etdrk4_at_a_fixed_point():
    # at the fixed point u = 0 of u' = L u - u^2 the tangent dynamics is u' = L u, which ETDRK4 integrates
    # exactly: the exponents are the diagonal of L (closed form)
    L = np.array([-0.2, -1.0, 0.5, -3.0])
    dt = 0.05
    etd = make_etdrk4_step(L, lambda u, p: -(u**2), dt)

    def step(t, y, dt_, p):
        return etd(y, p)

    res = lyapunov_spectrum(None, np.zeros(4), {}, dt=dt, t_end=20.0, transient=0.0, step=step)
    np.testing.assert_allclose(res.exponents, np.sort(L)[::-1], atol=1e-10)


def test_kaplan_yorke_hand_computed():
    # D = j + (l1 + ... + lj) / |l_{j+1}| (Kaplan & Yorke 1979); hand-computed
    assert kaplan_yorke_dimension([1.0, -0.5, -2.0]) == pytest.approx(2.25)
    assert kaplan_yorke_dimension(LORENZ_SPECTRUM) == pytest.approx(2 + 0.9056 / 14.5723)
    assert kaplan_yorke_dimension([-0.1, -1.0]) == 0.0
    assert kaplan_yorke_dimension([0.5, 0.0]) == 2.0
    assert kaplan_yorke_dimension([0.3, -1.0]) == pytest.approx(1.3)


def test_bad_arguments():
    with pytest.raises(ValueError, match="must exceed transient"):
        lyapunov_spectrum(linear, [1.0, 0.0, 1.0], {}, t_end=10.0, transient=20.0)
    with pytest.raises(ValueError, match="n_exponents"):
        lyapunov_spectrum(linear, [1.0, 0.0, 1.0], {}, n_exponents=4)
