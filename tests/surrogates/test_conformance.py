"""The conformance kit: each check fails on a learner broken in its way, and every learner passes the kit.

A kit that cannot fail is a defect: every check below is shown failing on a
deliberately broken learner (defined here), and passing on a correct one.
"""

from __future__ import annotations

import random
import time

import numpy as np
import pytest

from surrogates import Capabilities, InvalidDataError, Learner
from surrogates import conformance as kit
from surrogates.conformance import CheckFailed, CheckSkipped, check_learner, iter_checks, parametrize_with_checks
from surrogates.registry import LearnerLoadError, available_learners, learner_class, make_learner
from surrogates.testing import KIT_SLOW_LEARNERS, TINY_PARAMS, tiny_params


class Good(Learner):
    """Correct test learner: linear interpolation (reconstruct), persistence (forecast)."""

    capabilities = Capabilities(tasks={"reconstruct", "forecast"}, physics={"none", "full"}, min_samples=2)
    reference = "test double"

    def __init__(self, alpha=1.0):
        self.alpha = alpha

    def _fit(self, data, physics, budget, seed):
        tr = data.trajectories[0]
        self.t_ = tr.t.copy()
        self.y_ = tr.y.copy()

    def _predict(self, t):
        return np.stack([np.interp(t, self.t_, self.y_[:, i]) for i in range(self.dim_)], axis=1)

    def _rollout(self, y0, t, history):
        return np.repeat(y0[:, None, :], t.size, axis=1) * self.alpha ** 0

    def _n_parameters(self):
        return int(self.y_.size)


class ExtraAttribute(Good):
    def __init__(self, alpha=1.0):
        self.alpha = alpha
        self.cache = None


class ChangesParameter(Good):
    def __init__(self, alpha=1.0):
        self.alpha = float(alpha) * 2


class RandomInInit(Good):
    def __init__(self, alpha=1.0):
        self.alpha = alpha
        np.random.rand()


class ArrayParameter(Good):
    def __init__(self, alpha=np.ones(2)):  # noqa: B008 - deliberately wrong
        self.alpha = alpha


class FitReturnsNone(Good):
    def fit(self, data, physics=None, budget=None, seed=0):
        super().fit(data, physics, budget, seed)


class LearnsNothing(Good):
    def _fit(self, data, physics, budget, seed):
        pass


class ModifiesData(Good):
    def _fit(self, data, physics, budget, seed):
        data.trajectories[0].y[:] *= 2.0
        super()._fit(data, physics, budget, seed)


class LeaksAcrossFits(Good):
    def _fit(self, data, physics, budget, seed):
        super()._fit(data, physics, budget, seed)
        self.fits = getattr(self, "fits", 0) + 1  # not reset by a refit

    def _predict(self, t):
        return super()._predict(t) + self.fits


class UnfittedAttributeError(Good):
    def predict(self, t):
        return self._predict(np.asarray(t, float))  # skips the fitted check


class Nondeterministic(Good):
    def _fit(self, data, physics, budget, seed):
        super()._fit(data, physics, budget, seed)
        self.y_ = self.y_ + 1e-9 * np.random.default_rng().normal(size=self.y_.shape)  # ignores the seed


class WrongRolloutShape(Good):
    def _rollout(self, y0, t, history):
        return super()._rollout(y0, t, history)[:, :-1]


class NonFinite(Good):
    def _predict(self, t):
        out = super()._predict(t)
        out[-1, 0] = np.inf
        return out


class DriftsAtStart(Good):
    def _rollout(self, y0, t, history):
        return super()._rollout(y0, t, history) + 0.5


class NeedsHistoryBadly(Good):
    def _rollout(self, y0, t, history):
        return super()._rollout(y0, t, history) + history.shape[1] * 0.0  # AttributeError on None


class IgnoresBudget(Good):
    def _fit(self, data, physics, budget, seed):
        time.sleep(0.4)  # trains its fixed amount whatever the budget says
        super()._fit(data, physics, budget, seed)


class OnlyThreeDimensions(Good):
    def _fit(self, data, physics, budget, seed):
        super()._fit(data, physics, budget, seed)
        self.w_ = np.eye(3) @ self.y_[0]  # breaks for d != 3


class SeedsGlobalGenerators(Good):
    def _fit(self, data, physics, budget, seed):
        np.random.seed(seed)
        random.seed(seed)
        super()._fit(data, physics, budget, seed)


class IgnoresWrongDimension(Good):
    def rollout(self, y0, t, history=None):
        y0 = np.atleast_2d(y0)
        return np.repeat(y0[:, None, :], np.size(t), axis=1)


class SkipsValidation(Good):
    def fit(self, data, physics=None, budget=None, seed=0):
        self._reset_fitted()
        self.dim_ = data.dim
        self._fit(data, physics, budget, seed)
        self.is_fitted_ = True
        return self


class RejectsIrregularSilently(Good):
    def _fit(self, data, physics, budget, seed):
        if not data.trajectories[0].regular:
            raise InvalidDataError("irregular")
        super()._fit(data, physics, budget, seed)


class CrashesWithFullPhysics(Good):
    def _fit(self, data, physics, budget, seed):
        if physics.level == "full":
            raise RuntimeError("full physics not really supported")
        super()._fit(data, physics, budget, seed)


class AcceptsUnknowns(SkipsValidation):
    pass


class BadGetParams(Good):
    def get_params(self):
        return {"alpha": self.alpha + 1.0}


class CloneReturnsSelf(Good):
    def clone(self):
        return self


class OnlyUnitScale(Good):
    def _fit(self, data, physics, budget, seed):
        if np.abs(data.trajectories[0].y).max() > 10.0:
            raise InvalidDataError("refuses data off the unit scale")
        super()._fit(data, physics, budget, seed)


BROKEN = [
    (BadGetParams, "get_params_round_trip"),
    (CloneReturnsSelf, "clone"),
    (OnlyUnitScale, "dimension_3"),
    (ExtraAttribute, "constructor_stores_only_params"),
    (ChangesParameter, "constructor_stores_only_params"),
    (RandomInInit, "init_no_arrays_or_random"),
    (ArrayParameter, "init_no_arrays_or_random"),
    (FitReturnsNone, "fit_returns_self"),
    (LearnsNothing, "fit_returns_self"),
    (ModifiesData, "fit_does_not_modify_data"),
    (LeaksAcrossFits, "refit_replaces"),
    (UnfittedAttributeError, "unfitted_raises"),
    (Nondeterministic, "deterministic"),
    (WrongRolloutShape, "output_shapes_and_dtypes"),
    (NonFinite, "finite_output"),
    (DriftsAtStart, "rollout_starts_at_y0"),
    (NeedsHistoryBadly, "rollout_without_history"),
    (IgnoresBudget, "budget_iterations"),
    (IgnoresBudget, "budget_seconds"),
    (OnlyThreeDimensions, "dimension_6"),
    (SeedsGlobalGenerators, "global_state_untouched"),
    (IgnoresWrongDimension, "rollout_wrong_dimension"),
    (SkipsValidation, "nan_training_data"),
    (SkipsValidation, "too_few_samples"),
    (SkipsValidation, "unsupported_physics"),
    (RejectsIrregularSilently, "irregular_sampling"),
    (CrashesWithFullPhysics, "physics_levels"),
    (AcceptsUnknowns, "identify_applicability"),
]


@pytest.fixture
def fast_budget_limits(monkeypatch):
    """Budget limits small enough that a 0.4 s fit exceeds them (limit 0.1 s and 0.15 s)."""
    monkeypatch.setattr(kit, "BUDGET_FACTOR", 1.0)
    monkeypatch.setattr(kit, "BUDGET_GRACE_S", 0.1)
    monkeypatch.setattr(kit, "BUDGET_SECONDS", 0.05)


@pytest.fixture
def restore_global_random():
    np_state, py_state = np.random.get_state(), random.getstate()
    yield
    np.random.set_state(np_state)
    random.setstate(py_state)


def test_every_check_is_exercised_by_a_broken_learner():
    names = {name for name, _ in iter_checks(Good())}
    assert names == {check for _, check in BROKEN}


@pytest.mark.usefixtures("fast_budget_limits", "restore_global_random")
@pytest.mark.parametrize("cls, check_name", BROKEN, ids=[f"{c.__name__}-{n}" for c, n in BROKEN])
def test_broken_learner_fails_its_check(cls, check_name):
    checks = dict(iter_checks(cls()))
    with pytest.raises(CheckFailed):
        checks[check_name]()
    # the correct learner passes the same check
    try:
        dict(iter_checks(Good()))[check_name]()
    except CheckSkipped:
        pass


def test_good_learner_passes_every_check():
    results = check_learner(Good)
    assert [r.name for r in results if not r.passed] == []
    assert [r.name for r in results if r.skipped] == []  # every check applies to Good


def test_check_learner_reports_reason_without_raising():
    results = {r.name: r for r in check_learner(DriftsAtStart())}
    assert not results["rollout_starts_at_y0"].passed
    assert results["rollout_starts_at_y0"].reason.startswith("rollout[:, 0] differs from y0 by 0.5")
    assert results["fit_returns_self"].passed and results["fit_returns_self"].reason == ""


def test_unexpected_exception_is_a_failure_with_its_type():
    results = {r.name: r for r in check_learner(CrashesWithFullPhysics)}
    assert not results["physics_levels"].passed
    assert results["physics_levels"].reason == "RuntimeError: full physics not really supported"


def test_parametrize_with_checks_ids_name_learner_and_check():
    mark = parametrize_with_checks(["persistence", Good()])
    argname, cases = mark.args
    ids = [c.id for c in cases]
    assert argname == "check"
    assert "persistence-fit_returns_self" in ids and "Good-rollout_starts_at_y0" in ids
    assert len(ids) == 2 * len(kit.CHECK_NAMES)


def test_kit_problems_are_integrated_accurately():
    # closed form of the damped rotation: x + i y = (x0 + i y0) exp((-c + i w) t), z = z0 exp(-g t)
    pb = kit.PROBLEMS["rotation"]
    t, y = pb.trajectory()
    p = pb.params
    w = (y[0, 0] + 1j * y[0, 1]) * np.exp((-p["damping"] + 1j * p["omega"]) * t)
    assert np.max(np.abs(y[:, 0] - w.real)) < 1e-9
    assert np.max(np.abs(y[:, 2] - y[0, 2] * np.exp(-p["decay"] * t))) < 1e-9
    # the chain and Henon-Heiles conserve their Hamiltonians (closed-form invariant)
    for name in ("chain", "henon_heiles"):
        pb = kit.PROBLEMS[name]
        _, y = pb.trajectory()
        energy = np.array([pb.hamiltonian(row, pb.params) for row in y])
        assert np.ptp(energy) < 1e-9 * max(1.0, abs(energy[0]))


# ----------------------------------------------------------------------------
# every registered learner that imports passes the kit. The fitting checks of
# learners without a tiny entry in surrogates.testing.TINY_PARAMS (their
# defaults are benchmark-sized) and of KIT_SLOW_LEARNERS (JAX compiles) run
# only with -m slow; the checks that need no fit run for every learner.
# ----------------------------------------------------------------------------

def _registered_cases():
    cases = []
    for name in available_learners():
        try:
            learner_class(name)
        except LearnerLoadError:
            continue  # reported by `lyapbench learners`; not this test's business
        heavy = name not in TINY_PARAMS or name in KIT_SLOW_LEARNERS
        model = make_learner(name, **tiny_params(name))
        for check_name, check in iter_checks(model):
            marks = (pytest.mark.slow,) if heavy and check_name not in kit.CHECKS_WITHOUT_FIT else ()
            cases.append(pytest.param(check, id=f"{name}-{check_name}", marks=marks))
    return cases


def test_checks_without_fit_do_not_fit():
    class Unfittable(Good):
        def _fit(self, data, physics, budget, seed):
            raise AssertionError("fit reached")

    checks = dict(iter_checks(Unfittable()))
    for name in kit.CHECKS_WITHOUT_FIT:
        try:
            checks[name]()
        except CheckSkipped:
            pass


@pytest.mark.parametrize("check", _registered_cases())
def test_registered_learner_passes_kit(check):
    try:
        check()
    except CheckSkipped as exc:
        pytest.skip(str(exc))
