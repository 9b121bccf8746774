"""Planar three-body problem: figure-eight choreography and Burrau's Pythagorean problem."""

from __future__ import annotations

import numpy as np
import pytest

import solvers
from suite.systems import UnknownNameError, get_system
from suite.systems.three_body import ThreeBody


def test_figure_eight_returns_after_its_period():
    s = ThreeBody.named("figure_eight")
    assert s.params["start"] == 0.0  # the default start of the system
    period = 6.32591398  # Simó (2002), Chenciner & Montgomery (2000) orbit with Simó's data
    y0 = s.default_y0()
    sol = solvers.solve_scipy(s.rhs(), (0.0, period), y0, s.params, t_eval=[0.0, period / 3, period],
                              rtol=1e-12, atol=1e-13)
    # Simó's data carry 8 digits: the state after one period agrees to ~1e-6 (measured 2e-7)
    np.testing.assert_allclose(sol.y[-1], y0, atol=1e-5)
    # a choreography: after T/3 each body sits where the next one started (body 1 -> 3's place, ...)
    pos = sol.y[1, :6].reshape(3, 2)
    start = y0[:6].reshape(3, 2)
    assert min(np.abs(pos - np.roll(start, k, axis=0)).max() for k in (1, 2)) < 1e-5
    # total momentum zero and angular momentum zero (Chenciner & Montgomery 2000)
    q = s.conserved_quantities()
    assert abs(q["momentum_x"](y0, s.params)) < 1e-8 and abs(q["angular_momentum"](y0, s.params)) < 1e-7


def test_named_starts_and_start_parameter():
    params, y0 = ThreeBody.named_initial_condition("pythagorean")
    assert params == {"G": 1.0, "m1": 3.0, "m2": 4.0, "m3": 5.0}
    s = get_system("three_body", start=1.0, m1=3.0, m2=4.0, m3=5.0)
    np.testing.assert_array_equal(s.default_y0(), y0)
    # energy -769/60 (Szebehely & Peters 1967): 3*4/5 + 3*5/4 + 4*5/3 potential, at rest
    assert s.conserved_quantities()["energy"](y0, s.params) == pytest.approx(-769.0 / 60.0, rel=1e-15)
    with pytest.raises(UnknownNameError):
        ThreeBody.named_initial_condition("lagrange_triangle_typo")
    with pytest.raises(ValueError, match="start"):
        get_system("three_body", start=7.0)


def _pythagorean(t_end):
    s = ThreeBody.named("pythagorean")
    t = np.linspace(0.0, t_end, 2001)
    sol = solvers.solve_scipy(s.rhs(), (0.0, t_end), s.default_y0(), s.params, t_eval=t,
                              rtol=1e-13, atol=1e-15)
    return s, sol


@pytest.mark.slow
def test_pythagorean_problem_ends_in_binary_and_escape():
    """Szebehely & Peters (1967): after t ~ 60 the bodies of mass 4 and 5 form a binary and mass 3 escapes."""
    s, sol = _pythagorean(80.0)
    assert sol.success
    q = s.conserved_quantities()
    e = np.array([q["energy"](y, s.params) for y in sol.y])
    assert np.abs(e / (-769.0 / 60.0) - 1.0).max() < 1e-8  # energy -769/60 (Szebehely & Peters 1967)
    for name in ("momentum_x", "momentum_y", "angular_momentum"):
        assert np.abs([q[name](y, s.params) for y in sol.y]).max() < 1e-8
    y = sol.y[-1]
    r = y[:6].reshape(3, 2)
    v = y[6:].reshape(3, 2)
    m = np.array([3.0, 4.0, 5.0])
    # the pair (4, 5): negative two-body energy (bound); body 3 far away and receding
    rel_v, rel_r = v[1] - v[2], r[1] - r[2]
    mu = m[1] * m[2] / (m[1] + m[2])
    pair_energy = 0.5 * mu * rel_v @ rel_v - m[1] * m[2] / np.linalg.norm(rel_r)
    assert pair_energy < 0
    com_pair = (m[1] * r[1] + m[2] * r[2]) / (m[1] + m[2])
    vcom_pair = (m[1] * v[1] + m[2] * v[2]) / (m[1] + m[2])
    sep = r[0] - com_pair
    assert np.linalg.norm(sep) > 5.0 * np.linalg.norm(rel_r)
    assert sep @ (v[0] - vcom_pair) > 0  # receding
    # escape: kinetic energy of the relative motion exceeds its binding (closed form, two-body)
    mu3 = m[0] * (m[1] + m[2]) / m.sum()
    e_rel = 0.5 * mu3 * np.sum((v[0] - vcom_pair) ** 2) - m[0] * (m[1] + m[2]) / np.linalg.norm(sep)
    assert e_rel > 0


def test_pythagorean_invariants_over_the_first_close_encounters():
    s, sol = _pythagorean(20.0)
    q = s.conserved_quantities()
    e = np.array([q["energy"](y, s.params) for y in sol.y])
    assert np.abs(e / (-769.0 / 60.0) - 1.0).max() < 1e-8  # Szebehely & Peters (1967)
    assert np.abs([q["angular_momentum"](y, s.params) for y in sol.y]).max() < 1e-8
