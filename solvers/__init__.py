"""Floor 1: integrators and dynamical-systems numerics on plain callables.

Vector fields are callables ``f(t, y, params)`` where ``params`` is a mapping
of names to floats; the same function runs under numpy and ``jax.numpy``.
This package knows no system by name.

Contents
--------
- :func:`solve_scipy` — scipy's ``solve_ivp`` (DOP853, RK45, Radau, LSODA, ...).
- :func:`integrate_fixed`, :func:`rk_step`, :func:`rk_scan` — fixed-step
  Runge–Kutta in JAX (:class:`ButcherTableau`: ``RK4``, ``DOPRI5``, ...).
- :func:`dopri5` — adaptive Dormand–Prince 5(4) in JAX, batched.
- :func:`integrate_separable`, :func:`integrate_hamiltonian` and the steps
  :func:`verlet_step`, :func:`yoshida4_step`, :func:`implicit_midpoint_step`.
- :func:`etdrk4`, :func:`make_etdrk4_step` — stiff semilinear PDEs.
- :func:`integrate_taylor`, :func:`taylor_coefficients`, :func:`taylor_step` —
  high-order Taylor series with automatic coefficients in JAX, batched.
- :func:`solve_mpmath`, :func:`cross_check` — high precision and solver agreement.
- :func:`lyapunov_spectrum`, :func:`largest_lyapunov_exponent`,
  :func:`kaplan_yorke_dimension`.
- :func:`reference_trajectory` — a reference with its ``reference_horizon``.
"""

from __future__ import annotations

from . import _config  # noqa: F401  (enables float64 in JAX, once)
from .adaptive import dopri5
from .arrays import array_namespace
from .etdrk4 import etdrk4, etdrk4_coefficients, make_etdrk4_step
from .fixed_step import integrate_fixed, rk_scan, rk_step
from .horizon import reference_trajectory
from .lyapunov import LyapunovResult, kaplan_yorke_dimension, largest_lyapunov_exponent, lyapunov_spectrum
from .precise import MPNumber, cross_check, solve_mpmath
from .result import Solution
from .scipy_ivp import SCIPY_METHODS, solve_scipy
from .symplectic import (
    implicit_midpoint_step,
    integrate_hamiltonian,
    integrate_separable,
    verlet_step,
    yoshida4_step,
)
from .tableau import DOPRI5, HEUN2, RK3, RK4, ButcherTableau
from .taylor import TaylorUnsupportedError, integrate_taylor, jorba_zou_order, taylor_coefficients, taylor_step

__all__ = [
    "DOPRI5",
    "HEUN2",
    "RK3",
    "RK4",
    "SCIPY_METHODS",
    "ButcherTableau",
    "LyapunovResult",
    "MPNumber",
    "Solution",
    "TaylorUnsupportedError",
    "array_namespace",
    "cross_check",
    "dopri5",
    "etdrk4",
    "etdrk4_coefficients",
    "implicit_midpoint_step",
    "integrate_fixed",
    "integrate_hamiltonian",
    "integrate_separable",
    "integrate_taylor",
    "jorba_zou_order",
    "kaplan_yorke_dimension",
    "largest_lyapunov_exponent",
    "lyapunov_spectrum",
    "make_etdrk4_step",
    "reference_trajectory",
    "rk_scan",
    "rk_step",
    "solve_mpmath",
    "solve_scipy",
    "taylor_coefficients",
    "taylor_step",
    "verlet_step",
    "yoshida4_step",
]
