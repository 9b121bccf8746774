"""Cubic-spline interpolation of the samples: the reconstruction baseline."""

from __future__ import annotations

import numpy as np
from scipy.interpolate import CubicSpline

from .base import Capabilities, Learner
from .errors import InvalidDataError

__all__ = ["SplineInterpolant"]


class SplineInterpolant(Learner):
    """Piecewise-cubic interpolation of each trajectory's samples.

    Every reconstruction method must beat this: it uses no model of the
    dynamics at all, yet on smooth, clean data its error falls as the fourth
    power of the sampling step. Noise is interpolated, not smoothed.

    Parameters
    ----------
    bc_type : str, default "not-a-knot"
        End condition passed to :class:`scipy.interpolate.CubicSpline`.

    Attributes
    ----------
    splines_ : list of CubicSpline
        One spline per training trajectory (vector-valued).
    windows_ : ndarray, shape (n_traj, 2)
        Time window of each trajectory.

    Notes
    -----
    A time inside one trajectory's window is evaluated on that trajectory's
    spline; a time outside every window on the spline of the nearest window
    (the end cubic is extended).

    References
    ----------
    C. de Boor, A Practical Guide to Splines, Springer (1978), chapter IV
    (cubic spline interpolation, O(h^4) error for smooth functions).
    """

    capabilities = Capabilities(tasks={"reconstruct"}, physics={"none"}, deterministic=True, min_samples=2)
    reference = "C. de Boor, A Practical Guide to Splines, Springer (1978), ch. IV"

    def __init__(self, bc_type="not-a-knot"):
        self.bc_type = bc_type

    def _fit(self, data, physics, budget, seed):
        splines, windows = [], []
        for tr in data.trajectories:
            if tr.t.size < 2:
                continue
            # scipy: with "not-a-knot", 2 samples give a line and 3 a parabola
            splines.append(CubicSpline(tr.t, tr.y, axis=0, bc_type=self.bc_type))
            windows.append((tr.t[0], tr.t[-1]))
        if not splines:
            raise InvalidDataError("SplineInterpolant needs a trajectory with at least 2 samples")
        self.splines_ = splines
        self.windows_ = np.asarray(windows, dtype=float)
        self.n_coefficients_ = int(sum(s.c.size for s in splines))

    def _predict(self, t):
        t = np.atleast_1d(t)
        lo, hi = self.windows_[:, 0], self.windows_[:, 1]
        # distance of each time to each window (0 inside)
        dist = np.maximum(lo[None, :] - t[:, None], 0.0) + np.maximum(t[:, None] - hi[None, :], 0.0)
        which = np.argmin(dist, axis=1)
        out = np.empty((t.size, self.dim_))
        for j, spline in enumerate(self.splines_):
            sel = which == j
            if np.any(sel):
                out[sel] = spline(t[sel])
        return out

    def _n_parameters(self):
        return self.n_coefficients_
