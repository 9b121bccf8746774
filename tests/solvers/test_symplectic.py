import jax
import jax.numpy as jnp
import numpy as np
import pytest

from solvers import (RK4, implicit_midpoint_step, integrate_fixed, integrate_hamiltonian, integrate_separable,
                     verlet_step, yoshida4_step)

from _solver_fields import observed_order, oscillator


def kinetic(p, prm):
    return 0.5 * jnp.sum(p**2)


def potential(q, prm):
    return 0.5 * prm["w"] ** 2 * jnp.sum(q**2)


@pytest.mark.parametrize("step, order", [(verlet_step, 2), (yoshida4_step, 4)])
def test_measured_order_of_symplectic_steps(step, order):
    # Störmer–Verlet order 2, triple-jump composition order 4 (Yoshida 1990, Phys. Lett. A 150, 262)
    run = jax.jit(lambda q, p, dt, n: jax.lax.fori_loop(
        0, n, lambda i, c: step(kinetic, potential, c[0], c[1], dt, {"w": 1.0}), (q, p)))
    t_end, hs, errs = 3.0, [], []
    for n in (15, 30, 60, 120):
        q, p = run(jnp.array([1.0]), jnp.array([0.0]), t_end / n, n)
        errs.append(abs(float(q[0]) - np.cos(t_end)))  # closed form cos t
        hs.append(t_end / n)
    assert abs(observed_order(hs, errs) - order) < 0.15


def test_energy_bounded_over_ten_thousand_periods_while_rk4_drifts():
    # symplectic methods keep the energy error bounded for exponentially long times (Hairer, Lubich &
    # Wanner, Geometric Numerical Integration, ch. IX); RK4 damps the oscillator: |R(ih)|^2 = 1 - h^6/72 + ...
    dt = 2 * np.pi / 32
    n = 32 * 10_000  # 10^4 periods
    energy = lambda y: 0.5 * y[..., 1] ** 2 + 0.5 * y[..., 0] ** 2
    res = {}
    for order in (2, 4):
        sol = integrate_separable(kinetic, potential, [1.0], [0.0], dt, n, {"w": 1.0}, order=order, save_every=8)
        err = np.abs(energy(sol.y) - 0.5) / 0.5
        first = err[: 4 * 10].max()  # first ten periods
        assert err.max() < 1.5 * first  # no growth over 10^4 periods
        res[order] = err.max()
    assert res[4] < res[2]
    rk = integrate_fixed(oscillator, [1.0, 0.0], 0.0, dt, n, {"w": 1.0}, tableau=RK4, save_every=8)
    err_rk = np.abs(energy(rk.y) - 0.5) / 0.5
    assert err_rk[-1] > 100 * err_rk[: 4 * 10].max()  # secular drift
    # the drift is the closed-form damping: E_n / E_0 = |R(ih)|^(2n), R the RK4 stability polynomial
    z = 1j * dt
    R = 1 + z + z**2 / 2 + z**3 / 6 + z**4 / 24
    np.testing.assert_allclose(1 - err_rk[-1], abs(R) ** (2 * n), rtol=1e-6)


def test_separable_batch_and_layout():
    q0 = np.array([[1.0, 0.0], [0.5, 0.2]])
    p0 = np.array([[0.0, 1.0], [0.1, 0.0]])
    sol = integrate_separable(kinetic, potential, q0, p0, 0.01, 100, {"w": 2.0}, order=4, save_every=10)
    assert sol.y.shape == (2, 11, 4) and sol.success
    t = sol.t[-1]
    # closed form q(t) = q0 cos(w t) + p0 / w sin(w t)
    np.testing.assert_allclose(sol.y[:, -1, :2], q0 * np.cos(2 * t) + p0 / 2 * np.sin(2 * t), atol=1e-8)


def quartic(z, prm):
    # H = (q^2 + p^2)^2 / 4 (non-separable): rotation at angular speed r^2, closed form
    return 0.25 * jnp.sum(z**2) ** 2


def test_implicit_midpoint_non_separable_closed_form_and_invariant():
    z0 = np.array([1.0, 0.5])
    r2 = float(z0 @ z0)
    dt, n = 0.01, 500
    sol = integrate_hamiltonian(quartic, z0, dt, n, {}, save_every=50)
    assert sol.success and sol.extra["max_iterations"] < 40
    t = sol.t
    exact_q = z0[0] * np.cos(r2 * t) + z0[1] * np.sin(r2 * t)
    np.testing.assert_allclose(sol.y[:, 0], exact_q, atol=5e-4)  # second order: error ~ t (r2 dt)^2 / 24
    # the midpoint rule conserves quadratic invariants exactly (Hairer, Lubich & Wanner, Thm IV.2.1):
    # |z|^2, hence H, to the fixed-point tolerance
    np.testing.assert_allclose(np.sum(sol.y**2, axis=1), r2, rtol=1e-12)


def test_implicit_midpoint_second_order_and_differentiable():
    z0 = jnp.array([1.0, 0.5])
    r2 = float(z0 @ z0)
    run = jax.jit(lambda dt, n: jax.lax.fori_loop(0, n, lambda i, z: implicit_midpoint_step(quartic, z, dt, {}), z0))
    hs, errs = [], []
    for n in (20, 40, 80):
        dt = 1.0 / n
        z = run(dt, n)
        errs.append(abs(float(z[0]) - (1.0 * np.cos(r2) + 0.5 * np.sin(r2))))  # closed form at t = 1
        hs.append(dt)
    assert abs(observed_order(hs, errs) - 2.0) < 0.15
    # with a fixed iteration count the step is reverse-differentiable (used when training through it)
    loss = jax.jit(lambda s: implicit_midpoint_step(lambda z, p: p * quartic(z, p), z0, 0.1, s,
                                                    fixed_iterations=30)[0])
    g = jax.jit(jax.grad(loss))(1.0)
    fd = (loss(1.0 + 1e-6) - loss(1.0 - 1e-6)) / 2e-6
    np.testing.assert_allclose(g, fd, rtol=1e-6)


def test_bad_order_is_rejected():
    with pytest.raises(ValueError, match="order must be 2"):
        integrate_separable(kinetic, potential, [1.0], [0.0], 0.1, 10, {"w": 1.0}, order=3)
