"""SINDy: recovery of Lorenz-63, partial physics, parameter identification, typed errors."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from solvers import array_namespace
from surrogates import (
    DivergedError,
    InvalidDataError,
    NotApplicableError,
    Physics,
    TrainingData,
    Trajectory,
)
from surrogates.sindy import SINDy

# Lorenz (1963) parameters, the classic chaotic regime
SIGMA, RHO, BETA = 10.0, 28.0, 8.0 / 3.0
PARAMS = {"sigma": SIGMA, "rho": RHO, "beta": BETA}


def lorenz63(t, y, p, without=()):
    """Lorenz-63 written locally (E. N. Lorenz, J. Atmos. Sci. 20, 130 (1963)); removable: ``rho_x``."""
    xp = array_namespace(y)
    keep = 0.0 if "rho_x" in without else 1.0
    x, yy, z = y[0], y[1], y[2]
    return xp.stack([p["sigma"] * (yy - x), keep * p["rho"] * x - x * z - yy, x * yy - p["beta"] * z])


def lorenz_samples(t):
    """States at times ``t`` (DOP853, rtol 1e-10) from a point near the attractor."""
    sol = solve_ivp(lambda s, y: lorenz63(s, y, PARAMS), (0.0, float(t[-1])), [-8.0, 7.0, 27.0],
                    method="DOP853", t_eval=t, rtol=1e-10, atol=1e-10)
    return sol.y.T


@pytest.fixture(scope="module")
def clean_data():
    t = 0.002 * np.arange(10_000)
    return TrainingData.from_arrays(t, lorenz_samples(t), state_names=("x", "y", "z"))


def true_coefficients(names):
    """Lorenz-63 in the library's term order (closed form of the equations)."""
    xi = np.zeros((3, len(names)))
    xi[0, names.index("x")], xi[0, names.index("y")] = -SIGMA, SIGMA
    xi[1, names.index("x")], xi[1, names.index("y")], xi[1, names.index("x*z")] = RHO, -1.0, -1.0
    xi[2, names.index("x*y")], xi[2, names.index("z")] = 1.0, -BETA
    return xi


def assert_recovers(model, tol):
    true = true_coefficients(model.feature_names_)
    on = true != 0
    rel = np.abs(model.coefficients_[on] - true[on]) / np.abs(true[on])
    assert rel.max() < tol, (rel.max(), model.equations())
    assert np.all(model.coefficients_[~on] == 0.0), model.equations()


def test_recovers_lorenz63_coefficients(clean_data):
    # Brunton, Proctor & Kutz, PNAS 113, 3932 (2016): STLSQ recovers sigma, rho, beta and the
    # unit coefficients of Lorenz-63 and zeroes every other term; 1 % is our tolerance
    # (measured here: 0.15 % at dt 0.002 with second-order finite differences).
    model = SINDy(degree=2, threshold=0.1).fit(clean_data)
    assert_recovers(model, 0.01)
    assert model.n_parameters() == 7  # seven terms in the Lorenz-63 equations (closed form)


def test_readable_library_and_equations(clean_data):
    model = SINDy(degree=2).fit(clean_data)
    assert model.feature_names_ == ["1", "x", "y", "z", "x^2", "x*y", "x*z", "y^2", "y*z", "z^2"]
    eqs = model.equations()
    assert eqs[1].startswith("dy/dt = ") and "x*z" in eqs[1] and "y^2" not in eqs[1]
    assert model.coefficients_.shape == (3, 10)


def test_irregular_sampling():
    # Non-uniform second-order central differences (numpy.gradient) keep the recovery
    # within 1 % (Brunton et al. 2016, as above; measured 0.14 %).
    rng = np.random.default_rng(3)
    t = np.concatenate([[0.0], np.sort(rng.uniform(0.0, 20.0, 9_999))])
    data = TrainingData.from_arrays(t, lorenz_samples(t), state_names=("x", "y", "z"))
    assert not data.trajectories[0].regular
    assert_recovers(SINDy().fit(data), 0.01)


@pytest.mark.parametrize("derivative", ["savgol", "spline"])
def test_noisy_data_smoothed_derivatives(derivative):
    # 0.1 % noise (of each variable's spread): smoothed derivatives (Savitzky-Golay on a
    # regular grid, a GCV smoothing spline on an irregular one) still select the seven
    # Lorenz-63 terms, coefficients within 5 % (tolerance: common practice for smoothed SINDy).
    rng = np.random.default_rng(7)
    if derivative == "savgol":
        t = 0.005 * np.arange(2_000)
    else:
        t = np.concatenate([[0.0], np.sort(rng.uniform(0.0, 6.0, 1_199))])
    y = lorenz_samples(t)
    y = y + 1e-3 * y.std(axis=0) * rng.standard_normal(y.shape)
    data = TrainingData.from_arrays(t, y, state_names=("x", "y", "z"), noise=1e-3)
    model = SINDy(threshold=0.2).fit(data)  # "auto" picks the smoother from the sampling
    assert model.derivative_method_ == derivative
    assert_recovers(model, 0.05)


def test_partial_physics_recovers_removed_term(clean_data):
    # With rho*x removed from dy/dt, the learned part must be exactly that term:
    # coefficient rho = 28 (Lorenz 1963) within 1 %, every other learned coefficient zero.
    phys = Physics(level="partial", vector_field=lambda t, y, p: lorenz63(t, y, p, ("rho_x",)),
                   params=PARAMS, removed_term="rho_x")
    model = SINDy().fit(clean_data, phys)
    names = model.feature_names_
    learned = model.coefficients_.copy()
    assert learned[1, names.index("x")] == pytest.approx(RHO, rel=0.01)
    learned[1, names.index("x")] = 0.0
    assert np.all(learned == 0.0), model.equations()
    assert model.equations()[1].startswith("dy/dt = known + 28")


def test_identifies_rho(clean_data):
    # Identify task: rho from a guess 20 % off; least squares on the derivative residual
    # returns rho = 28 (Lorenz 1963) to 0.1 % (measured: 9e-6 relative).
    phys = Physics(level="full", vector_field=lorenz63, params=dict(PARAMS, rho=1.2 * RHO), unknown=("rho",))
    model = SINDy().fit(clean_data, phys)
    est = model.identified_params()
    assert set(est) == {"rho"}
    assert est["rho"] == pytest.approx(RHO, rel=1e-3)


def test_rollout_follows_the_true_flow(clean_data):
    # Inside one Lyapunov time (1/0.9056, Sprott 2003) the recovered model tracks the true
    # trajectory closely; 1 % of the attractor spread is our tolerance (common practice).
    model = SINDy().fit(clean_data)
    y0 = clean_data.trajectories[0].y[[1000, 6000]]
    t = 0.01 * np.arange(100)
    out = model.rollout(y0, t)
    assert out.shape == (2, 100, 3)
    np.testing.assert_array_equal(out[:, 0], y0)
    for b in range(2):
        ref = solve_ivp(lambda s, y: lorenz63(s, y, PARAMS), (0.0, t[-1]), y0[b], method="DOP853",
                        t_eval=t, rtol=1e-10, atol=1e-10).y.T
        err = np.abs(out[b] - ref) / clean_data.scale
        assert err.max() < 0.01


def test_time_features_for_a_forced_system():
    # Forced linear oscillator x'' = -x + cos(2 t): with explicit-time terms the library holds
    # the forcing exactly (closed-form equations), and SINDy finds it.
    t = 0.005 * np.arange(4_000)
    sol = solve_ivp(lambda s, y: [y[1], -y[0] + np.cos(2.0 * s)], (0.0, t[-1]), [1.0, 0.0],
                    method="DOP853", t_eval=t, rtol=1e-11, atol=1e-11)
    data = TrainingData.from_arrays(t, sol.y.T, state_names=("q", "v"))
    model = SINDy(degree=1, time_frequencies=(2.0,)).fit(data)
    names = model.feature_names_
    assert model.coefficients_[1, names.index("cos(2*t)")] == pytest.approx(1.0, rel=1e-3)
    assert model.coefficients_[1, names.index("q")] == pytest.approx(-1.0, rel=1e-3)
    assert model.coefficients_[0, names.index("v")] == pytest.approx(1.0, rel=1e-3)
    assert np.count_nonzero(model.coefficients_) == 3


def test_several_trajectories(clean_data):
    y = clean_data.trajectories[0].y
    t = clean_data.trajectories[0].t
    data = TrainingData((Trajectory(t[:5000], y[:5000]), Trajectory(t[5000:], y[5000:])),
                        state_names=("x", "y", "z"))
    assert_recovers(SINDy().fit(data), 0.01)  # Brunton et al. 2016, as above


# ------------------------------------------------------------------ typed errors
def test_blow_up_is_diverged():
    # dx/dt = x^2 from x(0) = 1 has x = 1/(1 - t) (closed form): it blows up at t = 1.
    t = np.linspace(0.0, 0.5, 200)
    data = TrainingData.from_arrays(t, (1.0 / (1.0 - t))[:, None])
    model = SINDy(degree=2).fit(data)
    with pytest.raises(DivergedError):
        model.rollout(np.array([[1.0]]), np.linspace(0.0, 2.0, 50))


def test_bad_input(clean_data):
    model = SINDy().fit(clean_data)
    with pytest.raises(InvalidDataError, match="dimension"):
        model.rollout(np.zeros((1, 2)), np.linspace(0.0, 1.0, 5))
    with pytest.raises(InvalidDataError, match="NaN"):
        TrainingData.from_arrays([0.0, 1.0, 2.0], [[0.0, 1.0], [np.nan, 1.0], [1.0, 2.0]])
    t = 0.01 * np.arange(6)
    with pytest.raises(InvalidDataError, match="at least 10 samples"):
        SINDy().fit(TrainingData.from_arrays(t, lorenz_samples(t)))
    with pytest.raises(InvalidDataError, match="derivative"):
        SINDy(derivative="magic").fit(clean_data)


def test_identify_needs_full_physics(clean_data):
    none = Physics(params=dict(PARAMS), unknown=("rho",))
    with pytest.raises(NotApplicableError):
        SINDy().fit(clean_data, none)
    partial = Physics(level="partial", vector_field=lambda t, y, p: lorenz63(t, y, p, ("rho_x",)),
                      params=dict(PARAMS), unknown=("sigma",), removed_term="rho_x")
    with pytest.raises(NotApplicableError, match="full"):
        SINDy().fit(clean_data, partial)
