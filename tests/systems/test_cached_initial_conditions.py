"""States on the attractor are cached on disk and equal the direct draw."""

from __future__ import annotations

import numpy as np

from suite.systems import get_system
from suite.systems.reference import initial_conditions


def test_cached_draw_equals_direct_draw_and_is_read_back(monkeypatch, tmp_path):
    monkeypatch.setenv("LYAPBENCH_CACHE", str(tmp_path))
    system = get_system("lorenz63")
    direct = system.initial_conditions(3, 7)
    first = initial_conditions(system, 3, 7)
    np.testing.assert_array_equal(first, direct)
    assert any(tmp_path.iterdir())  # an entry was written

    def refuse(*a, **k):  # a second call must not integrate again
        raise AssertionError("recomputed instead of read from the cache")

    monkeypatch.setattr(type(system), "initial_conditions", refuse)
    np.testing.assert_array_equal(initial_conditions(system, 3, 7), direct)
    # another seed is another entry (and would recompute)
    try:
        initial_conditions(system, 3, 8)
    except AssertionError as exc:
        assert "recomputed" in str(exc)
    else:
        raise AssertionError("seed 8 must not be served from seed 7's entry")
