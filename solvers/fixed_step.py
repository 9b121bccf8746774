"""Fixed-step explicit Runge–Kutta integration in JAX (jit, vmap, lax.scan)."""

from __future__ import annotations

import math

import jax
import jax.numpy as jnp
import numpy as np
from jax import lax

from ._compile import run_compiled
from .result import Solution, finite_status
from .tableau import RK4, ButcherTableau

__all__ = ["integrate_fixed", "rk_scan", "rk_step", "strided_loop"]


def rk_step(f, t, y, dt, params, tableau: ButcherTableau = RK4):
    """One explicit Runge–Kutta step ``y(t) -> y(t + dt)``; pure and jittable.

    Parameters
    ----------
    f : callable
        Vector field ``f(t, y, params)``.
    t, dt : float or scalar array
        Time and step.
    y : array, shape (d,)
        State.
    params : mapping
        Parameter values passed to ``f``.
    tableau : ButcherTableau
        The method (its ``b`` weights; an embedded pair's error weights are
        not used here).

    Returns
    -------
    array, shape (d,)
        The state after one step.

    References
    ----------
    E. Hairer, S. P. Nørsett & G. Wanner, *Solving Ordinary Differential
    Equations I*, 2nd ed., Springer (1993), section II.1.
    """
    A, b, c = tableau.A, tableau.b, tableau.c
    ks = []
    for i in range(tableau.stages):
        yi = y
        for j in range(i):
            if A[i, j] != 0.0:
                yi = yi + (dt * float(A[i, j])) * ks[j]
        ks.append(f(t + float(c[i]) * dt, yi, params))
    out = y
    for i in range(tableau.stages):
        if b[i] != 0.0:
            out = out + (dt * float(b[i])) * ks[i]
    return out


def _n_saved(n_steps: int, save_every: int) -> int:
    n_steps, save_every = int(n_steps), int(save_every)
    if n_steps < 0:
        raise ValueError(f"n_steps must be >= 0, got {n_steps}")
    if save_every < 1:
        raise ValueError(f"save_every must be >= 1, got {save_every}")
    if n_steps % save_every:
        raise ValueError(f"n_steps ({n_steps}) must be a multiple of save_every ({save_every})")
    return n_steps // save_every + 1


def rk_scan(f, y0, t0, dt, n_steps, params, *, tableau: ButcherTableau = RK4, save_every: int = 1):
    """Integrate ``n_steps`` fixed steps with ``lax.scan``; pure and jittable.

    Parameters
    ----------
    f : callable
        Vector field ``f(t, y, params)``.
    y0 : array, shape (d,)
        Initial state (one trajectory; ``vmap`` for batches).
    t0, dt : float or scalar array
        Start time and step (may be traced).
    n_steps, save_every : int
        Static Python integers; ``n_steps`` must be a multiple of
        ``save_every``.
    params : mapping
        Passed to ``f``.
    tableau : ButcherTableau
        Runge–Kutta method (default classical RK4).

    Returns
    -------
    array, shape (n_steps // save_every + 1, d)
        States at ``t0 + k * save_every * dt``, the initial state first.
        Times are computed from the step index (no accumulated round-off).
    """
    n_out = _n_saved(n_steps, save_every)
    y0 = jnp.asarray(y0)

    def advance(k, y):
        return rk_step(f, t0 + k * dt, y, dt, params, tableau)

    return strided_loop(advance, y0, n_out, int(save_every))


def strided_loop(advance, y0, n_out: int, stride):
    """Apply ``y = advance(k, y)`` for k = 0, 1, ... and keep every ``stride``-th state.

    ``n_out`` (static) is the number of kept states including ``y0``;
    ``stride`` may be traced (a ``fori_loop`` with dynamic bounds inside a
    ``scan``), so the compiled loop depends only on ``n_out``; that form is
    forward-differentiable only. A Python-int ``stride`` gives nested scans,
    which ``jax.grad`` can go through (what :func:`rk_scan` uses). ``y0`` may be
    any pytree; the result stacks it along a new leading axis.
    """

    if isinstance(stride, (int, np.integer)):
        # static stride: an inner scan, which reverse-mode autodiff can go through
        stride = int(stride)

        def outer(y, j):
            y, _ = lax.scan(lambda c, i: (advance(j * stride + i, c), None), y, jnp.arange(stride))
            return y, y
    else:
        def outer(y, j):
            y = lax.fori_loop(j * stride, (j + 1) * stride, advance, y)
            return y, y

    first = jax.tree_util.tree_map(lambda a: jnp.asarray(a)[None], y0)
    if n_out == 1:
        return first
    _, ys = lax.scan(outer, y0, jnp.arange(n_out - 1))
    return jax.tree_util.tree_map(lambda a, b: jnp.concatenate([a, b], axis=0), first, ys)


def integrate_fixed(f, y0, t0, dt, n_steps, params, *, tableau: ButcherTableau = RK4,
                    save_every: int = 1) -> Solution:
    """Fixed-step Runge–Kutta integration of one trajectory or a batch.

    Compiled once and cached per (f, tableau, shapes, number of saved
    states); ``t0``, ``dt``, ``save_every`` and parameter values are traced,
    so changing them does not recompile. Compilation time is reported in ``compile_seconds``, apart
    from ``seconds``.

    Parameters
    ----------
    f : callable
        Vector field ``f(t, y, params)`` written with ``array_namespace``.
    y0 : array_like, shape (d,) or (B, d)
        Initial state(s); a batch is integrated with ``vmap`` of the
        single-trajectory scan.
    t0, dt : float
        Start time and step.
    n_steps : int
        Number of steps (a multiple of ``save_every``).
    params : mapping
        Parameter values.
    tableau : ButcherTableau
        Runge–Kutta method.
    save_every : int
        Keep every ``save_every``-th state.

    Returns
    -------
    Solution
        ``y`` of shape (n, d) or (B, n, d); status ``"failed"`` (with the
        first time a non-finite state was saved) instead of an exception.

    References
    ----------
    E. Hairer, S. P. Nørsett & G. Wanner, *Solving Ordinary Differential
    Equations I*, 2nd ed., Springer (1993), section II.1.
    """
    y0 = np.asarray(y0, dtype=np.float64)
    if y0.ndim not in (1, 2):
        raise ValueError(f"y0 must have shape (d,) or (B, d), got {y0.shape}")
    dt = float(dt)
    if not math.isfinite(dt) or dt == 0.0:
        raise ValueError(f"dt must be finite and non-zero, got {dt!r}")
    n_out = _n_saved(n_steps, save_every)
    n_steps, save_every = int(n_steps), int(save_every)
    batched = y0.ndim == 2

    def fn(p, y0_, t0_, dt_, stride):
        def one(y):
            return strided_loop(lambda k, z: rk_step(f, t0_ + k * dt_, z, dt_, p, tableau), y, n_out, stride)

        return jax.vmap(one)(y0_) if batched else one(y0_)

    key = ("integrate_fixed", f, tableau, n_out, batched)
    ys, compile_s, seconds = run_compiled(key, fn, params, (y0, np.float64(t0), np.float64(dt),
                                                            np.int64(save_every)))
    ys = np.asarray(ys)
    t = float(t0) + dt * save_every * np.arange(n_out)
    status, message = finite_status(ys, t, batched)
    return Solution(t=t, y=ys, method=f"fixed-{tableau.name}", nfev=n_steps * tableau.stages,
                    n_steps=n_steps, seconds=seconds, status=status, message=message,
                    compile_seconds=compile_s, extra={"dt": dt, "save_every": save_every})
