"""The local executor: each cell in its own fresh worker process, with a time budget.

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
    not retried.
Dead workers
    A worker that exits without reporting its cell (killed, segfault, killed
    by the kernel for memory) is replaced and the cell retried ``retries``
    times (default 1); then it is recorded ``failed`` with the reason.
Start-up cost
    A worker pays an interpreter start plus ``import suite`` (JAX) before
    its cell's clock starts. Measured on the shared 2-core development
    machine while other jobs kept its load average at 10-13: 3.5-3.8 s of
    CPU and 15-18 s of wall time per worker start (a trivial cell itself
    took < 0.1 ms). Eight trivial cells on one worker slot took 142 s with a
    fresh worker per cell (17.8 s per cell) and 20 s with
    ``cells_per_worker=8`` (2.6 s per cell, one start amortised). On an idle
    machine the overhead is about the CPU figure, a few seconds per cell:
    small against learners trained for minutes, dominant for cheap
    baselines. ``cells_per_worker > 1`` reuses a worker for that many cells
    (isolation is then per worker; a killed worker takes only its current
    cell with it); the default, 1, isolates every cell.
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

__all__ = ["LocalExecutor", "CellTask", "CellResult", "worker_env", "function_path"]

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
        return self.alive and self.task is None and self.cells < self.max_cells

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
        Cells a worker runs before it is replaced (1: every cell isolated).
    retries : int
        Extra attempts for a cell whose worker died.
    grace : float, optional
        Seconds past the budget before a worker is killed.
    start_timeout : float
        Seconds a worker may take to start and report a cell before it counts as dead.
    """

    name = "local"

    def __init__(self, function="suite.execute:run_cell", workers: int | None = None,
                 cells_per_worker: int = 1, retries: int = 1, grace: float | None = None,
                 start_timeout: float = 300.0):
        self.function = function_path(function)
        self.workers = max(1, int(workers or os.cpu_count() or 1))
        self.cells_per_worker = max(1, int(cells_per_worker))
        self.retries = max(0, int(retries))
        self.grace = grace
        self.start_timeout = float(start_timeout)

    def check(self) -> None:
        """Nothing to check before the store is opened (workers start with the run)."""

    def _grace(self, budget: float) -> float:
        return self.grace if self.grace is not None else max(2.0, 0.1 * budget)

    def run(self, tasks, on_result) -> None:
        """Run ``tasks`` (a list of :class:`CellTask`); call ``on_result(CellResult)`` in this thread.

        Results arrive in completion order. On any exception (including
        KeyboardInterrupt) every worker is killed before it propagates.
        """
        tasks = list(tasks)
        if not tasks:
            return
        pending = collections.deque((t, 1) for t in tasks)
        q: queue.Queue = queue.Queue()
        env = worker_env()
        cmd = [sys.executable, "-m", "suite.executors._worker"]
        memory = {t.memory_mb for t in tasks}
        if len(memory) > 1:
            raise ValueError("all cells of one run must share one memory limit")
        config = {"function": self.function, "memory_mb": memory.pop(),
                  "max_cells": self.cells_per_worker, "sys_path": [p for p in sys.path if p]}
        slots: list[_Worker | None] = [None] * min(self.workers, len(tasks))
        next_id = 0
        try:
            while pending or any(w is not None and w.task is not None for w in slots):
                # hand pending cells to free slots
                for i, w in enumerate(slots):
                    if not pending:
                        break
                    if w is not None and w.task is not None:
                        continue
                    if w is None or not w.reusable:
                        if w is not None:
                            w.retire()
                        w = slots[i] = _Worker(next_id, cmd, env, config, q)
                        next_id += 1
                    task, attempt = pending.popleft()
                    w.assign(task, attempt)
                # wait for a message or the nearest deadline
                now = time.monotonic()
                deadlines = [w.deadline if w.deadline is not None else w.started_at + self.start_timeout
                             for w in slots if w is not None and w.task is not None]
                wait = max(0.0, min(deadlines) - now) if deadlines else 1.0
                try:
                    w, msg = q.get(timeout=min(wait, 5.0) + 0.01)
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
        except BaseException:
            for w in slots:
                if w is not None and w.alive:
                    w.kill()
            raise
        for w in slots:
            if w is not None and w.alive:
                w.retire()

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
            from suite.executors._worker import outcome_from_dict
            task, attempt, started = w.task, w.attempt, w.started_iso
            w.task = None
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
