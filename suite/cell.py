"""One cell of a study: its spec (hashed into a stable key) and its outcome."""

from __future__ import annotations

import hashlib
import json
from dataclasses import asdict, dataclass, field

__all__ = ["CellSpec", "CellOutcome", "MetricRow", "STATUSES"]

STATUSES = ("ok", "failed", "diverged", "timeout", "not_applicable")


@dataclass(frozen=True)
class CellSpec:
    """Everything that determines a cell's accuracy numbers.

    ``system_params`` and ``learner_params`` hold only overrides of the
    defaults given in the grid; ``budget_seconds`` is the wall-clock budget
    the runner enforces; ``budget_iterations`` is passed to the learner.
    """

    system: str
    task: str
    learner: str
    fraction: float = 1.0
    noise: float = 0.0
    physics: str = "none"
    seed: int = 0
    system_params: dict = field(default_factory=dict)
    learner_params: dict = field(default_factory=dict)
    budget_seconds: float | None = None
    budget_iterations: int | None = None
    task_options: dict = field(default_factory=dict)

    def canonical(self) -> dict:
        d = asdict(self)
        d["fraction"] = float(self.fraction)
        d["noise"] = float(self.noise)
        d["seed"] = int(self.seed)
        return d

    def key(self, version: str | None = None) -> str:
        """Stable hash of the full spec plus the package version (16 hex digits)."""
        if version is None:
            from suite import __version__ as version
        payload = json.dumps({"spec": self.canonical(), "version": version}, sort_keys=True,
                             separators=(",", ":"), default=str)
        return hashlib.sha256(payload.encode()).hexdigest()[:16]

    def derived_seed(self) -> int:
        """A 32-bit seed for numpy and JAX derived from the key (same key ⇒ same seed)."""
        return int(self.key()[:8], 16)


@dataclass(frozen=True)
class MetricRow:
    """One accuracy or cost figure; ``horizon`` in Lyapunov times for curves, else None."""

    metric: str
    value: float
    horizon: float | None = None


@dataclass
class CellOutcome:
    """What running a cell produced. ``status`` is one of :data:`STATUSES`."""

    status: str
    metrics: list[MetricRow] = field(default_factory=list)
    cost: dict = field(default_factory=dict)
    error: str = ""
    info: dict = field(default_factory=dict)
