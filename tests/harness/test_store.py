"""The SQLite store: identification, atomic cell writes, uniqueness, the run lock."""

from __future__ import annotations

import math
import sqlite3

import pytest

from suite.cell import CellOutcome, CellSpec, MetricRow
from suite.store import Store, StoreError, StoreLockedError


def _spec(seed=0):
    return CellSpec(system="lorenz63", task="forecast", learner="persistence", seed=seed)


def _outcome():
    return CellOutcome("ok", metrics=[MetricRow("valid_prediction_time", 1.5),
                                      MetricRow("nrmse", 0.1, 0.5), MetricRow("nrmse", 0.3, 1.0),
                                      MetricRow("climate_distance", math.nan)],
                       cost={"train_seconds": 0.25, "n_parameters": 3})


def test_new_store_is_wal_and_identified(tmp_path):
    path = tmp_path / "s.sqlite"
    with Store.open(path, create=True) as st:
        assert st.count() == 0
    con = sqlite3.connect(path)
    assert con.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    meta = dict(con.execute("SELECT key, value FROM meta"))
    assert meta["format"] == "lyapbench-store" and meta["schema_version"] == "1"
    con.close()


def test_record_round_trip(tmp_path):
    path = tmp_path / "s.sqlite"
    spec = _spec()
    with Store.open(path, create=True) as st:
        mid = st.add_manifest({"python": "3.11"})
        st.record(spec.key(), spec, _outcome(), started="t0", attempts=1, manifest_id=mid)
    with Store.open(path, readonly=True) as st:
        (cell,) = st.cells()
        assert cell["key"] == spec.key() and cell["status"] == "ok" and cell["manifest_id"] == mid
        assert cell["spec"] == spec.canonical()
        assert cell["cost"] == {"train_seconds": 0.25, "n_parameters": 3}
        rows = st.metrics()
        assert [(m, h) for _, m, h, _ in rows] == [("valid_prediction_time", None), ("nrmse", 0.5),
                                                   ("nrmse", 1.0), ("climate_distance", None)]
        assert math.isnan(rows[-1][3])  # NaN is stored as NULL and reads back as NaN
        assert st.manifests()[0]["python"] == "3.11"


def test_a_cell_is_recorded_once(tmp_path):
    spec = _spec()
    with Store.open(tmp_path / "s.sqlite", create=True) as st:
        st.record(spec.key(), spec, _outcome())
        with pytest.raises(sqlite3.IntegrityError):
            st.record(spec.key(), spec, CellOutcome("failed", error="again"))
        assert st.count() == 1 and len(st.metrics()) == 4
        assert st.cells()[0]["status"] == "ok"


def test_cell_and_metrics_are_one_transaction(tmp_path):
    """A duplicate metric row makes the whole cell fail to record: no cell row without its metrics."""
    spec = _spec()
    dup = CellOutcome("ok", metrics=[MetricRow("nrmse", 0.1, 0.5), MetricRow("nrmse", 0.2, 0.5)])
    dup_scalar = CellOutcome("ok", metrics=[MetricRow("vpt", 1.0), MetricRow("vpt", 2.0)])
    with Store.open(tmp_path / "s.sqlite", create=True) as st:
        for outcome in (dup, dup_scalar):
            with pytest.raises(sqlite3.IntegrityError):
                st.record(spec.key(), spec, outcome)
            assert st.count() == 0 and st.metrics() == []
        with pytest.raises(ValueError, match="status"):
            st.record(spec.key(), spec, CellOutcome("fine"))
        assert st.count() == 0
        st.record(spec.key(), spec, _outcome())  # the store is still usable
        assert st.count() == 1


def test_uncommitted_cell_is_absent_after_a_crash(tmp_path):
    """A writer that dies mid-transaction leaves nothing behind (SQLite rolls back on next open)."""
    path = tmp_path / "s.sqlite"
    Store.open(path, create=True).close()
    con = sqlite3.connect(path, isolation_level=None)
    con.execute("BEGIN IMMEDIATE")
    con.execute("INSERT INTO cells(key, spec, system, task, learner, fraction, noise, physics, seed, status, "
                "finished) VALUES ('k', '{}', 's', 't', 'l', 1, 0, 'none', 0, 'ok', 'now')")
    con.execute("INSERT INTO metrics(cell, metric, horizon, value) VALUES ('k', 'm', NULL, 1.0)")
    del con  # closed without COMMIT
    with Store.open(path) as st:
        assert st.count() == 0 and st.metrics() == []


@pytest.mark.parametrize("content", [b"", b"hello, not a database\n" * 10], ids=["empty", "text"])
def test_foreign_file_is_refused_untouched(tmp_path, content):
    path = tmp_path / "x.sqlite"
    path.write_bytes(content)
    with pytest.raises(StoreError, match="not a lyapbench store"):
        Store.open(path, create=True, lock=True)
    assert path.read_bytes() == content


def test_other_sqlite_database_is_refused(tmp_path):
    path = tmp_path / "other.sqlite"
    con = sqlite3.connect(path)
    con.execute("CREATE TABLE t (x)")
    con.commit()
    con.close()
    before = path.read_bytes()
    with pytest.raises(StoreError, match="not a lyapbench store"):
        Store.open(path, create=True)
    assert path.read_bytes() == before


def test_corrupt_store_is_a_clear_error(tmp_path):
    path = tmp_path / "s.sqlite"
    with Store.open(path, create=True) as st:
        st.record(_spec().key(), _spec(), _outcome())
    data = bytearray(path.read_bytes())
    data[100:4096] = b"\xff" * (4096 - 100)  # wreck the first page after the header
    path.write_bytes(bytes(data))
    with pytest.raises(StoreError):
        Store.open(path)


def test_cli_export_of_a_foreign_file_exits_2(tmp_path, capsys):
    from suite.cli import main
    path = tmp_path / "notes.sqlite"
    path.write_text("not a store")
    assert main(["export", str(path), "--out", str(tmp_path / "t.csv")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "not a lyapbench store" in err
    assert not (tmp_path / "t.csv").exists()


def test_second_run_lock_is_refused(tmp_path):
    path = tmp_path / "s.sqlite"
    with Store.open(path, create=True, lock=True):
        with pytest.raises(StoreLockedError, match="in use by another lyapbench run"):
            Store.open(path, create=True, lock=True)
        with Store.open(path, readonly=True) as reader:  # readers need no lock
            assert reader.count() == 0
    with Store.open(path, lock=True):  # released on close
        pass


def test_missing_store_without_create(tmp_path):
    with pytest.raises(FileNotFoundError):
        Store.open(tmp_path / "absent.sqlite")
