"""The learner contract.

Modelled on scikit-learn's estimator contract:

* ``__init__`` only stores keyword hyper-parameters under the same names
  (working defaults; no validation, arrays or random draws);
* ``fit(data, physics=None, budget=None, seed=0)`` returns ``self``; what is
  learned ends in ``_`` and is set only by ``fit``; a second ``fit`` replaces
  the first;
* ``get_params`` / ``set_params`` / ``clone`` let the harness sweep
  hyper-parameters and build a fresh copy per cell;
* capabilities are declared data (:class:`Capabilities`), read by the
  harness and the conformance kit.

Depending on the task, a fitted learner answers:

``predict(t)``               states at times inside the training window (reconstruct)
``rollout(y0, t, history)``  trajectories from start states (forecast, climate)
``identified_params()``      estimates of the unknown parameters (identify)
"""

from __future__ import annotations

import copy
import inspect
from dataclasses import dataclass
from typing import ClassVar

import numpy as np

from .data import PHYSICS_LEVELS, TASKS, Budget, Physics, TrainingData
from .errors import InvalidDataError, NotApplicableError, NotFittedError, TooFewSamplesError

__all__ = ["Capabilities", "Learner"]


@dataclass(frozen=True)
class Capabilities:
    """What a learner can do, as data.

    Attributes
    ----------
    tasks : frozenset of str
        Subset of ``{"reconstruct", "forecast", "climate", "identify"}``.
    physics : frozenset of str
        Physics levels it can use, subset of ``{"none", "partial", "full"}``.
    needs_hamiltonian : bool
        Only applies to systems with canonical coordinates.
    deterministic : bool
        Same seed ⇒ identical predictions.
    needs_regular_sampling : bool
        Requires equally spaced samples (reservoirs, delay methods); the
        harness subsamples regularly for it.
    differentiable_rollout : bool
        ``rollout`` can be differentiated (for the surrogate's own Lyapunov exponent).
    min_samples : int
        Fewest training samples it needs.
    """

    tasks: frozenset
    physics: frozenset = frozenset({"none"})
    needs_hamiltonian: bool = False
    deterministic: bool = True
    needs_regular_sampling: bool = False
    differentiable_rollout: bool = False
    min_samples: int = 2

    def __post_init__(self):
        object.__setattr__(self, "tasks", frozenset(self.tasks))
        object.__setattr__(self, "physics", frozenset(self.physics))
        bad = (self.tasks - set(TASKS)) | (self.physics - set(PHYSICS_LEVELS))
        if bad:
            raise ValueError(f"unknown task or physics level in capabilities: {sorted(bad)}")

    def as_dict(self) -> dict:
        return {
            "tasks": [t for t in TASKS if t in self.tasks],
            "physics": [p for p in PHYSICS_LEVELS if p in self.physics],
            "needs_hamiltonian": self.needs_hamiltonian,
            "deterministic": self.deterministic,
            "needs_regular_sampling": self.needs_regular_sampling,
            "differentiable_rollout": self.differentiable_rollout,
            "min_samples": self.min_samples,
        }


class Learner:
    """Base class of every surrogate learner.

    Subclasses declare ``capabilities`` and ``reference`` (the paper the
    method comes from), store hyper-parameters in ``__init__``, and implement
    ``_fit`` plus the prediction methods their tasks need.
    """

    capabilities: ClassVar[Capabilities] = Capabilities(tasks=frozenset())
    reference: ClassVar[str] = ""

    # --------------------------------------------------------- hyper-parameters
    @classmethod
    def _param_names(cls) -> list[str]:
        sig = inspect.signature(cls.__init__)
        names = []
        for name, par in sig.parameters.items():
            if name == "self":
                continue
            if par.kind in (par.VAR_POSITIONAL, par.VAR_KEYWORD):
                raise TypeError(f"{cls.__name__}.__init__ must take explicit keyword hyper-parameters only")
            names.append(name)
        return sorted(names)

    def get_params(self) -> dict:
        """Hyper-parameters, as passed to the constructor."""
        return {name: getattr(self, name) for name in self._param_names()}

    def set_params(self, **params) -> "Learner":
        valid = self._param_names()
        for k, v in params.items():
            if k not in valid:
                raise ValueError(f"{type(self).__name__} has no hyper-parameter {k!r} (valid: {', '.join(valid)})")
            setattr(self, k, v)
        return self

    def clone(self) -> "Learner":
        """A fresh, unfitted copy with the same hyper-parameters."""
        return type(self)(**copy.deepcopy(self.get_params()))

    def __repr__(self) -> str:
        args = ", ".join(f"{k}={v!r}" for k, v in self.get_params().items())
        return f"{type(self).__name__}({args})"

    # ------------------------------------------------------------------ fitting
    def fit(self, data: TrainingData, physics: Physics | None = None,
            budget: Budget | None = None, seed: int = 0) -> "Learner":
        """Learn from ``data``; returns ``self``.

        Checks the inputs against the declared capabilities (raising the
        contract's typed errors), forgets any previous fit, then calls
        ``_fit``.
        """
        if not isinstance(data, TrainingData):
            raise InvalidDataError(f"fit expects TrainingData, got {type(data).__name__}")
        physics = physics if physics is not None else Physics()
        budget = budget if budget is not None else Budget()
        if physics.level not in self.capabilities.physics:
            raise NotApplicableError(
                f"{type(self).__name__} cannot use physics level {physics.level!r} "
                f"(it uses: {', '.join(sorted(self.capabilities.physics))})")
        if physics.unknown and "identify" not in self.capabilities.tasks:
            raise NotApplicableError(f"{type(self).__name__} does not identify parameters")
        if self.capabilities.needs_hamiltonian and physics.hamiltonian is None and physics.to_canonical is None:
            raise NotApplicableError(f"{type(self).__name__} needs a system with canonical coordinates")
        for tr in data.trajectories:  # arrays are mutable: re-check what validation saw
            if not (np.all(np.isfinite(tr.t)) and np.all(np.isfinite(tr.y))):
                raise InvalidDataError("training data contain NaN or infinite values")
        if data.n_samples < self.capabilities.min_samples:
            raise TooFewSamplesError(
                f"{type(self).__name__} needs at least {self.capabilities.min_samples} samples, got {data.n_samples}")
        if self.capabilities.needs_regular_sampling and not all(tr.regular for tr in data.trajectories):
            raise InvalidDataError(f"{type(self).__name__} needs equally spaced samples")
        self._reset_fitted()
        self.dim_ = data.dim
        self._fit(data, physics, budget, int(seed))
        self.is_fitted_ = True
        return self

    def _fit(self, data: TrainingData, physics: Physics, budget: Budget, seed: int) -> None:
        raise NotImplementedError

    def _reset_fitted(self) -> None:
        for name in list(vars(self)):
            if name.endswith("_") and not name.startswith("__"):
                delattr(self, name)

    def _check_fitted(self) -> None:
        if not getattr(self, "is_fitted_", False):
            raise NotFittedError(f"this {type(self).__name__} is not fitted yet; call fit first")

    # -------------------------------------------------------------- predictions
    def predict(self, t) -> np.ndarray:
        """States at times ``t`` (shape (n,)) inside the training window; returns (n, d)."""
        self._check_fitted()
        if "reconstruct" not in self.capabilities.tasks:
            raise NotApplicableError(f"{type(self).__name__} does not reconstruct")
        return np.asarray(self._predict(np.asarray(t, dtype=float)), dtype=float)

    def rollout(self, y0, t, history=None) -> np.ndarray:
        """Autonomous rollouts from start states.

        Parameters
        ----------
        y0 : array, shape (B, d)
            Start states (the state at ``t[0]``).
        t : array, shape (n,)
            Output times, ``t[0]`` the start; equally spaced.
        history : array, shape (B, m, d), optional
            States before the start, at the spacing of ``t``, ending at ``y0``
            (the warm-up that reservoirs and delay methods listen to).

        Returns
        -------
        ndarray, shape (B, n, d)
        """
        self._check_fitted()
        if not ({"forecast", "climate"} & self.capabilities.tasks):
            raise NotApplicableError(f"{type(self).__name__} does not forecast")
        y0 = np.atleast_2d(np.asarray(y0, dtype=float))
        t = np.asarray(t, dtype=float)
        if y0.shape[1] != self.dim_:
            raise InvalidDataError(f"start states have dimension {y0.shape[1]}, the model {self.dim_}")
        if history is not None:
            history = np.asarray(history, dtype=float)
            if history.ndim != 3 or history.shape[0] != y0.shape[0] or history.shape[2] != self.dim_:
                raise InvalidDataError(f"history must have shape (B, m, {self.dim_}), got {history.shape}")
        return np.asarray(self._rollout(y0, t, history), dtype=float)

    def identified_params(self) -> dict[str, float]:
        """Estimates of the parameters named ``Physics.unknown`` at fit time."""
        self._check_fitted()
        if "identify" not in self.capabilities.tasks:
            raise NotApplicableError(f"{type(self).__name__} does not identify parameters")
        return {k: float(v) for k, v in self._identified_params().items()}

    def n_parameters(self) -> int:
        """Number of trainable parameters of the fitted model (a cost figure)."""
        self._check_fitted()
        return int(self._n_parameters())

    # hooks for subclasses
    def _predict(self, t):
        raise NotApplicableError(f"{type(self).__name__} does not reconstruct")

    def _rollout(self, y0, t, history):
        raise NotApplicableError(f"{type(self).__name__} does not forecast")

    def _identified_params(self):
        raise NotApplicableError(f"{type(self).__name__} does not identify parameters")

    def _n_parameters(self) -> int:
        return 0
