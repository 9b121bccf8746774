"""Symplectic integrators for Hamiltonian systems (JAX)."""

from __future__ import annotations

import jax
import jax.numpy as jnp
import numpy as np
from jax import lax

from ._compile import run_compiled
from .fixed_step import _n_saved, strided_loop
from .result import Solution

__all__ = [
    "implicit_midpoint_step",
    "integrate_hamiltonian",
    "integrate_separable",
    "verlet_step",
    "yoshida4_step",
]

# Triple-jump composition coefficients (Yoshida 1990; Forest & Ruth 1990).
_CBRT2 = 2.0 ** (1.0 / 3.0)
_W1 = 1.0 / (2.0 - _CBRT2)
_W0 = -_CBRT2 / (2.0 - _CBRT2)


def verlet_step(kinetic, potential, q, p, dt, params):
    """One Störmer–Verlet (leapfrog, kick–drift–kick) step; pure and jittable.

    Parameters
    ----------
    kinetic : callable
        Scalar ``T(p, params)``.
    potential : callable
        Scalar ``V(q, params)``.
    q, p : array, shape (n,)
        Positions and momenta.
    dt : float
        Step.
    params : mapping
        Passed to ``kinetic`` and ``potential``.

    Returns
    -------
    (q, p) : tuple of arrays
        The state after one step (second order, symplectic, time-reversible).

    References
    ----------
    E. Hairer, C. Lubich & G. Wanner, "Geometric numerical integration
    illustrated by the Störmer–Verlet method", Acta Numerica 12, 399–450 (2003).
    """
    grad_t = jax.grad(kinetic, argnums=0)
    grad_v = jax.grad(potential, argnums=0)
    p = p - (0.5 * dt) * grad_v(q, params)
    q = q + dt * grad_t(p, params)
    p = p - (0.5 * dt) * grad_v(q, params)
    return q, p


def yoshida4_step(kinetic, potential, q, p, dt, params):
    """One 4th-order symplectic step: the triple-jump composition of Verlet.

    Three Störmer–Verlet steps of sizes ``w1 dt, w0 dt, w1 dt`` with
    ``w1 = 1 / (2 - 2^(1/3))`` and ``w0 = 1 - 2 w1``. Same arguments and
    result as :func:`verlet_step`.

    References
    ----------
    H. Yoshida, "Construction of higher order symplectic integrators",
    Phys. Lett. A 150, 262–268 (1990).
    E. Forest & R. D. Ruth, "Fourth-order symplectic integration",
    Physica D 43, 105–117 (1990).
    """
    q, p = verlet_step(kinetic, potential, q, p, _W1 * dt, params)
    q, p = verlet_step(kinetic, potential, q, p, _W0 * dt, params)
    q, p = verlet_step(kinetic, potential, q, p, _W1 * dt, params)
    return q, p


def _hamiltonian_field(hamiltonian, z, params):
    n = z.shape[-1] // 2
    g = jax.grad(hamiltonian, argnums=0)(z, params)
    return jnp.concatenate([g[n:], -g[:n]])


def _implicit_midpoint(hamiltonian, z, dt, params, tol, max_iter, fixed_iterations):
    f0 = _hamiltonian_field(hamiltonian, z, params)
    z_new = z + dt * f0  # explicit Euler predictor

    def update(zn):
        return z + dt * _hamiltonian_field(hamiltonian, 0.5 * (z + zn), params)

    if fixed_iterations is not None:
        z_new = lax.fori_loop(0, int(fixed_iterations), lambda i, zn: update(zn), z_new)
        return z_new, jnp.asarray(int(fixed_iterations)), jnp.asarray(True)

    def cond(s):
        zn, delta, it = s
        return (delta > tol) & (it < max_iter)

    def body(s):
        zn, _, it = s
        zn2 = update(zn)
        delta = jnp.max(jnp.abs(zn2 - zn) / jnp.maximum(1.0, jnp.abs(zn2)))
        return zn2, delta, it + 1

    z_new, delta, it = lax.while_loop(cond, body, (z_new, jnp.asarray(jnp.inf), jnp.asarray(0)))
    return z_new, it, delta <= tol


def implicit_midpoint_step(hamiltonian, z, dt, params, *, tol: float = 1e-14, max_iter: int = 100,
                           fixed_iterations: int | None = None):
    """One implicit-midpoint step for ``dz/dt = J grad H(z)``; pure and jittable.

    Solves ``z1 = z0 + dt J grad H((z0 + z1) / 2)`` by fixed-point
    iteration from an explicit Euler predictor, until the update is below
    ``tol`` (relative to ``max(1, |z|)``, componentwise) or ``max_iter``
    iterations. The iteration converges when ``dt`` times the Lipschitz
    constant of ``J grad H`` is below one (non-stiff Hamiltonians).

    Parameters
    ----------
    hamiltonian : callable
        Scalar ``H(z, params)`` with ``z = concatenate([q, p])`` (canonical
        coordinates); need not be separable (a learned network is fine).
    z : array, shape (2n,)
        State.
    dt : float
        Step.
    params : pytree
        Passed to ``hamiltonian``.
    tol, max_iter : float, int
        Stopping rule of the iteration (``lax.while_loop``: forward-mode
        differentiable only).
    fixed_iterations : int, optional
        If given, run exactly this many iterations with ``lax.fori_loop``
        instead, which reverse-mode autodiff (``jax.grad``) can go through;
        use this when training through the step.

    Returns
    -------
    array, shape (2n,)
        The state after one step (second order, symplectic, symmetric).

    References
    ----------
    E. Hairer, C. Lubich & G. Wanner, *Geometric Numerical Integration*,
    2nd ed., Springer (2006), sections II.1 and VI.3.
    """
    return _implicit_midpoint(hamiltonian, z, dt, params, tol, max_iter, fixed_iterations)[0]


def integrate_separable(kinetic, potential, q0, p0, dt, n_steps, params, *, order: int = 4,
                        save_every: int = 1) -> Solution:
    """Integrate ``H = T(p) + V(q)`` with Störmer–Verlet (order 2) or Yoshida (order 4).

    Parameters
    ----------
    kinetic, potential : callable
        Scalars ``T(p, params)`` and ``V(q, params)`` (JAX-differentiable).
    q0, p0 : array_like, shape (n,) or (B, n)
        Initial positions and momenta (a batch runs with ``vmap``).
    dt : float
        Step.
    n_steps : int
        Number of steps, a multiple of ``save_every``.
    params : mapping
        Parameter values.
    order : {2, 4}
        2: Störmer–Verlet; 4: Yoshida/Forest–Ruth triple jump.
    save_every : int
        Keep every ``save_every``-th state.

    Returns
    -------
    Solution
        ``y = concatenate([q, p], axis=-1)``; ``nfev`` counts gradient
        evaluations of V (Verlet: 2 per step, Yoshida: 6; the shared
        half-kicks of consecutive steps are not merged).

    References
    ----------
    H. Yoshida, Phys. Lett. A 150, 262–268 (1990).
    E. Hairer, C. Lubich & G. Wanner, *Geometric Numerical Integration*,
    2nd ed., Springer (2006).
    """
    if order not in (2, 4):
        raise ValueError(f"order must be 2 (Störmer–Verlet) or 4 (Yoshida), got {order!r}")
    q0 = np.asarray(q0, dtype=np.float64)
    p0 = np.asarray(p0, dtype=np.float64)
    if q0.shape != p0.shape or q0.ndim not in (1, 2):
        raise ValueError(f"q0 and p0 must have the same shape (n,) or (B, n), got {q0.shape} and {p0.shape}")
    n_out = _n_saved(n_steps, save_every)
    n_steps, save_every = int(n_steps), int(save_every)
    step = verlet_step if order == 2 else yoshida4_step
    batched = q0.ndim == 2

    def one(q, p, dt_, prm, stride):
        qs, ps = strided_loop(lambda k, c: step(kinetic, potential, c[0], c[1], dt_, prm), (q, p), n_out, stride)
        return jnp.concatenate([qs, ps], axis=-1)

    def fn(prm, q, p, dt_, stride):
        if batched:
            return jax.vmap(lambda a, b: one(a, b, dt_, prm, stride))(q, p)
        return one(q, p, dt_, prm, stride)

    key = ("integrate_separable", kinetic, potential, order, n_out, batched)
    ys, compile_s, seconds = run_compiled(key, fn, params, (q0, p0, np.float64(dt), np.int64(save_every)))
    ys = np.asarray(ys)
    t = float(dt) * save_every * np.arange(n_out)
    ok = bool(np.isfinite(ys).all())
    return Solution(t=t, y=ys, method="verlet" if order == 2 else "yoshida4",
                    nfev=n_steps * (2 if order == 2 else 6), n_steps=n_steps, seconds=seconds,
                    status="success" if ok else "failed", message="" if ok else "non-finite state",
                    compile_seconds=compile_s, extra={"dt": float(dt), "order": order})


def integrate_hamiltonian(hamiltonian, z0, dt, n_steps, params, *, save_every: int = 1, tol: float = 1e-14,
                          max_iter: int = 100) -> Solution:
    """Integrate a general (non-separable) Hamiltonian with the implicit midpoint rule.

    Parameters
    ----------
    hamiltonian : callable
        Scalar ``H(z, params)``, ``z = concatenate([q, p])``.
    z0 : array_like, shape (2n,) or (B, 2n)
        Initial state(s).
    dt : float
        Step.
    n_steps, save_every : int
        Number of steps (a multiple of ``save_every``) and output stride.
    params : mapping
        Parameter values.
    tol, max_iter : float, int
        Fixed-point stopping rule (see :func:`implicit_midpoint_step`).

    Returns
    -------
    Solution
        ``extra["max_iterations"]`` is the largest iteration count of any
        step; status ``"failed"`` if some step did not reach ``tol`` or a
        state became non-finite.

    References
    ----------
    E. Hairer, C. Lubich & G. Wanner, *Geometric Numerical Integration*,
    2nd ed., Springer (2006), section VI.3.
    """
    z0 = np.asarray(z0, dtype=np.float64)
    if z0.ndim not in (1, 2) or z0.shape[-1] % 2:
        raise ValueError(f"z0 must have shape (2n,) or (B, 2n), got {z0.shape}")
    n_out = _n_saved(n_steps, save_every)
    n_steps, save_every = int(n_steps), int(save_every)
    batched = z0.ndim == 2

    def one(z, dt_, prm, stride):
        def advance(k, c):
            zc, it_max, ok = c
            zn, it, conv = _implicit_midpoint(hamiltonian, zc, dt_, prm, tol, max_iter, None)
            return zn, jnp.maximum(it_max, it), ok & conv

        zs, its, oks = strided_loop(advance, (z, jnp.asarray(0), jnp.asarray(True)), n_out, stride)
        return zs, its[-1], oks[-1]

    def fn(prm, z, dt_, stride):
        if batched:
            return jax.vmap(lambda a: one(a, dt_, prm, stride))(z)
        return one(z, dt_, prm, stride)

    key = ("integrate_hamiltonian", hamiltonian, n_out, batched, tol, max_iter)
    (ys, it_max, ok), compile_s, seconds = run_compiled(key, fn, params, (z0, np.float64(dt), np.int64(save_every)))
    ys = np.asarray(ys)
    it_max = int(np.max(it_max))
    ok = bool(np.all(ok))
    finite = bool(np.isfinite(ys).all())
    status, message = "success", ""
    if not finite:
        status, message = "failed", "non-finite state"
    elif not ok:
        status, message = "failed", f"fixed-point iteration did not reach tol={tol:g} in {max_iter} iterations"
    t = float(dt) * save_every * np.arange(n_out)
    return Solution(t=t, y=ys, method="implicit-midpoint", nfev=0, n_steps=n_steps, seconds=seconds,
                    status=status, message=message, compile_seconds=compile_s,
                    extra={"dt": float(dt), "max_iterations": it_max})
