"""Hénon–Heiles galactic potential."""

from __future__ import annotations

import math

import numpy as np

from .base import System, TermSwitch, field_namespace, stack

__all__ = ["HenonHeiles"]


class HenonHeiles(System):
    r"""Hénon & Heiles (1964) star in an axisymmetric galactic potential.

    .. math::
        H = \tfrac12 (p_x^2 + p_y^2) + \tfrac12 (x^2 + y^2)
            + \lambda \left(x^2 y - \tfrac13 y^3\right)

    with ``lam`` = 1 in the original paper (other values are the same
    system rescaled: ``E -> lam^2 E``). Removable terms: ``harmonic`` and
    ``cubic`` (the Hénon–Heiles perturbation; without it the motion is two
    uncoupled oscillators). Canonical coordinates ``q = (x, y)``,
    ``p = (px, py)``; separable. Bounded motion needs ``E <= 1/(6 lam^2)``;
    most orbits are regular at ``E = 1/12`` and most are chaotic at
    ``E = 1/6``. The parameter ``E`` is the energy of the default start
    (it does not enter the equations): on the ``x = 0`` section with
    ``y = -0.1, py = 0`` and ``px > 0`` fixed by the energy; at ``E = 0.16``
    this orbit is chaotic.

    References
    ----------
    M. Hénon, C. Heiles, "The applicability of the third integral of motion:
    some numerical experiments", Astron. J. 69, 73–79 (1964).
    """

    name = "henon_heiles"
    description = "Henon-Heiles potential, chaotic orbit at energy 0.16"
    default_params = {"lam": 1.0, "E": 0.16}
    terms = ("harmonic", "cubic")
    chaotic = True
    sample_dt = 0.1
    transient = 0.0
    hamiltonian_form = "separable"
    # solvers.lyapunov_spectrum, RK4 dt 0.01, t_end 5000 from the default
    # start: (0.125, 0.001, -0.001, -0.125) (symmetric, as for a Hamiltonian flow).
    measured_lyapunov_exponent = 0.125

    @property
    def state_names(self):
        return ("x", "y", "px", "py")

    def validate_params(self):
        lam, e = self.params["lam"], self.params["E"]
        if lam <= 0:
            raise ValueError(f"parameter lam of henon_heiles must be positive, got {lam:g}")
        if not 0.0 < e <= 1.0 / (6.0 * lam * lam) + 1e-12:
            raise ValueError(f"parameter E of henon_heiles must lie in (0, 1/(6 lam^2)] "
                             f"for bounded motion, got {e:g}")

    def start_on_section(self, y: float, py: float = 0.0, energy: float | None = None) -> np.ndarray:
        """State on the ``x = 0`` section with given ``y, py`` and ``px > 0`` from the energy."""
        e = self.params["E"] if energy is None else float(energy)
        v = 0.5 * y * y - self.params["lam"] * y ** 3 / 3.0
        px2 = 2.0 * (e - v) - py * py
        if px2 < 0:
            raise ValueError(f"no orbit of henon_heiles through y={y:g}, py={py:g} at energy {e:g}")
        return np.array([0.0, y, math.sqrt(px2), py])

    def default_y0(self):
        return self.start_on_section(-0.1)

    def vector_field(self, t, y, p, without=()):
        xp = field_namespace(y, p)
        keep = TermSwitch(without)
        x, yy, px, py = y[0], y[1], y[2], y[3]
        c = keep("cubic") * p["lam"]
        dpx = -keep("harmonic") * x - c * 2.0 * x * yy
        dpy = -keep("harmonic") * yy - c * (x * x - yy * yy)
        return stack(xp, [px, py, dpx, dpy])

    def kinetic(self, pm, p):
        return 0.5 * (pm[0] ** 2 + pm[1] ** 2)

    def potential(self, q, p):
        x, y = q[0], q[1]
        return 0.5 * (x * x + y * y) + p["lam"] * (x * x * y - y ** 3 / 3.0)

    def hamiltonian(self, z, p):
        return self.kinetic(z[2:], p) + self.potential(z[:2], p)

    def conserved_quantities(self):
        return {"energy": lambda y, p: self.hamiltonian(y, p)}
