"""Lorenz-63 against its published Lyapunov spectrum."""

from __future__ import annotations

import numpy as np
import pytest

import solvers
from suite.systems import get_system


def test_lyapunov_spectrum_matches_sprott():
    s = get_system("lorenz63")
    res = solvers.lyapunov_spectrum(s.rhs(), s.default_y0(), s.params, dt=0.01, t_end=400.0, transient=20.0)
    sigma, beta = s.params["sigma"], s.params["beta"]
    # sum of the exponents = time average of the trace of the Jacobian = -(sigma + 1 + beta) (closed form)
    assert res.exponents.sum() == pytest.approx(-(sigma + 1.0 + beta), abs=1e-3)
    # Sprott, Chaos and Time-Series Analysis (2003): (0.9056, 0, -14.5723), Kaplan-Yorke 2.0621;
    # finite-time averages over 400 time units scatter by ~2 % (measured over several runs).
    np.testing.assert_allclose(res.exponents, (0.9056, 0.0, -14.5723), atol=0.04)
    assert res.kaplan_yorke_dimension == pytest.approx(2.062, abs=0.005)
    published = {pv.quantity: pv.value for pv in s.published}
    assert published["lyapunov_spectrum"] == (0.9056, 0.0, -14.5723)
