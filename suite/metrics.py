"""Accuracy metrics of the harness: pure functions on arrays.

Every function takes plain arrays (or, for the surrogate's Lyapunov
exponent, a rollout callable) and returns floats or arrays; none knows about
systems, learners or cells. Conventions:

* states have shape ``(..., n, d)``: time along axis -2, variables along -1;
* "normalised" means divided, variable by variable, by the standard
  deviation of that variable on the attractor (``scale``, shape ``(d,)``),
  so that an error of 1 is an error as large as the attractor's spread.

The task layer (:mod:`suite.tasks`) decides which metric rows a cell
reports; the names of those rows are listed in :data:`suite.tasks.METRIC_NAMES`.
"""

from __future__ import annotations

from typing import Callable, Mapping

import numpy as np
from scipy.signal import welch
from scipy.stats import wasserstein_distance

__all__ = [
    "energy_drift",
    "nrmse_curve",
    "relative_l2",
    "relative_parameter_error",
    "spectrum_distance",
    "surrogate_largest_lyapunov",
    "valid_prediction_time",
    "wasserstein_distances",
]


def _scale(scale, d: int) -> np.ndarray:
    s = np.ones(d) if scale is None else np.asarray(scale, dtype=float)
    if s.shape != (d,):
        raise ValueError(f"scale must have shape ({d},), got {s.shape}")
    if np.any(~np.isfinite(s)) or np.any(s <= 0):
        raise ValueError("scale must be positive and finite")
    return s


def nrmse_curve(pred, true, scale=None) -> np.ndarray:
    r"""Normalised root-mean-square error at each time.

    .. math::
        e(t) = \Big(\frac1d \sum_{i=1}^d
        \frac{(\hat y_i(t) - y_i(t))^2}{\sigma_i^2}\Big)^{1/2}

    with :math:`\sigma_i` the attractor standard deviation of variable ``i``.

    Parameters
    ----------
    pred, true : array, shape (..., n, d)
    scale : array, shape (d,), optional
        Per-variable standard deviation on the attractor (default: ones).

    Returns
    -------
    ndarray, shape (..., n)

    References
    ----------
    P. R. Vlachas et al., "Backpropagation algorithms and reservoir computing
    in recurrent neural networks for the forecasting of complex spatiotemporal
    dynamics", Neural Networks 126, 191–217 (2020) (NRMSE normalised by the
    attractor standard deviation).
    """
    pred = np.asarray(pred, dtype=float)
    true = np.asarray(true, dtype=float)
    if pred.shape != true.shape:
        raise ValueError(f"prediction shape {pred.shape} differs from truth {true.shape}")
    s = _scale(scale, true.shape[-1])
    return np.sqrt(np.mean(((pred - true) / s) ** 2, axis=-1))


def valid_prediction_time(t, error, threshold: float = 0.4) -> float:
    """Time from ``t[0]`` until the error first exceeds ``threshold``.

    Parameters
    ----------
    t : array, shape (n,)
        Increasing times (any unit; the result is in the same unit).
    error : array, shape (n,)
        Error curve, e.g. from :func:`nrmse_curve`. A non-finite error
        counts as exceeding the threshold.
    threshold : float
        Default 0.4, the value of Pathak et al. (2018).

    Returns
    -------
    float
        ``t[k] - t[0]`` for the first ``k`` with ``error[k] > threshold``;
        ``t[-1] - t[0]`` if the error never exceeds it (the value is then
        censored by the length of the curve; callers record that).

    References
    ----------
    J. Pathak, B. Hunt, M. Girvan, Z. Lu, E. Ott, "Model-free prediction of
    large spatiotemporally chaotic systems from data: a reservoir computing
    approach", Phys. Rev. Lett. 120, 024102 (2018).
    """
    t = np.asarray(t, dtype=float)
    e = np.asarray(error, dtype=float)
    if t.shape != e.shape or t.ndim != 1 or t.size == 0:
        raise ValueError(f"t and error must be 1-d of equal length, got {t.shape} and {e.shape}")
    bad = ~(e <= threshold)  # True where above the threshold or NaN
    if not bad.any():
        return float(t[-1] - t[0])
    return float(t[int(np.argmax(bad))] - t[0])


def relative_l2(pred, true) -> float:
    r"""Relative L2 error :math:`\|\hat y - y\|_2 / \|y\|_2` over all times and variables.

    References
    ----------
    M. Raissi, P. Perdikaris, G. E. Karniadakis, "Physics-informed neural
    networks", J. Comput. Phys. 378, 686–707 (2019) (the error they report).
    """
    pred = np.asarray(pred, dtype=float)
    true = np.asarray(true, dtype=float)
    if pred.shape != true.shape:
        raise ValueError(f"prediction shape {pred.shape} differs from truth {true.shape}")
    den = np.linalg.norm(true.ravel())
    if den == 0:
        raise ValueError("relative L2 error is undefined for an all-zero truth")
    return float(np.linalg.norm((pred - true).ravel()) / den)


def relative_parameter_error(estimate: Mapping[str, float], truth: Mapping[str, float]) -> dict[str, float]:
    r"""Relative error :math:`|\hat p - p| / |p|` of each parameter named in ``estimate``.

    A parameter whose true value is 0 gets the absolute error instead.
    A missing or non-finite estimate gives ``inf``.

    References
    ----------
    Common practice in system identification, e.g. S. L. Brunton, J. L.
    Proctor, J. N. Kutz, "Discovering governing equations from data by sparse
    identification of nonlinear dynamical systems", PNAS 113, 3932 (2016).
    """
    out = {}
    for name, true_value in truth.items():
        est = estimate.get(name, np.nan)
        est = float(est) if est is not None else np.nan
        if not np.isfinite(est):
            out[name] = float("inf")
            continue
        den = abs(float(true_value))
        out[name] = abs(est - float(true_value)) / (den if den > 0 else 1.0)
    return out


def wasserstein_distances(a, b, scale=None) -> np.ndarray:
    """Wasserstein-1 distance per variable between two samples of states, normalised.

    Parameters
    ----------
    a, b : array, shape (n_a, d) and (n_b, d)
        States sampled from the two invariant distributions (time series
        flattened; their lengths may differ).
    scale : array, shape (d,), optional
        Per-variable attractor standard deviation; each distance is divided
        by it.

    Returns
    -------
    ndarray, shape (d,)

    References
    ----------
    L. V. Kantorovich (1942); computed with ``scipy.stats.wasserstein_distance``
    (the 1-d distance between empirical distributions).
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    if a.ndim != 2 or b.ndim != 2 or a.shape[1] != b.shape[1]:
        raise ValueError(f"samples must be (n, d) with equal d, got {a.shape} and {b.shape}")
    s = _scale(scale, a.shape[1])
    return np.array([wasserstein_distance(a[:, i], b[:, i]) for i in range(a.shape[1])]) / s


def spectrum_distance(a, b, dt: float, nperseg: int = 256, floor: float = 1e-12) -> float:
    r"""Mean absolute log10-ratio of the Welch power spectra of two time series.

    .. math::
        D = \frac{1}{d\,m}\sum_{i=1}^d\sum_{k=1}^m
        \Big|\log_{10}\frac{P^a_i(f_k) + \epsilon_i}{P^b_i(f_k) + \epsilon_i}\Big|

    over the ``m`` non-zero Welch frequencies, with
    :math:`\epsilon_i` = ``floor`` times the largest power of ``b``'s spectrum
    of variable ``i`` (so that numerically empty bands do not dominate).
    ``D = 1`` means the spectra differ by a factor 10 on average.

    Parameters
    ----------
    a, b : array, shape (n, d)
        Equally spaced series with step ``dt`` (``a`` the surrogate, ``b`` the truth).
    dt : float
    nperseg : int
        Welch segment length (capped at the shorter series' length).

    References
    ----------
    P. D. Welch, "The use of fast Fourier transform for the estimation of
    power spectra", IEEE Trans. Audio Electroacoust. 15, 70–73 (1967);
    computed with ``scipy.signal.welch``.
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    if a.ndim != 2 or b.ndim != 2 or a.shape[1] != b.shape[1]:
        raise ValueError(f"series must be (n, d) with equal d, got {a.shape} and {b.shape}")
    n = int(min(nperseg, a.shape[0], b.shape[0]))
    if n < 4:
        raise ValueError("series too short for a power spectrum")
    _, pa = welch(a, fs=1.0 / dt, nperseg=n, axis=0)
    _, pb = welch(b, fs=1.0 / dt, nperseg=n, axis=0)
    pa, pb = pa[1:], pb[1:]
    eps = floor * np.max(pb, axis=0) + np.finfo(float).tiny
    return float(np.mean(np.abs(np.log10((pa + eps) / (pb + eps)))))


def energy_drift(values) -> float:
    r"""Largest relative drift of a conserved quantity along a trajectory.

    .. math:: \max_t |q(t) - q(t_0)| / |q(t_0)|

    (absolute drift where :math:`q(t_0) = 0`). ``values`` has shape (n,)
    or (B, n); for a batch the median over trajectories is returned.
    Non-finite values give ``inf``.

    References
    ----------
    E. Hairer, C. Lubich, G. Wanner, *Geometric Numerical Integration*,
    2nd ed., Springer (2006), ch. I and IX (energy error of integrators).
    """
    q = np.atleast_2d(np.asarray(values, dtype=float))
    q0 = q[:, :1]
    den = np.where(np.abs(q0) > 0, np.abs(q0), 1.0)
    with np.errstate(invalid="ignore"):
        drift = np.max(np.abs(q - q0) / den, axis=1)
    drift = np.where(np.isfinite(drift), drift, np.inf)
    return float(np.median(drift))


def surrogate_largest_lyapunov(rollout: Callable, y0, history, dt: float, *, scale=None,
                               chunk_steps: int = 100, n_chunks: int = 30,
                               delta: float = 1e-6, discard_chunks: int = 3) -> float:
    r"""Largest Lyapunov exponent of a model's flow, by finite perturbations.

    Benettin-style two-trajectory method: a reference and a perturbed start
    (distance ``delta`` in normalised coordinates) are rolled out together
    for ``chunk_steps`` steps of ``dt``; the separation ``d`` is measured
    (normalised by ``scale``), ``log(d/delta)`` accumulated, and the perturbed
    state is put back at distance ``delta`` along the separation. The
    estimate is the mean growth rate over the chunks after the first
    ``discard_chunks`` (which let the perturbation align with the most
    unstable direction).

    Parameters
    ----------
    rollout : callable
        ``rollout(y0 (2, d), t (n,), history (2, m, d) or None) -> (2, n, d)``,
        e.g. a fitted learner's ``rollout``.
    y0 : array, shape (d,)
    history : array, shape (m, d) or None
        States before ``y0`` at spacing ``dt``, ending at ``y0``. The
        perturbed trajectory's history is this one shifted by the perturbation.
    dt : float
    scale : array, shape (d,), optional

    Returns
    -------
    float
        Exponent in inverse time units of ``dt``; ``nan`` if the rollout
        became non-finite; ``-inf`` if the perturbation vanished.

    References
    ----------
    G. Benettin, L. Galgani, A. Giorgilli, J.-M. Strelcyn, "Lyapunov
    characteristic exponents for smooth dynamical systems and for Hamiltonian
    systems; a method for computing all of them", Meccanica 15, 9–20 (1980).
    A. Wolf, J. B. Swift, H. L. Swinney, J. A. Vastano, "Determining Lyapunov
    exponents from a time series", Physica D 16, 285–317 (1985).
    """
    y = np.asarray(y0, dtype=float)
    d = y.shape[0]
    s = _scale(scale, d)
    hist = None if history is None else np.asarray(history, dtype=float)
    rng = np.random.default_rng(0)
    u = rng.standard_normal(d)
    u /= np.linalg.norm(u)
    off = delta * u * s  # physical offset with normalised length delta
    a, b = y, y + off
    ha, hb = hist, (None if hist is None else hist + off)
    t = dt * np.arange(chunk_steps + 1)
    logs = []
    for _ in range(n_chunks):
        h = None if ha is None else np.stack([ha, hb])
        out = np.asarray(rollout(np.stack([a, b]), t, h), dtype=float)
        if out.shape != (2, t.size, d) or not np.all(np.isfinite(out)):
            return float("nan")
        ea, eb = out[0, -1], out[1, -1]
        sep = (eb - ea) / s
        dist = float(np.linalg.norm(sep))
        if dist == 0.0:
            return float("-inf")
        logs.append(np.log(dist / delta))
        a = ea
        b = ea + (delta / dist) * (eb - ea)
        if ha is not None:
            ha = np.concatenate([ha, out[0, 1:]])[-ha.shape[0]:]
            hb = ha + (b - a)
    kept = logs[discard_chunks:] if len(logs) > discard_chunks else logs
    return float(np.mean(kept) / (chunk_steps * dt))
