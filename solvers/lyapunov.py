"""Lyapunov exponents by tangent-space propagation and re-orthonormalisation (JAX)."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import jax
import jax.numpy as jnp
import numpy as np
from jax import lax

from ._compile import run_compiled
from .fixed_step import rk_step
from .tableau import RK4

__all__ = ["LyapunovResult", "kaplan_yorke_dimension", "largest_lyapunov_exponent", "lyapunov_spectrum"]


@dataclass(frozen=True)
class LyapunovResult:
    """Lyapunov exponents and how they were obtained.

    Attributes
    ----------
    exponents : ndarray, shape (k,)
        Exponents, descending (per unit time).
    kaplan_yorke_dimension : float
        Kaplan–Yorke (Lyapunov) dimension of ``exponents`` (a lower bound
        estimate when only ``k < d`` exponents were computed).
    seconds : float
        Wall-clock seconds of the run (compilation excluded).
    n_steps : int
        Steps taken, transient included.
    history : ndarray, shape (n_rows, k)
        Running estimates (convergence plots): after every
        re-orthonormalisation, thinned to at most 2,000 rows.
    history_t : ndarray, shape (n_rows,)
        Averaging time behind each row of ``history``.
    compile_seconds : float
        Seconds spent compiling.
    status, message : str
        ``"failed"`` with a reason if the trajectory or a tangent vector
        became non-finite.
    tangent : str
        How the tangent vectors were pushed forward: ``"jvp"`` or
        ``"matrix"`` (see :func:`lyapunov_spectrum`).
    """

    exponents: np.ndarray
    kaplan_yorke_dimension: float
    seconds: float
    n_steps: int
    history: np.ndarray
    history_t: np.ndarray = field(default_factory=lambda: np.zeros(0))
    compile_seconds: float = 0.0
    status: str = "success"
    message: str = ""
    tangent: str = "jvp"

    @property
    def success(self) -> bool:
        return self.status == "success"


def kaplan_yorke_dimension(exponents) -> float:
    """Kaplan–Yorke dimension ``j + (λ1 + ... + λj) / |λ_{j+1}|``.

    ``j`` is the largest index with a non-negative partial sum of the
    exponents sorted in descending order. Returns 0 if the largest exponent
    is negative and ``k`` (the number given) if every partial sum is
    non-negative.

    References
    ----------
    J. L. Kaplan & J. A. Yorke, "Chaotic behavior of multidimensional
    difference equations", in *Functional Differential Equations and
    Approximation of Fixed Points*, Lect. Notes Math. 730, 204–227 (1979).
    """
    lam = np.sort(np.asarray(exponents, dtype=float).ravel())[::-1]
    if lam.size == 0 or lam[0] < 0:
        return 0.0
    s = np.cumsum(lam)
    j = int(np.flatnonzero(s >= 0)[-1]) + 1  # number of exponents in the non-negative partial sum
    if j == lam.size:
        return float(lam.size)
    return float(j + s[j - 1] / abs(lam[j]))


def _gram_schmidt(V):
    """Modified Gram–Schmidt on the columns of V: (Q, log of the column norms)."""
    k = V.shape[1]
    cols, logs = [], []
    for i in range(k):
        v = V[:, i]
        for q in cols:
            v = v - jnp.dot(q, v) * q
        nrm = jnp.linalg.norm(v)
        cols.append(v / nrm)
        logs.append(jnp.log(nrm))
    return jnp.stack(cols, axis=1), jnp.stack(logs)


def _qr(V):
    Q, R = jnp.linalg.qr(V)
    d = jnp.diagonal(R)
    sgn = jnp.where(d < 0, -1.0, 1.0)
    return Q * sgn[None, :], jnp.log(jnp.abs(d))


def _default_step(f):
    def step(t, y, dt, params):
        return rk_step(f, t, y, dt, params, RK4)

    return step


def _jvp_propagator(step, dt, params):
    """One step of the state and of the tangent block V (d, k): the one-step map linearised once, vmapped."""

    def propagate(t, y, V):
        y_next, lin = jax.linearize(lambda z: step(t, z, dt, params), y)
        return y_next, jax.vmap(lin, in_axes=1, out_axes=1)(V)

    return propagate


def _matrix_propagator(f, dt, params, tableau=RK4):
    """One Runge–Kutta step of the state and of the tangent block V (d, k) through stage Jacobian matrices.

    The state stages are those of :func:`rk_step` (same operations, same
    order). The Jacobian of ``f`` at every stage is formed once
    (``jax.jacfwd``, the stages batched with ``vmap``) and shared by all
    ``k`` tangent vectors: the tangent stages are matrix products
    ``K_i = J_i (V + dt sum_j a_ij K_j)`` and ``V <- V + dt sum_i b_i K_i``,
    i.e. exactly the derivative of the Runge–Kutta map applied to ``V``.
    """
    A, b, c = tableau.A, tableau.b, tableau.c
    s = tableau.stages

    def jac(t, z):
        return jax.jacfwd(lambda u: f(t, u, params))(z)

    def propagate(t, y, V):
        ks, ys, ts = [], [], []
        for i in range(s):
            yi = y
            for j in range(i):
                if A[i, j] != 0.0:
                    yi = yi + (dt * float(A[i, j])) * ks[j]
            ti = t + float(c[i]) * dt
            ks.append(f(ti, yi, params))
            ys.append(yi)
            ts.append(ti)
        y_next = y
        for i in range(s):
            if b[i] != 0.0:
                y_next = y_next + (dt * float(b[i])) * ks[i]
        J = jax.vmap(jac)(jnp.stack([jnp.asarray(ti, y.dtype) for ti in ts]), jnp.stack(ys))  # (s, d, d)
        Ks = []
        for i in range(s):
            Wi = V
            for j in range(i):
                if A[i, j] != 0.0:
                    Wi = Wi + (dt * float(A[i, j])) * Ks[j]
            Ks.append(J[i] @ Wi)
        V_next = V
        for i in range(s):
            if b[i] != 0.0:
                V_next = V_next + (dt * float(b[i])) * Ks[i]
        return y_next, V_next

    return propagate


def _benettin(step, propagate, y0, t0, dt, params, *, n_transient, n_rows, blocks_per_row, renorm_every, k):
    d = y0.shape[0]
    orth = _gram_schmidt if k <= 8 else _qr

    def advance(carry, i):
        y, i0 = carry
        return (step(t0 + (i0 + i) * dt, y, dt, params), i0), None

    (y, _), _ = lax.scan(advance, (y0, 0), jnp.arange(n_transient))

    def tangent(carry, i):
        y, V, i0 = carry
        y_next, V_next = propagate(t0 + (i0 + i) * dt, y, V)
        return (y_next, V_next, i0), None

    def block(carry, b):
        y, V, acc = carry
        i0 = n_transient + b * renorm_every
        (y, V, _), _ = lax.scan(tangent, (y, V, i0), jnp.arange(renorm_every))
        V, logs = orth(V)
        return (y, V, acc + logs), None

    def row(carry, r):
        carry, _ = lax.scan(block, carry, r * blocks_per_row + jnp.arange(blocks_per_row))
        return carry, carry[2]

    V0 = jnp.eye(d, k, dtype=y0.dtype)
    (y, V, acc), hist = lax.scan(row, (y, V0, jnp.zeros(k, y0.dtype)), jnp.arange(n_rows))
    return acc, hist, y


_HISTORY_ROWS = 2000


def _counts(dt, t_end, transient, renorm_every):
    if not (math.isfinite(dt) and dt > 0):
        raise ValueError(f"dt must be positive and finite, got {dt!r}")
    if not transient >= 0:
        raise ValueError(f"transient must be >= 0, got {transient!r}")
    if not t_end > transient:
        raise ValueError(f"t_end ({t_end!r}) must exceed transient ({transient!r}): "
                         "exponents are averaged over [t0 + transient, t0 + t_end]")
    renorm_every = int(renorm_every)
    if renorm_every < 1:
        raise ValueError(f"renorm_every must be >= 1, got {renorm_every}")
    n_transient = int(round(transient / dt))
    n_avg = int(round((t_end - transient) / dt))
    n_blocks = max(n_avg // renorm_every, 1)
    # the running estimate is kept at most _HISTORY_ROWS times; the averaging time is rounded down to a
    # whole number of rows (a loss below 1 / _HISTORY_ROWS of it)
    blocks_per_row = -(-n_blocks // _HISTORY_ROWS)  # ceil: at most _HISTORY_ROWS rows
    n_rows = n_blocks // blocks_per_row
    return n_transient, n_rows, blocks_per_row, renorm_every


_TANGENTS = ("auto", "jvp", "matrix")
# "auto" takes the matrix path for MIN < d <= MAX and 2 k >= d. Measured (RK4 on Lorenz-96, CPU time per
# step, one core): d = 20, k = 20: 12 vs 24 us (jvp); d = 40, k = 40: 24-28 vs 50-75 us, k = 20: 22 vs 28,
# k = 10: equal; d = 80, k = 80: 173 vs 285 us, k = 20: 79 vs 55; d = 160, k = 160: 2300 vs 675 us (the
# dense d x d products cost d^3 per step; jvp costs about the number of non-zeros of J per vector).
_MATRIX_MIN_DIM, _MATRIX_MAX_DIM = 8, 96


def _tangent_mode(tangent, step, d, k):
    """Resolve ``tangent="auto"``; reject unknown names and a matrix path without a vector field."""
    if tangent not in _TANGENTS:
        raise ValueError(f"tangent must be one of {', '.join(map(repr, _TANGENTS))}, got {tangent!r}")
    if tangent == "auto":
        # stage Jacobian matrices pay off for moderate d with many vectors (measurements above)
        use = step is None and _MATRIX_MIN_DIM < d <= _MATRIX_MAX_DIM and 2 * k >= d
        return "matrix" if use else "jvp"
    if tangent == "matrix" and step is not None:
        raise ValueError("tangent='matrix' needs the vector field f (Runge–Kutta stages); "
                         "a user step map works with tangent='jvp'")
    return tangent


def _run(f, y0, params, dt, t_end, transient, renorm_every, k, t0, step, name, tangent="auto"):
    y0 = np.asarray(y0, dtype=np.float64)
    if y0.ndim != 1:
        raise ValueError(f"y0 must have shape (d,), got {y0.shape}")
    d = y0.shape[0]
    k = d if k is None else int(k)
    if not 1 <= k <= d:
        raise ValueError(f"n_exponents must be between 1 and the dimension {d}, got {k}")
    dt, t_end, transient = float(dt), float(t_end), float(transient)
    n_transient, n_rows, blocks_per_row, renorm_every = _counts(dt, t_end, transient, renorm_every)
    n_blocks = n_rows * blocks_per_row
    if step is None:
        if f is None:
            raise ValueError("give a vector field f or a one-step map step")
        stepper, step_key = _default_step(f), ("rk4", f)
    else:
        stepper, step_key = step, ("user", step)
    mode = _tangent_mode(tangent, step, d, k)

    def fn(p, y0_, t0_, dt_):
        if mode == "matrix":
            propagate = _matrix_propagator(f, dt_, p, RK4)
        else:
            propagate = _jvp_propagator(stepper, dt_, p)
        return _benettin(stepper, propagate, y0_, t0_, dt_, p, n_transient=n_transient, n_rows=n_rows,
                         blocks_per_row=blocks_per_row, renorm_every=renorm_every, k=k)

    key = (name, *step_key, k, n_transient, n_rows, blocks_per_row, renorm_every, mode)
    (acc, hist, y_end), compile_s, seconds = run_compiled(
        key, fn, params, (y0, np.float64(t0), np.float64(dt)))
    t_avg = n_blocks * renorm_every * dt
    hist_t = dt * renorm_every * blocks_per_row * np.arange(1, n_rows + 1)
    history = np.asarray(hist) / hist_t[:, None]
    exps = np.asarray(acc) / t_avg
    status, message = "success", ""
    if not (np.all(np.isfinite(exps)) and np.all(np.isfinite(y_end))):
        status, message = "failed", "non-finite state or tangent vector (diverging trajectory or dt too large)"
    order = np.argsort(exps)[::-1] if status == "success" else np.arange(k)
    exps = exps[order]
    history = history[:, order]
    ky = kaplan_yorke_dimension(exps) if status == "success" else float("nan")
    return LyapunovResult(exponents=exps, kaplan_yorke_dimension=ky, seconds=seconds,
                          n_steps=n_transient + n_blocks * renorm_every, history=history, history_t=hist_t,
                          compile_seconds=compile_s, status=status, message=message, tangent=mode)


def lyapunov_spectrum(f, y0, params, *, dt: float = 0.01, t_end: float = 1000.0, transient: float = 100.0,
                      renorm_every: int = 10, n_exponents: int | None = None, t0: float = 0.0,
                      step=None, tangent: str = "auto") -> LyapunovResult:
    """Lyapunov spectrum by tangent propagation and re-orthonormalisation.

    The trajectory runs from ``t0`` for ``t_end`` time units; the first
    ``transient`` are discarded and the exponents are averaged over the
    remaining ``t_end - transient``. ``k = n_exponents`` tangent vectors
    (default: the dimension) are pushed forward by the derivative of the
    one-step map, and re-orthonormalised every ``renorm_every`` steps
    (modified Gram–Schmidt for ``k <= 8``, Householder QR above); the
    logarithms of the stretching factors are accumulated. The exponents are
    those of the discrete map (RK4 by default), which converge to the flow's
    at the order of the method. The whole run is one compiled loop (no host
    round trip per step or per re-orthonormalisation).

    Parameters
    ----------
    f : callable or None
        Vector field ``f(t, y, params)``; may depend on ``t``.
    y0 : array_like, shape (d,)
        Initial state.
    params : mapping
        Parameter values.
    dt : float
        Step.
    t_end, transient : float
        Total and discarded time (``t_end > transient``).
    renorm_every : int
        Steps between re-orthonormalisations (keep the growth per block
        well inside the float range: ``λ_max · renorm_every · dt ≲ 50``).
    n_exponents : int, optional
        Number of leading exponents.
    t0 : float
        Start time (for non-autonomous fields).
    step : callable, optional
        Jittable one-step map ``step(t, y, dt, params) -> y_next`` used
        instead of RK4 on ``f`` (e.g. an ETDRK4 step of a PDE on real
        coordinates, or a symplectic step). A map built for one step size
        (``make_etdrk4_step``) must be called with the same ``dt``; ``f``
        may then be None.
    tangent : {"auto", "jvp", "matrix"}
        How the tangent block is pushed forward; both give the same
        derivative of the step map, up to round-off. ``"jvp"``: the step
        map is linearised once per step (``jax.linearize``) and the
        linear map is vmapped over the vectors; works with ``step``.
        ``"matrix"`` (RK4 on ``f`` only): the Jacobian matrix of ``f`` is
        formed once per Runge–Kutta stage (``jax.jacfwd``) and applied to
        all vectors as dense matrix products — cheaper for moderate ``d``
        with ``k`` a large share of it (Lorenz-96, d = 40, k = 40: about
        half the time per step), dearer for large ``d`` (cost ~ d² k per
        step). ``"auto"`` picks ``"matrix"`` when ``step`` is None,
        ``8 < d <= 96`` and ``2 k >= d``, else ``"jvp"``. The exponents of
        both are the same within their statistical error (the trajectories
        agree to round-off, which chaos amplifies over long runs).

    Returns
    -------
    LyapunovResult
        Compiled once per (field, shapes, counts, tangent path); ``dt``,
        ``t0``, ``y0`` and parameter values do not recompile.

    References
    ----------
    G. Benettin, L. Galgani, A. Giorgilli & J.-M. Strelcyn, "Lyapunov
    characteristic exponents for smooth dynamical systems and for
    Hamiltonian systems; a method for computing all of them", Meccanica 15,
    9–20 and 21–30 (1980).
    I. Shimada & T. Nagashima, "A numerical approach to ergodic problem of
    dissipative dynamical systems", Prog. Theor. Phys. 61, 1605–1616 (1979).
    """
    return _run(f, y0, params, dt, t_end, transient, renorm_every, n_exponents, t0, step, "spectrum", tangent)


def largest_lyapunov_exponent(f, y0, params, *, dt: float = 0.01, t_end: float = 1000.0,
                              transient: float = 100.0, renorm_every: int = 10, t0: float = 0.0,
                              step=None) -> LyapunovResult:
    """Largest Lyapunov exponent with one tangent vector (cheaper; finite-time estimates).

    Same arguments and result as :func:`lyapunov_spectrum` with
    ``n_exponents=1``; ``history`` holds the running (finite-time) estimate.

    References
    ----------
    G. Benettin, L. Galgani & J.-M. Strelcyn, "Kolmogorov entropy and
    numerical experiments", Phys. Rev. A 14, 2338–2345 (1976).
    """
    return _run(f, y0, params, dt, t_end, transient, renorm_every, 1, t0, step, "largest")
