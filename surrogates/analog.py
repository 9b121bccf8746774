"""The method of analogues: follow what happened after the nearest past states."""

from __future__ import annotations

import numpy as np
from scipy.spatial import cKDTree

from ._delay import delay_vectors, on_output_grid, output_spacing, start_delays
from .base import Capabilities, Learner
from .errors import InvalidDataError, TooFewSamplesError

__all__ = ["Analogues"]


class Analogues(Learner):
    """Nearest-neighbour forecasting in delay space.

    The library holds every training delay vector ``h_k = [y_k, ...,
    y_{k-q+1}]`` (scaled per variable) that has a successor sample. A rollout
    step finds the ``n_neighbors`` library vectors nearest to the current
    delay vector (a :class:`scipy.spatial.cKDTree` query) and takes the
    inverse-distance weighted mean of their successor states; an exact match
    takes all the weight. With ``n_neighbors=1`` this is Lorenz's analogue.

    Parameters
    ----------
    delays : int, default 3
        Number of states ``q`` in a delay vector.
    n_neighbors : int, default 4
        Analogues averaged per step.

    Attributes
    ----------
    tree_ : cKDTree
        Tree over the scaled library delay vectors.
    successors_ : ndarray, shape (N, d)
        The state one sample after each library vector (unscaled).
    dt_ : float
        Sample spacing; rollouts step at this spacing and are interpolated
        (cubic) onto other output spacings.

    References
    ----------
    E. N. Lorenz, "Atmospheric predictability as revealed by naturally
    occurring analogues", J. Atmos. Sci. 26, 636-646 (1969).
    """

    capabilities = Capabilities(tasks={"forecast", "climate"}, physics={"none"}, deterministic=True,
                                needs_regular_sampling=True, min_samples=2)
    reference = ("E. N. Lorenz, Atmospheric predictability as revealed by naturally occurring analogues, "
                 "J. Atmos. Sci. 26, 636-646 (1969)")

    def __init__(self, delays=3, n_neighbors=4):
        self.delays = delays
        self.n_neighbors = n_neighbors

    def _fit(self, data, physics, budget, seed):
        q, k = int(self.delays), int(self.n_neighbors)
        if q < 1 or k < 1:
            raise ValueError(f"Analogues: delays and n_neighbors must be >= 1, got {self.delays!r}, {self.n_neighbors!r}")
        dts = np.array([tr.dt for tr in data.trajectories if tr.t.size > 1])
        if dts.size == 0 or not np.allclose(dts, dts[0], rtol=1e-6, atol=0.0):
            raise InvalidDataError("Analogues needs trajectories of at least 2 samples at one common spacing")
        scale = np.asarray(data.scale, dtype=float)
        lib, succ = [], []
        for tr in data.trajectories:
            H = delay_vectors(tr.y / scale, q)
            if H.shape[0] >= 2:
                lib.append(H[:-1])
                succ.append(tr.y[q:])
        n_lib = sum(len(a) for a in lib)
        if n_lib < k:
            raise TooFewSamplesError(
                f"Analogues with delays={q}, n_neighbors={k} needs at least {q + k} samples in a trajectory")
        self.dt_ = float(dts[0])
        self.scale_ = scale
        self.library_ = np.concatenate(lib)
        self.successors_ = np.concatenate(succ)
        self.tree_ = cKDTree(self.library_)

    def _step(self, H):
        """Next states (B, d) for scaled delay vectors H (B, q d)."""
        k = int(self.n_neighbors)
        dist, idx = self.tree_.query(H, k=k)
        if k == 1:
            dist, idx = dist[:, None], idx[:, None]
        exact = dist <= 1e-12 * (1.0 + np.abs(H).max(axis=1, keepdims=True))
        w = np.where(exact.any(axis=1, keepdims=True), exact.astype(float), 1.0 / np.maximum(dist, 1e-300))
        w /= w.sum(axis=1, keepdims=True)
        return np.einsum("bk,bkd->bd", w, self.successors_[idx])

    def _rollout(self, y0, t, history):
        q = int(self.delays)
        h = output_spacing(t)
        tau = t - t[0]
        B, d = y0.shape
        start = start_delays(y0, history, h, self.dt_, q, "Analogues")  # (B, q, d), most recent first
        K = int(np.ceil(tau[-1] / self.dt_ - 1e-6)) if tau.size > 1 else 0
        states = np.empty((B, K + 1, d))
        states[:, 0] = y0
        window = start.copy()
        for j in range(K):
            nxt = self._step((window / self.scale_).reshape(B, q * d))
            states[:, j + 1] = nxt
            window = np.concatenate([nxt[:, None, :], window[:, :-1, :]], axis=1)
        out = on_output_grid(states, self.dt_, tau)
        out[:, 0, :] = y0
        return out

    def _n_parameters(self):
        return int(self.library_.size + self.successors_.size)
