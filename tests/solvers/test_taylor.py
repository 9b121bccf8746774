"""integrate_taylor / taylor_coefficients: closed forms, mpmath series, scipy, conservation, order, batching."""

from __future__ import annotations

import math
import os
import subprocess
import sys
import textwrap

import jax
import jax.numpy as jnp
import mpmath
import numpy as np
import pytest
from scipy.special import ellipk

from solvers import (
    TaylorUnsupportedError,
    array_namespace,
    integrate_taylor,
    jorba_zou_order,
    solve_scipy,
    taylor_coefficients,
    taylor_step,
)
from solvers.parallel import integrate_taylor_sharded
from solvers.taylor_series import NAMESPACE, Series
from suite.systems import get_system

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))


def oscillator(t, y, p):
    xp = array_namespace(y, *p.values())
    return xp.stack([y[1], -p["w"] ** 2 * y[0]])


def growth(t, y, p):
    return p["a"] * y


def riccati(t, y, p):
    return y * y


def lorenz(t, y, p):
    xp = array_namespace(y, *p.values())
    return xp.stack([p["s"] * (y[1] - y[0]), y[0] * (p["r"] - y[2]) - y[1], y[0] * y[1] - p["b"] * y[2]])


LORENZ_P = {"s": 10.0, "r": 28.0, "b": 8.0 / 3.0}  # Lorenz (1963) parameters


def test_harmonic_oscillator_closed_form():
    # closed form: x = cos(w t), v = -w sin(w t) for x(0) = 1, v(0) = 0
    t = np.linspace(0.0, 20.0, 21)
    w = 1.3
    exact = np.stack([np.cos(w * t), -w * np.sin(w * t)], axis=1)
    fixed = integrate_taylor(oscillator, [1.0, 0.0], t, {"w": w}, dt=0.25, order=20)
    adaptive = integrate_taylor(oscillator, [1.0, 0.0], t, {"w": w}, tol=1e-16)
    assert fixed.success and adaptive.success and fixed.y.shape == (21, 2)
    assert np.abs(fixed.y - exact).max() < 1e-13
    assert np.abs(adaptive.y - exact).max() < 1e-13
    assert adaptive.extra["order"] == jorba_zou_order(1e-16) == 20  # ceil(-ln(1e-16)/2 + 1) = ceil(19.42)


def test_exponential_growth_and_riccati_closed_forms():
    # closed forms: y' = a y -> y0 exp(a t); y' = y^2 -> 1 / (1 - t) for y(0) = 1 (pole at t = 1)
    t = np.linspace(0.0, 3.0, 7)
    sol = integrate_taylor(growth, [1.0, -2.0], t, {"a": 1.5}, tol=1e-15)
    exact = np.exp(1.5 * t)[:, None] * np.array([1.0, -2.0])
    assert np.abs(sol.y / exact - 1.0).max() < 1e-13
    t = np.array([0.0, 0.5, 0.9, 0.99])
    sol = integrate_taylor(riccati, [1.0], t, {}, tol=1e-15)
    assert sol.success
    np.testing.assert_allclose(sol.y[:, 0], 1.0 / (1.0 - t), rtol=1e-12)
    # near the pole the controlled step shrinks with the radius of convergence (1 - t)
    assert sol.n_steps > 20


def known(t, y, p):
    """Six independent components, each with a closed-form solution (see KNOWN_SOLUTIONS)."""
    xp = array_namespace(y, t)
    return xp.stack([
        y[0] ** 1.5,            # y = (y0^-1/2 - t/2)^-2
        xp.sqrt(y[1]),          # y = (sqrt(y0) + t/2)^2
        xp.exp(-y[2]),          # y = log(exp(y0) + t)
        1.0 / y[3],             # y = sqrt(y0^2 + 2 t)
        xp.sin(t) * y[4],       # y = y0 exp(cos t0 - cos t)
        xp.log(t + 2.0) + xp.cos(t) ** 3 + xp.tanh(t),  # y = y0 + integral from t0
    ])


T0 = 0.3
Y0 = [0.7, 1.2, 0.4, 0.9, -1.1, 0.25]


def _exact_components(t):
    # closed forms of KNOWN (by separation of variables / direct integration), evaluated in mpmath
    y0 = [mpmath.mpf(v) for v in Y0]
    s = t - T0

    def prim(u):  # an antiderivative of log(u + 2) + cos(u)^3 + tanh(u)
        return ((u + 2) * mpmath.log(u + 2) - (u + 2) + mpmath.sin(u) - mpmath.sin(u) ** 3 / 3
                + mpmath.log(mpmath.cosh(u)))

    return [
        (y0[0] ** -0.5 - s / 2) ** -2,
        (mpmath.sqrt(y0[1]) + s / 2) ** 2,
        mpmath.log(mpmath.exp(y0[2]) + s),
        mpmath.sqrt(y0[3] ** 2 + 2 * s),
        y0[4] * mpmath.exp(mpmath.cos(T0) - mpmath.cos(t)),
        y0[5] + prim(t) - prim(mpmath.mpf(T0)),
    ]


def test_coefficients_match_mpmath_taylor_of_closed_forms():
    order = 10
    got = np.asarray(jax.jit(lambda y: taylor_coefficients(known, T0, y, {}, order))(jnp.asarray(Y0)))
    assert got.shape == (order + 1, 6)
    with mpmath.workdps(30):
        for i in range(6):
            ref = mpmath.taylor(lambda t: _exact_components(t)[i], T0, order)  # mpmath.taylor: c_k = f^(k)/k!
            ref = np.array([float(c) for c in ref])
            np.testing.assert_allclose(got[:, i], ref, rtol=1e-11, atol=1e-14, err_msg=f"component {i}")


def test_step_matches_closed_form_and_time_is_a_series():
    # one step of the non-autonomous component y' = sin(t) y from t0 = 0.3 (closed form above)
    h = 0.1  # a quarter of the smallest radius of convergence (sqrt(y0^2 + 2 s): branch point at s = -0.405)
    y1 = np.asarray(taylor_step(known, T0, jnp.asarray(Y0), h, {}, 24))
    with mpmath.workdps(30):
        exact = [float(v) for v in _exact_components(mpmath.mpf(T0) + mpmath.mpf(h))]
    np.testing.assert_allclose(y1, exact, rtol=1e-13)


def test_step_is_the_taylor_polynomial_of_the_coefficients():
    # y(t + h) = sum_k y_k h^k (definition of the Taylor polynomial), summed here by numpy
    y0 = jnp.asarray([1.0, 2.0, 20.0])
    cs = np.asarray(taylor_coefficients(lorenz, 0.0, y0, LORENZ_P, 12))
    step = np.asarray(jax.jit(lambda y: taylor_step(lorenz, 0.0, y, 0.01, LORENZ_P, 12))(y0))
    np.testing.assert_allclose(step, np.polyval(cs[::-1], 0.01), rtol=1e-15, atol=0)
    assert np.abs(cs[1] - np.asarray(lorenz(0.0, y0, LORENZ_P))).max() == 0.0  # y_1 = f(y)


def test_lorenz63_matches_dop853_inside_predictability_horizon():
    # scipy DOP853 at rtol = atol = 1e-13 as the reference; t <= 5 (about 4.5 Lyapunov times)
    y0 = np.array([1.0, 1.0, 20.0]) + np.random.default_rng(3).normal(size=3)
    t = np.linspace(0.0, 5.0, 11)
    ours = integrate_taylor(lorenz, y0, t, LORENZ_P, dt=0.02, order=20)
    ref = solve_scipy(lorenz, (0.0, 5.0), y0, LORENZ_P, method="DOP853", t_eval=t, rtol=1e-13, atol=1e-13)
    assert ours.success and ref.success
    assert np.abs(ours.y - ref.y).max() < 1e-8
    assert ours.n_steps == 250


def test_henon_heiles_energy_is_conserved():
    # H is an exact invariant (Henon & Heiles 1964); the chaotic default orbit at E = 0.16
    s = get_system("henon_heiles")
    t = np.linspace(0.0, 200.0, 41)
    sol = integrate_taylor(s.rhs(), s.default_y0(), t, s.params, tol=1e-16)
    energy = np.array([s.hamiltonian(y, s.params) for y in sol.y])
    assert abs(energy[0] - 0.16) < 1e-15  # the start is built at E = 0.16
    assert np.abs(energy - energy[0]).max() < 1e-13


def test_lorenz96_roll_field_matches_dop853():
    # reference: scipy DOP853 at rtol = atol = 1e-13; a start on the attractor, t <= 1
    s = get_system("lorenz96", N=10)
    y0 = s.default_y0() + np.random.default_rng(5).normal(size=10)
    t = np.linspace(0.0, 1.0, 6)
    ours = integrate_taylor(s.rhs(), y0, t, s.params, dt=0.01, order=10)
    ref = solve_scipy(s.rhs(), (0.0, 1.0), y0, s.params, method="DOP853", t_eval=t, rtol=1e-13, atol=1e-13)
    assert np.abs(ours.y - ref.y).max() < 1e-10


def test_pendulum_sin_field_returns_after_the_elliptic_period():
    # closed form: period 4 sqrt(L/g) K(sin^2(theta0/2)) (Landau & Lifshitz, Mechanics, section 11)
    s = get_system("pendulum")
    th0 = s.amplitude
    period = 4.0 * math.sqrt(s.params["L"] / s.params["g"]) * float(ellipk(math.sin(th0 / 2) ** 2))
    t = np.array([0.0, 0.25 * period, 0.5 * period, period])
    sol = integrate_taylor(s.rhs(), s.default_y0(), t, s.params, tol=1e-16)
    np.testing.assert_allclose(sol.y[-1], [th0, 0.0], atol=1e-12)
    np.testing.assert_allclose(sol.y[1, 0], 0.0, atol=1e-12)  # quarter period: bottom of the swing
    np.testing.assert_allclose(sol.y[2], [-th0, 0.0], atol=1e-12)
    ref = solve_scipy(s.rhs(), (0.0, period), s.default_y0(), s.params, method="DOP853", t_eval=t,
                      rtol=1e-13, atol=1e-13)
    assert np.abs(sol.y - ref.y).max() < 1e-11


def test_duffing_non_autonomous_field_matches_dop853():
    # reference: scipy DOP853 at rtol = atol = 1e-13; the forcing cos(omega t) needs t as a series
    s = get_system("duffing")
    t = np.linspace(0.0, 10.0, 11)
    ours = integrate_taylor(s.rhs(), s.default_y0(), t, s.params, dt=0.05, order=16)
    ref = solve_scipy(s.rhs(), (0.0, 10.0), s.default_y0(), s.params, method="DOP853", t_eval=t,
                      rtol=1e-13, atol=1e-13)
    assert np.abs(ours.y - ref.y).max() < 1e-10
    # starting later must see a later forcing phase (t0 is traced, not dropped)
    late = integrate_taylor(s.rhs(), s.default_y0(), t + 1.0, s.params, dt=0.05, order=16)
    assert np.abs(late.y[-1] - ours.y[-1]).max() > 1e-3


def test_observed_convergence_order_is_p():
    # global error O(dt^p) for a method of order p (Hairer, Norsett & Wanner, Solving ODEs I, II.3);
    # the nonlinear pendulum against a tight DOP853 run
    s = get_system("pendulum")
    t = np.linspace(0.0, 2.0, 3)
    ref = solve_scipy(s.rhs(), (0.0, 2.0), s.default_y0(), s.params, method="DOP853", t_eval=t,
                      rtol=1e-13, atol=1e-14).y
    for p in (3, 5):
        errs = [np.abs(integrate_taylor(s.rhs(), s.default_y0(), t, s.params, dt=dt, order=p).y - ref).max()
                for dt in (0.04, 0.02)]
        observed = math.log2(errs[0] / errs[1])
        assert abs(observed - p) < 0.35, (p, errs, observed)


def test_unsupported_operations_are_named():
    with pytest.raises(TaylorUnsupportedError, match="'abs'"):
        s = get_system("chua")
        integrate_taylor(s.rhs(), s.default_y0(), [0.0, 1.0], s.params, dt=0.1, order=4)

    def spectral(t, y, p):
        xp = array_namespace(y)
        return xp.fft.irfft(xp.fft.rfft(y), n=4)

    with pytest.raises(TaylorUnsupportedError, match="'fft'"):
        integrate_taylor(spectral, np.ones(4), [0.0, 1.0], {}, dt=0.1, order=4)

    def branch(t, y, p):
        return y if y[0] > 0 else -y

    with pytest.raises(TaylorUnsupportedError, match="'>'"):
        integrate_taylor(branch, np.ones(2), [0.0, 1.0], {}, dt=0.1, order=4)


def test_batch_equals_single_trajectories():
    y0s = np.array([1.0, 1.0, 20.0]) + np.random.default_rng(7).normal(size=(3, 3))
    t = np.linspace(0.0, 1.0, 5)
    batch = integrate_taylor(lorenz, y0s, t, LORENZ_P, dt=0.05, order=12)
    assert batch.y.shape == (3, 5, 3)
    for i in range(3):
        single = integrate_taylor(lorenz, y0s[i], t, LORENZ_P, dt=0.05, order=12)
        np.testing.assert_allclose(batch.y[i], single.y, rtol=1e-14, atol=1e-13)
    adaptive = integrate_taylor(lorenz, y0s, t, LORENZ_P, tol=1e-12, order=10)
    steps = adaptive.extra["steps"]
    assert steps.shape == (3,) and adaptive.n_steps == steps.max()
    single = integrate_taylor(lorenz, y0s[1], t, LORENZ_P, tol=1e-12, order=10)
    assert int(single.extra["steps"]) == int(steps[1])  # each trajectory keeps its own steps
    np.testing.assert_allclose(adaptive.y[1], single.y, rtol=1e-14, atol=1e-13)


def test_compiled_once_per_shape_and_fixed_step_lands_on_outputs():
    t = np.array([0.0, 0.3, 1.0])
    a = integrate_taylor(oscillator, [1.0, 0.0], t, {"w": 1.0}, dt=0.1, order=9)
    b = integrate_taylor(oscillator, [0.5, 0.0], t + 2.0, {"w": 2.0}, dt=0.07, order=9)
    assert b.compile_seconds == 0.0  # t_eval values, dt and parameters are traced
    assert a.n_steps == 3 + 7  # ceil(0.3 / 0.1) + ceil(0.7 / 0.1) equal steps
    np.testing.assert_allclose(b.y[-1], [0.5 * math.cos(2.0), -1.0 * math.sin(2.0)], atol=1e-12)


def test_bad_inputs_are_one_line_errors():
    with pytest.raises(ValueError, match="exactly one of dt"):
        integrate_taylor(growth, [1.0], [0.0, 1.0], {"a": 1.0})
    with pytest.raises(ValueError, match="exactly one of dt"):
        integrate_taylor(growth, [1.0], [0.0, 1.0], {"a": 1.0}, dt=0.1, tol=1e-9)
    with pytest.raises(ValueError, match="order"):
        integrate_taylor(growth, [1.0], [0.0, 1.0], {"a": 1.0}, dt=0.1, order=0)
    with pytest.raises(ValueError, match="non-decreasing"):
        integrate_taylor(growth, [1.0], [1.0, 0.0], {"a": 1.0}, dt=0.1)
    with pytest.raises(ValueError, match="shape"):
        integrate_taylor(lambda t, y, p: y[0], [1.0, 2.0], [0.0, 1.0], {}, dt=0.1, order=3)


def test_a_blow_up_is_a_failed_status():
    # y' = y^2 from y(0) = 1 has a pole at t = 1 (closed form 1 / (1 - t))
    sol = integrate_taylor(riccati, [1.0], [0.0, 2.0], {}, tol=1e-12, max_steps=2000)
    assert not sol.success and sol.message


def test_array_namespace_picks_the_series_namespace():
    s = Series(jnp.ones(3))
    assert array_namespace(np.ones(2), s) is NAMESPACE
    assert array_namespace(np.ones(2)) is np
    assert array_namespace(jnp.ones(2), 1.0) is jnp


def test_sharded_one_device_matches_integrate_taylor():
    y0s = np.array([1.0, 1.0, 20.0]) + np.random.default_rng(11).normal(size=(5, 3))
    t = np.linspace(0.0, 1.0, 3)
    a = integrate_taylor(lorenz, y0s, t, LORENZ_P, dt=0.05, order=8)
    b = integrate_taylor_sharded(lorenz, y0s, t, LORENZ_P, dt=0.05, order=8, devices=jax.devices()[:1])
    np.testing.assert_array_equal(a.y, b.y)
    assert b.extra["devices"] == 1


@pytest.mark.slow
def test_two_host_devices_split_an_odd_batch_and_agree():
    code = textwrap.dedent("""
        import numpy as np, jax
        from solvers import integrate_taylor
        from solvers.parallel import integrate_taylor_sharded
        from tests.solvers.test_taylor import lorenz, LORENZ_P
        assert len(jax.devices()) == 2, jax.devices()
        y0 = np.array([1.0, 1.0, 20.0]) + np.random.default_rng(2).normal(size=(7, 3))
        t = np.linspace(0.0, 1.0, 3)
        a = integrate_taylor(lorenz, y0, t, LORENZ_P, dt=0.05, order=12)
        b = integrate_taylor_sharded(lorenz, y0, t, LORENZ_P, dt=0.05, order=12)
        assert b.extra["devices"] == 2 and b.y.shape == (7, 3, 3)
        c = integrate_taylor(lorenz, y0, t, LORENZ_P, tol=1e-10, order=8)
        d = integrate_taylor_sharded(lorenz, y0, t, LORENZ_P, tol=1e-10, order=8)
        assert (c.extra["steps"] == d.extra["steps"]).all()
        print(max(float(np.abs(a.y - b.y).max()), float(np.abs(c.y - d.y).max())))
    """)
    env = dict(os.environ, XLA_FLAGS="--xla_force_host_platform_device_count=2", OPENBLAS_NUM_THREADS="1",
               PYTHONPATH=ROOT + os.pathsep + os.environ.get("PYTHONPATH", ""))
    out = subprocess.run([sys.executable, "-c", code], env=env, cwd=ROOT, capture_output=True, text=True,
                         timeout=300)
    assert out.returncode == 0, out.stderr[-2000:]
    assert float(out.stdout.strip().splitlines()[-1]) < 1e-13
