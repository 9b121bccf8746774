"""Executors run cells and hand each result back to the runner's process.

``local`` (default): worker processes on this machine, reused across cells
(a cell that times out, dies or runs out of memory takes its worker down). ``dask``: the same cells on a Dask distributed cluster. Both call
``on_result(CellResult)`` in the caller's thread, so only the runner's
process writes the store.
"""

from __future__ import annotations

from .local import (DEFAULT_CELLS_PER_WORKER, CellResult, CellTask, LocalExecutor, WorkerPool, function_path,
                    worker_env)

__all__ = ["CellResult", "CellTask", "LocalExecutor", "WorkerPool", "DaskExecutor", "EXECUTORS", "make_executor",
           "function_path", "worker_env", "DEFAULT_CELLS_PER_WORKER"]

EXECUTORS = ("local", "dask")


def __getattr__(name):
    if name == "DaskExecutor":  # imported lazily: distributed is slow to import
        from .dask import DaskExecutor
        return DaskExecutor
    raise AttributeError(name)


def make_executor(name: str, function="suite.execute:run_cell", *, workers=None, scheduler=None,
                  retries: int = 1, cells_per_worker=None, grace=None):
    """The executor called ``name`` (``"local"`` or ``"dask"``).

    ``cells_per_worker``: cells a worker process runs before it is replaced
    (0 no limit, 1 a fresh process per cell; None: the default, 0). For
    Dask it applies to the subprocess each Dask worker keeps.
    """
    if cells_per_worker is None:
        cells_per_worker = DEFAULT_CELLS_PER_WORKER
    if int(cells_per_worker) < 0:
        raise ValueError(f"cells per worker must be >= 0 (0: no limit), got {cells_per_worker}")
    if name == "local":
        if scheduler:
            raise ValueError("--scheduler applies only to the dask executor")
        return LocalExecutor(function, workers=workers, cells_per_worker=cells_per_worker,
                             retries=retries, grace=grace)
    if name == "dask":
        from .dask import DaskExecutor
        return DaskExecutor(function, scheduler=scheduler, workers=workers, retries=retries, grace=grace,
                            cells_per_worker=cells_per_worker)
    raise ValueError(f"unknown executor {name!r} (valid: {', '.join(EXECUTORS)})")
