"""High-precision integration (mpmath) and solver cross-checks for validating references."""

from __future__ import annotations

import math
import numbers
import time

import mpmath
import numpy as np

from .result import Solution
from .scipy_ivp import solve_scipy

__all__ = ["MPNumber", "cross_check", "solve_mpmath"]


def _unwrap(x):
    if isinstance(x, MPNumber):
        return x.v
    if isinstance(x, (numbers.Real, np.floating, np.integer)):
        return mpmath.mpf(float(x)) if not isinstance(x, (int, np.integer)) else mpmath.mpf(int(x))
    if isinstance(x, mpmath.mpf):
        return x
    return NotImplemented


class MPNumber:
    """An mpmath number that numpy's object-array ufuncs can work with.

    numpy applies ``np.sin`` to an object array by calling ``x.sin()`` on
    each element; ``mpmath.mpf`` has no such methods, so vector fields
    written with :func:`solvers.array_namespace` fail on arrays of ``mpf``.
    This thin wrapper adds them (``sin cos tan arcsin arccos arctan arctan2
    sinh cosh tanh exp expm1 log log1p sqrt``) plus arithmetic, powers,
    comparisons and ``abs``, all evaluated by mpmath at the working
    precision. Python and numpy floats mixed in (the parameters) are taken
    at their exact binary value.
    """

    __slots__ = ("v",)

    def __init__(self, v):
        self.v = v if isinstance(v, mpmath.mpf) else mpmath.mpf(v)

    # arithmetic ---------------------------------------------------------
    def _bin(self, other, op):
        o = _unwrap(other)
        if o is NotImplemented:
            return NotImplemented
        return MPNumber(op(self.v, o))

    def __add__(self, o): return self._bin(o, lambda a, b: a + b)
    def __radd__(self, o): return self._bin(o, lambda a, b: b + a)
    def __sub__(self, o): return self._bin(o, lambda a, b: a - b)
    def __rsub__(self, o): return self._bin(o, lambda a, b: b - a)
    def __mul__(self, o): return self._bin(o, lambda a, b: a * b)
    def __rmul__(self, o): return self._bin(o, lambda a, b: b * a)
    def __truediv__(self, o): return self._bin(o, lambda a, b: a / b)
    def __rtruediv__(self, o): return self._bin(o, lambda a, b: b / a)
    def __pow__(self, o): return self._bin(o, lambda a, b: a ** b)
    def __rpow__(self, o): return self._bin(o, lambda a, b: b ** a)
    def __neg__(self): return MPNumber(-self.v)
    def __pos__(self): return self
    def __abs__(self): return MPNumber(abs(self.v))

    def _cmp(self, o, op):
        u = _unwrap(o)
        return NotImplemented if u is NotImplemented else op(self.v, u)

    def __lt__(self, o): return self._cmp(o, lambda a, b: a < b)
    def __le__(self, o): return self._cmp(o, lambda a, b: a <= b)
    def __gt__(self, o): return self._cmp(o, lambda a, b: a > b)
    def __ge__(self, o): return self._cmp(o, lambda a, b: a >= b)
    def __eq__(self, o): return self._cmp(o, lambda a, b: a == b)
    def __ne__(self, o): return self._cmp(o, lambda a, b: a != b)
    __hash__ = None

    def __float__(self): return float(self.v)
    def __repr__(self): return f"MPNumber({self.v})"

    # methods numpy's object-dtype ufuncs look up -------------------------
    def sin(self): return MPNumber(mpmath.sin(self.v))
    def cos(self): return MPNumber(mpmath.cos(self.v))
    def tan(self): return MPNumber(mpmath.tan(self.v))
    def arcsin(self): return MPNumber(mpmath.asin(self.v))
    def arccos(self): return MPNumber(mpmath.acos(self.v))
    def arctan(self): return MPNumber(mpmath.atan(self.v))
    def arctan2(self, o): return MPNumber(mpmath.atan2(self.v, _unwrap(o)))
    def sinh(self): return MPNumber(mpmath.sinh(self.v))
    def cosh(self): return MPNumber(mpmath.cosh(self.v))
    def tanh(self): return MPNumber(mpmath.tanh(self.v))
    def exp(self): return MPNumber(mpmath.exp(self.v))
    def expm1(self): return MPNumber(mpmath.expm1(self.v))
    def log(self): return MPNumber(mpmath.log(self.v))
    def log1p(self): return MPNumber(mpmath.log1p(self.v))
    def sqrt(self): return MPNumber(mpmath.sqrt(self.v))


def _to_mpf(x):
    if isinstance(x, MPNumber):
        return x.v
    if isinstance(x, np.ndarray) and x.shape == ():
        return _to_mpf(x.item())
    return mpmath.mpf(x) if not isinstance(x, mpmath.mpf) else x


def solve_mpmath(f, y0, t_eval, params, *, dps: int = 30, tol=None, degree=None) -> Solution:
    """Integrate ``f(t, y, params)`` in multiple precision with mpmath's Taylor method.

    The vector field is called with ``t`` an :class:`MPNumber` and ``y`` a
    numpy object array of :class:`MPNumber`, so a field written with
    :func:`solvers.array_namespace` (which picks numpy for it) runs
    unchanged as long as it uses arithmetic, powers, ``np.stack`` /
    ``np.array`` / indexing and the elementwise functions MPNumber provides
    (``sin``, ``cos``, ``exp``, ``log``, ``sqrt``, ``tanh``, ``arctan2``, ...).
    What does not work: anything that casts to float (``astype(float)``,
    ``np.asarray(..., dtype=float)``), BLAS products on object arrays are
    slow but work (``@`` falls back to object loops), and functions without
    an object loop (``np.linalg``, FFTs). Parameters are floats, so the
    problem solved is the one with double-precision parameters, exactly.

    Parameters
    ----------
    f : callable
        Vector field.
    y0 : array_like, shape (d,)
        Initial state (taken at its exact binary value).
    t_eval : array_like, shape (n,)
        Non-decreasing output times, ``t_eval[0]`` the start.
    params : mapping
        Parameter values.
    dps : int
        Decimal digits of working precision.
    tol, degree : optional
        Passed to ``mpmath.odefun`` (defaults: its own, tied to ``dps``).

    Returns
    -------
    Solution
        ``y`` rounded to float64; ``extra["y_mp"]`` holds the (n, d) object
        array of ``mpmath.mpf`` values, ``extra["dps"]`` the precision.

    References
    ----------
    F. Johansson et al., mpmath: a Python library for arbitrary-precision
    floating-point arithmetic, version 1.3 (2023), ``mpmath.odefun``
    (Taylor series method).
    """
    y0 = np.asarray(y0, dtype=np.float64)
    t_eval = np.asarray(t_eval, dtype=np.float64)
    if y0.ndim != 1:
        raise ValueError(f"y0 must have shape (d,), got {y0.shape}")
    if t_eval.ndim != 1 or t_eval.size < 1 or np.any(np.diff(t_eval) < 0):
        raise ValueError("t_eval must be a non-decreasing 1-D array (mpmath.odefun integrates forward)")
    params = dict(params or {})
    nfev = [0]
    t0 = time.perf_counter()
    with mpmath.workdps(int(dps)):
        def F(x, y):
            nfev[0] += 1
            ya = np.empty(len(y), dtype=object)
            for i, v in enumerate(y):
                ya[i] = MPNumber(v)
            out = f(MPNumber(x), ya, params)
            return [_to_mpf(o) for o in np.ravel(np.asarray(out, dtype=object))]

        y0_mp = [mpmath.mpf(float(v)) for v in y0]
        try:
            sol = mpmath.odefun(F, mpmath.mpf(float(t_eval[0])), y0_mp, tol=tol, degree=degree)
            ys = []
            for t in t_eval:
                v = sol(mpmath.mpf(float(t)))
                ys.append(list(v) if isinstance(v, (list, tuple)) else [v])
        except Exception as exc:  # a failure is a status, never an exception mid-sweep
            return Solution(t=t_eval, y=np.full((t_eval.size, y0.size), np.nan), method="mpmath-taylor",
                            nfev=nfev[0], seconds=time.perf_counter() - t0, status="failed",
                            message=f"{type(exc).__name__}: {exc}", extra={"dps": int(dps)})
    y_mp = np.array(ys, dtype=object)
    y = np.array([[float(v) for v in row] for row in ys], dtype=np.float64)
    return Solution(t=t_eval, y=y, method="mpmath-taylor", nfev=nfev[0], seconds=time.perf_counter() - t0,
                    extra={"dps": int(dps), "y_mp": y_mp})


def cross_check(f, y0, t_eval, params, *, tight=("DOP853", 1e-13), loose=("DOP853", 1e-11),
                atol: float = 1e-13) -> float:
    """Largest tolerance-relative difference between a tight and a looser integration.

    Runs ``f`` with ``tight`` = (method, rtol) and ``loose`` = (method,
    rtol) at the same ``atol`` and returns
    ``max |y_tight - y_loose| / (atol + rtol_loose |y_tight|)`` over all
    outputs and variables. Values of order one (or below) mean the looser
    run is as accurate as its tolerance promises against the tighter one;
    values far above one flag a problem (stiffness, a singularity, or a
    chaotic run past its predictability horizon). Use ``loose=("Radau",
    1e-11)`` for an independent method. Returns ``inf`` if a run fails.

    References
    ----------
    E. Hairer, S. P. Nørsett & G. Wanner, *Solving ODEs I*, 2nd ed.,
    Springer (1993), section II.10 (numerical comparisons).
    """
    t_eval = np.asarray(t_eval, dtype=np.float64)
    span = (float(t_eval[0]), float(t_eval[-1]))
    a = solve_scipy(f, span, y0, params, method=tight[0], t_eval=t_eval, rtol=tight[1], atol=atol)
    b = solve_scipy(f, span, y0, params, method=loose[0], t_eval=t_eval, rtol=loose[1], atol=atol)
    if not (a.success and b.success):
        return math.inf
    return float(np.max(np.abs(a.y - b.y) / (atol + loose[1] * np.abs(a.y))))
