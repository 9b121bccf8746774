"""Learners that misbehave, through the real cell function (``suite.execute:run_cell``) and runner.

:mod:`tests.harness.test_runner` covers raise / NaN / hang in fit / one huge
allocation / self-kill with a stand-in cell function; here the faults it
does not cover go through the product's own cell function, whose output
checks (shape, finiteness) are what is under test.
"""

from __future__ import annotations

import pytest

from suite.runner import run_grid
from suite.store import Store

F = "reliability.faulty_learners"
H = "harness.bad_learners"

# (learner, expected status, a fragment the error must hold)
NON_LETHAL = [
    (f"{H}:PolynomialInTime", "ok", ""),
    (f"{F}:InfLearner", "diverged", "non-finite"),
    (f"{F}:WrongShapeLearner", "failed", "shape"),
    (f"{F}:TransposedLearner", "failed", "shape"),
    (f"{F}:RaggedLearner", "failed", ""),
    (f"{H}:RaisingLearner", "failed", "deliberate failure in fit"),
    (f"{F}:GrowingHog", "failed", "memory"),
]
LETHAL = [
    (f"{F}:ExitingLearner", "failed", "exited with code 3"),
    (f"{F}:PredictHang", "timeout", "budget of 20 s"),
    (f"{H}:SelfKillingLearner", "failed", "SIGKILL"),
]


def _grid(tmp_path, cases, seconds):
    names = ", ".join(f'"{n}"' for n, _, _ in cases)
    p = tmp_path / "faults.toml"
    p.write_text(f"""
[grid]
systems = ["lorenz63"]
tasks = ["reconstruct"]
learners = [{names}]
[budget]
seconds_per_cell = {seconds}
memory_mb_per_cell = 3000
""")
    return p


def _check(store, cases):
    with Store.open(store, readonly=True) as st:
        cells = {c["learner"]: c for c in st.cells()}
        assert st.count() == len(cases)  # every cell recorded, exactly once
    for name, status, fragment in cases:
        c = cells[name]
        assert c["status"] == status, (name, c["status"], c["error"])
        assert fragment in c["error"], (name, c["error"])
        if status != "ok":
            assert c["error"].strip() and "\n" not in c["error"].strip(), (name, c["error"])
    return cells


def test_non_lethal_faults_through_the_real_cell_function(tmp_path):
    # one worker runs every cell (cells_per_worker): none of these faults kills it,
    # and a worker that survives a fault must still score the next cell correctly
    store = tmp_path / "s.sqlite"
    summary = run_grid(_grid(tmp_path, NON_LETHAL, 120), store, workers=1,
                       cells_per_worker=len(NON_LETHAL), progress=False)
    assert summary.ran == len(NON_LETHAL)
    cells = _check(store, NON_LETHAL)
    assert cells[f"{F}:GrowingHog"]["error"].startswith("memory:")
    assert cells[f"{F}:WrongShapeLearner"]["info"].get("stage") == "evaluate"


@pytest.mark.slow
def test_lethal_faults_through_the_real_cell_function(tmp_path):
    store = tmp_path / "s.sqlite"
    summary = run_grid(_grid(tmp_path, LETHAL, 20), store, workers=2, grace=2.0, progress=False)
    assert summary.ran == len(LETHAL)
    cells = _check(store, LETHAL)
    assert cells[f"{F}:ExitingLearner"]["attempts"] == 2  # retried once (the default), then failed
