"""Floor 3: the harness — systems registry, tasks, metrics, runner, store, reports, CLI."""

from __future__ import annotations

import solvers  # noqa: F401  (configures JAX float64 before anything else)

__version__ = "0.1.0"

__all__ = ["__version__"]
