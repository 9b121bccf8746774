"""Lorenz-96 ring model."""

from __future__ import annotations

import numpy as np

from .base import PublishedValue, System, TermSwitch, field_namespace

__all__ = ["Lorenz96"]


class Lorenz96(System):
    r"""Lorenz (1996) ring of ``N`` coupled variables with constant forcing.

    .. math::
        \dot x_i = (x_{i+1} - x_{i-2})\, x_{i-1} - x_i + F, \qquad i = 0..N-1 \ (\mathrm{mod}\ N)

    ``N`` is stored as a float parameter (cast with ``int``); changing it
    changes the state dimension. The vector field reads the dimension from
    the state itself, so one compiled function serves one ``N``.

    References
    ----------
    E. N. Lorenz, "Predictability: a problem partly solved", Proc. ECMWF Seminar
    on Predictability, vol. 1, 1–18 (1996).
    """

    name = "lorenz96"
    description = "Lorenz-96 ring of N variables with forcing F (N=40, F=8)"
    default_params = {"F": 8.0, "N": 40.0}
    terms = ("advection", "damping", "forcing")
    chaotic = True
    sample_dt = 0.05
    transient = 50.0
    published = (
        PublishedValue("largest_lyapunov_exponent", 1.68,
                       "Lorenz-96 literature value for N=40, F=8, from memory"),
    )
    # solvers.lyapunov_spectrum, RK4 dt 0.01, transient 50, t_end 300, all 40
    # exponents from the default start: 1.703 (sum -39.99997 = -N).
    measured_lyapunov_exponent = 1.70

    @property
    def n(self) -> int:
        return int(self.params["N"])

    @property
    def state_names(self):
        return tuple(f"x{i}" for i in range(self.n))

    def validate_params(self):
        n = self.params["N"]
        if n != int(n) or n < 4:
            raise ValueError(f"parameter N of lorenz96 must be an integer of at least 4, got {n:g}")

    def default_y0(self):
        y0 = np.full(self.n, self.params["F"])
        y0[0] += 0.01
        return y0

    def vector_field(self, t, y, p, without=()):
        xp = field_namespace(y, p)
        keep = TermSwitch(without)
        adv = (xp.roll(y, -1) - xp.roll(y, 2)) * xp.roll(y, 1)
        return keep("advection") * adv - keep("damping") * y + keep("forcing") * p["F"]
