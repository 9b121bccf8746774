"""Behaviour of the learner base class (surrogates.base): parameters, fit checks, typed errors."""

from __future__ import annotations

import numpy as np
import pytest

from surrogates import (
    Budget,
    Capabilities,
    InvalidDataError,
    Learner,
    NotApplicableError,
    NotFittedError,
    Physics,
    TrainingData,
    Trajectory,
)


class MeanState(Learner):
    """Forecasts the training mean (enough to exercise the base class)."""

    capabilities = Capabilities(tasks={"forecast"}, physics={"none", "full"}, min_samples=3)
    reference = "test double"

    def __init__(self, alpha=1.0, tags=("a",)):
        self.alpha = alpha
        self.tags = tags

    def _fit(self, data, physics, budget, seed):
        self.mean_ = np.concatenate([tr.y for tr in data.trajectories]).mean(axis=0) * self.alpha
        self.level_ = physics.level

    def _rollout(self, y0, t, history):
        out = np.repeat(self.mean_[None, None, :], y0.shape[0], axis=0).repeat(t.size, axis=1)
        out[:, 0] = y0
        return out


def _data(n=10, d=3, seed=0):
    rng = np.random.default_rng(seed)
    return TrainingData.from_arrays(np.arange(n) * 0.1, rng.normal(size=(n, d)))


def test_params_round_trip_and_clone():
    m = MeanState(alpha=2.0)
    assert m.get_params() == {"alpha": 2.0, "tags": ("a",)}
    c = m.clone()
    assert c is not m and c.get_params() == m.get_params()
    m.set_params(alpha=3.0)
    assert m.alpha == 3.0
    with pytest.raises(ValueError, match="no hyper-parameter 'beta'.*valid: alpha, tags"):
        m.set_params(beta=1)


def test_var_keyword_constructor_is_rejected():
    class Bad(MeanState):
        def __init__(self, **kw):
            pass

    with pytest.raises(TypeError, match="explicit keyword"):
        Bad().get_params()


def test_fit_returns_self_and_refit_forgets():
    m = MeanState()
    assert m.fit(_data(), seed=1) is m
    assert m.is_fitted_ and m.dim_ == 3
    m.stale_ = 1.0  # a fitted attribute from an earlier fit must not survive the next
    m.fit(_data(d=2))
    assert m.dim_ == 2 and not hasattr(m, "stale_")
    assert m.clone().get_params() == m.get_params() and not hasattr(m.clone(), "mean_")


def test_unfitted_use_raises_not_fitted():
    with pytest.raises(NotFittedError, match="call fit first"):
        MeanState().rollout(np.zeros((1, 3)), np.arange(3.0))
    with pytest.raises(NotFittedError):
        MeanState().n_parameters()


def test_typed_errors_of_fit():
    m = MeanState()
    with pytest.raises(InvalidDataError, match="TrainingData"):
        m.fit(np.zeros((5, 3)))
    with pytest.raises(NotApplicableError, match="physics level 'partial'"):
        m.fit(_data(), Physics(level="partial", vector_field=lambda t, y, p: y, removed_term="x"))
    with pytest.raises(NotApplicableError, match="does not identify"):
        m.fit(_data(), Physics(params={"a": 1.0}, unknown=("a",)))
    with pytest.raises(InvalidDataError, match="at least 3 samples"):
        m.fit(_data(n=2))


def test_nan_after_validation_is_caught_by_fit():
    data = _data()
    data.trajectories[0].y[2, 1] = np.nan  # arrays stay mutable after validation
    with pytest.raises(InvalidDataError, match="NaN"):
        MeanState().fit(data)


def test_needs_regular_sampling_and_hamiltonian():
    class Regular(MeanState):
        capabilities = Capabilities(tasks={"forecast"}, needs_regular_sampling=True)

    class Canonical(MeanState):
        capabilities = Capabilities(tasks={"forecast"}, needs_hamiltonian=True)

    irregular = TrainingData((Trajectory(np.array([0.0, 0.1, 0.3, 0.4]), np.zeros((4, 2))),))
    with pytest.raises(InvalidDataError, match="equally spaced"):
        Regular().fit(irregular)
    with pytest.raises(NotApplicableError, match="canonical"):
        Canonical().fit(_data())
    Canonical().fit(_data(), Physics(to_canonical=lambda y, p: y, from_canonical=lambda z, p: z))


def test_rollout_input_checks_and_task_gating():
    m = MeanState().fit(_data())
    out = m.rollout(np.ones((2, 3)), np.arange(4.0) * 0.1)
    assert out.shape == (2, 4, 3) and np.array_equal(out[:, 0], np.ones((2, 3)))
    with pytest.raises(InvalidDataError, match="dimension 4"):
        m.rollout(np.ones((2, 4)), np.arange(4.0))
    with pytest.raises(InvalidDataError, match="history must have shape"):
        m.rollout(np.ones((2, 3)), np.arange(4.0), np.ones((2, 5, 2)))
    with pytest.raises(NotApplicableError, match="does not reconstruct"):
        m.predict(np.arange(3.0))
    with pytest.raises(NotApplicableError, match="does not identify"):
        m.identified_params()


def test_capabilities_are_validated_data():
    with pytest.raises(ValueError, match="unknown task"):
        Capabilities(tasks={"forecats"})
    caps = Capabilities(tasks=["forecast", "reconstruct"], physics=["full", "none"])
    assert caps.as_dict()["tasks"] == ["reconstruct", "forecast"]  # canonical order (TASKS)
    assert caps.as_dict()["physics"] == ["none", "full"]


def test_budget_clock_caps_iterations():
    clock = Budget(max_iterations=5).clock()
    assert clock.iterations(100) == 5 and clock.iterations(3) == 3
    assert not clock.expired()
    assert Budget(max_seconds=0.0).clock().expired()
