"""Tables shared by the system tests."""

from __future__ import annotations

import numpy as np

from suite.systems import available_systems, get_system

BUILT_IN = ("arenstorf", "chua", "double_pendulum", "duffing", "henon_heiles", "kepler",
            "kuramoto_sivashinsky", "lorenz63", "lorenz96", "pendulum", "rossler", "three_body")

# One invalid parameter set per system (each must raise a one-sentence ValueError).
INVALID_PARAMS = {
    "arenstorf": {"mu": 1.5},
    "chua": {"alpha": -1.0},
    "double_pendulum": {"m2": 0.0},
    "duffing": {"omega": 0.0},
    "henon_heiles": {"E": 0.2},
    "kepler": {"GM": -1.0},
    "kuramoto_sivashinsky": {"N": 63.0},
    "lorenz63": {"sigma": 0.0},
    "lorenz96": {"N": 3.0},
    "pendulum": {"L": 0.0},
    "rossler": {"c": -1.0},
    "three_body": {"m3": -2.0},
}


def generic_state(system, seed=0):
    """The default start moved off any special point (rest, symmetry axis), reproducibly."""
    rng = np.random.default_rng(seed)
    y0 = np.asarray(system.default_y0(), dtype=float)
    return y0 + 0.05 * rng.standard_normal(y0.shape) * (1.0 + np.abs(y0))


def all_systems():
    names = available_systems()
    return [n for n in names if n in BUILT_IN]


__all__ = ["BUILT_IN", "INVALID_PARAMS", "all_systems", "generic_state", "get_system"]
