"""Adaptive Dormand–Prince 5(4) in JAX with dense output, batched with vmap."""

from __future__ import annotations

import jax
import jax.numpy as jnp
import numpy as np
from jax import lax

from ._compile import run_compiled
from .result import Solution
from .tableau import DOPRI5

__all__ = ["dopri5"]

# Dense-output coefficients of DOPRI5 (continuous extension of order 4),
# from Hairer, Nørsett & Wanner, Solving ODEs I, section II.6 (code DOPRI5).
_D = np.array([-12715105075.0 / 11282082432.0, 0.0, 87487479700.0 / 32700410799.0,
               -10690763975.0 / 1880347072.0, 701980252875.0 / 199316789632.0,
               -1453857185.0 / 822651844.0, 69997945.0 / 29380423.0])

# Step-size control constants (Hairer, Nørsett & Wanner, section II.4, and the
# DOPRI5 code): safety factor, bounds on the step ratio, PI parameter beta.
_SAFE, _FAC_MIN, _FAC_MAX, _BETA = 0.9, 0.2, 10.0, 0.04
_EXPO = 1.0 / 5.0 - 0.75 * _BETA  # I-part exponent 1/(q+1) - 0.75 beta, q = 4

_SUCCESS, _MAX_STEPS, _NONFINITE, _STEP_TOO_SMALL = 0, 1, 2, 3
_MESSAGES = {_MAX_STEPS: "max_steps reached", _NONFINITE: "non-finite state",
             _STEP_TOO_SMALL: "step size underflow"}


def _rms(x):
    return jnp.sqrt(jnp.mean(x * x))


def _solve_one(f, y0, t_eval, params, rtol, atol, max_steps, first_step):
    A, b, be, c = DOPRI5.A, DOPRI5.b, DOPRI5.b_error, DOPRI5.c
    e = b - be
    n_out = t_eval.shape[0]
    t0, t_end = t_eval[0], t_eval[-1]
    direction = jnp.where(t_end >= t0, 1.0, -1.0)
    y0 = jnp.asarray(y0, dtype=jnp.float64)
    f0 = f(t0, y0, params)

    # Initial step (Hairer, Nørsett & Wanner, section II.4, "starting step size").
    sk = atol + rtol * jnp.abs(y0)
    d0, d1 = _rms(y0 / sk), _rms(f0 / sk)
    h0 = jnp.where((d0 < 1e-5) | (d1 < 1e-5), 1e-6, 0.01 * d0 / jnp.maximum(d1, 1e-300))
    f1 = f(t0 + direction * h0, y0 + direction * h0 * f0, params)
    d2 = _rms((f1 - f0) / sk) / h0
    h1 = jnp.where(jnp.maximum(d1, d2) <= 1e-15, jnp.maximum(1e-6, h0 * 1e-3),
                   (0.01 / jnp.maximum(jnp.maximum(d1, d2), 1e-300)) ** (1.0 / 5.0))
    h_init = jnp.minimum(100.0 * h0, h1) if first_step is None else jnp.asarray(first_step, jnp.float64)
    h_init = jnp.minimum(h_init, jnp.abs(t_end - t0))

    out = jnp.zeros((n_out, y0.shape[0]), dtype=jnp.float64).at[0].set(y0)

    def stages(t, y, h, k1):
        ks = [k1]
        for i in range(1, 7):
            yi = y
            for j in range(i):
                if A[i, j] != 0.0:
                    yi = yi + (h * float(A[i, j])) * ks[j]
            ks.append(f(t + float(c[i]) * h, yi, params))
        y_new = y
        for i in range(7):
            if b[i] != 0.0:
                y_new = y_new + (h * float(b[i])) * ks[i]
        err = ks[0] * float(e[0])
        for i in range(1, 7):
            if e[i] != 0.0:
                err = err + ks[i] * float(e[i])
        return y_new, h * err, ks

    def cond(s):
        return (s["status"] == _SUCCESS) & (direction * (t_end - s["t"]) > 0.0)

    def body(s):
        t, y, k1, h = s["t"], s["y"], s["k1"], s["h"]
        h = jnp.minimum(h, jnp.abs(t_end - t))
        hs = direction * h
        y_new, err_vec, ks = stages(t, y, hs, k1)
        scale = atol + rtol * jnp.maximum(jnp.abs(y), jnp.abs(y_new))
        err = _rms(err_vec / scale)
        err = jnp.where(jnp.isfinite(err), err, jnp.inf)
        # PI controller (Hairer, Nørsett & Wanner, section IV.2 / code DOPRI5).
        fac11 = err ** _EXPO
        fac = fac11 / s["err_old"] ** _BETA
        fac = jnp.clip(fac / _SAFE, 1.0 / _FAC_MAX, 1.0 / _FAC_MIN)
        accept = err <= 1.0
        h_acc = h / fac
        h_acc = jnp.where(s["last_rejected"], jnp.minimum(h_acc, h), h_acc)
        h_rej = h / jnp.minimum(1.0 / _FAC_MIN, fac11 / _SAFE)
        t_new = jnp.where(jnp.abs(t_end - t - hs) <= 1e-14 * jnp.abs(t_end), t_end, t + hs)

        # Dense output on the accepted step (continuous extension of order 4).
        r1 = y
        r2 = y_new - y
        r3 = hs * ks[0] - r2
        r4 = r2 - hs * ks[6] - r3
        r5 = hs * sum(float(_D[i]) * ks[i] for i in range(7) if _D[i] != 0.0)

        def write_cond(w):
            idx, _ = w
            return accept & (idx < n_out) & (direction * (t_eval[jnp.minimum(idx, n_out - 1)] - t_new) <= 0.0)

        def write(w):
            idx, o = w
            th = (t_eval[idx] - t) / hs
            th1 = 1.0 - th
            yi = r1 + th * (r2 + th1 * (r3 + th * (r4 + th1 * r5)))
            yi = jnp.where(t_eval[idx] == t_new, y_new, yi)
            return idx + 1, o.at[idx].set(yi)

        idx_new, out_new = lax.while_loop(write_cond, write, (s["idx"], s["out"]))
        finite = jnp.all(jnp.isfinite(y_new))
        n_steps = s["n_steps"] + accept.astype(jnp.int64)
        n_rej = s["n_rejected"] + (~accept).astype(jnp.int64)
        status = jnp.where(accept & ~finite, _NONFINITE, _SUCCESS)
        status = jnp.where(~jnp.isfinite(err) & ~finite, _NONFINITE, status)
        status = jnp.where((n_steps + n_rej >= max_steps) & (status == _SUCCESS)
                           & (direction * (t_end - t_new) > 0.0), _MAX_STEPS, status)
        status = jnp.where((h <= 1e-14 * jnp.maximum(jnp.abs(t), 1.0)) & ~accept, _STEP_TOO_SMALL, status)
        return {
            "t": jnp.where(accept, t_new, t),
            "y": jnp.where(accept, y_new, y),
            "k1": jnp.where(accept, ks[6], k1),  # FSAL
            "h": jnp.where(accept, h_acc, h_rej),
            "err_old": jnp.where(accept, jnp.maximum(err, 1e-4), s["err_old"]),
            "last_rejected": ~accept,
            "idx": idx_new, "out": out_new,
            "n_steps": n_steps, "n_rejected": n_rej, "status": status,
        }

    state = {
        "t": jnp.asarray(t0, jnp.float64), "y": y0, "k1": f0, "h": h_init,
        "err_old": jnp.asarray(1e-4, jnp.float64), "last_rejected": jnp.asarray(False),
        "idx": jnp.asarray(1, jnp.int64), "out": out,
        "n_steps": jnp.asarray(0, jnp.int64), "n_rejected": jnp.asarray(0, jnp.int64),
        "status": jnp.asarray(_SUCCESS, jnp.int64),
    }
    s = lax.while_loop(cond, body, state)
    unfilled = jnp.arange(n_out) >= s["idx"]
    out = jnp.where(unfilled[:, None], jnp.nan, s["out"])
    return out, s["n_steps"], s["n_rejected"], s["status"], s["t"]


def dopri5(f, y0, t_eval, params, *, rtol: float = 1e-8, atol: float = 1e-10, max_steps: int = 100_000,
           first_step: float | None = None) -> Solution:
    """Adaptive Dormand–Prince 5(4) integration in JAX, outputs at ``t_eval``.

    The step is controlled by the embedded 4th-order error estimate in the
    RMS norm scaled by ``atol + rtol * max(|y_n|, |y_{n+1}|)`` with the PI
    controller of the DOPRI5 code (beta = 0.04, safety 0.9, step ratio in
    [0.2, 10]); the solution is propagated with the 5th-order weights (local
    extrapolation, FSAL). Outputs come from the 4th-order continuous
    extension between accepted steps, so the step sequence does not depend
    on ``t_eval`` beyond its end point.

    Parameters
    ----------
    f : callable
        Vector field ``f(t, y, params)`` written with ``array_namespace``.
    y0 : array_like, shape (d,) or (B, d)
        Initial state(s); batches run with ``vmap`` of the single solver
        (each trajectory keeps its own step sequence).
    t_eval : array_like, shape (n,)
        Output times, monotonic; the integration runs from ``t_eval[0]`` to
        ``t_eval[-1]``.
    params : mapping
        Parameter values.
    rtol, atol : float
        Tolerances.
    max_steps : int
        Limit on attempted steps (accepted + rejected) per trajectory.
    first_step : float, optional
        Initial step; by default Hairer's starting-step estimate.

    Returns
    -------
    Solution
        ``nfev`` (f at the start, one more for the starting-step estimate,
        six per attempted step thanks to FSAL) and ``n_steps`` are per
        trajectory (maximum over a batch);
        ``extra`` holds ``n_rejected``. When ``max_steps`` is hit or a state
        becomes non-finite, status is ``"failed"``, the message says why and
        the outputs not reached are NaN.

    References
    ----------
    J. R. Dormand & P. J. Prince, "A family of embedded Runge–Kutta
    formulae", J. Comput. Appl. Math. 6, 19–26 (1980).
    E. Hairer, S. P. Nørsett & G. Wanner, *Solving Ordinary Differential
    Equations I*, 2nd ed., Springer (1993), sections II.4–II.6.
    K. Gustafsson, "Control theoretic techniques for stepsize selection in
    explicit Runge–Kutta methods", ACM TOMS 17, 533–554 (1991).
    """
    y0 = np.asarray(y0, dtype=np.float64)
    t_eval = np.asarray(t_eval, dtype=np.float64)
    if y0.ndim not in (1, 2):
        raise ValueError(f"y0 must have shape (d,) or (B, d), got {y0.shape}")
    if t_eval.ndim != 1 or t_eval.size < 2:
        raise ValueError("t_eval must be a 1-D array with at least two times")
    dif = np.diff(t_eval)
    if not (np.all(dif > 0) or np.all(dif < 0)):
        raise ValueError("t_eval must be strictly monotonic")
    if not (rtol > 0 and atol >= 0):
        raise ValueError(f"need rtol > 0 and atol >= 0, got rtol={rtol!r}, atol={atol!r}")
    batched = y0.ndim == 2
    has_first = first_step is not None

    def fn(p, y0_, t_eval_, rtol_, atol_, max_steps_, first_):
        one = lambda y: _solve_one(f, y, t_eval_, p, rtol_, atol_, max_steps_, first_ if has_first else None)
        return jax.vmap(one)(y0_) if batched else one(y0_)

    key = ("dopri5", f, batched, has_first)
    args = (y0, t_eval, np.float64(rtol), np.float64(atol), np.int64(max_steps),
            np.float64(first_step if has_first else 0.0))
    (ys, n_steps, n_rej, status, t_reached), compile_s, seconds = run_compiled(key, fn, params, args)
    n_steps, n_rej, status = np.atleast_1d(n_steps), np.atleast_1d(n_rej), np.atleast_1d(status)
    t_reached = np.atleast_1d(t_reached)
    bad = np.flatnonzero(status != _SUCCESS)
    message = ""
    if bad.size:
        i = int(bad[0])
        what = _MESSAGES[int(status[i])]
        message = f"{what} at t={t_reached[i]:g}" + (
            f" ({bad.size} of {status.size} trajectories failed, first #{i})" if batched else "")
    attempts = int((n_steps + n_rej).max())
    return Solution(t=t_eval, y=np.asarray(ys), method="dopri5", nfev=6 * attempts + (1 if has_first else 2),
                    n_steps=int(n_steps.max()), seconds=seconds,
                    status="failed" if bad.size else "success", message=message,
                    compile_seconds=compile_s,
                    extra={"n_rejected": int(n_rej.max()), "rtol": rtol, "atol": atol})
