"""Hamiltonian neural network: a learned scalar H(q, p) and its symplectic gradient."""

from __future__ import annotations

import math

import jax
import jax.numpy as jnp
import numpy as np

from solvers import integrate_hamiltonian, integrate_separable

from ._chunked_training import cached, make_chunk, run_chunks
from ._sampling import substeps
from ._nets import ACTIVATIONS, apply_mlp, count_params, init_mlp
from .base import Capabilities, Learner
from .errors import DivergedError, InvalidDataError, NotApplicableError

__all__ = ["HamiltonianNN", "energy_drift"]


# ----------------------------------------------------------------- the model
# Parameters travel as one flat mapping of arrays (the form the solvers'
# compile cache takes): "H.w0", "H.b0", ... (or "T.*" and "V.*" when
# separable), plus the normalisation "mu", "s" and the output scale "h_scale".

def _flatten(prefix, mlp):
    out = {}
    for i, layer in enumerate(mlp):
        out[f"{prefix}.w{i}"] = layer["w"]
        out[f"{prefix}.b{i}"] = layer["b"]
    return out


def _unflatten(prefix, flat, n_layers):
    return [{"w": flat[f"{prefix}.w{i}"], "b": flat[f"{prefix}.b{i}"]} for i in range(n_layers)]


def _make_parts(cfg):
    """Kinetic ``T(p, prm)`` and potential ``V(q, prm)`` of a separable model."""
    activation, n_layers = cfg["activation"], cfg["n_layers"]

    def kinetic(p, prm):
        n = p.shape[-1]
        x = (p - prm["mu"][n:]) / prm["s"][n:]
        return prm["h_scale"] * apply_mlp(_unflatten("T", prm, n_layers), x, activation)[0]

    def potential(q, prm):
        n = q.shape[-1]
        x = (q - prm["mu"][:n]) / prm["s"][:n]
        return prm["h_scale"] * apply_mlp(_unflatten("V", prm, n_layers), x, activation)[0]

    return kinetic, potential


def _make_hamiltonian(cfg):
    """The learned ``H(z, prm)``; one callable per configuration (cached, so solvers' caches hit)."""
    def build():
        if cfg["separable"]:
            kinetic, potential = _make_parts(cfg)

            def hamiltonian(z, prm):
                n = z.shape[-1] // 2
                return kinetic(z[n:], prm) + potential(z[:n], prm)

            return hamiltonian, kinetic, potential

        activation, n_layers = cfg["activation"], cfg["n_layers"]

        def hamiltonian(z, prm):
            x = (z - prm["mu"]) / prm["s"]
            return prm["h_scale"] * apply_mlp(_unflatten("H", prm, n_layers), x, activation)[0]

        return hamiltonian, None, None

    return cached(("hnn.model",) + tuple(sorted(cfg.items())), build)


def _symplectic_gradient(hamiltonian, z, prm):
    """``J grad H``: ``(dH/dp, -dH/dq)``."""
    n = z.shape[-1] // 2
    g = jax.grad(hamiltonian)(z, prm)
    return jnp.concatenate([g[n:], -g[:n]])


def _midpoint_loss(cfg):
    hamiltonian = _make_hamiltonian(cfg)[0]

    def loss(prm, aux, z0, z1, h):
        zm = 0.5 * (z0 + z1)
        field = jax.vmap(lambda z: _symplectic_gradient(hamiltonian, z, prm))(zm)
        resid = ((z1 - z0) / h[:, None] - field) / aux["dz_scale"]
        return jnp.mean(resid ** 2)

    return loss


def energy_drift(states, physics) -> np.ndarray:
    """Error of the true energy along rollouts: ``H(z(t)) - H(z(t0))``.

    Parameters
    ----------
    states : array, shape (B, n, d) or (n, d)
        Rollout states in the system's coordinates.
    physics : Physics
        With ``hamiltonian`` and ``to_canonical`` (level ``full``); or a
        ``conserved["energy"]`` function of the state.

    Returns
    -------
    ndarray, shape (B, n) or (n,)
        The energy error along each rollout (0 at the start). The harness
        reports e.g. its maximum over the last and first characteristic
        periods, or the slope of a linear fit.
    """
    states = np.asarray(states, dtype=float)
    single = states.ndim == 2
    batch = states[None] if single else states
    p = dict(physics.params)
    if physics.hamiltonian is not None and physics.to_canonical is not None:
        fn = lambda y: physics.hamiltonian(physics.to_canonical(y, p), p)
    elif "energy" in physics.conserved:
        fn = lambda y: physics.conserved["energy"](y, p)
    else:
        raise NotApplicableError("energy_drift needs physics.hamiltonian and to_canonical, or conserved['energy']")
    e = np.asarray(jax.vmap(jax.vmap(fn))(jnp.asarray(batch)))
    e = e - e[:, :1]
    return e[0] if single else e


class HamiltonianNN(Learner):
    r"""Hamiltonian neural network: learn ``H(q, p)``; its symplectic gradient is the field.

    The model is a scalar network ``H(z) = h * MLP((z - mu) / s)`` of the
    canonical coordinates ``z = (q, p)``; its vector field is ``dq/dt =
    dH/dp, dp/dt = -dH/dq``, so its exact flow conserves ``H`` and is
    symplectic. Data arrive in the system's state coordinates and are mapped
    with ``physics.to_canonical`` (e.g. the double pendulum's angular
    velocities to momenta); rollouts map back with ``physics.from_canonical``.

    *Training targets.* Rather than derivatives estimated by finite
    differences (noisy, and biased at coarse sampling), every pair of
    consecutive samples ``(z0, z1)`` with spacing ``h`` gives the residual of
    one implicit-midpoint step, ``(z1 - z0) / h - J grad H((z0 + z1) / 2)``,
    which is explicit because both ends are observed. Its mean square (per
    variable normalised by the spread of ``(z1 - z0) / h``) is minimised with
    optax Adam (gradient clipping, warm-up and cosine decay) in jitted chunks.
    The learned ``H`` is then the Hamiltonian whose implicit-midpoint map at
    step ``h`` best reproduces the data (the midpoint rule's modified
    Hamiltonian), and irregular samples pose no difficulty (each pair has its
    own ``h``).

    *Rollouts* integrate the learned field with the implicit midpoint rule
    (``solvers.integrate_hamiltonian``; symplectic, and exactly
    energy-conserving for the learned ``H`` up to the fixed-point tolerance) at
    the training spacing (the rollout spacing divided into whole steps of
    about the median training spacing). With ``separable=True`` the model is
    ``T(p) + V(q)`` (two networks) and rollouts use Yoshida's fourth-order
    composition (``solvers.integrate_separable``); the right choice for
    mechanical systems with a momentum-independent potential.

    The learned ``H`` matches the true one only up to an additive constant and
    the error of the fit; the true energy of rollouts therefore oscillates
    but, unlike a generic learned field, does not drift secularly. Use
    :func:`energy_drift` to measure it.

    Parameters
    ----------
    width, depth : int
        Hidden units per layer and number of hidden layers.
    activation : str
        Smooth activation (its second derivative enters training).
    separable : bool
        Learn ``T(p) + V(q)`` and roll out with Yoshida-4.
    batch_size : int
        Sample pairs per optimiser step.
    n_iterations : int
        Optimiser steps (capped by ``Budget.max_iterations``).
    learning_rate : float
        Peak Adam learning rate.
    grad_clip : float
        Global gradient-norm clip.
    chunk_size : int
        Optimiser steps per jitted call (the budget is checked between calls).

    References
    ----------
    S. Greydanus, M. Dzamba & J. Yosinski, "Hamiltonian neural networks",
    NeurIPS 32 (2019).
    M. David & F. Méhats, "Symplectic learning for Hamiltonian neural
    networks", J. Comput. Phys. 494, 112495 (2023) (midpoint-rule training,
    from memory).
    E. Hairer, C. Lubich & G. Wanner, *Geometric Numerical Integration*,
    2nd ed., Springer (2006).
    """

    capabilities = Capabilities(
        tasks=frozenset({"forecast", "climate"}),
        physics=frozenset({"none"}),
        needs_hamiltonian=True,
        deterministic=True,
        differentiable_rollout=False,
        min_samples=3,
    )
    reference = "Greydanus, Dzamba & Yosinski, Hamiltonian neural networks, NeurIPS (2019)"

    def __init__(self, width=64, depth=2, activation="tanh", separable=False, batch_size=64,
                 n_iterations=3000, learning_rate=3e-3, grad_clip=1.0, chunk_size=100):
        self.width = width
        self.depth = depth
        self.activation = activation
        self.separable = separable
        self.batch_size = batch_size
        self.n_iterations = n_iterations
        self.learning_rate = learning_rate
        self.grad_clip = grad_clip
        self.chunk_size = chunk_size

    def _validate(self):
        for name in ("width", "depth", "batch_size", "n_iterations", "chunk_size"):
            v = getattr(self, name)
            if not isinstance(v, (int, np.integer)) or isinstance(v, bool) or v < 1:
                raise InvalidDataError(f"HamiltonianNN hyper-parameter {name} must be a positive integer, got {v!r}")
        for name in ("learning_rate", "grad_clip"):
            v = getattr(self, name)
            if not isinstance(v, (int, float)) or not math.isfinite(v) or v <= 0:
                raise InvalidDataError(f"HamiltonianNN hyper-parameter {name} must be a positive number, got {v!r}")
        if self.activation not in ACTIVATIONS or self.activation == "relu":
            valid = sorted(a for a in ACTIVATIONS if a != "relu")
            raise InvalidDataError(f"HamiltonianNN activation must be a smooth one of {valid}, got {self.activation!r}")

    def _canonical(self, y):
        try:
            z = np.stack([np.asarray(self.to_canonical_(row, self.phys_params_), dtype=float) for row in y])
        except KeyError as exc:
            raise NotApplicableError(f"the coordinate map to canonical coordinates needs parameter {exc} "
                                     "in physics.params") from None
        return z

    def _fit(self, data, physics, budget, seed):
        self._validate()
        if physics.to_canonical is None or physics.from_canonical is None:
            raise NotApplicableError("HamiltonianNN needs a system with canonical coordinates "
                                     "(physics.to_canonical and from_canonical)")
        if data.dim % 2:
            raise NotApplicableError(f"HamiltonianNN needs an even state dimension (q, p), got {data.dim}")
        clock = budget.clock()
        self.to_canonical_ = physics.to_canonical
        self.from_canonical_ = physics.from_canonical
        self.phys_params_ = dict(physics.params)

        z0s, z1s, hs, allz = [], [], [], []
        for tr in data.trajectories:
            z = self._canonical(tr.y)
            if not np.all(np.isfinite(z)):
                raise InvalidDataError("the canonical coordinates of the training data are not finite")
            allz.append(z)
            if tr.t.size >= 2:
                z0s.append(z[:-1])
                z1s.append(z[1:])
                hs.append(np.diff(tr.t))
        if not hs:
            raise InvalidDataError("HamiltonianNN needs a trajectory with at least 2 samples")
        z0, z1, h = np.concatenate(z0s), np.concatenate(z1s), np.concatenate(hs)
        allz = np.concatenate(allz)
        mu = allz.mean(axis=0)
        s = allz.std(axis=0)
        s = np.where(s > 0, s, 1.0)
        rate = (z1 - z0) / h[:, None]
        dz_scale = rate.std(axis=0)
        dz_scale = np.where(dz_scale > 0, dz_scale, np.maximum(np.abs(rate).mean(axis=0), 1e-12))
        n = data.dim // 2
        # dq/dt ~ h_scale / s_p and dp/dt ~ h_scale / s_q: match both in the geometric mean
        h_scale = float(np.exp(np.mean(np.log(np.concatenate([dz_scale[:n] * s[n:], dz_scale[n:] * s[:n]])))))

        cfg = {"activation": self.activation, "n_layers": int(self.depth) + 1, "separable": bool(self.separable)}
        key = jax.random.PRNGKey(seed)
        key, k1, k2 = jax.random.split(key, 3)
        hidden = [int(self.width)] * int(self.depth)
        if self.separable:
            prm = {**_flatten("T", init_mlp(k1, [n] + hidden + [1])), **_flatten("V", init_mlp(k2, [n] + hidden + [1]))}
        else:
            prm = _flatten("H", init_mlp(k1, [2 * n] + hidden + [1]))
        prm.update(mu=jnp.asarray(mu), s=jnp.asarray(s), h_scale=jnp.asarray(h_scale))
        fixed = {"mu", "s", "h_scale"}
        trainable = {k: v for k, v in prm.items() if k not in fixed}
        consts = {k: prm[k] for k in fixed}

        loss = _midpoint_loss(cfg)

        def train_loss(theta, aux, a, b, c):
            return loss({**theta, **aux["consts"]}, aux, a, b, c)

        ck = ("hnn.train", int(self.batch_size), float(self.grad_clip)) + tuple(sorted(cfg.items()))
        chunk, tx = cached(ck, lambda: make_chunk(train_loss, int(self.batch_size), float(self.grad_clip),
                                                  "hnn.train"))
        aux = {"dz_scale": jnp.asarray(dz_scale), "consts": consts}
        theta, done, history = run_chunks(chunk, tx, trainable, key, aux, (z0, z1, h),
                                          clock.iterations(self.n_iterations), self.learning_rate,
                                          self.chunk_size, clock, "HamiltonianNN")
        self.cfg_ = cfg
        self.params_ = {k: np.asarray(v) for k, v in {**theta, **consts}.items()}
        self.n_iterations_ = done
        self.loss_history_ = np.asarray(history)
        self.step_ = float(np.median(h))

    # ----------------------------------------------------------------- predict
    def hamiltonian(self, y):
        """The learned Hamiltonian at states ``y`` (..., d) given in the system's coordinates."""
        self._check_fitted()
        y = np.asarray(y, dtype=float)
        flat = y.reshape(-1, y.shape[-1])
        z = self._canonical(flat)
        ham = _make_hamiltonian(self.cfg_)[0]
        prm = {k: jnp.asarray(v) for k, v in self.params_.items()}
        return np.asarray(jax.vmap(lambda zz: ham(zz, prm))(jnp.asarray(z))).reshape(y.shape[:-1])

    def _rollout(self, y0, t, history):
        n_out = t.size
        if n_out == 0:
            return np.zeros((y0.shape[0], 0, y0.shape[1]))
        if n_out == 1:
            return y0[:, None, :].copy()
        h, m = substeps(t, self.step_)
        z0 = self._canonical(y0)
        ham, kinetic, potential = _make_hamiltonian(self.cfg_)
        n_steps = (n_out - 1) * m
        if self.cfg_["separable"]:
            d = z0.shape[1] // 2
            sol = integrate_separable(kinetic, potential, z0[:, :d], z0[:, d:], h / m, n_steps, self.params_,
                                      order=4, save_every=m)
        else:
            sol = integrate_hamiltonian(ham, z0, h / m, n_steps, self.params_, save_every=m)
        zs = np.asarray(sol.y)
        if not np.all(np.isfinite(zs)):
            raise DivergedError(f"HamiltonianNN rollout produced non-finite states ({sol.message})")
        back = jax.vmap(jax.vmap(lambda z: self.from_canonical_(z, self.phys_params_)))
        out = np.array(back(jnp.asarray(zs)))
        if not np.all(np.isfinite(out)):
            raise DivergedError("HamiltonianNN rollout left the domain of the coordinate map")
        out[:, 0] = y0
        return out

    def _n_parameters(self):
        return count_params({k: v for k, v in self.params_.items() if k not in ("mu", "s", "h_scale")})
