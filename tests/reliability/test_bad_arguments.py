"""Bad command-line arguments for every ``lyapbench`` command: exit 2, one line on stderr, no traceback.

Most cases call ``suite.cli.main`` in this process (a subprocess costs a
JAX import each, seconds on a loaded machine); two real subprocesses prove
that the installed entry point gives the same exit code and stderr.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from suite.cli import main

REPO = Path(__file__).resolve().parents[2]
H = "harness.bad_learners"

GRID = f"""
[grid]
systems = ["lorenz63"]
tasks = ["reconstruct"]
learners = ["{H}:PolynomialInTime"]
"""


@pytest.fixture
def files(tmp_path):
    (tmp_path / "g.toml").write_text(GRID)
    (tmp_path / "folder").mkdir()
    (tmp_path / "notes.txt").write_text("not a store\n")
    (tmp_path / "empty.sqlite").write_bytes(b"")
    return tmp_path


# {d}: the fixture's folder. Every case must fail before any real work starts.
CASES = {
    "no command": [],
    "unknown command": ["frobnicate"],
    "systems extra arg": ["systems", "extra"],
    "systems unknown option": ["systems", "--bogus"],
    "learners extra arg": ["learners", "--json", "x"],
    "solve missing system": ["solve"],
    "solve unknown system": ["solve", "nosuch", "--t-end", "1"],
    "solve missing t-end": ["solve", "lorenz63"],
    "solve t-end text": ["solve", "lorenz63", "--t-end", "abc"],
    "solve t-end negative": ["solve", "lorenz63", "--t-end", "-1"],
    "solve t-end nan": ["solve", "lorenz63", "--t-end", "nan"],
    "solve t-end inf": ["solve", "lorenz63", "--t-end", "inf"],
    "solve rtol zero": ["solve", "lorenz63", "--t-end", "1", "--rtol", "0"],
    "solve dt-out text": ["solve", "lorenz63", "--t-end", "1", "--dt-out", "x"],
    "solve param no value": ["solve", "lorenz63", "--t-end", "1", "--param", "rho"],
    "solve param text": ["solve", "lorenz63", "--t-end", "1", "--param", "rho=abc"],
    "solve param nan": ["solve", "lorenz63", "--t-end", "1", "--param", "rho=nan"],
    "solve param unknown": ["solve", "lorenz63", "--t-end", "1", "--param", "nosuch=1"],
    "solve y0 text": ["solve", "lorenz63", "--t-end", "1", "--y0", "a,b,c"],
    "solve y0 wrong length": ["solve", "lorenz63", "--t-end", "1", "--y0", "1,2"],
    "solve unknown method": ["solve", "lorenz63", "--t-end", "1", "--method", "nosuch"],
    "solve out folder": ["solve", "lorenz63", "--t-end", "1", "--out", "{d}/folder"],
    "solve out missing folder": ["solve", "lorenz63", "--t-end", "1", "--out", "{d}/nope/x.csv"],
    "solve out under a file": ["solve", "lorenz63", "--t-end", "1", "--out", "{d}/notes.txt/x.csv"],
    "solve out bad suffix": ["solve", "lorenz63", "--t-end", "1", "--out", "{d}/x.docx"],
    "lyapunov unknown system": ["lyapunov", "nosuch"],
    "lyapunov t-end zero": ["lyapunov", "lorenz63", "--t-end", "0"],
    "lyapunov param text": ["lyapunov", "lorenz63", "--param", "rho=x"],
    "check-learner missing": ["check-learner"],
    "check-learner unknown": ["check-learner", "nosuch"],
    "run missing grid": ["run", "{d}/nope.toml"],
    "run grid is a folder": ["run", "{d}/folder"],
    "run grid not toml": ["run", "{d}/notes.txt"],
    "run workers zero": ["run", "{d}/g.toml", "--workers", "0"],
    "run workers text": ["run", "{d}/g.toml", "--workers", "two"],
    "run workers float": ["run", "{d}/g.toml", "--workers", "1.5"],
    "run retries negative": ["run", "{d}/g.toml", "--retries", "-1"],
    "run grace negative": ["run", "{d}/g.toml", "--grace", "-1"],
    "run grace nan": ["run", "{d}/g.toml", "--grace", "nan"],
    "run grace text": ["run", "{d}/g.toml", "--grace", "soon"],
    "run executor unknown": ["run", "{d}/g.toml", "--executor", "slurm"],
    "run scheduler with local": ["run", "{d}/g.toml", "--scheduler", "tcp://127.0.0.1:1"],
    "run resume without store": ["run", "{d}/g.toml", "--resume", "--store", "{d}/none.sqlite"],
    "run store is a folder": ["run", "{d}/g.toml", "--store", "{d}/folder"],
    "run store not sqlite": ["run", "{d}/g.toml", "--store", "{d}/notes.txt"],
    "run store empty file": ["run", "{d}/g.toml", "--store", "{d}/empty.sqlite"],
    "run store under a file": ["run", "{d}/g.toml", "--store", "{d}/notes.txt/s.sqlite"],
    "run cell function no colon": ["run", "{d}/g.toml", "--cell-function", "nocolon"],
    "run cell function missing": ["run", "{d}/g.toml", "--cell-function", "no_such_mod_xyz:f",
                                  "--store", "{d}/s.sqlite"],
    "export missing store": ["export", "{d}/none.sqlite", "--out", "{d}/x.csv"],
    "export store folder": ["export", "{d}/folder", "--out", "{d}/x.csv"],
    "export store not sqlite": ["export", "{d}/notes.txt", "--out", "{d}/x.csv"],
    "export missing out": ["export", "{d}/none.sqlite"],
    "export out bad suffix": ["export", "{d}/none.sqlite", "--out", "{d}/x.xlsx"],
    "export out folder": ["export", "{d}/none.sqlite", "--out", "{d}/folder"],
    "report missing store": ["report", "{d}/none.sqlite", "--out", "{d}/rep"],
    "report store not sqlite": ["report", "{d}/notes.txt", "--out", "{d}/rep"],
    "report queries zero": ["report", "{d}/none.sqlite", "--out", "{d}/rep", "--queries", "0"],
    "report out is a file": ["report", "{d}/none.sqlite", "--out", "{d}/notes.txt"],
    "verify missing table": ["verify", "{d}/none.csv"],
    "verify table is a folder": ["verify", "{d}/folder"],
    "verify rtol negative": ["verify", "{d}/none.csv", "--rtol", "-1"],
    "verify atol nan": ["verify", "{d}/none.csv", "--atol", "nan"],
    "verify sample zero": ["verify", "{d}/none.csv", "--sample", "0"],
    "verify seed negative": ["verify", "{d}/none.csv", "--seed", "-3"],
    "verify executor unknown": ["verify", "{d}/none.csv", "--executor", "slurm"],
    "demo workers zero": ["demo", "--workers", "0"],
    "demo workers text": ["demo", "--workers", "x"],
}


@pytest.mark.parametrize("name", list(CASES))
def test_bad_argument_is_one_line_and_exit_2(name, files, capsys):
    argv = [a.format(d=files) for a in CASES[name]]
    before = {p.name: p.read_bytes() for p in files.iterdir() if p.is_file()}
    code = main(argv)
    err = capsys.readouterr().err
    assert code == 2, (argv, code, err)
    assert err.startswith("error:") and err.count("\n") == 1, err
    assert "Traceback" not in err
    after = {p.name: p.read_bytes() for p in files.iterdir() if p.is_file()}
    assert after == before  # nothing written, nothing changed


def _lyapbench():
    exe = Path(sys.executable).with_name("lyapbench")
    assert exe.exists(), "the lyapbench entry point is not installed (pip install -e .)"
    return str(exe)


@pytest.mark.parametrize("argv", [
    ["run", "{d}/g.toml", "--workers", "0"],
    pytest.param(["export", "{d}/notes.txt", "--out", "{d}/x.csv"], marks=pytest.mark.slow),
], ids=["argparse", "store"])
def test_the_installed_entry_point_exits_2_with_one_line(files, argv):
    for argv in ([a.format(d=files) for a in argv],):
        r = subprocess.run([_lyapbench(), *argv], capture_output=True, text=True, timeout=300, cwd=files)
        assert r.returncode == 2, r
        assert r.stderr.count("\n") == 1 and "Traceback" not in r.stderr, r.stderr


@pytest.fixture
def read_only_folder(tmp_path):
    """A folder on a read-only tmpfs: unwritable even for root (a chmod would not stop root)."""
    ro = tmp_path / "ro"
    ro.mkdir()
    r = subprocess.run(["mount", "-t", "tmpfs", "-o", "ro,size=64k", "tmpfs", str(ro)], capture_output=True,
                       text=True)
    if r.returncode != 0:
        pytest.skip(f"cannot mount a read-only tmpfs here ({r.stderr.strip()})")
    try:
        yield ro
    finally:
        subprocess.run(["umount", "-l", str(ro)], check=False)


UNWRITABLE = {
    "solve out": ["solve", "lorenz63", "--t-end", "1", "--out", "{ro}/x.csv"],
    "export out": ["export", "{d}/s.sqlite", "--out", "{ro}/x.csv"],
    "report out": ["report", "{d}/s.sqlite", "--out", "{ro}/rep", "--no-solvers"],
    "run store": ["run", "{d}/g.toml", "--store", "{ro}/s.sqlite", "--quiet"],
    "run store new folder": ["run", "{d}/g.toml", "--store", "{ro}/sub/s.sqlite", "--quiet"],
}


@pytest.mark.parametrize("name", list(UNWRITABLE))
def test_unwritable_output_is_one_line_and_exit_2(name, files, read_only_folder, capsys):
    from suite.store import Store
    with Store.open(files / "s.sqlite", create=True):
        pass
    argv = [a.format(d=files, ro=read_only_folder) for a in UNWRITABLE[name]]
    code = main(argv)
    err = capsys.readouterr().err
    assert code == 2, (argv, err)
    assert err.startswith("error:") and err.count("\n") == 1 and "Traceback" not in err, err
    assert not any(read_only_folder.iterdir())
