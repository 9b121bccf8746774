"""Next-generation reservoir computing: Lorenz-63 forecasts from a few hundred samples, typed errors."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from surrogates import InvalidDataError, NotApplicableError, Physics, TrainingData, Trajectory
from surrogates.ngrc import NextGenerationRC

DT = 0.025  # sampling step of Gauthier et al., Nat. Commun. 12, 5564 (2021), Lorenz-63 task
LYAPUNOV_TIME = 1.0 / 0.9056  # largest exponent 0.9056 (Sprott, Chaos and Time-Series Analysis, 2003)


def lorenz63(t, y):
    """Lorenz-63 with sigma 10, rho 28, beta 8/3 (E. N. Lorenz, J. Atmos. Sci. 20, 130 (1963))."""
    return [10.0 * (y[1] - y[0]), y[0] * (28.0 - y[2]) - y[1], y[0] * y[1] - 8.0 / 3.0 * y[2]]


def lorenz_series(n, dt=DT, transient=50.0, y0=(1.0, 1.0, 1.0)):
    t = transient + dt * np.arange(n)
    sol = solve_ivp(lorenz63, (0.0, t[-1]), list(y0), method="DOP853", t_eval=t, rtol=1e-10, atol=1e-10)
    return t - transient, sol.y.T


@pytest.fixture(scope="module")
def setup():
    t, y = lorenz_series(400 + 2_000)
    data = TrainingData.from_arrays(t[:400], y[:400])  # 400 training points, as in Gauthier et al. (2021)
    scale = y.std(axis=0)  # per-variable attractor standard deviation (60 time units; the NRMSE scale)
    return t, y, data, scale, NextGenerationRC(k=2, s=1, ridge=2.5e-6).fit(data)


def test_forecasts_one_lyapunov_time_from_400_samples(setup):
    # Gauthier et al. (2021): NG-RC (k=2, s=1, quadratic monomials) trained on 400 points at
    # dt 0.025 forecasts Lorenz-63 with a normalised error of order 1e-2 over one Lyapunov
    # time. Check: over the first Lyapunov time the NRMSE (per-variable attractor std) stays
    # below 0.4 for every one of five test starts (measured here: 1e-3 to 1e-2).
    t, y, data, scale, model = setup
    n1 = int(np.ceil(LYAPUNOV_TIME / DT)) + 1
    starts = [450 + 300 * i for i in range(5)]
    hist = np.stack([y[s - 1:s + 1] for s in starts])
    pred = model.rollout(y[starts], DT * np.arange(n1), hist)
    for i, s in enumerate(starts):
        err = np.sqrt(np.mean(((pred[i] - y[s:s + n1]) / scale) ** 2, axis=-1))
        assert err.max() < 0.4, (s, err.max())


def test_feature_vector_size_and_names(setup):
    # Gauthier et al. (2021): d k = 6 linear features, 21 unique quadratic monomials, a constant: 28.
    *_, model = setup
    assert model.w_out_.shape == (3, 28)
    assert model.feature_names_[:4] == ["1", "y0", "y1", "y2"]
    assert "y0*y2(t-1)" in model.feature_names_
    assert model.n_parameters() == 84


def test_history_needed_and_analogue_fallback(setup):
    # k = 3, s = 2 needs four samples before the start; a history of that length and a
    # longer one give the same forecast (only the last (k-1)s samples matter), and no
    # history still forecasts (borrowed warm-up) for at least half a Lyapunov time.
    t, y, data, scale, _ = setup
    model = NextGenerationRC(k=3, s=2).fit(data)
    s = 700
    a = model.rollout(y[[s]], DT * np.arange(30), y[None, s - 4:s + 1])
    b = model.rollout(y[[s]], DT * np.arange(30), y[None, s - 20:s + 1])
    np.testing.assert_allclose(a, b, rtol=0, atol=1e-12)
    c = model.rollout(y[[s]], DT * np.arange(30))
    err = np.sqrt(np.mean(((c[0] - y[s:s + 30]) / scale) ** 2, axis=-1))
    assert err[: int(0.5 * LYAPUNOV_TIME / DT)].max() < 0.4


def test_coarser_output_grid_subsamples_the_forecast():
    # Output spacing twice the training step: two model steps per output; a history at the
    # coarse spacing is refined by a cubic spline, so the two forecasts agree to the spline's
    # accuracy (finely sampled data here, dt 0.005, where the spline error is small).
    dt = 0.005
    t, y = lorenz_series(1_200, dt=dt)
    model = NextGenerationRC().fit(TrainingData.from_arrays(t[:800], y[:800]))
    fine = model.rollout(y[[1_000]], dt * np.arange(21), y[None, 960:1_001])
    coarse = model.rollout(y[[1_000]], 2 * dt * np.arange(11), y[None, 960:1_001:2])
    assert coarse.shape == (1, 11, 3)
    np.testing.assert_allclose(coarse[0], fine[0, ::2], rtol=0, atol=0.01 * float(y.std(axis=0).min()))


def test_several_trajectories(setup):
    t, y, *_ = setup
    data = TrainingData((Trajectory(t[:200], y[:200]), Trajectory(t[1000:1200], y[1000:1200])))
    model = NextGenerationRC().fit(data)
    assert model.n_training_samples_ == 2 * (200 - 2)


def test_bad_input(setup):
    t, y, data, scale, model = setup
    with pytest.raises(InvalidDataError, match="dimension"):
        model.rollout(np.zeros((1, 4)), DT * np.arange(5))
    with pytest.raises(InvalidDataError, match="NaN"):
        bad = y[:50].copy()
        bad[3, 0] = np.inf
        TrainingData.from_arrays(t[:50], bad)
    with pytest.raises(InvalidDataError, match="at least 10 samples"):
        NextGenerationRC().fit(TrainingData.from_arrays(t[:5], y[:5]))
    with pytest.raises(InvalidDataError, match="more than"):
        NextGenerationRC(k=8, s=3).fit(TrainingData.from_arrays(t[:15], y[:15]))
    irregular = np.sort(np.random.default_rng(0).uniform(0.0, 10.0, 50))
    with pytest.raises(InvalidDataError, match="equally spaced"):
        NextGenerationRC().fit(TrainingData.from_arrays(irregular, y[:50]))
    phys = Physics(level="partial", vector_field=lambda s, x, p: x, params={}, removed_term="a")
    with pytest.raises(NotApplicableError, match="physics level"):
        NextGenerationRC().fit(data, phys)
    with pytest.raises(InvalidDataError, match="multiple"):
        model.rollout(y[[500]], 0.6 * DT * np.arange(5))


@pytest.mark.parametrize("n, p", [(40, 12), (30, 200)])
def test_ridge_readout_matches_numpy_least_squares_in_both_forms(n, p):
    """Primal (n >= p) and dual (p > n) ridge give the weights of the augmented least-squares
    problem solved by numpy.linalg.lstsq (the push-through identity; closed form)."""
    from surrogates.ngrc import _ridge

    rng = np.random.default_rng(7)
    phi, target, lam = rng.standard_normal((n, p)), rng.standard_normal((n, 3)), 1e-3
    aug = np.concatenate([phi, np.sqrt(lam) * np.eye(p)])
    expected = np.linalg.lstsq(aug, np.concatenate([target, np.zeros((p, 3))]), rcond=None)[0]
    np.testing.assert_allclose(_ridge(phi, target, lam), expected, rtol=1e-9, atol=1e-11)
