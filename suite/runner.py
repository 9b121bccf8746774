"""Run a grid: validate, open the store, run the missing cells, record each one.

Order of work, so that a bad grid can never touch a store:

1. load and validate the grid in full (:func:`suite.grid.load_grid`);
2. build the executor and check it (its arguments, the cell function's
   import, a remote Dask scheduler's reachability; starts no worker);
3. open or create the store, taking its run lock (:class:`suite.store.Store`);
4. skip every cell whose key is already in the store (resume is the
   default: re-running a grid runs only what is missing);
5. run the remaining cells and record each result in this process, one
   transaction per cell, as it arrives (the run's manifest is written with
   the first result, so a run that finishes no cell leaves the store as it
   was, apart from creating it).

A cell's key (:meth:`suite.cell.CellSpec.key`) hashes its spec with the
package version, so a new release re-runs everything into the same store
without mixing keys.
"""

from __future__ import annotations

import sys
import time
from dataclasses import dataclass, field
from pathlib import Path

from suite.executors import CellTask, make_executor
from suite.grid import Grid, load_grid
from suite.manifest import build_manifest
from suite.store import Store

__all__ = ["run_grid", "RunSummary", "default_store_path", "DEFAULT_CELL_FUNCTION"]

DEFAULT_CELL_FUNCTION = "suite.execute:run_cell"


def default_store_path(grid: Grid) -> Path:
    """``results/<grid name>.sqlite`` (relative to the current folder)."""
    return Path("results") / f"{grid.name}.sqlite"


@dataclass
class RunSummary:
    """What a run did."""

    store: str
    total: int
    skipped: int
    ran: int
    statuses: dict = field(default_factory=dict)
    wall_seconds: float = 0.0
    manifest_id: int | None = None

    def line(self) -> str:
        counts = ", ".join(f"{k} {v}" for k, v in sorted(self.statuses.items())) or "none"
        return (f"{self.ran} cells run ({counts}), {self.skipped} already in the store, "
                f"{self.total} in the grid; store {self.store}; {self.wall_seconds:.1f} s")


class _Progress:
    """tqdm on a terminal, plain lines otherwise, or nothing."""

    def __init__(self, total: int, mode, stream=None):
        self.stream = stream or sys.stderr
        self.total = total
        self.done = self.not_ok = 0  # not ok: failed, diverged or timeout (not applicable is a reason)
        self.t0 = time.monotonic()
        if mode is None:
            mode = "bar" if getattr(self.stream, "isatty", lambda: False)() else "lines"
        elif mode is True:
            mode = "lines"
        self.mode = mode or "off"
        self.bar = None
        if self.mode == "bar" and total:
            from tqdm import tqdm
            self.bar = tqdm(total=total, unit="cell", file=self.stream, dynamic_ncols=True)
            self._postfix()

    def _postfix(self):
        self.bar.set_postfix(done=self.done, not_ok=self.not_ok, remaining=self.total - self.done,
                             refresh=True)

    def update(self, result) -> None:
        self.done += 1
        if result.outcome.status not in ("ok", "not_applicable"):
            self.not_ok += 1
        if self.bar is not None:
            self.bar.update(1)
            self._postfix()
        elif self.mode == "lines":
            elapsed = time.monotonic() - self.t0
            remaining = self.total - self.done
            eta = elapsed / self.done * remaining
            s = result.spec
            err = f" {result.outcome.error.splitlines()[0][:120]}" if result.outcome.error else ""
            print(f"[{self.done}/{self.total}] {result.outcome.status:<14} {s.system} {s.task} {s.learner} "
                  f"fraction={s.fraction:g} noise={s.noise:g} physics={s.physics} seed={s.seed}{err} | "
                  f"done {self.done}, not ok {self.not_ok}, remaining {remaining}, "
                  f"elapsed {elapsed:.0f} s, eta {eta:.0f} s", file=self.stream, flush=True)

    def close(self) -> None:
        if self.bar is not None:
            self.bar.close()


def _check_function(target: str) -> None:
    """Import the cell function here first: a typo is one error, not a failed worker per cell."""
    from suite.executors._worker import _load_function

    try:
        func = _load_function(target)
    except (ImportError, AttributeError, ValueError) as exc:
        raise ValueError(f"cell function {target!r} cannot be imported ({type(exc).__name__}: {exc})") from None
    if not callable(func):
        raise ValueError(f"cell function {target!r} is not callable")


def run_grid(grid, store=None, *, executor: str = "local", workers: int | None = None,
             scheduler: str | None = None, retries: int = 1, cells_per_worker: int | None = None,
             function=DEFAULT_CELL_FUNCTION, grace: float | None = None, progress=None) -> RunSummary:
    """Run every cell of ``grid`` that ``store`` does not hold yet.

    Parameters
    ----------
    grid : Grid or path
        A validated grid or a grid file.
    store : path, optional
        The SQLite store (default ``results/<grid name>.sqlite``); created if absent.
    executor : {"local", "dask"}
    workers : int, optional
        Parallel workers (default: the number of CPUs).
    scheduler : str, optional
        Dask scheduler address (dask executor only).
    retries : int
        Extra attempts for a cell whose worker died.
    cells_per_worker : int, optional
        Cells a worker process runs before it is replaced: 0 (the default,
        None) no limit, 1 a fresh process for every cell. A cell that times
        out, dies or fails for memory always takes its worker down (see
        :mod:`suite.executors.local`).
    function : str or callable
        The cell function ``CellSpec -> CellOutcome``, importable as ``"module:callable"``.
    grace : float, optional
        Seconds past a cell's budget before its worker is killed.
    progress : None, bool or "bar"
        None: a tqdm bar on a terminal, plain lines otherwise; False: silent.

    Returns
    -------
    RunSummary
    """
    t0 = time.monotonic()
    if not isinstance(grid, Grid):
        grid = load_grid(grid)
    if int(retries) < 0:
        raise ValueError(f"retries must be >= 0, got {retries}")
    if workers is not None and int(workers) < 1:
        raise ValueError(f"workers must be >= 1, got {workers}")
    ex = make_executor(executor, function, workers=workers, scheduler=scheduler, retries=retries,
                       cells_per_worker=cells_per_worker, grace=grace)
    cells_per_worker = ex.cells_per_worker
    _check_function(ex.function)
    ex.check()
    cells = grid.cells()
    keyed = [(spec.key(), spec) for spec in cells]
    store_path = Path(store) if store is not None else default_store_path(grid)

    with Store.open(store_path, create=True, lock=True) as st:
        finished = st.finished_keys()
        todo = [(k, s) for k, s in keyed if k not in finished]
        summary = RunSummary(store=str(store_path), total=len(keyed), skipped=len(keyed) - len(todo), ran=0)
        if not todo:
            summary.wall_seconds = time.monotonic() - t0
            return summary
        manifest = build_manifest(grid, executor=ex.name, workers=ex.workers,
                                  scheduler=scheduler, retries=int(retries),
                                  cells_per_worker=int(cells_per_worker), cell_function=ex.function,
                                  n_pending=len(todo))
        tasks = [CellTask(k, s, s.budget_seconds, grid.memory_mb_per_cell) for k, s in todo]
        bar = _Progress(len(tasks), progress)

        def on_result(r):
            if summary.manifest_id is None:  # written with the first result: a run that
                summary.manifest_id = st.add_manifest(manifest)  # finishes no cell adds nothing
            st.record(r.key, r.spec, r.outcome, started=r.started, finished=r.finished,
                      attempts=r.attempts, manifest_id=summary.manifest_id)
            summary.ran += 1
            summary.statuses[r.outcome.status] = summary.statuses.get(r.outcome.status, 0) + 1
            bar.update(r)

        try:
            ex.run(tasks, on_result)
        finally:
            bar.close()
    summary.wall_seconds = time.monotonic() - t0
    return summary
