"""One result record for every integrator."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["Solution", "finite_status"]


@dataclass(frozen=True)
class Solution:
    """Result of one integration (or one batch of integrations).

    Attributes
    ----------
    t : ndarray, shape (n,)
        Output times.
    y : ndarray, shape (n, d) or (batch, n, d)
        States at the output times (time along axis -2).
    method : str
        Name of the integrator.
    nfev : int
        Evaluations of the vector field (per trajectory for batched runs).
    n_steps : int
        Accepted steps (per trajectory; the maximum over a batch).
    seconds : float
        Wall-clock seconds of the integration (compilation excluded where the
        integrator can separate it; see ``compile_seconds``).
    status : str
        ``"success"`` or ``"failed"``. A failure is a status, not an exception.
    message : str
        Human-readable detail, empty on success.
    compile_seconds : float
        Seconds spent compiling (JAX integrators), 0 otherwise.
    extra : dict
        Integrator-specific figures (rejected steps, reference horizon, ...).
    """

    t: np.ndarray
    y: np.ndarray
    method: str
    nfev: int = 0
    n_steps: int = 0
    seconds: float = 0.0
    status: str = "success"
    message: str = ""
    compile_seconds: float = 0.0
    extra: dict = field(default_factory=dict)

    @property
    def success(self) -> bool:
        return self.status == "success"


def finite_status(ys, t, batched: bool) -> tuple[str, str]:
    """``("success", "")``, or ``("failed", message)`` naming the first time with a non-finite state.

    ``ys`` has shape (n, d), or (B, n, d) when ``batched``; ``t`` the n output times.
    """
    finite = np.isfinite(np.asarray(ys)).all(axis=-1)
    if finite.all():
        return "success", ""
    first = int(np.argmin(finite.all(axis=0) if batched else finite))
    message = f"non-finite state at t={t[first]:g}"
    if batched:
        message += f" in {int((~finite.all(axis=-1)).sum())} of {finite.shape[0]} trajectories"
    return "failed", message
