"""Grid files: expansion to cells, and one clear line for every kind of bad key or value."""

from __future__ import annotations

import hashlib

import pytest

from suite.cli import main
from suite.grid import GridError, load_grid, parse_grid
from suite.store import Store

GOOD = """
[grid]
systems = ["lorenz63", "rossler"]
tasks = ["reconstruct", "forecast"]
learners = ["persistence", "harness.bad_learners:PolynomialInTime"]
fractions = [1.0, 0.25, 0.05]
noise = [0.0, 0.01]
physics = ["none"]
seeds = [0, 1, 2]

[budget]
seconds_per_cell = 30
iterations_per_cell = 100
memory_mb_per_cell = 4096

[learner."harness.bad_learners:PolynomialInTime"]
degree = 5

[system.lorenz63]
rho = 30.0
"""


def test_valid_grid_expands_to_the_full_product(tmp_path):
    path = tmp_path / "study.toml"
    path.write_text(GOOD)
    grid = load_grid(path)
    cells = grid.cells()
    # 2 systems x 2 tasks x 2 learners x 3 fractions x 2 noise x 1 physics x 3 seeds (closed form)
    assert len(cells) == grid.n_cells == 2 * 2 * 2 * 3 * 2 * 1 * 3
    assert len({c.key() for c in cells}) == len(cells)
    assert grid.name == "study"
    assert grid.sha256 == hashlib.sha256(GOOD.encode()).hexdigest()
    poly = [c for c in cells if c.learner.endswith("PolynomialInTime")]
    assert all(c.learner_params == {"degree": 5} for c in poly)
    assert all(c.learner_params == {} for c in cells if c.learner == "persistence")
    assert all(c.system_params == {"rho": 30.0} for c in cells if c.system == "lorenz63")
    assert all(c.system_params == {} for c in cells if c.system == "rossler")
    assert {c.budget_seconds for c in cells} == {30.0}
    assert {c.budget_iterations for c in cells} == {100}
    assert grid.memory_mb_per_cell == 4096


def test_defaults_and_scalars():
    grid = parse_grid('[grid]\nsystems = "lorenz63"\ntasks = ["forecast"]\nlearners = ["persistence"]\n')
    assert (grid.fractions, grid.noise, grid.physics, grid.seeds) == ((1.0,), (0.0,), ("none",), (0,))
    assert len(grid.cells()) == 1


def test_the_smoke_grid_is_valid():
    from importlib.resources import files
    grid = load_grid(files("suite") / "grids" / "smoke.toml")
    assert grid.n_cells == len(grid.cells()) > 0


_BASE = {"systems": '["lorenz63"]', "tasks": '["forecast"]', "learners": '["persistence"]'}


def _grid(extra_grid: dict | None = None, tail: str = "", drop=()) -> str:
    g = {**_BASE, **(extra_grid or {})}
    body = "\n".join(f"{k} = {v}" for k, v in g.items() if k not in drop)
    return f"[grid]\n{body}\n{tail}"


BAD = [
    # (id, grid text, key named in the message, a word of the reason)
    ("unknown-top", _grid(tail="[grids]\nx = 1\n"), "grids", "unknown key"),
    ("unknown-grid-key", _grid({"sytems": '["lorenz63"]'}), "grid.sytems", "unknown key"),
    ("unknown-budget-key", _grid(tail="[budget]\nsecond_per_cell = 3\n"), "budget.second_per_cell", "unknown key"),
    ("unknown-system", _grid({"systems": '["lorenz64"]'}), "grid.systems", "lorenz64"),
    ("unknown-task", _grid({"tasks": '["forcast"]'}), "grid.tasks", "forcast"),
    ("unknown-learner", _grid({"learners": '["persistance"]'}), "grid.learners", "persistance"),
    ("unimportable-learner", _grid({"learners": '["no_such_module_xyz:Foo"]'}), "grid.learners", "import"),
    ("unknown-hyperparameter", _grid(tail="[learner.persistence]\nbogus = 1\n"), "learner.persistence.bogus",
     "hyper-parameter"),
    ("params-for-absent-learner", _grid(tail="[learner.spline]\n"), "learner.spline", "not in grid.learners"),
    ("unknown-system-param", _grid(tail="[system.lorenz63]\nrhoo = 1.0\n"), "system.lorenz63.rhoo", "rhoo"),
    ("system-param-type", _grid(tail='[system.lorenz63]\nrho = "big"\n'), "system.lorenz63.rho", "number"),
    ("unknown-task-option", _grid(tail="[task.forecast]\nbogus_option = 3\n"), "task.forecast.bogus_option",
     "option"),
    ("fraction-zero", _grid({"fractions": "[0.0]"}), "grid.fractions", "(0, 1]"),
    ("fraction-above-one", _grid({"fractions": "[1.5]"}), "grid.fractions", "(0, 1]"),
    ("negative-noise", _grid({"noise": "[-0.1]"}), "grid.noise", "negative"),
    ("float-seed", _grid({"seeds": "[1.5]"}), "grid.seeds", "integers"),
    ("string-seed", _grid({"seeds": '["1"]'}), "grid.seeds", "integers"),
    ("bool-seed", _grid({"seeds": "[true]"}), "grid.seeds", "integers"),
    ("empty-systems", _grid({"systems": "[]"}), "grid.systems", "empty"),
    ("missing-learners", _grid(drop=("learners",)), "grid.learners", "missing"),
    ("no-grid-table", "[budget]\nseconds_per_cell = 3\n", "grid", "missing"),
    ("duplicate-seed", _grid({"seeds": "[1, 1]"}), "grid.seeds", "twice"),
    ("unknown-physics", _grid({"physics": '["some"]'}), "grid.physics", "some"),
    ("fraction-type", _grid({"fractions": '["half"]'}), "grid.fractions", "numbers"),
    ("negative-budget", _grid(tail="[budget]\nseconds_per_cell = -1\n"), "budget.seconds_per_cell", "positive"),
    ("float-iterations", _grid(tail="[budget]\niterations_per_cell = 2.5\n"), "budget.iterations_per_cell",
     "integer"),
    ("not-toml", "[grid\nsystems = 1", None, "TOML"),
]


@pytest.mark.parametrize("text,key,word", [b[1:] for b in BAD], ids=[b[0] for b in BAD])
def test_bad_grid_is_one_line_naming_file_and_key(tmp_path, text, key, word):
    path = tmp_path / "bad.toml"
    path.write_text(text)
    with pytest.raises(GridError) as info:
        load_grid(path)
    msg = str(info.value)
    assert "\n" not in msg
    assert msg.startswith(f"{path}: ")
    if key is not None:
        assert f": {key}: " in msg, msg
    assert word in msg, msg


def test_task_options_are_checked_against_the_task_table():
    from suite.tasks import TASK_OPTION_DEFAULTS
    assert {"n_starts", "vpt_threshold"} <= set(TASK_OPTION_DEFAULTS["forecast"])
    ok = parse_grid(_grid(tail="[task.forecast]\nn_starts = 4\nvpt_threshold = 0.5\n"))
    assert ok.cells()[0].task_options == {"n_starts": 4, "vpt_threshold": 0.5}
    with pytest.raises(GridError, match=r"task\.forecast\.n_starts: expected an integer"):
        parse_grid(_grid(tail='[task.forecast]\nn_starts = "four"\n'))
    with pytest.raises(GridError, match=r"task\.forecast\.n_starts"):
        parse_grid(_grid(tail="[task.forecast]\nn_starts = 2.5\n"))
    with pytest.raises(GridError, match=r"task\.forecast\.n_starts"):
        parse_grid(_grid(tail="[task.forecast]\nn_starts = 0\n"))
    with pytest.raises(GridError, match=r"task\.reconstruct: task 'reconstruct' is not in grid\.tasks"):
        parse_grid(_grid(tail="[task.reconstruct]\nwindow_lyapunov_times = 3.0\n"))


@pytest.mark.parametrize("text", [BAD[3][1], BAD[7][1], BAD[12][1], BAD[15][1]],
                         ids=["unknown-system", "unknown-hyperparameter", "fraction", "seed"])
def test_failed_validation_leaves_an_existing_store_byte_identical(tmp_path, capsys, text):
    store = tmp_path / "study.sqlite"
    Store.open(store, create=True).close()
    bad = tmp_path / "bad.toml"
    bad.write_text(text)
    before = store.read_bytes()
    files_before = sorted(p.name for p in tmp_path.iterdir())
    code = main(["run", str(bad), "--store", str(store), "--quiet"])
    err = capsys.readouterr().err
    assert code == 2
    assert err.count("\n") == 1 and err.startswith("error: ") and str(bad) in err
    assert store.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == files_before  # no lock file, no WAL files


def test_failed_validation_creates_no_store(tmp_path, capsys):
    bad = tmp_path / "bad.toml"
    bad.write_text(BAD[3][1])
    assert main(["run", str(bad), "--store", str(tmp_path / "new.sqlite"), "--quiet"]) == 2
    assert not (tmp_path / "new.sqlite").exists()


def test_missing_grid_file_is_one_line(tmp_path, capsys):
    assert main(["run", str(tmp_path / "absent.toml"), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "does not exist" in err


_BLOCKS = """
[[grid]]
systems = ["lorenz63"]
tasks = ["forecast"]
learners = ["persistence", "esn"]
seeds = [0, 1]

[[grid]]
systems = ["lorenz63", "rossler"]
tasks = ["forecast"]
learners = ["esn"]
fractions = [0.1, 1.0]
seeds = [1]

[learner.esn]
n_nodes = 50
"""


def test_grid_blocks_are_a_union_with_shared_tables():
    g = parse_grid(_BLOCKS)
    cells = g.cells()
    got = {(c.system, c.learner, c.fraction, c.seed) for c in cells}
    # block 1: 1 x 2 learners x 2 seeds = 4; block 2: 2 systems x 2 fractions = 4, of which
    # (lorenz63, esn, 1.0, 1) is already in block 1
    assert len(cells) == g.n_cells == 7 == len(got)
    assert ("lorenz63", "esn", 1.0, 1) in got and ("rossler", "esn", 0.1, 1) in got
    assert ("rossler", "persistence", 1.0, 0) not in got  # blocks are not crossed with each other
    assert all(c.learner_params == {"n_nodes": 50} for c in cells if c.learner == "esn")
    # the same cell has the same key whichever block (or single-table grid) names it
    single = parse_grid("[grid]" + _BLOCKS.split("[[grid]]")[1] + "\n[learner.esn]\nn_nodes = 50\n")
    assert {c.key() for c in single.cells()} <= {c.key() for c in cells}
    assert g.systems == ("lorenz63", "rossler") and g.fractions == (1.0, 0.1)


@pytest.mark.parametrize("text, word", [
    (_BLOCKS.replace('learners = ["esn"]', 'learners = ["nope"]'), "grid[2].learners"),
    (_BLOCKS.replace("fractions = [0.1, 1.0]", "fractions = [2.0]"), "grid[2].fractions"),
    (_BLOCKS.replace('tasks = ["forecast"]\nlearners = ["esn"]', 'learners = ["esn"]'), "grid[2].tasks"),
    (_BLOCKS + '\n[learner.sindy]\nthreshold = 0.1\n', "not in any [[grid]] block's learners"),
    ("grid = []\n", "no [[grid]] blocks"),
])
def test_bad_grid_block_is_named(text, word):
    with pytest.raises(GridError) as info:
        parse_grid(text, label="s.toml")
    assert word in str(info.value) and "\n" not in str(info.value)
