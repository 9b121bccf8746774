"""Reference trajectories that carry their own validity horizon."""

from __future__ import annotations

import numpy as np

from .result import Solution
from .scipy_ivp import solve_scipy

__all__ = ["reference_trajectory"]


def reference_trajectory(f, y0, t_eval, params, *, scale=None, threshold: float = 0.01, rtol=(1e-12, 1e-10),
                         atol: float = 1e-13, method="DOP853") -> Solution:
    """A reference trajectory and the time up to which it can be trusted.

    Two integrations are run: at ``rtol[0]`` and ``rtol[1]`` with the same
    method, or, if ``method`` is a pair, with the two methods (each at the
    matching ``rtol``; a single ``rtol`` float is used for both). Their
    normalised difference is ``separation(t) = max_i |y_a,i - y_b,i| /
    scale_i``; the *reference horizon* is the first output time at which it
    exceeds ``threshold`` (``t_eval[-1]`` if it never does).

    No metric may compare anything with this reference past the reference
    horizon: beyond it the reference is one arbitrary member of a family of
    trajectories that the integrator cannot tell apart, so only statistics
    (invariant measures, spectra, exponents) may use later states.

    Parameters
    ----------
    f : callable
        Vector field ``f(t, y, params)``.
    y0 : array_like, shape (d,)
        Initial state.
    t_eval : array_like, shape (n,)
        Output times; the integration spans ``[t_eval[0], t_eval[-1]]``.
    params : mapping
        Parameter values.
    scale : array_like, shape (d,), optional
        Per-variable scale (e.g. the attractor's standard deviation);
        default: the standard deviation of the tighter run over ``t_eval``
        (variables with zero spread use their largest absolute value, or 1).
    threshold : float
        Relative separation that ends the horizon.
    rtol : pair of float or float
        Tolerances of the tighter and the looser run.
    atol : float
        Absolute tolerance of both runs.
    method : str or pair of str
        scipy method(s).

    Returns
    -------
    Solution
        ``y`` of the tighter run; ``extra["reference_horizon"]`` (float),
        ``extra["separation"]`` ((n,) array), ``extra["scale"]``,
        ``extra["methods"]``, ``extra["rtols"]``. If either run fails the
        status is ``"failed"`` and the horizon is the last time both runs
        are finite and agree (possibly ``t_eval[0]``).

    References
    ----------
    E. Hairer, S. P. Nørsett & G. Wanner, *Solving ODEs I*, 2nd ed.,
    Springer (1993), section II.4 (error estimation by a second run at a
    different tolerance).
    """
    t_eval = np.asarray(t_eval, dtype=np.float64)
    if t_eval.ndim != 1 or t_eval.size < 2:
        raise ValueError("t_eval must be a 1-D array with at least two times")
    methods = (method, method) if isinstance(method, str) else tuple(method)
    rtols = (float(rtol), float(rtol)) if np.isscalar(rtol) else tuple(float(r) for r in rtol)
    if len(methods) != 2 or len(rtols) != 2:
        raise ValueError("method and rtol must each be one value or a pair")
    if not threshold > 0:
        raise ValueError(f"threshold must be positive, got {threshold!r}")
    if methods[0] == methods[1] and rtols[0] == rtols[1]:
        raise ValueError("the two reference runs must differ in method or tolerance")
    span = (float(t_eval[0]), float(t_eval[-1]))
    a = solve_scipy(f, span, y0, params, method=methods[0], t_eval=t_eval, rtol=rtols[0], atol=atol)
    b = solve_scipy(f, span, y0, params, method=methods[1], t_eval=t_eval, rtol=rtols[1], atol=atol)
    ya = a.y
    if scale is None:
        finite_rows = np.isfinite(ya).all(axis=1)
        base = ya[finite_rows] if finite_rows.any() else np.zeros((1, ya.shape[1]))
        sc = base.std(axis=0)
        fallback = np.abs(base).max(axis=0)
        sc = np.where(sc > 0, sc, np.where(fallback > 0, fallback, 1.0))
    else:
        sc = np.broadcast_to(np.asarray(scale, dtype=np.float64), (ya.shape[1],)).copy()
        if np.any(~(sc > 0)):
            raise ValueError("scale must be positive for every variable")
    with np.errstate(invalid="ignore"):
        sep = np.max(np.abs(ya - b.y) / sc, axis=1)
    sep = np.where(np.isfinite(sep), sep, np.inf)
    over = np.flatnonzero(sep > threshold)
    horizon = float(t_eval[over[0]]) if over.size else float(t_eval[-1])
    ok = a.success and b.success
    message = "" if ok else "; ".join(f"{s.method}: {s.message}" for s in (a, b) if not s.success)
    return Solution(t=t_eval, y=ya, method=f"reference-{methods[0]}", nfev=a.nfev + b.nfev, n_steps=a.n_steps,
                    seconds=a.seconds + b.seconds, status="success" if ok else "failed", message=message,
                    extra={"reference_horizon": horizon, "separation": sep, "scale": sc,
                           "methods": methods, "rtols": rtols, "threshold": float(threshold)})
