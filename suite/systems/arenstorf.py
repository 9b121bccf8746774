"""Arenstorf orbit of the restricted three-body problem."""

from __future__ import annotations

import numpy as np

from .base import PublishedValue, System, TermSwitch, field_namespace, stack

__all__ = ["Arenstorf"]

ARENSTORF_PERIOD = 17.0652165601579625588917206249  # Hairer, Nørsett & Wanner (1993)


class Arenstorf(System):
    r"""Planar circular restricted three-body problem (Earth–Moon–satellite)
    in the rotating frame, started on Arenstorf's periodic orbit.

    .. math::
        \ddot x = x + 2\dot y - \mu' \frac{x + \mu}{D_1} - \mu \frac{x - \mu'}{D_2},\quad
        \ddot y = y - 2\dot x - \mu' \frac{y}{D_1} - \mu \frac{y}{D_2},

    with :math:`\mu' = 1 - \mu`, :math:`D_1 = ((x+\mu)^2 + y^2)^{3/2}`,
    :math:`D_2 = ((x-\mu')^2 + y^2)^{3/2}`. Removable terms: ``coriolis``,
    ``centrifugal``, ``earth_gravity``, ``moon_gravity``. The Jacobi
    constant :math:`C = x^2 + y^2 + 2\mu'/r_1 + 2\mu/r_2 - \dot x^2 - \dot y^2`
    is conserved.

    Default: ``mu = 0.012277471``, ``y0 = (0.994, 0, 0, -2.00158510637908252240537862224)``,
    periodic with period 17.0652165601579625588917206249.

    References
    ----------
    R. F. Arenstorf, "Periodic solutions of the restricted three body problem
    representing analytic continuations of Keplerian elliptic motions",
    Amer. J. Math. 85, 27–35 (1963).
    E. Hairer, S. P. Nørsett, G. Wanner, *Solving Ordinary Differential
    Equations I*, 2nd ed., Springer (1993), section II.0.
    """

    name = "arenstorf"
    description = "Arenstorf periodic orbit of the restricted three-body problem (mu=0.012277471)"
    default_params = {"mu": 0.012277471}
    terms = ("coriolis", "centrifugal", "earth_gravity", "moon_gravity")
    chaotic = False
    sample_dt = 0.01
    transient = 0.0
    characteristic_time = ARENSTORF_PERIOD
    # Start on the orbit itself (at seeded phases): perturbed by 1e-3 the satellite leaves the orbit
    # within a period and passes within 1e-4 of the Moon, and a trusted reference of that costs minutes.
    start_perturbation = 0.0
    no_climate = ("its orbit is unstable: nearby orbits leave it within about two periods, then escape or "
                  "pass arbitrarily close to the primaries, so there is no long-run distribution to compare")
    published = (
        PublishedValue("period", ARENSTORF_PERIOD,
                       "Hairer, Nørsett & Wanner, Solving ODEs I (1993), section II.0"),
    )

    @property
    def state_names(self):
        return ("x", "y", "vx", "vy")

    def validate_params(self):
        mu = self.params["mu"]
        if not 0.0 < mu < 1.0:
            raise ValueError(f"parameter mu of arenstorf must lie strictly between 0 and 1, got {mu:g}")

    def default_y0(self):
        return np.array([0.994, 0.0, 0.0, -2.00158510637908252240537862224])

    def vector_field(self, t, y, p, without=()):
        xp = field_namespace(y, p)
        keep = TermSwitch(without)
        x, yy, vx, vy = y[0], y[1], y[2], y[3]
        mu = p["mu"]
        mu1 = 1.0 - mu
        d1 = ((x + mu) ** 2 + yy ** 2) ** 1.5
        d2 = ((x - mu1) ** 2 + yy ** 2) ** 1.5
        ax = (keep("centrifugal") * x + keep("coriolis") * 2.0 * vy
              - keep("earth_gravity") * mu1 * (x + mu) / d1 - keep("moon_gravity") * mu * (x - mu1) / d2)
        ay = (keep("centrifugal") * yy - keep("coriolis") * 2.0 * vx
              - keep("earth_gravity") * mu1 * yy / d1 - keep("moon_gravity") * mu * yy / d2)
        return stack(xp, [vx, vy, ax, ay])

    def conserved_quantities(self):
        def jacobi_constant(y, p):
            xp = field_namespace(y, p)
            mu = p["mu"]
            r1 = xp.sqrt((y[0] + mu) ** 2 + y[1] ** 2)
            r2 = xp.sqrt((y[0] - 1.0 + mu) ** 2 + y[1] ** 2)
            return (y[0] ** 2 + y[1] ** 2 + 2.0 * (1.0 - mu) / r1 + 2.0 * mu / r2
                    - y[2] ** 2 - y[3] ** 2)

        return {"jacobi_constant": jacobi_constant}
