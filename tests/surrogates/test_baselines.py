"""Baseline learners on problems with closed-form answers: persistence, spline, Hankel DMD, analogues."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.linalg import expm

from surrogates import InvalidDataError, TrainingData
from surrogates.analog import Analogues
from surrogates.dmd import HankelDMD
from surrogates.persistence import Persistence
from surrogates.spline import SplineInterpolant

# A linear system with eigenvalues -0.1 ± 1i and -0.3 (closed form: y(t) = expm(A t) y0).
A = np.array([[-0.1, -1.0, 0.0], [1.0, -0.1, 0.0], [0.0, 0.0, -0.3]])
EIGS = np.array([-0.3 + 0j, -0.1 - 1j, -0.1 + 1j])
Y0 = np.array([1.0, 0.5, 2.0])


def _linear(t):
    return np.array([expm(A * s) @ Y0 for s in t])


def test_persistence_returns_the_start_state():
    rng = np.random.default_rng(0)
    data = TrainingData.from_arrays(np.arange(5.0), rng.normal(size=(5, 2)))
    y0 = rng.normal(size=(3, 2))
    out = Persistence().fit(data).rollout(y0, np.linspace(0.0, 2.0, 6))
    assert out.shape == (3, 6, 2)
    assert np.array_equal(out, np.repeat(y0[:, None], 6, axis=1))  # exact, by definition


@pytest.mark.parametrize("delays, rank", [(1, None), (5, 3)])
def test_dmd_recovers_linear_eigenvalues(delays, rank):
    dt = 0.1
    t = dt * np.arange(120)
    model = HankelDMD(delays=delays, rank=rank).fit(TrainingData.from_arrays(t, _linear(t)))
    assert model.rank_ == 3  # a 3-D linear system spans 3 dimensions in delay space (closed form)
    got = np.sort_complex(model.continuous_eigenvalues_)
    assert np.max(np.abs(got - EIGS)) < 1e-9  # closed form: eigenvalues of A
    assert np.max(np.abs(np.sort_complex(model.eigenvalues_) - np.sort_complex(np.exp(EIGS * dt)))) < 1e-10


def test_dmd_forecasts_and_reconstructs_a_linear_system_exactly():
    dt = 0.1
    t = dt * np.arange(160)
    y = _linear(t)
    model = HankelDMD(delays=4).fit(TrainingData.from_arrays(t[:100], y[:100]))
    # forecast at the training spacing from a history of the last 6 states
    out = model.rollout(y[None, 120], t[120:150], y[None, 115:121])
    assert np.max(np.abs(out[0] - y[120:150])) < 1e-9  # closed form expm(A t) y0
    # at twice the spacing the history is given at that spacing too (and interpolated onto dt)
    out2 = model.rollout(y[None, 120], t[120:150:2], y[None, 100:121:2])
    # limited by the cubic interpolation of the history: <= 5/384 h^4 max|y''''| = 4.8e-5 for h = 0.2
    # and |y''''| = |A^4 y| <= 2.3 (de Boor, A Practical Guide to Splines, ch. IV error bound)
    assert np.max(np.abs(out2[0] - y[120:150:2])) < 4.8e-5
    # reconstruction between samples
    tq = t[10:90] + 0.37 * dt
    assert np.max(np.abs(model.predict(tq) - _linear(tq))) < 1e-9
    with pytest.raises(InvalidDataError, match="history"):
        model.rollout(y[None, 120], t[120:130], None)


def test_spline_converges_at_fourth_order():
    # harmonic oscillator x'' = -w^2 x: closed form x = cos(w t), v = -w sin(w t).
    # Cubic-spline interpolation error is O(h^4) (de Boor, A Practical Guide to Splines, ch. IV).
    w = 2.0
    t_fine = np.linspace(0.0, 6.0, 2001)
    exact = np.stack([np.cos(w * t_fine), -w * np.sin(w * t_fine)], axis=1)
    steps, errors = [], []
    for n in (16, 32, 64, 128):
        t = np.linspace(0.0, 6.0, n + 1)
        y = np.stack([np.cos(w * t), -w * np.sin(w * t)], axis=1)
        model = SplineInterpolant().fit(TrainingData.from_arrays(t, y))
        steps.append(t[1] - t[0])
        errors.append(np.max(np.abs(model.predict(t_fine) - exact)))
    order = np.polyfit(np.log(steps), np.log(errors), 1)[0]
    assert 3.8 < order < 4.3, (order, errors)


def test_spline_is_exact_on_a_cubic_and_picks_the_right_trajectory():
    t1, t2 = np.linspace(0.0, 1.0, 7), np.linspace(5.0, 6.0, 5)
    f = lambda t: np.stack([t ** 3 - 2 * t, 0.5 * t ** 2], axis=1)  # noqa: E731 - closed form cubic
    g = lambda t: np.stack([-t, 3.0 + 0 * t], axis=1)  # noqa: E731
    data = TrainingData((TrainingData.from_arrays(t1, f(t1)).trajectories[0],
                         TrainingData.from_arrays(t2, g(t2)).trajectories[0]))
    model = SplineInterpolant().fit(data)
    tq = np.array([0.13, 0.77, 5.21, 5.9])
    expect = np.concatenate([f(tq[:2]), g(tq[2:])])
    assert np.max(np.abs(model.predict(tq) - expect)) < 1e-12  # not-a-knot reproduces cubics exactly


def test_analogues_forecast_a_periodic_signal_exactly():
    # a period of exactly 40 samples: every future delay vector is in the library (closed form)
    k = np.arange(400)
    y = np.stack([np.sin(2 * np.pi * k / 40), np.cos(2 * np.pi * k / 40) + 0.3 * np.sin(4 * np.pi * k / 40)], 1)
    t = 0.05 * k
    model = Analogues(delays=2, n_neighbors=3).fit(TrainingData.from_arrays(t[:200], y[:200]))
    out = model.rollout(y[[250, 291]], t[250:330] - t[250], np.stack([y[245:251], y[286:292]]))
    expect = np.stack([y[250:330], y[291:371]])
    assert np.max(np.abs(out - expect)) < 1e-12


def test_analogues_stay_on_the_library_in_a_long_rollout():
    k = np.arange(300)
    y = np.stack([np.sin(0.3 * k), np.cos(0.3 * k)], 1)  # not commensurate with the sampling
    model = Analogues(delays=2, n_neighbors=4).fit(TrainingData.from_arrays(0.1 * k, y))
    out = model.rollout(y[None, 299], 0.1 * np.arange(500), y[None, 297:300])
    radius = np.hypot(out[0, :, 0], out[0, :, 1])
    # weighted means of points on the unit circle lie inside it, close to it for near neighbours
    assert radius.max() <= 1.0 + 1e-12 and radius.min() > 0.95
