"""Learners that misbehave on purpose, and a stand-in cell function, for the harness tests.

Importable by worker processes as ``harness.bad_learners:<Name>`` (``tests/`` is
on their path: the workers inherit the parent's ``sys.path``).

``standin_run_cell`` is a real, small cell function: it integrates the named
system with scipy, keeps a ``fraction`` of the samples with Gaussian noise,
fits the learner to them and scores its reconstruction at held-out times.
It lets the runner be tested without depending on ``suite.execute``. Its
imports sit at module level, so that they happen before a cell's clock starts.
"""

from __future__ import annotations

import os
import signal
import time

import numpy as np
from scipy.integrate import solve_ivp

from suite.cell import CellOutcome, MetricRow
from suite.systems import get_system
from surrogates import Capabilities, Learner, LearnerError, Physics, TrainingData
from surrogates.registry import make_learner

_RECONSTRUCT = Capabilities(tasks=frozenset({"reconstruct"}))


class PolynomialInTime(Learner):
    """Least-squares polynomial in time per state variable (a well-behaved learner).

    References
    ----------
    Gauss, C. F. (1809). Theoria motus corporum coelestium (least squares).
    """

    capabilities = _RECONSTRUCT
    reference = "Gauss (1809), least squares"

    def __init__(self, degree=8):
        self.degree = degree

    def _fit(self, data, physics, budget, seed):
        tr = data.trajectories[0]
        self.t0_, self.span_ = tr.t[0], max(tr.t[-1] - tr.t[0], 1e-12)
        x = (tr.t - self.t0_) / self.span_
        self.coef_ = np.polynomial.polynomial.polyfit(x, tr.y, int(self.degree))

    def _predict(self, t):
        x = (t - self.t0_) / self.span_
        return np.polynomial.polynomial.polyval(x, self.coef_).T

    def _n_parameters(self):
        return int(self.coef_.size)


class PausingPolynomial(PolynomialInTime):
    """PolynomialInTime that sleeps ``pause`` seconds in fit, so a process kill lands mid-study."""

    def __init__(self, degree=8, pause=1.5):
        self.degree = degree
        self.pause = pause

    def _fit(self, data, physics, budget, seed):
        time.sleep(float(self.pause))
        super()._fit(data, physics, budget, seed)


class RaisingLearner(PolynomialInTime):
    """Raises an ordinary exception in fit."""

    def _fit(self, data, physics, budget, seed):
        raise RuntimeError("deliberate failure in fit")


class NaNLearner(PolynomialInTime):
    """Fits, then predicts NaN."""

    def _predict(self, t):
        return np.full((t.size, self.dim_), np.nan)


class SleepingLearner(PolynomialInTime):
    """Sleeps far past any budget in fit (a hung learner)."""

    def __init__(self, degree=8, seconds=3600.0):
        self.degree = degree
        self.seconds = seconds

    def _fit(self, data, physics, budget, seed):
        time.sleep(float(self.seconds))


class MemoryHog(PolynomialInTime):
    """Allocates ``megabytes`` at once in fit."""

    def __init__(self, degree=8, megabytes=50_000):
        self.degree = degree
        self.megabytes = megabytes

    def _fit(self, data, physics, budget, seed):
        self.block_ = np.ones(int(self.megabytes) * 2**20 // 8)


class SelfKillingLearner(PolynomialInTime):
    """Kills its own process with SIGKILL in fit (a worker that dies)."""

    def _fit(self, data, physics, budget, seed):
        os.kill(os.getpid(), signal.SIGKILL)


def standin_run_cell(spec):
    """A cell function ``CellSpec -> CellOutcome`` for the tests (see the module docstring)."""
    learner = make_learner(spec.learner, **spec.learner_params)
    if spec.task not in learner.capabilities.tasks:
        return CellOutcome("not_applicable", error=f"{spec.learner} does not do task {spec.task}")
    system = get_system(spec.system, **spec.system_params)
    t = np.linspace(0.0, 2.0, 401)
    sol = solve_ivp(lambda tt, y: np.asarray(system.vector_field(tt, y, system.params)), (0.0, 2.0),
                    np.asarray(system.default_y0(), float), t_eval=t, method="DOP853", rtol=1e-10, atol=1e-12)
    y = sol.y.T
    rng = np.random.default_rng(spec.seed)
    train = np.zeros(t.size, bool)
    train[::2] = True
    held = ~train
    idx = np.flatnonzero(train)
    keep = np.sort(rng.choice(idx, size=max(2, int(round(spec.fraction * idx.size))), replace=False))
    y_noisy = y[keep] + spec.noise * y.std(axis=0) * rng.standard_normal((keep.size, y.shape[1]))
    t_start = time.perf_counter()
    try:
        learner.fit(TrainingData.from_arrays(t[keep], y_noisy), Physics(), seed=spec.seed)
        pred = learner.predict(t[held])
    except LearnerError as exc:
        return CellOutcome(exc.status, error=f"{type(exc).__name__}: {exc}")
    except Exception as exc:  # a learner's own bug is a failed cell
        return CellOutcome("failed", error=f"{type(exc).__name__}: {exc}")
    train_seconds = time.perf_counter() - t_start
    if not np.all(np.isfinite(pred)):
        return CellOutcome("diverged", error="prediction is not finite")
    err = float(np.linalg.norm(pred - y[held]) / np.linalg.norm(y[held]))
    half = t[held] <= 1.0
    curve = [MetricRow("relative_l2_error", float(np.linalg.norm(pred[m] - y[held][m]) / np.linalg.norm(y[held][m])), h)
             for h, m in ((1.0, half), (2.0, np.ones_like(half)))]
    return CellOutcome("ok", metrics=[MetricRow("relative_l2_error", err)] + curve,
                       cost={"train_seconds": train_seconds, "n_parameters": learner.n_parameters()},
                       info={"OPENBLAS_NUM_THREADS": os.environ.get("OPENBLAS_NUM_THREADS"),
                             "XLA_FLAGS": os.environ.get("XLA_FLAGS")})
