"""``lyapbench run``: run the cells of a grid file into a store."""

from __future__ import annotations

import sys
from pathlib import Path

from suite.cli import UsageError
from suite.commands._common import non_negative_int, positive_int




def register(sub) -> None:
    p = sub.add_parser(
        "run", help="run the cells of a grid file into a store",
        description="Validate GRID.toml in full, then run every cell the store does not hold yet "
                    "(an existing store is resumed: finished cells are skipped). Cells run in worker "
                    "processes, reused across cells, with the grid's time budget; a failing, diverging or "
                    "over-budget learner becomes a row with its status, and the sweep goes on (a cell "
                    "that times out, dies or runs out of memory takes its worker down; a fresh one continues).")
    p.add_argument("grid", metavar="GRID.toml", help="grid file")
    p.add_argument("--store", default=None, help="SQLite store (default results/<grid name>.sqlite)")
    p.add_argument("--executor", choices=("local", "dask"), default="local",
                   help="local process pool (default) or a Dask cluster")
    p.add_argument("--workers", type=positive_int, default=None,
                   help="parallel workers (default: the number of CPUs)")
    p.add_argument("--scheduler", default=None, metavar="ADDRESS",
                   help="address of an existing Dask scheduler (dask executor; default: start a local cluster)")
    p.add_argument("--resume", action="store_true",
                   help="require the store to exist already (resuming is what happens anyway when it does)")
    p.add_argument("--retries", type=non_negative_int, default=1,
                   help="extra attempts for a cell whose worker process died (default 1)")
    p.add_argument("--cells-per-worker", type=non_negative_int, default=0,
                   help="cells a worker process runs before it is replaced (default 0: no limit; "
                        "1: every cell in a fresh process)")
    p.add_argument("--grace", type=float, default=None,
                   help="seconds past the budget before a cell's worker is killed (default max(2, 10%% of it))")
    p.add_argument("--cell-function", default=None, metavar="MODULE:CALLABLE",
                   help="function run for each cell (default suite.execute:run_cell)")
    p.add_argument("--quiet", action="store_true", help="no progress output")
    p.add_argument("--json", action="store_true", help="print a JSON summary")
    p.set_defaults(func=run)


def run(args) -> int:
    from suite.commands._common import print_json
    from suite.grid import load_grid
    from suite.runner import DEFAULT_CELL_FUNCTION, default_store_path, run_grid

    grid = load_grid(args.grid)
    store = Path(args.store) if args.store else default_store_path(grid)
    if args.resume and not store.exists():
        raise UsageError(f"--resume: store {str(store)!r} does not exist")
    if args.scheduler and args.executor != "dask":
        raise UsageError("--scheduler needs --executor dask")
    if args.grace is not None and not args.grace >= 0:
        raise UsageError(f"--grace must be >= 0, got {args.grace}")
    function = args.cell_function or DEFAULT_CELL_FUNCTION
    if ":" not in function:
        raise UsageError(f"--cell-function must be MODULE:CALLABLE, got {function!r}")
    summary = run_grid(grid, store, executor=args.executor, workers=args.workers,
                       scheduler=args.scheduler, retries=args.retries,
                       cells_per_worker=args.cells_per_worker, function=function, grace=args.grace,
                       progress=False if args.quiet else None)
    if args.json:
        print_json(vars(summary))
    else:
        print(summary.line(), file=sys.stderr if args.quiet else sys.stdout)
    return 0
