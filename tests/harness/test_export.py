"""The tidy export: columns, one row per cell x metric x horizon, cost rows, non-ok cells, atomic files."""

from __future__ import annotations

import json
import math

import pandas as pd
import pytest

from suite import api
from suite.cell import CellOutcome, CellSpec, MetricRow
from suite.cli import main
from suite.export import COLUMNS, tidy_table
from suite.store import Store

REQUIRED = ["cell", "system", "task", "learner", "fraction", "noise", "physics", "seed", "status", "metric",
            "horizon", "value", "learner_params", "system_params", "error"]


@pytest.fixture()
def store(tmp_path):
    path = tmp_path / "s.sqlite"
    ok = CellSpec("lorenz63", "forecast", "esn", fraction=0.5, noise=0.01, seed=1,
                  learner_params={"n_nodes": 300}, system_params={"rho": 30.0})
    failed = CellSpec("lorenz63", "forecast", "pinn", seed=1)
    timeout = CellSpec("rossler", "reconstruct", "spline", seed=2)
    with Store.open(path, create=True) as st:
        st.record(ok.key(), ok, CellOutcome(
            "ok", metrics=[MetricRow("valid_prediction_time", 4.5),
                           MetricRow("nrmse", 0.01, 1.0), MetricRow("nrmse", 0.2, 2.0), MetricRow("nrmse", 0.9, 3.0)],
            cost={"train_seconds": 1.5, "train_cpu_seconds": 1.4, "inference_seconds_per_lyapunov_time": 0.002,
                  "peak_memory_mb": 210.0, "n_parameters": 900, "note": "text is not a figure"}))
        st.record(failed.key(), failed, CellOutcome("failed", error="ValueError: boom"))
        st.record(timeout.key(), timeout, CellOutcome("timeout", error="killed after 12 s",
                                                      metrics=[MetricRow("relative_l2", 0.5)],
                                                      cost={"train_seconds": 12.0}))
    return path, ok, failed, timeout


def test_columns_and_row_counts(store):
    path, ok, failed, timeout = store
    df = tidy_table(path)
    assert list(df.columns) == list(COLUMNS)
    assert set(REQUIRED) <= set(df.columns)
    # ok cell: 1 scalar + 3 curve points + 5 numeric cost figures; each non-ok cell: one row
    assert len(df) == 1 + 3 + 5 + 1 + 1
    cell = df[df["cell"] == ok.key()]
    assert len(cell) == 9
    assert sorted(cell.loc[cell["kind"] == "cost", "metric"]) == sorted(
        ["train_seconds", "train_cpu_seconds", "inference_seconds_per_lyapunov_time", "peak_memory_mb",
         "n_parameters"])
    curve = cell[cell["metric"] == "nrmse"].sort_values("horizon")
    assert curve["horizon"].tolist() == [1.0, 2.0, 3.0] and curve["value"].tolist() == [0.01, 0.2, 0.9]
    assert cell.loc[cell["metric"] == "valid_prediction_time", "horizon"].isna().all()
    assert json.loads(cell["learner_params"].iloc[0]) == {"n_nodes": 300}
    assert json.loads(cell["system_params"].iloc[0]) == {"rho": 30.0}
    assert (cell["fraction"] == 0.5).all() and (cell["noise"] == 0.01).all() and (cell["seed"] == 1).all()
    for spec, status, err in ((failed, "failed", "ValueError: boom"), (timeout, "timeout", "killed after 12 s")):
        row = df[df["cell"] == spec.key()]
        assert len(row) == 1
        assert row["status"].iloc[0] == status and row["error"].iloc[0] == err
        assert pd.isna(row["metric"].iloc[0]) and math.isnan(row["value"].iloc[0])


@pytest.mark.parametrize("suffix", [".csv", ".parquet"])
def test_cli_export_round_trip(store, tmp_path, capsys, suffix):
    path, ok, failed, timeout = store
    out = tmp_path / f"table{suffix}"
    assert main(["export", str(path), "--out", str(out)]) == 0
    assert "wrote 11 rows (3 cells)" in capsys.readouterr().out
    back = pd.read_csv(out) if suffix == ".csv" else pd.read_parquet(out)
    assert list(back.columns) == list(COLUMNS) and len(back) == 11
    assert back["horizon"].isna().sum() == 11 - 3  # empty where not a curve
    assert not [p for p in tmp_path.iterdir() if p.name.endswith(".tmp")]


def test_export_bad_output_path_is_one_line(store, tmp_path, capsys):
    path = store[0]
    for out in (tmp_path / "t.xlsx", tmp_path / "missing" / "t.csv"):
        assert main(["export", str(path), "--out", str(out)]) == 2
        err = capsys.readouterr().err
        assert err.count("\n") == 1 and err.startswith("error: ")
    assert main(["export", str(tmp_path / "absent.sqlite"), "--out", str(tmp_path / "t.csv")]) == 2
    assert "does not exist" in capsys.readouterr().err
    assert not (tmp_path / "t.csv").exists()


def test_failed_export_keeps_the_previous_file(store, tmp_path, monkeypatch):
    path = store[0]
    out = tmp_path / "t.csv"
    out.write_text("previous\n")

    def broken(self, *a, **k):
        raise OSError("disk full")

    monkeypatch.setattr(pd.DataFrame, "to_csv", broken)
    with pytest.raises(OSError):
        main(["export", str(path), "--out", str(out)])
    assert out.read_text() == "previous\n"
    assert not [p for p in tmp_path.iterdir() if p.name.endswith(".tmp")]


def test_api_returns_the_same_table(store):
    path = store[0]
    assert api.export_table(path).equals(tidy_table(path))


def test_api_grid_cells(tmp_path):
    grid = tmp_path / "g.toml"
    grid.write_text('[grid]\nsystems = ["lorenz63"]\ntasks = ["forecast"]\nlearners = ["persistence"]\n'
                    "seeds = [0, 1]\n")
    df = api.grid_cells(grid)
    assert len(df) == 2 and df["cell"].is_unique and list(df["seed"]) == [0, 1]
