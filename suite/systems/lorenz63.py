"""Lorenz-63 convection model."""

from __future__ import annotations

import numpy as np

from .base import PublishedValue, System, TermSwitch, field_namespace, stack

__all__ = ["Lorenz63"]


class Lorenz63(System):
    r"""Lorenz (1963) three-mode truncation of Rayleigh–Bénard convection.

    .. math::
        \dot x = \sigma (y - x),\quad
        \dot y = x(\rho - z) - y,\quad
        \dot z = x y - \beta z

    References
    ----------
    E. N. Lorenz, "Deterministic nonperiodic flow", J. Atmos. Sci. 20, 130–141 (1963).
    J. C. Sprott, *Chaos and Time-Series Analysis*, Oxford University Press (2003),
    Table of Lyapunov exponents.
    """

    name = "lorenz63"
    description = "Lorenz-63 convection model (sigma=10, rho=28, beta=8/3)"
    default_params = {"sigma": 10.0, "rho": 28.0, "beta": 8.0 / 3.0}
    terms = ("x_coupling", "y_forcing", "y_nonlinear", "y_damping", "z_nonlinear", "z_damping")
    chaotic = True
    sample_dt = 0.01
    transient = 50.0
    published = (
        PublishedValue("lyapunov_spectrum", (0.9056, 0.0, -14.5723),
                       "Sprott, Chaos and Time-Series Analysis (2003)"),
        PublishedValue("kaplan_yorke_dimension", 2.0621,
                       "Sprott, Chaos and Time-Series Analysis (2003)"),
    )

    # solvers.lyapunov_spectrum, RK4 dt 0.01, transient 50, t_end 1000 from
    # (1, 1, 1): (0.9145, -0.0021, -14.579), Kaplan-Yorke 2.0626.
    measured_lyapunov_exponent = 0.9145

    def validate_params(self):
        for k in ("sigma", "beta"):
            if self.params[k] <= 0:
                raise ValueError(f"parameter {k} of lorenz63 must be positive, got {self.params[k]:g}")

    @property
    def state_names(self):
        return ("x", "y", "z")

    def default_y0(self):
        return np.array([1.0, 1.0, 1.0])

    def vector_field(self, t, y, p, without=()):
        xp = field_namespace(y, p)
        keep = TermSwitch(without)
        x, yy, z = y[0], y[1], y[2]
        dx = keep("x_coupling") * p["sigma"] * (yy - x)
        dy = keep("y_forcing") * p["rho"] * x - keep("y_nonlinear") * x * z - keep("y_damping") * yy
        dz = keep("z_nonlinear") * x * yy - keep("z_damping") * p["beta"] * z
        return stack(xp, [dx, dy, dz])
