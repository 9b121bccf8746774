"""Planar Kepler problem."""

from __future__ import annotations

import math

import numpy as np

from solvers import array_namespace

from .base import System, TermSwitch, field_namespace, stack

__all__ = ["Kepler"]


class Kepler(System):
    r"""A test particle around a point mass ``GM`` in the plane.

    .. math::
        \dot{\mathbf r} = \mathbf v,\quad
        \dot{\mathbf v} = -GM\,\mathbf r / |\mathbf r|^3

    Default: semi-major axis 1 and eccentricity 0.6, started at periapsis
    (``r = a(1-e)``, ``v = sqrt(GM (1+e)/(a(1-e)))``), so the period is
    ``2 pi a^{3/2} / sqrt(GM)``. Energy, angular momentum and the
    Laplace–Runge–Lenz vector are conserved. Canonical coordinates per unit
    mass: ``q = (x, y)``, ``p = (vx, vy)``, ``H = |p|^2/2 - GM/|q|``.

    References
    ----------
    H. Goldstein, C. Poole, J. Safko, *Classical Mechanics*, 3rd ed.,
    Addison-Wesley (2002), chapter 3.
    """

    name = "kepler"
    description = "Planar Kepler orbit (GM=1, a=1, e=0.6, started at periapsis)"
    default_params = {"GM": 1.0}
    terms = ("gravity",)
    chaotic = False
    sample_dt = 0.01
    transient = 0.0
    hamiltonian_form = "separable"
    semi_major_axis = 1.0
    eccentricity = 0.6

    @property
    def state_names(self):
        return ("x", "y", "vx", "vy")

    @property
    def characteristic_time(self) -> float:
        """Orbital period of the default orbit, 2 pi a^{3/2} / sqrt(GM)."""
        return 2.0 * math.pi * self.semi_major_axis ** 1.5 / math.sqrt(self.params["GM"])

    def validate_params(self):
        if self.params["GM"] <= 0:
            raise ValueError(f"parameter GM of kepler must be positive, got {self.params['GM']:g}")

    def default_y0(self):
        a, e, gm = self.semi_major_axis, self.eccentricity, self.params["GM"]
        return np.array([a * (1.0 - e), 0.0, 0.0, math.sqrt(gm * (1.0 + e) / (a * (1.0 - e)))])

    def vector_field(self, t, y, p, without=()):
        xp = field_namespace(y, p)
        keep = TermSwitch(without)
        x, yy, vx, vy = y[0], y[1], y[2], y[3]
        r3 = (x * x + yy * yy) ** 1.5
        g = keep("gravity") * p["GM"] / r3
        return stack(xp, [vx, vy, -g * x, -g * yy])

    def kinetic(self, pm, p):
        return 0.5 * (pm[0] ** 2 + pm[1] ** 2)

    def potential(self, q, p):
        xp = array_namespace(q, *p.values())
        return -p["GM"] / xp.sqrt(q[0] ** 2 + q[1] ** 2)

    def hamiltonian(self, z, p):
        return self.kinetic(z[2:], p) + self.potential(z[:2], p)

    def conserved_quantities(self):
        def angular_momentum(y, p):
            return y[0] * y[3] - y[1] * y[2]

        def runge_lenz_x(y, p):
            xp = field_namespace(y, p)
            lz = angular_momentum(y, p)
            return y[3] * lz - p["GM"] * y[0] / xp.sqrt(y[0] ** 2 + y[1] ** 2)

        def runge_lenz_y(y, p):
            xp = field_namespace(y, p)
            lz = angular_momentum(y, p)
            return -y[2] * lz - p["GM"] * y[1] / xp.sqrt(y[0] ** 2 + y[1] ** 2)

        return {"energy": lambda y, p: self.hamiltonian(y, p),
                "angular_momentum": angular_momentum,
                "runge_lenz_x": runge_lenz_x, "runge_lenz_y": runge_lenz_y}
