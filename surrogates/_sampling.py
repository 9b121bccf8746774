"""Time-grid helpers shared by the discrete-time learners (reservoirs, delay models)."""

from __future__ import annotations

import numpy as np
from scipy.spatial import cKDTree

from .errors import InvalidDataError

__all__ = ["steps_per_output", "substeps", "analogue_history", "refine"]


def substeps(t, step: float) -> tuple[float, int]:
    """Output spacing ``h`` of ``t`` (at least two times) and the integrator steps per output step.

    For continuous-time learners, which integrate at about ``step`` and may
    take any whole number of steps (at least one) per output step.
    """
    t = np.asarray(t, dtype=float)
    h = float(t[1] - t[0])
    if not (np.isfinite(h) and h > 0) or not np.allclose(np.diff(t), h, rtol=1e-6, atol=1e-12):
        raise InvalidDataError("rollout times must be equally spaced and increasing")
    return h, max(1, int(round(h / step)))


def steps_per_output(t, dt, who):
    """Model steps per output step: the spacing of ``t`` must be a whole multiple of ``dt``."""
    t = np.asarray(t, dtype=float)
    if t.size < 2:
        return 1
    h = np.diff(t)
    if not np.allclose(h, h[0], rtol=1e-6, atol=0.0) or h[0] <= 0:
        raise InvalidDataError(f"{who} needs equally spaced, increasing output times")
    m = int(round(h[0] / dt))
    if m < 1 or abs(h[0] - m * dt) > 1e-6 * h[0]:
        raise InvalidDataError(
            f"{who} steps by its training spacing {dt:g}; output spacing {h[0]:g} is not a whole multiple")
    return m


def analogue_history(y0, train, mean, scale, length, stride=1):
    """A stand-in history for start states that come without one.

    For each start state, finds the nearest training sample (in standardised
    coordinates) that has at least ``length`` samples before it, and returns
    those samples shifted by the start state's offset from that neighbour (so that
    they end at the start state), in original units at the
    training spacing: shape (B, length + 1, d); ``length`` is capped by the
    longest training trajectory. ``train`` is a list of
    standardised trajectories (n, d). ``stride`` is unused beyond validation
    (kept so both callers read alike).
    """
    del stride
    length = max(min(int(length), max(u.shape[0] for u in train) - 1), 0)
    pool, where = [], []
    for i, u in enumerate(train):
        if u.shape[0] > length:
            pool.append(u[length:])
            where.extend((i, j) for j in range(length, u.shape[0]))
    if not pool:
        raise InvalidDataError(f"no training trajectory is longer than the warm-up of {length} samples")
    tree = cKDTree(np.concatenate(pool))
    z0 = (np.asarray(y0, dtype=float) - mean) / scale
    _, idx = tree.query(z0)
    out = np.empty((z0.shape[0], length + 1, z0.shape[1]))
    for b, k in enumerate(np.atleast_1d(idx)):
        i, j = where[int(k)]
        seg = train[i][j - length:j + 1]
        # shift the borrowed samples so that they end exactly at the start state
        out[b] = (seg + (z0[b] - seg[-1])) * scale + mean
    out[:, -1] = y0
    return out


def refine(u, stride):
    """Cubic-spline resample of (B, m, d) samples onto a grid ``stride`` times finer.

    Used when a history comes at a whole multiple of the training spacing.
    """
    from scipy.interpolate import CubicSpline

    m = u.shape[1]
    if stride == 1 or m < 2:
        return u
    s = np.arange(m, dtype=float)
    fine = np.arange((m - 1) * stride + 1, dtype=float) / stride
    return CubicSpline(s, u, axis=1)(fine)
