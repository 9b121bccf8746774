"""Every integrator of :mod:`solvers`, applied to a concrete system by name.

One table maps a method name to how it is run on a :class:`~suite.systems.System`;
the ``solve`` command and the work–precision comparison both use it, so a solver
is measured the same way wherever it appears.

``accuracy`` is a tolerance for adaptive methods and a step size for fixed-step
methods (what one turns to trade cost for error).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

import solvers
from suite.systems.base import System, UnknownNameError

__all__ = ["SolverMethod", "SOLVER_METHODS", "applicable_methods", "solve_system"]


@dataclass(frozen=True)
class SolverMethod:
    name: str
    kind: str  # "adaptive" (accuracy = rtol) or "fixed" (accuracy = step size)
    description: str
    run: Callable
    applies: Callable[[System], bool] = lambda system: True


def _scipy(method):
    def run(system, y0, t_eval, accuracy, atol, max_nfev=None):
        f = system.rhs()
        return solvers.solve_scipy(f, (float(t_eval[0]), float(t_eval[-1])), y0, system.params,
                                   method=method, t_eval=t_eval, rtol=accuracy, atol=atol, max_nfev=max_nfev)
    return run


def _uniform_steps(t_eval, step):
    """Fixed steps that land exactly on every output time (t_eval equally spaced)."""
    dt_out = float(t_eval[1] - t_eval[0]) if len(t_eval) > 1 else float(step)
    sub = max(1, int(np.ceil(dt_out / step - 1e-9)))
    return dt_out / sub, sub


def _rk4(system, y0, t_eval, accuracy, atol):
    dt, sub = _uniform_steps(t_eval, accuracy)
    n = (len(t_eval) - 1) * sub
    sol = solvers.integrate_fixed(system.rhs(), y0, float(t_eval[0]), dt, n, system.params, save_every=sub)
    return sol


def _dopri5(system, y0, t_eval, accuracy, atol):
    return solvers.dopri5(system.rhs(), y0, t_eval, system.params, rtol=accuracy, atol=atol)


def _symplectic(order):
    def run(system, y0, t_eval, accuracy, atol):
        import jax

        dt, sub = _uniform_steps(t_eval, accuracy)
        n = (len(t_eval) - 1) * sub
        p = system.params
        z0 = np.asarray(system.to_canonical(np.asarray(y0, float), p))
        half = z0.shape[-1] // 2
        sol = solvers.integrate_separable(system.kinetic, system.potential, z0[:half], z0[half:],
                                          dt, n, p, order=order, save_every=sub)
        y = np.asarray(jax.vmap(lambda z: system.from_canonical(z, p))(jax.numpy.asarray(sol.y)))
        return solvers.Solution(t=np.asarray(t_eval), y=y, method=f"symplectic{order}", nfev=sol.nfev,
                                n_steps=sol.n_steps, seconds=sol.seconds, status=sol.status,
                                message=sol.message, compile_seconds=sol.compile_seconds)
    return run


def _etdrk4(system, y0, t_eval, accuracy, atol):
    dt, sub = _uniform_steps(t_eval, accuracy)
    n = (len(t_eval) - 1) * sub
    linear, nonlinear = system.semilinear_split()
    u0_hat = np.fft.rfft(np.asarray(y0, float))
    sol = solvers.etdrk4(linear, nonlinear, u0_hat, dt, n, system.params, save_every=sub)
    y = np.fft.irfft(np.asarray(sol.y), n=system.dim, axis=-1)
    return solvers.Solution(t=np.asarray(t_eval), y=y, method="etdrk4", nfev=sol.nfev, n_steps=sol.n_steps,
                            seconds=sol.seconds, status=sol.status, message=sol.message,
                            compile_seconds=sol.compile_seconds)


SOLVER_METHODS: dict[str, SolverMethod] = {
    m.name: m
    for m in (
        SolverMethod("DOP853", "adaptive", "scipy Dormand–Prince 8(5,3)", _scipy("DOP853")),
        SolverMethod("RK45", "adaptive", "scipy Dormand–Prince 5(4)", _scipy("RK45")),
        SolverMethod("Radau", "adaptive", "scipy implicit Radau IIA (order 5)", _scipy("Radau")),
        SolverMethod("LSODA", "adaptive", "scipy LSODA (Adams/BDF switching)", _scipy("LSODA")),
        SolverMethod("rk4", "fixed", "JAX classical Runge–Kutta 4, fixed step", _rk4),
        SolverMethod("dopri5", "adaptive", "JAX adaptive Dormand–Prince 5(4)", _dopri5),
        SolverMethod("verlet", "fixed", "Störmer–Verlet (separable Hamiltonians)", _symplectic(2),
                     lambda s: s.hamiltonian_form == "separable"),
        SolverMethod("yoshida4", "fixed", "4th-order symplectic composition (separable Hamiltonians)",
                     _symplectic(4), lambda s: s.hamiltonian_form == "separable"),
        SolverMethod("etdrk4", "fixed", "exponential time differencing RK4 (semilinear PDEs)", _etdrk4,
                     lambda s: hasattr(s, "semilinear_split")),
    )
}


def applicable_methods(system: System) -> list[str]:
    return [name for name, m in SOLVER_METHODS.items() if m.applies(system)]


def solve_system(system: System, method: str, t_eval, *, y0=None, accuracy=None, atol=1e-12,
                 max_nfev: int | None = None):
    """Integrate ``system`` with the named method; returns a :class:`solvers.Solution`.

    ``accuracy`` is the relative tolerance (adaptive methods, default 1e-9) or
    the step size (fixed-step methods, default a tenth of the output spacing).
    ``max_nfev`` caps the right-hand-side calls of the scipy methods (a
    failed solution past it); the compiled methods have a known step count.
    """
    if method not in SOLVER_METHODS:
        raise UnknownNameError("method", method, SOLVER_METHODS)
    m = SOLVER_METHODS[method]
    if not m.applies(system):
        raise ValueError(f"method {method} does not apply to {system.name} "
                         f"(applicable: {', '.join(applicable_methods(system))})")
    t_eval = np.asarray(t_eval, dtype=float)
    y0 = np.asarray(system.default_y0() if y0 is None else y0, dtype=float)
    if accuracy is None:
        accuracy = 1e-9 if m.kind == "adaptive" else (float(t_eval[1] - t_eval[0]) / 10 if len(t_eval) > 1 else 1e-3)
    if max_nfev is not None and method in solvers.SCIPY_METHODS:
        return m.run(system, y0, t_eval, float(accuracy), float(atol), max_nfev=int(max_nfev))
    return m.run(system, y0, t_eval, float(accuracy), float(atol))
