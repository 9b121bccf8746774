"""``write_report``: a store's tables, figures, solver ladder and manifest, written to a folder.

Every file is first written into a temporary folder beside the output folder
and then moved onto its final name with :func:`os.replace`, so that a reader
never sees a half-written file and a failed report leaves the previous one
in place.
"""

from __future__ import annotations

import json
import os
import shutil
import tempfile
from datetime import datetime, timezone
from pathlib import Path

import numpy as np
import pandas as pd

from suite.export import tidy_table, write_table
from suite.store import Store
from suite.tasks import HEADLINE_METRICS, TASK_OPTION_DEFAULTS

from . import figures as F
from .tables import (METRIC_LABELS, build_tables, cell_frame, forecast_error_of_cells, rank_tests, table_latex,
                     table_markdown)
from .workplane import cell_speedups, forecast_ladders, problem_key, problem_slug

__all__ = ["write_report", "check_out_dir", "FIGURE_PREFIXES"]

#: File-name stems of the report's figures (an earlier report's figures with these stems are replaced)
FIGURE_PREFIXES = ("error_vs_horizon_", "sparsity_", "noise_", "work_precision_", "critical_difference_")


def check_out_dir(out_dir) -> Path:
    """The output folder, checked before any work: it (or its parent) must be a writable folder."""
    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise ValueError(f"output {str(out)!r} exists and is not a folder")
    probe = out if out.exists() else out.parent if str(out.parent) else Path(".")
    if not probe.is_dir():
        raise ValueError(f"folder {str(probe)!r} for the report does not exist")
    if not os.access(probe, os.W_OK | os.X_OK):
        raise ValueError(f"folder {str(probe)!r} is not writable")
    return out


def _slug(s: str) -> str:
    return "".join(c if c.isalnum() or c in "-_." else "_" for c in s).strip("_")[:80]


def _save(fig, tmp: Path, stem: str, made: dict) -> None:
    import matplotlib.pyplot as plt

    for ext in ("png", "svg"):
        fig.savefig(tmp / f"{stem}.{ext}", bbox_inches="tight")  # outside legends and notes included
        made[f"{stem}.{ext}"] = tmp / f"{stem}.{ext}"
    plt.close(fig)


def _threshold(task_options: str) -> float:
    try:
        return float(json.loads(task_options).get("vpt_threshold", TASK_OPTION_DEFAULTS["forecast"]["vpt_threshold"]))
    except (ValueError, AttributeError):
        return float(TASK_OPTION_DEFAULTS["forecast"]["vpt_threshold"])


def write_report(store_path, out_dir, *, queries: int = 100, ladder: bool | pd.DataFrame = True,
                 ladder_starts: int = 3, methods=None, ladders=None, figures: bool = True,
                 keep_figures: bool = False) -> dict:
    """Write the report of the store at ``store_path`` into ``out_dir``.

    Parameters
    ----------
    queries : int
        Rollouts over which training time is shared in the "speed-up incl.
        training" column.
    ladder : bool or DataFrame
        Run the solver ladders (True), skip them (False), or use the given
        ladder (columns of :func:`suite.report.workplane.forecast_ladders`).
    ladder_starts : int
        Start states of each forecast problem the solvers are run from.
    methods, ladders
        Solver methods and accuracy rungs (defaults
        :data:`~suite.report.workplane.REPORT_METHODS`, ``REPORT_LADDERS``).
    keep_figures : bool
        Also return the Figure objects under ``"_figures"`` (for tests).

    Returns
    -------
    dict mapping each written file name to its path (and ``"_figures"``).

    Raises
    ------
    FileNotFoundError, suite.store.StoreError, ValueError
        Missing store, not a store, output folder not writable.
    """
    from suite import __version__

    queries = int(queries)
    if queries < 1:
        raise ValueError(f"queries must be a positive integer, got {queries}")
    out = check_out_dir(out_dir)
    with Store.open(store_path, readonly=True) as st:
        tidy = tidy_table(st)
        manifests = st.manifests()
    cells = cell_frame(tidy)

    notes_ladder: list[str] = []
    if isinstance(ladder, pd.DataFrame):
        lad = ladder
    elif ladder and not cells.empty:
        lad, notes_ladder = forecast_ladders(cells, n_starts=ladder_starts, methods=methods, ladders=ladders)
    else:
        lad = pd.DataFrame(columns=["problem", "system", "method", "kind", "accuracy", "error", "seconds",
                                    "seconds_per_lyapunov_time", "nfev", "status", "n_starts", "seed", "horizon"])
    speed = cell_speedups(cells, lad, queries=queries) if not cells.empty else None
    tables = build_tables(cells, speed, queries=queries)
    tests = rank_tests(cells) if not cells.empty else {}

    tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}.", dir=out.parent if not out.exists() else out))
    made: dict = {}
    figs_kept: dict = {}
    try:
        fig_lines = _figures(cells, tidy, lad, tests, tmp, made, figs_kept, keep_figures) if figures else \
            ["No figures: figures were switched off."]
        write_table(tidy, tmp / "tables.parquet")
        write_table(tidy, tmp / "tables.csv")
        made["tables.parquet"], made["tables.csv"] = tmp / "tables.parquet", tmp / "tables.csv"
        lad.to_csv(tmp / "solver_ladder.csv", index=False)
        made["solver_ladder.csv"] = tmp / "solver_ladder.csv"
        now = datetime.now(timezone.utc).isoformat(timespec="seconds")
        manifest = {"report_created": now, "lyapbench_version": __version__,
                    "store": str(Path(store_path).resolve()), "queries": queries,
                    "ladder_starts": ladder_starts, "n_cells": int(len(cells)),
                    "status_counts": {k: int(v) for k, v in cells["status"].value_counts().items()}
                    if len(cells) else {},
                    "store_manifests": manifests}
        (tmp / "manifest.json").write_text(json.dumps(manifest, indent=2, default=str))
        made["manifest.json"] = tmp / "manifest.json"
        md, tex = _summary(store_path, now, __version__, cells, tables, tests, lad, speed, notes_ladder,
                           fig_lines, queries, ladder_starts)
        (tmp / "summary.md").write_text(md)
        (tmp / "summary.tex").write_text(tex)
        made["summary.md"], made["summary.tex"] = tmp / "summary.md", tmp / "summary.tex"
        out.mkdir(exist_ok=True)
        final = {}
        for name, p in made.items():
            os.replace(p, out / name)
            final[name] = out / name
        for ext in ("png", "svg"):  # figures of an earlier report that this one did not redraw
            for old in out.glob(f"*.{ext}"):
                if old.name not in final and old.name.startswith(FIGURE_PREFIXES):
                    old.unlink(missing_ok=True)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    if keep_figures:
        final["_figures"] = figs_kept
    return final


# ------------------------------------------------------------------ figures
def _figures(cells, tidy, lad, tests, tmp, made, kept, keep) -> list[str]:
    import matplotlib.pyplot as plt

    lines = []

    def save(fig, stem, why):
        if keep:
            kept[stem] = fig
        _save(fig, tmp, stem, made)  # closes it; a kept Figure object stays usable for inspection
        lines.append(f"- `{stem}.png` / `.svg` — {why}")

    if cells.empty:
        return ["No figures: the store holds no cells."]
    ok = cells[cells["status"] == "ok"]
    learners = sorted(cells["learner"].unique())  # the global order: a learner keeps its colour in every figure

    # error against horizon, per forecast problem, at the densest clean setting
    fc = ok[ok["task"] == "forecast"]
    if fc.empty:
        lines.append("- error against horizon: not drawn (no successful forecast cell).")
    for (system, sp, to), g in fc.groupby(["system", "system_params", "task_options"]):
        base = g[(g["fraction"] == g["fraction"].max()) & (g["noise"] == g["noise"].min())]
        curve = tidy[tidy["cell"].isin(base["cell"]) & (tidy["metric"] == "nrmse") & tidy["horizon"].notna()]
        curve = curve.merge(base[["cell", "learner", "physics"]], on="cell", suffixes=("_raw", ""))
        if curve.empty:
            lines.append(f"- error against horizon of {system}: not drawn (no nrmse curve rows).")
            continue
        if curve["physics"].nunique() > 1:
            curve["learner"] = curve["learner"] + " [" + curve["physics"] + "]"
        sub = f"fraction {base['fraction'].iloc[0]:g}, noise {base['noise'].iloc[0]:g}"
        fig = F.error_vs_horizon(curve[["learner", "seed", "horizon", "value"]], system,
                                 threshold=_threshold(to), subtitle=sub,
                                 learner_order=[n for n in _ordered(curve["learner"], learners)])
        save(fig, f"error_vs_horizon_{_slug(problem_slug(problem_key(system, sp, to)))}",
             f"forecast error against horizon, {system} ({sub})")

    # sparsity and noise curves
    for (system, task), g in ok.groupby(["system", "task"]):
        metric = HEADLINE_METRICS.get(task, "")
        g = g[np.isfinite(g["headline"].astype(float))]
        for axis, other, pick in (("fraction", "noise", "min"), ("noise", "fraction", "max")):
            level = getattr(g[other], pick)() if len(g) else np.nan
            sel = g[g[other] == level]
            n_levels = sel[axis].nunique()
            what = "sparsity curve" if axis == "fraction" else "noise curve"
            if n_levels < 2:
                lines.append(f"- {what} of {system} · {task}: not drawn (the store has {n_levels} "
                             f"{'fraction' if axis == 'fraction' else 'noise level'}{'s' if n_levels != 1 else ''}"
                             f" at {other} {level:g}; it needs at least 2).")
                continue
            if sel["physics"].nunique() > 1:
                sel = sel.assign(learner=sel["learner"] + " [" + sel["physics"] + "]")
            fig = F.sweep_curve(sel[["learner", "seed", axis, "headline"]], system, task, metric, axis,
                                subtitle=f"{other} {level:g}",
                                levels=cells[(cells["system"] == system) & (cells["task"] == task)
                                             & (cells[other] == level)][axis].unique(),
                                learner_order=_ordered(sel["learner"], learners))
            save(fig, f"{'sparsity' if axis == 'fraction' else 'noise'}_{_slug(system)}_{task}",
                 f"{METRIC_LABELS.get(metric, metric)} against {'data fraction' if axis == 'fraction' else 'noise level'}, "
                 f"{system} · {task}")

    # work-precision plane
    pts = forecast_error_of_cells(cells)
    if lad is None or lad.empty:
        if not fc.empty:
            lines.append("- work–precision plane: not drawn (no solver ladder was run).")
    else:
        for problem, lg in lad.groupby("problem"):
            p = pts[[problem_key(a, b, c) == problem for a, b, c in
                     zip(pts["system"], pts["system_params"], pts["task_options"])]]
            p = p.assign(setting=[f"fraction {a:g}, noise {b:g}" + (f", {c}" if p["physics"].nunique() > 1 else "")
                                  for a, b, c in zip(p["fraction"], p["noise"], p["physics"])])
            system = str(lg["system"].iloc[0])
            fig = F.work_precision(lg, p, f"{system}: work–precision over {float(lg['horizon'].iloc[0]):.3g} "
                                   f"Lyapunov times", learner_order=_ordered(p["learner"], learners))
            save(fig, f"work_precision_{_slug(problem_slug(problem))}",
                 f"error against cost, solvers ({', '.join(lg['method'].unique())}) as lines, "
                 f"learners as points (one per cell), {problem}")

    # critical-difference diagrams
    if not tests:
        lines.append("- critical-difference diagram: not drawn (fewer than two learners with results in a task).")
    for name, test in tests.items():
        if test.n_blocks < 2:
            lines.append(f"- critical-difference diagram ({name}): not drawn (only {test.n_blocks} block; "
                         "a rank test needs at least 2 systems or settings).")
            continue
        fig = F.critical_difference(test, f"Learners ranked over {name}: {test.n_blocks} blocks "
                                    "(system × setting" + (" × task)" if name == "all tasks" else ")"))
        save(fig, f"critical_difference_{_slug(name)}", f"critical-difference diagram, {name}")
    if not keep:
        plt.close("all")
    return lines


def _ordered(names, global_order) -> list[str]:
    """Every learner of the store in one order (absent ones are skipped when drawn, keeping each
    learner's colour the same in every figure), then labels that are not plain learner names."""
    present = list(dict.fromkeys(names))
    return list(global_order) + sorted(n for n in present if n not in global_order)


# ------------------------------------------------------------------ summary
def _summary(store_path, now, version, cells, tables, tests, lad, speed, notes_ladder, fig_lines, queries,
             ladder_starts) -> tuple[str, str]:
    md = [f"# lyapbench report", "",
          f"Store `{store_path}`, {len(cells)} cells; report written {now} by lyapbench {version}.", ""]
    tex = [r"\documentclass{article}", r"\usepackage{booktabs}", r"\usepackage[margin=2cm,landscape]{geometry}",
           r"\begin{document}", r"\section*{lyapbench report}",
           _tx(f"Store {store_path}, {len(cells)} cells; report written {now} by lyapbench {version}.")]
    if len(cells):
        counts = cells["status"].value_counts()
        md.append("Cells by status: " + ", ".join(f"{k} {v}" for k, v in counts.items()) + ".")
        md.append("")
    md += ["How to read the tables: the headline metric is the median over seeds with the inter-quartile "
           "range in brackets, and a 95 % bootstrap confidence interval of the median (over seeds; for the "
           "valid prediction time over seeds × start states). Times are medians over seeds: training in "
           "seconds, inference in seconds per trajectory per Lyapunov time (forecast: timed after a first "
           "rollout, so compilation is excluded as for the solvers; a call under 50 ms: the shortest of 5). "
           "Speed-up at equal accuracy "
           "(forecast only): the time the cheapest solver rung that is at least as accurate (time-averaged "
           f"normalised error over the same horizon) needs, divided by the learner's inference time; "
           f"\"incl. training\" shares the training time over {queries} queries. Bold: best in its column.", ""]
    for t in tables:
        md += [f"## {t.title}", "",
               f"Headline: {METRIC_LABELS.get(t.metric, t.metric)}, "
               f"{'higher' if t.higher_is_better else 'lower'} is better.", "", table_markdown(t), ""]
        if t.notes:
            md += [f"- {n}" for n in t.notes] + [""]
        tex.append(table_latex(t))
    # the solver on the same axes
    md += ["## The solver on the same axes", ""]
    if lad is not None and len(lad):
        md.append(f"Solvers were run from the first {ladder_starts} start states of each forecast problem "
                  "(data seed of the lowest seed; rollout at the sampling step) over the forecast horizon; "
                  "the ladder is in `solver_ladder.csv`. Every rung (accuracy: rtol for adaptive methods, step "
                  "size in time units for fixed-step ones; error: time-averaged normalised RMSE; cost: seconds "
                  "per trajectory per Lyapunov time, compilation excluded):")
        md.append("")
        md.append("| problem | method | accuracy | error | s per LT |")
        md.append("|---|---|---|---|---|")
        for r in lad.sort_values(["problem", "method", "accuracy"]).itertuples():
            md.append(f"| {r.problem} | {r.method} | {r.accuracy:.3g} | {r.error:.3g} | "
                      f"{r.seconds_per_lyapunov_time:.3g} |")
        md.append("")
        if speed is not None and len(speed) and not speed["solver_more_accurate"].all():
            md.append("- Some learners are more accurate than every solver rung; their speed-up uses the cheapest "
                      "rung of all (the ladder needs coarser rungs to say more).")
            md.append("")
    else:
        md.append("No solver ladder (no forecast cells, or ladders switched off).")
        md.append("")
    md += [f"- {n}" for n in notes_ladder] + ([""] if notes_ladder else [])
    # are the differences real?
    md += ["## Are the differences real?", ""]
    if not tests:
        md.append("No rank test: fewer than two learners with results.")
    for name, test in tests.items():
        md.append(f"- **{name}** (blocks: system × fraction × noise × physics"
                  + (" × task" if name == "all tasks" else "") + f"; a learner without a result in a block ranks "
                  f"last there): {test.summary()}")
    md.append("")
    tex.append(r"\section*{Are the differences real?}")
    tex.append(r"\begin{itemize}")
    tex += [r"\item " + _tx(f"{name}: {test.summary()}") for name, test in tests.items()]
    if not tests:
        tex.append(r"\item " + _tx("(no rank test)"))
    tex.append(r"\end{itemize}")
    md += ["## Figures", ""] + fig_lines + [""]
    tex += [r"\section*{Figures}", r"\begin{itemize}"]
    tex += [r"\item " + _tx(line.lstrip("- ").replace("`", "")) for line in fig_lines]
    tex += [r"\end{itemize}", r"\end{document}"]
    return "\n".join(md) + "\n", "\n".join(tex) + "\n"


def _tx(s: str) -> str:
    from .tables import _tex

    return _tex(s)
