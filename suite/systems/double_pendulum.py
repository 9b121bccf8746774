"""Planar double pendulum."""

from __future__ import annotations

import math

import numpy as np

from solvers import array_namespace

from .base import System, TermSwitch, field_namespace, stack

__all__ = ["DoublePendulum"]


class DoublePendulum(System):
    r"""Two point masses on massless rigid rods in a vertical plane.

    With :math:`\Delta = \theta_1 - \theta_2` the equations of motion are
    :math:`M(\theta)\,\dot\omega = b(\theta, \omega)` with the mass matrix

    .. math::
        M = \begin{pmatrix} (m_1 + m_2) l_1^2 & m_2 l_1 l_2 \cos\Delta \\
                            m_2 l_1 l_2 \cos\Delta & m_2 l_2^2 \end{pmatrix}

    and :math:`b_1 = -m_2 l_1 l_2 \omega_2^2 \sin\Delta - (m_1 + m_2) g l_1 \sin\theta_1`,
    :math:`b_2 = m_2 l_1 l_2 \omega_1^2 \sin\Delta - m_2 g l_2 \sin\theta_2`.
    Removable terms: ``gravity``, ``inertial_coupling`` (the off-diagonal
    of ``M``) and ``centrifugal`` (the squared-velocity coupling).

    State ``(theta1, theta2, omega1, omega2)`` with angles from the downward
    vertical. Canonical momenta are ``p = M(theta) omega``;
    :meth:`to_canonical` / :meth:`from_canonical` map between the two, and
    :meth:`hamiltonian` is ``p^T M^{-1} p / 2 + V`` (not separable).

    Default: unit masses and lengths, ``g = 9.81``, both angles 45 degrees,
    at rest.

    References
    ----------
    H. Goldstein, C. Poole, J. Safko, *Classical Mechanics*, 3rd ed.,
    Addison-Wesley (2002), chapter 1 (Lagrange's equations).
    T. Stachowiak, T. Okada, "A numerical analysis of chaos in the double
    pendulum", Chaos Solitons Fractals 29, 417–422 (2006).
    """

    name = "double_pendulum"
    description = "Double pendulum (unit masses and lengths, g=9.81, both angles 45 degrees at rest)"
    default_params = {"g": 9.81, "m1": 1.0, "m2": 1.0, "l1": 1.0, "l2": 1.0}
    terms = ("gravity", "inertial_coupling", "centrifugal")
    chaotic = False
    sample_dt = 0.01
    transient = 0.0
    hamiltonian_form = "general"
    # Not chaotic at the default start: solvers.lyapunov_spectrum (RK4 dt 0.01,
    # t_end 2000) gave a largest finite-time exponent of 0.0032 that still
    # decays like 1/t (0.010 at t=500, 0.0043 at t=1500): a regular orbit.
    measured_lyapunov_exponent = None

    @property
    def state_names(self):
        return ("theta1", "theta2", "omega1", "omega2")

    @property
    def characteristic_time(self) -> float:
        """Period of the slower small-oscillation normal mode (the default regime is not chaotic).

        The eigenvalues of ``M(0)^{-1} K`` with ``K = diag((m1+m2) g l1, m2 g l2)``
        are the squared normal-mode frequencies.
        """
        p = self.params
        m = np.array([[(p["m1"] + p["m2"]) * p["l1"] ** 2, p["m2"] * p["l1"] * p["l2"]],
                      [p["m2"] * p["l1"] * p["l2"], p["m2"] * p["l2"] ** 2]])
        k = np.diag([(p["m1"] + p["m2"]) * p["g"] * p["l1"], p["m2"] * p["g"] * p["l2"]])
        w2 = np.linalg.eigvals(np.linalg.solve(m, k)).real
        return float(2.0 * math.pi / math.sqrt(w2.min()))

    def validate_params(self):
        for k in ("g", "m1", "m2", "l1", "l2"):
            if self.params[k] <= 0:
                raise ValueError(f"parameter {k} of double_pendulum must be positive, got {self.params[k]:g}")

    def default_y0(self):
        return np.array([math.pi / 4.0, math.pi / 4.0, 0.0, 0.0])

    # ----------------------------------------------------------- mechanics
    @staticmethod
    def _mass_matrix(th1, th2, p, coupling=1.0):
        xp = array_namespace(th1, th2, *p.values())
        c = coupling * p["m2"] * p["l1"] * p["l2"] * xp.cos(th1 - th2)
        return (p["m1"] + p["m2"]) * p["l1"] ** 2, c, p["m2"] * p["l2"] ** 2

    def vector_field(self, t, y, p, without=()):
        xp = field_namespace(y, p)
        keep = TermSwitch(without)
        th1, th2, w1, w2 = y[0], y[1], y[2], y[3]
        s = xp.sin(th1 - th2)
        m11, m12, m22 = self._mass_matrix(th1, th2, p, keep("inertial_coupling"))
        k = p["m2"] * p["l1"] * p["l2"]
        b1 = -keep("centrifugal") * k * w2 * w2 * s - keep("gravity") * (p["m1"] + p["m2"]) * p["g"] * p["l1"] * xp.sin(th1)
        b2 = keep("centrifugal") * k * w1 * w1 * s - keep("gravity") * p["m2"] * p["g"] * p["l2"] * xp.sin(th2)
        det = m11 * m22 - m12 * m12
        dw1 = (m22 * b1 - m12 * b2) / det
        dw2 = (m11 * b2 - m12 * b1) / det
        return stack(xp, [w1, w2, dw1, dw2])

    def potential_energy(self, y, p):
        xp = field_namespace(y, p)
        return (-(p["m1"] + p["m2"]) * p["g"] * p["l1"] * xp.cos(y[0])
                - p["m2"] * p["g"] * p["l2"] * xp.cos(y[1]))

    def energy(self, y, p):
        """Total mechanical energy of a state ``(theta1, theta2, omega1, omega2)``."""
        m11, m12, m22 = self._mass_matrix(y[0], y[1], p)
        w1, w2 = y[2], y[3]
        return 0.5 * (m11 * w1 * w1 + 2.0 * m12 * w1 * w2 + m22 * w2 * w2) + self.potential_energy(y, p)

    # ------------------------------------------------- Hamiltonian structure
    def to_canonical(self, y, p):
        """``(theta1, theta2, omega1, omega2) -> (theta1, theta2, p1, p2)`` with ``p = M omega``."""
        xp = field_namespace(y, p)
        m11, m12, m22 = self._mass_matrix(y[0], y[1], p)
        return stack(xp, [y[0], y[1], m11 * y[2] + m12 * y[3], m12 * y[2] + m22 * y[3]])

    def from_canonical(self, z, p):
        """``(theta1, theta2, p1, p2) -> (theta1, theta2, omega1, omega2)`` with ``omega = M^{-1} p``."""
        xp = array_namespace(z, *p.values())
        m11, m12, m22 = self._mass_matrix(z[0], z[1], p)
        det = m11 * m22 - m12 * m12
        return stack(xp, [z[0], z[1], (m22 * z[2] - m12 * z[3]) / det, (m11 * z[3] - m12 * z[2]) / det])

    def hamiltonian(self, z, p):
        m11, m12, m22 = self._mass_matrix(z[0], z[1], p)
        det = m11 * m22 - m12 * m12
        p1, p2 = z[2], z[3]
        kinetic = 0.5 * (m22 * p1 * p1 - 2.0 * m12 * p1 * p2 + m11 * p2 * p2) / det
        return kinetic + self.potential_energy(z, p)

    def conserved_quantities(self):
        return {"energy": self.energy}
