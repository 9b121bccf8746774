"""``lyapbench verify``: re-run the cells of a published table and compare the accuracy figures."""

from __future__ import annotations

import argparse

import math
import sys

from suite.cli import UsageError
from suite.commands._common import non_negative_int, positive_int




def _tolerance(text: str) -> float:
    try:
        v = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number >= 0, got {text!r}") from None
    if not math.isfinite(v) or v < 0:
        raise argparse.ArgumentTypeError(f"expected a finite number >= 0, got {text!r}")
    return v


def register(sub) -> None:
    from suite.verify import DEFAULT_ATOL, DEFAULT_RTOL

    p = sub.add_parser(
        "verify", help="re-run the cells of a published table and compare the accuracy figures",
        description="Rebuild every cell named in PUBLISHED (a table written by `lyapbench export`, or a "
                    "store) from its columns, check that its key equals the table's `cell` column, run it, "
                    "and compare each accuracy figure (same metric and horizon) within "
                    "|reproduced - published| <= atol + rtol*|published|, and each status. Timings and "
                    "other cost figures are never compared. Budgets, which the key hashes but the table "
                    "does not record, are taken from budget_seconds/budget_iterations columns when present, "
                    "else from the first of --budget-seconds, the shipped grids' budgets and the default "
                    "that reproduces the key (else --budget-seconds or 600 s). Prints one line per "
                    "mismatch and a summary line; exit 0 when all match, 1 on a mismatch, 2 on bad input.")
    p.add_argument("published", metavar="PUBLISHED", help="PUBLISHED.csv, PUBLISHED.parquet or a .sqlite store")
    p.add_argument("--store", default=None,
                   help="store to run the cells into, kept afterwards (an existing one is resumed); "
                        "default a temporary store")
    p.add_argument("--rtol", type=_tolerance, default=DEFAULT_RTOL,
                   help=f"relative tolerance (default {DEFAULT_RTOL:g})")
    p.add_argument("--atol", type=_tolerance, default=DEFAULT_ATOL,
                   help=f"absolute tolerance (default {DEFAULT_ATOL:g})")
    p.add_argument("--sample", type=positive_int, default=None, metavar="K",
                   help="verify a random sample of K cells (default all)")
    p.add_argument("--seed", type=non_negative_int, default=0, help="seed of the sample (default 0)")
    p.add_argument("--executor", choices=("local", "dask"), default="local",
                   help="local process pool (default) or a Dask cluster")
    p.add_argument("--workers", type=positive_int, default=None,
                   help="parallel workers (default: the number of CPUs)")
    p.add_argument("--scheduler", default=None, metavar="ADDRESS",
                   help="address of an existing Dask scheduler (dask executor only)")
    p.add_argument("--budget-seconds", type=_tolerance, default=None,
                   help="wall budget per cell where the table records none")
    p.add_argument("--budget-iterations", type=positive_int, default=None,
                   help="iteration budget per cell where the table records none")
    p.add_argument("--quiet", action="store_true", help="no progress output")
    p.add_argument("--json", action="store_true", help="print the summary and the mismatches as JSON")
    p.set_defaults(func=run)


def run(args) -> int:
    from suite.commands._common import print_json
    from suite.verify import verify_table

    if args.scheduler and args.executor != "dask":
        raise UsageError("--scheduler needs --executor dask")
    if args.budget_seconds is not None and args.budget_seconds <= 0:
        raise UsageError(f"--budget-seconds must be positive, got {args.budget_seconds:g}")
    result = verify_table(args.published, store=args.store, rtol=args.rtol, atol=args.atol,
                          sample=args.sample, seed=args.seed, executor=args.executor, workers=args.workers,
                          scheduler=args.scheduler, budget_seconds=args.budget_seconds,
                          budget_iterations=args.budget_iterations,
                          progress=False if (args.quiet or args.json) else None)
    if args.json:
        mism = result.mismatches.astype(object).where(result.mismatches.notna(), None)
        print_json({**result.summary(), "store": args.store,
                    "key_mismatch_cells": result.cells.loc[~result.cells["key_match"], "cell"].tolist(),
                    "mismatch_rows": mism.to_dict(orient="records")})
    else:
        for line in result.key_lines():
            print(line)
        for line in result.mismatch_lines():
            print(line)
        print(result.summary_line())
    return 0 if result.ok else 1
