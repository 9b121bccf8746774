"""Sparse identification of nonlinear dynamics (SINDy) with optional physics."""

from __future__ import annotations

import itertools

import numpy as np
from scipy.integrate import solve_ivp
from scipy.optimize import least_squares

from .base import Capabilities, Learner
from .data import Budget, BudgetClock, Physics, TrainingData
from .errors import DivergedError, InvalidDataError, NotApplicableError, OverBudgetError, TooFewSamplesError

__all__ = ["SINDy"]

_DERIVATIVES = ("auto", "finite_difference", "savgol", "spline")


# ---------------------------------------------------------------- the library
class _Library:
    """Candidate functions Θ(t, x): monomials up to ``degree``, optional sin/cos
    of each state, optional sin/cos(ω t) of explicit time for forced systems."""

    def __init__(self, names, degree, trig, time_frequencies):
        d = len(names)
        self.exponents = []  # tuples of state indices (with repetition)
        for k in range(int(degree) + 1):
            self.exponents.extend(itertools.combinations_with_replacement(range(d), k))
        self.trig = bool(trig)
        self.omegas = tuple(float(w) for w in (time_frequencies or ()))
        self.d = d
        self.names = [self._monomial_name(e, names) for e in self.exponents]
        # integer power of each state in each monomial, (n_monomials, d)
        self.powers = np.array([[e.count(i) for i in range(d)] for e in self.exponents], dtype=float).reshape(-1, d)
        if self.trig:
            self.names += [f"sin({n})" for n in names] + [f"cos({n})" for n in names]
        for w in self.omegas:
            self.names += [f"sin({w:g}*t)", f"cos({w:g}*t)"]

    @staticmethod
    def _monomial_name(idx, names):
        if not idx:
            return "1"
        parts = []
        for i in sorted(set(idx)):
            c = idx.count(i)
            parts.append(names[i] if c == 1 else f"{names[i]}^{c}")
        return "*".join(parts)

    def __len__(self):
        return len(self.names)

    def __call__(self, t, x, columns=None):
        """Θ for states ``x`` (N, d) at times ``t`` (N,) -> (N, n_terms).

        ``columns`` (boolean mask over terms) limits the work to those terms;
        the others are returned as zeros.
        """
        x = np.asarray(x, dtype=float)
        n_poly = len(self.exponents)
        out = np.zeros((x.shape[0], len(self.names)))
        mask = np.ones(len(self.names), dtype=bool) if columns is None else np.asarray(columns, dtype=bool)
        sel = np.flatnonzero(mask[:n_poly])
        if sel.size:
            out[:, sel] = np.prod(x[:, None, :] ** self.powers[sel][None], axis=2)
        k = n_poly
        if self.trig:
            out[:, k:k + self.d] = np.sin(x)
            out[:, k + self.d:k + 2 * self.d] = np.cos(x)
            k += 2 * self.d
        if self.omegas:
            t = np.broadcast_to(np.asarray(t, dtype=float), (x.shape[0],))
            for w in self.omegas:
                out[:, k] = np.sin(w * t)
                out[:, k + 1] = np.cos(w * t)
                k += 2
        return out


# ------------------------------------------------------- physics as a callable
def _batched(f, params, probe):
    """``F(t, X)`` evaluating ``f(t, x, p)`` row by row of ``X`` (N, d), ``t`` scalar or (N,).

    Three ways, fastest first, each used only if it agrees with plain row-by-row
    evaluation on the ``probe`` rows: numpy on the transposed batch (fields
    written with ``y[0], y[1], ...`` broadcast over columns), one compiled
    ``jax.vmap`` call, or a Python loop over rows.
    """
    import jax
    import jax.numpy as jnp

    p = {k: float(v) for k, v in params.items()}

    def rows(tt, X):
        return np.stack([np.asarray(f(ti, xi, p), dtype=float) for ti, xi in zip(tt, X)])

    def columns(tt, X):
        return np.asarray(f(tt, X.T, p), dtype=float).T

    vf = jax.jit(jax.vmap(lambda t, x, q: f(t, x, q), in_axes=(0, 0, None)))

    def vmapped(tt, X):
        return np.asarray(vf(jnp.asarray(tt), jnp.asarray(X), p))

    pt, px = probe
    pt, px = np.asarray(pt, dtype=float), np.asarray(px, dtype=float)
    expected = rows(pt, px)
    chosen = rows
    for cand in (columns, vmapped):
        try:
            with np.errstate(all="ignore"):
                got = cand(pt, px)
        except Exception:  # noqa: BLE001 - a field this way cannot evaluate
            continue
        if got.shape == expected.shape and np.allclose(got, expected, rtol=1e-12, atol=1e-12):
            chosen = cand
            break

    def F(t, X):
        X = np.asarray(X, dtype=float)
        tt = np.broadcast_to(np.asarray(t, dtype=float), (X.shape[0],))
        return chosen(tt, X)

    return F


class _TooStiff(Exception):
    """The rollout exceeded its evaluation cap."""


class SINDy(Learner):
    r"""Sparse identification of nonlinear dynamics.

    Fits :math:`\dot x = \Theta(t, x)\,\Xi^\top` by sequentially thresholded
    least squares (STLSQ): a (ridge) least-squares fit, then coefficients
    smaller than ``threshold`` are set to zero and the rest refitted, until the
    active set stops changing; a last plain least-squares fit on the active
    set removes the ridge bias. Time derivatives come from the data: second-
    order finite differences on the (possibly non-uniform) sample grid for
    clean data, or smoothed derivatives for noisy data (Savitzky–Golay on
    equally spaced samples, a smoothing spline with generalised
    cross-validation otherwise).

    With physics level ``"partial"`` or ``"full"`` the known field is
    subtracted and only the missing part is learned (the model is known +
    learned). With level ``"full"`` and unknown parameters (identify), the
    unknown parameters are first estimated by nonlinear least squares on the
    derivative residual :math:`\dot x - f(t, x; p)`, started from the guess in
    ``physics.params``.

    Parameters
    ----------
    degree : int
        Highest total degree of the polynomial library.
    threshold : float
        STLSQ threshold on coefficient magnitude.
    alpha : float
        Ridge penalty in each least-squares step, relative to library columns
        scaled to unit root mean square (0: plain least squares). A small
        penalty keeps the fit well posed when library terms are nearly
        collinear on the data (e.g. a conserved quadratic quantity).
    max_iter : int
        Most STLSQ iterations (capped by ``Budget.max_iterations``).
    trig : bool
        Add sin and cos of each state to the library.
    time_frequencies : tuple of float
        Angular frequencies ω of explicit-time terms sin(ωt), cos(ωt) (forced systems).
    derivative : {"auto", "finite_difference", "savgol", "spline"}
        How dx/dt is estimated; ``"auto"`` uses finite differences on clean
        data and smoothing on noisy data (``TrainingData.noise > 0``).
    savgol_window : int
        Window length (samples, odd) of the Savitzky–Golay filter; with either
        smoother, half a window of samples is dropped at each trajectory end.
    savgol_order : int
        Polynomial order of the Savitzky–Golay filter.
    rtol, atol : float
        Tolerances of the DOP853 rollout of the learned field.
    blowup : float
        A rollout whose state leaves ``blowup`` × the training range is
        reported as diverged.

    Attributes
    ----------
    coefficients_ : ndarray, shape (d, n_terms)
        Learned coefficients (of the missing part, when physics is given).
    feature_names_ : list of str
        Readable library term names, e.g. ``"x*z"``.
    params_ : dict
        Parameter values used for the known field (identified ones included).

    References
    ----------
    S. L. Brunton, J. L. Proctor and J. N. Kutz, "Discovering governing
    equations from data by sparse identification of nonlinear dynamical
    systems", PNAS 113, 3932–3937 (2016).
    A. Savitzky and M. J. E. Golay, Anal. Chem. 36, 1627–1639 (1964).

    Examples
    --------
    >>> model = SINDy(degree=2, threshold=0.1).fit(data)   # doctest: +SKIP
    >>> print(model.equations())                           # doctest: +SKIP
    """

    capabilities = Capabilities(
        tasks=frozenset({"forecast", "climate", "identify"}),
        physics=frozenset({"none", "partial", "full"}),
        deterministic=True,
        needs_regular_sampling=False,
        min_samples=3,
    )
    reference = ("Brunton, Proctor & Kutz, Discovering governing equations from data by sparse "
                 "identification of nonlinear dynamical systems, PNAS 113, 3932 (2016)")

    def __init__(self, degree=2, threshold=0.1, alpha=1e-5, max_iter=20, trig=False,
                 time_frequencies=(), derivative="auto", savgol_window=15, savgol_order=3,
                 rtol=1e-8, atol=1e-8, blowup=100.0):
        self.degree = degree
        self.threshold = threshold
        self.alpha = alpha
        self.max_iter = max_iter
        self.trig = trig
        self.time_frequencies = time_frequencies
        self.derivative = derivative
        self.savgol_window = savgol_window
        self.savgol_order = savgol_order
        self.rtol = rtol
        self.atol = atol
        self.blowup = blowup

    # ------------------------------------------------------------- derivatives
    def _method(self, data: TrainingData) -> str:
        if self.derivative not in _DERIVATIVES:
            raise InvalidDataError(
                f"derivative must be one of {', '.join(_DERIVATIVES)}, got {self.derivative!r}")
        if self.derivative != "auto":
            return self.derivative
        if not data.noise:
            return "finite_difference"
        return "savgol" if all(tr.regular for tr in data.trajectories) else "spline"

    def _derivatives(self, t, y, method):
        """(states used in the library, dy/dt) of one trajectory."""
        if method == "finite_difference":
            return y, np.gradient(y, t, axis=0, edge_order=2)
        if method == "savgol":
            from scipy.signal import savgol_filter

            d = np.diff(t)
            if not np.allclose(d, d[0], rtol=1e-9, atol=0.0):
                raise InvalidDataError("Savitzky-Golay derivatives need equally spaced samples; "
                                       "use derivative='spline' for irregular data")
            w = int(self.savgol_window)
            w = min(w if w % 2 else w + 1, t.size if t.size % 2 else t.size - 1)
            order = min(int(self.savgol_order), w - 1)
            smooth = savgol_filter(y, w, order, axis=0, mode="interp")
            dydt = savgol_filter(y, w, order, deriv=1, delta=float(d[0]), axis=0, mode="interp")
            return smooth, dydt
        # smoothing spline, penalty chosen by generalised cross-validation
        from scipy.interpolate import make_smoothing_spline

        if t.size < 5:
            raise TooFewSamplesError("a smoothing-spline derivative needs at least 5 samples per trajectory")
        smooth = np.empty_like(y)
        dydt = np.empty_like(y)
        for i in range(y.shape[1]):
            spl = make_smoothing_spline(t, y[:, i])
            smooth[:, i] = spl(t)
            dydt[:, i] = spl.derivative()(t)
        return smooth, dydt

    # ------------------------------------------------------------------ fitting
    def _fit(self, data: TrainingData, physics: Physics, budget: Budget, seed: int) -> None:
        clock = BudgetClock(budget)
        method = self._method(data)
        lib = _Library(data.state_names, self.degree, self.trig, self.time_frequencies)
        ts, xs, dxs = [], [], []
        for tr in data.trajectories:
            if tr.t.size < 3:
                continue  # too short for a second-order derivative
            x, dx = self._derivatives(tr.t, tr.y, method)
            tt = tr.t
            edge = int(self.savgol_window) // 2 if method != "finite_difference" else 0
            if edge and tt.size > 4 * edge:
                # smoothed derivatives are least accurate at the ends: drop half a window there
                tt, x, dx = tt[edge:-edge], x[edge:-edge], dx[edge:-edge]
            ts.append(tt)
            xs.append(x)
            dxs.append(dx)
        n = sum(t.size for t in ts)
        if n < len(lib):
            raise TooFewSamplesError(
                f"SINDy needs at least {len(lib)} samples (one per library term) in trajectories "
                f"of 3 or more samples, got {n}")
        t_all, x_all, dx_all = np.concatenate(ts), np.concatenate(xs), np.concatenate(dxs)

        params = {k: float(v) for k, v in physics.params.items()}
        known = None
        if physics.unknown:
            if physics.level != "full":
                raise NotApplicableError(
                    f"SINDy identifies parameters only with the full equations (physics level "
                    f"'full'), got level {physics.level!r}")
            params.update(self._identify(physics, params, t_all, x_all, dx_all, clock))
        if physics.level != "none":
            known = _batched(physics.vector_field, params, (t_all[:4], x_all[:4]))
            target = dx_all - known(t_all, x_all)
        else:
            target = dx_all

        theta = lib(t_all, x_all)
        xi = self._stlsq(theta, target, clock.iterations(self.max_iter), clock)
        self.coefficients_ = xi
        self.feature_names_ = list(lib.names)
        self.state_names_ = tuple(data.state_names)
        self.params_ = params
        self.physics_level_ = physics.level
        self.unknown_ = tuple(physics.unknown)
        self.derivative_method_ = method
        self._library_ = lib
        self._known_ = known
        lo, hi = x_all.min(axis=0), x_all.max(axis=0)
        self.bounds_ = (lo, hi)

    def _stlsq(self, theta, target, n_iter, clock):
        """Sequentially thresholded (ridge) least squares, all outputs at once.

        The least-squares steps work on library columns scaled to unit root
        mean square (so that ``alpha`` is relative and scale-free); the
        threshold applies to the coefficients in the data's own units.
        """
        if not (np.all(np.isfinite(theta)) and np.all(np.isfinite(target))):
            raise InvalidDataError("the library or derivative estimates are not finite")
        col = np.sqrt(np.mean(theta ** 2, axis=0))
        col = np.where(col > 0, col, 1.0)
        a = theta / col
        n_terms, d = theta.shape[1], target.shape[1]
        xi = np.zeros((d, n_terms))
        active = np.ones((d, n_terms), dtype=bool)

        def refit(alpha):
            for j in range(d):
                cols = np.flatnonzero(active[j])
                xi[j] = 0.0
                if cols.size:
                    xi[j, cols] = self._ridge(a[:, cols], target[:, j], alpha) / col[cols]

        for it in range(max(int(n_iter), 1)):
            refit(float(self.alpha))
            new_active = np.abs(xi) >= float(self.threshold)
            if np.array_equal(new_active, active):
                break
            active = new_active
            if clock.expired():
                if it == 0:
                    raise OverBudgetError("SINDy ran out of time before one STLSQ pass")
                break
        # final fit on the active set without the penalty (removes the ridge bias)
        refit(0.0)
        xi[~active] = 0.0
        return xi

    @staticmethod
    def _ridge(a, b, alpha):
        """Least squares with penalty ``alpha * n * |w|^2`` on unit-RMS columns ``a`` (n, k)."""
        if alpha > 0:
            from scipy.linalg import solve

            n = a.shape[0]
            return solve(a.T @ a / n + alpha * np.eye(a.shape[1]), a.T @ b / n, assume_a="pos")
        return np.linalg.lstsq(a, b, rcond=None)[0]

    def _identify(self, physics, params, t_all, x_all, dx_all, clock):
        """Nonlinear least squares on ``dx/dt - f(t, x; p)`` over the unknown parameters."""
        import jax
        import jax.numpy as jnp

        names = tuple(physics.unknown)
        f = physics.vector_field
        fixed = {k: v for k, v in params.items() if k not in names}
        scale = np.std(dx_all, axis=0)
        scale = np.where(scale > 0, scale, 1.0)
        tj, xj = jnp.asarray(t_all), jnp.asarray(x_all)
        dxj, sj = jnp.asarray(dx_all), jnp.asarray(scale)

        def residual(theta):
            p = dict(fixed)
            p.update({k: theta[i] for i, k in enumerate(names)})
            fx = jax.vmap(lambda t, x: f(t, x, p))(tj, xj)
            return ((dxj - fx) / sj).ravel()

        res = jax.jit(residual)
        jac = jax.jit(jax.jacfwd(residual))
        theta0 = np.array([float(params[k]) for k in names])
        max_nfev = clock.iterations(200)
        sol = least_squares(lambda th: np.asarray(res(jnp.asarray(th))),
                            theta0, jac=lambda th: np.asarray(jac(jnp.asarray(th))),
                            method="trf", max_nfev=max_nfev, xtol=1e-12, ftol=1e-12, gtol=1e-12)
        if not np.all(np.isfinite(sol.x)):
            raise DivergedError("parameter identification produced non-finite estimates")
        self.identification_cost_ = float(sol.cost)
        return {k: float(v) for k, v in zip(names, sol.x)}

    # --------------------------------------------------------------- the model
    def field(self, t, x):
        """The fitted vector field at states ``x`` (N, d) and times ``t`` -> (N, d)."""
        self._check_fitted()
        x = np.atleast_2d(np.asarray(x, dtype=float))
        active = np.any(self.coefficients_ != 0.0, axis=0)
        out = self._library_(t, x, active) @ self.coefficients_.T
        if self._known_ is not None:
            out = out + self._known_(t, x)
        return out

    def equations(self, precision: int = 4) -> list[str]:
        """One readable line per state, e.g. ``"dx/dt = -10 x + 10 y"``."""
        self._check_fitted()
        lines = []
        for name, row in zip(self.state_names_, self.coefficients_):
            terms = []
            for c, term in zip(row, self.feature_names_):
                if c == 0.0:
                    continue
                coef = f"{c:.{precision}g}"
                terms.append(coef if term == "1" else f"{coef} {term}")
            rhs = " + ".join(terms).replace("+ -", "- ") if terms else "0"
            if self.physics_level_ != "none":
                rhs = f"known + {rhs}" if terms else "known"
            lines.append(f"d{name}/dt = {rhs}")
        return lines

    def _rollout(self, y0, t, history):
        B, d = y0.shape
        if t.size == 1:
            return y0[:, None, :].copy()
        lo, hi = self.bounds_
        centre, width = 0.5 * (lo + hi), np.maximum(hi - lo, 1e-12)
        limit = float(self.blowup)

        cap = max(100_000, 500 * (t.size - 1))
        calls = [0]

        def rhs(tt, z):
            calls[0] += 1
            if calls[0] > cap:
                raise _TooStiff
            return self.field(tt, z.reshape(B, d)).ravel()

        def escaped(tt, z):
            return limit - np.max(np.abs(z.reshape(B, d) - centre) / width)

        escaped.terminal = True
        try:
            with np.errstate(over="ignore", invalid="ignore"):
                sol = solve_ivp(rhs, (float(t[0]), float(t[-1])), y0.ravel(), method="DOP853", t_eval=t,
                                rtol=float(self.rtol), atol=float(self.atol), events=escaped)
        except _TooStiff:
            raise DivergedError(f"SINDy rollout needed more than {cap} field evaluations "
                                "(the learned field is stiff or blowing up)") from None
        if sol.status == 1 or sol.status == -1 or sol.y.shape[1] != t.size:
            raise DivergedError(f"SINDy rollout diverged at t = {sol.t[-1]:.4g} ({sol.message})")
        out = sol.y.T.reshape(t.size, B, d).transpose(1, 0, 2)
        if not np.all(np.isfinite(out)):
            raise DivergedError("SINDy rollout produced non-finite states")
        out[:, 0] = y0
        return out

    def _identified_params(self):
        return {k: self.params_[k] for k in self.unknown_}

    def _n_parameters(self) -> int:
        return int(np.count_nonzero(self.coefficients_)) + len(self.unknown_)
