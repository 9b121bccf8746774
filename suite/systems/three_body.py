"""Planar Newtonian three-body problem."""

from __future__ import annotations

import numpy as np

from solvers import array_namespace

from .base import System, TermSwitch, UnknownNameError, field_namespace, stack

__all__ = ["ThreeBody"]

# Named starts: parameters and initial state (positions x1,y1,x2,y2,x3,y3, velocities).
_FIGURE_EIGHT_V3 = (-0.93240737, -0.86473146)
NAMED_STARTS = {
    # Chenciner & Montgomery (2000) choreography with Simó's initial data;
    # period 6.32591398 (Simó 2002).
    "figure_eight": (
        {"G": 1.0, "m1": 1.0, "m2": 1.0, "m3": 1.0},
        (0.97000436, -0.24308753, -0.97000436, 0.24308753, 0.0, 0.0,
         -0.5 * _FIGURE_EIGHT_V3[0], -0.5 * _FIGURE_EIGHT_V3[1],
         -0.5 * _FIGURE_EIGHT_V3[0], -0.5 * _FIGURE_EIGHT_V3[1],
         _FIGURE_EIGHT_V3[0], _FIGURE_EIGHT_V3[1]),
    ),
    # Burrau's problem, Szebehely & Peters (1967): masses 3, 4, 5 at rest at
    # the vertices of a 3-4-5 right triangle, each opposite the side of its
    # own length; centre of mass at the origin; energy -769/60.
    "pythagorean": (
        {"G": 1.0, "m1": 3.0, "m2": 4.0, "m3": 5.0},
        (1.0, 3.0, -2.0, -1.0, 1.0, -1.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0),
    ),
}
START_NAMES = tuple(NAMED_STARTS)  # index = value of the ``start`` parameter


class ThreeBody(System):
    r"""Three point masses in the plane under Newtonian gravity.

    .. math::
        \ddot{\mathbf r}_i = -G \sum_{j \ne i} m_j\,
            \frac{\mathbf r_i - \mathbf r_j}{|\mathbf r_i - \mathbf r_j|^3}

    State (12): positions ``x1, y1, x2, y2, x3, y3`` then velocities
    ``vx1 ... vy3``. Removable terms are the three pair interactions
    ``gravity_12``, ``gravity_13``, ``gravity_23``. Canonical coordinates:
    ``q`` the positions, ``p = m v``; ``H = sum |p_i|^2/(2 m_i) - G sum m_i m_j / r_ij``
    (separable).

    The parameter ``start`` selects a named start for :meth:`default_y0`
    (0: ``figure_eight``, 1: ``pythagorean``); :meth:`named` builds the
    system with the masses that belong to a named start, and
    :meth:`named_initial_condition` returns its state.

    References
    ----------
    A. Chenciner, R. Montgomery, "A remarkable periodic solution of the
    three-body problem in the case of equal masses", Ann. Math. 152, 881–901 (2000).
    C. Simó, "Dynamical properties of the figure eight solution of the
    three-body problem", Contemp. Math. 292, 209–228 (2002).
    V. Szebehely, C. F. Peters, "Complete solution of a general problem of
    three bodies", Astron. J. 72, 876–883 (1967).
    """

    name = "three_body"
    description = "Planar three-body problem (G=1, unit masses, figure-eight choreography)"
    default_params = {"G": 1.0, "m1": 1.0, "m2": 1.0, "m3": 1.0, "start": 0.0}
    terms = ("gravity_12", "gravity_13", "gravity_23")
    chaotic = False
    sample_dt = 0.01
    transient = 0.0
    hamiltonian_form = "separable"
    figure_eight_period = 6.32591398  # Simó (2002)

    @property
    def state_names(self):
        return ("x1", "y1", "x2", "y2", "x3", "y3", "vx1", "vy1", "vx2", "vy2", "vx3", "vy3")

    @property
    def start_name(self) -> str:
        return START_NAMES[int(self.params["start"])]

    @property
    def characteristic_time(self) -> float:
        """Figure-eight period (Simó 2002); for other starts the same time scale."""
        return self.figure_eight_period

    def validate_params(self):
        for k in ("G", "m1", "m2", "m3"):
            if self.params[k] <= 0:
                raise ValueError(f"parameter {k} of three_body must be positive, got {self.params[k]:g}")
        s = self.params["start"]
        if s != int(s) or not 0 <= s < len(START_NAMES):
            raise ValueError(f"parameter start of three_body must be one of "
                             f"{', '.join(f'{i} ({n})' for i, n in enumerate(START_NAMES))}, got {s:g}")

    @staticmethod
    def named_initial_condition(name: str) -> tuple[dict[str, float], np.ndarray]:
        """Parameters and initial state of a named start (``figure_eight``, ``pythagorean``)."""
        if name not in NAMED_STARTS:
            raise UnknownNameError("three-body start", name, NAMED_STARTS)
        params, y0 = NAMED_STARTS[name]
        return dict(params), np.array(y0, dtype=float)

    @classmethod
    def named(cls, name: str) -> "ThreeBody":
        """The system with the masses of a named start, whose ``default_y0`` is that start."""
        params, _ = cls.named_initial_condition(name)
        return cls(**params, start=float(START_NAMES.index(name)))

    def default_y0(self):
        return self.named_initial_condition(self.start_name)[1]

    def masses(self, p=None):
        p = self.params if p is None else p
        return p["m1"], p["m2"], p["m3"]

    def vector_field(self, t, y, p, without=()):
        xp = field_namespace(y, p)
        keep = TermSwitch(without)
        m1, m2, m3 = self.masses(p)
        x1, y1, x2, y2, x3, y3 = y[0], y[1], y[2], y[3], y[4], y[5]

        def pull(xa, ya, xb, yb):
            dx, dy = xb - xa, yb - ya
            r3 = (dx * dx + dy * dy) ** 1.5
            return dx / r3, dy / r3

        g = p["G"]
        a12x, a12y = pull(x1, y1, x2, y2)
        a13x, a13y = pull(x1, y1, x3, y3)
        a23x, a23y = pull(x2, y2, x3, y3)
        k12, k13, k23 = g * keep("gravity_12"), g * keep("gravity_13"), g * keep("gravity_23")
        ax1 = k12 * m2 * a12x + k13 * m3 * a13x
        ay1 = k12 * m2 * a12y + k13 * m3 * a13y
        ax2 = -k12 * m1 * a12x + k23 * m3 * a23x
        ay2 = -k12 * m1 * a12y + k23 * m3 * a23y
        ax3 = -k13 * m1 * a13x - k23 * m2 * a23x
        ay3 = -k13 * m1 * a13y - k23 * m2 * a23y
        return stack(xp, [y[6], y[7], y[8], y[9], y[10], y[11], ax1, ay1, ax2, ay2, ax3, ay3])

    # ------------------------------------------------- Hamiltonian structure
    def _mass_vector(self, p, xp):
        m1, m2, m3 = self.masses(p)
        return stack(xp, [xp.asarray(m) for m in (m1, m1, m2, m2, m3, m3)])

    def to_canonical(self, y, p):
        xp = field_namespace(y, p)
        return xp.concatenate([y[:6], y[6:] * self._mass_vector(p, xp)])

    def from_canonical(self, z, p):
        xp = array_namespace(z, *p.values())
        return xp.concatenate([z[:6], z[6:] / self._mass_vector(p, xp)])

    def kinetic(self, pm, p):
        xp = array_namespace(pm, *p.values())
        return 0.5 * xp.sum(pm * pm / self._mass_vector(p, xp))

    def potential(self, q, p):
        xp = array_namespace(q, *p.values())
        m1, m2, m3 = self.masses(p)

        def dist(a, b):
            return xp.sqrt((q[2 * a] - q[2 * b]) ** 2 + (q[2 * a + 1] - q[2 * b + 1]) ** 2)

        return -p["G"] * (m1 * m2 / dist(0, 1) + m1 * m3 / dist(0, 2) + m2 * m3 / dist(1, 2))

    def hamiltonian(self, z, p):
        return self.kinetic(z[6:], p) + self.potential(z[:6], p)

    def conserved_quantities(self):
        def energy(y, p):
            return self.hamiltonian(self.to_canonical(y, p), p)

        def momentum_x(y, p):
            m1, m2, m3 = self.masses(p)
            return m1 * y[6] + m2 * y[8] + m3 * y[10]

        def momentum_y(y, p):
            m1, m2, m3 = self.masses(p)
            return m1 * y[7] + m2 * y[9] + m3 * y[11]

        def angular_momentum(y, p):
            m = self.masses(p)
            return sum(m[i] * (y[2 * i] * y[7 + 2 * i] - y[2 * i + 1] * y[6 + 2 * i]) for i in range(3))

        return {"energy": energy, "momentum_x": momentum_x, "momentum_y": momentum_y,
                "angular_momentum": angular_momentum}
