"""The local executor: cells in reused worker processes, each with a time budget.

Workers are started with :mod:`subprocess` (``python -m
suite.executors._worker``), a fresh interpreter each: nothing is forked from
a process that has started JAX threads (JAX is not fork-safe), the worker's
environment is set explicitly (one BLAS/OpenMP/XLA thread per worker, see
:func:`worker_env`), and the same code runs inside a daemonic Dask worker,
which :mod:`multiprocessing` would refuse to give children.

Time budget
    The clock starts when the worker reports that the cell started (after the
    interpreter and the cell function's imports), and the worker is killed
    with SIGKILL ``budget_seconds + grace`` later (``grace`` defaults to
    ``max(2 s, 10 % of the budget)``, room for the learner's own budget
    check to end it gracefully). The cell is recorded as ``timeout``; it is
    not retried; a fresh worker takes the next cell.
Dead workers
    A worker that exits without reporting its cell (killed, segfault, killed
    by the kernel for memory) is replaced and the cell retried ``retries``
    times (default 1); then it is recorded ``failed`` with the reason.
Worker reuse (``cells_per_worker``)
    A worker start costs an interpreter plus ``import suite`` (JAX): measured
    3.5-3.8 s of CPU on the shared 2-core development machine (15-18 s of
    wall time at load average 10-13), against < 0.1 ms for a trivial cell.
    So a worker runs cells until the run ends (default ``0``: no limit; ``N``:
    replaced after N cells; ``1``: a fresh process for every cell). Isolation
    where it matters is kept: a cell that times out (killed, or ended
    ``timeout`` by its own budget check), dies or fails for memory takes its
    worker down and a fresh worker continues; between cells the worker
    restores the environment, working folder, numpy error settings and
    global random generators (see :mod:`suite.executors._worker`). JAX's
    compiled functions are kept on purpose: that is the speed-up, and it
    changes no figure (same grid with reuse on and off gives identical
    accuracy metrics, tested in ``tests/harness/test_executors.py``). The
    cost figures a cell reports (``peak_memory_mb`` is per cell, see
    :mod:`suite.executors._worker`; ``worker_reused`` says whether the
    worker ran a cell before) are those of the cell; train and inference
    times of a reused worker exclude compilations that an earlier cell of
    the same shape already paid for.

    Measured on the loaded shared 2-core machine (load average 9-13): 20
    ``persistence`` forecast cells on Lorenz-63 (tiny task options), 2
    workers: a fresh worker per cell took 569 s of wall time and 129 s of
    worker CPU; reused workers took 147 s and 44 s (65 s and 33 s with the
    JAX compilation cache warm, see :mod:`solvers._config`); the cells'
    own work (building the data) is ~1.3 s of CPU each. The harness's
    own cost per cell on a reused worker (a cell that returns at once, 200
    cells on one worker): ~1.4 ms of worker CPU. Accuracy figures were
    bitwise equal in all three runs.
"""

from __future__ import annotations

import collections
import json
import os
import queue
import signal
import subprocess
import sys
import threading
import time
from dataclasses import dataclass
from datetime import datetime, timezone

from suite.cell import CellOutcome, CellSpec

__all__ = ["LocalExecutor", "WorkerPool", "CellTask", "CellResult", "worker_env", "function_path",
           "DEFAULT_CELLS_PER_WORKER"]

#: Cells a worker process runs before it is replaced: 0, no limit (see the module docstring).
DEFAULT_CELLS_PER_WORKER = 0

ONE_THREAD_ENV = {
    "OPENBLAS_NUM_THREADS": "1",
    "OMP_NUM_THREADS": "1",
    "MKL_NUM_THREADS": "1",
    "VECLIB_MAXIMUM_THREADS": "1",
    "NUMEXPR_NUM_THREADS": "1",
}
XLA_ONE_THREAD = "--xla_cpu_multi_thread_eigen=false intra_op_parallelism_threads=1"


def _now() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="milliseconds")


@dataclass(frozen=True)
class CellTask:
    """One cell to run: its key, spec and limits."""

    key: str
    spec: CellSpec
    budget_seconds: float | None = None
    memory_mb: int | None = None


@dataclass
class CellResult:
    """A finished cell as the runner records it."""

    key: str
    spec: CellSpec
    outcome: CellOutcome
    started: str | None
    finished: str
    attempts: int


def function_path(func) -> str:
    """``"module:qualname"`` of a cell function (strings pass through)."""
    if isinstance(func, str):
        if ":" not in func:
            raise ValueError(f"cell function must be 'module:callable', got {func!r}")
        return func
    module, qual = getattr(func, "__module__", None), getattr(func, "__qualname__", "")
    if not module or "<" in qual or module == "__main__":
        raise ValueError(f"cell function {func!r} must be importable by worker processes "
                         "(a module-level function of an importable module)")
    return f"{module}:{qual}"


def worker_env(base=None) -> dict:
    """Environment of a worker: one thread for BLAS, OpenMP and XLA (appended to ``XLA_FLAGS``)."""
    env = dict(os.environ if base is None else base)
    env.update(ONE_THREAD_ENV)
    flags = env.get("XLA_FLAGS", "")
    if "intra_op_parallelism_threads" not in flags:
        env["XLA_FLAGS"] = f"{flags} {XLA_ONE_THREAD}".strip()
    env["PYTHONUNBUFFERED"] = "1"
    return env


def _death_reason(code: int | None) -> str:
    if code is None:
        return "worker vanished"
    if code < 0:
        try:
            name = signal.Signals(-code).name
        except ValueError:
            name = f"signal {-code}"
        hint = " (out of memory?)" if -code == signal.SIGKILL else ""
        return f"worker killed by {name}{hint}"
    return f"worker exited with code {code} before reporting its cell"


class _Worker:
    def __init__(self, wid: int, cmd, env, config: dict, q: queue.Queue):
        self.wid = wid
        self.proc = subprocess.Popen(cmd, stdin=subprocess.PIPE, stdout=subprocess.PIPE, env=env,
                                     text=True, encoding="utf-8", bufsize=1)
        self.alive = True
        self.task: CellTask | None = None
        self.attempt = 0
        self.deadline: float | None = None
        self.started_at: float | None = None
        self.started_iso: str | None = None
        self.cells = 0
        self.spent = False
        self.config = config
        self.max_cells = int(config["max_cells"])
        self._send(json.dumps(config))
        threading.Thread(target=self._read, args=(q,), daemon=True).start()

    def _read(self, q: queue.Queue) -> None:
        for line in self.proc.stdout:
            try:
                q.put((self, json.loads(line)))
            except json.JSONDecodeError:
                continue
        q.put((self, None))

    def _send(self, line: str) -> bool:
        try:
            self.proc.stdin.write(line + "\n")
            self.proc.stdin.flush()
            return True
        except (BrokenPipeError, OSError):
            return False

    def assign(self, task: CellTask, attempt: int) -> None:
        self.task, self.attempt = task, attempt
        self.deadline = None
        self.started_at = time.monotonic()
        self.started_iso = None
        self.cells += 1
        self._send(json.dumps({"key": task.key, "spec": task.spec.canonical()}))

    @property
    def reusable(self) -> bool:
        return (self.alive and self.task is None and not self.spent
                and (self.max_cells <= 0 or self.cells < self.max_cells))

    def kill(self) -> None:
        if self.proc.poll() is None:
            self.proc.kill()
        self.proc.wait()
        self.alive = False
        self._close()

    def retire(self) -> None:
        self._close()
        try:
            self.proc.wait(timeout=30)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait()
        self.alive = False

    def _close(self) -> None:
        for fh in (self.proc.stdin,):
            try:
                fh.close()
            except (BrokenPipeError, OSError):
                pass


class WorkerPool:
    """Worker processes that outlive one :meth:`run`: the slots, their message queue and limits.

    :class:`LocalExecutor` makes one pool per run and closes it afterwards;
    the Dask executor keeps one per Dask worker process, so that its worker
    subprocess serves many Dask tasks. Workers are started with the first
    cell that needs them; a worker whose function or memory limit differs
    from the next run's is replaced.
    """

    def __init__(self, function: str, workers: int, cells_per_worker: int = 0, retries: int = 1,
                 grace: float | None = None, start_timeout: float = 300.0):
        self.function = function
        self.workers = max(1, int(workers))
        self.cells_per_worker = max(0, int(cells_per_worker))
        self.retries = max(0, int(retries))
        self.grace = grace
        self.start_timeout = float(start_timeout)
        self.q: queue.Queue = queue.Queue()
        self.slots: list[_Worker | None] = [None] * self.workers
        self.next_id = 0
        self.started = 0  # worker processes started over the pool's life

    def _grace(self, budget: float) -> float:
        return self.grace if self.grace is not None else max(2.0, 0.1 * budget)

    def kill(self) -> None:
        """Kill every worker at once."""
        for w in self.slots:
            if w is not None and w.alive:
                w.kill()
        self.slots = [None] * self.workers

    def close(self) -> None:
        """Let every idle worker finish and exit (stdin closed)."""
        for w in self.slots:
            if w is not None and w.alive:
                w.retire()
        self.slots = [None] * self.workers

    def run(self, tasks, on_result) -> None:
        """Run ``tasks``; call ``on_result(CellResult)`` in this thread, in completion order.

        On any exception every worker is killed before it propagates.
        """
        tasks = list(tasks)
        if not tasks:
            return
        try:
            self._run(tasks, on_result)
        except BaseException:
            self.kill()
            raise

    def _run(self, tasks, on_result) -> None:
        pending = collections.deque((t, 1) for t in tasks)
        env = worker_env()
        cmd = [sys.executable, "-m", "suite.executors._worker"]
        memory = {t.memory_mb for t in tasks}
        if len(memory) > 1:
            raise ValueError("all cells of one run must share one memory limit")
        config = {"function": self.function, "memory_mb": memory.pop(),
                  "max_cells": self.cells_per_worker, "sys_path": [p for p in sys.path if p]}
        slots = self.slots
        n_used = min(self.workers, len(tasks))
        while pending or any(w is not None and w.task is not None for w in slots):
            # hand pending cells to free slots
            for i in range(n_used):
                if not pending:
                    break
                w = slots[i]
                if w is not None and w.task is not None:
                    continue
                if w is None or not w.reusable or w.config != config:
                    if w is not None:
                        w.retire()
                    w = slots[i] = _Worker(self.next_id, cmd, env, config, self.q)
                    self.next_id += 1
                    self.started += 1
                task, attempt = pending.popleft()
                w.assign(task, attempt)
            # wait for a message or the nearest deadline
            now = time.monotonic()
            deadlines = [w.deadline if w.deadline is not None else w.started_at + self.start_timeout
                         for w in slots if w is not None and w.task is not None]
            wait = max(0.0, min(deadlines) - now) if deadlines else 1.0
            try:
                w, msg = self.q.get(timeout=min(wait, 5.0) + 0.01)
            except queue.Empty:
                w, msg = None, None
            if w is not None:
                self._handle(w, msg, pending, on_result)
            # enforce deadlines
            now = time.monotonic()
            for w in slots:
                if w is None or w.task is None:
                    continue
                if w.deadline is not None and now > w.deadline:
                    elapsed = now - w.started_run
                    task, attempt = w.task, w.attempt
                    w.task = None
                    w.kill()
                    budget = task.budget_seconds
                    on_result(CellResult(
                        task.key, task.spec,
                        CellOutcome("timeout", error=f"killed after {elapsed:.1f} s: over the budget "
                                                     f"of {budget:g} s per cell",
                                    info={"killed_after_seconds": elapsed}),
                        w.started_iso, _now(), attempt))
                elif w.deadline is None and now > w.started_at + self.start_timeout:
                    task, attempt = w.task, w.attempt
                    w.task = None
                    w.kill()
                    self._died(task, attempt, f"worker did not start within {self.start_timeout:g} s",
                               None, pending, on_result)

    def _handle(self, w: _Worker, msg, pending, on_result) -> None:
        if not w.alive and msg is not None:
            return  # a late line from a worker already killed
        if msg is None:  # the worker's output closed: it exited
            if w.task is None:
                w.alive = False
                return
            task, attempt, started = w.task, w.attempt, w.started_iso
            w.task = None
            try:
                code = w.proc.wait(timeout=10)
            except subprocess.TimeoutExpired:
                w.proc.kill()
                code = w.proc.wait()
            w.alive = False
            w._close()
            self._died(task, attempt, _death_reason(code), started, pending, on_result)
            return
        event = msg.get("event")
        if w.task is None or msg.get("key", w.task.key) != w.task.key:
            return
        if event == "start":
            budget = w.task.budget_seconds
            w.started_run = time.monotonic()
            w.started_iso = _now()
            w.deadline = None if budget is None else w.started_run + budget + self._grace(budget)
        elif event == "done":
            from suite.executors._worker import _ends_worker, outcome_from_dict
            task, attempt, started = w.task, w.attempt, w.started_iso
            w.task = None
            if _ends_worker(msg["outcome"]):
                w.spent = True  # the worker exits by itself after such a cell
            on_result(CellResult(task.key, task.spec, outcome_from_dict(msg["outcome"]), started, _now(),
                                 attempt))

    def _died(self, task, attempt, reason, started, pending, on_result) -> None:
        if attempt <= self.retries:
            pending.appendleft((task, attempt + 1))
            return
        tries = f"{attempt} attempt{'s' if attempt > 1 else ''}"
        on_result(CellResult(task.key, task.spec,
                             CellOutcome("failed", error=f"{reason} ({tries})"),
                             started, _now(), attempt))


class LocalExecutor:
    """Run cells in worker processes on this machine.

    Parameters
    ----------
    function : str or callable
        The cell function, ``spec -> CellOutcome``, importable by a worker
        (``"module:callable"``); default ``suite.execute:run_cell``.
    workers : int, optional
        Parallel workers (default: the number of CPUs).
    cells_per_worker : int
        Cells a worker runs before it is replaced: 0 (default) no limit,
        1 a fresh process for every cell.
    retries : int
        Extra attempts for a cell whose worker died.
    grace : float, optional
        Seconds past the budget before a worker is killed.
    start_timeout : float
        Seconds a worker may take to start and report a cell before it counts as dead.
    """

    name = "local"

    def __init__(self, function="suite.execute:run_cell", workers: int | None = None,
                 cells_per_worker: int = DEFAULT_CELLS_PER_WORKER, retries: int = 1,
                 grace: float | None = None, start_timeout: float = 300.0):
        self.function = function_path(function)
        self.workers = max(1, int(workers or os.cpu_count() or 1))
        if int(cells_per_worker) < 0:
            raise ValueError(f"cells per worker must be >= 0 (0: no limit), got {cells_per_worker}")
        self.cells_per_worker = int(cells_per_worker)
        self.retries = max(0, int(retries))
        self.grace = grace
        self.start_timeout = float(start_timeout)
        self.workers_started = 0

    def check(self) -> None:
        """Nothing to check before the store is opened (workers start with the run)."""

    def run(self, tasks, on_result) -> None:
        """Run ``tasks`` (a list of :class:`CellTask`); call ``on_result(CellResult)`` in this thread.

        Results arrive in completion order. On any exception (including
        KeyboardInterrupt) every worker is killed before it propagates.
        """
        tasks = list(tasks)
        if not tasks:
            return
        pool = WorkerPool(self.function, min(self.workers, len(tasks)), self.cells_per_worker,
                          self.retries, self.grace, self.start_timeout)
        try:
            pool.run(tasks, on_result)
        finally:
            self.workers_started += pool.started
        pool.close()
