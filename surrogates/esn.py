"""Echo state network (reservoir computing) with a ridge readout."""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.linalg import eigh
from scipy.sparse.linalg import eigs

from ._sampling import analogue_history, refine, steps_per_output
from .base import Capabilities, Learner
from .data import Budget, BudgetClock, Physics, TrainingData
from .errors import DivergedError, InvalidDataError, OverBudgetError

__all__ = ["EchoStateNetwork"]


class EchoStateNetwork(Learner):
    r"""Echo state network: a fixed random recurrent reservoir and a trained linear readout.

    The reservoir state :math:`r \in \mathbb{R}^N` is driven by the
    (standardised) input :math:`u`,

    .. math::
        r_{k+1} = (1-a)\, r_k + a \tanh(A r_k + W_\text{in} u_k + b),

    where :math:`A` is a sparse random matrix (about ``mean_degree`` non-zeros
    per row) rescaled to spectral radius ``spectral_radius``, every node
    listens to one input component with a uniform weight in
    ±``input_scaling`` (Pathak et al. 2018), and :math:`a` is the leak rate.
    The readout :math:`u_{k+1} = W_\text{out}\,\tilde r_{k+1}` is fitted by
    ridge regression; with ``quadratic_readout`` every second node enters
    squared (:math:`\tilde r_i = r_i^2` for even :math:`i`), which breaks the
    :math:`r \to -r` symmetry of the tanh reservoir (Pathak et al. 2017).

    A forecast first *listens*: the reservoir is driven with the ``history``
    given to :meth:`rollout`, then runs autonomously on its own output. With no
    history, it listens to the training samples that precede the training
    state nearest to the start state, shifted to end at the start state (an
    analogue warm-up; poorer than the true history); a history shorter than
    ``washout`` is lengthened the same way at its old end.

    Needs equally spaced samples; output spacing must be a whole multiple of
    the training spacing.

    Parameters
    ----------
    n_nodes : int
        Reservoir size N.
    mean_degree : float
        Mean number of non-zeros per row of A.
    spectral_radius : float
        Largest |eigenvalue| of A.
    input_scaling : float
        Input weights are uniform in ±``input_scaling`` (inputs are standardised).
    leak_rate : float
        a in (0, 1]; 1 is the plain (non-leaky) update.
    bias : float
        Bias weights are uniform in ±``bias``.
    ridge : float
        Tikhonov penalty of the readout.
    washout : int
        Reservoir states discarded at the start of each training trajectory
        (at most half of each trajectory), and the length of the analogue warm-up.
    quadratic_readout : bool
        Square every second node in the readout.

    Attributes
    ----------
    w_out_ : ndarray, shape (d, N + 1)
        Readout weights (last column: constant).
    dt_ : float
        Training sample spacing.

    References
    ----------
    H. Jaeger, "The 'echo state' approach to analysing and training recurrent
    neural networks", GMD Report 148 (2001).
    J. Pathak, Z. Lu, B. R. Hunt, M. Girvan and E. Ott, "Using machine learning
    to replicate chaotic attractors and calculate Lyapunov exponents from
    data", Chaos 27, 121102 (2017).
    J. Pathak, B. Hunt, M. Girvan, Z. Lu and E. Ott, "Model-free prediction of
    large spatiotemporally chaotic systems from data: a reservoir computing
    approach", Phys. Rev. Lett. 120, 024102 (2018).
    M. Lukoševičius, "A practical guide to applying echo state networks",
    in Neural Networks: Tricks of the Trade, Springer (2012).
    """

    capabilities = Capabilities(
        tasks=frozenset({"forecast", "climate"}),
        physics=frozenset({"none"}),
        deterministic=True,
        needs_regular_sampling=True,
        min_samples=20,
    )
    reference = ("Jaeger, GMD Report 148 (2001); Pathak et al., Chaos 27, 121102 (2017) and "
                 "Phys. Rev. Lett. 120, 024102 (2018)")

    def __init__(self, n_nodes=1000, mean_degree=3.0, spectral_radius=0.4, input_scaling=0.5,
                 leak_rate=1.0, bias=0.5, ridge=1e-10, washout=200, quadratic_readout=True):
        self.n_nodes = n_nodes
        self.mean_degree = mean_degree
        self.spectral_radius = spectral_radius
        self.input_scaling = input_scaling
        self.leak_rate = leak_rate
        self.bias = bias
        self.ridge = ridge
        self.washout = washout
        self.quadratic_readout = quadratic_readout

    # ---------------------------------------------------------------- reservoir
    def _build(self, d, rng):
        n = int(self.n_nodes)
        if n < 1:
            raise InvalidDataError(f"n_nodes must be a positive integer, got {self.n_nodes!r}")
        density = min(1.0, float(self.mean_degree) / n)
        a = sp.random(n, n, density=density, format="csr", random_state=rng,
                      data_rvs=lambda k: rng.uniform(-1.0, 1.0, k))
        if a.nnz:
            if n > 2:
                lam = eigs(a, k=1, which="LM", return_eigenvectors=False,
                           v0=rng.standard_normal(n), maxiter=100 * n, tol=1e-6)
                rad = float(np.abs(lam[0]))
            else:
                rad = float(np.max(np.abs(np.linalg.eigvals(a.toarray()))))
            if rad > 0:
                a = a * (float(self.spectral_radius) / rad)
        w_in = np.zeros((n, d))
        w_in[np.arange(n), rng.integers(0, d, n)] = rng.uniform(-1.0, 1.0, n) * float(self.input_scaling)
        b = rng.uniform(-1.0, 1.0, n) * float(self.bias)
        return a.tocsr(), w_in, b

    def _step(self, r, u):
        """One reservoir update for a batch: r (N, B), u (d, B)."""
        pre = self._a_ @ r + self._w_in_ @ u + self._b_[:, None]
        a = float(self.leak_rate)
        return np.tanh(pre) if a == 1.0 else (1.0 - a) * r + a * np.tanh(pre)

    def _features(self, r):
        """Readout features of reservoir states r (N, ...) -> (N + 1, ...)."""
        f = r.copy()
        if self.quadratic_readout:
            f[0::2] = f[0::2] ** 2
        return np.concatenate([f, np.ones((1,) + r.shape[1:])], axis=0)

    def _drive(self, u, r0=None):
        """Drive with inputs u (n, d, B) from r0; returns the states after each input (n, N, B)."""
        n_steps, _, B = u.shape
        r = np.zeros((self._a_.shape[0], B)) if r0 is None else r0
        out = np.empty((n_steps, self._a_.shape[0], B))
        for k in range(n_steps):
            r = self._step(r, u[k])
            out[k] = r
        return out

    # ------------------------------------------------------------------ fitting
    def _fit(self, data: TrainingData, physics: Physics, budget: Budget, seed: int) -> None:
        clock = BudgetClock(budget)
        rng = np.random.default_rng(seed)
        d = data.dim
        self.dt_ = float(np.median([tr.dt for tr in data.trajectories if tr.t.size > 1]))
        if not all(tr.t.size < 2 or np.isclose(tr.dt, self.dt_, rtol=1e-9) for tr in data.trajectories):
            raise InvalidDataError("all training trajectories must share one sample spacing")
        self.mean_ = np.concatenate([tr.y for tr in data.trajectories]).mean(axis=0)
        self.scale_ = np.asarray(data.scale, dtype=float)
        self._a_, self._w_in_, self._b_ = self._build(d, rng)
        n_nodes = self._a_.shape[0]
        washout = max(int(self.washout), 0)
        max_steps = clock.iterations(10**12)

        gram = np.zeros((n_nodes + 1, n_nodes + 1))
        cross = np.zeros((n_nodes + 1, d))
        used = 0
        self._train_inputs_ = []
        for tr in data.trajectories:
            u = (tr.y - self.mean_) / self.scale_
            self._train_inputs_.append(u)
            wash = min(washout, (u.shape[0] - 1) // 2)
            if u.shape[0] - 1 - wash < 1 or used >= max_steps:
                continue
            n_in = min(u.shape[0] - 1, wash + max_steps - used)  # inputs to feed
            # input drive of every step at once; the loop only does A r + drive, tanh
            drive = u[:n_in] @ self._w_in_.T + self._b_
            states = np.empty((n_in, n_nodes))
            a = float(self.leak_rate)
            r = np.zeros(n_nodes)
            fed = n_in
            for k in range(n_in):
                pre = self._a_ @ r + drive[k]
                r = np.tanh(pre) if a == 1.0 else (1.0 - a) * r + a * np.tanh(pre)
                states[k] = r
                if k % 256 == 255 and clock.expired():
                    fed = k + 1
                    break
            if fed > wash:
                phi = states[wash:fed]  # (n, N): readout features in place, constant added blockwise
                if self.quadratic_readout:
                    phi[:, 0::2] **= 2
                target = u[wash + 1:fed + 1]
                gram[:-1, :-1] += phi.T @ phi
                col = phi.sum(axis=0)
                gram[:-1, -1] += col
                gram[-1, :-1] += col
                gram[-1, -1] += fed - wash
                cross[:-1] += phi.T @ target
                cross[-1] += target.sum(axis=0)
                used += fed - wash
            if clock.expired():
                break
        if used < 2:
            if clock.expired():
                raise OverBudgetError("the echo state network ran out of time before collecting training states")
            raise InvalidDataError(
                "the echo state network needs trajectories of at least 3 samples")
        self.bound_ = 100.0 * (1.0 + max(float(np.max(np.abs(u))) for u in self._train_inputs_))
        # ridge solution through the eigen-decomposition of the (symmetric) Gram matrix:
        # stable even when a small ridge leaves the normal equations near-singular
        lam, vec = eigh(gram)
        w = vec @ ((vec.T @ cross) / (np.maximum(lam, 0.0) + float(self.ridge))[:, None])
        if not np.all(np.isfinite(w)):
            raise DivergedError("the readout fit produced non-finite weights")
        self.w_out_ = w.T
        self.n_training_states_ = used

    # --------------------------------------------------------------- forecasts
    def _rollout(self, y0, t, history):
        B, d = y0.shape
        stride = steps_per_output(t, self.dt_, type(self).__name__)
        if history is None:
            history = analogue_history(y0, self._train_inputs_, self.mean_, self.scale_,
                                       int(self.washout), stride)
            u_hist = (history - self.mean_) / self.scale_
        else:
            history = history.copy()
            history[:, -1] = y0  # the history ends at the start state
            u_hist = (history - self.mean_) / self.scale_
            if stride > 1:
                u_hist = refine(u_hist, stride)
            short = int(self.washout) - (u_hist.shape[1] - 1)
            if short > 0:
                # a short history: listen first to an analogue that ends at its oldest state
                first = u_hist[:, 0] * self.scale_ + self.mean_
                pre = analogue_history(first, self._train_inputs_, self.mean_, self.scale_, short)
                u_hist = np.concatenate([(pre[:, :-1] - self.mean_) / self.scale_, u_hist], axis=1)
        # listen: inputs before the start, then the start state itself
        r = np.zeros((self._a_.shape[0], B))
        for k in range(u_hist.shape[1]):
            r = self._step(r, u_hist[:, k].T)
        out = np.empty((B, t.size, d))
        out[:, 0] = y0
        n_steps = (t.size - 1) * stride
        bound = self.bound_
        with np.errstate(over="ignore", invalid="ignore"):
            for k in range(1, n_steps + 1):
                u = self.w_out_ @ self._features(r)  # (d, B)
                if k % stride == 0:
                    out[:, k // stride] = (u.T * self.scale_) + self.mean_
                if k < n_steps:
                    if not np.all(np.abs(u) < bound):
                        raise DivergedError(f"echo state network rollout blew up after {k} steps")
                    r = self._step(r, u)
        if not np.all(np.isfinite(out)):
            raise DivergedError("echo state network rollout produced non-finite states")
        return out

    def _n_parameters(self) -> int:
        return int(self.w_out_.size)

