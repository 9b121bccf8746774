import jax
import jax.numpy as jnp
import numpy as np
import pytest

from solvers import etdrk4, etdrk4_coefficients, make_etdrk4_step

from _solver_fields import observed_order

# Decoupled semilinear modes u_k' = lam_k u_k - a u_k^2, each a logistic (Bernoulli) equation with the
# closed form u(t) = lam u0 e^{lam t} / (lam + a u0 (e^{lam t} - 1)); stiff (lam = -50), neutral (lam = 0),
# growing and complex (oscillatory) modes.
LAM = np.array([-50.0, -5.0, -0.5, 0.0, 1.0, -3.0 + 2.0j])
U0 = np.array([1.0, 0.5, 2.0, 1.0, 0.3, 0.7], dtype=complex)


def quadratic(u, prm):
    return -prm["a"] * u**2


def bernoulli_exact(t, a=1.0):
    lam = LAM.astype(complex)
    out = np.empty_like(U0)
    for k in range(lam.size):
        if lam[k] == 0:
            out[k] = U0[k] / (1 + a * U0[k] * t)
        else:
            e = np.exp(lam[k] * t)
            out[k] = lam[k] * U0[k] * e / (lam[k] + a * U0[k] * (e - 1))
    return out


def test_fourth_order_on_semilinear_modes_with_closed_form():
    # ETDRK4 is fourth order (Cox & Matthews 2002; Kassam & Trefethen 2005)
    hs, errs = [], []
    for dt in (0.2, 0.1, 0.05):
        n = int(round(2.0 / dt))
        sol = etdrk4(LAM, quadratic, U0, dt, n, {"a": 1.0}, save_every=n)  # same output shape: one compile
        assert sol.success and sol.y.dtype == np.complex128
        errs.append(np.abs(sol.y[-1] - bernoulli_exact(2.0)).max())
        hs.append(dt)
    assert 3.6 < observed_order(hs, errs) < 4.4
    assert errs[-1] < 1e-7


def burgers_exact(x, t, nu, a0=2.0, a1=1.0):
    # Cole–Hopf: u = -2 nu phi_x / phi with phi = a0 + a1 e^{-nu t} cos x solving the heat equation
    # (Cole 1951; Hopf 1950)
    e = a1 * np.exp(-nu * t)
    return 2 * nu * e * np.sin(x) / (a0 + e * np.cos(x))


def test_fourth_order_on_viscous_burgers_against_cole_hopf():
    n_x, nu, t_end = 64, 0.5, 1.0
    x = 2 * np.pi * np.arange(n_x) / n_x
    k = np.fft.fftfreq(n_x, 1.0 / n_x)
    L = -nu * k**2  # stiff: dt |L| up to ~100 at dt = 0.2

    def burgers_n(u_hat, prm):
        u = jnp.real(jnp.fft.ifft(u_hat))
        return -0.5j * k * jnp.fft.fft(u * u)

    u0_hat = np.fft.fft(burgers_exact(x, 0.0, nu))
    hs, errs = [], []
    for dt in (0.2, 0.1, 0.05):
        n = int(round(t_end / dt))
        sol = etdrk4(L, burgers_n, u0_hat, dt, n, {}, save_every=n)
        u = np.real(np.fft.ifft(sol.y[-1]))
        errs.append(np.abs(u - burgers_exact(x, t_end, nu)).max())
        hs.append(dt)
    assert 3.5 < observed_order(hs, errs) < 4.5


def test_step_factory_matches_integrator_and_jits():
    step = jax.jit(make_etdrk4_step(LAM, quadratic, 0.1))
    u = jnp.asarray(U0)
    for _ in range(5):
        u = step(u, {"a": 1.0})
    sol = etdrk4(LAM, quadratic, U0, 0.1, 5, {"a": 1.0}, save_every=5)
    np.testing.assert_allclose(np.asarray(u), sol.y[-1], rtol=1e-13, atol=1e-15)


def test_contour_coefficients_match_direct_formula_away_from_zero():
    # for |z| not small the phi-functions can be evaluated directly (Kassam & Trefethen 2005, eq. 2.5)
    L, dt = np.array([-3.0, -1.5, 2.0]), 0.5
    z = L * dt
    co = etdrk4_coefficients(L, dt)
    Q = dt * (np.exp(z / 2) - 1) / z
    f1 = dt * (-4 - z + np.exp(z) * (4 - 3 * z + z**2)) / z**3
    np.testing.assert_allclose(co["Q"], Q, rtol=1e-12)
    np.testing.assert_allclose(co["f1"], f1, rtol=1e-12)
    # near z = 0 the limits are dt/2 and dt/6 where direct evaluation cancels (closed-form limits)
    co0 = etdrk4_coefficients(np.array([0.0, 1e-12]), dt)
    np.testing.assert_allclose(co0["Q"], dt / 2, rtol=1e-12)
    np.testing.assert_allclose(co0["f1"], dt / 6, rtol=1e-12)


def test_shape_mismatch_is_rejected():
    with pytest.raises(ValueError, match="u0_hat must have shape"):
        etdrk4(LAM, quadratic, U0[:3], 0.1, 10, {"a": 1.0})
