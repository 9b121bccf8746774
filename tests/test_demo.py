"""``lyapbench demo``: its packaged grid, its help, its findings; the whole demo only with -m slow.

Also checks that the standard study's grid files parse and share the sections
that make overlapping cells one cell (same key) in a shared store.
"""

from __future__ import annotations

from collections import Counter
from pathlib import Path

import pandas as pd
import pytest

from suite.cli import main
from suite.commands.demo import SCENARIO, demo_grid_path, findings
from suite.execute import check_applicable
from suite.grid import load_grid
from suite.systems import get_system
from surrogates.registry import learner_class


def _applicable(cells):
    out = []
    for c in cells:
        caps = learner_class(c.learner).capabilities
        if check_applicable(caps, get_system(c.system), c.task, c.physics) is None:
            out.append(c)
    return out


def test_demo_grid_expands_to_the_intended_cells():
    grid = load_grid(demo_grid_path())
    assert grid.name == "demo"
    assert set(grid.systems) == {"lorenz63", "double_pendulum"}
    assert {"pinn", "sindy", "esn", "spline", "persistence"} <= set(grid.learners)
    assert len(grid.learners) >= 5 and len(grid.fractions) == 2 and len(grid.seeds) == 2
    cells = grid.cells()
    assert len(cells) == grid.n_cells == 2 * 2 * 5 * 2 * 2 * 2  # systems tasks learners fractions physics seeds
    assert len({c.key() for c in cells}) == len(cells)
    run = _applicable(cells)
    # the count stated in the grid's header comment
    assert len(run) == 56
    per = Counter((c.task, c.learner, c.physics) for c in run)
    assert per == {("forecast", "persistence", "none"): 8, ("forecast", "esn", "none"): 8,
                   ("forecast", "sindy", "none"): 8, ("forecast", "sindy", "full"): 8,
                   ("forecast", "pinn", "full"): 8, ("reconstruct", "spline", "none"): 8,
                   ("reconstruct", "pinn", "full"): 8}
    # the stated neural budgets are fixed step counts, not clock limits
    pinn = next(c for c in cells if c.learner == "pinn")
    assert pinn.learner_params == {"width": 32, "depth": 3, "n_collocation": 500, "adam_steps": 500,
                                   "lbfgs_steps": 0}
    assert grid.iterations_per_cell is None


def test_demo_grid_is_marked_fictional():
    text = demo_grid_path().read_text()
    assert "FICTIONAL SCENARIO" in text and "FICTIONAL SCENARIO" in SCENARIO


def test_demo_help(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["demo", "--help"])
    assert exc.value.code == 0
    out = capsys.readouterr().out
    assert "--out" in out and "results/demo" in out


def test_demo_bad_out_is_one_line(tmp_path, capsys):
    f = tmp_path / "file"
    f.write_text("x")
    assert main(["demo", "--out", str(f)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "not a folder" in err[0]


def _row(cell, system, task, learner, physics, fraction, seed, kind, metric, value, status="ok"):
    return {"cell": cell, "system": system, "task": task, "learner": learner, "learner_params": "{}",
            "system_params": "{}", "task_options": "{}", "fraction": fraction, "noise": 0.0,
            "physics": physics, "seed": seed, "status": status, "error": "", "kind": kind, "metric": metric,
            "horizon": None, "value": value}


def test_findings_name_the_best_and_the_fraction_effect():
    rows = []
    # median over the two fractions: (4 + 1) / 2 = 2.5
    vpt = {("esn", 1.0): 4.0, ("esn", 0.2): 1.0, ("persistence", 1.0): 0.1, ("persistence", 0.2): 0.1}
    for i, ((ln, fr), v) in enumerate(vpt.items()):
        rows.append(_row(f"c{i}", "lorenz63", "forecast", ln, "none", fr, 0, "accuracy",
                         "valid_prediction_time", v))
        rows.append(_row(f"c{i}", "lorenz63", "forecast", ln, "none", fr, 0, "cost", "train_seconds", 0.5))
    rows.append(_row("n1", "lorenz63", "forecast", "spline", "none", 1.0, 0, None, None, float("nan"),
                     status="not_applicable"))
    text = findings(pd.DataFrame(rows))
    assert text[0].startswith("4 cells ran, 1 did not apply")
    assert any("esn stays valid longest: median 2.50 Lyapunov times" in s and "persistence manages 0.10" in s
               for s in text)
    assert any("costs esn the most: 4.00 -> 1.00" in s for s in text)


def test_standard_grid_covers_what_the_baseline_promises():
    """The standard study's design as stated in README.md and suite/grids/standard.md."""
    from suite.systems import available_systems
    from surrogates.registry import available_learners

    grid = load_grid(Path(demo_grid_path()).parent / "standard.toml")
    cells = grid.cells()
    assert len({c.key() for c in cells}) == len(cells) == grid.n_cells
    builtin = [n for n in available_learners() if n not in ("local_linear",)]  # the plugin example
    assert set(grid.systems) >= set(available_systems())
    assert set(grid.learners) >= set(builtin)
    for c in cells:
        assert c.seed in (0, 1, 2)
    # every (system, learner) is tried at the default fraction with three seeds
    for s in grid.systems:
        for ln in builtin:
            seeds = {c.seed for c in cells if (c.system, c.learner, c.fraction, c.noise) == (s, ln, 1.0, 0.0)}
            assert seeds == {0, 1, 2}, (s, ln)
    for s in ("lorenz63", "double_pendulum", "lorenz96"):
        assert {c.fraction for c in cells if c.system == s} >= {0.001, 0.01, 0.1, 1.0}, s
        assert {c.noise for c in cells if c.system == s} >= {0.0, 0.01, 0.05}, s
    levels = {}
    for c in cells:
        levels.setdefault((c.learner, c.system), set()).add(c.physics)
    for ln in ("pinn", "sindy", "neural_ode"):
        assert sum(v == {"none", "partial", "full"} for (l2, _), v in levels.items() if l2 == ln) >= 2, ln
    # neural learners stop on fixed, stated step counts (no open-ended L-BFGS phase)
    assert grid.learner_params["pinn"]["lbfgs_steps"] == 0 and grid.learner_params["mlp"]["lbfgs_steps"] == 0
    for ln in ("neural_ode", "hnn"):
        assert grid.learner_params[ln]["n_iterations"] > 0


@pytest.mark.slow
def test_demo_runs_and_resumes(tmp_path, capsys):
    out = tmp_path / "demo"
    assert main(["demo", "--out", str(out), "--quiet"]) == 0
    text = capsys.readouterr().out
    assert "FICTIONAL SCENARIO" in text and "Findings" in text
    assert (out / "demo.sqlite").exists() and (out / "demo_results.csv").exists()
    assert main(["demo", "--out", str(out), "--quiet", "--no-report"]) == 0
    assert "0 cells run" in capsys.readouterr().out
