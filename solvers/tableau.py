"""Butcher tableaux of explicit Runge–Kutta methods."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["ButcherTableau", "DOPRI5", "HEUN2", "RK3", "RK4"]


@dataclass(frozen=True, eq=False)
class ButcherTableau:
    """Coefficients of an explicit Runge–Kutta method plus its order.

    The invariants are checked once, when the tableau is defined: ``A`` is
    square and strictly lower triangular (explicit), each row of ``A`` sums to
    the matching node ``c_i``, and the weights ``b`` (and ``b_error`` if given)
    sum to one. A tableau that breaks one of them raises ``ValueError``.

    Parameters
    ----------
    name : str
        Short name (``"rk4"``).
    A : array_like, shape (s, s)
        Stage coefficients.
    b : array_like, shape (s,)
        Weights of the propagated solution.
    c : array_like, shape (s,)
        Nodes.
    order : int
        Order of the propagated solution.
    b_error : array_like, shape (s,), optional
        Weights of the embedded solution (error estimate ``b - b_error``).
    error_order : int, optional
        Order of the embedded solution.
    fsal : bool
        First stage of the next step equals the last stage of this one.

    Notes
    -----
    Instances compare and hash by identity, so they can key compilation caches.

    References
    ----------
    J. C. Butcher, *Numerical Methods for Ordinary Differential Equations*,
    Wiley (2008), chapter 3.
    """

    name: str
    A: np.ndarray
    b: np.ndarray
    c: np.ndarray
    order: int
    b_error: np.ndarray | None = None
    error_order: int | None = None
    fsal: bool = False

    def __post_init__(self):
        A = np.asarray(self.A, dtype=float)
        b = np.asarray(self.b, dtype=float)
        c = np.asarray(self.c, dtype=float)
        s = b.shape[0] if b.ndim == 1 else -1
        if A.ndim != 2 or A.shape != (s, s) or c.shape != (s,):
            raise ValueError(f"tableau {self.name}: A must be (s, s) and b, c (s,), got A {A.shape}, "
                             f"b {b.shape}, c {c.shape}")
        if np.any(np.triu(A) != 0.0):
            raise ValueError(f"tableau {self.name}: A is not strictly lower triangular (not explicit)")
        rows = A.sum(axis=1)
        if not np.allclose(rows, c, rtol=0.0, atol=1e-14):
            i = int(np.argmax(np.abs(rows - c)))
            raise ValueError(f"tableau {self.name}: row {i} of A sums to {rows[i]!r}, node c[{i}] is {c[i]!r}")
        if abs(b.sum() - 1.0) > 1e-14:
            raise ValueError(f"tableau {self.name}: weights b sum to {b.sum()!r}, not 1")
        be = None
        if self.b_error is not None:
            be = np.asarray(self.b_error, dtype=float)
            if be.shape != (s,):
                raise ValueError(f"tableau {self.name}: b_error must have shape ({s},), got {be.shape}")
            if abs(be.sum() - 1.0) > 1e-14:
                raise ValueError(f"tableau {self.name}: embedded weights b_error sum to {be.sum()!r}, not 1")
        if int(self.order) < 1:
            raise ValueError(f"tableau {self.name}: order must be >= 1, got {self.order!r}")
        for name, arr in (("A", A), ("b", b), ("c", c), ("b_error", be)):
            if arr is not None:
                arr.setflags(write=False)
            object.__setattr__(self, name, arr)

    @property
    def stages(self) -> int:
        return int(self.b.shape[0])

    @property
    def is_explicit(self) -> bool:
        return True

    def __repr__(self) -> str:
        emb = f", embedded order {self.error_order}" if self.b_error is not None else ""
        return f"ButcherTableau({self.name!r}, {self.stages} stages, order {self.order}{emb})"


HEUN2 = ButcherTableau(
    "heun2", A=[[0.0, 0.0], [1.0, 0.0]], b=[0.5, 0.5], c=[0.0, 1.0], order=2,
    b_error=[1.0, 0.0], error_order=1,
)
"""Heun's method (explicit trapezoidal rule), order 2, with Euler embedded."""

RK3 = ButcherTableau(
    "rk3", A=[[0.0, 0.0, 0.0], [0.5, 0.0, 0.0], [-1.0, 2.0, 0.0]],
    b=[1.0 / 6.0, 2.0 / 3.0, 1.0 / 6.0], c=[0.0, 0.5, 1.0], order=3,
)
"""Kutta's third-order method (Hairer, Nørsett & Wanner, Solving ODEs I, Table II.1.1)."""

RK4 = ButcherTableau(
    "rk4",
    A=[[0.0, 0.0, 0.0, 0.0], [0.5, 0.0, 0.0, 0.0], [0.0, 0.5, 0.0, 0.0], [0.0, 0.0, 1.0, 0.0]],
    b=[1.0 / 6.0, 1.0 / 3.0, 1.0 / 3.0, 1.0 / 6.0], c=[0.0, 0.5, 0.5, 1.0], order=4,
)
"""The classical fourth-order Runge–Kutta method (Kutta 1901)."""

DOPRI5 = ButcherTableau(
    "dopri5",
    A=[
        [0, 0, 0, 0, 0, 0, 0],
        [1 / 5, 0, 0, 0, 0, 0, 0],
        [3 / 40, 9 / 40, 0, 0, 0, 0, 0],
        [44 / 45, -56 / 15, 32 / 9, 0, 0, 0, 0],
        [19372 / 6561, -25360 / 2187, 64448 / 6561, -212 / 729, 0, 0, 0],
        [9017 / 3168, -355 / 33, 46732 / 5247, 49 / 176, -5103 / 18656, 0, 0],
        [35 / 384, 0, 500 / 1113, 125 / 192, -2187 / 6784, 11 / 84, 0],
    ],
    b=[35 / 384, 0, 500 / 1113, 125 / 192, -2187 / 6784, 11 / 84, 0],
    c=[0, 1 / 5, 3 / 10, 4 / 5, 8 / 9, 1, 1],
    order=5,
    b_error=[5179 / 57600, 0, 7571 / 16695, 393 / 640, -92097 / 339200, 187 / 2100, 1 / 40],
    error_order=4,
    fsal=True,
)
"""Dormand–Prince 5(4), FSAL (J. R. Dormand & P. J. Prince, J. Comput. Appl. Math. 6, 19–26, 1980)."""
