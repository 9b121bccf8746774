"""Shared machinery of the time-to-state networks (``pinn`` and ``mlp``).

A network maps time to state, ``t -> y(t)``, over one training window.
Both learners use the same network, the same input/output normalisation and
the same optimiser schedule; the physics-informed one adds the mean squared
residual of the equations at collocation points to the loss.

Everything that runs per step is jitted. Training runs in chunks of
``chunk_size`` steps, each chunk one compiled ``fori_loop``; the budget is
checked between chunks. Compiled chunk functions are cached at module level,
keyed by the static configuration (network shape, loss options, the vector
field object), so a second fit of the same shapes does not recompile;
:data:`TRACE_COUNTS` counts how often each function was traced.

Normalisation
-------------
* input: ``tau = 2 (t - t0) / (t1 - t0) - 1`` in ``[-1, 1]``;
* output: ``y = mean + scale * net(tau)``, ``scale`` the data's per-variable
  standard deviation (``TrainingData.scale``);
* residual: ``(dy/dt - f(t, y, p)) / scale``, per variable, in units of one
  over the time unit of the system.

References
----------
M. Raissi, P. Perdikaris and G. E. Karniadakis, "Physics-informed neural
networks: A deep learning framework for solving forward and inverse problems
involving nonlinear partial differential equations", J. Comput. Phys. 378,
686–707 (2019).
S. Wang, Y. Teng and P. Perdikaris, "Understanding and mitigating gradient
flow pathologies in physics-informed neural networks", SIAM J. Sci. Comput.
43, A3055–A3081 (2021).
S. Wang, S. Sankaran and P. Perdikaris, "Respecting causality is all you
need for training physics-informed neural networks", arXiv:2203.07404 (2022).
M. Tancik et al., "Fourier features let networks learn high frequency
functions in low dimensional domains", NeurIPS (2020).
"""

from __future__ import annotations

import functools
import math
from collections import Counter, OrderedDict
from typing import NamedTuple

import jax
import jax.numpy as jnp
import numpy as np
import optax

from ._nets import apply_mlp, count_params, init_mlp
from .base import Learner
from .data import Budget, Physics, TrainingData
from .errors import DivergedError, InvalidDataError, NotApplicableError, OverBudgetError

__all__ = ["TimeNetworkLearner", "TRACE_COUNTS", "causal_weights"]

#: How many times each jitted function was traced (compiled), by name.
TRACE_COUNTS: Counter = Counter()

_CACHE_SIZE = 32
_CACHE: "OrderedDict[tuple, dict]" = OrderedDict()


class _Config(NamedTuple):
    """Static configuration: everything that changes the compiled program."""

    dim: int
    width: int
    depth: int
    activation: str
    fourier_features: int
    use_physics: bool
    param_names: tuple        # names of all physics parameters (values and masks are traced)
    causal_chunks: int
    causal_epsilon: float
    loss_balancing: str       # "fixed" or "annealing"
    balance_every: int
    balance_alpha: float
    learning_rate: float
    lr_decay_rate: float
    lr_decay_steps: int
    lbfgs_memory: int
    chunk_size: int
    vector_field_key: object  # identifies the physics callable (see _callable_key), or None


def _callable_key(f):
    """A hashable key under which two calls of ``_compiled`` may share code.

    Equal for equal ``functools.partial`` wrappers of one function and for
    closures with the same code and the same (hashable) captured objects —
    the harness and the conformance kit build such wrappers afresh for every
    fit. Anything else is keyed by identity.
    """
    if f is None:
        return None
    try:
        if isinstance(f, functools.partial):
            key = ("partial", _callable_key(f.func), f.args, tuple(sorted(f.keywords.items())))
        elif getattr(f, "__closure__", None) and hasattr(f, "__code__"):
            key = ("closure", f.__code__, tuple(c.cell_contents for c in f.__closure__))
        else:
            return f
        hash(key)
        return key
    except (TypeError, ValueError):
        return f


# ---------------------------------------------------------------- the network
def _embed(tau, n_fourier):
    """``tau`` (n,) -> features (n, 1 + 2K): tau, cos(k pi tau / 2), sin(k pi tau / 2)."""
    tau = tau[:, None]
    if n_fourier <= 0:
        return tau
    k = jnp.arange(1, n_fourier + 1, dtype=tau.dtype) * (jnp.pi / 2.0)
    return jnp.concatenate([tau, jnp.cos(k * tau), jnp.sin(k * tau)], axis=1)


def _net(cfg, net_params, tau):
    """Normalised network output, shape (n, d)."""
    return apply_mlp(net_params, _embed(tau, cfg.fourier_features), cfg.activation)


def _net_and_dtau(cfg, net_params, tau):
    """Output and its derivative with respect to ``tau`` (forward-mode autodiff)."""
    return jax.jvp(lambda s: _net(cfg, net_params, s), (tau,), (jnp.ones_like(tau),))


def _physical_params(cfg, theta, batch):
    """Parameter mapping for the vector field.

    ``theta`` holds one entry per parameter name; entries flagged
    ``trainable`` replace the known value (through ``exp`` where flagged
    ``positive``); the others receive no gradient. Keeping the masks traced
    lets reconstruct and identify fits of one system share compiled code.
    """
    known, trainable, positive = batch["p_known"], batch["p_trainable"], batch["p_positive"]
    safe = jnp.where(positive, theta, 0.0)
    value = jnp.where(positive, jnp.exp(safe), theta)
    value = jnp.where(trainable, value, known)
    return {name: value[i] for i, name in enumerate(cfg.param_names)}


# ---------------------------------------------------------------- the losses
def _data_loss(cfg, params, batch):
    pred = _net(cfg, params["net"], batch["data_tau"])
    w = batch["data_w"]       # 1 for samples, 0 for padding to a fixed bucket size
    return jnp.sum(w[:, None] * (pred - batch["data_y"]) ** 2) / (jnp.sum(w) * cfg.dim)


def _residual_sq(cfg, vector_field, params, batch):
    """Per collocation point: mean over variables of the squared scaled residual."""
    tau = batch["colloc_tau"]
    out, dout = _net_and_dtau(cfg, params["net"], tau)
    scale, mean, half = batch["scale"], batch["mean"], batch["half_window"]
    y = mean + scale * out
    dydt = scale * dout / half
    p = _physical_params(cfg, params["theta"], batch)
    f = jax.vmap(lambda t, yy: vector_field(t, yy, p))(batch["colloc_t"], y)
    return jnp.mean(((dydt - f) / scale) ** 2, axis=1)


def causal_weights(chunk_losses, epsilon):
    """``w_i = exp(-epsilon * sum_{k<i} L_k)`` for consecutive time chunks (Wang, Sankaran & Perdikaris 2022, eq. 3.5)."""
    earlier = jnp.cumsum(chunk_losses) - chunk_losses
    return jnp.exp(-epsilon * earlier)


def _physics_loss(cfg, vector_field, params, batch, causal):
    r2 = _residual_sq(cfg, vector_field, params, batch)
    if not causal or cfg.causal_epsilon <= 0.0:
        return jnp.mean(r2)
    chunk_losses = jnp.mean(r2.reshape(cfg.causal_chunks, -1), axis=1)
    w = jax.lax.stop_gradient(causal_weights(chunk_losses, cfg.causal_epsilon))
    return jnp.mean(w * chunk_losses)


def _loss_terms(cfg, vector_field, params, batch, causal=True):
    ld = _data_loss(cfg, params, batch)
    lr = _physics_loss(cfg, vector_field, params, batch, causal) if cfg.use_physics else jnp.zeros_like(ld)
    return ld, lr


def _tree_abs(tree):
    return jnp.concatenate([jnp.abs(x).ravel() for x in jax.tree_util.tree_leaves(tree)])


# -------------------------------------------------------- compiled functions
def _compiled(cfg: _Config, vector_field=None) -> dict:
    """The jitted functions for ``cfg``, built once per configuration.

    ``vector_field`` is only read when the entry is built; the key
    ``cfg.vector_field_key`` stands for it.
    """
    if cfg in _CACHE:
        _CACHE.move_to_end(cfg)
        return _CACHE[cfg]

    schedule = optax.exponential_decay(cfg.learning_rate, cfg.lr_decay_steps, cfg.lr_decay_rate)
    adam = optax.adam(schedule)

    def adam_step(i, carry, batch):
        params, opt_state, w_phys, losses = carry

        def terms(pr):
            return _loss_terms(cfg, vector_field, pr, batch)

        (ld, lr), vjp = jax.vjp(terms, params)
        if cfg.use_physics and cfg.loss_balancing == "fixed":
            (grads,) = vjp((jnp.ones_like(ld), w_phys * jnp.ones_like(lr)))
        elif cfg.use_physics:
            (g_d,) = vjp((jnp.ones_like(ld), jnp.zeros_like(lr)))
            (g_r,) = vjp((jnp.zeros_like(ld), jnp.ones_like(lr)))
            if cfg.loss_balancing == "annealing":
                # Wang, Teng & Perdikaris (2021), algorithm 1, with the roles
                # written as a weight on the residual: w = mean|g_d| / max|g_r|.
                def new_w(w):
                    target = jnp.mean(_tree_abs(g_d)) / (jnp.max(_tree_abs(g_r)) + 1e-300)
                    return (1.0 - cfg.balance_alpha) * w + cfg.balance_alpha * target

                w_phys = jax.lax.cond(i % cfg.balance_every == 0, new_w, lambda w: w, w_phys)
            grads = jax.tree_util.tree_map(lambda a, b: a + w_phys * b, g_d, g_r)
        else:
            (grads,) = vjp((jnp.ones_like(ld), jnp.zeros_like(lr)))
        updates, opt_state = adam.update(grads, opt_state, params)
        params = optax.apply_updates(params, updates)
        losses = losses.at[i].set(jnp.stack([ld + w_phys * lr, ld, lr]))
        return params, opt_state, w_phys, losses

    def adam_chunk(params, opt_state, w_phys, n_steps, batch):
        TRACE_COUNTS["adam_chunk"] += 1
        losses = jnp.full((cfg.chunk_size, 3), jnp.nan)
        carry = (params, opt_state, w_phys, losses)
        return jax.lax.fori_loop(0, n_steps, lambda i, c: adam_step(i, c, batch), carry)

    lbfgs = optax.lbfgs(memory_size=cfg.lbfgs_memory,
                        linesearch=optax.scale_by_zoom_linesearch(max_linesearch_steps=20))

    def lbfgs_chunk(params, opt_state, w_phys, n_steps, batch):
        TRACE_COUNTS["lbfgs_chunk"] += 1

        def total(pr):
            ld, lr = _loss_terms(cfg, vector_field, pr, batch, causal=False)
            return ld + w_phys * lr

        value_and_grad = optax.value_and_grad_from_state(total)

        def step(i, carry):
            pr, st, losses = carry
            value, grad = value_and_grad(pr, state=st)
            updates, st = lbfgs.update(grad, st, pr, value=value, grad=grad, value_fn=total)
            pr = optax.apply_updates(pr, updates)
            losses = losses.at[i].set(jnp.stack([value, jnp.nan, jnp.nan]))
            return pr, st, losses

        losses = jnp.full((cfg.chunk_size, 3), jnp.nan)
        return jax.lax.fori_loop(0, n_steps, step, (params, opt_state, losses))

    def evaluate(params, tau):
        TRACE_COUNTS["evaluate"] += 1
        return _net(cfg, params["net"], tau)

    fns = {"adam": adam, "lbfgs": lbfgs,
           "adam_chunk": jax.jit(adam_chunk),
           "lbfgs_chunk": jax.jit(lbfgs_chunk),
           "evaluate": jax.jit(evaluate)}
    _CACHE[cfg] = fns
    while len(_CACHE) > _CACHE_SIZE:
        _CACHE.popitem(last=False)
    return fns


# ------------------------------------------------------------------ learner
class TimeNetworkLearner(Learner):
    """Base of :class:`surrogates.pinn.PINN` and :class:`surrogates.mlp.DataOnlyNetwork`.

    Subclasses store hyper-parameters; ``_fit`` reads them (with the defaults
    of :attr:`_defaults` for those a subclass does not take) and trains.

    What a fitted model answers
    ---------------------------
    ``predict(t)``
        the network at ``t`` (meant for ``t`` inside the window).
    ``rollout(y0, t)``
        a function of time cannot be restarted from a state. The model looks
        up the time ``t*`` in the training window where its own trajectory
        passes closest to each ``y0`` (scaled Euclidean distance on a grid of
        20 points per training sample), then returns the network at
        ``t* + (t - t[0])`` — beyond the window that is the network's
        extrapolation, which is poor; no refit, no integration. Start states
        off the learned trajectory are therefore answered badly, and that is
        what the benchmark shows.
    """

    _use_physics = False

    _defaults = dict(width=64, depth=4, activation="tanh", fourier_features=0,
                     n_collocation=2000, physics_weight=0.01, loss_balancing="fixed",
                     balance_every=100, balance_alpha=0.1, causal_epsilon=0.0, causal_chunks=32,
                     learning_rate=1e-3, lr_decay_rate=0.9, lr_decay_steps=1000,
                     adam_steps=10_000, lbfgs_steps=2_000, lbfgs_memory=50,
                     holdout_fraction=0.1, patience=5_000, chunk_size=500)

    def _hp(self, name):
        return getattr(self, name, self._defaults[name])

    # ------------------------------------------------------------- fitting
    def _config(self, dim, physics: Physics) -> _Config:
        use_phys = self._use_physics
        names = tuple(sorted(physics.params)) if use_phys else ()
        balancing = str(self._hp("loss_balancing"))
        if balancing not in ("fixed", "annealing"):
            raise InvalidDataError(f"loss_balancing must be 'fixed' or 'annealing', got {balancing!r}")
        act = str(self._hp("activation"))
        from ._nets import ACTIVATIONS
        if act not in ACTIVATIONS:
            raise InvalidDataError(f"unknown activation {act!r} (valid: {', '.join(sorted(ACTIVATIONS))})")
        return _Config(
            dim=int(dim), width=int(self._hp("width")), depth=int(self._hp("depth")),
            activation=act, fourier_features=int(self._hp("fourier_features")),
            use_physics=use_phys, param_names=names,
            causal_chunks=int(self._hp("causal_chunks")) if use_phys else 1,
            causal_epsilon=float(self._hp("causal_epsilon")) if use_phys else 0.0,
            loss_balancing=balancing if use_phys else "fixed",
            balance_every=max(1, int(self._hp("balance_every"))),
            balance_alpha=float(self._hp("balance_alpha")),
            learning_rate=float(self._hp("learning_rate")),
            lr_decay_rate=float(self._hp("lr_decay_rate")),
            lr_decay_steps=max(1, int(self._hp("lr_decay_steps"))),
            lbfgs_memory=int(self._hp("lbfgs_memory")),
            chunk_size=max(1, int(self._hp("chunk_size"))),
            vector_field_key=_callable_key(physics.vector_field) if use_phys else None)

    def _fit(self, data: TrainingData, physics: Physics, budget: Budget, seed: int) -> None:
        if len(data.trajectories) != 1:
            raise NotApplicableError(
                f"{type(self).__name__} maps time to state over one window; got "
                f"{len(data.trajectories)} trajectories")
        tr = data.trajectories[0]
        cfg = self._config(data.dim, physics)
        fns = _compiled(cfg, physics.vector_field)
        clock = budget.clock()
        if not (np.all(np.isfinite(tr.t)) and np.all(np.isfinite(tr.y))):
            raise InvalidDataError("training data contain NaN or infinite values")

        t0, t1 = float(tr.t[0]), float(tr.t[-1])
        if not t1 > t0:
            raise InvalidDataError("the training window has zero length")
        half = 0.5 * (t1 - t0)
        scale = np.asarray(data.scale, dtype=float)
        mean = tr.y.mean(axis=0)
        self.window_ = (t0, t1)
        self.scale_ = scale
        self.mean_ = mean

        # held-out slice for early stopping (never the first or last sample)
        rng = np.random.default_rng(seed)
        n = tr.t.size
        frac = float(self._hp("holdout_fraction"))
        n_hold = int(round(frac * n)) if frac > 0 else 0
        n_hold = min(n_hold, max(0, n - 2 - max(2, self.capabilities.min_samples)))
        hold = np.zeros(n, bool)
        if n_hold > 0:
            hold[1 + rng.choice(n - 2, size=n_hold, replace=False)] = True
        tau_all = (tr.t - t0) / half - 1.0
        y_all = (tr.y - mean) / scale
        train_tau, train_y = tau_all[~hold], y_all[~hold]
        hold_tau, hold_y = tau_all[hold], y_all[hold]

        # pad the samples to a multiple of 128 (weight 0) so that fits with
        # somewhat different sample counts share one compiled program
        n_tr = train_tau.size
        n_pad = 128 * math.ceil(n_tr / 128)
        data_w = np.r_[np.ones(n_tr), np.zeros(n_pad - n_tr)]
        data_tau = np.r_[train_tau, np.zeros(n_pad - n_tr)]
        data_y = np.vstack([train_y, np.zeros((n_pad - n_tr, data.dim))])
        names = cfg.param_names
        unknown = tuple(physics.unknown) if cfg.use_physics else ()
        trainable = np.array([nm in unknown for nm in names], dtype=bool)
        positive = np.array([nm in unknown and float(physics.params[nm]) > 0 for nm in names], dtype=bool)
        p_known = np.array([float(physics.params[nm]) for nm in names], dtype=float)
        batch = {"data_tau": jnp.asarray(data_tau), "data_y": jnp.asarray(data_y),
                 "data_w": jnp.asarray(data_w),
                 "scale": jnp.asarray(scale), "mean": jnp.asarray(mean),
                 "half_window": jnp.asarray(half),
                 "p_known": jnp.asarray(p_known), "p_trainable": jnp.asarray(trainable),
                 "p_positive": jnp.asarray(positive)}
        if cfg.use_physics:
            n_col = int(self._hp("n_collocation"))
            n_col = cfg.causal_chunks * max(1, math.ceil(n_col / cfg.causal_chunks))
            tau_c = np.linspace(-1.0, 1.0, n_col)
            batch["colloc_tau"] = jnp.asarray(tau_c)
            batch["colloc_t"] = jnp.asarray(t0 + half * (tau_c + 1.0))

        key = jax.random.PRNGKey(seed)
        n_in = 1 + 2 * max(0, cfg.fourier_features)
        sizes = [n_in] + [cfg.width] * cfg.depth + [cfg.dim]
        theta0 = np.where(positive, np.log(np.where(positive, p_known, 1.0)), p_known)
        params = {"net": init_mlp(key, sizes), "theta": jnp.asarray(theta0)}
        params0 = params

        adam_planned, lbfgs_planned = int(self._hp("adam_steps")), int(self._hp("lbfgs_steps"))
        total = clock.iterations(adam_planned + lbfgs_planned)
        if adam_planned + lbfgs_planned > 0 and total < adam_planned + lbfgs_planned:
            n_adam = int(round(total * adam_planned / (adam_planned + lbfgs_planned)))
        else:
            n_adam = adam_planned
        n_lbfgs = max(0, total - n_adam)

        def held_out_error(pr):
            if n_hold == 0:
                return float("nan")
            pred = np.asarray(fns["evaluate"](pr, jnp.asarray(hold_tau)))
            return float(np.linalg.norm(pred - hold_y) / max(np.linalg.norm(hold_y), 1e-300))

        patience = int(self._hp("patience"))
        monitor = getattr(self, "_monitor", None)
        best = {"params": params, "err": np.inf, "step": 0}
        history, steps_done = [], 0
        stopped = "completed"
        w_phys = jnp.asarray(float(self._hp("physics_weight")) if cfg.use_physics else 0.0)

        def after_chunk(pr, losses, phase):
            nonlocal steps_done
            losses = np.asarray(losses)
            history.append(losses)
            steps_done += losses.shape[0]
            if not np.all(np.isfinite(losses[:, 0])):
                return "diverged"
            if monitor is not None:
                # progress hook for benchmarks: (steps, seconds, phase, state at times t)
                monitor(steps_done, clock.elapsed(), phase,
                        lambda t: mean + scale * np.asarray(
                            fns["evaluate"](pr, jnp.asarray(2.0 * (np.asarray(t) - t0) / (t1 - t0) - 1.0))))
            err = held_out_error(pr)
            if n_hold == 0 or err < best["err"]:
                best.update(params=pr, err=err, step=steps_done)
            elif patience > 0 and steps_done - best["step"] >= patience:
                return "early_stopped"
            return None

        for phase, n_phase in (("adam", n_adam), ("lbfgs", n_lbfgs)):
            if n_phase <= 0 or stopped in ("diverged", "time"):
                continue
            if phase == "adam":
                opt_state = fns["adam"].init(params)
            else:
                params = best["params"]
                best["step"] = steps_done      # patience counts afresh in the polish
                opt_state = fns["lbfgs"].init(params)
            left = n_phase
            stopped = "completed"
            while left > 0:
                if clock.expired():
                    stopped = "time"
                    break
                k = min(cfg.chunk_size, left)
                if phase == "adam":
                    params, opt_state, w_phys, losses = fns["adam_chunk"](params, opt_state, w_phys, k, batch)
                else:
                    params, opt_state, losses = fns["lbfgs_chunk"](params, opt_state, w_phys, k, batch)
                left -= k
                verdict = after_chunk(params, np.asarray(losses)[:k], phase)
                if verdict is not None:
                    stopped = verdict
                    break
        if stopped == "diverged" and len(history) <= 1 and best["params"] is params0:
            raise DivergedError(f"{type(self).__name__}: training loss became non-finite at once")
        if steps_done == 0 and n_adam + n_lbfgs > 0:
            raise OverBudgetError(f"{type(self).__name__}: the time budget ran out before the first training step")

        final = best["params"]
        if not all(np.all(np.isfinite(np.asarray(x))) for x in jax.tree_util.tree_leaves(final)):
            raise DivergedError(f"{type(self).__name__}: training produced non-finite weights")
        self.params_ = final
        self.config_ = cfg
        self.vector_field_ = physics.vector_field if cfg.use_physics else None
        self.unknown_ = unknown
        self.positive_ = positive
        self.loss_history_ = np.concatenate(history) if history else np.zeros((0, 3))
        self.n_iterations_ = int(steps_done)
        self.n_adam_steps_ = int(min(steps_done, n_adam))
        self.best_step_ = int(best["step"])
        self.holdout_error_ = float(best["err"])
        self.stop_reason_ = stopped
        self.n_samples_ = int(n)
        self.physics_weight_ = float(w_phys)
        self.train_seconds_ = clock.elapsed()

    # ---------------------------------------------------------- predictions
    def _tau(self, t):
        t0, t1 = self.window_
        return 2.0 * (np.asarray(t, dtype=float) - t0) / (t1 - t0) - 1.0

    def _evaluate(self, t):
        t = np.asarray(t, dtype=float).ravel()
        fns = _compiled(self.config_, self.vector_field_)
        out = np.asarray(fns["evaluate"](self.params_, jnp.asarray(self._tau(t))))
        return self.mean_ + self.scale_ * out

    def _predict(self, t):
        return self._evaluate(t)

    def matched_times(self, y0) -> np.ndarray:
        """Times in the training window where the learned trajectory passes closest to each start state.

        Scaled Euclidean distance on a grid of ``max(2000, 20 n)`` points
        (``n`` training samples); the first of equal minima. This is where
        :meth:`rollout` starts its replay.
        """
        self._check_fitted()
        t0, t1 = self.window_
        n_grid = max(2_000, 20 * self.n_samples_)
        grid = np.linspace(t0, t1, n_grid)
        traj = (self._evaluate(grid) - self.mean_) / self.scale_
        z0 = (np.atleast_2d(np.asarray(y0, dtype=float)) - self.mean_) / self.scale_
        d2 = ((traj[None, :, :] - z0[:, None, :]) ** 2).sum(axis=2)
        return grid[np.argmin(d2, axis=1)]

    def _rollout(self, y0, t, history):
        t_star = self.matched_times(y0)
        rel = np.asarray(t, dtype=float) - float(t[0])
        out = np.stack([self._evaluate(ts + rel) for ts in t_star])
        out[:, 0] = y0      # the state at t[0] is given; the network's own value there may differ
        if not np.all(np.isfinite(out)):
            raise DivergedError(f"{type(self).__name__}: non-finite rollout")
        return out

    def _identified_params(self):
        cfg = self.config_
        theta = np.asarray(self.params_["theta"])
        out = {}
        for i, name in enumerate(cfg.param_names):
            if name in self.unknown_:
                out[name] = float(np.exp(theta[i]) if self.positive_[i] else theta[i])
        return out

    def _n_parameters(self) -> int:
        return count_params(self.params_["net"]) + len(self.unknown_)
