"""Locally weighted linear regression of the one-step map in delay space."""

from __future__ import annotations

import numpy as np
from scipy.spatial import cKDTree

from surrogates import Capabilities, InvalidDataError, Learner

__all__ = ["LocalLinear"]


class LocalLinear(Learner):
    """Local linear forecasting: an affine one-step map fitted around each query point.

    The library holds the training delay vectors ``h_k = [y_k, ..., y_{k-q+1}]``
    (scaled per variable by ``TrainingData.scale``) and their successors
    ``y_{k+1}``. A rollout step takes the ``n_neighbors`` library vectors
    nearest to the current delay vector ``h``, weights them by the tricube
    kernel of their distance (relative to the farthest of them), and fits
    ``y_{k+1} ≈ a + B (h_k - h)`` by weighted ridge-regularised least
    squares; the prediction is ``a``. On data from a linear system the local
    affine fit is exact.

    Parameters
    ----------
    delays : int, default 2
        States per delay vector ``q``.
    n_neighbors : int, default 30
        Neighbours in each local fit (at least ``q * d + 1`` for a
        well-determined fit; the ridge term handles fewer).
    ridge : float, default 1e-8
        Ridge penalty on the slope ``B``, relative to the weighted mean
        squared distance of the neighbours (0: plain least squares).

    Attributes
    ----------
    library_ : ndarray, shape (N, q d)
        Scaled delay vectors.
    successors_ : ndarray, shape (N, d)
        The state one sample after each library vector.
    tree_ : scipy.spatial.cKDTree
    dt_ : float
        Sample spacing; rollouts must use it.

    References
    ----------
    J. D. Farmer and J. J. Sidorowich, "Predicting chaotic time series",
    Phys. Rev. Lett. 59, 845-848 (1987).
    W. S. Cleveland, "Robust locally weighted regression and smoothing
    scatterplots", J. Am. Stat. Assoc. 74, 829-836 (1979) (tricube weights).
    """

    capabilities = Capabilities(tasks={"forecast", "climate"}, physics={"none"}, deterministic=True,
                                needs_regular_sampling=True, min_samples=3)
    reference = ("J. D. Farmer and J. J. Sidorowich, Predicting chaotic time series, "
                 "Phys. Rev. Lett. 59, 845-848 (1987)")

    def __init__(self, delays=2, n_neighbors=30, ridge=1e-8):
        # store the hyper-parameters as given: no validation, arrays or random draws here
        self.delays = delays
        self.n_neighbors = n_neighbors
        self.ridge = ridge

    # ------------------------------------------------------------------ fit
    def _fit(self, data, physics, budget, seed):
        q = int(self.delays)
        if q < 1 or int(self.n_neighbors) < 1:
            raise ValueError("LocalLinear: delays and n_neighbors must be >= 1")
        dts = np.array([tr.dt for tr in data.trajectories if tr.t.size > 1])
        if dts.size == 0 or not np.allclose(dts, dts[0], rtol=1e-6, atol=0.0):
            raise InvalidDataError("LocalLinear needs trajectories of at least 2 samples at one common spacing")
        scale = np.asarray(data.scale, dtype=float)
        lib, succ = [], []
        for tr in data.trajectories:
            z = tr.y / scale
            n = z.shape[0]
            if n < q + 1:
                continue
            # row i: [z_{i+q-1}, z_{i+q-2}, ..., z_i], successor y_{i+q}
            lib.append(np.concatenate([z[q - 1 - j: n - 1 - j] for j in range(q)], axis=1))
            succ.append(tr.y[q:])
        if not lib or sum(len(a) for a in lib) < 2:
            raise InvalidDataError(f"LocalLinear with delays={q} needs a trajectory of at least {q + 2} samples")
        self.dt_ = float(dts[0])
        self.scale_ = scale
        self.library_ = np.concatenate(lib)
        self.successors_ = np.concatenate(succ)
        self.tree_ = cKDTree(self.library_)

    # ------------------------------------------------------------- forecast
    def _step(self, H):
        """Next states (B, d) for scaled delay vectors ``H`` (B, q d)."""
        k = min(int(self.n_neighbors), self.library_.shape[0])
        dist, idx = self.tree_.query(H, k=k)
        dist, idx = dist.reshape(len(H), k), idx.reshape(len(H), k)
        out = np.empty((len(H), self.successors_.shape[1]))
        for b in range(len(H)):
            X = self.library_[idx[b]] - H[b]  # (k, q d), centred at the query
            Y = self.successors_[idx[b]]  # (k, d)
            reach = dist[b].max() * (1.0 + 1e-9) + 1e-300
            w = (1.0 - (dist[b] / reach) ** 3) ** 3  # tricube
            sw = np.sqrt(w)[:, None]
            A = np.hstack([np.ones((k, 1)), X]) * sw
            rhs = Y * sw
            # ridge relative to the weighted spread of the neighbours, so it does not depend on units
            lam = np.sqrt(float(self.ridge) * np.sum(w[:, None] * X ** 2) / max(X.shape[1], 1))
            if lam > 0:  # ridge on the slope only
                pen = np.hstack([np.zeros((X.shape[1], 1)), lam * np.eye(X.shape[1])])
                A = np.vstack([A, pen])
                rhs = np.vstack([rhs, np.zeros((X.shape[1], Y.shape[1]))])
            coef, *_ = np.linalg.lstsq(A, rhs, rcond=None)
            out[b] = coef[0]
        return out

    def _rollout(self, y0, t, history):
        q = int(self.delays)
        B, d = y0.shape
        if t.size > 1:
            h = np.diff(t)
            if not np.allclose(h, self.dt_, rtol=1e-6, atol=0.0):
                raise InvalidDataError(f"LocalLinear steps at the training spacing {self.dt_:g}; "
                                       f"rollout times must use it")
        # the q most recent states, most recent first
        if q == 1:
            window = y0[:, None, :]
        else:
            if history is None:
                raise InvalidDataError(f"LocalLinear needs a history of the {q - 1} states before the start")
            hist = history
            if not np.allclose(hist[:, -1], y0, rtol=1e-12, atol=1e-12):
                hist = np.concatenate([hist, y0[:, None, :]], axis=1)
            if hist.shape[1] < q:
                raise InvalidDataError(f"LocalLinear needs {q - 1} history states, got {hist.shape[1] - 1}")
            window = hist[:, ::-1][:, :q].copy()
        out = np.empty((B, t.size, d))
        out[:, 0] = y0
        for j in range(1, t.size):
            nxt = self._step((window / self.scale_).reshape(B, q * d))
            out[:, j] = nxt
            window = np.concatenate([nxt[:, None, :], window[:, :-1]], axis=1)
        return out

    def _n_parameters(self):
        return int(self.library_.size + self.successors_.size)
