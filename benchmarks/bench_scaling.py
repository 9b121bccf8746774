"""Scaling: run time of a grid against its number of cells, fit time against training-set size.

1. ``run_grid`` (local executor, 2 workers) on grids of 10 and 100 trivial
   cells (1,000 with ``--full``), each into a fresh store, the on-disk cache
   warm (see ``bench_harness.py`` for the cell).
2. Every registered learner's ``fit`` on Lorenz-63 training sets of 1e2,
   1e3, 1e4 and 1e5 samples (spacing 0.01; quick run: 1e2 and 1e3), with a
   small budget for the iterative learners (``Budget(max_iterations=20,
   max_seconds=cap)``). The echo state network counts its iterations as
   reservoir steps, i.e. training samples, so it gets only the time cap:
   with 20 iterations it would fit 20 samples whatever the set's size. A
   learner whose fit takes longer than the cap is not
   tried on larger sets. A learner that cannot work without equations
   (``NotApplicableError`` on plain data) is listed as such.

For each series the exponent of a power law ``seconds ~ size^k`` is fitted
by least squares on log-log axes (``numpy.polyfit``); an exponent near 1 is
linear scaling. Fits that the budget cut short measure the budget, not the
learner: they are marked.

Usage: ``python benchmarks/bench_scaling.py [--quick] [--full]``.
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import argparse  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _common import lorenz63_samples, machine, write_results  # noqa: E402

import numpy as np  # noqa: E402

DT = 0.01


def slope(x, y) -> float:
    x, y = np.asarray(x, float), np.asarray(y, float)
    if len(x) < 2:
        return float("nan")
    return float(np.polyfit(np.log10(x), np.log10(y), 1)[0])


def lorenz_samples(n: int):
    return lorenz63_samples(n, DT, seed=1, tol=1e-9)


def grid_scaling(sizes, table, tmp):
    from bench_harness import TRIVIAL_OPTIONS, in_process, make_grid, run

    os.environ["LYAPBENCH_CACHE"] = os.path.join(tmp, "cache")
    in_process(make_grid(1, TRIVIAL_OPTIONS))  # warm the cache
    walls = []
    for n in sizes:
        wall, _ = run(make_grid(n, TRIVIAL_OPTIONS), "local", 2, tmp)
        walls.append(wall)
        table.append({"series": "run_grid local x2, trivial cells", "size": n, "seconds": wall,
                      "s_per_item": wall / n})
        print(table[-1], flush=True)
    return slope(sizes, walls)


# learners whose Budget.max_iterations counts training samples fed, not optimiser steps
ONE_PASS = {"esn"}


def fit_scaling(sizes, cap, table):
    from surrogates import Budget, NotApplicableError, TrainingData
    from surrogates.registry import available_learners, make_learner

    t, y, system = lorenz_samples(max(sizes))
    scale = y.std(axis=0)
    exps = {}
    for name in available_learners():
        xs, ts = [], []
        for n in sizes:
            data = TrainingData.from_arrays(t[:n], y[:n], state_names=system.state_names, scale=scale)
            learner = make_learner(name)
            budget = Budget(max_iterations=None if name in ONE_PASS else 20, max_seconds=cap)
            w0 = time.perf_counter()
            try:
                learner.fit(data, budget=budget, seed=0)
            except NotApplicableError as exc:
                table.append({"series": f"fit {name}", "size": n, "note": f"not applicable: {exc}"[:90]})
                break
            except Exception as exc:  # a benchmark records failures, it does not hide them
                table.append({"series": f"fit {name}", "size": n, "note": f"{type(exc).__name__}: {exc}"[:90]})
                break
            sec = time.perf_counter() - w0
            xs.append(n)
            ts.append(sec)
            table.append({"series": f"fit {name}", "size": n, "seconds": sec, "s_per_item": sec / n,
                          "note": "at the time cap" if sec >= 0.9 * cap else ""})
            print(table[-1], flush=True)
            if sec > cap:
                break
        exps[name] = {"exponent": slope(xs, ts), "sizes": xs, "seconds": ts}
    return exps


def main(quick: bool, full: bool) -> None:
    info = machine()
    table = []
    grid_sizes = [5, 20] if quick else [10, 100] + ([1000] if full else [])
    fit_sizes = [100, 1000] if quick else [100, 1000, 10_000, 100_000]
    cap = 10.0 if quick else 30.0
    with tempfile.TemporaryDirectory() as tmp:
        run_exp = grid_scaling(grid_sizes, table, tmp)
    fit_exps = fit_scaling(fit_sizes, cap, table)
    for row in table:
        if row["series"].startswith("fit "):
            row["exponent"] = fit_exps[row["series"][4:]]["exponent"] if row is not None else None
    summary = {"run_grid_exponent": run_exp, "fit_exponents": {k: v["exponent"] for k, v in fit_exps.items()}}
    notes = ("Exponent = least-squares slope of log10(seconds) on log10(size). run_grid: " f"{run_exp:.2f}. "
             "Fit exponents: " + ", ".join(f"{k} {v['exponent']:.2f}" for k, v in fit_exps.items()) +
             f". Iterative learners get Budget(max_iterations=20, max_seconds={cap:g}): their times measure "
             "20 iterations on the data, not training to convergence; " + ", ".join(sorted(ONE_PASS)) +
             " (one pass over the data) gets only the time cap.")
    write_results("scaling", {"machine": info, "summary": summary, "fits": fit_exps}, table, notes, quick)


if __name__ == "__main__":
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="small sizes only (smoke run)")
    ap.add_argument("--full", action="store_true", help="include the 1,000-cell grid")
    a = ap.parse_args()
    main(a.quick, a.full)
