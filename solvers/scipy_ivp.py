"""scipy.integrate.solve_ivp behind the project's result record."""

from __future__ import annotations

import difflib
import time
import jax
import numpy as np
from scipy import integrate
from scipy.integrate import solve_ivp

from ._compile import callable_key
from .result import Solution

__all__ = ["SCIPY_METHODS", "solve_scipy"]

SCIPY_METHODS = ("DOP853", "RK45", "RK23", "Radau", "BDF", "LSODA")
_IMPLICIT = ("Radau", "BDF", "LSODA")
_JACOBIANS: dict = {}


_COUNTING: dict = {}


class _CostCap(RuntimeError):
    """Raised inside the right-hand side when ``max_nfev`` is reached."""


def _counting_class(method: str):
    """The scipy solver class of ``method`` with a count of accepted steps."""
    cls = _COUNTING.get(method)
    if cls is None:
        base = getattr(integrate, method)

        def _step_impl(self):
            ok, msg = base._step_impl(self)
            if ok:
                self.n_accepted = getattr(self, "n_accepted", 0) + 1
            return ok, msg

        cls = type(f"Counting{method}", (base,), {"_step_impl": _step_impl})
        _COUNTING[method] = cls
    return cls


def _check_method(method: str) -> str:
    if method in SCIPY_METHODS:
        return method
    close = difflib.get_close_matches(str(method), SCIPY_METHODS, n=3, cutoff=0.3)
    if not close:
        close = difflib.get_close_matches(str(method).upper(), [m.upper() for m in SCIPY_METHODS], n=3, cutoff=0.3)
        close = [m for m in SCIPY_METHODS if m.upper() in close]
    hint = f"; did you mean {', '.join(close)}?" if close else ""
    raise ValueError(f"unknown scipy method {method!r}{hint} (valid: {', '.join(SCIPY_METHODS)})")


def _jax_jacobian(f, params, y0):
    """``jac(t, y)`` from ``jax.jacfwd`` of ``f``, or None if ``f`` does not trace."""
    key = callable_key(f)
    jf = _JACOBIANS.get(key)
    if jf is None:
        if len(_JACOBIANS) > 256:
            _JACOBIANS.clear()
        jf = jax.jit(jax.jacfwd(lambda t, y, p: f(t, y, p), argnums=1))
        _JACOBIANS[key] = jf
    p = {k: np.asarray(v, dtype=np.float64) for k, v in params.items()}
    y0 = np.asarray(y0, dtype=np.float64)
    try:
        np.asarray(jf(0.0, y0, p))
    except Exception:  # noqa: BLE001 - parameters may be needed as Python numbers: bake them in
        fixed = dict(params)
        js = jax.jit(jax.jacfwd(lambda t, y: f(t, y, fixed), argnums=1))
        try:
            np.asarray(js(0.0, y0))
        except Exception:  # noqa: BLE001 - f does not trace at all: scipy's finite differences
            return None
        return lambda t, y: np.asarray(js(t, y))

    def jac(t, y):
        return np.asarray(jf(t, y, p))

    return jac


def solve_scipy(f, t_span, y0, params, *, method: str = "DOP853", t_eval=None, rtol: float = 1e-9,
                atol: float = 1e-12, jac=None, max_step: float = np.inf, max_nfev: int | None = None) -> Solution:
    """Integrate ``f(t, y, params)`` with ``scipy.integrate.solve_ivp``.

    Parameters
    ----------
    f : callable
        Vector field ``f(t, y, params)``; called with numpy arrays.
    t_span : (float, float)
        Start and end time.
    y0 : array_like, shape (d,) or (B, d)
        Initial state; a batch is integrated one trajectory after another and
        needs ``t_eval``.
    params : mapping
        Parameter values.
    method : {"DOP853", "RK45", "RK23", "Radau", "BDF", "LSODA"}
        scipy method; an unknown name raises ``ValueError`` naming the closest.
    t_eval : array_like, optional
        Output times (default: the solver's own steps).
    rtol, atol : float
        Tolerances.
    jac : callable ``jac(t, y, params)`` or "fd", optional
        Jacobian for the implicit methods. By default it is ``jax.jacfwd`` of
        ``f`` (jitted) when ``f`` traces under JAX, else scipy's finite
        differences; ``"fd"`` forces finite differences.
    max_step : float
        Largest step allowed.
    max_nfev : int, optional
        Stop (status ``"failed"``, message naming the limit) once the
        right-hand side has been called this many times: a cost cap, e.g. for
        an explicit method on a stiff problem.

    Returns
    -------
    Solution
        ``nfev`` counts right-hand-side calls; ``extra`` holds ``njev`` and
        ``nlu``; ``n_steps`` counts accepted steps. A solver failure or an exception raised by ``f`` gives
        status ``"failed"`` with the message.

    References
    ----------
    P. Virtanen et al., "SciPy 1.0", Nature Methods 17, 261–272 (2020);
    J. R. Dormand & P. J. Prince, J. Comput. Appl. Math. 6, 19–26 (1980);
    E. Hairer & G. Wanner, *Solving ODEs II*, Springer (1996) (Radau IIA);
    L. Petzold, SIAM J. Sci. Stat. Comput. 4, 136–148 (1983) (LSODA).
    """
    method = _check_method(method)
    y0 = np.asarray(y0, dtype=np.float64)
    params = dict(params or {})
    t_span = (float(t_span[0]), float(t_span[1]))
    if t_eval is not None:
        t_eval = np.asarray(t_eval, dtype=np.float64)
    if y0.ndim == 2:
        if t_eval is None:
            raise ValueError("a batch of initial states (B, d) needs t_eval")
        sols = [solve_scipy(f, t_span, y, params, method=method, t_eval=t_eval, rtol=rtol, atol=atol,
                            jac=jac, max_step=max_step, max_nfev=max_nfev) for y in y0]
        bad = [i for i, s in enumerate(sols) if not s.success]
        return Solution(
            t=t_eval, y=np.stack([s.y for s in sols]), method=f"scipy-{method}",
            nfev=max(s.nfev for s in sols), n_steps=max(s.n_steps for s in sols),
            seconds=sum(s.seconds for s in sols), status="failed" if bad else "success",
            message=(f"{len(bad)} of {len(sols)} trajectories failed; first: {sols[bad[0]].message}" if bad else ""),
            extra={"njev": sum(s.extra.get("njev", 0) for s in sols)},
        )
    if y0.ndim != 1:
        raise ValueError(f"y0 must have shape (d,) or (B, d), got {y0.shape}")

    calls = [0]

    def rhs(t, y):
        if max_nfev is not None:
            calls[0] += 1
            if calls[0] > max_nfev:
                raise _CostCap(f"stopped after {max_nfev} right-hand-side evaluations (max_nfev)")
        return np.asarray(f(t, y, params), dtype=np.float64)

    kwargs = {}
    jac_source = "none"
    if method in _IMPLICIT:
        if callable(jac):
            kwargs["jac"] = lambda t, y: np.asarray(jac(t, y, params))
            jac_source = "user"
        elif jac is None:
            j = _jax_jacobian(f, params, y0)
            if j is not None:
                kwargs["jac"] = j
                jac_source = "jax.jacfwd"
            else:
                jac_source = "finite differences"
        else:
            jac_source = "finite differences"
    t0 = time.perf_counter()
    try:
        with np.errstate(over="ignore", invalid="ignore"):
            counter = {}
            cls = _counting_class(method)

            class _Solver(cls):  # remembers itself so that its step count can be read back
                def __init__(self, *a, **k):
                    super().__init__(*a, **k)
                    counter["solver"] = self

            sol = solve_ivp(rhs, t_span, y0, method=_Solver, t_eval=t_eval, rtol=rtol, atol=atol,
                            max_step=max_step, **kwargs)
    except Exception as exc:  # a failure is a status, never an exception mid-sweep
        seconds = time.perf_counter() - t0
        t = t_eval if t_eval is not None else np.array([t_span[0]])
        return Solution(t=np.asarray(t), y=np.full((len(t), y0.shape[0]), np.nan), method=f"scipy-{method}",
                        seconds=seconds, status="failed", message=f"{type(exc).__name__}: {exc}",
                        extra={"jacobian": jac_source})
    seconds = time.perf_counter() - t0
    y = sol.y.T.copy()
    status, message = ("success", "") if sol.status == 0 else ("failed", str(sol.message))
    if status == "success" and not np.isfinite(y).all():
        status, message = "failed", "non-finite state"
    t = sol.t
    if t_eval is not None and len(t) < len(t_eval):  # stopped early: pad, keep shapes
        pad = np.full((len(t_eval) - len(t), y0.shape[0]), np.nan)
        y = np.concatenate([y, pad]) if len(t) else pad
        t = t_eval
    return Solution(t=np.asarray(t), y=y, method=f"scipy-{method}", nfev=int(sol.nfev),
                    n_steps=int(getattr(counter.get("solver"), "n_accepted", 0)),
                    seconds=seconds, status=status, message=message,
                    extra={"njev": int(sol.njev), "nlu": int(sol.nlu), "jacobian": jac_source})
