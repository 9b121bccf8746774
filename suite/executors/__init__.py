"""Executors run cells and hand each result back to the runner's process.

``local`` (default): worker processes on this machine, one fresh process per
cell. ``dask``: the same cells on a Dask distributed cluster. Both call
``on_result(CellResult)`` in the caller's thread, so only the runner's
process writes the store.
"""

from __future__ import annotations

from .local import CellResult, CellTask, LocalExecutor, function_path, worker_env

__all__ = ["CellResult", "CellTask", "LocalExecutor", "DaskExecutor", "EXECUTORS", "make_executor",
           "function_path", "worker_env"]

EXECUTORS = ("local", "dask")


def __getattr__(name):
    if name == "DaskExecutor":  # imported lazily: distributed is slow to import
        from .dask import DaskExecutor
        return DaskExecutor
    raise AttributeError(name)


def make_executor(name: str, function="suite.execute:run_cell", *, workers=None, scheduler=None,
                  retries: int = 1, cells_per_worker: int = 1, grace=None):
    """The executor called ``name`` (``"local"`` or ``"dask"``)."""
    if name == "local":
        if scheduler:
            raise ValueError("--scheduler applies only to the dask executor")
        return LocalExecutor(function, workers=workers, cells_per_worker=cells_per_worker,
                             retries=retries, grace=grace)
    if name == "dask":
        if cells_per_worker != 1:
            raise ValueError("cells per worker applies only to the local executor")
        from .dask import DaskExecutor
        return DaskExecutor(function, scheduler=scheduler, workers=workers, retries=retries, grace=grace)
    raise ValueError(f"unknown executor {name!r} (valid: {', '.join(EXECUTORS)})")
