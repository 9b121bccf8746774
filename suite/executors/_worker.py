"""The worker process that runs cells: ``python -m suite.executors._worker``.

Protocol (JSON lines; the parent is :class:`suite.executors.local.LocalExecutor`):

* stdin, first line: ``{"function": "module:callable", "memory_mb": int|null,
  "max_cells": int, "sys_path": [...]}``;
* stdin, then one line per cell: ``{"key": ..., "spec": {...}}``;
* protocol output (the process's original stdout; ``sys.stdout`` and fd 1 are
  pointed at stderr so that a learner's prints cannot corrupt it):
  ``{"event": "ready", "pid": ...}`` once the cell function is imported,
  ``{"event": "start", "key": ...}`` and ``{"event": "done", "key": ...,
  "outcome": {...}}`` per cell.

The worker exits after ``max_cells`` cells (``0``: no limit; it then runs
until its stdin closes), after a cell that ended ``timeout`` or failed for
memory (such a cell may leave threads or memory behind, so a fresh worker
takes the next cell), or at once (``os._exit``) when its stdin closes while
a cell runs: a parent killed by SIGKILL leaves no orphan computing on.

Reuse and isolation
    A worker that runs several cells keeps what makes the second cell cheap:
    the imported modules and JAX's compiled functions (the speed-up). Before
    each cell it restores what a cell could change for the next: the
    environment variables, the working folder, numpy's floating-point error
    settings, and the global numpy and Python random generators (reseeded
    from a fixed value; :func:`suite.execute.run_cell` seeds them from the
    cell's spec again before ``fit``), and it collects garbage (the objects
    of the start-up imports are frozen with :func:`gc.freeze`, so that a full
    collection costs microseconds instead of ~0.15 s of CPU with JAX loaded). A cell's
    accuracy figures therefore do not depend on whether its worker ran other
    cells first (tested: ``tests/harness/test_executors.py``).

Per-cell peak memory
    On Linux the worker resets the process's peak resident set before each
    cell (``"5"`` written to ``/proc/self/clear_refs``) and reads ``VmHWM``
    from ``/proc/self/status`` after it: the cell's own peak, even in a
    reused worker. It overwrites ``cost["peak_memory_mb"]`` with that figure
    and sets ``cost["peak_memory_per_cell"] = 1``. Where that is unavailable
    the figure is ``ru_maxrss``, the peak of the whole process so far,
    marked ``cost["peak_memory_per_cell"] = 0`` ("process peak"). It also
    sets ``cost["worker_reused"]``: 1 when the worker ran a cell before this
    one, else 0.

The memory limit (``resource.RLIMIT_AS``) is set after the imports, so it
bounds the cell, not the start-up; it limits *address space*, which for a
process that has used JAX includes ~1.5 GB reserved at start-up (measured),
so give a few GB. A ``MemoryError`` becomes status ``failed`` with an error
starting ``memory:``.
"""

from __future__ import annotations

import gc
import importlib
import json
import math
import os
import random
import queue
import sys
import threading
import time
import traceback

_busy = threading.Event()


def _load_function(target: str):
    module, _, name = target.partition(":")
    if not module or not name:
        raise ValueError(f"cell function must be 'module:callable', got {target!r}")
    obj = importlib.import_module(module)
    for part in name.split("."):
        obj = getattr(obj, part)
    return obj


def outcome_to_dict(outcome) -> dict:
    """A JSON-ready dict of a :class:`suite.cell.CellOutcome`."""
    return {
        "status": outcome.status,
        "metrics": [[m.metric, _num(m.value), None if m.horizon is None else _num(m.horizon)]
                    for m in outcome.metrics],
        "cost": {str(k): _jsonable(v) for k, v in (outcome.cost or {}).items()},
        "error": str(outcome.error or ""),
        "info": {str(k): _jsonable(v) for k, v in (outcome.info or {}).items()},
    }


def outcome_from_dict(d: dict):
    from suite.cell import CellOutcome, MetricRow
    return CellOutcome(status=d["status"],
                       metrics=[MetricRow(m, float(v), None if h is None else float(h))
                                for m, v, h in d.get("metrics", [])],
                       cost=dict(d.get("cost", {})), error=d.get("error", ""), info=dict(d.get("info", {})))


def _num(v) -> float:
    try:
        return float(v)
    except (TypeError, ValueError):
        return math.nan


def _jsonable(v):
    if hasattr(v, "item") and callable(v.item) and getattr(v, "ndim", 1) == 0:
        v = v.item()
    if isinstance(v, (str, int, float, bool)) or v is None:
        return v
    if isinstance(v, dict):
        return {str(k): _jsonable(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_jsonable(x) for x in v]
    if hasattr(v, "tolist"):
        return _jsonable(v.tolist())
    return str(v)


def _stdin_reader(q: queue.Queue) -> None:
    for line in sys.stdin:
        q.put(line)
    if _busy.is_set():  # the parent is gone while a cell runs: stop now
        os._exit(70)
    q.put(None)


_CLEAR_REFS = "/proc/self/clear_refs"
_STATUS = "/proc/self/status"


def reset_peak_memory() -> bool:
    """Reset this process's peak resident set (Linux); False where that is not possible."""
    try:
        with open(_CLEAR_REFS, "w") as fh:
            fh.write("5")
        return True
    except OSError:
        return False


def _vm_hwm_mb() -> float | None:
    try:
        with open(_STATUS) as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return float(line.split()[1]) / 1024.0  # kB
    except (OSError, ValueError, IndexError):
        return None
    return None


def _process_peak_mb() -> float:
    import resource
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    return rss / (1024.0 * 1024.0) if sys.platform == "darwin" else rss / 1024.0


def cell_peak_memory_mb(was_reset: bool) -> tuple[float, bool]:
    """``(peak MB, per_cell)``: ``VmHWM`` after a reset, else the process's ``ru_maxrss``."""
    if was_reset:
        hwm = _vm_hwm_mb()
        if hwm is not None:
            return hwm, True
    return _process_peak_mb(), False


class _State:
    """What a cell could change for the next cell in the same worker, restored before each cell."""

    def __init__(self):
        self.environ = dict(os.environ)
        self.cwd = os.getcwd()
        self.np_err = None
        np = sys.modules.get("numpy")
        if np is not None:
            self.np_err = np.geterr()

    def restore(self) -> None:
        if dict(os.environ) != self.environ:
            os.environ.clear()
            os.environ.update(self.environ)
        try:
            if os.getcwd() != self.cwd:
                os.chdir(self.cwd)
        except OSError:
            os.chdir(self.cwd)
        np = sys.modules.get("numpy")
        if np is not None:
            if self.np_err is not None:
                np.seterr(**self.np_err)
            np.random.seed(0)
        random.seed(0)
        gc.collect()


def _ends_worker(out: dict) -> bool:
    """A cell after which the worker should not run another one."""
    return out["status"] == "timeout" or str(out.get("error", "")).startswith("memory:")


def _run_one(func, spec_dict: dict, memory_mb) -> dict:
    from suite.cell import CellOutcome, CellSpec
    try:
        spec = CellSpec(**spec_dict)
        outcome = func(spec)
        if not isinstance(outcome, CellOutcome):
            return {"status": "failed", "metrics": [], "cost": {}, "info": {},
                    "error": f"harness: cell function returned {type(outcome).__name__}, not CellOutcome"}
        d = outcome_to_dict(outcome)
        if d["status"] == "failed" and "MemoryError" in d["error"] and not d["error"].startswith("memory:"):
            d["error"] = f"memory: {d['error']}"
        return d
    except MemoryError as exc:
        limit = f"limit {memory_mb} MB" if memory_mb else "no limit set"
        return {"status": "failed", "metrics": [], "cost": {}, "info": {},
                "error": f"memory: MemoryError ({limit}) {exc}".strip()}
    except Exception as exc:  # the cell function is meant never to raise; record what it did
        tb = traceback.extract_tb(exc.__traceback__)
        where = f" at {tb[-1].filename}:{tb[-1].lineno}" if tb else ""
        return {"status": "failed", "metrics": [], "cost": {}, "info": {},
                "error": f"harness: {type(exc).__name__}: {exc}{where}"}


def main() -> int:
    proto = os.fdopen(os.dup(1), "w", buffering=1, encoding="utf-8")
    os.dup2(2, 1)
    sys.stdout = sys.stderr

    def send(obj):
        proto.write(json.dumps(obj) + "\n")
        proto.flush()

    q: queue.Queue = queue.Queue()
    threading.Thread(target=_stdin_reader, args=(q,), daemon=True).start()
    first = q.get()
    if first is None:
        return 0
    config = json.loads(first)
    for p in config.get("sys_path", []):
        if p not in sys.path and os.path.isdir(p):
            sys.path.append(p)
    func = _load_function(config["function"])
    memory_mb = config.get("memory_mb")
    if memory_mb:
        import resource
        limit = int(memory_mb) * 1024 * 1024
        _, hard = resource.getrlimit(resource.RLIMIT_AS)
        if hard != resource.RLIM_INFINITY:
            limit = min(limit, hard)
        resource.setrlimit(resource.RLIMIT_AS, (limit, hard))
    gc.collect()
    gc.freeze()  # the imported modules: permanent, so the collection between cells skips them
    state = _State()
    send({"event": "ready", "pid": os.getpid()})
    max_cells = int(config.get("max_cells", 1))
    done = 0
    while max_cells <= 0 or done < max_cells:
        line = q.get()
        if line is None:
            break
        task = json.loads(line)
        _busy.set()
        if done:
            state.restore()
        was_reset = reset_peak_memory()
        send({"event": "start", "key": task["key"]})
        t0 = time.perf_counter()
        out = _run_one(func, task["spec"], memory_mb)
        wall = time.perf_counter() - t0
        peak, per_cell = cell_peak_memory_mb(was_reset)
        out["cost"]["peak_memory_mb"] = peak
        out["cost"]["peak_memory_per_cell"] = int(per_cell)
        out["cost"]["worker_reused"] = int(done > 0)
        out["info"]["worker_pid"] = os.getpid()
        out["info"]["cell_wall_seconds"] = wall
        send({"event": "done", "key": task["key"], "outcome": out})
        _busy.clear()
        done += 1
        if _ends_worker(out):
            break
    return 0


if __name__ == "__main__":
    sys.exit(main())
