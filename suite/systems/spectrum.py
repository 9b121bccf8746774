"""Lyapunov spectrum of a concrete system with per-system numerical settings."""

from __future__ import annotations

import solvers

from .base import System

__all__ = ["system_lyapunov_spectrum", "lyapunov_settings"]


def lyapunov_settings(system: System, t_end: float | None = None) -> dict:
    """Step, transient and averaging time for :func:`solvers.lyapunov_spectrum`.

    The step is the system's own sampling step capped at 0.01 time units
    (RK4 on the tangent dynamics), unless the system provides
    ``lyapunov_options()`` (e.g. a stiff PDE that needs its own step map).
    ``t_end`` is the averaging time after the transient. Averaging defaults to the longer of 10,000 time units and 2,000 Lyapunov
    times, capped at 2 million steps: finite-time estimates of Lorenz-63's
    largest exponent still wander by about 1 % after 1,000 time units
    (measured: 0.9145 against 0.9056), and by about 0.1 % after 10,000.
    """
    opts = {"dt": min(system.sample_dt, 0.01), "transient": float(system.transient)}
    if hasattr(system, "lyapunov_options"):
        opts.update(system.lyapunov_options())
    if t_end is None:
        lt = system.lyapunov_time or system.time_unit
        t_end = min(max(10000.0, 2000.0 * lt), 2e6 * opts["dt"])
    # ``t_end`` here is the averaging time; the solvers count it from t0, transient included
    opts["t_end"] = float(opts["transient"] + t_end)
    return opts


def system_lyapunov_spectrum(system: System, t_end: float | None = None, y0=None):
    """Full spectrum at the system's parameters; returns :class:`solvers.LyapunovResult`."""
    opts = lyapunov_settings(system, t_end)
    y0 = system.default_y0() if y0 is None else y0
    return solvers.lyapunov_spectrum(system.rhs(), y0, system.params, **opts)
