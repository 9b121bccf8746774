"""Shared fixtures and tables for the test suite."""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("MPLBACKEND", "Agg")

import atexit
import shutil
import tempfile

# Hermetic caches: the suite's on-disk caches (references, attractor scales, start
# states; JAX compilations) live in one temporary folder per test session, never in
# the user's ~/.cache, so a stale or damaged user cache can neither hide nor cause a
# failure. Set LYAPBENCH_CACHE / LYAPBENCH_JAX_CACHE yourself to override.
_SESSION_CACHE = tempfile.mkdtemp(prefix="lyapbench-test-cache-")
atexit.register(shutil.rmtree, _SESSION_CACHE, ignore_errors=True)
os.environ.setdefault("LYAPBENCH_CACHE", os.path.join(_SESSION_CACHE, "arrays"))
os.environ.setdefault("LYAPBENCH_JAX_CACHE", os.path.join(_SESSION_CACHE, "jax"))

import solvers  # noqa: E402,F401  (float64 in JAX, once, before any test creates arrays)
