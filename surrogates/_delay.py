"""Delay coordinates shared by the delay-space learners (Hankel DMD, analogues).

A delay vector at sample ``k`` stacks the ``q`` most recent states, most
recent first: ``[y_k, y_{k-1}, ..., y_{k-q+1}]`` (length ``q * d``).

References
----------
F. Takens, "Detecting strange attractors in turbulence", Lect. Notes
Math. 898, 366-381 (1981).
"""

from __future__ import annotations

import numpy as np
from scipy.interpolate import CubicSpline

from .errors import InvalidDataError

__all__ = ["delay_vectors", "start_delays", "on_output_grid", "output_spacing"]


def delay_vectors(y: np.ndarray, q: int) -> np.ndarray:
    """Delay vectors of one trajectory ``y`` (n, d): shape (n - q + 1, q * d); row i ends at sample i + q - 1."""
    n, d = y.shape
    if n < q:
        return np.empty((0, q * d))
    # column block j holds y_{k-j}
    return np.concatenate([y[q - 1 - j: n - j] for j in range(q)], axis=1)


def output_spacing(t: np.ndarray) -> float:
    """The spacing of equally spaced output times ``t`` (n,), checked."""
    if t.ndim != 1 or t.size < 1:
        raise InvalidDataError(f"rollout times must have shape (n,), got {t.shape}")
    if t.size == 1:
        return float("nan")
    h = np.diff(t)
    if np.any(h <= 0) or not np.allclose(h, h[0], rtol=1e-6, atol=0.0):
        raise InvalidDataError("rollout times must be increasing and equally spaced")
    return float(h[0])


def start_delays(y0: np.ndarray, history, h: float, dt: float, q: int, who: str) -> np.ndarray:
    """States at ``0, -dt, ..., -(q-1) dt`` before the start, shape (B, q, d), most recent first.

    ``history`` (B, m, d) holds states at spacing ``h`` ending at ``y0``
    (its last row is ``y0`` or the state just before it). When ``h`` equals
    ``dt`` the rows are used as they are; otherwise the history is
    interpolated by a cubic spline onto the ``dt`` grid.
    """
    B, d = y0.shape
    if q == 1:
        return y0[:, None, :]
    if history is None:
        raise InvalidDataError(f"{who} needs a history of the {q - 1} states before the start (delay coordinates)")
    hist = np.asarray(history, dtype=float)
    # ensure the history ends at y0
    if not np.allclose(hist[:, -1, :], y0, rtol=1e-12, atol=1e-12):
        hist = np.concatenate([hist, y0[:, None, :]], axis=1)
    m = hist.shape[1]
    if not np.isfinite(h) or np.isclose(h, dt, rtol=1e-6, atol=0.0):
        if m < q:
            raise InvalidDataError(f"{who} needs at least {q - 1} history states before the start, got {m - 1}")
        return hist[:, ::-1, :][:, :q, :]
    needed = (q - 1) * dt
    if (m - 1) * h < needed * (1 - 1e-9) or m < 2:
        raise InvalidDataError(
            f"{who} needs a history covering {needed:g} time units before the start, got {(m - 1) * h:g}")
    th = -h * np.arange(m)[::-1]
    target = -dt * np.arange(q)
    if m >= 4:
        out = CubicSpline(th, hist, axis=1)(target)
    else:
        out = np.stack([np.stack([np.interp(target, th, hist[b, :, i]) for i in range(d)], axis=-1)
                        for b in range(B)])
    out[:, 0, :] = y0
    return out


def on_output_grid(states: np.ndarray, dt: float, tau: np.ndarray) -> np.ndarray:
    """Values at times ``tau`` (from 0) of states (B, N, d) given on the grid ``0, dt, ..., (N-1) dt``.

    Exact (index selection) where ``tau`` falls on the grid; cubic
    interpolation in between.
    """
    idx = tau / dt
    near = np.rint(idx)
    if np.allclose(idx, near, rtol=0.0, atol=1e-6):
        return states[:, near.astype(int), :]
    grid = dt * np.arange(states.shape[1])
    if states.shape[1] >= 4:
        return CubicSpline(grid, states, axis=1)(tau)
    return np.stack([np.stack([np.interp(tau, grid, states[b, :, i]) for i in range(states.shape[2])], axis=-1)
                     for b in range(states.shape[0])])
