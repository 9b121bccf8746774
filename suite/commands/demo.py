"""``lyapbench demo``: the built-in demo study (a fictional scenario), run, summarised and reported.

The grid is ``suite/grids/demo.toml`` (shipped with the package). Its store is
``<out>/demo.sqlite``: running the demo again resumes it and reuses every
finished cell. The tidy table goes to ``<out>/demo_results.csv``; the report
(:func:`suite.report.write_report`) to ``<out>``; a few plain sentences of
findings are printed, computed from the table.
"""

from __future__ import annotations

import os
import resource
import sys
import time
from pathlib import Path

from suite.cli import UsageError
from suite.commands._common import positive_int

__all__ = ["register", "run", "demo_grid_path", "findings", "SCENARIO"]

#: Printed before the run; the same text heads ``suite/grids/demo.toml``.
SCENARIO = (
    "FICTIONAL SCENARIO (invented for this demo): the made-up Kestrel Robotics lab steers a two-link arm "
    "(the double pendulum) and watches a convection cell (the Lorenz-63 flow). Its controller calls an ODE "
    "solver every cycle. Can a learned model fill gaps in a sparse sensor log (reconstruct), or replace the "
    "solver for short forecasts (forecast), with all of the samples or one in five?")

#: Cells a local worker process runs before it is replaced: the demo's cells are short, so
#: most of a fresh process's cost would be importing JAX; results do not depend on this.
_CELLS_PER_WORKER = 64


def demo_grid_path() -> Path:
    """The shipped demo grid file."""
    return Path(__file__).resolve().parent.parent / "grids" / "demo.toml"



def register(sub) -> None:
    p = sub.add_parser(
        "demo", help="run the built-in demo study and write its report",
        description="Run the built-in demo grid (suite/grids/demo.toml: a fictional lab's question on the "
                    "double pendulum and Lorenz-63 with persistence, spline, SINDy, an echo state network "
                    "and a physics-informed network, two data fractions, two seeds; small, stated neural "
                    "budgets), then write the tidy table and the report into --out and print a few findings. "
                    "The store <out>/demo.sqlite is resumed when the demo runs again.")
    p.add_argument("--out", default="results/demo", metavar="DIR",
                   help="output folder for the store, table and report (default results/demo)")
    p.add_argument("--workers", type=positive_int, default=None,
                   help="parallel workers (default: the number of CPUs, at most 2)")
    p.add_argument("--no-report", action="store_true",
                   help="skip the report (write only the table and the findings)")
    p.add_argument("--quiet", action="store_true", help="no progress output")
    p.set_defaults(func=run)


def _cpu_seconds() -> float:
    me = resource.getrusage(resource.RUSAGE_SELF)
    kids = resource.getrusage(resource.RUSAGE_CHILDREN)
    return me.ru_utime + me.ru_stime + kids.ru_utime + kids.ru_stime


def run(args) -> int:
    from suite.export import tidy_table, write_table
    from suite.grid import load_grid
    from suite.runner import run_grid

    out = Path(args.out)
    if out.exists() and not out.is_dir():
        raise UsageError(f"--out {args.out!r} exists and is not a folder")
    parent = out if out.exists() else out.parent if str(out.parent) else Path(".")
    if not parent.exists():
        try:
            out.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise UsageError(f"--out {args.out!r} cannot be created ({exc.strerror})") from None
    elif not os.access(parent, os.W_OK):
        raise UsageError(f"--out {args.out!r}: folder {str(parent)!r} is not writable")
    out.mkdir(parents=True, exist_ok=True)

    grid = load_grid(demo_grid_path())
    workers = args.workers or max(1, min(2, os.cpu_count() or 1))
    print(SCENARIO)
    print(f"Running {grid.n_cells} cells ({', '.join(grid.systems)}; {', '.join(grid.learners)}) "
          f"on {workers} worker{'s' if workers > 1 else ''}; store {out / 'demo.sqlite'}")
    sys.stdout.flush()
    w0, c0 = time.monotonic(), _cpu_seconds()
    summary = run_grid(grid, out / "demo.sqlite", workers=workers, cells_per_worker=_CELLS_PER_WORKER,
                       progress=False if args.quiet else None)
    run_wall, run_cpu = time.monotonic() - w0, _cpu_seconds() - c0
    print(summary.line())

    table = tidy_table(out / "demo.sqlite")
    csv = write_table(table, out / "demo_results.csv")
    report_note = _write_report(out, args.no_report, fresh=summary.ran > 0)
    total_wall, total_cpu = time.monotonic() - w0, _cpu_seconds() - c0

    print()
    print("Findings (fictional scenario, real computations):")
    for sentence in findings(table):
        print(f"  - {sentence}")
    print()
    print(f"Table: {csv}")
    print(report_note)
    print(f"Time: cells {run_wall:.0f} s wall, {run_cpu:.0f} s CPU; everything {total_wall:.0f} s wall, "
          f"{total_cpu:.0f} s CPU ({summary.ran} cells run, {summary.skipped} reused from the store).")
    return 0


def _write_report(out: Path, skip: bool, fresh: bool) -> str:
    if skip:
        return "Report: skipped (--no-report); `lyapbench report` makes it from the store."
    summary_md = out / "summary.md"
    if not fresh and summary_md.exists() and summary_md.stat().st_mtime >= (out / "demo.sqlite").stat().st_mtime:
        return f"Report: {summary_md} (up to date: no cell ran since it was written)"
    try:
        from suite.report import write_report
    except ImportError:
        return "Report: not available in this installation; the table above holds every figure."
    made = write_report(out / "demo.sqlite", out)
    md = [p for name, p in made.items() if str(name).endswith(".md")]
    where = md[0] if md else out
    return f"Report: {where} ({len([n for n in made if not str(n).startswith('_')])} files in {out})"


# ------------------------------------------------------------------------------ findings
def _forecast_horizon(rows) -> float | None:
    """The forecast horizon (time units) of the cells in ``rows``, from their task options."""
    import json

    from suite.tasks import TASK_OPTION_DEFAULTS

    try:
        opts = json.loads(rows["task_options"].iloc[0]) if isinstance(rows["task_options"].iloc[0], str) else {}
    except ValueError:
        opts = {}
    return float(opts.get("horizon_lyapunov_times", TASK_OPTION_DEFAULTS["forecast"]["horizon_lyapunov_times"]))


def _unit_is_lyapunov(rows) -> bool:
    from suite.systems import get_system

    try:
        return get_system(str(rows["system"].iloc[0])).lyapunov_time is not None
    except ValueError:
        return False


def _label(learner: str, physics: str, multi: set) -> str:
    return f"{learner} ({physics} physics)" if learner in multi else learner


def findings(table) -> list[str]:
    """A few plain sentences about a demo-shaped tidy table (forecast and reconstruct cells)."""
    out = []
    cells = table.drop_duplicates("cell")
    counts = cells["status"].value_counts().to_dict()
    bad = {k: v for k, v in counts.items() if k not in ("ok", "not_applicable")}
    out.append(f"{counts.get('ok', 0)} cells ran, {counts.get('not_applicable', 0)} did not apply to their "
               f"learner, " + (", ".join(f"{v} {k}" for k, v in bad.items()) if bad else "none failed") + ".")
    ok = table[(table["status"] == "ok")]
    multi = {ln for ln, g in ok.groupby("learner") if g["physics"].nunique() > 1}
    acc = ok[ok["kind"] == "accuracy"]

    vpt = acc[acc["metric"] == "valid_prediction_time"].copy()
    if len(vpt):
        vpt["who"] = [_label(a, b, multi) for a, b in zip(vpt["learner"], vpt["physics"])]
        for system, g in vpt.groupby("system", sort=False):
            med = g.groupby("who")["value"].median().sort_values(ascending=False)
            best, best_v = med.index[0], med.iloc[0]
            base = med.get("persistence")
            tail = f"; persistence manages {base:.2f}" if base is not None and best != "persistence" else ""
            unit = "Lyapunov times" if _unit_is_lyapunov(g) else "time units"
            horizon = _forecast_horizon(g)
            full = (f" (the whole {horizon:g}-unit horizon: it never crossed the error threshold)"
                    if horizon and best_v >= 0.99 * horizon else "")
            out.append(f"Forecasting {system}, {best} stays valid longest: median {best_v:.2f} {unit} "
                       f"over seeds and fractions{full}{tail}.")
            fr = g.groupby(["who", "fraction"])["value"].median().unstack("fraction")
            if fr.shape[1] >= 2:
                hi, lo = max(fr.columns), min(fr.columns)
                drop = (fr[hi] - fr[lo]).dropna()
                if len(drop) and drop.max() <= 0.05 * max(float(fr[hi].max()), 1e-12):
                    out.append(f"On {system}, keeping {lo:g} of the samples instead of {hi:g} hardly "
                               f"changes any learner's valid prediction time.")
                elif len(drop):
                    worst = drop.idxmax()
                    out.append(f"On {system}, keeping {lo:g} of the samples instead of {hi:g} costs "
                               f"{worst} the most: {fr.loc[worst, hi]:.2f} -> {fr.loc[worst, lo]:.2f}.")
    rl2 = acc[acc["metric"] == "relative_l2"].copy()
    if len(rl2):
        rl2["who"] = [_label(a, b, multi) for a, b in zip(rl2["learner"], rl2["physics"])]
        for system, g in rl2.groupby("system", sort=False):
            med = g.groupby("who")["value"].median().sort_values()
            parts = ", ".join(f"{w} {v:.2g}" for w, v in med.items())
            out.append(f"Filling gaps in the {system} log (median relative L2 error, lower is better): {parts}.")
    cost = ok[(ok["kind"] == "cost") & (ok["metric"] == "train_seconds")]
    if len(cost):
        med = cost.groupby("learner")["value"].median().sort_values()
        out.append(f"Median training time per cell: {', '.join(f'{w} {v:.2g} s' for w, v in med.items())} "
                   f"(on a shared machine these are rough).")
    if len(vpt) and len(rl2):
        out.append("For the fictional lab: read the report's speed-up columns before swapping out the "
                   "solver; with these small budgets, a learner that forecasts well still has to beat the "
                   "solver's cost at equal accuracy.")
    return out
