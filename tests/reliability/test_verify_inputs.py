"""Published tables given to ``lyapbench verify``: damaged tables are one line and exit 2, before any run.

Every case fails while the table is read (:func:`suite.verify.read_published`),
so no cell is run; the cases go through ``suite.cli.main`` in this process.
"""

from __future__ import annotations

import pandas as pd
import pytest

from suite.cli import main
from suite.verify import REQUIRED_COLUMNS, read_published

ROW = {"cell": "0123abcd" * 8, "system": "lorenz63", "task": "reconstruct", "learner": "persistence",
       "learner_params": "{}", "system_params": "{}", "task_options": "{}", "fraction": 1.0, "noise": 0.0,
       "physics": "none", "seed": 0, "status": "ok", "error": "", "kind": "accuracy", "metric": "relative_l2",
       "horizon": None, "value": 0.5}


def _table(rows=1, **changes):
    df = pd.DataFrame([dict(ROW)] * rows)
    for col, value in changes.items():
        df[col] = value
    return df


def _verify(tmp_path, capsys, df=None, text=None, data=None, name="published.csv"):
    p = tmp_path / name
    if df is not None:
        df.to_parquet(p, index=False) if name.endswith(".parquet") else df.to_csv(p, index=False)
    elif text is not None:
        p.write_text(text)
    else:
        p.write_bytes(data)
    code = main(["verify", str(p), "--quiet"])
    err = capsys.readouterr().err
    assert code == 2, err
    assert err.startswith("error:") and err.count("\n") == 1 and "Traceback" not in err, err
    return err


def test_a_well_formed_table_and_extra_columns_are_read():
    df, _ = read_published(_table(2, extra_column="anything", another=3.5))
    assert len(df) == 2 and "extra_column" in df.columns


@pytest.mark.parametrize("column", REQUIRED_COLUMNS)
def test_each_missing_column_is_named(tmp_path, capsys, column):
    err = _verify(tmp_path, capsys, _table().drop(columns=[column]))
    assert "missing column" in err and column in err


def test_all_missing_columns_are_named_in_one_line(tmp_path, capsys):
    err = _verify(tmp_path, capsys, _table().drop(columns=["seed", "metric", "value"]))
    assert all(c in err for c in ("seed", "metric", "value"))


WRONG = [
    ("fraction", "a lot"), ("noise", "[0.1]"), ("seed", "zero"), ("seed", -1), ("seed", 1.5),
    ("value", "high"), ("horizon", "later"), ("status", "great"), ("learner_params", "{not json"),
    ("system_params", "[1, 2]"), ("system", None), ("cell", None),
]


@pytest.mark.parametrize("column,value", WRONG, ids=[f"{c}={v!r}" for c, v in WRONG])
def test_wrong_types_are_named(tmp_path, capsys, column, value):
    err = _verify(tmp_path, capsys, _table(**{column: value}))
    assert f"column {column}" in err


def test_wrong_type_in_parquet(tmp_path, capsys):
    assert "column value" in _verify(tmp_path, capsys, _table(value="high"), name="p.parquet")


@pytest.mark.parametrize("content", [b"", b"\n", b"\xff\xfe\x00garbage\x00" * 10, b"PAR1 not parquet"],
                         ids=["empty", "newline", "binary", "fake-parquet-in-csv"])
def test_empty_and_garbage_files(tmp_path, capsys, content):
    _verify(tmp_path, capsys, data=content)


def test_header_only_has_no_rows(tmp_path, capsys):
    assert "no rows" in _verify(tmp_path, capsys, text=",".join(REQUIRED_COLUMNS) + "\n")


def test_garbage_parquet(tmp_path, capsys):
    assert "Parquet" in _verify(tmp_path, capsys, data=b"PAR1" + b"\0" * 100 + b"PAR1", name="x.parquet")


@pytest.mark.parametrize("n", [20_000, pytest.param(400_000, marks=pytest.mark.slow)])
def test_a_very_large_table_with_one_bad_row_names_the_row(tmp_path, capsys, n):
    # 400,000 rows is ~80 MB of CSV
    df = _table(n, seed=list(range(n)))
    df.loc[n - 1, "status"] = "great"
    err = _verify(tmp_path, capsys, df)
    assert "column status" in err and "great" in err
