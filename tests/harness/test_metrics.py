"""Metrics against hand-computable cases (each value's source beside it)."""

from __future__ import annotations

import numpy as np
import pytest

from suite import metrics as M


def test_nrmse_curve_normalises_each_variable():
    true = np.zeros((2, 2))
    pred = np.array([[1.0, 2.0], [3.0, 0.0]])
    e = M.nrmse_curve(pred, true, scale=[1.0, 2.0])
    # closed form: sqrt(((1/1)^2 + (2/2)^2)/2) = 1; sqrt((3^2 + 0)/2) = 3/sqrt(2)
    np.testing.assert_allclose(e, [1.0, 3.0 / np.sqrt(2.0)], rtol=1e-14)


def test_nrmse_curve_batch_shape_and_errors():
    e = M.nrmse_curve(np.ones((4, 5, 3)), np.zeros((4, 5, 3)))
    assert e.shape == (4, 5)
    np.testing.assert_allclose(e, 1.0)  # closed form: unit error in every variable
    with pytest.raises(ValueError, match="shape"):
        M.nrmse_curve(np.ones((5, 3)), np.zeros((4, 3)))
    with pytest.raises(ValueError, match="positive"):
        M.nrmse_curve(np.ones((5, 2)), np.zeros((5, 2)), scale=[1.0, 0.0])


def test_valid_prediction_time_first_crossing():
    t = np.array([10.0, 11.0, 12.0, 13.0])
    err = np.array([0.1, 0.3, 0.5, 0.2])
    # closed form: first error above 0.4 (Pathak et al. 2018 threshold) at t = 12, i.e. 2 after the start
    assert M.valid_prediction_time(t, err) == 2.0
    assert M.valid_prediction_time(t, err, threshold=0.25) == 1.0
    # never above the threshold: censored at the curve's length
    assert M.valid_prediction_time(t, err, threshold=0.6) == 3.0
    # NaN counts as a crossing
    assert M.valid_prediction_time(t, np.array([0.1, np.nan, 0.1, 0.1])) == 1.0
    # an error above threshold at the start gives zero
    assert M.valid_prediction_time(t, np.array([0.5, 0.1, 0.1, 0.1])) == 0.0


def test_relative_l2_closed_form():
    pred = np.array([[3.0, 0.0]])
    true = np.array([[0.0, 4.0]])
    # closed form: |(3, -4)| / |(0, 4)| = 5/4
    assert M.relative_l2(pred, true) == pytest.approx(1.25, rel=1e-15)
    assert M.relative_l2(true, true) == 0.0
    with pytest.raises(ValueError):
        M.relative_l2(true, np.zeros_like(true))


def test_relative_parameter_error():
    err = M.relative_parameter_error({"a": 12.0, "b": 0.5, "c": np.nan}, {"a": 10.0, "b": 0.0, "c": 1.0, "d": 2.0})
    assert err["a"] == pytest.approx(0.2, rel=1e-14)  # closed form: |12 - 10| / 10
    assert err["b"] == pytest.approx(0.5)  # zero truth: absolute error
    assert err["c"] == np.inf and err["d"] == np.inf  # non-finite or missing estimate


def test_wasserstein_of_a_translation_is_the_shift():
    rng = np.random.default_rng(3)
    a = rng.standard_normal((500, 2))
    b = a + np.array([2.0, -0.5])
    # closed form: W1 between a distribution and its translate by c is |c|
    w = M.wasserstein_distances(b, a, scale=[1.0, 0.25])
    np.testing.assert_allclose(w, [2.0, 0.5 / 0.25], rtol=1e-12)
    # hand computation: W1({0, 1}, {0, 3}) = (0 + 2)/2 = 1
    assert M.wasserstein_distances([[0.0], [1.0]], [[0.0], [3.0]])[0] == pytest.approx(1.0)


def test_spectrum_distance_of_scaled_series():
    rng = np.random.default_rng(0)
    a = rng.standard_normal((4096, 2))
    # closed form: power scales with the square of the amplitude: 10x amplitude = 2 decades
    assert M.spectrum_distance(10.0 * a, a, dt=0.1) == pytest.approx(2.0, abs=1e-6)
    assert M.spectrum_distance(a, a, dt=0.1) == 0.0
    t = 0.1 * np.arange(4096)
    sine = np.sin(2 * np.pi * 0.5 * t)[:, None]
    other = np.sin(2 * np.pi * 2.0 * t)[:, None]
    assert M.spectrum_distance(other, sine, dt=0.1) > 1.0  # different frequency, far apart


def test_energy_drift():
    # closed form: max |q - 2| / 2 over (2, 2.1, 1.8) = 0.1
    assert M.energy_drift([2.0, 2.1, 1.8]) == pytest.approx(0.1, rel=1e-12)
    # batch: median of (0.1, 0.5, 0.0) = 0.1
    assert M.energy_drift([[2.0, 2.2, 2.0], [1.0, 1.5, 1.0], [3.0, 3.0, 3.0]]) == pytest.approx(0.1)
    assert M.energy_drift([0.0, 0.25]) == pytest.approx(0.25)  # zero start: absolute drift
    assert M.energy_drift([1.0, np.nan]) == np.inf


def _linear_rollout(rates):
    rates = np.asarray(rates, dtype=float)

    def rollout(y0, t, history):
        return y0[:, None, :] * np.exp(rates[None, None, :] * (t - t[0])[None, :, None])

    return rollout


def test_surrogate_lyapunov_of_linear_flows():
    # closed form: for y' = lambda y the exponent is lambda (exactly, for any perturbation)
    lam = M.surrogate_largest_lyapunov(_linear_rollout([0.7]), np.array([1.0]), None, 0.01,
                                       chunk_steps=50, n_chunks=5)
    assert lam == pytest.approx(0.7, rel=1e-6)
    # two rates: the perturbation aligns with the larger one (0.5 vs -1: after 3 chunks of 1 time unit
    # the -1 component has shrunk by e^-4.5 relative; Benettin et al. 1980)
    lam2 = M.surrogate_largest_lyapunov(_linear_rollout([0.5, -1.0]), np.array([1.0, 1.0]), None, 0.01,
                                        chunk_steps=100, n_chunks=10, discard_chunks=3)
    assert lam2 == pytest.approx(0.5, abs=2e-3)


def test_surrogate_lyapunov_history_and_failures():
    seen = []

    def persistence(y0, t, history):
        seen.append(None if history is None else history.shape)
        return np.repeat(y0[:, None, :], t.size, axis=1)

    hist = np.zeros((7, 3))
    # a constant model keeps the perturbation: exponent 0 (closed form)
    assert M.surrogate_largest_lyapunov(persistence, np.zeros(3), hist, 0.1, chunk_steps=5, n_chunks=4) == 0.0
    assert seen == [(2, 7, 3)] * 4

    def nan_model(y0, t, history):
        return np.full((y0.shape[0], t.size, y0.shape[1]), np.nan)

    assert np.isnan(M.surrogate_largest_lyapunov(nan_model, np.zeros(2), None, 0.1, n_chunks=2))

    def collapse(y0, t, history):
        return np.zeros((y0.shape[0], t.size, y0.shape[1]))

    assert M.surrogate_largest_lyapunov(collapse, np.ones(2), None, 0.1, n_chunks=2) == -np.inf
