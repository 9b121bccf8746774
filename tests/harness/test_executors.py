"""Worker reuse in the executors: state reset between cells, per-cell peak memory, faults end a worker.

Worker processes import the cell functions and learners of this module as
``harness.test_executors:<name>`` (``tests/`` is on their inherited ``sys.path``).
The executors are driven directly (no store) with ``workers=1``, so cells run
in the order given and each cell's worker is known from ``info["worker_pid"]``.
"""

from __future__ import annotations

import os
import random

import numpy as np
import pytest

from harness.bad_learners import PolynomialInTime
from suite.cell import CellOutcome, CellSpec, MetricRow
from suite.executors import CellTask, LocalExecutor, make_executor
from surrogates import OverBudgetError

H = "harness.bad_learners"
T = "harness.test_executors"
STANDIN = f"{H}:standin_run_cell"
LEAK_VAR = "LYAPBENCH_TEST_LEAK"


def leaky_cell(spec: CellSpec) -> CellOutcome:
    """A cell function that reports the state a previous cell could have left, then leaves some.

    Metrics: 1/0 whether the previous cell's environment variable, working
    folder and numpy error setting are still there, and one draw of each
    global generator *before* any seeding (equal across cells only if the
    worker resets them). Cell seed 1 also allocates ``learner_params["megabytes"]``.
    """
    seen_env = float(LEAK_VAR in os.environ)
    seen_cwd = float(os.getcwd() == "/")
    seen_err = float(np.geterr()["divide"] == "raise")
    draws = [np.random.random(), random.random()]
    mb = int(spec.learner_params.get("megabytes", 0))
    if mb:
        block = np.ones(mb * 2**20 // 8)  # touched pages: resident
        block.sum()
        del block
    os.environ[LEAK_VAR] = str(spec.seed)
    os.chdir("/")
    np.seterr(divide="raise")
    np.random.seed(12345 + spec.seed)
    random.seed(12345 + spec.seed)
    return CellOutcome("ok", metrics=[MetricRow("seen_env", seen_env), MetricRow("seen_cwd", seen_cwd),
                                      MetricRow("seen_seterr", seen_err), MetricRow("np_draw", draws[0]),
                                      MetricRow("py_draw", draws[1])])


class BudgetStopLearner(PolynomialInTime):
    """Ends its own fit with OverBudgetError (a graceful ``timeout`` inside the worker)."""

    def _fit(self, data, physics, budget, seed):
        raise OverBudgetError("stopped by its own budget check")


def _spec(learner, seed=0, **params):
    return CellSpec(system="lorenz63", task="reconstruct", learner=learner, seed=seed, learner_params=params)


def _run(executor, tasks):
    got = []
    executor.run(tasks, got.append)
    by_key = {r.key: r for r in got}
    assert len(by_key) == len(tasks)  # every cell reported exactly once
    return [by_key[t.key] for t in tasks]


def test_reused_worker_resets_state_and_measures_peak_memory_per_cell():
    ex = LocalExecutor(f"{T}:leaky_cell", workers=1)  # default: one worker for every cell
    tasks = [CellTask(f"c{s}", _spec("x", s, megabytes=400 if s == 1 else 0)) for s in range(3)]
    res = _run(ex, tasks)
    assert ex.workers_started == 1
    assert len({r.outcome.info["worker_pid"] for r in res}) == 1
    assert [r.outcome.cost["worker_reused"] for r in res] == [0, 1, 1]
    metrics = [{m.metric: m.value for m in r.outcome.metrics} for r in res]
    for m in metrics:  # nothing the previous cell left is visible
        assert (m["seen_env"], m["seen_cwd"], m["seen_seterr"]) == (0.0, 0.0, 0.0), m
    assert len({(m["np_draw"], m["py_draw"]) for m in metrics[1:]}) == 1  # generators reset alike
    peaks = [r.outcome.cost["peak_memory_mb"] for r in res]
    if all(r.outcome.cost["peak_memory_per_cell"] == 1 for r in res):  # Linux /proc available
        # 400 MB touched in cell 1 only; the peak is reset before cell 2 (VmHWM after clear_refs)
        assert peaks[1] > peaks[0] + 350 and peaks[2] < peaks[1] - 350, peaks
    else:  # process peak (ru_maxrss): never decreases
        assert peaks[2] >= peaks[1] > peaks[0] + 350, peaks


def test_faults_take_the_worker_down_and_reuse_leaves_accuracy_unchanged():
    poly = f"{H}:PolynomialInTime"
    spec = lambda learner, seed=0: CellSpec(  # noqa: E731
        system="lorenz63", task="reconstruct", learner=learner, fraction=0.3, noise=0.02, seed=seed,
        learner_params={"degree": 7} if learner == poly else {})
    tasks = [CellTask("p0", spec(poly, 0), memory_mb=4000),
             CellTask("p1", spec(poly, 1), memory_mb=4000),
             CellTask("hog", spec(f"{H}:MemoryHog"), memory_mb=4000),
             CellTask("p2", spec(poly, 2), memory_mb=4000),
             CellTask("stop", spec(f"{T}:BudgetStopLearner"), memory_mb=4000),
             CellTask("p3", spec(poly, 3), memory_mb=4000)]
    ex = LocalExecutor(STANDIN, workers=1)
    res = {r.key: r for r in _run(ex, tasks)}
    pid = {k: r.outcome.info["worker_pid"] for k, r in res.items()}
    assert res["hog"].outcome.status == "failed" and res["hog"].outcome.error.startswith("memory:")
    assert res["stop"].outcome.status == "timeout"
    assert {res[k].outcome.status for k in ("p0", "p1", "p2", "p3")} == {"ok"}
    # one worker until the memory failure; a fresh one until the in-cell timeout; then another
    assert pid["p0"] == pid["p1"] == pid["hog"] != pid["p2"] == pid["stop"] != pid["p3"] != pid["p0"]
    assert ex.workers_started == 3
    assert [res[k].outcome.cost["worker_reused"] for k in ("p0", "p1", "p2", "p3")] == [0, 1, 0, 0]
    # reuse on vs off: the reused cell p1 gives bitwise the same figures in a fresh worker
    fresh = _run(LocalExecutor(STANDIN, workers=1, cells_per_worker=1), [tasks[1]])[0]
    assert fresh.outcome.cost["worker_reused"] == 0
    assert fresh.outcome.info["worker_pid"] != pid["p1"]
    assert fresh.outcome.metrics == res["p1"].outcome.metrics and fresh.outcome.metrics


def test_cells_per_worker_is_checked_and_passed_to_both_executors():
    assert make_executor("local").cells_per_worker == 0  # default: no limit
    assert make_executor("local", cells_per_worker=3).cells_per_worker == 3
    assert make_executor("dask", cells_per_worker=1).cells_per_worker == 1
    with pytest.raises(ValueError, match="cells per worker"):
        make_executor("local", cells_per_worker=-1)


def _dask_worker_settings():
    import dask

    return {k: dask.config.get(k) for k in ("distributed.worker.profile.enabled",
                                            "distributed.admin.tick.interval")}


def test_the_dask_cluster_we_start_has_quiet_housekeeping_in_its_worker_processes():
    # The settings must reach the spawned worker processes, not only this one.
    import dask
    import distributed  # noqa: F401  (registers Dask's distributed defaults in this process)

    from suite.executors.dask import QUIET_CLUSTER_CONFIG

    before = dask.config.get("distributed.worker.profile.enabled")
    ex = make_executor("dask", workers=1)
    client, cluster = ex._client()
    try:
        got = list(client.run(_dask_worker_settings).values())
        saturation = client.run_on_scheduler(lambda dask_scheduler: dask_scheduler.WORKER_SATURATION)
    finally:
        client.close()
        cluster.close()
    assert got == [{"distributed.worker.profile.enabled": False,
                    "distributed.admin.tick.interval": QUIET_CLUSTER_CONFIG["distributed.admin.tick.interval"]}]
    assert saturation == 1.0
    assert dask.config.get("distributed.worker.profile.enabled") == before  # this process keeps its own settings


def test_cli_refuses_a_negative_cells_per_worker(tmp_path, capsys):
    from suite.cli import main

    grid = tmp_path / "g.toml"
    grid.write_text(f'[grid]\nsystems = ["lorenz63"]\ntasks = ["reconstruct"]\nlearners = ["{H}:PolynomialInTime"]\n')
    assert main(["run", str(grid), "--store", str(tmp_path / "s.sqlite"), "--cells-per-worker", "-1"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "-1" in err
    assert not (tmp_path / "s.sqlite").exists()


_FIT_MLP = """
import hashlib, sys, time
import numpy as np
import solvers, jax
from surrogates import Budget, Physics, TrainingData
from surrogates.registry import make_learner
t = np.linspace(0.0, 2.0, 201)
y = np.stack([np.sin(t), np.cos(t), t], 1)
learner = make_learner("mlp", adam_steps=20, lbfgs_steps=5, chunk_size=10, patience=100)
c = time.process_time()
learner.fit(TrainingData.from_arrays(t, y), Physics(), budget=Budget(max_iterations=20), seed=0)
pred = np.ascontiguousarray(learner.predict(t[::7]), dtype=np.float64)
print(jax.config.jax_compilation_cache_dir, hashlib.sha256(pred.tobytes()).hexdigest(), time.process_time() - c)
"""


def _fit_mlp(env_value):
    import subprocess
    import sys

    env = dict(os.environ, LYAPBENCH_JAX_CACHE=str(env_value), OPENBLAS_NUM_THREADS="1")
    out = subprocess.run([sys.executable, "-c", _FIT_MLP], env=env, capture_output=True, text=True, timeout=600)
    assert out.returncode == 0, out.stderr[-2000:]
    cache_dir, digest, cpu = out.stdout.split()
    return cache_dir, digest, float(cpu)


def test_jax_cache_can_be_turned_off():
    import subprocess
    import sys

    code = "import solvers, jax; print(jax.config.jax_compilation_cache_dir)"
    env = dict(os.environ, LYAPBENCH_JAX_CACHE="off")
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, timeout=300)
    assert out.returncode == 0 and out.stdout.strip() == "None", out.stderr[-2000:]


@pytest.mark.slow
def test_persistent_jax_cache_gives_the_same_figures(tmp_path):
    cache = tmp_path / "jax"
    d1, cold, _ = _fit_mlp(cache)
    assert d1 == str(cache) and any(cache.iterdir())  # entries written by the first process
    d2, warm, _ = _fit_mlp(cache)
    _, off, _ = _fit_mlp("off")
    assert cold == warm == off  # a cached executable computes bitwise what a fresh compile does


@pytest.mark.slow
def test_real_cells_give_the_same_accuracy_with_and_without_reuse(tmp_path):
    from suite.export import tidy_table
    from suite.runner import run_grid

    grid = tmp_path / "g.toml"
    grid.write_text("""
[grid]
systems = ["lorenz63"]
tasks = ["forecast"]
learners = ["persistence", "dmd"]
seeds = [0, 1]
[budget]
seconds_per_cell = 300
[task.forecast]
train_lyapunov_times = 2.0
n_starts = 2
history_steps = 10
horizon_lyapunov_times = 1.0
curve_points = 5
""")

    def accuracy(store):
        df = tidy_table(store)
        df = df[df["kind"] == "accuracy"]
        return df.sort_values(["cell", "metric", "horizon"]).reset_index(drop=True)[
            ["cell", "status", "metric", "horizon", "value"]]

    reuse, fresh = tmp_path / "reuse.sqlite", tmp_path / "fresh.sqlite"
    run_grid(grid, reuse, workers=1, progress=False)
    run_grid(grid, fresh, workers=1, cells_per_worker=1, progress=False)
    a, b = accuracy(reuse), accuracy(fresh)
    assert len(a) and set(a["status"]) == {"ok"}
    assert a.equals(b)  # bitwise: reuse keeps compiled functions, never figures
