"""Learners and cell functions that misbehave on purpose, for the fault-injection tests.

Importable by worker processes as ``reliability.faulty_learners:<Name>``
(``tests/`` is on their path: workers inherit the parent's ``sys.path``).
The well-behaved base and the first faults (raise, NaN, hang, one big
allocation, self-kill) live in :mod:`harness.bad_learners`; these add the
faults that module does not cover.

Cell functions
--------------
``disrupting_run_cell`` runs :func:`harness.bad_learners.standin_run_cell`
but, for the cell whose seed equals ``$LYAPBENCH_TEST_DISRUPT_SEED``, first
does ``$LYAPBENCH_TEST_DISRUPT``: ``fill:<path>`` writes a file at
``<path>`` until its file system is full; ``rmtree:<folder>`` removes the
folder (the store's). The worker inherits these variables from the test
process. Nothing here is read by the product.
"""

from __future__ import annotations

import os
import shutil
import signal
import sys
import time
from pathlib import Path

import numpy as np

from harness.bad_learners import PolynomialInTime, standin_run_cell

__all__ = ["InfLearner", "WrongShapeLearner", "TransposedLearner", "RaggedLearner", "GrowingHog",
           "PredictHang", "ExitingLearner", "KillOnceLearner", "KillDaskWorkerLearner", "NotALearner",
           "disrupting_run_cell"]


class InfLearner(PolynomialInTime):
    """Fits, then predicts +inf in one entry."""

    def _predict(self, t):
        out = super()._predict(t)
        out[len(out) // 2, 0] = np.inf
        return out


class WrongShapeLearner(PolynomialInTime):
    """Predicts one state variable too many."""

    def _predict(self, t):
        out = super()._predict(t)
        return np.concatenate([out, out[:, :1]], axis=1)


class TransposedLearner(PolynomialInTime):
    """Predicts (d, n) instead of (n, d)."""

    def _predict(self, t):
        return super()._predict(t).T


class RaggedLearner(PolynomialInTime):
    """Predicts a ragged nested list that no array can hold."""

    def _predict(self, t):
        return [[1.0, 2.0], [3.0]]


class GrowingHog(PolynomialInTime):
    """Allocates 64 MB blocks, touching each, without bound (a leak, not one big request)."""

    def _fit(self, data, physics, budget, seed):
        blocks = []
        while True:
            blocks.append(np.ones(8 * 2**20))


class PredictHang(PolynomialInTime):
    """Fits, then hangs in predict (after the learner's own budget checks are over)."""

    def _predict(self, t):
        time.sleep(3600.0)


class ExitingLearner(PolynomialInTime):
    """Calls ``sys.exit(3)`` in fit: a BaseException that ordinary handlers do not catch."""

    def _fit(self, data, physics, budget, seed):
        sys.exit(3)


class KillOnceLearner(PolynomialInTime):
    """SIGKILLs its own process in the first fit, works in the retry.

    ``marker`` is a file path: absent, it is created and the process killed;
    present, the learner behaves.
    """

    def __init__(self, degree=8, marker=""):
        self.degree = degree
        self.marker = marker

    def _fit(self, data, physics, budget, seed):
        m = Path(self.marker)
        if not m.exists():
            m.write_text(str(os.getpid()))
            os.kill(os.getpid(), signal.SIGKILL)
        super()._fit(data, physics, budget, seed)


class KillDaskWorkerLearner(PolynomialInTime):
    """SIGKILLs the parent of its process: under the Dask executor, the Dask worker itself."""

    def _fit(self, data, physics, budget, seed):
        os.kill(os.getppid(), signal.SIGKILL)
        time.sleep(3600.0)


class NotALearner:
    """A class that is not a :class:`surrogates.Learner` (for the plugin-loading tests)."""

    def fit(self, *args, **kwargs):
        return self


def disrupting_run_cell(spec):
    """``standin_run_cell``, after an environment-chosen disruption for one seed (module docstring)."""
    what = os.environ.get("LYAPBENCH_TEST_DISRUPT", "")
    if what and str(spec.seed) == os.environ.get("LYAPBENCH_TEST_DISRUPT_SEED"):
        action, _, target = what.partition(":")
        if action == "fill":
            with open(target, "wb") as fh:
                block = b"\0" * 65536
                try:
                    while True:
                        fh.write(block)
                        fh.flush()
                except OSError:
                    pass
        elif action == "rmtree":
            shutil.rmtree(target, ignore_errors=True)
    return standin_run_cell(spec)
