"""``lyapbench report``: tables, figures, the solver on the same axes, and rank tests, into a folder."""

from __future__ import annotations

from suite.cli import UsageError
from suite.commands._common import positive_int



def register(sub) -> None:
    p = sub.add_parser(
        "report", help="write summary tables, figures and the solver ladder of a store into a folder",
        description="Write into DIR: summary.md and summary.tex (per system, task and data setting, one row "
                    "per learner: headline metric median, IQR and bootstrap CI over seeds, training and "
                    "inference time, speed-up at equal accuracy over the cheapest solver, failed cells), "
                    "figures as PNG and SVG (error against horizon, sparsity and noise curves, work-precision "
                    "plane, critical-difference diagrams), solver_ladder.csv, tables.parquet, tables.csv and "
                    "manifest.json. Files are replaced atomically.")
    p.add_argument("store", metavar="STORE", help="SQLite store written by `lyapbench run`")
    p.add_argument("--out", required=True, metavar="DIR", help="output folder (created if absent)")
    p.add_argument("--queries", type=positive_int, default=100, metavar="N",
                   help="rollouts over which training time is shared in the speed-up column (default 100)")
    p.add_argument("--ladder-starts", type=positive_int, default=3, metavar="K",
                   help="start states each solver is run from (default 3)")
    p.add_argument("--no-solvers", action="store_true", help="skip the solver ladder (no speed-up column)")
    p.set_defaults(func=run)


def run(args) -> int:
    from pathlib import Path

    from suite.report import check_out_dir, write_report

    if not Path(args.store).exists():
        raise UsageError(f"store {args.store!r} does not exist")
    check_out_dir(args.out)
    written = write_report(args.store, args.out, queries=args.queries, ladder=not args.no_solvers,
                           ladder_starts=args.ladder_starts)
    figs = sum(1 for n in written if n.endswith(".png"))
    print(f"wrote {len(written)} files ({figs} figures) to {args.out}; see {Path(args.out) / 'summary.md'}")
    return 0
