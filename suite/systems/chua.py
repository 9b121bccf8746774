"""Chua's circuit (dimensionless)."""

from __future__ import annotations

import numpy as np

from .base import PublishedValue, System, TermSwitch, field_namespace, stack

__all__ = ["Chua"]


class Chua(System):
    r"""Chua's circuit with a piecewise-linear diode, dimensionless form.

    .. math::
        \dot x = \alpha\,(y - x - h(x)),\quad
        \dot y = x - y + z,\quad
        \dot z = -\beta y,

    .. math::
        h(x) = m_1 x + \tfrac12 (m_0 - m_1)\,(|x + 1| - |x - 1|).

    The default parameters (alpha=9, beta=100/7, m0=-8/7, m1=-5/7) give the
    double-scroll attractor. The diode is written with ``abs`` so the field
    is traceable by JAX (its Jacobian is piecewise constant).

    References
    ----------
    T. Matsumoto, L. O. Chua, M. Komuro, "The double scroll",
    IEEE Trans. Circuits Syst. 32, 797–818 (1985).
    J. C. Sprott, *Chaos and Time-Series Analysis*, Oxford University Press (2003).
    """

    name = "chua"
    description = "Chua's circuit double scroll (alpha=9, beta=100/7, m0=-8/7, m1=-5/7)"
    default_params = {"alpha": 9.0, "beta": 100.0 / 7.0, "m0": -8.0 / 7.0, "m1": -5.0 / 7.0}
    terms = ("x_coupling", "x_damping", "y_coupling", "y_damping", "z_coupling", "diode")
    chaotic = True
    sample_dt = 0.05
    transient = 100.0
    published = (
        PublishedValue("lyapunov_spectrum", (0.3271, 0.0, -2.5197),
                       "Sprott, Chaos and Time-Series Analysis (2003), from memory"),
    )
    # solvers.lyapunov_spectrum, RK4 dt 0.01, transient 100, t_end 3000 from
    # the default start: (0.322, 0.003, -2.509), Kaplan-Yorke 2.1296.
    measured_lyapunov_exponent = 0.322

    @property
    def state_names(self):
        return ("x", "y", "z")

    def validate_params(self):
        for k in ("alpha", "beta"):
            if self.params[k] <= 0:
                raise ValueError(f"parameter {k} of chua must be positive, got {self.params[k]:g}")

    def default_y0(self):
        return np.array([0.7, 0.0, 0.0])

    def vector_field(self, t, y, p, without=()):
        xp = field_namespace(y, p)
        keep = TermSwitch(without)
        x, yy, z = y[0], y[1], y[2]
        h = p["m1"] * x + 0.5 * (p["m0"] - p["m1"]) * (xp.abs(x + 1.0) - xp.abs(x - 1.0))
        dx = p["alpha"] * (keep("x_coupling") * yy - keep("x_damping") * x - keep("diode") * h)
        dy = keep("y_coupling") * (x + z) - keep("y_damping") * yy
        dz = -keep("z_coupling") * p["beta"] * yy
        return stack(xp, [dx, dy, dz])
