"""Simple pendulum: period against the closed form with the complete elliptic integral."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.special import ellipk

import solvers
from suite.systems import get_system


def _first_return_period(s, amplitude):
    """Time of the first turning point at +amplitude (omega crossing zero from below, theta > 0)."""
    def turn(t, y):
        return y[1]

    from scipy.integrate import solve_ivp

    f = s.rhs()
    guess = s.period(amplitude)
    sol = solve_ivp(lambda t, y: f(t, y, s.params), (0.0, 1.3 * guess), [amplitude, 0.0], method="DOP853",
                    rtol=1e-12, atol=1e-12, events=turn, dense_output=True)
    times = [t for t, y in zip(sol.t_events[0], sol.y_events[0]) if t > 0.1 * guess and y[0] > 0]
    return times[0]


@pytest.mark.parametrize("degrees", [10.0, 90.0, 150.0, 170.0])
def test_period_matches_elliptic_integral(degrees):
    s = get_system("pendulum", L=2.0, g=9.81)
    a = math.radians(degrees)
    closed = 4.0 * math.sqrt(2.0 / 9.81) * ellipk(math.sin(a / 2) ** 2)  # any mechanics handbook; scipy m = k^2
    assert s.period(a) == pytest.approx(closed, rel=1e-14)
    assert _first_return_period(s, a) == pytest.approx(closed, rel=1e-9)


def test_small_angle_limit_and_partial_physics():
    s = get_system("pendulum")
    # 2 pi sqrt(L/g) for small amplitudes (closed form)
    assert s.period(1e-4) == pytest.approx(2 * math.pi * math.sqrt(1.0 / 9.81), rel=1e-8)
    # without the anharmonic term the field is the harmonic oscillator
    y = np.array([2.0, 0.3])
    np.testing.assert_allclose(s.rhs(without="anharmonic_restoring")(0.0, y, s.params), [0.3, -9.81 * 2.0])


def test_energy_conserved_by_symplectic_integration():
    s = get_system("pendulum")
    z0 = s.to_canonical(s.default_y0(), s.params)
    sol = solvers.integrate_separable(s.kinetic, s.potential, z0[:1], z0[1:], 0.01, 20000, s.params, order=4,
                                      save_every=100)
    e = np.array([s.hamiltonian(z, s.params) for z in np.asarray(sol.y)])
    assert np.abs(e - e[0]).max() < 1e-6 * abs(e[0])
    assert s.characteristic_time == pytest.approx(s.period(math.radians(150.0)))
