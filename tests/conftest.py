"""Shared fixtures and tables for the test suite."""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("MPLBACKEND", "Agg")

import solvers  # noqa: E402,F401  (float64 in JAX, once, before any test creates arrays)
