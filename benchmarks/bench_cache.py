"""The on-disk cache (suite/cache.py): one representative cell before and after.

The cell — SINDy forecasting Lorenz-63 with the default task options — is
run by :func:`suite.execute.run_cell` in a fresh Python process each time
(as the runner's workers do when they start), and timed from outside
(wall seconds of the process, and its CPU seconds from
``resource.getrusage(RUSAGE_CHILDREN)``), plus the cell's own
``total_seconds``:

* before: ``LYAPBENCH_CACHE=off`` — every reference trajectory and the
  attractor scale are integrated again;
* after: a cache folder warmed by one untimed run — the same cell reads them.

The metric rows of both must be identical (the cache returns the arrays it
stored, bit for bit). Runs alternate (off, on, off, on, ...) so both see
the same load; medians are compared.

Usage: ``python benchmarks/bench_cache.py [--quick]``.
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import argparse  # noqa: E402
import json  # noqa: E402
import resource  # noqa: E402
import statistics  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _common import ROOT, machine, write_results  # noqa: E402

CELL = {"system": "lorenz63", "task": "forecast", "learner": "sindy", "seed": 0}

CHILD = """
import json, sys
from suite.cell import CellSpec
from suite.execute import run_cell
out = run_cell(CellSpec(**json.loads(sys.argv[1])))
print(json.dumps({"status": out.status, "total_seconds": out.cost.get("total_seconds"),
                  "data_seconds": out.cost.get("data_seconds"),
                  "metrics": [[m.metric, m.value, m.horizon] for m in out.metrics], "error": out.error}))
"""


def one(cache: str) -> dict:
    env = dict(os.environ, LYAPBENCH_CACHE=cache)
    r0 = resource.getrusage(resource.RUSAGE_CHILDREN)
    w0 = time.perf_counter()
    p = subprocess.run([sys.executable, "-c", CHILD, json.dumps(CELL)], env=env, cwd=ROOT, capture_output=True,
                       text=True, timeout=1800)
    wall = time.perf_counter() - w0
    r1 = resource.getrusage(resource.RUSAGE_CHILDREN)
    if p.returncode != 0:
        raise SystemExit(f"cell process failed: {p.stderr[-2000:]}")
    out = json.loads(p.stdout.strip().splitlines()[-1])
    if out["status"] != "ok":
        raise SystemExit(f"cell did not finish ok: {out}")
    out["wall_s"] = wall
    out["cpu_s"] = (r1.ru_utime + r1.ru_stime) - (r0.ru_utime + r0.ru_stime)
    return out


def main(quick: bool) -> None:
    info = machine()
    repeats = 2 if quick else 3
    runs = {"off": [], "warm": []}
    with tempfile.TemporaryDirectory() as tmp:
        cache = os.path.join(tmp, "cache")
        first = one(cache)  # fills the cache (a cold-cache run: compute and write)
        print("cold:", {k: first[k] for k in ("wall_s", "cpu_s", "total_seconds")}, flush=True)
        for _ in range(repeats):
            runs["off"].append(one("off"))
            runs["warm"].append(one(cache))
            print({k: {m: v[-1][m] for m in ("wall_s", "cpu_s", "total_seconds")} for k, v in runs.items()},
                  flush=True)
    same = all(r["metrics"] == runs["off"][0]["metrics"] for r in runs["off"] + runs["warm"] + [first])
    table = []
    med = {k: {m: statistics.median(r[m] for r in v) for m in ("wall_s", "cpu_s", "total_seconds", "data_seconds")}
           for k, v in runs.items()}
    for k, label in (("off", "before (cache off)"), ("warm", "after (warm cache)")):
        table.append({"run": label, **med[k]})
    table.append({"run": "ratio before/after", **{m: med["off"][m] / med["warm"][m] for m in med["off"]}})
    table.append({"run": "cold cache (compute + write), once", "wall_s": first["wall_s"], "cpu_s": first["cpu_s"],
                  "total_seconds": first["total_seconds"], "data_seconds": first["data_seconds"]})
    notes = (f"Cell {CELL} (default task options), each run a fresh process; medians of {repeats} alternating "
             f"runs. Metric rows identical with and without the cache: {same}. wall_s/cpu_s: the whole process "
             "(Python and JAX start-up included); total_seconds: the cell as run_cell measures it; data_seconds: "
             "building the data (reference integrations, attractor scale).")
    write_results("cache", {"machine": info, "cell": CELL, "runs": runs, "cold": first, "identical_metrics": same,
                            "ratios": table[2]}, table, notes, quick)


if __name__ == "__main__":
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="two repeats")
    main(ap.parse_args().quick)
