"""The solvers on the learners' axes: error against cost, and speed-up at equal accuracy.

For a system, a set of start states and a horizon, every applicable solver of
:mod:`suite.solver_methods` is run at a ladder of accuracies (tolerances for
adaptive methods, step sizes for fixed-step ones). Each rung records the same
figures a learner's rollout gets: the time-averaged normalised RMSE against the
reference over the horizon (:func:`forecast_error`) and the wall seconds per
trajectory per Lyapunov time of simulated time.

The speed-up of a learner at equal accuracy is the time the cheapest solver
rung needs to reach the learner's error, divided by the learner's inference
time; below 1 the honest advice is "just run the solver". Including training,
the learner's time is ``inference + training / n_queries``.

References
----------
E. Hairer, S. P. Nørsett and G. Wanner, *Solving Ordinary Differential
Equations I*, 2nd ed., Springer (1993), section II.10 (work–precision diagrams).
"""

from __future__ import annotations

import time

import numpy as np
import pandas as pd

from suite.solver_methods import SOLVER_METHODS, applicable_methods, solve_system

__all__ = ["forecast_error", "solver_ladder", "speedup_at_equal_accuracy", "best_time", "DEFAULT_LADDERS",
           "JIT_METHODS", "MAX_NFEV_PER_RUNG"]

#: methods compiled by JAX (warmed up once per rung before timing)
JIT_METHODS = frozenset({"rk4", "dopri5", "verlet", "yoshida4", "etdrk4"})

#: right-hand-side calls per trajectory beyond which a scipy rung is "too costly" (about 1 s of
#: Python calls per 200,000; common practice for a report that must finish, not a published value)
MAX_NFEV_PER_RUNG = 200_000

#: accuracy rungs: relative tolerances for adaptive methods; steps in units of the output spacing for fixed ones
DEFAULT_LADDERS = {
    "adaptive": (1e-2, 1e-3, 1e-4, 1e-5, 1e-6, 1e-7, 1e-8, 1e-10),
    "fixed": (1.0, 0.5, 0.25, 0.1, 0.05, 0.025),
}


def forecast_error(pred, ref, scale) -> float:
    """Time-averaged normalised RMSE of ``pred`` against ``ref``.

    ``pred`` and ``ref`` have shape (K, n, d) (K start states, n times);
    each variable is divided by its attractor standard deviation ``scale``,
    the RMSE is taken over variables, then averaged over starts and times.
    A non-finite prediction counts as an infinite error.
    """
    pred = np.asarray(pred, dtype=float)
    ref = np.asarray(ref, dtype=float)
    if pred.shape != ref.shape:
        raise ValueError(f"prediction shape {pred.shape} differs from reference shape {ref.shape}")
    if not np.all(np.isfinite(pred)):
        return float("inf")
    e = np.sqrt(np.mean(((pred - ref) / np.asarray(scale, dtype=float)) ** 2, axis=-1))
    return float(np.mean(e))


def best_time(call, *, short: float = 0.05, repeats: int = 5):
    """The result of ``call()`` and its shortest wall time over up to ``repeats`` calls.

    A call under ``short`` seconds is repeated and the minimum kept (the
    usual practice of :mod:`timeit`): timed once, a millisecond solve varied
    by up to 1.7x between two reports of the same store on an idle machine,
    enough to move a speed-up by 1.5x. Longer calls are timed once; their
    relative noise is small and repeating them would cost. The result is the
    first call's.
    """
    t0 = time.perf_counter()
    out = call()
    best = time.perf_counter() - t0
    n = 1
    while best < short and n < repeats:
        t0 = time.perf_counter()
        call()
        best = min(best, time.perf_counter() - t0)
        n += 1
    return out, best


def solver_ladder(system, starts, t_eval, reference, scale, *, methods=None, ladders=None,
                  atol=1e-12, max_nfev: int | None = MAX_NFEV_PER_RUNG) -> pd.DataFrame:
    """Run every applicable solver at every rung; one row per (method, accuracy).

    Rungs go from loose to tight, so costs only grow: once a scipy rung needs
    more than ``max_nfev`` right-hand-side calls for one trajectory (an
    explicit method held back by stiffness, say), it is recorded with status
    ``"too costly"`` and the method's tighter rungs are not run.

    Parameters
    ----------
    system : suite.systems.System
    starts : array (K, d)
    t_eval : array (n,), equally spaced, ``t_eval[0]`` the start
    reference : array (K, n, d), the reference trajectories from ``starts``
    scale : array (d,), per-variable attractor standard deviation
    max_nfev : int or None, the cost cap per trajectory and rung (None: none)

    Returns
    -------
    DataFrame with columns method, kind, accuracy, error, seconds,
    seconds_per_lyapunov_time (per trajectory), nfev, status.
    """
    starts = np.atleast_2d(np.asarray(starts, dtype=float))
    t_eval = np.asarray(t_eval, dtype=float)
    ladders = ladders or DEFAULT_LADDERS
    dt_out = float(t_eval[1] - t_eval[0])
    span_lyap = (t_eval[-1] - t_eval[0]) / system.time_unit
    rows = []
    for name in methods or applicable_methods(system):
        m = SOLVER_METHODS[name]
        for rung in ladders[m.kind]:
            if rows and rows[-1]["method"] == name and rows[-1]["status"] == "too costly":
                break
            accuracy = rung if m.kind == "adaptive" else rung * dt_out
            preds, seconds, nfev, status = [], 0.0, 0, "success"
            # warm-up (compilation) outside the timing, as for a learner's jitted rollout; on the full
            # output grid, since the compiled program depends on the number of steps and outputs
            if name in JIT_METHODS:
                solve_system(system, name, t_eval, y0=starts[0], accuracy=accuracy, atol=atol)
            for y0 in starts:
                sol, sec = best_time(lambda: solve_system(system, name, t_eval, y0=y0, accuracy=accuracy, atol=atol,
                                                          max_nfev=max_nfev))
                seconds += sec
                nfev += int(sol.nfev)
                if "(max_nfev)" in sol.message:
                    status = "too costly"
                    break
                if not sol.success or np.asarray(sol.y).shape != (len(t_eval), system.dim):
                    status = "failed"
                    preds.append(np.full((len(t_eval), system.dim), np.nan))
                else:
                    preds.append(np.asarray(sol.y))
            if status == "too costly":
                rows.append({"method": name, "kind": m.kind, "accuracy": accuracy, "error": float("inf"),
                             "seconds": float("inf"), "seconds_per_lyapunov_time": float("inf"),
                             "nfev": float(max_nfev), "status": status})
                continue
            err = forecast_error(np.stack(preds), reference, scale) if status == "success" else float("inf")
            rows.append({
                "method": name, "kind": m.kind, "accuracy": accuracy, "error": err,
                "seconds": seconds, "seconds_per_lyapunov_time": seconds / len(starts) / span_lyap,
                "nfev": nfev / len(starts), "status": status,
            })
    return pd.DataFrame(rows)


def speedup_at_equal_accuracy(ladder: pd.DataFrame, error: float, inference_seconds_per_lyapunov_time: float,
                              *, train_seconds: float = 0.0, n_queries: int = 1,
                              horizon_lyapunov_times: float = 1.0) -> dict:
    """Speed-up of a learner over the cheapest solver rung that is at least as accurate.

    Returns a dict with ``speedup`` (solver time / learner inference time),
    ``speedup_with_training`` (training amortised over ``n_queries`` rollouts
    of ``horizon_lyapunov_times``), and the solver rung used. When no rung is
    as accurate as the learner, the solver's cheapest rung of all is used, with
    ``solver_more_accurate`` False marking that the learner out-did every rung
    (rare; it means the ladder needs coarser rungs).
    """
    ok = ladder[(ladder["status"] == "success") & np.isfinite(ladder["error"])]
    out = {"speedup": float("nan"), "speedup_with_training": float("nan"), "solver_method": None,
           "solver_accuracy": float("nan"), "solver_seconds_per_lyapunov_time": float("nan"),
           "solver_more_accurate": True}
    if ok.empty or not np.isfinite(error) or not inference_seconds_per_lyapunov_time > 0:
        return out
    good = ok[ok["error"] <= error]
    if good.empty:
        good = ok
        out["solver_more_accurate"] = False
    best = good.loc[good["seconds_per_lyapunov_time"].idxmin()]
    t_solver = float(best["seconds_per_lyapunov_time"])
    t_learn = float(inference_seconds_per_lyapunov_time)
    per_query = t_learn + train_seconds / max(n_queries, 1) / max(horizon_lyapunov_times, 1e-12)
    out.update(speedup=t_solver / t_learn, speedup_with_training=t_solver / per_query,
               solver_method=str(best["method"]), solver_accuracy=float(best["accuracy"]),
               solver_seconds_per_lyapunov_time=t_solver)
    return out
