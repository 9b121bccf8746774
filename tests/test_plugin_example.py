"""The plugin example: discovered through its entry point, with its distribution as source, passing the kit."""

from __future__ import annotations

from importlib.metadata import PackageNotFoundError, distribution
from types import SimpleNamespace

import numpy as np
import pytest
from scipy.linalg import expm

from surrogates import TrainingData, Trajectory, registry
from surrogates.conformance import check_learner
from surrogates.registry import LearnerClashError, available_learners, learner_class, learner_info

DIST = "lyapbench-plugin-example"

try:
    distribution(DIST)
    INSTALLED = True
except PackageNotFoundError:  # `make install` installs it; a bare `pip install -e .` does not
    INSTALLED = False

needs_plugin = pytest.mark.skipif(not INSTALLED, reason=f"{DIST} is not installed "
                                  "(pip install -e examples/lyapbench_plugin_example)")


@needs_plugin
def test_discovered_through_entry_point_with_its_distribution_as_source():
    assert "local_linear" in available_learners()
    info = learner_info("local_linear")
    assert info["source"] == DIST
    assert info["class"] == "lyapbench_plugin_example.local_linear:LocalLinear"
    assert "Farmer" in info["reference"]


@needs_plugin
def test_plugin_passes_the_kit():
    results = check_learner("local_linear")
    assert [f"{r.name}: {r.reason}" for r in results if not r.passed] == []


@needs_plugin
def test_local_linear_is_exact_on_a_linear_system():
    # y' = A y sampled at dt: the one-step map is linear (y_{k+1} = expm(A dt) y_k, closed form),
    # so a local affine fit reproduces it to rounding once the neighbours span the state space
    # (several trajectories from scattered starts; one spiral alone is locally one-dimensional)
    a = np.array([[-0.1, -1.0, 0.0], [1.0, -0.1, 0.0], [0.0, 0.0, -0.3]])
    step = expm(a * 0.1)
    rng = np.random.default_rng(3)

    def trajectory(y0, n):
        y = np.empty((n, 3))
        y[0] = y0
        for k in range(n - 1):
            y[k + 1] = step @ y[k]
        return y

    t = 0.1 * np.arange(80)
    data = TrainingData(tuple(Trajectory(t, trajectory(rng.normal(size=3), 80)) for _ in range(8)))
    model = learner_class("local_linear")(delays=1, n_neighbors=12, ridge=0.0).fit(data)
    test = trajectory(np.array([0.3, -0.2, 0.4]), 40)
    out = model.rollout(test[None, 0], t[:40])
    assert np.max(np.abs(out[0] - test)) < 1e-10


def test_name_clash_between_distributions_names_both(monkeypatch):
    eps = [SimpleNamespace(name="twin", value="pkg_one.mod:Twin", dist=SimpleNamespace(name="pkg-one")),
           SimpleNamespace(name="twin", value="pkg_two.mod:Twin", dist=SimpleNamespace(name="pkg-two"))]
    monkeypatch.setattr(registry, "entry_points", lambda group: eps if group == registry.GROUP else [])
    with pytest.raises(LearnerClashError, match="'twin' is provided by both pkg-one .* and pkg-two") as err:
        available_learners()
    assert isinstance(err.value, ValueError) and "\n" not in str(err.value)


def test_clash_with_a_built_in_names_built_in(monkeypatch):
    eps = [SimpleNamespace(name="dmd", value="surrogates.dmd:HankelDMD", dist=SimpleNamespace(name="lyapbench")),
           SimpleNamespace(name="dmd", value="other.dmd:DMD", dist=SimpleNamespace(name="other-dist"))]
    monkeypatch.setattr(registry, "entry_points", lambda group: eps if group == registry.GROUP else [])
    with pytest.raises(LearnerClashError, match="built-in .* and other-dist"):
        learner_class("dmd")
