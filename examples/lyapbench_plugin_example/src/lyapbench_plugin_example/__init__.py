"""An example lyapbench plugin: one learner, registered through an entry point."""

from __future__ import annotations

from .local_linear import LocalLinear

__all__ = ["LocalLinear"]
