"""Hénon–Heiles: symplectic vs non-symplectic energy behaviour, regular vs chaotic energies."""

from __future__ import annotations

import math

import numpy as np
import pytest

import solvers
from suite.systems import get_system


def _energy(s, ys):
    return np.array([s.hamiltonian(y, s.params) for y in np.asarray(ys)])


def test_symplectic_energy_error_bounded_while_rk4_drifts():
    s = get_system("henon_heiles", E=1.0 / 12.0)
    y0 = s.start_on_section(0.1)
    e0 = s.hamiltonian(y0, s.params)
    assert e0 == pytest.approx(1.0 / 12.0, rel=1e-14)
    dt, n, every = 0.2, 320_000, 3200  # 64,000 time units ~ 10^4 periods of the unit-frequency oscillator
    sym = solvers.integrate_separable(s.kinetic, s.potential, y0[:2], y0[2:], dt, n, s.params, order=4,
                                      save_every=every)
    rk = solvers.integrate_fixed(s.rhs(), y0, 0.0, dt, n, s.params, save_every=every)
    err_sym = np.abs(_energy(s, sym.y) - e0)
    err_rk = np.abs(_energy(s, rk.y) - e0)
    half = len(err_sym) // 2
    # symplectic: bounded (no secular growth between the first and second half) -- Hairer, Lubich &
    # Wanner, Geometric Numerical Integration (2006), ch. IX (backward error analysis)
    assert err_sym[half:].max() < 3.0 * err_sym[1:half].max() + 1e-15
    assert err_sym.max() < 1e-4  # O(dt^4) = 1.6e-3 times a small constant; measured 1.2e-5
    # RK4 at the same step and order: the error keeps growing and ends far above the symplectic one
    assert err_rk[-1] > 10.0 * err_sym.max()
    assert err_rk[-1] > 3.0 * err_rk[len(err_rk) // 10]


def _finite_time_exponents(energy, ys):
    s = get_system("henon_heiles", E=energy)
    out = []
    for y in ys:
        try:
            y0 = s.start_on_section(y)
        except ValueError:
            continue
        res = solvers.largest_lyapunov_exponent(s.rhs(), y0, s.params, dt=0.05, t_end=1500.0, transient=0.0)
        out.append(float(res.exponents[0]))
    return np.array(out)


@pytest.mark.slow
def test_regular_at_one_twelfth_chaotic_at_one_sixth():
    """Hénon & Heiles (1964): at E = 1/12 most of the section is regular, at E = 1/6 most is chaotic."""
    ys = np.linspace(-0.25, 0.35, 6)
    low = _finite_time_exponents(1.0 / 12.0, ys)
    high = _finite_time_exponents(1.0 / 6.0, ys)
    assert len(low) >= 5 and len(high) >= 5
    # finite-time exponents of regular orbits decay like log(t)/t: < 0.02 at t = 1500 (common practice)
    assert np.mean(low < 0.02) >= 0.8
    assert np.mean(high > 0.04) >= 0.6
    assert np.median(high) > 3 * np.median(low)


def test_default_orbit_is_chaotic_and_energy_parameter_sets_the_start():
    s = get_system("henon_heiles")
    assert s.hamiltonian(s.default_y0(), s.params) == pytest.approx(0.16, rel=1e-14)
    assert s.default_y0()[0] == 0.0 and s.default_y0()[2] > 0
    res = solvers.largest_lyapunov_exponent(s.rhs(), s.default_y0(), s.params, dt=0.05, t_end=1500.0,
                                            transient=0.0)
    assert res.exponents[0] > 0.05  # recorded by this suite: 0.125 over 5000 time units
    with pytest.raises(ValueError, match="henon_heiles"):
        s.start_on_section(0.9)
    # lam rescales the system: E -> lam^2 E leaves the orbit shape (closed form scaling)
    assert math.isclose(get_system("henon_heiles", lam=2.0, E=0.04).params["E"], 0.04)
