"""Kuramoto–Sivashinsky equation on a periodic domain."""

from __future__ import annotations

import math

import numpy as np

from solvers import array_namespace

from .base import PublishedValue, System, TermSwitch, UnknownNameError, field_namespace

__all__ = ["KuramotoSivashinsky"]


class KuramotoSivashinsky(System):
    r"""Kuramoto–Sivashinsky equation, pseudo-spectral on ``N`` grid points.

    .. math::
        u_t = -u u_x - u_{xx} - u_{xxxx}, \qquad x \in [0, L) \text{ periodic}

    ``L`` is the *physical* length of the domain (default 22), not ``L/2π``.
    The state is ``u`` at the grid points ``x_j = j L / N``. Derivatives are
    taken spectrally with the real FFT of the array namespace (``numpy.fft``
    or ``jax.numpy.fft``); the advection is written in conservative form
    ``-(u^2/2)_x`` so the mean of ``u`` is conserved exactly. The
    odd derivative drops the Nyquist mode. Removable terms:
    ``advection``, ``hyperdiffusion`` (``-u_xxxx``) and ``antidiffusion``
    (``-u_xx``, the instability; without it every mode decays).

    :meth:`semilinear_split` gives the same equation as a diagonal linear
    operator plus a nonlinear map in Fourier space, for exponential
    integrators (ETDRK4) that avoid the stiffness of ``k^4``.

    References
    ----------
    Y. Kuramoto, T. Tsuzuki, "Persistent propagation of concentration waves
    in dissipative media far from thermal equilibrium", Prog. Theor. Phys. 55,
    356–369 (1976). G. I. Sivashinsky, "Nonlinear analysis of hydrodynamic
    instability in laminar flames", Acta Astronaut. 4, 1177–1206 (1977).
    P. Cvitanović, R. L. Davidchack, E. Siminos, "On the state space geometry
    of the Kuramoto–Sivashinsky flow in a periodic domain", SIAM J. Appl.
    Dyn. Syst. 9, 1–33 (2010).
    A.-K. Kassam, L. N. Trefethen, "Fourth-order time-stepping for stiff
    PDEs", SIAM J. Sci. Comput. 26, 1214–1233 (2005).
    """

    name = "kuramoto_sivashinsky"
    description = "Kuramoto-Sivashinsky equation, periodic domain of length L=22, N=64 grid points"
    default_params = {"L": 22.0, "N": 64.0}
    terms = ("advection", "hyperdiffusion", "antidiffusion")
    chaotic = True
    sample_dt = 0.25
    transient = 200.0
    published = (
        PublishedValue("largest_lyapunov_exponent", 0.043,
                       "Cvitanović, Davidchack & Siminos, SIAM J. Appl. Dyn. Syst. 9, 1 (2010), from memory"),
    )
    # solvers.largest_lyapunov_exponent / lyapunov_spectrum with the ETDRK4
    # step map, from a state on the attractor: 0.0467 (dt 0.025, t_end 20000),
    # 0.0447 (dt 0.025, t_end 10000), 0.0504 (dt 0.05, t_end 10000), 0.0498
    # (dt 0.05, t_end 20000, 2 exponents: second 0.0003), 0.0495 (N=96,
    # dt 0.05, t_end 10000). Recorded: the longest run at the smaller step.
    measured_lyapunov_exponent = 0.0467
    reference_dt = 0.05  # ETDRK4 step of reference trajectories

    @property
    def n(self) -> int:
        return int(self.params["N"])

    @property
    def state_names(self):
        return tuple(f"u{j}" for j in range(self.n))

    @property
    def grid(self) -> np.ndarray:
        """Grid points ``x_j = j L / N`` (physical units)."""
        return self.params["L"] * np.arange(self.n) / self.n

    def validate_params(self):
        n, length = self.params["N"], self.params["L"]
        if n != int(n) or n < 8 or int(n) % 2:
            raise ValueError(f"parameter N of kuramoto_sivashinsky must be an even integer of at least 8, got {n:g}")
        if length <= 0:
            raise ValueError(f"parameter L of kuramoto_sivashinsky must be positive, got {length:g}")

    def default_y0(self):
        x = 2.0 * math.pi * self.grid / self.params["L"]
        return np.cos(x) * (1.0 + np.sin(x)) + 0.1 * np.cos(2.0 * x + 1.0)

    # ----------------------------------------------------------- spectral
    def wavenumbers(self, p=None, n=None):
        """Real-FFT wavenumbers ``2 pi m / L``, ``m = 0..N/2``."""
        p = self.params if p is None else p
        n = self.n if n is None else n
        return 2.0 * math.pi / p["L"] * np.arange(n // 2 + 1)

    def _derivative_wavenumbers(self, k):
        kd = np.array(k, copy=True)
        kd[-1] = 0.0  # Nyquist mode of an odd derivative
        return kd

    def vector_field(self, t, y, p, without=()):
        xp = field_namespace(y, p)
        keep = TermSwitch(without)
        n = y.shape[-1]
        k = xp.asarray(2.0 * math.pi * np.arange(n // 2 + 1)) / p["L"]
        kd = k * xp.asarray(np.r_[np.ones(n // 2), 0.0])
        u_hat = xp.fft.rfft(y)
        lin = keep("antidiffusion") * k ** 2 - keep("hyperdiffusion") * k ** 4
        adv = -0.5j * kd * xp.fft.rfft(y * y)
        return xp.fft.irfft(lin * u_hat + keep("advection") * adv, n=n)

    def semilinear_split(self, without=()):
        """``(linear, nonlinear)`` in real-FFT space for exponential integrators.

        Returns
        -------
        linear : ndarray, shape (N/2+1,)
            Diagonal of the linear operator, ``k^2 - k^4`` (terms removed as asked).
        nonlinear : callable ``(u_hat, p) -> ndarray``
            ``-(i k / 2) FFT(u^2)``, evaluated with the namespace of ``u_hat``.

        ``to_spectral`` / ``from_spectral`` map grid values to the Fourier
        coefficients the two act on and back.
        """
        without = (without,) if isinstance(without, str) else tuple(without)
        for term in without:
            if term not in self.terms:
                raise UnknownNameError(f"term of {self.name}", term, self.terms)
        key = (frozenset(without), self.n, self.params["L"])
        cache = self.__dict__.setdefault("_split_cache", {})
        if key not in cache:
            cache[key] = self._build_split(without)
        return cache[key]

    def _build_split(self, without):
        keep = TermSwitch(without)
        n = self.n
        k = self.wavenumbers()
        linear = keep("antidiffusion") * k ** 2 - keep("hyperdiffusion") * k ** 4
        kd = self._derivative_wavenumbers(k)
        c_adv = keep("advection")

        def nonlinear(u_hat, p):
            xp = array_namespace(u_hat)
            u = xp.fft.irfft(u_hat, n=n)
            return c_adv * (-0.5j) * xp.asarray(kd) * xp.fft.rfft(u * u)

        return linear, nonlinear

    def integrate(self, y0, dt, n_steps, *, save_every=1, without=()):
        """ETDRK4 from grid values ``y0`` (shape (N,) or (B, N)); returns a Solution on the grid."""
        from solvers.etdrk4 import etdrk4
        from solvers.result import Solution

        linear, nonlinear = self.semilinear_split(without)
        sol = etdrk4(linear, nonlinear, np.fft.rfft(np.asarray(y0, float), axis=-1), dt,
                             n_steps, self.params, save_every=save_every)
        y = np.fft.irfft(np.asarray(sol.y), n=self.n, axis=-1)
        return Solution(t=sol.t, y=y, method=sol.method, nfev=sol.nfev, n_steps=sol.n_steps,
                                seconds=sol.seconds, status=sol.status, message=sol.message,
                                compile_seconds=sol.compile_seconds, extra=dict(sol.extra))

    def lyapunov_step(self, dt: float | None = None, without=()):
        """A jittable ETDRK4 one-step map ``step(t, u, dt, params)`` on grid values.

        For :func:`solvers.lyapunov_spectrum` (its ``step`` argument): the
        tangent dynamics are then propagated through the exponential
        integrator, which is stable at steps where RK4 on the stiff field is
        not. ``dt`` is fixed when the map is built (default
        :attr:`reference_dt`); the ``dt`` argument of the map is ignored.
        Cached per (dt, removed terms), so compiled code is reused.
        """
        from solvers import make_etdrk4_step

        dt = float(self.reference_dt if dt is None else dt)
        without = (without,) if isinstance(without, str) else tuple(without)
        key = ("lyapunov_step", dt, frozenset(without), self.n, self.params["L"])
        cache = self.__dict__.setdefault("_split_cache", {})
        if key not in cache:
            linear, nonlinear = self.semilinear_split(without)
            spectral_step = make_etdrk4_step(linear, nonlinear, dt)
            n = self.n

            def step(t, u, dt_ignored, params):
                xp = field_namespace(u, params)
                return xp.fft.irfft(spectral_step(xp.fft.rfft(u), params), n=n)

            cache[key] = step
        return cache[key]

    def lyapunov_options(self) -> dict:
        """Settings for :func:`solvers.lyapunov_spectrum`: the ETDRK4 step map at half ``reference_dt``."""
        dt = 0.5 * self.reference_dt
        return {"dt": dt, "step": self.lyapunov_step(dt)}

    def initial_conditions(self, n, seed, spacing=None):
        """``n`` states on the attractor from ``seed`` (ETDRK4 instead of the stiff-unfriendly DOP853)."""
        rng = np.random.default_rng(seed)
        y0 = np.asarray(self.default_y0(), dtype=float)
        y0 = y0 + 1e-3 * rng.standard_normal(y0.shape) * (1.0 + np.abs(y0))
        y0 = y0 - y0.mean() + np.mean(self.default_y0())
        spacing = float(spacing or 5.0 * self.time_unit)
        dt = self.reference_dt
        every = max(1, int(round(spacing / dt)))
        first = int(round(self.transient / dt))
        sol = self.integrate(y0, dt, first + every * n, save_every=1)
        if not sol.success:
            raise RuntimeError(f"{self.name}: could not draw initial conditions: {sol.message}")
        return sol.y[first + every * np.arange(1, n + 1)].copy()

    def to_spectral(self, u):
        xp = array_namespace(u)
        return xp.fft.rfft(u, axis=-1)

    def from_spectral(self, u_hat):
        xp = array_namespace(u_hat)
        return xp.fft.irfft(u_hat, n=self.n, axis=-1)

    def conserved_quantities(self):
        def mean(y, p):
            xp = array_namespace(y)
            return xp.mean(y, axis=-1)

        return {"mean": mean}
