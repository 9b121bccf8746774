"""Let one function body run under numpy and ``jax.numpy``."""

from __future__ import annotations

import jax
import jax.numpy as jnp
import numpy as np

from .taylor_series import NAMESPACE as TAYLOR_NAMESPACE
from .taylor_series import Series

__all__ = ["array_namespace"]


def array_namespace(*arrays):
    """Return ``jax.numpy`` if any argument is a JAX array or tracer, else ``numpy``.

    If any argument is a Taylor series (:class:`solvers.taylor_series.Series`,
    what :func:`solvers.integrate_taylor` calls a vector field with), the
    series namespace :data:`solvers.taylor_series.NAMESPACE` is returned.

    Equations are written once against the returned namespace, so scipy's
    integrators call them with plain numpy (no JAX dispatch cost per step)
    while ``jit``, ``grad`` and ``vmap`` trace them with ``jax.numpy``.

    Examples
    --------
    >>> def f(t, y, p):
    ...     xp = array_namespace(y)
    ...     return xp.stack([y[1], -y[0]])
    """
    for a in arrays:
        if isinstance(a, Series):
            return TAYLOR_NAMESPACE
    for a in arrays:
        if isinstance(a, jax.Array):
            return jnp
    return np
