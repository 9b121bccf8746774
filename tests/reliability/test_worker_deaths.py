"""Worker processes killed mid-cell: the local executor's worker and a Dask worker (real LocalCluster).

A killed worker's cell is retried once (the default ``retries=1``); a cell
whose worker dies every time is recorded ``failed`` with the reason, and
the study completes. :mod:`tests.harness.test_runner` covers a worker that
always dies on the local executor; here: a worker that dies once (the retry
must succeed and be counted), and the Dask cases.
"""

from __future__ import annotations

import pytest

from suite.runner import run_grid
from suite.store import Store

CELL = "harness.bad_learners:standin_run_cell"
F = "reliability.faulty_learners"
H = "harness.bad_learners"


def _grid(tmp_path, learners, extra=""):
    names = ", ".join(f'"{n}"' for n in learners)
    p = tmp_path / "g.toml"
    p.write_text(f"""
[grid]
systems = ["lorenz63"]
tasks = ["reconstruct"]
learners = [{names}]
[budget]
seconds_per_cell = 120
{extra}""")
    return p


def test_a_worker_killed_once_is_retried_and_the_retry_counts(tmp_path):
    marker = tmp_path / "killed-once"
    grid = _grid(tmp_path, [f"{F}:KillOnceLearner"],
                 f'[learner."{F}:KillOnceLearner"]\nmarker = "{marker}"\n')
    store = tmp_path / "s.sqlite"
    summary = run_grid(grid, store, function=CELL, workers=1, progress=False)
    assert summary.ran == 1 and marker.exists()  # the first attempt really died
    with Store.open(store, readonly=True) as st:
        (cell,) = st.cells()
        assert len(st.metrics()) == 3
    assert cell["status"] == "ok" and cell["attempts"] == 2, cell
    assert cell["info"]["worker_pid"] != int(marker.read_text())  # scored by a fresh worker


@pytest.mark.slow
def test_dask_cells_whose_workers_die_are_failed_with_the_reason(tmp_path):
    grid = _grid(tmp_path, [f"{H}:PolynomialInTime", f"{H}:SelfKillingLearner", f"{F}:KillDaskWorkerLearner"])
    store = tmp_path / "s.sqlite"
    summary = run_grid(grid, store, function=CELL, executor="dask", workers=2, progress=False)
    assert summary.ran == summary.total == 3  # the study completes
    with Store.open(store, readonly=True) as st:
        cells = {c["learner"].split(":")[1]: c for c in st.cells()}
        assert st.count() == 3
    assert cells["PolynomialInTime"]["status"] == "ok"
    sub = cells["SelfKillingLearner"]  # the cell's subprocess died: retried once inside the Dask task
    assert sub["status"] == "failed" and sub["attempts"] == 2 and "SIGKILL" in sub["error"], sub
    dw = cells["KillDaskWorkerLearner"]  # the Dask worker itself died
    assert dw["status"] == "failed" and dw["error"].strip(), dw
    assert "KilledWorker" in dw["error"] or "worker" in dw["error"].lower(), dw
