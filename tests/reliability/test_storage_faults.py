"""The store's file system fails under a running sweep: disk full, store folder removed.

Disk full is real: the store lives on a 1 MiB tmpfs mounted for the test
(``mount -t tmpfs``; the test is skipped where mounting is not permitted),
and a cell fills that file system from inside its worker process. The
folder removal is done the same way (``shutil.rmtree`` from the cell).
Both go through ``suite.cli.main`` in this process (to read its exit code and
stderr) and the real local executor; the disruption is chosen by
environment variables that only the test's own cell function reads
(:func:`reliability.faulty_learners.disrupting_run_cell`).
"""

from __future__ import annotations

import sqlite3
import subprocess

import pytest

from suite.cli import main
from suite.store import Store

CELL = "reliability.faulty_learners:disrupting_run_cell"
N = 5


def _grid(tmp_path):
    p = tmp_path / "g.toml"
    p.write_text(f"""
[grid]
systems = ["lorenz63"]
tasks = ["reconstruct"]
learners = ["harness.bad_learners:PolynomialInTime"]
seeds = {list(range(N))}
""")
    return p


def _run(grid, store, capsys, *extra):
    code = main(["run", str(grid), "--store", str(store), "--quiet", "--workers", "1",
                 "--cells-per-worker", str(N), "--cell-function", CELL, *extra])
    return code, capsys.readouterr()


@pytest.fixture
def small_fs(tmp_path):
    mnt = tmp_path / "mnt"
    mnt.mkdir()
    r = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=1m", "tmpfs", str(mnt)], capture_output=True,
                       text=True)
    if r.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here ({r.stderr.strip()})")
    try:
        yield mnt
    finally:
        subprocess.run(["umount", "-l", str(mnt)], check=False)


def _integrity(store) -> str:
    con = sqlite3.connect(str(store))
    try:
        return con.execute("PRAGMA integrity_check").fetchone()[0]
    finally:
        con.close()


def test_disk_full_stops_the_run_with_one_line_and_the_store_resumes(tmp_path, small_fs, capsys,
                                                                      monkeypatch):
    grid, store, filler = _grid(tmp_path), small_fs / "s.sqlite", small_fs / "filler"
    monkeypatch.setenv("LYAPBENCH_TEST_DISRUPT", f"fill:{filler}")
    monkeypatch.setenv("LYAPBENCH_TEST_DISRUPT_SEED", "2")
    code, out = _run(grid, store, capsys)
    assert code == 2, out
    assert "Traceback" not in out.err and out.err.count("\n") == 1, out.err
    assert "full" in out.err and str(store) in out.err, out.err
    filler.unlink()  # space comes back
    assert _integrity(store) == "ok"
    with Store.open(store, readonly=True) as st:
        kept = st.count()
    assert 1 <= kept < N  # what was committed before the disk filled is there
    monkeypatch.delenv("LYAPBENCH_TEST_DISRUPT")
    code, out = _run(grid, store, capsys, "--resume")
    assert code == 0, out.err
    assert _integrity(store) == "ok"
    with Store.open(store, readonly=True) as st:
        cells = st.cells()
    assert sorted(c["seed"] for c in cells) == list(range(N))  # every cell exactly once
    assert {c["status"] for c in cells} == {"ok"}


def test_store_folder_removed_mid_run_stops_the_run(tmp_path, capsys, monkeypatch):
    grid, folder = _grid(tmp_path), tmp_path / "study"
    store = folder / "s.sqlite"
    monkeypatch.setenv("LYAPBENCH_TEST_DISRUPT", f"rmtree:{folder}")
    monkeypatch.setenv("LYAPBENCH_TEST_DISRUPT_SEED", "2")
    code, out = _run(grid, store, capsys)
    # the results would go to a file nobody can open again: the run must not report success
    assert code == 2, out
    assert "Traceback" not in out.err and out.err.count("\n") == 1, out.err
    assert str(store) in out.err and "removed" in out.err, out.err
    monkeypatch.delenv("LYAPBENCH_TEST_DISRUPT")
    code, out = _run(grid, store, capsys)  # a new run starts the study afresh
    assert code == 0, out.err
    with Store.open(store, readonly=True) as st:
        assert sorted(c["seed"] for c in st.cells()) == list(range(N))
