"""What a learner receives: training data, physics, budget."""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from typing import Callable, Mapping

import numpy as np

from .errors import InvalidDataError

__all__ = ["Trajectory", "TrainingData", "Physics", "Budget", "PHYSICS_LEVELS", "TASKS"]

TASKS = ("reconstruct", "forecast", "climate", "identify")
PHYSICS_LEVELS = ("none", "partial", "full")


@dataclass(frozen=True)
class Trajectory:
    """Observed states of one trajectory.

    ``t`` has shape (n,), strictly increasing, possibly irregular; ``y`` has
    shape (n, d), possibly noisy.
    """

    t: np.ndarray
    y: np.ndarray

    def __post_init__(self):
        t = np.asarray(self.t, dtype=float)
        y = np.asarray(self.y, dtype=float)
        object.__setattr__(self, "t", t)
        object.__setattr__(self, "y", y)
        if t.ndim != 1 or y.ndim != 2 or y.shape[0] != t.shape[0]:
            raise InvalidDataError(
                f"a trajectory needs t of shape (n,) and y of shape (n, d); got {t.shape} and {y.shape}")
        if not (np.all(np.isfinite(t)) and np.all(np.isfinite(y))):
            raise InvalidDataError("training data contain NaN or infinite values")
        if t.size > 1 and np.any(np.diff(t) <= 0):
            raise InvalidDataError("training times must be strictly increasing")

    @property
    def regular(self) -> bool:
        """Whether the samples are equally spaced (to 1e-9 relative)."""
        if self.t.size < 3:
            return True
        d = np.diff(self.t)
        return bool(np.allclose(d, d[0], rtol=1e-9, atol=0.0))

    @property
    def dt(self) -> float:
        """Median sample spacing."""
        return float(np.median(np.diff(self.t))) if self.t.size > 1 else float("nan")


@dataclass(frozen=True)
class TrainingData:
    """One or several observed trajectories of a ``dim``-dimensional system.

    Attributes
    ----------
    trajectories : tuple of Trajectory
    state_names : tuple of str
    noise : float
        Noise level the data were made with (fraction of each variable's
        attractor standard deviation; 0 for clean data). Informational.
    scale : ndarray, shape (d,)
        Per-variable standard deviation on the attractor, for learners that
        normalise (the harness supplies it; defaults to the data's own).
    """

    trajectories: tuple[Trajectory, ...]
    state_names: tuple[str, ...] = ()
    noise: float = 0.0
    scale: np.ndarray | None = None

    def __post_init__(self):
        trajs = tuple(self.trajectories)
        if isinstance(self.trajectories, Trajectory):
            trajs = (self.trajectories,)
        if not trajs:
            raise InvalidDataError("training data hold no trajectory")
        dims = {tr.y.shape[1] for tr in trajs}
        if len(dims) != 1:
            raise InvalidDataError(f"trajectories of different dimensions {sorted(dims)}")
        object.__setattr__(self, "trajectories", trajs)
        d = dims.pop()
        names = tuple(self.state_names) or tuple(f"y{i}" for i in range(d))
        if len(names) != d:
            raise InvalidDataError(f"{len(names)} state names for {d}-dimensional data")
        object.__setattr__(self, "state_names", names)
        if self.scale is None:
            allv = np.concatenate([tr.y for tr in trajs])
            s = allv.std(axis=0) if allv.shape[0] > 1 else np.ones(d)
            s = np.where(s > 0, s, 1.0)
        else:
            s = np.asarray(self.scale, dtype=float)
            if s.shape != (d,):
                raise InvalidDataError(f"scale must have shape ({d},), got {s.shape}")
        object.__setattr__(self, "scale", s)

    @classmethod
    def from_arrays(cls, t, y, **kw) -> "TrainingData":
        return cls((Trajectory(t, y),), **kw)

    @property
    def dim(self) -> int:
        return self.trajectories[0].y.shape[1]

    @property
    def n_samples(self) -> int:
        return sum(tr.t.size for tr in self.trajectories)

    @property
    def t_span(self) -> tuple[float, float]:
        return (min(tr.t[0] for tr in self.trajectories), max(tr.t[-1] for tr in self.trajectories))


@dataclass(frozen=True)
class Physics:
    """What is known of the physics.

    Attributes
    ----------
    level : {"none", "partial", "full"}
    vector_field : callable or None
        ``f(t, y, p)``, JAX-traceable; at ``partial`` it lacks the term named
        ``removed_term``. None at level ``none``.
    params : mapping
        Known parameter values (for ``unknown`` names: an initial guess).
    unknown : tuple of str
        Names of parameters to identify (task ``identify``).
    removed_term : str or None
    hamiltonian : callable or None
        ``H(z, p)`` of canonical coordinates, for systems that declare them.
    to_canonical, from_canonical : callable or None
        Maps between the state and canonical coordinates ``z = (q, p)``.
    conserved : mapping
        Name -> ``q(y, p)`` of quantities the true flow conserves.
    """

    level: str = "none"
    vector_field: Callable | None = None
    params: Mapping[str, float] = field(default_factory=dict)
    unknown: tuple[str, ...] = ()
    removed_term: str | None = None
    hamiltonian: Callable | None = None
    to_canonical: Callable | None = None
    from_canonical: Callable | None = None
    conserved: Mapping[str, Callable] = field(default_factory=dict)

    def __post_init__(self):
        if self.level not in PHYSICS_LEVELS:
            raise InvalidDataError(f"physics level must be one of {PHYSICS_LEVELS}, got {self.level!r}")
        if self.level != "none" and self.vector_field is None:
            raise InvalidDataError(f"physics level {self.level!r} needs a vector field")
        if self.level == "partial" and not self.removed_term:
            raise InvalidDataError("physics level 'partial' must name the removed term")
        missing = [u for u in self.unknown if u not in self.params]
        if missing:
            raise InvalidDataError(f"unknown parameters need an initial guess in params: {missing}")


@dataclass(frozen=True)
class Budget:
    """Training budget: iterations and/or wall seconds (None: the learner's default)."""

    max_iterations: int | None = None
    max_seconds: float | None = None

    def clock(self) -> "BudgetClock":
        return BudgetClock(self)


class BudgetClock:
    """Started when ``fit`` begins; ``expired()`` tells a training loop to stop."""

    def __init__(self, budget: Budget):
        self.budget = budget
        self.start = time.perf_counter()

    def elapsed(self) -> float:
        return time.perf_counter() - self.start

    def expired(self) -> bool:
        s = self.budget.max_seconds
        return s is not None and self.elapsed() >= s

    def iterations(self, default: int) -> int:
        """The learner's planned ``default`` iterations, capped by the budget."""
        m = self.budget.max_iterations
        return int(default) if m is None else int(min(default, m))
