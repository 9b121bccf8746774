"""Datasets: sampling fraction and noise exact, reproducible, never past the reference horizon."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from suite import datasets as D
from suite.systems import get_system
from surrogates import NotApplicableError


@pytest.fixture(scope="module")
def lorenz():
    return get_system("lorenz63")


@pytest.fixture(scope="module")
def y0(lorenz):
    return lorenz.initial_conditions(1, 11)[0]


def test_sample_indices_random_count_and_nesting():
    n = 1000
    a = D.sample_indices(n, 0.1, False, np.random.default_rng(5))
    b = D.sample_indices(n, 0.3, False, np.random.default_rng(5))
    assert a.size == 100 and b.size == 300  # round(fraction * n), exactly
    assert np.all(np.diff(a) > 0) and np.all(np.diff(b) > 0)  # sorted, without replacement
    assert set(a) <= set(b)  # same seed: the smaller fraction is a subset of the larger
    c = D.sample_indices(n, 0.1, False, np.random.default_rng(6))
    assert not np.array_equal(a, c)


def test_sample_indices_regular_and_bad_fraction():
    idx = D.sample_indices(1000, 0.25, True, np.random.default_rng(0))
    np.testing.assert_array_equal(idx, np.arange(0, 1000, 4))  # every round(1/0.25) = 4th sample
    assert D.sample_indices(10, 0.3, True, None).tolist() == [0, 3, 6, 9]  # round(1/0.3) = 3
    for bad in (0.0, -0.1, 1.5):
        with pytest.raises(ValueError, match="fraction"):
            D.sample_indices(10, bad, False, np.random.default_rng(0))


def test_noise_level_is_a_fraction_of_the_attractor_std():
    n = 20000
    t = np.arange(n, dtype=float)
    y = np.zeros((n, 2))
    draw = np.random.default_rng(1).standard_normal((n, 2))
    tr = D.observe(t, y, np.arange(n), 0.1, np.array([1.0, 10.0]), draw)
    # the std of n normal draws has relative standard error 1/sqrt(2n) = 0.5 % (common practice: 3 sigma ~ 1.5 %)
    np.testing.assert_allclose(tr.y.std(axis=0), [0.1, 1.0], rtol=0.02)
    clean = D.observe(t, y + 3.0, np.arange(0, n, 2), 0.0, np.ones(2), draw)
    assert np.all(clean.y == 3.0) and clean.t.size == n // 2


def test_window_dataset_counts_reproducible_and_disjoint(lorenz, y0):
    scale = D.attractor_std(lorenz)
    kw = dict(fraction=0.2, noise=0.05, scale=scale, regular=False, min_samples=2)
    a = D.window_dataset(lorenz, y0, 2.0, streams=D.DataStreams(7), **kw)
    b = D.window_dataset(lorenz, y0, 2.0, streams=D.DataStreams(7), **kw)
    c = D.window_dataset(lorenz, y0, 2.0, streams=D.DataStreams(8), **kw)
    n_grid = a.info["n_grid"]
    assert n_grid == 201  # 2.0 / sample_dt 0.01, plus the start
    assert a.data.n_samples == round(0.2 * n_grid) == a.info["n_samples"]
    tr_a, tr_b = a.data.trajectories[0], b.data.trajectories[0]
    np.testing.assert_array_equal(tr_a.t, tr_b.t)
    np.testing.assert_array_equal(tr_a.y, tr_b.y)
    assert not np.array_equal(tr_a.t, c.data.trajectories[0].t)
    # seen and held-out times partition the half-step reference grid of the window
    allt = np.sort(np.concatenate([tr_a.t, a.t_heldout]))
    np.testing.assert_allclose(allt, 0.005 * np.arange(401), atol=1e-12)
    assert np.intersect1d(np.round(tr_a.t, 9), np.round(a.t_heldout, 9)).size == 0
    # noise: observed minus clean, relative to the attractor std, has std ~ 0.05 (40 samples per variable:
    # relative standard error 1/sqrt(80) ~ 11 %, so a factor-2 band cannot pass by accident for a wrong level)
    resid = (tr_a.y - a.y_seen_clean) / scale
    assert 0.025 < resid.std() < 0.1
    assert a.data.noise == 0.05
    np.testing.assert_array_equal(a.data.scale, scale)


def test_min_samples_is_not_applicable(lorenz, y0):
    with pytest.raises(NotApplicableError, match="needs at least 500"):
        D.window_dataset(lorenz, y0, 1.0, fraction=0.5, noise=0.0, scale=np.ones(3), regular=False,
                         min_samples=500, streams=D.DataStreams(0))


def test_trajectory_dataset_regular_stride(lorenz, y0):
    data, info = D.trajectory_dataset(lorenz, y0, 1.0, fraction=0.1, noise=0.0, scale=np.ones(3),
                                      regular=True, min_samples=2, streams=D.DataStreams(0))
    tr = data.trajectories[0]
    assert info["stride"] == 10 and info["sampling"] == "regular"
    assert tr.regular and tr.dt == pytest.approx(0.1)  # 10 x sample_dt 0.01
    assert tr.t.size == 11  # 0.0, 0.1, ..., 1.0


def _short_horizon(monkeypatch, horizon):
    """Make every reference report a horizon of at most ``horizon`` time units; record the calls."""
    calls = []
    real = D._reference_solution

    def fake(system, t_end, y0, dt_out):
        sol = real(system, t_end, y0, dt_out)
        h = min(float(sol.extra["reference_horizon"]), horizon)
        calls.append((float(t_end), h))
        return dataclasses.replace(sol, extra=dict(sol.extra, reference_horizon=h))

    monkeypatch.setattr(D, "_reference_solution", fake)
    return calls


def test_trusted_trajectory_never_uses_states_past_the_horizon(lorenz, y0, monkeypatch):
    unsegmented = D.trusted_trajectory(lorenz, y0, 1.0, 0.01)
    assert unsegmented.segments == 1
    calls = _short_horizon(monkeypatch, 0.3)
    traj = D.trusted_trajectory(lorenz, y0, 1.0, 0.01)
    # 1.0 = 0.3 + 0.3 + 0.3 + 0.1: four segments, each cut at its own horizon
    assert traj.segments == 4
    assert [round(h, 9) for _, h in calls] == [0.3, 0.3, 0.3, 0.1]
    np.testing.assert_allclose(traj.t, 0.01 * np.arange(101), atol=1e-12)
    # restarts from trusted states: the segmented series matches the unsegmented one closely
    # (two DOP853 runs at rtol 1e-10..1e-12 over one time unit; 1e-6 is a generous bound, common practice)
    np.testing.assert_allclose(traj.y, unsegmented.y, atol=1e-6)


def test_trusted_trajectory_rejects_a_useless_horizon(lorenz, y0, monkeypatch):
    _short_horizon(monkeypatch, 0.001)
    with pytest.raises(D.ReferenceUnavailableError, match="shorter than one output step"):
        D.trusted_trajectory(lorenz, y0, 1.0, 0.01)


def test_data_seed_ignores_learner_fraction_noise_physics():
    from suite.cell import CellSpec

    base = CellSpec("lorenz63", "forecast", "sindy", fraction=0.5, noise=0.1, seed=3)
    same = CellSpec("lorenz63", "forecast", "esn", fraction=0.1, noise=0.0, physics="full", seed=3,
                    learner_params={"a": 1})
    assert D.data_seed(base) == D.data_seed(same)
    assert D.data_seed(base) != D.data_seed(dataclasses.replace(base, seed=4))
    assert D.data_seed(base) != D.data_seed(dataclasses.replace(base, system_params={"rho": 30.0}))
