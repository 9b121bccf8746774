"""reference_solution and attractor_scale: the right integrator per system, an honest horizon."""

from __future__ import annotations

import numpy as np
import pytest

from suite.systems import get_system
from suite.systems.reference import attractor_scale, reference_solution


def test_ode_reference_has_horizon_and_output_grid():
    s = get_system("lorenz63")
    ref = reference_solution(s, 30.0, dt_out=0.05)
    assert ref.success and ref.method == "reference-DOP853"
    np.testing.assert_allclose(ref.t, 0.05 * np.arange(601))
    h = ref.extra["reference_horizon"]
    # rtol 1e-12 vs 1e-10 runs separate by 1 % of the attractor size after ~20-30 Lyapunov times
    # (log(1e-2/1e-9)/0.9 ~ 18 time units at least; common practice)
    assert 10.0 < h <= 30.0
    np.testing.assert_allclose(ref.extra["scale"], attractor_scale(s))


def test_off_grid_end_time_is_included():
    s = get_system("pendulum")
    ref = reference_solution(s, 1.005, dt_out=0.1)
    assert ref.t[-1] == pytest.approx(1.005) and ref.t[-2] == pytest.approx(1.0)
    assert ref.extra["reference_horizon"] == pytest.approx(1.005)


def test_kuramoto_sivashinsky_uses_etdrk4_at_two_steps():
    s = get_system("kuramoto_sivashinsky")
    y0 = s.initial_conditions(1, seed=0)[0]
    ref = reference_solution(s, 60.1, y0=y0, dt_out=0.25)
    assert ref.success and ref.method == "reference-etdrk4"
    assert ref.y.shape == (len(ref.t), 64) and ref.t[-1] == pytest.approx(60.1)
    # ETDRK4 at 0.05 and 0.025 agree to ~1e-6 early on, well inside 1 % of the attractor scale
    assert ref.extra["reference_horizon"] == pytest.approx(60.1)
    assert ref.extra["separation"][:40].max() < 1e-4
    np.testing.assert_allclose(ref.y[0], y0)


def test_bad_inputs_are_one_line_errors():
    s = get_system("rossler")
    with pytest.raises(ValueError, match="t_end"):
        reference_solution(s, -1.0)
    with pytest.raises(ValueError, match="y0 of rossler"):
        reference_solution(s, 1.0, y0=[1.0, 2.0])
    with pytest.raises(ValueError, match="reference method"):
        reference_solution(s, 1.0, method="euler")
    with pytest.raises(ValueError, match="semilinear"):
        reference_solution(s, 1.0, method="etdrk4")


def test_attractor_scale_is_cached_and_sensible():
    s = get_system("henon_heiles")
    a = attractor_scale(s)
    b = attractor_scale(get_system("henon_heiles"))
    np.testing.assert_array_equal(a, b)
    assert a.shape == (4,) and np.all(a > 0) and np.all(a < 1.0)  # bounded motion below E = 1/6
    a[:] = -1.0  # the cache hands out copies
    assert np.all(attractor_scale(s) > 0)
