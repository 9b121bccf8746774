"""Kepler problem: period and conservation laws."""

from __future__ import annotations

import math

import numpy as np
import pytest

import solvers
from suite.systems import get_system


@pytest.mark.parametrize("gm", [1.0, 4.0])
def test_period_is_keplers_third_law(gm):
    s = get_system("kepler", GM=gm)
    y0 = s.default_y0()
    period = 2 * math.pi * 1.0 ** 1.5 / math.sqrt(gm)  # Kepler's third law, a = 1 (closed form)
    assert s.characteristic_time == pytest.approx(period)
    sol = solvers.solve_scipy(s.rhs(), (0.0, period), y0, s.params, t_eval=[0.0, 0.5 * period, period],
                              rtol=1e-12, atol=1e-13)
    np.testing.assert_allclose(sol.y[-1], y0, atol=1e-8)
    # apoapsis at half period: r = a (1 + e) = 1.6 (closed form)
    assert np.hypot(*sol.y[1, :2]) == pytest.approx(1.6, rel=1e-9)


def test_energy_angular_momentum_and_runge_lenz_over_many_periods():
    s = get_system("kepler")
    y0 = s.default_y0()
    # energy -GM/(2a) = -0.5 (closed form)
    q = s.conserved_quantities()
    assert q["energy"](y0, s.params) == pytest.approx(-0.5, rel=1e-14)
    n_periods = 20
    t = np.linspace(0.0, n_periods * s.characteristic_time, 2001)
    sol = solvers.solve_scipy(s.rhs(), (0.0, t[-1]), y0, s.params, t_eval=t, rtol=1e-12, atol=1e-13)
    for name, fn in q.items():
        values = np.array([fn(y, s.params) for y in sol.y])
        assert np.abs(values - values[0]).max() < 1e-8, name
    # the symplectic integrator keeps energy bounded (no drift) at a modest step
    z0 = s.to_canonical(y0, s.params)
    sym = solvers.integrate_separable(s.kinetic, s.potential, z0[:2], z0[2:], 0.004, 31400, s.params, order=4,
                                      save_every=157)  # 20 periods
    e = np.array([s.hamiltonian(z, s.params) for z in np.asarray(sym.y)])
    assert np.abs(e + 0.5).max() < 1e-4
