"""The Dask executor: the same cells on a Dask distributed cluster.

Each cell becomes one Dask task that runs the cell exactly as the local
executor does: in a worker *subprocess* of the Dask worker (``python -m
suite.executors._worker``), with one BLAS/XLA thread, the memory limit and
the time budget enforced by killing that subprocess. A thread-with-timeout
inside the Dask worker could not stop a hung learner; a subprocess can, and
it keeps JAX state out of the long-lived Dask worker.

Each Dask worker process keeps its subprocess between tasks (a
:class:`~suite.executors.local.WorkerPool` of one slot held in a module
global, one per Dask worker thread), so the interpreter start and ``import suite`` are
paid once per Dask worker, not per cell; ``cells_per_worker`` bounds the
reuse as for the local executor (0: no limit, 1: a fresh subprocess per
cell). A cell that times out, dies or fails for memory takes the subprocess
down and the next task starts a fresh one. The subprocess exits when its
Dask worker does (its stdin closes); on an existing cluster it stays
idle (~220 MB resident) between runs. Measured on an idle 2-core machine
(benchmarks/bench_harness.py): 0.04–0.07 s of overhead per cell, and 20
non-trivial cells 1.80x faster on 2 workers than on 1 (the local executor:
1.75x on the same cells), with Dask's housekeeping quietened on the cluster
the run starts (:data:`QUIET_CLUSTER_CONFIG`).

A scheduler address that cannot be reached is an error (exit 2) raised
before the store is opened (:meth:`DaskExecutor.check`).

The executor uses an existing cluster (``scheduler="tcp://host:port"``) or
starts ``LocalCluster(n_workers=N, threads_per_worker=1, processes=True,
dashboard_address=None, host="127.0.0.1")`` for the run and closes it
afterwards. The Dask workers must be able to import ``suite`` and the cell
function (same installation everywhere). Results come back to the runner's
process, the only one that writes the store.
"""

from __future__ import annotations

import os
import sys
import threading

from suite.cell import CellOutcome, CellSpec

from .local import DEFAULT_CELLS_PER_WORKER, CellResult, CellTask, WorkerPool, _now, function_path

__all__ = ["DaskExecutor", "run_cell_task", "QUIET_CLUSTER_CONFIG"]

# The LocalCluster we start runs cells that take seconds each in subprocesses
# that need the cores. Dask's per-process housekeeping is tuned for many short
# tasks: a stack profiler sampling every 10 ms, an event-loop tick every 20 ms,
# memory and system monitors every 0.1 and 0.5 s. On two cores those took
# ~6 % of a core in each Dask worker and in the scheduler's process (measured
# with /proc/<pid>/stat during a run). Quieter settings for our own cluster,
# and one queued task per worker thread, so that the last cells are not held
# in one worker's queue while the other idles. An existing cluster
# (``scheduler=...``) keeps its own configuration.
QUIET_CLUSTER_CONFIG = {
    "distributed.worker.profile.enabled": False,
    "distributed.admin.system-monitor.interval": "5s",
    "distributed.admin.system-monitor.gil.enabled": False,
    "distributed.admin.tick.interval": "500ms",
    "distributed.worker.memory.monitor-interval": "1s",
    "distributed.scheduler.worker-saturation": 1.0,
}


_POOLS: dict[int, WorkerPool] = {}  # one per Dask worker thread (one thread: one subprocess)
_POOLS_LOCK = threading.Lock()


def _pool(function: str, retries: int, grace, cells_per_worker: int) -> WorkerPool:
    """This thread's pool of one worker subprocess, made anew when its settings change."""
    tid = threading.get_ident()
    with _POOLS_LOCK:
        p = _POOLS.get(tid)
    if p is None or (p.function, p.retries, p.grace, p.cells_per_worker) != (
            function, max(0, int(retries)), grace, max(0, int(cells_per_worker))):
        if p is not None:
            p.close()
        p = WorkerPool(function, 1, cells_per_worker, retries, grace)
        with _POOLS_LOCK:
            _POOLS[tid] = p
    return p


def run_cell_task(function: str, key: str, spec: dict, budget_seconds, memory_mb, retries: int,
                  grace, sys_path: list, cells_per_worker: int = DEFAULT_CELLS_PER_WORKER) -> dict:
    """Run one cell in the calling (Dask worker) process's worker subprocess.

    The subprocess is kept for the next task (see the module docstring).
    Returns a JSON-ready dict (``outcome``, ``started``, ``finished``,
    ``attempts``, ``subprocess_starts``: subprocesses started for this cell).
    """
    from suite.executors._worker import outcome_to_dict

    for p in sys_path:
        if p not in sys.path and os.path.isdir(p):
            sys.path.append(p)
    got = []
    pool = _pool(function, retries, grace, cells_per_worker)
    before = pool.started
    try:
        pool.run([CellTask(key, CellSpec(**spec), budget_seconds, memory_mb)], got.append)
    except BaseException:
        with _POOLS_LOCK:  # run() killed its worker: start afresh next time
            _POOLS.pop(threading.get_ident(), None)
        raise
    starts = pool.started - before
    r = got[0]
    return {"outcome": outcome_to_dict(r.outcome), "started": r.started, "finished": r.finished,
            "attempts": r.attempts, "subprocess_starts": starts}


class DaskExecutor:
    """Run cells on a Dask cluster (see the module docstring).

    Parameters
    ----------
    function : str or callable
        The cell function (``"module:callable"``), default ``suite.execute:run_cell``.
    scheduler : str, optional
        Address of an existing scheduler; without it a LocalCluster is started.
    workers : int, optional
        Workers of the LocalCluster (default: the number of CPUs).
    retries : int
        Extra attempts for a cell whose worker subprocess died.
    grace : float, optional
        Seconds past the budget before the subprocess is killed.
    cells_per_worker : int
        Cells a Dask worker's subprocess runs before it is replaced (0: no limit).
    """

    name = "dask"

    def __init__(self, function="suite.execute:run_cell", scheduler: str | None = None,
                 workers: int | None = None, retries: int = 1, grace: float | None = None,
                 cells_per_worker: int = DEFAULT_CELLS_PER_WORKER):
        self.function = function_path(function)
        if int(cells_per_worker) < 0:
            raise ValueError(f"cells per worker must be >= 0 (0: no limit), got {cells_per_worker}")
        self.cells_per_worker = int(cells_per_worker)
        self.workers_started = 0
        self.scheduler = scheduler
        self.workers = max(1, int(workers or os.cpu_count() or 1))
        self.retries = max(0, int(retries))
        self.grace = grace

    def check(self) -> None:
        """Fail early (ValueError) when ``distributed`` is missing or the scheduler cannot be reached."""
        try:
            import distributed  # noqa: F401
        except ImportError:
            raise ValueError("the dask executor needs the 'distributed' package") from None
        if self.scheduler:
            client, _ = self._client()
            client.close()

    def _client(self):
        from distributed import Client, LocalCluster

        if self.scheduler:
            try:
                return Client(self.scheduler, timeout="20s"), None
            except (OSError, TimeoutError, ValueError) as exc:
                raise ValueError(f"cannot reach the Dask scheduler at {self.scheduler!r} ({exc})") from None
        import dask

        # A Dask worker that dies mid-cell is retried by the scheduler, not by us: cap
        # its retries at ours so "retried once, then failed" holds here too. (An
        # existing cluster given by --scheduler keeps its own policy.)
        with dask.config.set({**QUIET_CLUSTER_CONFIG, "distributed.scheduler.allowed-failures": int(self.retries)}):
            cluster = LocalCluster(n_workers=self.workers, threads_per_worker=1, processes=True,
                                   dashboard_address=None, host="127.0.0.1")
        return Client(cluster), cluster

    def run(self, tasks, on_result) -> None:
        """Submit every task; call ``on_result(CellResult)`` here as each completes."""
        tasks = list(tasks)
        if not tasks:
            return
        from distributed import as_completed

        client, cluster = self._client()
        try:
            sys_path = [p for p in sys.path if p]
            futures, submitted = {}, []
            for t in tasks:
                fut = client.submit(run_cell_task, self.function, t.key, t.spec.canonical(),
                                    t.budget_seconds, t.memory_mb, self.retries, self.grace, sys_path,
                                    self.cells_per_worker, key=f"lyapbench-cell-{t.key}", pure=False)
                futures[fut.key] = t
                submitted.append(fut)
            from suite.executors._worker import outcome_from_dict
            for fut in as_completed(submitted):
                t = futures[fut.key]
                try:
                    d = fut.result()
                    self.workers_started += int(d.get("subprocess_starts", 0))
                    r = CellResult(t.key, t.spec, outcome_from_dict(d["outcome"]), d["started"],
                                   d["finished"], d["attempts"])
                except Exception as exc:  # the Dask task itself failed (worker lost, ...)
                    r = CellResult(t.key, t.spec,
                                   CellOutcome("failed", error=f"dask: {type(exc).__name__}: {exc}"),
                                   None, _now(), 1)
                on_result(r)
        finally:
            client.close()
            if cluster is not None:
                cluster.close()

