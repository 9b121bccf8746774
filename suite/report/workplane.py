"""The solvers on the learners' axes, for a report.

For every forecast problem of a store (system, its parameters and the
forecast options), the first ``n_starts`` start states of the forecast task
(data seed of the lowest seed in the store, rollout at the sampling step) are
rebuilt with :func:`suite.tasks.forecast_problem`, and every applicable solver
is run at a short ladder of accuracies with
:func:`suite.workprecision.solver_ladder`: same horizon, same normalised error
(time-averaged over the horizon), same cost unit (seconds per trajectory per
Lyapunov time) as a learner's inference. Each learner's forecast cell then
gets its speed-up at equal accuracy (:func:`suite.workprecision.speedup_at_equal_accuracy`).

References
----------
E. Hairer, S. P. Nørsett and G. Wanner, *Solving Ordinary Differential
Equations I*, 2nd ed., Springer (1993), section II.10 (work–precision diagrams).
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd

from suite.workprecision import solver_ladder, speedup_at_equal_accuracy

__all__ = ["REPORT_METHODS", "REPORT_LADDERS", "forecast_ladders", "cell_speedups", "problem_key", "problem_slug"]

#: Solvers put beside the learners (each only where it applies; Radau, an implicit method for stiff
#: problems, is left out: slow on these non-stiff systems and never the cheapest rung)
REPORT_METHODS = ("DOP853", "RK45", "LSODA", "rk4", "dopri5", "verlet", "yoshida4", "etdrk4")
#: A short ladder: rtol for adaptive methods; steps in units of the output spacing for fixed ones
REPORT_LADDERS = {"adaptive": (1e-2, 1e-3, 1e-4, 1e-6, 1e-8), "fixed": (1.0, 0.5, 0.25, 0.1)}


def problem_key(system: str, system_params: str, task_options: str) -> str:
    """Label of one forecast problem: the system name, plus its parameter and option overrides."""
    extra = [s for s in (system_params, task_options) if s and s != "{}"]
    return system + ("" if not extra else " " + " ".join(extra))


def problem_slug(problem: str) -> str:
    """A short file-name stem for a problem: the system name, plus a hash of its overrides if any."""
    import hashlib

    system, _, rest = problem.partition(" ")
    return system if not rest else f"{system}_{hashlib.sha256(rest.encode()).hexdigest()[:6]}"


def forecast_ladders(cells: pd.DataFrame, *, n_starts: int = 3, methods=None, ladders=None) -> tuple[pd.DataFrame, list[str]]:
    """Solver ladders of every forecast problem in ``cells`` (from :func:`suite.report.tables.cell_frame`).

    Returns ``(ladder, notes)``: the ladder rows with columns problem, system,
    method, kind, accuracy, error, seconds, seconds_per_lyapunov_time, nfev,
    status, n_starts, horizon; and a note per problem that could not be run.
    """
    from suite.cell import CellSpec
    from suite.datasets import DataStreams, attractor_std, data_seed
    from suite.solver_methods import applicable_methods
    from suite.systems import get_system
    from suite.tasks import TaskContext, forecast_problem, resolve_task_options

    f = cells[cells["task"] == "forecast"]
    frames, notes = [], []
    for (system_name, sp, to), g in f.groupby(["system", "system_params", "task_options"], sort=True):
        key = problem_key(system_name, sp, to)
        try:
            system_params, task_options = json.loads(sp), json.loads(to)
            system = get_system(system_name, **system_params)
            seed = int(g["seed"].min())
            spec = CellSpec(system=system_name, task="forecast", learner="-", seed=seed,
                            system_params=system_params, task_options=task_options)
            options = resolve_task_options("forecast", task_options)
            ctx = TaskContext(system=system, task="forecast", options=options, fraction=1.0, noise=0.0,
                              scale=attractor_std(system), streams=DataStreams(data_seed(spec)),
                              regular=False, min_samples=1)
            prob = forecast_problem(ctx, n_starts=n_starts)
            use = [m for m in (methods or REPORT_METHODS) if m in applicable_methods(system)]
            lad = solver_ladder(system, prob["y0s"], prob["t_start"] + prob["t_out"], prob["truth"], ctx.scale,
                                methods=use, ladders=ladders or REPORT_LADDERS)
        except Exception as exc:  # the report goes on without this problem's ladder
            notes.append(f"{key}: solver ladder not run ({type(exc).__name__}: {' '.join(str(exc).split())})")
            continue
        lad.insert(0, "system", system_name)
        lad.insert(0, "problem", key)
        lad["n_starts"] = int(prob["y0s"].shape[0])
        lad["seed"] = seed
        lad["horizon"] = float(prob["t_out"][-1] / system.time_unit)
        frames.append(lad)
    cols = ["problem", "system", "method", "kind", "accuracy", "error", "seconds", "seconds_per_lyapunov_time",
            "nfev", "status", "n_starts", "seed", "horizon"]
    return (pd.concat(frames, ignore_index=True) if frames else pd.DataFrame(columns=cols)), notes


def cell_speedups(cells: pd.DataFrame, ladder: pd.DataFrame, *, queries: int = 100) -> pd.DataFrame:
    """Speed-up at equal accuracy of every ok forecast cell against its problem's ladder.

    The learner's error is its ``nrmse_mean`` over its own forecast horizon;
    training is amortised over ``queries`` rollouts of that horizon.
    """
    rows = []
    if ladder is None or ladder.empty:
        return pd.DataFrame(columns=["cell", "speedup", "speedup_with_training", "solver_method",
                                     "solver_accuracy", "solver_more_accurate"])
    f = cells[(cells["task"] == "forecast") & (cells["status"] == "ok")]
    for r in f.itertuples():
        lad = ladder[ladder["problem"] == problem_key(r.system, r.system_params, r.task_options)]
        if lad.empty:
            continue
        train = float(r.train_seconds) if np.isfinite(r.train_seconds) else 0.0
        horizon = float(r.horizon) if np.isfinite(r.horizon) else float(lad["horizon"].iloc[0])
        s = speedup_at_equal_accuracy(lad, float(r.nrmse_mean), float(r.inference_seconds_per_lyapunov_time),
                                      train_seconds=train, n_queries=queries, horizon_lyapunov_times=horizon)
        rows.append({"cell": r.cell, "speedup": s["speedup"], "speedup_with_training": s["speedup_with_training"],
                     "solver_method": s["solver_method"], "solver_accuracy": s["solver_accuracy"],
                     "solver_more_accurate": s["solver_more_accurate"]})
    return pd.DataFrame(rows, columns=["cell", "speedup", "speedup_with_training", "solver_method",
                                       "solver_accuracy", "solver_more_accurate"])


