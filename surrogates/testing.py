"""The one table of tiny-budget constructor arguments, for tests and ``check-learner``.

These are *not* benchmark settings: they make a learner train in a fraction
of a second on the conformance kit's small problems, so that the contract
can be checked quickly. Benchmark budgets live with the grids.

Each helper that adds a learner adds its entry here, keyed by the learner's
registered name; a learner without an entry is checked with its defaults.
Values must be plain Python (numbers, strings, tuples) so they can be
printed and copied.
"""

from __future__ import annotations

__all__ = ["KIT_SLOW_LEARNERS", "TINY_PARAMS", "tiny_params"]

TINY_PARAMS: dict[str, dict] = {
    # baselines (numpy/scipy; already cheap at their defaults)
    "persistence": {},
    "spline": {},
    "dmd": {"delays": 4, "rank": None},
    "analog": {"delays": 3, "n_neighbors": 3},
    # the plugin example (examples/lyapbench_plugin_example)
    "local_linear": {"delays": 2, "n_neighbors": 20},
    # classical learners (numpy/scipy)
    "sindy": {"max_iter": 5},
    "esn": {"n_nodes": 60, "washout": 20},
    "ngrc": {},
    # time-to-state networks (JAX); no L-BFGS phase: its compile alone takes seconds
    "pinn": {"width": 8, "depth": 2, "n_collocation": 64, "causal_chunks": 8, "adam_steps": 60,
             "lbfgs_steps": 0, "chunk_size": 30, "holdout_fraction": 0.0},
    "mlp": {"width": 8, "depth": 2, "adam_steps": 60, "lbfgs_steps": 0, "chunk_size": 30,
            "holdout_fraction": 0.0},
    # learned vector fields / Hamiltonians (JAX); compiling the training step dominates
    "neural_ode": {"width": 8, "depth": 1, "window": 4, "substeps": 1, "batch_size": 8, "n_iterations": 40,
                   "chunk_size": 20},
    "hnn": {"width": 8, "depth": 1, "batch_size": 16, "n_iterations": 40, "chunk_size": 20},
}


#: Learners whose full conformance-kit run compiles JAX code for tens of seconds even with
#: their tiny arguments (measured: 2-4 min each on a loaded 2-core machine). The test suite
#: runs their fitting checks only with ``-m slow``; the checks that need no fit run always.
KIT_SLOW_LEARNERS: frozenset[str] = frozenset({"pinn", "mlp", "neural_ode", "hnn"})


def tiny_params(name: str) -> dict:
    """A copy of the tiny-budget arguments for ``name`` (empty when it has none)."""
    return dict(TINY_PARAMS.get(name, {}))
