"""Typed errors of the learner contract; the harness maps each to a cell status."""

from __future__ import annotations

__all__ = [
    "LearnerError",
    "NotApplicableError",
    "DivergedError",
    "OverBudgetError",
    "NotFittedError",
    "InvalidDataError",
]


class LearnerError(Exception):
    """Base of the contract's errors. ``status`` is the harness cell status."""

    status = "failed"


class NotApplicableError(LearnerError):
    """The learner cannot do what is asked (task, physics level, missing Hamiltonian)."""

    status = "not_applicable"


class DivergedError(LearnerError):
    """Training or a rollout produced non-finite values or blew up."""

    status = "diverged"


class OverBudgetError(LearnerError):
    """The learner could not produce a usable model within its budget."""

    status = "timeout"


class NotFittedError(LearnerError, AttributeError):
    """A prediction method was called before ``fit``."""


class InvalidDataError(LearnerError, ValueError):
    """Training data the learner cannot use: wrong dimension, NaN, too few samples."""
