"""Floor 2: the learner contract and the learners.

A learner never imports ``suite``; the physics it may use arrives as a
callable in :class:`Physics`.
"""

from __future__ import annotations

import solvers  # noqa: F401  (configures JAX float64 before anything else)

from .base import Capabilities, Learner
from .data import PHYSICS_LEVELS, TASKS, Budget, BudgetClock, Physics, TrainingData, Trajectory
from .errors import (
    DivergedError,
    InvalidDataError,
    LearnerError,
    NotApplicableError,
    NotFittedError,
    OverBudgetError,
    TooFewSamplesError,
)
from .registry import (
    LearnerClashError,
    LearnerLoadError,
    UnknownLearnerError,
    available_learners,
    learner_class,
    learner_info,
    make_learner,
)

__all__ = [
    "PHYSICS_LEVELS",
    "TASKS",
    "Budget",
    "BudgetClock",
    "Capabilities",
    "DivergedError",
    "InvalidDataError",
    "Learner",
    "LearnerClashError",
    "LearnerError",
    "LearnerLoadError",
    "NotApplicableError",
    "NotFittedError",
    "OverBudgetError",
    "TooFewSamplesError",
    "Physics",
    "TrainingData",
    "Trajectory",
    "UnknownLearnerError",
    "available_learners",
    "learner_class",
    "learner_info",
    "make_learner",
]
