"""Large-amplitude simple pendulum."""

from __future__ import annotations

import math

import numpy as np
from scipy.special import ellipk

from solvers import array_namespace

from .base import System, TermSwitch, field_namespace, stack

__all__ = ["Pendulum"]


class Pendulum(System):
    r"""Frictionless simple pendulum at large amplitude.

    .. math::
        \dot\theta = \omega,\quad
        \dot\omega = -\frac{g}{L}\,\theta - \frac{g}{L}\,(\sin\theta - \theta)

    The restoring torque is split into its small-angle (linear) part and the
    anharmonic remainder, so "partial physics" can mean the small-angle
    approximation. Canonical coordinates (per unit ``m L^2``): ``q = theta``,
    ``p = omega``, ``H = p^2/2 - (g/L) cos q`` (separable).

    The default start is 150 degrees at rest; its period is
    ``4 sqrt(L/g) K(sin^2(theta0/2))`` (``K`` the complete elliptic integral
    of the first kind with parameter ``m = k^2``).

    References
    ----------
    L. D. Landau, E. M. Lifshitz, *Mechanics*, 3rd ed., Pergamon (1976), §11.
    """

    name = "pendulum"
    description = "Large-amplitude simple pendulum (L=1, g=9.81, 150 degrees at rest)"
    default_params = {"g": 9.81, "L": 1.0}
    terms = ("linear_restoring", "anharmonic_restoring")
    chaotic = False
    sample_dt = 0.01
    transient = 0.0
    hamiltonian_form = "separable"
    amplitude = math.radians(150.0)

    @property
    def state_names(self):
        return ("theta", "omega")

    @property
    def characteristic_time(self) -> float:
        """Period of the default start (closed form with the complete elliptic integral)."""
        return self.period(self.amplitude)

    def period(self, amplitude: float) -> float:
        """Exact period for a release at rest from ``amplitude`` radians (< pi)."""
        k = math.sin(0.5 * amplitude)
        return 4.0 * math.sqrt(self.params["L"] / self.params["g"]) * float(ellipk(k * k))

    def validate_params(self):
        for k in ("g", "L"):
            if self.params[k] <= 0:
                raise ValueError(f"parameter {k} of pendulum must be positive, got {self.params[k]:g}")

    def default_y0(self):
        return np.array([self.amplitude, 0.0])

    def vector_field(self, t, y, p, without=()):
        xp = field_namespace(y, p)
        keep = TermSwitch(without)
        th, om = y[0], y[1]
        w2 = p["g"] / p["L"]
        dom = -keep("linear_restoring") * w2 * th - keep("anharmonic_restoring") * w2 * (xp.sin(th) - th)
        return stack(xp, [om, dom])

    # Hamiltonian structure: q = (theta,), p = (omega,) per unit m L^2.
    def kinetic(self, pm, p):
        return 0.5 * (pm[0] ** 2)

    def potential(self, q, p):
        xp = array_namespace(q, *p.values())
        return -(p["g"] / p["L"]) * xp.cos(q[0])

    def hamiltonian(self, z, p):
        return self.kinetic(z[1:], p) + self.potential(z[:1], p)

    def conserved_quantities(self):
        return {"energy": lambda y, p: self.hamiltonian(y, p)}
