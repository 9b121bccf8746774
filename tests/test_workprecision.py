"""Solvers on the learners' axes (suite/workprecision.py)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from suite.systems import get_system
from suite.systems.reference import reference_solution
from suite.workprecision import forecast_error, solver_ladder, speedup_at_equal_accuracy


def test_forecast_error_hand_computed():
    # one start, two times, two variables with scales (1, 2): errors (0,0) then (1, 2) -> nrmse 0 and 1
    ref = np.zeros((1, 2, 2))
    pred = np.array([[[0.0, 0.0], [1.0, 2.0]]])
    assert forecast_error(pred, ref, [1.0, 2.0]) == pytest.approx(0.5)
    assert forecast_error(pred * np.nan, ref, [1.0, 2.0]) == np.inf


def test_speedup_hand_made_case():
    ladder = pd.DataFrame({
        "method": ["A", "A", "B"], "accuracy": [1e-3, 1e-6, 0.01], "error": [0.2, 0.01, 0.05],
        "seconds_per_lyapunov_time": [1.0, 4.0, 2.0], "status": ["success"] * 3,
    })
    # learner error 0.06: cheapest rung with error <= 0.06 is B (2 s); learner inference 0.5 s -> 4x
    r = speedup_at_equal_accuracy(ladder, 0.06, 0.5)
    assert r["speedup"] == pytest.approx(4.0) and r["solver_method"] == "B"
    # training 100 s amortised over 10 queries of 10 Lyapunov times: 0.5 + 100/10/10 = 1.5 s -> 2/1.5
    r = speedup_at_equal_accuracy(ladder, 0.06, 0.5, train_seconds=100, n_queries=10, horizon_lyapunov_times=10)
    assert r["speedup_with_training"] == pytest.approx(2.0 / 1.5)
    # a learner worse than every rung is matched by the cheapest rung: A at 1e-3 (1 s) -> 2x
    assert speedup_at_equal_accuracy(ladder, 0.5, 0.5)["speedup"] == pytest.approx(2.0)
    # below 1 means "just run the solver"
    assert speedup_at_equal_accuracy(ladder, 0.5, 10.0)["speedup"] < 1


def test_ladder_error_falls_with_tolerance_on_lorenz63():
    system = get_system("lorenz63")
    starts = system.initial_conditions(2, seed=0)
    t = np.arange(0, 201) * 0.01  # 2 time units, about 1.8 Lyapunov times
    ref = np.stack([reference_solution(system, float(t[-1]), y0=y0, dt_out=0.01).y for y0 in starts])
    scale = np.array([7.9, 9.0, 8.6])  # attractor standard deviations of Lorenz-63 (measured; order of magnitude)
    df = solver_ladder(system, starts, t, ref, scale, methods=["DOP853", "rk4"],
                       ladders={"adaptive": (1e-3, 1e-8), "fixed": (1.0, 0.1)})
    assert set(df["method"]) == {"DOP853", "rk4"}
    for _, g in df.groupby("method"):
        errs = g.sort_values("accuracy")["error"].to_numpy()
        assert errs[0] < errs[-1]  # tighter tolerance / smaller step => smaller error
    assert (df["seconds_per_lyapunov_time"] > 0).all()


def test_a_rung_over_the_cost_cap_stops_the_method_and_is_never_used():
    """Rungs go loose to tight, so a scipy rung past ``max_nfev`` ends that method's ladder."""
    import solvers

    system = get_system("lorenz63")
    starts = system.initial_conditions(1, seed=0)
    t = np.arange(0, 101) * 0.01
    ref = np.stack([reference_solution(system, float(t[-1]), y0=y0, dt_out=0.01).y for y0 in starts])
    # DOP853 over one time unit: 134 calls at rtol 1e-3, 638 at 1e-10 (measured here)
    df = solver_ladder(system, starts, t, ref, np.ones(3), methods=["DOP853", "rk4"],
                       ladders={"adaptive": (1e-3, 1e-10, 1e-12), "fixed": (1.0,)}, max_nfev=400)
    dop = df[df["method"] == "DOP853"]
    assert list(dop["status"]) == ["success", "too costly"]  # 1e-12 not tried
    assert np.isinf(dop["error"].iloc[1]) and (df[df["method"] == "rk4"]["status"] == "success").all()
    sol = solvers.solve_scipy(system.rhs(), (0.0, 1.0), starts[0], system.params, rtol=1e-10, max_nfev=400)
    assert not sol.success and "max_nfev" in sol.message and sol.nfev == 0


def test_best_time_keeps_the_first_result_and_the_shortest_of_repeated_short_calls():
    import time

    from suite.workprecision import best_time

    delays = iter([0.03, 0.002, 0.02, 0.01, 0.004, 0.001])
    calls = []

    def call():
        calls.append(1)
        time.sleep(next(delays))
        return len(calls)

    out, sec = best_time(call, short=0.05, repeats=5)
    assert out == 1 and len(calls) == 5  # short: repeated up to 5 calls, first result kept
    assert 0.002 <= sec < 0.01  # the minimum, the 2 ms call (sleep never returns early)
    calls.clear()
    out, sec = best_time(lambda: calls.append(1) or time.sleep(0.06) or "slow", short=0.05)
    assert out == "slow" and sec >= 0.06 and len(calls) == 1  # a long call is timed once
