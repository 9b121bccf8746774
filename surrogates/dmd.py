"""Time-delay (Hankel) dynamic mode decomposition."""

from __future__ import annotations

import numpy as np

from ._delay import delay_vectors, on_output_grid, output_spacing, start_delays
from .base import Capabilities, Learner
from .errors import DivergedError, InvalidDataError, TooFewSamplesError

__all__ = ["HankelDMD"]


class HankelDMD(Learner):
    """Dynamic mode decomposition on delay coordinates.

    The states are stacked into delay vectors ``h_k = [y_k, ..., y_{k-q+1}]``
    (scaled per variable by ``TrainingData.scale``); a linear map
    ``h_{k+1} ≈ A h_k`` is fitted in the span of the leading ``rank`` left
    singular vectors ``U`` of the snapshot matrix (exact DMD):
    ``Ã = Uᵀ X' V Σ⁻¹``, whose eigenvalues ``λ`` are the DMD eigenvalues
    (continuous-time rates ``log λ / Δt``).

    * forecast: the start delay vector is built from ``history`` and ``y0``
      and advanced with ``Ã`` (integer steps) or its eigen-decomposition
      (other spacings);
    * reconstruct: per trajectory, mode amplitudes fitted by least squares
      to all its delay vectors give ``y(t)`` at any time in the window.

    Parameters
    ----------
    delays : int, default 8
        Number of delay states ``q`` in a delay vector (1: plain DMD).
    rank : int or None, default None
        SVD truncation rank; None keeps singular values above
        ``svd_rtol`` times the largest.
    svd_rtol : float, default 1e-10
        Relative threshold for the numerical rank when ``rank`` is None.

    Attributes
    ----------
    eigenvalues_ : ndarray of complex, shape (r,)
        Discrete-time DMD eigenvalues (per sample step ``dt_``).
    continuous_eigenvalues_ : ndarray of complex, shape (r,)
        ``log(eigenvalues_) / dt_``.
    basis_ : ndarray, shape (q d, r)
        POD basis ``U``.
    operator_ : ndarray, shape (r, r)
        Reduced linear map ``Ã``.
    rank_ : int
    dt_ : float

    References
    ----------
    P. J. Schmid, "Dynamic mode decomposition of numerical and experimental
    data", J. Fluid Mech. 656, 5-28 (2010).
    J. H. Tu, C. W. Rowley, D. M. Luchtenburg, S. L. Brunton and J. N. Kutz,
    "On dynamic mode decomposition: theory and applications", J. Comput.
    Dyn. 1, 391-421 (2014) (exact DMD).
    S. L. Brunton, B. W. Brunton, J. L. Proctor, E. Kaiser and J. N. Kutz,
    "Chaos as an intermittently forced linear system", Nat. Commun. 8, 19
    (2017) (delay embedding, HAVOK).
    M. R. Jovanović, P. J. Schmid and J. W. Nichols, "Sparsity-promoting
    dynamic mode decomposition", Phys. Fluids 26, 024103 (2014) (optimal
    amplitudes).
    """

    capabilities = Capabilities(tasks={"forecast", "reconstruct"}, physics={"none"}, deterministic=True,
                                needs_regular_sampling=True, min_samples=3)
    reference = ("P. J. Schmid, Dynamic mode decomposition of numerical and experimental data, "
                 "J. Fluid Mech. 656, 5-28 (2010); delay embedding: S. L. Brunton et al., "
                 "Nat. Commun. 8, 19 (2017)")

    def __init__(self, delays=8, rank=None, svd_rtol=1e-10):
        self.delays = delays
        self.rank = rank
        self.svd_rtol = svd_rtol

    # ------------------------------------------------------------------ fit
    def _fit(self, data, physics, budget, seed):
        q = int(self.delays)
        if q < 1:
            raise ValueError(f"HankelDMD: delays must be >= 1, got {self.delays!r}")
        dts = np.array([tr.dt for tr in data.trajectories if tr.t.size > 1])
        if dts.size == 0:
            raise TooFewSamplesError("HankelDMD needs a trajectory with at least 2 samples")
        dt = float(dts[0])
        if not np.allclose(dts, dt, rtol=1e-6, atol=0.0):
            raise InvalidDataError("HankelDMD needs the same sample spacing in every trajectory")
        scale = np.asarray(data.scale, dtype=float)
        X, Xp, hankels = [], [], []
        for tr in data.trajectories:
            H = delay_vectors(tr.y / scale, q)
            hankels.append((tr.t[q - 1:], H))
            if H.shape[0] >= 2:
                X.append(H[:-1])
                Xp.append(H[1:])
        if not X:
            raise TooFewSamplesError(f"HankelDMD with delays={q} needs a trajectory of at least {q + 1} samples")
        X = np.concatenate(X).T
        Xp = np.concatenate(Xp).T
        U, S, Vh = np.linalg.svd(X, full_matrices=False)
        if self.rank is None:
            r = int(np.sum(S > float(self.svd_rtol) * S[0])) if S[0] > 0 else 1
        else:
            r = int(self.rank)
            if r < 1:
                raise ValueError(f"HankelDMD: rank must be >= 1 or None, got {self.rank!r}")
        r = max(1, min(r, S.size))
        Ur, Sr, Vr = U[:, :r], S[:r], Vh[:r].T
        atilde = Ur.T @ Xp @ (Vr / Sr)
        lam, W = np.linalg.eig(atilde)
        self.dt_ = dt
        self.scale_ = scale
        self.rank_ = r
        self.singular_values_ = S
        self.basis_ = Ur
        self.operator_ = atilde
        self.eigenvalues_ = lam
        self.eigenvectors_ = W
        with np.errstate(divide="ignore", invalid="ignore"):
            self.continuous_eigenvalues_ = np.log(lam.astype(complex)) / dt
        # optimal mode amplitudes per trajectory, for reconstruction
        anchors = []
        for t_h, H in hankels:
            if H.shape[0] == 0:
                continue
            Z = H @ Ur  # (K, r)
            k = np.arange(Z.shape[0])
            M = np.einsum("ij,kj->kij", W, self._powers(k.astype(float)))  # (K, r, r)
            b, *_ = np.linalg.lstsq(M.reshape(-1, r), Z.reshape(-1).astype(complex), rcond=None)
            anchors.append((t_h[0], t_h[-1], b))
        self.windows_ = np.array([[a[0], a[1]] for a in anchors])
        self.amplitudes_ = [a[2] for a in anchors]

    def _powers(self, steps):
        """``λ_j ** s`` for real step counts ``s`` (n,), shape (n, r)."""
        lam = self.eigenvalues_.astype(complex)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            out = np.exp(np.outer(steps, np.log(lam)))
        out[steps == 0, :] = 1.0
        return out

    # ------------------------------------------------------------- forecast
    def _rollout(self, y0, t, history):
        q = int(self.delays)
        h = output_spacing(t)
        tau = t - t[0]
        d = self.dim_
        start = start_delays(y0, history, h, self.dt_, q, "HankelDMD")  # (B, q, d)
        h0 = (start / self.scale_).reshape(y0.shape[0], q * d)
        z0 = h0 @ self.basis_  # (B, r)
        steps = tau / self.dt_
        with np.errstate(over="ignore", invalid="ignore"):
            if np.allclose(steps, np.rint(steps), rtol=0.0, atol=1e-6):
                K = int(np.rint(steps[-1])) if steps.size else 0
                Z = np.empty((y0.shape[0], K + 1, self.rank_))
                Z[:, 0] = z0
                for k in range(K):
                    Z[:, k + 1] = Z[:, k] @ self.operator_.T
                Y = Z @ self.basis_[:d].T
                out = on_output_grid(Y, self.dt_, tau)
            else:
                b = np.linalg.lstsq(self.eigenvectors_, z0.T.astype(complex), rcond=None)[0]  # (r, B)
                Z = np.einsum("rj,nj,jb->bnr", self.eigenvectors_, self._powers(steps), b)
                out = np.real(Z @ self.basis_[:d].T.astype(complex))
        out = out * self.scale_
        out[:, 0, :] = y0
        if not np.all(np.isfinite(out)):
            raise DivergedError("HankelDMD rollout overflowed (an unstable DMD eigenvalue)")
        return out

    # ---------------------------------------------------------- reconstruct
    def _predict(self, t):
        t = np.atleast_1d(t)
        lo, hi = self.windows_[:, 0], self.windows_[:, 1]
        dist = np.maximum(lo[None, :] - t[:, None], 0.0) + np.maximum(t[:, None] - hi[None, :], 0.0)
        which = np.argmin(dist, axis=1)
        out = np.empty((t.size, self.dim_))
        top = self.basis_[:self.dim_].astype(complex)  # rows of U giving the current state
        for j, b in enumerate(self.amplitudes_):
            sel = which == j
            if np.any(sel):
                pw = self._powers((t[sel] - lo[j]) / self.dt_)
                Z = (pw * b[None, :]) @ self.eigenvectors_.T
                out[sel] = np.real(Z @ top.T) * self.scale_
        if not np.all(np.isfinite(out)):
            raise DivergedError("HankelDMD reconstruction overflowed")
        return out

    def _n_parameters(self):
        return int(self.operator_.size + self.basis_.size)
