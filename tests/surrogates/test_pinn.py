"""The physics-informed network (``pinn``) and its data-only twin (``mlp``).

All default tests share one network configuration per learner (32x3 tanh,
256 collocation points, samples padded to 128), so the compiled training
chunks are built once per session.
"""

from __future__ import annotations

import jax.numpy as jnp
import numpy as np
import pytest
from scipy.integrate import solve_ivp

from surrogates import _pinn_core
from surrogates.data import Budget, Physics, TrainingData
from surrogates.errors import NotApplicableError, NotFittedError
from surrogates.mlp import DataOnlyNetwork
from surrogates.pinn import PINN

OMEGA, AMPLITUDE, T_END = 2.0, 1.0, 5.0
SMALL = dict(width=32, depth=3, n_collocation=256)


def oscillator(t, y, p):
    """Undamped harmonic oscillator x'' = -omega^2 x, state (x, v)."""
    return jnp.stack([y[1], -p["omega"] ** 2 * y[0]])


def oscillator_solution(t):
    """Closed form: x = A cos(omega t), v = -A omega sin(omega t)."""
    return np.stack([AMPLITUDE * np.cos(OMEGA * t), -AMPLITUDE * OMEGA * np.sin(OMEGA * t)], axis=1)


def oscillator_data(n):
    t = np.linspace(0.0, T_END, n)
    return TrainingData.from_arrays(t, oscillator_solution(t), state_names=("x", "v"))


def rel_l2(a, b):
    return float(np.linalg.norm(a - b) / np.linalg.norm(b))


T_TEST = np.linspace(0.0, T_END, 1001)


@pytest.fixture(scope="module")
def oscillator_pinn():
    """One fit shared by the reconstruction and rollout tests (1,500 Adam + 300 L-BFGS steps)."""
    physics = Physics(level="full", vector_field=oscillator, params={"omega": OMEGA})
    return PINN(**SMALL, adam_steps=1500, lbfgs_steps=300).fit(oscillator_data(40), physics, seed=0)


def test_pinn_reconstructs_harmonic_oscillator(oscillator_pinn):
    # measured: 5.2e-4 (seed 0)
    model = oscillator_pinn
    err = rel_l2(model.predict(T_TEST), oscillator_solution(T_TEST))
    assert err < 1e-3, err   # target of the issue: 1e-3 relative error (common practice)
    assert model.n_iterations_ == 1800
    assert model.n_parameters() == (1 * 32 + 32) + 2 * (32 * 32 + 32) + (32 * 2 + 2)


def test_pinn_identifies_oscillator_frequency():
    # guess 1.5, truth 2.0 (closed-form data), 1,500 Adam steps: measured estimate 1.99836 (seed 0)
    physics = Physics(level="full", vector_field=oscillator, params={"omega": 1.5}, unknown=("omega",))
    model = PINN(**SMALL, adam_steps=1500, lbfgs_steps=0).fit(oscillator_data(40), physics, seed=0)
    est = model.identified_params()
    assert set(est) == {"omega"}
    assert abs(est["omega"] - OMEGA) / OMEGA < 0.01, est   # 1 % (issue requirement)
    assert model.n_parameters() == (1 * 32 + 32) + 2 * (32 * 32 + 32) + (32 * 2 + 2) + 1


def test_same_seed_same_fit_and_no_recompilation():
    physics = Physics(level="full", vector_field=oscillator, params={"omega": OMEGA})
    data = oscillator_data(30)
    a = PINN(**SMALL, adam_steps=600, lbfgs_steps=20).fit(data, physics, seed=3)
    traces = dict(_pinn_core.TRACE_COUNTS)
    b = PINN(**SMALL, adam_steps=600, lbfgs_steps=20).fit(data, physics, seed=3)
    assert dict(_pinn_core.TRACE_COUNTS) == traces          # the second fit reused the compiled chunks
    np.testing.assert_array_equal(a.loss_history_, b.loss_history_)
    np.testing.assert_array_equal(a.predict(T_TEST), b.predict(T_TEST))
    c = PINN(**SMALL, adam_steps=600, lbfgs_steps=20).fit(data, physics, seed=4)
    assert not np.array_equal(a.predict(T_TEST), c.predict(T_TEST))   # the seed matters


def test_pinn_beats_data_only_network_on_sparse_data():
    # 6 samples over 1.6 periods, 1,500 Adam steps each (shares the compiled chunk of the other
    # tests); measured held-out rel. L2 on 0-5 s: pinn 2.2e-2, mlp 0.36 (seed 0)
    data = oscillator_data(6)
    physics = Physics(level="full", vector_field=oscillator, params={"omega": OMEGA})
    pinn = PINN(**SMALL, adam_steps=1500, lbfgs_steps=0, holdout_fraction=0.0).fit(data, physics, seed=0)
    mlp = DataOnlyNetwork(width=32, depth=3, adam_steps=1500, lbfgs_steps=0,
                          holdout_fraction=0.0).fit(data, seed=0)
    truth = oscillator_solution(T_TEST)
    e_pinn, e_mlp = rel_l2(pinn.predict(T_TEST), truth), rel_l2(mlp.predict(T_TEST), truth)
    print(f"sparse oscillator: pinn {e_pinn:.2e}, mlp {e_mlp:.2e}")
    assert e_pinn < 5e-2, e_pinn
    assert e_pinn < 0.1 * e_mlp, (e_pinn, e_mlp)


def test_rollout_replays_learned_trajectory(oscillator_pinn):
    model = oscillator_pinn
    # from the state at t = 2 (it recurs only after the window ends) the rollout
    # follows the solution while it stays inside the window ...
    t = np.linspace(0.0, 2.5, 251)
    y0 = oscillator_solution(np.array([2.0]))
    roll = model.rollout(y0, t)
    assert roll.shape == (1, 251, 2)
    np.testing.assert_array_equal(roll[0, 0], y0[0])
    assert rel_l2(roll[0], oscillator_solution(2.0 + t)) < 1e-2   # measured ~5e-4
    # the state at the window end recurs one period (pi) earlier, so a rollout from
    # it replays that stretch of the learned trajectory: good for a periodic orbit
    y_end = oscillator_solution(np.array([T_END]))
    t_out = np.linspace(0.0, 3.0, 301)
    assert rel_l2(model.rollout(y_end, t_out)[0], oscillator_solution(T_END + t_out)) < 1e-2
    # the network itself past the window is an extrapolation: poor
    t_past = np.linspace(T_END + 1.0, T_END + 3.0, 201)
    assert rel_l2(model.predict(t_past), oscillator_solution(t_past)) > 0.1


def test_unfitted_and_wrong_physics_raise():
    with pytest.raises(NotFittedError):
        PINN().predict(np.array([0.0]))
    with pytest.raises(NotFittedError):
        DataOnlyNetwork().rollout(np.zeros((1, 2)), np.array([0.0, 1.0]))
    physics = Physics(level="full", vector_field=oscillator, params={"omega": OMEGA})
    with pytest.raises(NotApplicableError):
        DataOnlyNetwork().fit(oscillator_data(10), physics)
    with pytest.raises(NotApplicableError):
        PINN().fit(oscillator_data(10), Physics())
    with pytest.raises(NotApplicableError):
        DataOnlyNetwork().fit(oscillator_data(10), Physics(level="full", vector_field=oscillator,
                                                            params={"omega": 1.0}, unknown=("omega",)))


def test_budget_caps_iterations():
    physics = Physics(level="full", vector_field=oscillator, params={"omega": OMEGA})
    model = PINN(**SMALL, adam_steps=1500, lbfgs_steps=300, patience=0)
    model.fit(oscillator_data(40), physics, Budget(max_iterations=600), seed=0)
    assert model.n_iterations_ == 600
    assert model.n_adam_steps_ == 500   # shared in proportion 1500:300


def test_causal_weights():
    # Wang, Sankaran & Perdikaris (2022): w_i = exp(-eps * sum of the losses of earlier chunks)
    w = np.asarray(_pinn_core.causal_weights(jnp.array([1.0, 2.0, 3.0]), 0.5))
    np.testing.assert_allclose(w, [1.0, np.exp(-0.5), np.exp(-1.5)], rtol=1e-14)


@pytest.mark.slow   # its own compiled configuration: ~40 s on a loaded 2-core machine
def test_annealing_and_causal_weighting_train():
    # both switched on; measured: rel. L2 3.5e-3 after 1,500 Adam steps, weight 0.01 -> 0.0038
    physics = Physics(level="full", vector_field=oscillator, params={"omega": OMEGA})
    model = PINN(**SMALL, adam_steps=1500, lbfgs_steps=0, loss_balancing="annealing",
                 causal_epsilon=1.0).fit(oscillator_data(40), physics, seed=0)
    assert rel_l2(model.predict(T_TEST), oscillator_solution(T_TEST)) < 2e-2
    assert 0.0 < model.physics_weight_ != 0.01   # the annealing moved the weight


def lorenz63(t, y, p):
    """Lorenz (1963), written here so that the test does not depend on the suite."""
    return jnp.stack([p["sigma"] * (y[1] - y[0]), y[0] * (p["rho"] - y[2]) - y[1], y[0] * y[1] - p["beta"] * y[2]])


@pytest.mark.slow
def test_pinn_identifies_lorenz_rho():
    p = {"sigma": 10.0, "rho": 28.0, "beta": 8.0 / 3.0}
    t = np.linspace(0.0, 2.0, 200)
    sol = solve_ivp(lambda s, y: np.asarray(lorenz63(s, y, p)), (0.0, 2.0), [-8.0, 7.0, 27.0],
                    method="DOP853", t_eval=t, rtol=1e-12, atol=1e-12)
    data = TrainingData.from_arrays(t, sol.y.T)
    physics = Physics(level="full", vector_field=lorenz63, params={**p, "rho": 20.0}, unknown=("rho",))
    model = PINN(width=32, depth=3, n_collocation=512, fourier_features=4,
                 adam_steps=3000, lbfgs_steps=1000).fit(data, physics, seed=0)
    print("lorenz rho estimate", model.identified_params())   # measured 27.9998 (seed 0)
    rho = model.identified_params()["rho"]
    assert abs(rho - 28.0) / 28.0 < 0.02, rho   # 2 % (issue requirement); Lorenz (1963) rho = 28
