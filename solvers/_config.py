"""The single place where JAX is configured for this project.

Float64 is enabled here, once, before any JAX array is created: chaotic
trajectories lose accuracy within a fraction of a Lyapunov time in float32
(see ``../shared/CPU-NOTES.md``). Every package of the project imports
``solvers`` first (``surrogates`` and ``suite`` build on it), so this runs
before any other JAX work of ours.

Persistent compilation cache
    Compiled functions that took at least
    :data:`CACHE_MIN_COMPILE_SECONDS` to compile are stored on disk and
    reused by later processes (each runner worker is a fresh process).
    Measured on the loaded 2-core development machine: fitting a small
    ``mlp`` (20 Adam + 5 L-BFGS steps) took 16.4 s of CPU in a fresh process
    with an empty cache and 3.1 s with a warm one (5.4x); the compiled code
    is the same, so figures do not change. Folder: ``LYAPBENCH_JAX_CACHE``
    when it names one, else ``~/.cache/lyapbench/jax``;
    ``LYAPBENCH_JAX_CACHE=off`` turns the cache off. A damaged entry (e.g. a
    process killed while writing it) makes JAX warn and compile afresh.
    The folder is not trimmed automatically (delete it to reclaim space).
"""

from __future__ import annotations

import os
from pathlib import Path

import jax

jax.config.update("jax_enable_x64", True)

#: Compilations shorter than this are not stored (reading an entry has a cost too).
CACHE_MIN_COMPILE_SECONDS = 0.2


def _cache_dir() -> str | None:
    value = os.environ.get("LYAPBENCH_JAX_CACHE", "").strip()
    if value.lower() in ("off", "0", "no", "false", "none"):
        return None
    return str(Path(value).expanduser() if value else Path.home() / ".cache" / "lyapbench" / "jax")


def _enable_cache() -> None:
    path = _cache_dir()
    if path is None:
        return
    try:
        os.makedirs(path, exist_ok=True)
    except OSError:  # an unwritable home: run without the cache
        return
    jax.config.update("jax_compilation_cache_dir", path)
    jax.config.update("jax_persistent_cache_min_compile_time_secs", CACHE_MIN_COMPILE_SECONDS)


_enable_cache()

__all__: list[str] = []
