"""Typed errors of the learner contract; the harness maps each to a cell status."""

from __future__ import annotations

__all__ = [
    "LearnerError",
    "NotApplicableError",
    "DivergedError",
    "OverBudgetError",
    "NotFittedError",
    "InvalidDataError",
    "TooFewSamplesError",
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


class TooFewSamplesError(InvalidDataError):
    """Fewer training samples than the learner needs with its settings on this system.

    Not a fault of the learner: the cell asks for something it cannot be
    (a 36-term SINDy library fitted from 20 samples, 8 delays from 9
    samples), so the harness records it as ``not_applicable`` with this
    message, as it does for the ``min_samples`` check made before any data
    are built.
    """

    status = "not_applicable"
