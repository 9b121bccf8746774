"""Floor 1: integrators and dynamical-systems numerics on plain callables.

Vector fields are callables ``f(t, y, params)`` where ``params`` is a mapping
of names to floats; the same function runs under numpy and ``jax.numpy``.
This package knows no system by name.
"""

from __future__ import annotations

from . import _config  # noqa: F401  (enables float64 in JAX, once)
from .arrays import array_namespace
from .result import Solution

__all__ = ["Solution", "array_namespace"]
