"""The single place where JAX is configured for this project.

Float64 is enabled here, once, before any JAX array is created: chaotic
trajectories lose accuracy within a fraction of a Lyapunov time in float32
(see ``../shared/CPU-NOTES.md``). Every package of the project imports
``solvers`` first (``surrogates`` and ``suite`` build on it), so this runs
before any other JAX work of ours.
"""

from __future__ import annotations

import jax

jax.config.update("jax_enable_x64", True)

__all__: list[str] = []
