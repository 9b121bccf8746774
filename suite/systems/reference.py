"""Reference trajectories of the concrete systems, each with its validity horizon.

Two functions that the rest of the harness calls:

* :func:`reference_solution` picks the right reference integrator per system
  (two DOP853 runs at tight, different tolerances for ODEs; ETDRK4 at ``dt``
  and ``dt/2`` for semilinear PDEs such as Kuramoto–Sivashinsky) and returns
  the trajectory with ``extra["reference_horizon"]``: the first output time
  at which the two runs differ by more than ``threshold`` times the
  attractor's per-variable spread.
* :func:`attractor_scale` is that spread: the standard deviation of each
  variable along a long trajectory on the attractor (or along the orbit, for
  non-chaotic systems), cached per (system name, parameters, seed).
"""

from __future__ import annotations

import math

import numpy as np

from solvers import Solution, etdrk4
from solvers.horizon import reference_trajectory
from solvers.scipy_ivp import solve_scipy

from ..cache import cached_arrays, cached_solution, source_digest
from .base import System

__all__ = ["reference_solution", "attractor_scale", "initial_conditions", "REFERENCE_METHODS"]

REFERENCE_METHODS = ("auto", "dop853", "etdrk4")

_SCALE_CACHE: dict[tuple, np.ndarray] = {}


def _output_times(t_end: float, dt_out: float) -> np.ndarray:
    n = int(math.floor(t_end / dt_out + 1e-9))
    t = dt_out * np.arange(n + 1)
    if t[-1] < t_end - 1e-9 * max(1.0, t_end):
        t = np.append(t, t_end)
    return t


def _pick(system: System, method: str) -> str:
    if method not in REFERENCE_METHODS:
        raise ValueError(f"reference method must be one of {', '.join(REFERENCE_METHODS)}, got {method!r}")
    if method == "auto":
        return "etdrk4" if hasattr(system, "semilinear_split") else "dop853"
    if method == "etdrk4" and not hasattr(system, "semilinear_split"):
        raise ValueError(f"reference method etdrk4 needs a semilinear system; {system.name} is not one")
    return method


def reference_solution(system: System, t_end: float, *, y0=None, dt_out: float | None = None,
                       method: str = "auto", threshold: float = 0.01) -> Solution:
    """A trusted trajectory of ``system`` from ``y0`` over ``[0, t_end]``.

    Parameters
    ----------
    system : System
    t_end : float
        Final time (> 0).
    y0 : array_like, optional
        Initial state (default ``system.default_y0()``).
    dt_out : float, optional
        Output spacing (default ``system.sample_dt``); ``t_end`` is appended
        if it is not a multiple.
    method : {"auto", "dop853", "etdrk4"}
        ``auto``: ETDRK4 for systems with :meth:`semilinear_split`, else
        DOP853.
    threshold : float
        Separation of the two runs, relative to :func:`attractor_scale` for
        chaotic systems (to the spread of the trajectory otherwise), that
        ends the reference horizon.

    Returns
    -------
    Solution
        The more accurate of the two runs; ``extra["reference_horizon"]``
        (time, ``t_end`` if the runs never separate), ``extra["separation"]``
        (per output time) and ``extra["scale"]``.

    References
    ----------
    E. Hairer, S. P. Nørsett, G. Wanner, *Solving Ordinary Differential
    Equations I*, 2nd ed., Springer (1993), section II.4.
    A.-K. Kassam, L. N. Trefethen, SIAM J. Sci. Comput. 26, 1214–1233 (2005).
    """
    t_end = float(t_end)
    if not (math.isfinite(t_end) and t_end > 0):
        raise ValueError(f"t_end must be a positive number, got {t_end!r}")
    dt_out = float(system.sample_dt if dt_out is None else dt_out)
    if not (math.isfinite(dt_out) and dt_out > 0):
        raise ValueError(f"dt_out must be a positive number, got {dt_out!r}")
    y0 = np.asarray(system.default_y0() if y0 is None else y0, dtype=float)
    if y0.shape != (system.dim,):
        raise ValueError(f"y0 of {system.name} must have {system.dim} values, got shape {y0.shape}")
    if not np.all(np.isfinite(y0)):
        raise ValueError(f"y0 of {system.name} must be finite")
    t_eval = _output_times(t_end, dt_out)
    kind = _pick(system, method)
    scale = attractor_scale(system) if system.chaotic else None
    if kind == "etdrk4":
        compute = lambda: _etdrk4_reference(system, y0, t_eval, scale, threshold)  # noqa: E731
    else:
        compute = lambda: reference_trajectory(system.rhs(), y0, t_eval, system.params,  # noqa: E731
                                               scale=scale, threshold=threshold)
    desc = dict(_cache_description(system), what="reference_solution", kind=kind, y0=y0, t_eval=t_eval,
                scale=scale, threshold=float(threshold))
    return cached_solution(desc, compute)


def _cache_description(system: System) -> dict:
    """Everything about ``system`` and this code that a cached result depends on (see :mod:`suite.cache`)."""
    import scipy

    cls = type(system)
    return {"system": system.name, "class": f"{cls.__module__}.{cls.__qualname__}",
            "params": dict(system.params),
            "reference_dt": getattr(system, "reference_dt", None),
            "source": source_digest(cls, System, reference_trajectory, solve_scipy, etdrk4, _output_times),
            "numpy": np.__version__, "scipy": scipy.__version__}


def _etdrk4_reference(system, y0, t_eval, scale, threshold) -> Solution:
    """ETDRK4 at ``dt`` and ``dt/2``; the horizon is where they separate."""
    runs = [_etdrk4_on_grid(system, y0, t_eval, halve) for halve in (True, False)]
    (ya, fine), (yb, coarse) = runs
    if scale is None:
        sc = ya.std(axis=0)
        sc = np.where(sc > 0, sc, 1.0)
    else:
        sc = np.broadcast_to(np.asarray(scale, float), (ya.shape[1],)).copy()
    with np.errstate(invalid="ignore"):
        sep = np.max(np.abs(ya - yb) / sc, axis=1)
    sep = np.where(np.isfinite(sep), sep, np.inf)
    over = np.flatnonzero(sep > threshold)
    horizon = float(t_eval[over[0]]) if over.size else float(t_eval[-1])
    ok = all(s.success for s in fine + coarse)
    message = "" if ok else "; ".join(s.message for s in fine + coarse if not s.success)
    return Solution(t=t_eval, y=ya, method="reference-etdrk4",
                    nfev=sum(s.nfev for s in fine + coarse), n_steps=sum(s.n_steps for s in fine),
                    seconds=sum(s.seconds for s in fine + coarse), status="success" if ok else "failed",
                    message=message, compile_seconds=sum(s.compile_seconds for s in fine + coarse),
                    extra={"reference_horizon": horizon, "separation": sep, "scale": sc,
                           "methods": ("etdrk4", "etdrk4"), "threshold": float(threshold)})


def _etdrk4_on_grid(system, y0, t_eval, halve):
    """ETDRK4 states at ``t_eval`` (regular spacing, possibly a shorter last interval)."""
    base = float(getattr(system, "reference_dt", 0.05)) / (2.0 if halve else 1.0)
    dt_out = float(t_eval[1] - t_eval[0])
    n_regular = int(round((t_eval[-1] - t_eval[0]) / dt_out)) if len(t_eval) > 1 else 0
    if not np.isclose(t_eval[0] + n_regular * dt_out, t_eval[-1], rtol=1e-12, atol=1e-12):
        n_regular = len(t_eval) - 2
    sub = max(1, int(math.ceil(dt_out / base - 1e-9)))
    sols = []
    if n_regular > 0:
        sols.append(system.integrate(y0, dt_out / sub, n_regular * sub, save_every=sub))
        y = np.asarray(sols[-1].y)
    else:
        y = np.asarray(y0, float)[None]
    if len(y) < len(t_eval):  # a shorter last interval
        tail = float(t_eval[-1] - t_eval[len(y) - 1])
        k = max(1, int(math.ceil(tail / base - 1e-9)))
        sols.append(system.integrate(y[-1], tail / k, k, save_every=k))
        y = np.concatenate([y, np.asarray(sols[-1].y)[-1:]])
    return y, sols


def _scale_key(system: System, seed: int) -> tuple:
    return (system.name, tuple(sorted(system.params.items())), int(seed))


def attractor_scale(system: System, seed: int = 0) -> np.ndarray:
    """Per-variable standard deviation along a long trajectory on the attractor.

    For chaotic systems: a state on the attractor drawn with ``seed``
    (:meth:`System.initial_conditions`, which discards the transient), then
    100 Lyapunov times (at least 2,000 and at most 20,000 samples) sampled
    every ``sample_dt``.
    For non-chaotic systems: the orbit of the default start over 10
    characteristic times. Variables with no spread get their largest
    absolute value (or 1). Cached per (name, parameters, seed) in this
    process and on disk (:mod:`suite.cache`).

    Returns
    -------
    ndarray, shape (dim,)
    """
    key = _scale_key(system, seed)
    if key in _SCALE_CACHE:
        return _SCALE_CACHE[key].copy()
    desc = dict(_cache_description(system), what="attractor_scale", seed=int(seed),
                sample_dt=float(system.sample_dt), time_unit=float(system.time_unit),
                transient=float(system.transient), chaotic=bool(system.chaotic))
    sc = cached_arrays(desc, lambda: {"scale": _compute_scale(system, seed)})["scale"]
    _SCALE_CACHE[key] = sc
    return sc.copy()


def _compute_scale(system: System, seed: int) -> np.ndarray:
    dt = float(system.sample_dt)
    if system.chaotic:
        y0 = system.initial_conditions(1, seed)[0]
        span = min(max(100.0 * system.time_unit, 2000 * dt), 20000 * dt)
    else:
        y0 = np.asarray(system.default_y0(), dtype=float)
        span = max(10.0 * system.time_unit, 2000 * dt)
    n = int(math.ceil(span / dt))
    if hasattr(system, "integrate") and hasattr(system, "semilinear_split"):
        base = float(getattr(system, "reference_dt", 0.05))
        sub = max(1, int(math.ceil(dt / base - 1e-9)))
        sol = system.integrate(y0, dt / sub, n * sub, save_every=sub)
    else:
        t_eval = dt * np.arange(n + 1)
        sol = solve_scipy(system.rhs(), (0.0, float(t_eval[-1])), y0, system.params, method="DOP853",
                          t_eval=t_eval, rtol=1e-8, atol=1e-10)
    y = np.asarray(sol.y)
    if not sol.success or not np.all(np.isfinite(y)):
        raise RuntimeError(f"{system.name}: could not compute the attractor scale: {sol.message}")
    sc = y.std(axis=0)
    fallback = np.abs(y).max(axis=0)
    return np.where(sc > 0, sc, np.where(fallback > 0, fallback, 1.0))


def initial_conditions(system: System, n: int, seed: int) -> np.ndarray:
    """``system.initial_conditions(n, seed)``, cached on disk (:mod:`suite.cache`).

    Drawing states on the attractor integrates past the transient: with the
    references cached, it was 97 % of a cheap cell's cost (measured, see
    ``results/perf/cache.json``). The cache key covers the system's class
    source, so a subclass that draws its states differently never reads
    another's entries.
    """
    desc = dict(_cache_description(system), what="initial_conditions", n=int(n), seed=int(seed))
    out = cached_arrays(desc, lambda: {"y0": np.asarray(system.initial_conditions(int(n), int(seed)), float)})
    return np.array(out["y0"], dtype=float)
