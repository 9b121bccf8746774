import numpy as np
import pytest

from solvers import reference_trajectory

from _solver_fields import LORENZ_PARAMS, lorenz63, oscillator


def test_lorenz63_reference_horizon_is_finite_and_positive():
    t = np.arange(0.0, 32.0, 0.05)
    ref = reference_trajectory(lorenz63, [1.0, 1.0, 20.0], t, LORENZ_PARAMS, rtol=(1e-10, 1e-8), atol=1e-12)
    h = ref.extra["reference_horizon"]
    assert ref.success and 0.0 < h < t[-1]
    # two runs 100x apart in tolerance start ~1e-8 apart and separate at the rate 0.9056 (Sprott 2003):
    # reaching 1 % of the attractor's spread takes ~ ln(1e-2 / 1e-8) / 0.9056 ~ 15 time units (rough)
    assert 5.0 < h < 32.0
    sep = ref.extra["separation"]
    assert sep.shape == t.shape and np.all(sep[t < h] <= 0.01) and sep[t == h][0] > 0.01
    assert ref.y.shape == (t.size, 3)


def test_linear_system_never_separates():
    t = np.linspace(0.0, 20.0, 201)
    ref = reference_trajectory(oscillator, [1.0, 0.0], t, {"w": 1.0})
    assert ref.extra["reference_horizon"] == t[-1]
    assert ref.extra["separation"].max() < 1e-6  # both runs meet their tolerances (common practice)


def test_two_methods_and_explicit_scale():
    t = np.linspace(0.0, 5.0, 51)
    ref = reference_trajectory(oscillator, [1.0, 0.0], t, {"w": 1.0}, method=("DOP853", "LSODA"),
                               rtol=(1e-12, 1e-9), scale=[1.0, 1.0])
    assert ref.extra["methods"] == ("DOP853", "LSODA")
    assert ref.extra["reference_horizon"] == t[-1]
    np.testing.assert_allclose(ref.y[:, 0], np.cos(t), atol=1e-10)  # closed form


def test_identical_runs_are_rejected():
    with pytest.raises(ValueError, match="must differ"):
        reference_trajectory(oscillator, [1.0, 0.0], [0.0, 1.0], {"w": 1.0}, rtol=1e-10)
