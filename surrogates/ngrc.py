"""Next-generation reservoir computing: a nonlinear vector autoregression."""

from __future__ import annotations

import itertools

import numpy as np
import scipy.linalg

from ._sampling import analogue_history, refine, steps_per_output
from .base import Capabilities, Learner
from .data import Budget, Physics, TrainingData
from .errors import DivergedError, InvalidDataError

__all__ = ["NextGenerationRC"]


class NextGenerationRC(Learner):
    r"""Next-generation reservoir computer (nonlinear vector autoregression).

    The feature vector at step :math:`n` is a constant, the *linear* part
    :math:`O_\text{lin} = (u_n, u_{n-s}, \dots, u_{n-(k-1)s})` of ``k``
    time-delayed (standardised) states ``s`` samples apart, and the
    *nonlinear* part: all unique monomials of :math:`O_\text{lin}` of degree
    2 to ``degree``. A ridge regression maps the features to the one-step
    increment, :math:`u_{n+1} = u_n + W_\text{out} O_\text{total}`.

    A forecast needs the :math:`(k-1)s` samples before the start state
    (``history`` of :meth:`rollout`); without one, it borrows them from the
    training sample nearest to the start state (an analogue warm-up).

    Parameters
    ----------
    k : int
        Number of delayed states in the linear features.
    s : int
        Skip between delayed states (in samples).
    degree : int
        Highest degree of the monomials (2: the unique quadratic monomials).
    ridge : float
        Tikhonov penalty of the readout.
    standardize : bool
        Centre and scale each variable by its training mean and ``TrainingData.scale``.

    Attributes
    ----------
    w_out_ : ndarray, shape (d, n_features)
    feature_names_ : list of str
    dt_ : float

    References
    ----------
    D. J. Gauthier, E. Bollt, A. Griffith and W. A. S. Barbosa, "Next
    generation reservoir computing", Nat. Commun. 12, 5564 (2021).
    """

    capabilities = Capabilities(
        tasks=frozenset({"forecast", "climate"}),
        physics=frozenset({"none"}),
        deterministic=True,
        needs_regular_sampling=True,
        min_samples=10,
    )
    reference = ("Gauthier, Bollt, Griffith & Barbosa, Next generation reservoir computing, "
                 "Nat. Commun. 12, 5564 (2021)")

    def __init__(self, k=2, s=1, degree=2, ridge=2.5e-6, standardize=True):
        self.k = k
        self.s = s
        self.degree = degree
        self.ridge = ridge
        self.standardize = standardize

    # ----------------------------------------------------------------- features
    @property
    def _lag(self) -> int:
        return (int(self.k) - 1) * int(self.s)

    def _monomials(self, n_lin):
        combos = []
        for deg in range(2, int(self.degree) + 1):
            combos.extend(itertools.combinations_with_replacement(range(n_lin), deg))
        return combos

    def _features(self, lin):
        """Constant, linear and monomial features of linear parts ``lin`` (N, n_lin)."""
        cols = [np.ones((lin.shape[0], 1)), lin]
        if self._combos_:
            mono = np.ones((lin.shape[0], len(self._combos_)))
            for j, c in enumerate(self._combos_):
                for i in c:
                    mono[:, j] *= lin[:, i]
            cols.append(mono)
        return np.concatenate(cols, axis=1)

    def _linear(self, u, idx):
        """Linear parts (delayed states, newest first) at indices ``idx`` of u (n, d)."""
        s = int(self.s)
        return np.concatenate([u[idx - j * s] for j in range(int(self.k))], axis=1)

    # ------------------------------------------------------------------ fitting
    def _fit(self, data: TrainingData, physics: Physics, budget: Budget, seed: int) -> None:
        k, s = int(self.k), int(self.s)
        if k < 1 or s < 1 or int(self.degree) < 1:
            raise InvalidDataError(f"k, s and degree must be positive integers, got {self.k}, {self.s}, {self.degree}")
        d = data.dim
        self.dt_ = float(np.median([tr.dt for tr in data.trajectories if tr.t.size > 1]))
        if not all(tr.t.size < 2 or np.isclose(tr.dt, self.dt_, rtol=1e-9) for tr in data.trajectories):
            raise InvalidDataError("all training trajectories must share one sample spacing")
        allv = np.concatenate([tr.y for tr in data.trajectories])
        if self.standardize:
            self.mean_, self.scale_ = allv.mean(axis=0), np.asarray(data.scale, dtype=float)
        else:
            self.mean_, self.scale_ = np.zeros(d), np.ones(d)
        self._combos_ = self._monomials(k * d)
        lag = self._lag
        feats, targets = [], []
        self._train_inputs_ = []
        for tr in data.trajectories:
            u = (tr.y - self.mean_) / self.scale_
            self._train_inputs_.append(u)
            idx = np.arange(lag, u.shape[0] - 1)
            if idx.size == 0:
                continue
            feats.append(self._features(self._linear(u, idx)))
            targets.append(u[idx + 1] - u[idx])
        n_feat = 1 + k * d + len(self._combos_)
        n = sum(f.shape[0] for f in feats)
        if n < 2:
            raise InvalidDataError(
                f"next-generation RC with k={k}, s={s} needs trajectories of more than {lag + 1} samples")
        phi, target = np.concatenate(feats), np.concatenate(targets)
        self.bound_ = 100.0 * (1.0 + max(float(np.max(np.abs(u))) for u in self._train_inputs_))
        w = _ridge(phi, target, float(self.ridge))
        if not np.all(np.isfinite(w)):
            raise DivergedError("the readout fit produced non-finite weights")
        self.w_out_ = w.T
        names = [f"{nm}(t-{j * s})" if j else nm for j in range(k) for nm in data.state_names]
        self.feature_names_ = ["1"] + names + ["*".join(names[i] for i in c) for c in self._combos_]
        self.n_training_samples_ = n
        assert self.w_out_.shape == (d, n_feat)

    # --------------------------------------------------------------- forecasts
    def _rollout(self, y0, t, history):
        B, d = y0.shape
        stride = steps_per_output(t, self.dt_, type(self).__name__)
        lag = self._lag
        u_hist = None
        if history is not None:
            h = history.copy()
            h[:, -1] = y0
            u = refine((h - self.mean_) / self.scale_, stride)
            if u.shape[1] >= lag + 1:
                u_hist = u[:, -(lag + 1):]
        if u_hist is None:
            h = analogue_history(y0, self._train_inputs_, self.mean_, self.scale_, lag)
            u_hist = (h - self.mean_) / self.scale_
        buf = np.array(u_hist)  # (B, lag + 1, d), oldest first
        n_steps = (t.size - 1) * stride
        out = np.empty((B, t.size, d))
        out[:, 0] = y0
        s, k = int(self.s), int(self.k)
        w = self.w_out_.T
        with np.errstate(over="ignore", invalid="ignore"):
            for step in range(1, n_steps + 1):
                lin = np.concatenate([buf[:, lag - j * s] for j in range(k)], axis=1)
                new = buf[:, -1] + self._features(lin) @ w
                if not np.all(np.abs(new) < self.bound_):
                    raise DivergedError(f"next-generation RC rollout blew up after {step} steps")
                buf = np.concatenate([buf[:, 1:], new[:, None]], axis=1) if lag else new[:, None]
                if step % stride == 0:
                    out[:, step // stride] = new * self.scale_ + self.mean_
        return out

    def _n_parameters(self) -> int:
        return int(self.w_out_.size)


def _ridge(phi: np.ndarray, target: np.ndarray, ridge: float) -> np.ndarray:
    """Ridge weights ``argmin |phi w - target|^2 + ridge |w|^2``, shape (n_features, d).

    With at least as many samples as features: least squares on the augmented
    system ``[phi; sqrt(ridge) I]`` (better conditioned than the normal
    equations when features differ in scale). With more features than
    samples (high-dimensional states: 64 variables and two delays give 8,385
    quadratic features), the same weights from the dual form
    ``w = phi^T (phi phi^T + ridge I)^{-1} target`` (the push-through
    identity), which costs ``n^2 p`` instead of ``n p^2`` (measured: 435 s ->
    seconds for Kuramoto-Sivashinsky).
    """
    n, n_feat = phi.shape
    if n_feat <= n:
        aug = np.concatenate([phi, np.sqrt(ridge) * np.eye(n_feat)])
        rhs = np.concatenate([target, np.zeros((n_feat, target.shape[1]))])
        return np.linalg.lstsq(aug, rhs, rcond=None)[0]
    gram = phi @ phi.T
    gram[np.diag_indices_from(gram)] += ridge
    alpha = scipy.linalg.solve(gram, target, assume_a="pos")
    return phi.T @ alpha
