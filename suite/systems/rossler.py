"""Rössler attractor."""

from __future__ import annotations

import numpy as np

from .base import PublishedValue, System, TermSwitch, field_namespace, stack

__all__ = ["Rossler"]


class Rossler(System):
    r"""Rössler (1976) spiral attractor.

    .. math::
        \dot x = -y - z,\quad
        \dot y = x + a y,\quad
        \dot z = b + z (x - c)

    References
    ----------
    O. E. Rössler, "An equation for continuous chaos", Phys. Lett. A 57, 397–398 (1976).
    J. C. Sprott, *Chaos and Time-Series Analysis*, Oxford University Press (2003),
    appendix table of Lyapunov exponents.
    """

    name = "rossler"
    description = "Rossler spiral attractor (a=0.2, b=0.2, c=5.7)"
    default_params = {"a": 0.2, "b": 0.2, "c": 5.7}
    terms = ("x_rotation", "x_feedback", "y_rotation", "y_growth", "z_constant",
             "z_nonlinear", "z_damping")
    chaotic = True
    sample_dt = 0.05
    transient = 200.0
    published = (
        PublishedValue("lyapunov_spectrum", (0.0714, 0.0, -5.3943),
                       "Sprott, Chaos and Time-Series Analysis (2003), from memory"),
        PublishedValue("kaplan_yorke_dimension", 2.0132,
                       "Sprott, Chaos and Time-Series Analysis (2003), from memory"),
    )
    # solvers.lyapunov_spectrum, RK4 dt 0.01, transient 200, t_end 5000 from
    # the default start: (0.0723, 0.0003, -5.398), Kaplan-Yorke 2.0134.
    measured_lyapunov_exponent = 0.0723

    @property
    def state_names(self):
        return ("x", "y", "z")

    def validate_params(self):
        if self.params["c"] <= 0:
            raise ValueError(f"parameter c of rossler must be positive, got {self.params['c']:g}")

    def default_y0(self):
        return np.array([1.0, 1.0, 0.0])

    def vector_field(self, t, y, p, without=()):
        xp = field_namespace(y, p)
        keep = TermSwitch(without)
        x, yy, z = y[0], y[1], y[2]
        dx = -keep("x_rotation") * yy - keep("x_feedback") * z
        dy = keep("y_rotation") * x + keep("y_growth") * p["a"] * yy
        dz = keep("z_constant") * p["b"] + keep("z_nonlinear") * x * z - keep("z_damping") * p["c"] * z
        return stack(xp, [dx, dy, dz])
