"""Broken plugins named as ``module:Class``: one clear line naming them, in check-learner and in a grid."""

from __future__ import annotations

import pytest

from suite.cli import main
from suite.grid import GridError, parse_grid

BROKEN = [
    # (path, a fragment the message must hold besides the path itself)
    ("reliability.no_such_module_xyz:Learner", "cannot import module"),
    ("reliability.faulty_learners:NoSuchClass", "has no attribute"),
    ("reliability.faulty_learners:NotALearner", "not a subclass of surrogates.Learner"),
    ("reliability.faulty_learners:disrupting_run_cell", "not a subclass of surrogates.Learner"),
    ("reliability.broken_plugin:AnyLearner", "RuntimeError"),
    ("reliability.faulty_learners:", "expected 'module:Class'"),
    (":NotALearner", "expected 'module:Class'"),
    ("no_such_registered_learner", "no_such_registered_learner"),
]


@pytest.mark.parametrize("path,fragment", BROKEN, ids=[b[0] for b in BROKEN])
def test_check_learner_names_the_broken_plugin(path, fragment, capsys):
    assert main(["check-learner", path]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error:") and err.count("\n") == 1 and "Traceback" not in err, err
    assert path in err and fragment in err, err


@pytest.mark.parametrize("path,fragment", BROKEN, ids=[b[0] for b in BROKEN])
def test_grid_names_the_broken_plugin(path, fragment):
    text = f"""
[grid]
systems = ["lorenz63"]
tasks = ["reconstruct"]
learners = ["persistence", "{path}"]
"""
    with pytest.raises(GridError) as info:
        parse_grid(text, label="plugins.toml")
    msg = str(info.value)
    assert msg.startswith("plugins.toml: grid.learners: ") and "\n" not in msg
    assert path in msg and fragment in msg


def test_a_module_that_fails_to_import_is_retried_not_cached_as_good(capsys):
    # importing it twice gives the same clear error (a half-imported module is not left behind)
    for _ in range(2):
        assert main(["check-learner", "reliability.broken_plugin:AnyLearner"]) == 2
        assert "deliberate failure while importing" in capsys.readouterr().err
