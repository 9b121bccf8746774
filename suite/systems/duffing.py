"""Forced, damped Duffing oscillator."""

from __future__ import annotations

import math

import numpy as np

from .base import System, TermSwitch, field_namespace, stack

__all__ = ["Duffing"]


class Duffing(System):
    r"""Periodically forced Duffing oscillator (double-well for alpha < 0).

    .. math::
        \dot x = v,\quad
        \dot v = -\delta v - \alpha x - \beta x^3 + \gamma \cos(\omega t)

    Non-autonomous: the field depends on ``t``. The defaults
    (delta=0.3, alpha=-1, beta=1, gamma=0.5, omega=1.2) lie in the chaotic
    regime of the double-well oscillator. Start states drawn by
    :meth:`initial_conditions` lie at whole forcing periods, so a rollout
    that starts at ``t = 0`` from one of them sees the right forcing phase.

    References
    ----------
    G. Duffing, *Erzwungene Schwingungen bei veränderlicher Eigenfrequenz*, Vieweg (1918).
    J. Guckenheimer, P. Holmes, *Nonlinear Oscillations, Dynamical Systems, and
    Bifurcations of Vector Fields*, Springer (1983), section 2.2.
    """

    name = "duffing"
    description = "Forced double-well Duffing oscillator (delta=0.3, alpha=-1, beta=1, gamma=0.5, omega=1.2)"
    default_params = {"delta": 0.3, "alpha": -1.0, "beta": 1.0, "gamma": 0.5, "omega": 1.2}
    terms = ("damping", "linear_stiffness", "cubic_stiffness", "forcing")
    chaotic = True
    sample_dt = 0.05
    transient = 100.0 * 2.0 * math.pi / 1.2
    # solvers.lyapunov_spectrum, RK4 dt 0.01, transient 100 forcing periods,
    # t_end 5000 from (1, 0): (0.110, -0.410) (sum = -delta); a second run
    # (transient 200, own RK4-QR) gave 0.099: about 0.1 to within sampling.
    measured_lyapunov_exponent = 0.11

    @property
    def state_names(self):
        return ("x", "v")

    @property
    def forcing_period(self) -> float:
        return 2.0 * math.pi / self.params["omega"]

    def validate_params(self):
        if self.params["omega"] <= 0:
            raise ValueError(f"parameter omega of duffing must be positive, got {self.params['omega']:g}")
        if self.params["delta"] < 0:
            raise ValueError(f"parameter delta of duffing must not be negative, got {self.params['delta']:g}")

    def default_y0(self):
        return np.array([1.0, 0.0])

    def vector_field(self, t, y, p, without=()):
        xp = field_namespace(y, p, t)
        keep = TermSwitch(without)
        x, v = y[0], y[1]
        dv = (-keep("damping") * p["delta"] * v - keep("linear_stiffness") * p["alpha"] * x
              - keep("cubic_stiffness") * p["beta"] * x ** 3
              + keep("forcing") * p["gamma"] * xp.cos(p["omega"] * t))
        return stack(xp, [v, dv])

    def initial_conditions(self, n, seed, spacing=None):
        """``n`` states on the attractor at whole forcing periods (phase 0), from ``seed``."""
        period = self.forcing_period
        spacing = float(spacing or 5.0 * self.time_unit)
        spacing = period * max(1, round(spacing / period))
        return _at_phase_zero(self, n, seed, spacing, period)


def _at_phase_zero(system, n, seed, spacing, period):
    from scipy.integrate import solve_ivp

    rng = np.random.default_rng(seed)
    y0 = np.asarray(system.default_y0(), dtype=float)
    y0 = y0 + 1e-3 * rng.standard_normal(y0.shape) * (1.0 + np.abs(y0))
    t0 = period * math.ceil(system.transient / period)
    ts = t0 + spacing * np.arange(1, n + 1)
    f = system.rhs()
    p = system.params
    sol = solve_ivp(lambda t, y: f(t, y, p), (0.0, ts[-1]), y0, method="DOP853",
                    t_eval=ts, rtol=1e-10, atol=1e-10)
    if not sol.success:
        raise RuntimeError(f"{system.name}: could not draw initial conditions: {sol.message}")
    return sol.y.T.copy()
