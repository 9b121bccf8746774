"""``lyapbench verify`` and :func:`suite.verify.verify_table`.

A tiny study (persistence forecasting and spline reconstruction of Lorenz-63,
shortened task options) is run once into a store and exported; verifying the
export re-runs it in fresh processes and must reproduce every accuracy figure
(same spec, same machine: the design's determinism promise, so the default
tight tolerances apply). Altering one published value must be caught and the
line must name the cell and the metric.
"""

from __future__ import annotations

import os

import pandas as pd
import pytest

from suite.cli import main
from suite.export import tidy_table
from suite.runner import run_grid
from suite.verify import REQUIRED_COLUMNS, VerifyInputError, verify_table

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

TINY_GRID = """
[grid]
systems = ["lorenz63"]
tasks = ["reconstruct", "forecast"]
learners = ["persistence", "spline"]
seeds = [3]

[budget]
seconds_per_cell = 77

[task.reconstruct]
window_lyapunov_times = 2.0

[task.forecast]
train_lyapunov_times = 3.0
n_starts = 2
horizon_lyapunov_times = 2.0
curve_points = 5
"""


@pytest.fixture(scope="module")
def published(tmp_path_factory):
    """(published csv, the verify store of an unchanged rerun, its result)."""
    d = tmp_path_factory.mktemp("verify")
    grid = d / "tiny.toml"
    grid.write_text(TINY_GRID)
    summary = run_grid(grid, d / "published.sqlite", workers=1, cells_per_worker=4, progress=False)
    assert summary.ran == 4
    table = tidy_table(d / "published.sqlite")
    csv = d / "published.csv"
    table.to_csv(csv, index=False)
    # an unchanged rerun in a fresh store (fresh worker processes, nothing reused)
    result = verify_table(csv, store=d / "rerun.sqlite", workers=1, cells_per_worker=4, budget_seconds=77)
    return csv, d / "rerun.sqlite", result


def test_unchanged_rerun_matches(published):
    csv, _, result = published
    assert result.ok, result.mismatch_lines()
    assert result.n_cells == 4  # 2 applicable + 2 not_applicable (spline forecasting, persistence reconstructing)
    assert result.n_key_mismatches == 0  # the 77 s budget given, the rebuilt keys equal the published ones
    assert result.n_metrics > 10  # the nrmse curve alone has 5 rows
    statuses = dict(zip(result.cells["learner"] + "/" + result.cells["task"], result.cells["published_status"]))
    assert statuses == {"persistence/forecast": "ok", "spline/reconstruct": "ok",
                        "persistence/reconstruct": "not_applicable", "spline/forecast": "not_applicable"}


def test_altered_value_is_named(published, tmp_path, capsys):
    csv, store, _ = published
    df = pd.read_csv(csv, dtype={"cell": "string"})
    i = df.index[(df["metric"] == "valid_prediction_time")][0]
    df.loc[i, "value"] = df.loc[i, "value"] * 1.01 + 0.01
    bad = tmp_path / "altered.csv"
    df.to_csv(bad, index=False)
    # the rerun store already holds these keys: nothing runs again
    code = main(["verify", str(bad), "--store", str(store), "--quiet", "--budget-seconds", "77"])
    out = capsys.readouterr().out.splitlines()
    assert code == 1
    lines = [ln for ln in out if ln.startswith("mismatch:")]
    assert len(lines) == 1
    assert df.loc[i, "cell"] in lines[0] and "metric=valid_prediction_time" in lines[0]
    assert "learner=persistence" in lines[0] and "system=lorenz63" in lines[0]
    assert out[-1].startswith("MISMATCH: 4 cells") and "1 mismatches" in out[-1]


def test_unknown_budget_reports_key_mismatch(published, capsys):
    """Budget 77 s is in no shipped grid: without it the keys cannot be rebuilt, and that is said."""
    csv, store, _ = published
    code = main(["verify", str(csv), "--store", str(store), "--quiet", "--sample", "1", "--seed", "0"])
    out = capsys.readouterr().out.splitlines()
    assert any(ln.startswith("key mismatch: cell ") for ln in out)
    assert code in (0, 1)  # the figures decide; a 600 s budget does not change these learners' numbers
    assert "1 cells (a sample of 4)" in out[-1]


def test_status_change_is_a_mismatch(published):
    csv, store, _ = published
    df = pd.read_csv(csv, dtype={"cell": "string"})
    na = df["status"] == "not_applicable"
    df.loc[na.idxmax(), "status"] = "failed"
    result = verify_table(df, store=store, budget_seconds=77)
    assert result.n_mismatches == 1
    row = result.mismatches.iloc[0]
    assert row["metric"] == "status" and row["published_text"] == "failed"
    assert row["reproduced_text"] == "not_applicable"


def test_missing_columns_exit_2_one_line(tmp_path, capsys):
    df = pd.DataFrame({"cell": ["abc"], "system": ["lorenz63"], "value": [1.0], "extra": [0]})
    path = tmp_path / "t.csv"
    df.to_csv(path, index=False)
    assert main(["verify", str(path)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1
    missing = [c for c in REQUIRED_COLUMNS if c not in df.columns]
    assert all(c in err[0] for c in missing) and "missing columns" in err[0]


@pytest.mark.parametrize("content, suffix, expect", [
    ("", ".csv", "empty"),
    ("x", ".txt", "expected a .csv or .parquet"),
    ("not parquet", ".parquet", "not a readable Parquet"),
])
def test_bad_files_exit_2(tmp_path, capsys, content, suffix, expect):
    path = tmp_path / f"t{suffix}"
    path.write_text(content)
    assert main(["verify", str(path)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and expect in err[0]


def test_wrong_types_and_no_rows(published):
    csv, _, _ = published
    df = pd.read_csv(csv, dtype={"cell": "string"})
    with pytest.raises(VerifyInputError, match="column no rows|has no rows"):
        verify_table(df.iloc[:0])
    bad = df.copy()
    bad["seed"] = bad["seed"].astype(object)
    bad.loc[0, "seed"] = "three"
    with pytest.raises(VerifyInputError, match="column seed: expected numbers"):
        verify_table(bad)
    bad = df.copy()
    bad.loc[0, "learner_params"] = "[1, 2]"
    with pytest.raises(VerifyInputError, match="learner_params: not a JSON object"):
        verify_table(bad)
    with pytest.raises(VerifyInputError, match="rtol"):
        verify_table(df, rtol=-1.0)
