"""Double pendulum: canonical coordinates, energy, and the default (non-chaotic) regime."""

from __future__ import annotations

import math

import numpy as np
import pytest

import solvers
from suite.systems import get_system


def test_default_setup():
    s = get_system("double_pendulum")
    np.testing.assert_allclose(s.default_y0(), [math.pi / 4, math.pi / 4, 0.0, 0.0])
    assert s.params == {"g": 9.81, "m1": 1.0, "m2": 1.0, "l1": 1.0, "l2": 1.0}
    # slow normal mode of equal masses and lengths: omega^2 = (2 - sqrt 2) g / l (closed form)
    assert s.characteristic_time == pytest.approx(2 * math.pi / math.sqrt((2 - math.sqrt(2)) * 9.81))


def test_canonical_round_trip_and_energy_conservation():
    s = get_system("double_pendulum", m1=1.3, l2=0.7)
    p = s.params
    y0 = np.array([2.0, -1.0, 0.5, 3.0])
    z0 = np.asarray(s.to_canonical(y0, p))
    np.testing.assert_allclose(np.asarray(s.from_canonical(z0, p)), y0, rtol=1e-14)
    assert float(s.hamiltonian(z0, p)) == pytest.approx(float(s.energy(y0, p)), rel=1e-14)
    sol = solvers.solve_scipy(s.rhs(), (0.0, 20.0), y0, p, t_eval=np.linspace(0.0, 20.0, 201),
                              rtol=1e-12, atol=1e-12)
    e = np.array([s.energy(y, p) for y in sol.y])
    assert np.abs(e - e[0]).max() < 1e-8 * (1 + abs(e[0]))
    # implicit midpoint on the non-separable Hamiltonian keeps the energy bounded as well
    zs = solvers.integrate_hamiltonian(s.hamiltonian, z0, 0.01, 2000, p, save_every=20)
    h = np.array([float(s.hamiltonian(z, p)) for z in np.asarray(zs.y)])
    err = np.abs(h - h[0])
    # second order: error ~ (omega dt)^2 ~ 2.5e-3 relative at omega ~ 5 (measured 1.7e-3), and no drift
    assert err.max() < 5e-3 * abs(h[0])
    assert err[len(err) // 2:].max() < 2.0 * err[: len(err) // 2].max()


def test_small_amplitude_limit_is_the_linear_normal_mode():
    """Started on the slow normal mode (theta2 = sqrt2 theta1), it returns after one period (closed form)."""
    s = get_system("double_pendulum")
    a = 1e-4
    y0 = np.array([a, math.sqrt(2.0) * a, 0.0, 0.0])
    t = s.characteristic_time
    sol = solvers.solve_scipy(s.rhs(), (0.0, t), y0, s.params, t_eval=[0.0, t], rtol=1e-12, atol=1e-16)
    np.testing.assert_allclose(sol.y[-1], y0, atol=1e-10)


@pytest.mark.slow
def test_default_start_is_regular_but_high_energy_start_is_chaotic():
    s = get_system("double_pendulum")
    reg = solvers.largest_lyapunov_exponent(s.rhs(), s.default_y0(), s.params, dt=0.01, t_end=1000.0,
                                            transient=0.0)
    # both rods horizontal-ish and at rest: strongly chaotic (Stachowiak & Okada 2006, common example)
    wild = solvers.largest_lyapunov_exponent(s.rhs(), np.array([2.0, 2.5, 0.0, 0.0]), s.params, dt=0.01,
                                             t_end=1000.0, transient=0.0)
    assert reg.exponents[0] < 0.02 and wild.exponents[0] > 0.5
