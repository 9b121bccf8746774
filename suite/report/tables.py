"""Summary tables of a store: one row per learner, per system, task and data setting.

Each row gives the headline metric of the task (:data:`suite.tasks.HEADLINE_METRICS`)
as median and inter-quartile range over seeds, a bootstrap confidence interval
of the median (over seeds, and over seeds × start states for the valid
prediction time), median training and inference times, the speed-up at equal
accuracy over the cheapest solver rung (forecast cells), and the counts of
cells that failed, diverged, timed out or were not applicable. The best value
of each comparable column is marked (bold). Under every table, plain-language
notes say where a result is weak: fewer than one Lyapunov time of valid
prediction, a speed-up below one, a single seed, failed cells, confidence
intervals that overlap the best learner's.

References
----------
B. Efron and R. J. Tibshirani, *An Introduction to the Bootstrap*, Chapman & Hall (1993).
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from suite.stats import bootstrap_ci, friedman_nemenyi
from suite.tasks import HEADLINE_METRICS, HIGHER_IS_BETTER

__all__ = ["cell_frame", "build_tables", "rank_tests", "Table", "TableRow", "table_markdown", "table_latex",
           "FAIL_STATUSES", "METRIC_LABELS", "forecast_error_of_cells"]

FAIL_STATUSES = ("failed", "diverged", "timeout", "not_applicable")
SETTING = ("fraction", "noise", "physics")
_VPT_START = "valid_prediction_time_start_"

#: How a headline metric is named in a table and on an axis (with its unit).
METRIC_LABELS = {
    "valid_prediction_time": "valid prediction time (Lyapunov times)",
    "relative_l2": "relative L2 error",
    "wasserstein_mean": "Wasserstein distance (attractor std)",
    "parameter_error": "relative parameter error",
}


def _higher(metric: str) -> bool:
    return metric in HIGHER_IS_BETTER


def _labels(df: pd.DataFrame) -> pd.Series:
    """Learner label per row: the name, plus the hyper-parameters when one learner appears with several."""
    n_params = df.groupby("learner")["learner_params"].nunique()
    def lab(r):
        if n_params.get(r.learner, 1) <= 1 or r.learner_params in ("{}", ""):
            return r.learner
        p = json.loads(r.learner_params)
        return r.learner + "(" + ",".join(f"{k}={v}" for k, v in sorted(p.items())) + ")"
    return df.apply(lab, axis=1) if len(df) else pd.Series([], dtype=str)


def cell_frame(tidy: pd.DataFrame) -> pd.DataFrame:
    """One row per cell with its headline value, per-start VPTs, costs and forecast error.

    Columns: cell, system, system_params, task, task_options, learner (label),
    fraction, noise, physics, seed, status, error, headline, starts (list of
    per-start valid prediction times), train_seconds,
    inference_seconds_per_lyapunov_time, nrmse_mean, horizon (the last
    horizon of the error curve, Lyapunov times).
    """
    if tidy.empty:
        return pd.DataFrame(columns=["cell", "system", "system_params", "task", "task_options", "learner",
                                     "fraction", "noise", "physics", "seed", "status", "error", "headline",
                                     "starts", "train_seconds", "inference_seconds_per_lyapunov_time",
                                     "nrmse_mean", "horizon"])
    tidy = tidy.copy()
    tidy["label"] = _labels(tidy)
    out = []
    for cell, g in tidy.groupby("cell", sort=False):
        r0 = g.iloc[0]
        acc = g[g["kind"] == "accuracy"]
        cost = g[g["kind"] == "cost"]
        point = acc[acc["horizon"].isna()]
        vals = dict(zip(point["metric"].astype(str), point["value"]))
        costs = dict(zip(cost["metric"].astype(str), cost["value"]))
        curve = acc[(acc["metric"] == "nrmse") & acc["horizon"].notna()]
        starts = [v for m, v in vals.items() if m.startswith(_VPT_START)]
        err = vals.get("nrmse_mean", math.nan)
        if not np.isfinite(err) and len(curve):
            err = float(curve["value"].mean())  # stores written before nrmse_mean: the curve's mean
        out.append({
            "cell": cell, "system": r0.system, "system_params": r0.system_params, "task": r0.task,
            "task_options": r0.task_options, "learner": r0.label, "fraction": float(r0.fraction),
            "noise": float(r0.noise), "physics": r0.physics, "seed": int(r0.seed), "status": r0.status,
            "error": r0.error, "headline": vals.get(HEADLINE_METRICS.get(r0.task, ""), math.nan),
            "starts": starts, "train_seconds": costs.get("train_seconds", math.nan),
            "inference_seconds_per_lyapunov_time": costs.get("inference_seconds_per_lyapunov_time", math.nan),
            "nrmse_mean": err, "horizon": float(curve["horizon"].max()) if len(curve) else math.nan,
        })
    return pd.DataFrame(out)


def forecast_error_of_cells(cells: pd.DataFrame) -> pd.DataFrame:
    """The ok forecast cells with a finite error and inference time (points of the work–precision plane)."""
    f = cells[(cells["task"] == "forecast") & (cells["status"] == "ok")]
    return f[np.isfinite(f["nrmse_mean"].astype(float))
             & np.isfinite(f["inference_seconds_per_lyapunov_time"].astype(float))]


@dataclass
class TableRow:
    learner: str
    n_ok: int
    n_cells: int
    n_seeds: int
    median: float
    q25: float
    q75: float
    ci_low: float
    ci_high: float
    train_seconds: float
    inference_seconds: float
    speedup: float
    speedup_with_training: float
    counts: dict
    errors: list
    horizon: float = math.nan  # forecast horizon of the cells (Lyapunov times)
    solver: str = ""  # the solver rung(s) the speed-up is measured against


@dataclass
class Table:
    system: str
    task: str
    fraction: float
    noise: float
    physics: str
    metric: str
    higher_is_better: bool
    queries: int
    rows: list = field(default_factory=list)
    notes: list = field(default_factory=list)

    @property
    def title(self) -> str:
        return (f"{self.system} · {self.task} · fraction {self.fraction:g}, noise {self.noise:g}, "
                f"physics {self.physics}")


def _median(x) -> float:
    x = np.asarray(list(x), dtype=float)
    x = x[np.isfinite(x)]
    return float(np.median(x)) if x.size else math.nan


def build_tables(cells: pd.DataFrame, speedups: pd.DataFrame | None = None, *, queries: int = 100,
                 seed: int = 0) -> list[Table]:
    """One :class:`Table` per (system, task, fraction, noise, physics), rows sorted by learner.

    ``speedups`` (from :func:`suite.report.workplane.cell_speedups`) has
    columns cell, speedup, speedup_with_training.
    """
    if cells.empty:
        return []
    cells = cells.copy()
    if speedups is not None and len(speedups):
        cols = [c for c in ("cell", "speedup", "speedup_with_training", "solver_method", "solver_accuracy")
                if c in speedups]
        cells = cells.merge(speedups[cols], on="cell", how="left")
    else:
        cells["speedup"] = math.nan
        cells["speedup_with_training"] = math.nan
    for c in ("solver_method", "solver_accuracy"):
        if c not in cells:
            cells[c] = None
    tables = []
    keys = ["system", "task", "fraction", "noise", "physics"]
    order = cells[keys].drop_duplicates().sort_values(["system", "task", "fraction", "noise", "physics"],
                                                       ascending=[True, True, False, True, True])
    for _, k in order.iterrows():
        g = cells[(cells["system"] == k.system) & (cells["task"] == k.task) & (cells["fraction"] == k.fraction)
                  & (cells["noise"] == k.noise) & (cells["physics"] == k.physics)]
        metric = HEADLINE_METRICS.get(k.task, "")
        t = Table(k.system, k.task, float(k.fraction), float(k.noise), k.physics, metric, _higher(metric), queries)
        for learner, lg in sorted(g.groupby("learner"), key=lambda kv: kv[0]):
            ok = lg[lg["status"] == "ok"]
            per_seed = ok["headline"].astype(float).to_numpy()
            fin = per_seed[np.isfinite(per_seed)]
            if metric == "valid_prediction_time":
                pool = [v for s in ok["starts"] for v in s]
                ci = bootstrap_ci(pool if len(pool) >= 2 else fin, seed=seed)
            else:
                ci = bootstrap_ci(fin, seed=seed)
            q25, q50, q75 = (np.percentile(fin, [25, 50, 75]) if fin.size else (math.nan,) * 3)
            counts = {s: int((lg["status"] == s).sum()) for s in FAIL_STATUSES}
            errors = sorted({f"{r.status}: {r.error}" for r in lg.itertuples() if r.status != "ok" and r.error})
            t.rows.append(TableRow(
                learner=learner, n_ok=len(ok), n_cells=len(lg), n_seeds=int(ok["seed"].nunique()),
                median=float(q50), q25=float(q25), q75=float(q75), ci_low=ci[0], ci_high=ci[1],
                train_seconds=_median(ok["train_seconds"]),
                inference_seconds=_median(ok["inference_seconds_per_lyapunov_time"]),
                speedup=_median(ok["speedup"]), speedup_with_training=_median(ok["speedup_with_training"]),
                counts=counts, errors=errors, horizon=_median(ok["horizon"]),
                solver=", ".join(sorted({f"{m} at {a:.3g}" for m, a in zip(ok["solver_method"], ok["solver_accuracy"])
                                         if isinstance(m, str) and np.isfinite(a)}))))
        t.notes = _notes(t)
        tables.append(t)
    return tables


def _best(t: Table) -> dict:
    """Index of the best row per column (None where no row has a finite value)."""
    def arg(vals, higher):
        v = np.array(vals, dtype=float)
        if not np.any(np.isfinite(v)):
            return None
        v = np.where(np.isfinite(v), v, -np.inf if higher else np.inf)
        return int(np.argmax(v) if higher else np.argmin(v))
    return {"median": arg([r.median for r in t.rows], t.higher_is_better),
            "train": arg([r.train_seconds for r in t.rows], False),
            "inference": arg([r.inference_seconds for r in t.rows], False),
            "speedup": arg([np.nan if _useless(t, r) else r.speedup for r in t.rows], True),
            "speedup_with_training": arg([np.nan if _useless(t, r) else r.speedup_with_training
                                          for r in t.rows], True)}


def _useless(t: Table, r) -> bool:
    """A forecaster that is wrong within one Lyapunov time: its speed-up buys nothing."""
    return t.metric == "valid_prediction_time" and np.isfinite(r.median) and r.median < 1.0


def _notes(t: Table) -> list[str]:
    notes = []
    b = _best(t)
    if t.metric == "valid_prediction_time":
        short = [r.learner for r in t.rows if np.isfinite(r.median) and r.median < 1.0]
        if short:
            notes.append(f"Valid prediction time below one Lyapunov time (no useful forecast): {', '.join(short)}. "
                         "Their speed-ups (marked †) buy nothing and are not ranked: do not use these learners "
                         "as forecasters here.")
        capped = [r.learner for r in t.rows if np.isfinite(r.median) and np.isfinite(r.horizon)
                  and r.median >= r.horizon * (1 - 1e-6)]
        if capped:
            h = max(r.horizon for r in t.rows if np.isfinite(r.horizon))
            notes.append(f"Valid prediction time reaches the end of the forecast horizon ({_fmt(h)} Lyapunov "
                         f"times) for {', '.join(capped)}: a lower bound (censored), not a measurement; "
                         "a longer horizon would separate these learners.")
    slow = [r.learner for r in t.rows if np.isfinite(r.speedup) and r.speedup < 1.0]
    if slow:
        notes.append(f"Speed-up below 1 — just run the solver: {', '.join(slow)}.")
    slow_t = [r.learner for r in t.rows if np.isfinite(r.speedup_with_training) and r.speedup_with_training < 1.0
              and r.learner not in slow]
    if slow_t:
        notes.append(f"Cheaper than the solver per rollout, but not once training is shared over {t.queries} "
                     f"queries: {', '.join(slow_t)}.")
    against = [f"{r.learner}: {r.solver}" for r in t.rows if r.solver]
    if against:
        notes.append("Speed-up measured against the cheapest solver rung at least as accurate (method at rtol "
                     "or step): " + "; ".join(against) + ".")
    single = [r.learner for r in t.rows if r.n_seeds == 1]
    if single:
        notes.append(f"Resting on a single seed (no spread, no confidence interval): {', '.join(single)}.")
    for r in t.rows:
        bad = {k: v for k, v in r.counts.items() if v}
        if bad:
            what = ", ".join(f"{v} {k.replace('_', ' ')}" for k, v in bad.items())
            msg = f"{r.learner}: {what} of {r.n_cells} cells"
            if r.errors:
                msg += " (" + "; ".join(e[:160] for e in r.errors[:2]) + ")"
            notes.append(msg + ".")
    if b["median"] is not None:
        best = t.rows[b["median"]]
        lo, hi = best.ci_low, best.ci_high
        if np.isfinite(lo):
            tied = [r.learner for i, r in enumerate(t.rows) if i != b["median"] and np.isfinite(r.ci_low)
                    and r.ci_low <= hi and r.ci_high >= lo]
            if tied:
                notes.append(f"Not significantly different from the best ({best.learner}): the 95 % bootstrap "
                             f"intervals of {', '.join(tied)} overlap its interval.")
    return notes


# ------------------------------------------------------------------ rank tests
def rank_tests(cells: pd.DataFrame, *, alpha: float = 0.05) -> dict:
    """Friedman + Nemenyi over blocks, per task and overall.

    A block is one (system, fraction, noise, physics) setting of a task (per
    task) or one (system, task, setting) (overall); the score of a learner
    in a block is its median headline over seeds, with lower-is-better
    metrics negated so that higher is better everywhere. Learners with no
    finite score in any block of a task are left out of that task's test;
    a missing score in a block ranks last (a failure). Overall, only the
    learners that have results in every task take part.

    Returns ``{name: RankTest}`` with names ``<task>`` and ``all tasks``.
    """
    ok = cells[cells["status"] == "ok"].copy()
    out = {}
    if ok.empty:
        return out
    ok["score"] = [(v if _higher(HEADLINE_METRICS.get(t, "")) else -v)
                   for v, t in zip(ok["headline"].astype(float), ok["task"])]
    med = ok.groupby(["system", "task", "fraction", "noise", "physics", "learner"])["score"].median()
    wide = med.unstack("learner")
    tasks = sorted(ok["task"].unique())
    for task in tasks:
        w = wide.xs(task, level="task").dropna(axis=1, how="all")
        if w.shape[1] >= 2:
            out[task] = friedman_nemenyi(w.to_numpy(), list(w.columns), higher_is_better=True, alpha=alpha)
    if len(tasks) >= 2:
        common = [c for c in wide.columns
                  if all(wide.xs(t, level="task")[c].notna().any() for t in tasks)]
        if len(common) >= 2:
            out["all tasks"] = friedman_nemenyi(wide[common].to_numpy(), common, higher_is_better=True,
                                                alpha=alpha)
    return out


# ------------------------------------------------------------------ rendering
def _fmt(x, digits=3) -> str:
    if x is None or not np.isfinite(x):
        return "—"
    return f"{x:.{digits}g}"


def _cells_text(t: Table) -> tuple[list[str], list[list[str]], dict]:
    head = ["learner", "cells ok", f"{t.metric} median [IQR]", "95 % CI", "train s", "inference s/LT",
            "speed-up", f"speed-up incl. training ({t.queries} q.)", "failed / diverged / timeout / n.a."]
    body = []
    for r in t.rows:
        c = r.counts
        body.append([r.learner, f"{r.n_ok}/{r.n_cells}",
                     f"{_fmt(r.median)} [{_fmt(r.q25)}, {_fmt(r.q75)}]" if np.isfinite(r.median) else "—",
                     f"[{_fmt(r.ci_low)}, {_fmt(r.ci_high)}]" if np.isfinite(r.ci_low) else "—",
                     _fmt(r.train_seconds), _fmt(r.inference_seconds),
                     _speedup_text(r.speedup, _useless(t, r)),
                     _speedup_text(r.speedup_with_training, _useless(t, r)),
                     f"{c['failed']} / {c['diverged']} / {c['timeout']} / {c['not_applicable']}"])
    cols = {"median": 2, "train": 4, "inference": 5, "speedup": 6, "speedup_with_training": 7}
    return head, body, cols


def _speedup_text(x: float, useless: bool) -> str:
    if not np.isfinite(x):
        return "—"
    return _fmt(x) + "×" + (" †" if useless else "")


def table_markdown(t: Table) -> str:
    head, body, cols = _cells_text(t)
    for col, i in _best(t).items():
        if i is not None and len(t.rows) > 1:
            body[i][cols[col]] = f"**{body[i][cols[col]]}**"
    lines = ["| " + " | ".join(head) + " |", "|" + "---|" * len(head)]
    lines += ["| " + " | ".join(row) + " |" for row in body]
    return "\n".join(lines)


def _tex(s: str) -> str:
    for a, b in (("\\", r"\textbackslash{}"), ("&", r"\&"), ("%", r"\%"), ("_", r"\_"), ("#", r"\#"),
                 ("{", r"\{"), ("}", r"\}"), ("×", r"$\times$"), ("—", "--"), ("·", r"$\cdot$"),
                 ("†", r"\dag{}")):
        s = s.replace(a, b) if a != "\\" else s.replace(a, "\x00")
    return s.replace("\x00", r"\textbackslash{}")


def table_latex(t: Table) -> str:
    head, body, cols = _cells_text(t)
    body = [[_tex(x) for x in row] for row in body]
    for col, i in _best(t).items():
        if i is not None and len(t.rows) > 1:
            body[i][cols[col]] = r"\textbf{" + body[i][cols[col]] + "}"
    lines = [r"\begin{table}[ht]", r"\centering", r"\small",
             r"\caption{" + _tex(t.title) + ". Headline: " + _tex(METRIC_LABELS.get(t.metric, t.metric))
             + (", higher is better" if t.higher_is_better else ", lower is better") + ".}",
             r"\begin{tabular}{l" + "r" * (len(head) - 1) + "}", r"\toprule",
             " & ".join(_tex(h) for h in head) + r" \\", r"\midrule"]
    lines += [" & ".join(row) + r" \\" for row in body]
    lines += [r"\bottomrule", r"\end{tabular}"]
    if t.notes:
        lines.append(r"\par\footnotesize " + " ".join(_tex(n) for n in t.notes))
    lines.append(r"\end{table}")
    return "\n".join(lines)
