"""Neural ordinary differential equation: a learned vector field integrated with RK4.

With physics level ``partial`` (or ``full``) the learned network is a
correction added to the known vector field (a universal differential
equation).
"""

from __future__ import annotations

import math
import jax
import jax.numpy as jnp
import numpy as np
from jax import lax

from solvers import rk_scan, rk_step

from ._nets import apply_mlp, count_params, init_mlp
from ._chunked_training import cached, count_trace, make_chunk, run_chunks
from ._sampling import substeps
from .base import Capabilities, Learner
from .errors import DivergedError, InvalidDataError

__all__ = ["NeuralODE"]

_TRACE_ERRORS = (
    jax.errors.ConcretizationTypeError,
    jax.errors.TracerIntegerConversionError,
    jax.errors.TracerBoolConversionError,
    jax.errors.TracerArrayConversionError,
)

def _make_field(cfg):
    """The model's vector field ``f(t, y, (theta, aux))`` for a static config."""
    activation, time_input, known, phys_items = cfg["activation"], cfg["time_input"], cfg["known"], cfg["phys"]
    phys_static = dict(phys_items) if phys_items is not None else None

    def field(t, y, model):
        theta, aux = model
        x = (y - aux["mu"]) / aux["s"]
        if time_input:
            x = jnp.concatenate([x, jnp.reshape((t - aux["t_mu"]) / aux["t_s"], (1,))])
        net = apply_mlp(theta, x, activation)
        if known is None:
            return aux["out_scale"] * net
        phys = aux["phys"] if phys_static is None else phys_static
        return jnp.asarray(known(t, y, phys)) + aux["out_scale"] * net

    return field


def _window_integrate(field, model, t0, y0, intervals, substeps):
    """States at the ends of successive observation ``intervals`` from ``y0``.

    Each interval ``h`` is crossed with ``substeps`` RK4 steps of ``h /
    substeps`` (so irregular samples are reached exactly). One flat scan over
    all sub-steps (nested loops compile markedly slower).
    """
    dts = jnp.repeat(intervals / substeps, substeps)
    ts = t0 + jnp.concatenate([jnp.zeros((1,)), jnp.cumsum(dts)[:-1]])

    def step(y, tdt):
        t, dt = tdt
        y = rk_step(field, t, y, dt, model)
        return y, y

    _, ys = lax.scan(step, y0, (ts, dts))
    return ys[substeps - 1::substeps]


def _window_loss(cfg):
    field = _make_field(cfg)
    substeps = cfg["substeps"]

    def loss(theta, aux, t0, y0, intervals, targets):
        model = (theta, aux)
        pred = jax.vmap(lambda a, b, c: _window_integrate(field, model, a, b, c, substeps))(t0, y0, intervals)
        return jnp.mean(((pred - targets) / aux["s"]) ** 2)

    return loss


def _build_rollout(cfg, n_steps, save_every):
    field = _make_field(cfg)

    def roll(theta, aux, y0, t0, dt):
        count_trace("neural_ode.rollout")
        one = lambda y: rk_scan(field, y, t0, dt, n_steps, (theta, aux), save_every=save_every)
        return jax.vmap(one)(y0)

    return jax.jit(roll)


def _fd_derivatives(t, y):
    """Second-order finite-difference derivatives (non-uniform spacing allowed)."""
    if t.size < 2:
        return np.zeros_like(y)
    return np.gradient(y, t, axis=0, edge_order=2 if t.size > 2 else 1)


class NeuralODE(Learner):
    r"""Neural ODE: ``dy/dt = s_f * MLP((y - mu) / s)`` integrated with RK4.

    Training minimises the mean squared normalised error of short rollouts:
    windows of ``window`` consecutive observation intervals are cut from every
    training trajectory, a minibatch of windows is integrated from each
    window's first observed state with a differentiable fixed-step RK4
    (``substeps`` steps per observation interval; irregular samples are
    handled exactly because every interval is divided on its own), and the
    error is taken at every observation inside the window (a multiple-shooting
    style objective: windows restart from data, so errors do not compound
    over the whole record). Gradients flow through the integrator (discretise
    then optimise). Optimisation: optax Adam after global-norm gradient
    clipping, with linear warm-up and cosine decay of the learning rate;
    steps run in jitted ``fori_loop`` chunks of ``chunk_size`` steps, with the
    wall-clock budget checked between chunks.

    With physics level ``partial`` the model is ``f_known(t, y) + s_r *
    MLP(...)``, where ``f_known`` is the supplied vector field (one term
    removed) and the network learns the missing term (a universal
    differential equation); its last layer starts at zero so training starts
    from the known physics. At level ``full`` the same construction is a
    sanity check: the correction should stay small. The output scales
    ``s_f`` and ``s_r`` are the per-variable standard deviations of
    finite-difference derivatives of the data, and of their residual against
    ``f_known``.

    Rollouts integrate the learned field with RK4 at (about) the training step
    ``median interval / substeps``, saving at the requested spacing.

    Compilation: the training chunk and the rollout are compiled once per
    static configuration (network shape, activation, sub-steps, batch size,
    clip, the known vector field *callable*) and array shapes, and kept in a
    module-level cache; physics parameter values are traced, so new values do
    not recompile (a field that needs a parameter as a Python number is
    detected on first trace and compiled with its values baked in). Passing
    the same vector-field object to successive fits reuses the compiled code;
    a freshly created closure compiles anew. Samples: regular or irregular
    (every observation interval is crossed with its own sub-steps); windows
    are cut from trajectories with at least ``window + 1`` samples
    (``window`` is lowered to fit the longest trajectory).

    Parameters
    ----------
    width, depth : int
        Hidden units per layer and number of hidden layers.
    activation : str
        One of :data:`surrogates._nets.ACTIVATIONS`.
    window : int
        Observation intervals per training window.
    substeps : int
        RK4 steps per observation interval.
    batch_size : int
        Windows per optimiser step.
    n_iterations : int
        Optimiser steps (capped by ``Budget.max_iterations``).
    learning_rate : float
        Peak Adam learning rate.
    grad_clip : float
        Global gradient-norm clip.
    time_input : bool
        Feed the (normalised) time to the network, for non-autonomous systems.
        A network of time extrapolates poorly beyond the training window;
        prefer physics level ``partial`` for forced systems.
    chunk_size : int
        Optimiser steps per jitted call (the budget is checked between calls).

    References
    ----------
    R. T. Q. Chen, Y. Rubanova, J. Bettencourt & D. Duvenaud, "Neural
    ordinary differential equations", NeurIPS 31 (2018).
    C. Rackauckas et al., "Universal differential equations for scientific
    machine learning", arXiv:2001.04385 (2020).
    D. P. Kingma & J. Ba, "Adam: a method for stochastic optimization",
    ICLR (2015).
    """

    capabilities = Capabilities(
        tasks=frozenset({"forecast", "climate"}),
        physics=frozenset({"none", "partial", "full"}),
        deterministic=True,
        differentiable_rollout=True,
        min_samples=3,
    )
    reference = "Chen, Rubanova, Bettencourt & Duvenaud, Neural ordinary differential equations, NeurIPS (2018)"

    def __init__(self, width=64, depth=2, activation="tanh", window=8, substeps=2, batch_size=32,
                 n_iterations=3000, learning_rate=3e-3, grad_clip=1.0, time_input=False, chunk_size=100):
        self.width = width
        self.depth = depth
        self.activation = activation
        self.window = window
        self.substeps = substeps
        self.batch_size = batch_size
        self.n_iterations = n_iterations
        self.learning_rate = learning_rate
        self.grad_clip = grad_clip
        self.time_input = time_input
        self.chunk_size = chunk_size

    # ------------------------------------------------------------------ helpers
    def _validate(self):
        ints = {"width": self.width, "depth": self.depth, "window": self.window, "substeps": self.substeps,
                "batch_size": self.batch_size, "n_iterations": self.n_iterations, "chunk_size": self.chunk_size}
        for name, v in ints.items():
            if not isinstance(v, (int, np.integer)) or isinstance(v, bool) or v < 1:
                raise InvalidDataError(f"NeuralODE hyper-parameter {name} must be a positive integer, got {v!r}")
        for name in ("learning_rate", "grad_clip"):
            v = getattr(self, name)
            if not isinstance(v, (int, float)) or not math.isfinite(v) or v <= 0:
                raise InvalidDataError(f"NeuralODE hyper-parameter {name} must be a positive number, got {v!r}")
        from ._nets import ACTIVATIONS
        if self.activation not in ACTIVATIONS:
            raise InvalidDataError(f"NeuralODE activation must be one of {sorted(ACTIVATIONS)}, got {self.activation!r}")

    def _windows(self, data):
        trajs = [tr for tr in data.trajectories if tr.t.size >= 2]
        longest = max((tr.t.size for tr in trajs), default=0)
        if longest < 2:
            raise InvalidDataError("NeuralODE needs a trajectory with at least 2 samples")
        k = min(int(self.window), longest - 1)
        t0s, y0s, ints, tgs = [], [], [], []
        for tr in trajs:
            n = tr.t.size
            if n < k + 1:
                continue
            dts = np.diff(tr.t)
            for i in range(n - k):
                t0s.append(tr.t[i])
                y0s.append(tr.y[i])
                ints.append(dts[i:i + k])
                tgs.append(tr.y[i + 1:i + k + 1])
        return k, (np.asarray(t0s), np.asarray(y0s), np.asarray(ints), np.asarray(tgs))

    # -------------------------------------------------------------------- fit
    def _fit(self, data, physics, budget, seed):
        self._validate()
        clock = budget.clock()
        d = data.dim
        k, windows = self._windows(data)
        allv = np.concatenate([tr.y for tr in data.trajectories])
        mu = allv.mean(axis=0)
        s = np.asarray(data.scale, dtype=float)
        allt = np.concatenate([tr.t for tr in data.trajectories])
        t_mu, t_s = float(allt.mean()), float(allt.std()) or 1.0

        derivs = np.concatenate([_fd_derivatives(tr.t, tr.y) for tr in data.trajectories])
        known = physics.vector_field if physics.level in ("partial", "full") else None
        phys_items = tuple(sorted((str(kk), float(v)) for kk, v in physics.params.items())) if known else ()
        if known is None:
            out_scale = derivs.std(axis=0)
            out_scale = np.where(out_scale > 0, out_scale, s)
        else:
            pp = dict(phys_items)
            f_known = np.stack([np.asarray(known(float(t), y, pp), dtype=float) for t, y in
                                zip(allt, allv)]) if allv.shape[0] <= 20000 else None
            if f_known is None:  # very long records: estimate the residual scale on a subsample
                idx = np.linspace(0, allv.shape[0] - 1, 20000).astype(int)
                f_known = np.stack([np.asarray(known(float(allt[i]), allv[i], pp), dtype=float) for i in idx])
                derivs = derivs[idx]
            resid = (derivs - f_known).std(axis=0)
            floor = 1e-3 * np.maximum(derivs.std(axis=0), 1e-12)
            out_scale = np.maximum(resid, floor)
        # physics parameters are traced (new values do not recompile) unless the
        # field needs them as Python numbers; then they are baked in (and keyed)
        cfg = {"activation": self.activation, "time_input": bool(self.time_input), "known": known,
               "phys": None, "substeps": int(self.substeps), "batch_size": int(self.batch_size),
               "grad_clip": float(self.grad_clip)}

        key = jax.random.PRNGKey(seed)
        key, k_init = jax.random.split(key)
        n_in = d + (1 if self.time_input else 0)
        theta = init_mlp(k_init, [n_in] + [int(self.width)] * int(self.depth) + [d])
        if known is not None:  # start from the known physics: zero correction
            theta[-1] = {"w": jnp.zeros_like(theta[-1]["w"]), "b": jnp.zeros_like(theta[-1]["b"])}
        aux = {"mu": jnp.asarray(mu), "s": jnp.asarray(s), "out_scale": jnp.asarray(out_scale),
               "t_mu": jnp.asarray(t_mu), "t_s": jnp.asarray(t_s),
               "phys": {kk: jnp.asarray(v) for kk, v in phys_items}}
        total = clock.iterations(self.n_iterations)

        def train(cfg):
            key_cfg = tuple(sorted(cfg.items()))
            chunk, tx = cached(("neural_ode.train",) + key_cfg, lambda: make_chunk(
                _window_loss(cfg), cfg["batch_size"], cfg["grad_clip"], "neural_ode.train"))
            return run_chunks(chunk, tx, theta, key, aux, windows, total, self.learning_rate, self.chunk_size,
                              clock, "NeuralODE")

        try:
            theta, done, history = train(cfg)
        except _TRACE_ERRORS:
            cfg["phys"] = phys_items
            aux["phys"] = {}
            theta, done, history = train(cfg)
        self.cfg_ = cfg
        self.theta_ = theta
        self.aux_ = aux
        self.window_ = k
        self.n_iterations_ = done
        self.loss_history_ = np.asarray(history)
        self.step_ = float(np.median(np.concatenate([np.diff(tr.t) for tr in data.trajectories
                                                     if tr.t.size > 1]))) / int(self.substeps)

    # ---------------------------------------------------------------- predict
    def _rollout(self, y0, t, history):
        n = t.size
        if n == 0:
            return np.zeros((y0.shape[0], 0, y0.shape[1]))
        if n == 1:
            return y0[:, None, :].copy()
        h, m = substeps(t, self.step_)
        key_cfg = tuple(sorted(self.cfg_.items()))
        roll = cached(("neural_ode.rollout", (n - 1) * m, m) + key_cfg,
                       lambda: _build_rollout(self.cfg_, (n - 1) * m, m))
        out = np.array(roll(self.theta_, self.aux_, jnp.asarray(y0), jnp.asarray(float(t[0])),
                              jnp.asarray(h / m)))
        if not np.all(np.isfinite(out)):
            raise DivergedError("NeuralODE rollout produced non-finite states")
        out[:, 0] = y0
        return out

    def vector_field(self, t, y):
        """The learned (or corrected) vector field at time ``t``, state(s) ``y`` (..., d)."""
        self._check_fitted()
        field = _make_field(self.cfg_)
        y = jnp.asarray(y, dtype=float)
        fn = lambda yy: field(jnp.asarray(float(t)), yy, (self.theta_, self.aux_))
        return np.asarray(jax.vmap(fn)(y.reshape(-1, y.shape[-1])).reshape(y.shape))

    def _n_parameters(self):
        return count_params(self.theta_)
