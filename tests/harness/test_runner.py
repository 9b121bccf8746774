"""The runner on both executors: statuses of misbehaving learners, equal results, resume after SIGKILL.

The cells run ``harness.bad_learners:standin_run_cell`` (a real small cell:
integrate, subsample, fit, score) so that these tests exercise the runner
alone; worker processes import it through the parent's ``sys.path``.
"""

from __future__ import annotations

import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest

from suite.export import tidy_table
from suite.grid import load_grid
from suite.runner import run_grid
from suite.store import Store

CELL = "harness.bad_learners:standin_run_cell"
M = "harness.bad_learners"
REPO = Path(__file__).resolve().parents[2]


def _write(tmp_path, text, name="g.toml"):
    p = tmp_path / name
    p.write_text(text)
    return p


def test_misbehaving_learners_get_their_status_and_the_sweep_goes_on(tmp_path):
    grid = _write(tmp_path, f"""
[grid]
systems = ["lorenz63"]
tasks = ["reconstruct"]
learners = ["{M}:PolynomialInTime", "{M}:RaisingLearner", "{M}:NaNLearner", "{M}:SleepingLearner",
            "{M}:MemoryHog", "{M}:SelfKillingLearner"]
[budget]
seconds_per_cell = 6
memory_mb_per_cell = 4000
""")
    store = tmp_path / "s.sqlite"
    summary = run_grid(grid, store, function=CELL, workers=2, grace=2.0, progress=False)
    assert summary.ran == summary.total == 6
    with Store.open(store, readonly=True) as st:
        cells = {c["learner"].split(":")[1]: c for c in st.cells()}
    assert cells["PolynomialInTime"]["status"] == "ok"
    assert cells["RaisingLearner"]["status"] == "failed"
    assert "deliberate failure in fit" in cells["RaisingLearner"]["error"]
    assert cells["NaNLearner"]["status"] == "diverged"
    assert cells["SleepingLearner"]["status"] == "timeout"
    assert "budget of 6 s" in cells["SleepingLearner"]["error"]
    assert cells["MemoryHog"]["status"] == "failed"
    assert cells["MemoryHog"]["error"].startswith("memory:")
    dead = cells["SelfKillingLearner"]
    assert dead["status"] == "failed" and dead["attempts"] == 2  # retried once (the default)
    assert "SIGKILL" in dead["error"]


def test_second_run_skips_finished_cells_and_leaves_the_store_alone(tmp_path):
    grid = _write(tmp_path, f"""
[grid]
systems = ["lorenz63"]
tasks = ["reconstruct"]
learners = ["{M}:PolynomialInTime"]
seeds = [0, 1]
""")
    store = tmp_path / "s.sqlite"
    first = run_grid(grid, store, function=CELL, workers=1, progress=False)  # one reused worker
    assert (first.ran, first.skipped) == (2, 0)
    before = tidy_table(store)
    second = run_grid(grid, store, function=CELL, workers=2, progress=False)
    assert (second.ran, second.skipped) == (0, 2)
    assert tidy_table(store).equals(before)
    with Store.open(store, readonly=True) as st:
        assert len(st.manifests()) == 1  # nothing to do: no new manifest either


def _accuracy(store):
    df = tidy_table(store)
    df = df[df["kind"] == "accuracy"]
    return df.sort_values(["cell", "metric", "horizon"]).reset_index(drop=True)[
        ["cell", "status", "metric", "horizon", "value"]]


def test_local_and_dask_give_identical_accuracy(tmp_path):
    grid = _write(tmp_path, f"""
[grid]
systems = ["lorenz63"]
tasks = ["reconstruct"]
learners = ["{M}:PolynomialInTime"]
fractions = [1.0, 0.3]
noise = [0.02]
seeds = [3]
[learner."{M}:PolynomialInTime"]
degree = 7
""")
    local, dask = tmp_path / "local.sqlite", tmp_path / "dask.sqlite"
    run_grid(grid, local, function=CELL, executor="local", workers=1, progress=False)
    # one Dask worker: its one worker subprocess serves both cells
    run_grid(grid, dask, function=CELL, executor="dask", workers=1, progress=False)
    a, b = _accuracy(local), _accuracy(dask)
    assert len(a) == 2 * 3 and set(a["status"]) == {"ok"}
    assert a.equals(b)  # bitwise-equal figures: same key, same seed, same computation
    with Store.open(dask, readonly=True) as st:
        dcells = st.cells()
    assert len({c["info"]["worker_pid"] for c in dcells}) == 1
    assert sorted(c["cost"]["worker_reused"] for c in dcells) == [0, 1]
    with Store.open(local, readonly=True) as st:
        infos = [c["info"] for c in st.cells()]
        manifest = st.manifests()[0]
    assert {i["OPENBLAS_NUM_THREADS"] for i in infos} == {"1"}  # one BLAS thread per worker
    assert all("intra_op_parallelism_threads=1" in i["XLA_FLAGS"] for i in infos)
    assert manifest["grid"]["sha256"] == load_grid(grid).sha256 and manifest["executor"] == "local"
    assert manifest["cells_per_worker"] == 0  # the default: workers reused without limit
    assert manifest["packages"]["numpy"]


def _lyapbench():
    exe = Path(sys.executable).with_name("lyapbench")
    assert exe.exists(), "the lyapbench entry point is not installed (pip install -e .)"
    return str(exe)


def test_resume_after_sigkill_has_every_cell_exactly_once(tmp_path):
    psutil = pytest.importorskip("psutil")
    grid = _write(tmp_path, f"""
[grid]
systems = ["lorenz63"]
tasks = ["reconstruct"]
learners = ["{M}:PausingPolynomial"]
seeds = [0, 1, 2, 3]
""")  # each cell sleeps 1.5 s, so the kill lands after the first cell and before the last
    store = tmp_path / "s.sqlite"
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(REPO), str(REPO / "tests")]))
    cmd = [_lyapbench(), "run", str(grid), "--store", str(store), "--workers", "1", "--quiet",
           "--cell-function", CELL]
    proc = subprocess.Popen(cmd, cwd=tmp_path, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    deadline = time.monotonic() + 240
    done = 0
    while time.monotonic() < deadline and proc.poll() is None:
        if store.exists():
            try:
                con = sqlite3.connect(f"file:{store}?mode=ro", uri=True)
                done = con.execute("SELECT COUNT(*) FROM cells").fetchone()[0]
                con.close()
            except sqlite3.OperationalError:
                done = 0
            if done >= 1:
                break
        time.sleep(0.2)
    assert proc.poll() is None, proc.communicate()
    assert done >= 1
    children = psutil.Process(proc.pid).children(recursive=True)
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    _, alive = psutil.wait_procs(children, timeout=30)
    assert not alive  # the orphaned worker stops when its parent's pipe closes

    # the resumed run reuses one worker for all remaining cells (the default)
    out = subprocess.run(cmd + ["--resume", "--json"], cwd=tmp_path, env=env, capture_output=True,
                         text=True, timeout=300)
    assert out.returncode == 0, out.stderr
    with Store.open(store, readonly=True) as st:
        cells = st.cells()
        keys = [c["key"] for c in cells]
        assert len(keys) == len(set(keys)) == 4
        assert {c["seed"] for c in cells} == {0, 1, 2, 3}
        assert {c["status"] for c in cells} == {"ok"}
        metrics = st.metrics()
        assert len(metrics) == 4 * 3 and len(set((c, m, h) for c, m, h, _ in metrics)) == 4 * 3
        assert len(st.manifests()) == 2
    import json
    summary = json.loads(out.stdout)
    assert summary["skipped"] >= 1 and summary["ran"] == 4 - summary["skipped"]


def test_run_refuses_a_locked_store(tmp_path, capsys):
    from suite.cli import main
    grid = _write(tmp_path, f"""
[grid]
systems = ["lorenz63"]
tasks = ["reconstruct"]
learners = ["{M}:PolynomialInTime"]
""")
    store = tmp_path / "s.sqlite"
    with Store.open(store, create=True, lock=True):
        assert main(["run", str(grid), "--store", str(store), "--quiet", "--cell-function", CELL]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "in use by another lyapbench run" in err


def test_unimportable_cell_function_is_refused_before_the_store(tmp_path):
    grid = _write(tmp_path, f"""
[grid]
systems = ["lorenz63"]
tasks = ["reconstruct"]
learners = ["{M}:PolynomialInTime"]
""")
    with pytest.raises(ValueError, match="cannot be imported"):
        run_grid(grid, tmp_path / "s.sqlite", function="harness.bad_learners:no_such_function")
    assert not (tmp_path / "s.sqlite").exists()


def test_progress_lines_count_diverged_cells_as_not_ok_not_as_failed():
    import io

    from suite.cell import CellOutcome, CellSpec
    from suite.executors import CellResult
    from suite.runner import _Progress

    out = io.StringIO()
    p = _Progress(3, "lines", stream=out)
    spec = CellSpec("lorenz63", "forecast", "persistence")
    for status in ("ok", "diverged", "not_applicable"):
        p.update(CellResult("k", spec, CellOutcome(status, error="" if status == "ok" else "why"), None, "t", 1))
    lines = out.getvalue().splitlines()
    assert [ln.split()[1] for ln in lines] == ["ok", "diverged", "not_applicable"]
    assert "not ok 1, remaining 1" in lines[1] and "not ok 1, remaining 0" in lines[2]
    assert "failed" not in out.getvalue()
