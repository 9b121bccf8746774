"""Learner registry: entry points, module:Class paths, one-line errors, and the ``learners`` command."""

from __future__ import annotations

import json
import textwrap
from types import SimpleNamespace

import pytest

from suite.cli import main
from surrogates import registry
from surrogates.dmd import HankelDMD
from surrogates.registry import (
    LearnerLoadError,
    UnknownLearnerError,
    available_learners,
    learner_class,
    learner_info,
    list_learners,
    make_learner,
)

BUILT_IN = ("persistence", "spline", "dmd", "analog")


def _fake_entry_points(*items):
    """``entry_points(group=...)`` returning (name, value, distribution) triples."""
    eps = [SimpleNamespace(name=n, value=v, dist=SimpleNamespace(name=d)) for n, v, d in items]
    return lambda group: [ep for ep in eps if group == registry.GROUP]


def test_built_ins_are_registered_through_entry_points():
    names = available_learners()
    for name in BUILT_IN:
        assert name in names
        assert learner_info(name)["source"] == "built-in"
    assert learner_class("dmd") is HankelDMD


def test_unknown_name_suggests_the_closest_in_one_line():
    with pytest.raises(UnknownLearnerError, match=r"unknown learner 'dmdd'; did you mean dmd\?") as err:
        learner_class("dmdd")
    assert "\n" not in str(err.value)
    assert isinstance(err.value, ValueError)


def test_module_class_paths(tmp_path, monkeypatch):
    assert learner_class("surrogates.dmd:HankelDMD") is HankelDMD
    with pytest.raises(LearnerLoadError, match="has no attribute 'Nope'"):
        learner_class("surrogates.dmd:Nope")
    with pytest.raises(LearnerLoadError, match="not a subclass of surrogates.Learner"):
        learner_class("numpy:ndarray")
    with pytest.raises(LearnerLoadError, match="cannot import module 'no_such_module_xyz'"):
        learner_class("no_such_module_xyz:Thing")
    (tmp_path / "raising_learner_mod.py").write_text("raise RuntimeError('boom at import')\n")
    monkeypatch.syspath_prepend(str(tmp_path))
    with pytest.raises(LearnerLoadError, match="RuntimeError: boom at import") as err:
        learner_class("raising_learner_mod:X")
    assert "\n" not in str(err.value)


def test_make_learner_rejects_unknown_hyperparameter():
    assert make_learner("dmd", delays=3).delays == 3
    with pytest.raises(ValueError, match=r"no hyper-parameter 'delay'.*valid: delays, rank, svd_rtol"):
        make_learner("dmd", delay=3)


def test_learner_info_fields():
    info = learner_info("analog")
    for key in ("name", "tasks", "physics", "source", "reference", "capabilities", "params"):
        assert key in info
    assert info["tasks"] == ["forecast", "climate"] and info["physics"] == ["none"]
    assert info["params"] == {"delays": 3, "n_neighbors": 4}
    assert "Lorenz" in info["reference"] and info["capabilities"]["needs_regular_sampling"] is True


def test_broken_module_is_listed_with_error_not_crashing(monkeypatch):
    monkeypatch.setattr(registry, "entry_points", _fake_entry_points(
        ("dmd", "surrogates.dmd:HankelDMD", "lyapbench"),
        ("broken", "no_such_module_xyz:Broken", "some-plugin")))
    rows = {r["name"]: r for r in list_learners()}
    assert "error" not in rows["dmd"] and rows["dmd"]["source"] == "built-in"
    assert rows["broken"]["source"] == "some-plugin"
    assert "cannot import module 'no_such_module_xyz'" in rows["broken"]["error"]
    with pytest.raises(LearnerLoadError, match="learner 'broken'"):
        learner_class("broken")


def test_cli_learners_json_and_table(capsys):
    assert main(["learners", "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    by_name = {r["name"]: r for r in rows}
    for name in BUILT_IN:
        r = by_name[name]
        assert r["source"] == "built-in" and r["tasks"] and r["physics"] and r["reference"]
    assert main(["learners"]) == 0
    out = capsys.readouterr().out
    assert out.splitlines()[0].split()[:4] == ["name", "tasks", "physics", "source"]
    assert any(line.startswith("spline ") and "reconstruct" in line for line in out.splitlines())


def test_cli_check_learner_unknown_is_exit_2(capsys):
    assert main(["check-learner", "splin"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "did you mean spline" in err


def test_cli_check_learner_exit_codes(tmp_path, monkeypatch, capsys):
    mod = tmp_path / "kit_cli_learners.py"
    mod.write_text(textwrap.dedent("""
        import numpy as np
        from surrogates import Capabilities, Learner

        class Good(Learner):
            capabilities = Capabilities(tasks={"forecast"}, min_samples=1)
            def __init__(self):
                pass
            def _fit(self, data, physics, budget, seed):
                self.dt_ = 1.0
            def _rollout(self, y0, t, history):
                return np.repeat(y0[:, None, :], t.size, axis=1)

        class DriftsAtStart(Good):
            def _rollout(self, y0, t, history):
                return np.repeat(y0[:, None, :], t.size, axis=1) + 1.0
    """))
    monkeypatch.syspath_prepend(str(tmp_path))
    assert main(["check-learner", "kit_cli_learners:Good"]) == 0
    out = capsys.readouterr().out
    assert "PASS fit_returns_self" in out and "FAIL" not in out
    assert main(["check-learner", "kit_cli_learners:DriftsAtStart"]) == 1
    out = capsys.readouterr().out
    assert "FAIL rollout_starts_at_y0: rollout[:, 0] differs from y0" in out
    assert main(["check-learner", "kit_cli_learners:DriftsAtStart", "--json"]) == 1
    rows = json.loads(capsys.readouterr().out)
    assert {r["check"]: r["passed"] for r in rows}["rollout_starts_at_y0"] is False
