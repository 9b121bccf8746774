"""Batched fixed-step integration sharded over several JAX devices.

A ``lax.scan`` time loop runs on one thread, so a batch of trajectories on
one CPU device uses one core whatever the batch size. Exposing the cores as
separate host devices (``XLA_FLAGS=--xla_force_host_platform_device_count=N``,
set before JAX is imported) and splitting the batch over them with
``jax.shard_map`` runs the pieces side by side: each device integrates its
slice with the same ``vmap`` of the single-trajectory scan that
:func:`solvers.integrate_fixed` uses, so results agree with it to round-off.
"""

from __future__ import annotations

import math

import jax
import numpy as np
from jax.sharding import Mesh, PartitionSpec

from ._compile import run_compiled
from .fixed_step import _n_saved, rk_step, strided_loop
from .result import Solution, finite_status
from .tableau import RK4, ButcherTableau
from .taylor import _integrate as _integrate_taylor

__all__ = ["integrate_fixed_sharded", "integrate_taylor_sharded"]


def integrate_fixed_sharded(f, y0, t0, dt, n_steps, params, *, tableau: ButcherTableau = RK4,
                            save_every: int = 1, devices=None) -> Solution:
    """Fixed-step Runge–Kutta integration of a batch, split over ``devices``.

    Parameters
    ----------
    f, t0, dt, n_steps, params, tableau, save_every
        As in :func:`solvers.integrate_fixed`.
    y0 : array_like, shape (B, d)
        Initial states; ``B`` need not be a multiple of the device count
        (the batch is padded with copies of its last state, then cut back).
    devices : sequence of jax devices, optional
        Default ``jax.devices()``. With one device this is
        :func:`solvers.integrate_fixed` with extra steps.

    Returns
    -------
    Solution
        ``y`` of shape (B, n, d); ``extra["devices"]`` is the device count.

    References
    ----------
    E. Hairer, S. P. Nørsett & G. Wanner, *Solving Ordinary Differential
    Equations I*, 2nd ed., Springer (1993), section II.1 (the method);
    the data-parallel split is plain batch partitioning.
    """
    y0 = np.asarray(y0, dtype=np.float64)
    if y0.ndim != 2:
        raise ValueError(f"y0 must have shape (B, d) for a sharded batch, got {y0.shape}")
    dt = float(dt)
    if not math.isfinite(dt) or dt == 0.0:
        raise ValueError(f"dt must be finite and non-zero, got {dt!r}")
    n_out = _n_saved(n_steps, save_every)
    n_steps, save_every = int(n_steps), int(save_every)
    devs = tuple(jax.devices() if devices is None else devices)
    if not devs:
        raise ValueError("devices must name at least one device")
    n_dev = len(devs)
    batch = y0.shape[0]
    pad = (-batch) % n_dev
    y0p = np.concatenate([y0, np.repeat(y0[-1:], pad, axis=0)]) if pad else y0
    mesh = Mesh(np.array(devs), ("batch",))
    P = PartitionSpec

    def fn(p, y0_, t0_, dt_):
        def local(p_, ys, t0__, dt__):
            def one(y):
                return strided_loop(lambda k, z: rk_step(f, t0__ + k * dt__, z, dt__, p_, tableau), y,
                                    n_out, save_every)

            return jax.vmap(one)(ys)

        return jax.shard_map(local, mesh=mesh, in_specs=(P(), P("batch"), P(), P()),
                             out_specs=P("batch"))(p, y0_, t0_, dt_)

    key = ("integrate_fixed_sharded", f, tableau, n_out, save_every, tuple(d.id for d in devs))
    ys, compile_s, seconds = run_compiled(key, fn, params, (y0p, np.float64(t0), np.float64(dt)))
    ys = np.asarray(ys)[:batch]
    t = float(t0) + dt * save_every * np.arange(n_out)
    status, message = finite_status(ys, t, True)
    return Solution(t=t, y=ys, method=f"fixed-{tableau.name}-sharded", nfev=n_steps * tableau.stages,
                    n_steps=n_steps, seconds=seconds, status=status, message=message,
                    compile_seconds=compile_s, extra={"dt": dt, "save_every": save_every, "devices": n_dev})


def integrate_taylor_sharded(f, y0, t_eval, params, *, devices=None, **options) -> Solution:
    """Taylor-series integration of a batch (:func:`solvers.integrate_taylor`), split over ``devices``.

    Parameters
    ----------
    f, t_eval, params
        As in :func:`solvers.integrate_taylor`.
    y0 : array_like, shape (B, d)
        Initial states; padded with copies of the last to a multiple of the
        device count, then cut back.
    devices : sequence of jax devices, optional
        Default ``jax.devices()``.
    **options
        ``order``, ``dt`` or ``tol``, ``safety``, ``max_steps`` as in
        :func:`solvers.integrate_taylor`.

    Returns
    -------
    Solution
        As :func:`solvers.integrate_taylor`; ``extra["devices"]`` is the
        device count.

    References
    ----------
    A. Jorba & M. Zou, Experimental Mathematics 14, 99–117 (2005) (the
    method); the data-parallel split is plain batch partitioning.
    """
    devs = tuple(jax.devices() if devices is None else devices)
    return _integrate_taylor(f, y0, t_eval, params, devices=devs, sharded=True, **options)
