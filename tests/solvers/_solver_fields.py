"""Vector fields written locally for the solver tests (solvers knows no system by name)."""

from __future__ import annotations

import numpy as np

from solvers import array_namespace

# Lorenz (1963) with the classical parameters (J. Atmos. Sci. 20, 130).
LORENZ_PARAMS = {"sigma": 10.0, "rho": 28.0, "beta": 8.0 / 3.0}
# Lyapunov spectrum at these parameters: Sprott, Chaos and Time-Series Analysis (2003).
LORENZ_SPECTRUM = (0.9056, 0.0, -14.5723)


def lorenz63(t, y, p):
    xp = array_namespace(y)
    return xp.stack([
        p["sigma"] * (y[1] - y[0]),
        y[0] * (p["rho"] - y[2]) - y[1],
        y[0] * y[1] - p["beta"] * y[2],
    ])


def oscillator(t, y, p):
    """Harmonic oscillator x'' = -w^2 x; closed form x = cos(w t) for y0 = (1, 0)."""
    xp = array_namespace(y)
    return xp.stack([y[1], -p["w"] ** 2 * y[0]])


def decay(t, y, p):
    """Linear decay y' = -k y; closed form y0 exp(-k t)."""
    return -p["k"] * y


def logistic(t, y, p):
    """Logistic equation y' = r y (1 - y / K); closed form K / (1 + (K/y0 - 1) exp(-r t))."""
    return p["r"] * y * (1.0 - y / p["K"])


def logistic_exact(t, y0, r, K):
    return K / (1.0 + (K / y0 - 1.0) * np.exp(-r * t))


def tol_rel_error(y, y_exact, rtol, atol):
    """max |y - y*| / (atol + rtol |y*|): at most ~1 (times a small factor) for an honest solver."""
    y, y_exact = np.asarray(y), np.asarray(y_exact)
    return float(np.max(np.abs(y - y_exact) / (atol + rtol * np.abs(y_exact))))


def observed_order(hs, errors):
    """Slope of log(error) against log(step): the measured convergence order."""
    return float(np.polyfit(np.log(hs), np.log(errors), 1)[0])
