"""Harness overhead: seconds per cell that the runner adds around the cell's own work.

Options: ``--cells N``, ``--heavy-cells N`` (0 skips the speed-up part),
``--configs local:1 dask:2 ...``.

A grid of trivial cells (persistence forecasting Lorenz-63 with very short
task options, one cell per seed) is run

* in this process, calling :func:`suite.execute.run_cell` in a loop — the
  cells' own work, the baseline;
* with :func:`suite.runner.run_grid` on the ``local`` executor (1 and 2
  worker processes) and on ``dask`` (a local cluster, 1 and 2 workers),
  each into a fresh store.

Overhead per cell = (run wall seconds − baseline wall seconds) / cells for
one worker. Then a grid of 20 non-trivial cells (the same learner with
longer options and the on-disk cache off, so that every cell integrates its
references) is run on ``local`` and on ``dask`` with 1 and with 2 workers:
the speed-up, and the local executor's speed-up on the same cells as the
yardstick of what the machine allows.

The on-disk cache (:mod:`suite.cache`) is pointed at a fresh folder and
warmed by the baseline loop for the trivial grid, so every configuration
sees the same warm cache.

Usage: ``python benchmarks/bench_harness.py [--quick]``.
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import argparse  # noqa: E402
import resource  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _common import machine, write_results  # noqa: E402

TRIVIAL_OPTIONS = {"train_lyapunov_times": 1.0, "n_starts": 1, "history_steps": 2, "horizon_lyapunov_times": 0.5,
                   "curve_points": 5}
NONTRIVIAL_OPTIONS = {"train_lyapunov_times": 20.0, "n_starts": 10, "history_steps": 20,
                      "horizon_lyapunov_times": 12.0, "curve_points": 25}


def grid_text(n_cells: int, options: dict, name: str = "bench") -> str:
    opts = "\n".join(f"{k} = {v!r}" for k, v in options.items())
    return (f'[grid]\nsystems = ["lorenz63"]\ntasks = ["forecast"]\nlearners = ["persistence"]\n'
            f"seeds = {list(range(n_cells))}\n\n[budget]\nseconds_per_cell = 600\n\n[task.forecast]\n{opts}\n")


def make_grid(n_cells: int, options: dict):
    from suite.grid import parse_grid

    return parse_grid(grid_text(n_cells, options), label="<bench>", name=f"bench{n_cells}")


def cpu_now() -> float:
    """CPU seconds of this process plus every finished descendant (worker processes, Dask's)."""
    c = resource.getrusage(resource.RUSAGE_CHILDREN)
    return time.process_time() + c.ru_utime + c.ru_stime


def in_process(grid) -> tuple[float, list]:
    from suite.execute import run_cell

    t0 = time.perf_counter()
    outs = [run_cell(spec) for spec in grid.cells()]
    return time.perf_counter() - t0, outs


def run(grid, executor: str, workers: int, tmp: str) -> tuple[float, object]:
    from suite.runner import run_grid

    store = Path(tmp) / f"{executor}-{workers}-{time.monotonic_ns()}.sqlite"
    t0 = time.perf_counter()
    summary = run_grid(grid, store, executor=executor, workers=workers, progress=False)
    wall = time.perf_counter() - t0
    if summary.ran != grid.n_cells or set(summary.statuses) != {"ok"}:
        raise SystemExit(f"{executor}/{workers}: unexpected outcome {summary.line()}")
    return wall, summary


def main(quick: bool, cells: int | None, heavy_cells: int | None, configs, out: str = "harness",
         heavy_executors=("local", "dask")) -> None:
    n_trivial = cells or (20 if quick else 200)
    n_heavy = 4 if quick else 20
    n_heavy = n_heavy if heavy_cells is None else heavy_cells
    info = machine()
    table = []
    with tempfile.TemporaryDirectory() as tmp:
        os.environ["LYAPBENCH_CACHE"] = os.path.join(tmp, "cache")
        grid = make_grid(n_trivial, TRIVIAL_OPTIONS)
        in_process(grid)  # warm the cache (every seed's references) and this process's imports
        c0 = cpu_now()
        base, outs = in_process(grid)
        base_cpu = cpu_now() - c0
        assert all(o.status == "ok" for o in outs), [o.error for o in outs if o.status != "ok"][:3]
        cell_s = base / n_trivial
        table.append({"grid": f"{n_trivial} trivial", "how": "in-process loop (baseline)", "workers": 1,
                      "wall_s": base, "cpu_s": base_cpu, "s_per_cell": cell_s, "overhead_s_per_cell": 0.0,
                      "overhead_cpu_s_per_cell": 0.0})
        print(table[-1], flush=True)
        for executor, workers in configs:
            c0 = cpu_now()
            wall, _ = run(grid, executor, workers, tmp)
            cpu = cpu_now() - c0
            over = (wall * workers - base) / n_trivial  # worker-seconds beyond the cells' own work
            table.append({"grid": f"{n_trivial} trivial", "how": f"run_grid {executor}", "workers": workers,
                          "wall_s": wall, "cpu_s": cpu, "s_per_cell": wall / n_trivial, "overhead_s_per_cell": over,
                          # Dask's worker processes are not reaped by this process: their CPU is not counted
                          "overhead_cpu_s_per_cell": (cpu - base_cpu) / n_trivial if executor == "local" else None})
            print(table[-1], flush=True)

        os.environ["LYAPBENCH_CACHE"] = "off"  # every heavy cell integrates its own references
        heavy = make_grid(max(n_heavy, 1), NONTRIVIAL_OPTIONS)
        walls = {}
        for executor in (heavy_executors if n_heavy else ()):
            for workers in (1, 2):
                walls[executor, workers], _ = run(heavy, executor, workers, tmp)
                table.append({"grid": f"{n_heavy} non-trivial, cache off", "how": f"run_grid {executor}",
                              "workers": workers, "wall_s": walls[executor, workers],
                              "s_per_cell": walls[executor, workers] / n_heavy})
                print(table[-1], flush=True)
    ovh = {r["how"] + f" x{r['workers']}": r["overhead_s_per_cell"] for r in table if "overhead_s_per_cell" in r
           and r["how"] != "in-process loop (baseline)"}
    ovh_cpu = {r["how"] + f" x{r['workers']}": r["overhead_cpu_s_per_cell"] for r in table
               if r.get("overhead_cpu_s_per_cell") is not None and r["how"] != "in-process loop (baseline)"}
    def speedup(executor):
        return walls[executor, 1] / walls[executor, 2] if (executor, 2) in walls else float("nan")

    speed, local_speed = speedup("dask"), speedup("local")
    targets = {"overhead_le_0.2_s_per_cell": {k: v <= 0.2 for k, v in ovh.items()}, "overhead_s_per_cell": ovh,
               "overhead_cpu_s_per_cell": ovh_cpu,
               "dask_2_vs_1_worker_speedup": speed, "dask_speedup_ge_1.7": speed >= 1.7,
               "local_2_vs_1_worker_speedup_same_cells": local_speed}
    notes = ("Overhead per cell = (wall x workers - in-process baseline wall) / cells: worker-seconds the harness "
             "spends beyond the cells' own work (process start, imports, JAX initialisation, store writes, "
             "scheduling). Trivial cell: persistence, forecast, options " + repr(TRIVIAL_OPTIONS) + ". "
             "Non-trivial cell: options " + repr(NONTRIVIAL_OPTIONS) + ", cache off. "
             "overhead_cpu_s_per_cell: the same from CPU seconds of this process and its reaped children (robust to "
             "other jobs' load; local executor only, Dask's workers are not reaped by this process). "
             f"Dask 2 vs 1 worker: {speed:.2f}x; the local executor on the same cells: {local_speed:.2f}x. "
             "With the load average above the core count, a "
             "second worker gets only part of a second core.")
    write_results(out, {"machine": info, "targets": targets}, table, notes, quick)


if __name__ == "__main__":
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="20 trivial and 4 non-trivial cells (smoke run)")
    ap.add_argument("--cells", type=int, help="number of trivial cells (default 200, quick 20)")
    ap.add_argument("--heavy-cells", type=int, help="number of non-trivial cells for the Dask speed-up (0: skip)")
    ap.add_argument("--configs", nargs="+", default=["local:1", "local:2", "dask:1", "dask:2"],
                    help="executor:workers pairs to time on the trivial grid")
    ap.add_argument("--heavy-executors", nargs="+", default=["local", "dask"], choices=["local", "dask"],
                    help="executors timed with 1 and 2 workers on the non-trivial grid (default: both)")
    ap.add_argument("--out", default="harness", help="result name: results/perf/<out>.json (default harness)")
    a = ap.parse_args()
    main(a.quick, a.cells, a.heavy_cells, [(c.split(":")[0], int(c.split(":")[1])) for c in a.configs], a.out,
         tuple(a.heavy_executors))
