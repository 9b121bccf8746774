"""SIGKILL at chosen and random moments of a sweep; two runs on one store.

The kill points are real SIGKILLs of real processes, placed with
:mod:`reliability.kill_hook` (an SQLite trace callback or a thread watching
the WAL grow), at moments drawn from a seeded generator: before, inside and
at the COMMIT of a cell's transaction, between transactions, and while a
commit writes its WAL frames. After each kill: ``PRAGMA integrity_check``
is ``ok``, every recorded cell has all of its metric rows (a cell is
complete or absent), and resuming completes the study with every cell
exactly once.
"""

from __future__ import annotations

import json
import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from reliability.kill_hook import arm
from suite.cell import CellOutcome, CellSpec, MetricRow
from suite.cli import main
from suite.store import Store

REPO = Path(__file__).resolve().parents[2]
N_METRICS = 4
SEED = 20261202  # the kill points' generator


def _cells(n):
    out = []
    for seed in range(n):
        spec = CellSpec(system="lorenz63", task="reconstruct", learner="harness.bad_learners:PolynomialInTime",
                        fraction=1.0, noise=0.0, physics="none", seed=seed)
        metrics = [MetricRow("relative_l2", 0.1 * seed + 0.01)] + [
            MetricRow("nrmse", 0.01 * h * (seed + 1), float(h)) for h in range(1, N_METRICS)]
        out.append((spec.key(), spec, CellOutcome("ok", metrics=metrics, cost={"train_seconds": 0.5})))
    return out


def _record_missing(path, cells, kill=None):
    with Store.open(path, create=True, lock=True) as st:
        if kill:
            arm(st._conn, path, kill)
        mid = st.add_manifest({"note": "kill test"})
        done = st.finished_keys()
        for key, spec, outcome in cells:
            if key not in done:
                st.record(key, spec, outcome, manifest_id=mid)


def _check_consistent(path, cells) -> int:
    """Integrity ok, no duplicates, every recorded cell complete; returns the number recorded."""
    con = sqlite3.connect(str(path))
    try:
        assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        keys = [k for (k,) in con.execute("SELECT key FROM cells")]
        assert len(keys) == len(set(keys))
        per = dict(con.execute("SELECT cell, COUNT(*) FROM metrics GROUP BY cell").fetchall())
    finally:
        con.close()
    assert set(per) <= set(keys)  # no orphan metric rows
    assert all(per.get(k, 0) == N_METRICS for k in keys)  # complete or absent
    assert set(keys) <= {k for k, _, _ in cells}
    return len(keys)


def _forked(target) -> int:
    """Run ``target()`` in a forked child; returns its wait status's signal (0 if it exited)."""
    pid = os.fork()
    if pid == 0:  # the child: only SQLite and os calls, then _exit
        code = 0
        try:
            target()
        except BaseException:
            code = 3
        os._exit(code)
    _, status = os.waitpid(pid, 0)
    if os.WIFSIGNALED(status):
        return os.WTERMSIG(status)
    assert os.WEXITSTATUS(status) == 0, "the child failed without being killed"
    return 0


def test_store_survives_sigkill_at_seeded_points_and_resumes(tmp_path):
    cells = _cells(8)
    per_cell = N_METRICS + 3  # BEGIN, INSERT cell, one INSERT per metric row, COMMIT
    rng = np.random.default_rng(SEED)
    path = tmp_path / "s.sqlite"
    kills = ["stmt:1", "stmt:2"]  # before anything; inside the manifest's statement
    kills += [f"stmt:{2 + per_cell}"]  # exactly at the first cell's COMMIT
    kills += [f"stmt:{int(rng.integers(3, 2 + 3 * per_cell))}" for _ in range(5)]  # seeded, anywhere
    kills += ["wal", "wal", "wal"]  # while a commit writes its frames
    killed = 0
    for kill in kills:
        sig = _forked(lambda: _record_missing(path, cells, kill))
        killed += sig == signal.SIGKILL
        _check_consistent(path, cells)
    assert killed >= len(kills) - 1  # the trigger hit (a stmt:N past the end would not)
    _record_missing(path, cells)  # resume
    assert _check_consistent(path, cells) == len(cells)
    with Store.open(path, readonly=True) as st:
        assert len(st.manifests()) >= 1


def _lyapbench():
    exe = Path(sys.executable).with_name("lyapbench")
    assert exe.exists(), "the lyapbench entry point is not installed (pip install -e .)"
    return str(exe)


def _env():
    return dict(os.environ, PYTHONPATH=os.pathsep.join([str(REPO), str(REPO / "tests")]))


def _grid(tmp_path, learner, seeds, extra=""):
    p = tmp_path / "g.toml"
    p.write_text(f"""
[grid]
systems = ["lorenz63"]
tasks = ["reconstruct"]
learners = ["{learner}"]
seeds = {list(seeds)}
{extra}""")
    return p


def _store_ready(store) -> bool:
    """The store file exists and its schema is committed (readable from another connection)."""
    import sqlite3

    if not store.exists() or store.stat().st_size == 0:
        return False
    try:
        con = sqlite3.connect(f"file:{store}?mode=ro", uri=True)
        try:
            con.execute("SELECT COUNT(*) FROM cells").fetchone()
            return True
        finally:
            con.close()
    except sqlite3.Error:
        return False


def test_second_run_on_a_busy_store_is_refused_and_changes_nothing(tmp_path, capsys):
    H = "harness.bad_learners"
    grid = _grid(tmp_path, f"{H}:SleepingLearner", [0, 1], "[budget]\nseconds_per_cell = 600\n")
    store = tmp_path / "s.sqlite"
    lock = tmp_path / "s.sqlite.lock"
    first = subprocess.Popen([_lyapbench(), "run", str(grid), "--store", str(store), "--quiet",
                              "--workers", "1", "--cell-function", f"{H}:standin_run_cell"],
                             cwd=tmp_path, env=_env(), stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    try:
        deadline = time.monotonic() + 240
        while time.monotonic() < deadline and first.poll() is None:
            if lock.exists() and lock.read_text().strip() == str(first.pid) and _store_ready(store):
                break  # the first run holds the lock and has finished creating the store
            time.sleep(0.2)
        assert first.poll() is None, first.communicate()
        time.sleep(0.5)  # its first cell is asleep now: nothing writes until it ends
        before = store.read_bytes()
        code = main(["run", str(grid), "--store", str(store), "--quiet", "--workers", "1",
                     "--cell-function", f"{H}:standin_run_cell"])
        err = capsys.readouterr().err
        assert code == 2
        assert err.count("\n") == 1 and "in use by another lyapbench run" in err and str(first.pid) in err
        assert store.read_bytes() == before
    finally:
        first.send_signal(signal.SIGKILL)
        first.wait()
    # the kernel dropped the killed run's lock: the store is free at once
    with Store.open(store, lock=True) as st:
        assert st.count() == 0


@pytest.mark.slow
def test_lyapbench_run_killed_at_five_seeded_moments_then_resumed(tmp_path):
    """The real ``lyapbench run`` process, SIGKILLed at 5+ points of its store work, then ``--resume``."""
    H = "harness.bad_learners"
    n = 6
    grid = _grid(tmp_path, f"{H}:PolynomialInTime", range(n))
    store = tmp_path / "s.sqlite"
    args = ["run", str(grid), "--store", str(store), "--quiet", "--workers", "1",
            "--cells-per-worker", str(n), "--cell-function", f"{H}:standin_run_cell"]
    rng = np.random.default_rng(SEED)
    per_cell = 3 + 3  # BEGIN, INSERT cell, 3 metric rows (standin_run_cell), COMMIT
    # statement 1 = PRAGMA foreign_keys at open; 2 = the manifest; then the cells
    kills = ["stmt:2", f"stmt:{2 + per_cell}", "wal"]
    kills += [f"stmt:{int(rng.integers(3, 2 + 2 * per_cell))}" for _ in range(2)]
    cells = []
    for kill in kills:
        r = subprocess.run([sys.executable, "-m", "reliability.kill_hook", kill, *args], cwd=tmp_path,
                           env=_env(), capture_output=True, text=True, timeout=400)
        assert r.returncode in (-signal.SIGKILL, 0), r.stderr
        if store.exists():
            con = sqlite3.connect(str(store))
            assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
            per = dict(con.execute("SELECT cell, COUNT(*) FROM metrics GROUP BY cell").fetchall())
            keys = [k for (k,) in con.execute("SELECT key FROM cells")]
            con.close()
            assert len(keys) == len(set(keys)) and all(per.get(k) == 3 for k in keys)
            cells.append(len(keys))
    r = subprocess.run([_lyapbench(), *args, "--resume", "--json"], cwd=tmp_path, env=_env(),
                       capture_output=True, text=True, timeout=400)
    assert r.returncode == 0, r.stderr
    assert json.loads(r.stdout)["total"] == n
    with Store.open(store, readonly=True) as st:
        got = st.cells()
        assert sorted(c["seed"] for c in got) == list(range(n))
        assert {c["status"] for c in got} == {"ok"}
        assert len(st.metrics()) == 3 * n


def test_a_store_being_created_by_another_run_is_reported_in_use(tmp_path, capsys):
    """The race the real-process test above can hit: the holder has the lock, its file is not SQLite yet."""
    grid = _grid(tmp_path, "harness.bad_learners:PolynomialInTime", [0])
    store = tmp_path / "s.sqlite"
    fd = Store._take_lock(store)  # what a starting run holds ...
    try:
        store.write_bytes(b"")  # ... before SQLite has written the file's header
        assert main(["run", str(grid), "--store", str(store), "--quiet"]) == 2
        err = capsys.readouterr().err
        assert "in use by another lyapbench run" in err and f"pid {os.getpid()}" in err, err
        assert store.read_bytes() == b""
    finally:
        os.close(fd)
