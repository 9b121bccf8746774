"""suite.cache: on-disk array cache (hit/miss, corruption, disabled mode, no unpickling)."""

from __future__ import annotations

import numpy as np
import pytest

from solvers import Solution
from suite import cache


@pytest.fixture
def cdir(tmp_path, monkeypatch):
    monkeypatch.setenv("LYAPBENCH_CACHE", str(tmp_path / "c"))
    return tmp_path / "c"


def _counter(value):
    calls = []

    def compute():
        calls.append(1)
        return {"a": np.asarray(value, dtype=float)}

    return compute, calls


def test_miss_then_hit_returns_the_same_arrays(cdir):
    compute, calls = _counter([1.0, 2.5, -3.0])
    desc = {"system": "x", "y0": np.array([1.0, 2.0]), "rtol": 1e-12}
    a = cache.cached_arrays(desc, compute)
    b = cache.cached_arrays(desc, compute)
    assert len(calls) == 1
    np.testing.assert_array_equal(a["a"], b["a"])
    assert len(list(cdir.rglob("*.npz"))) == 1 and not list(cdir.rglob(".tmp-*"))


def test_any_change_of_the_description_is_a_miss(cdir):
    compute, calls = _counter([0.0])
    base = {"system": "x", "y0": np.array([1.0, 2.0]), "rtol": 1e-12}
    cache.cached_arrays(base, compute)
    cache.cached_arrays(dict(base, y0=np.array([1.0, 2.0 + 1e-15])), compute)  # one ulp-ish change of y0
    cache.cached_arrays(dict(base, rtol=1e-10), compute)
    cache.cached_arrays(dict(base, y0=np.array([1.0, 2.0], dtype=np.float32)), compute)  # dtype is part of the key
    assert len(calls) == 4
    assert cache.cache_key(base) == cache.cache_key(dict(reversed(list(base.items()))))  # order does not matter


def test_corrupt_entry_is_removed_and_recomputed(cdir):
    compute, calls = _counter([4.0, 5.0])
    desc = {"what": "corrupt"}
    cache.cached_arrays(desc, compute)
    (path,) = cdir.rglob("*.npz")
    path.write_bytes(path.read_bytes()[:40])  # truncated file
    out = cache.cached_arrays(desc, compute)
    assert len(calls) == 2
    np.testing.assert_array_equal(out["a"], [4.0, 5.0])
    path.write_bytes(b"not a zip file at all")
    assert cache.load_entry(cache.cache_key(desc)) is None and not path.exists()


def test_object_arrays_are_never_unpickled(cdir):
    desc = {"what": "pickle"}
    key = cache.cache_key(desc)
    path = cdir / key[:2] / f"{key}.npz"
    path.parent.mkdir(parents=True)
    np.savez(path, a=np.array([{"payload": 1}], dtype=object))  # numpy pickles object arrays
    compute, calls = _counter([7.0])
    out = cache.cached_arrays(desc, compute)
    assert len(calls) == 1 and out["a"].dtype == np.float64
    with pytest.raises(TypeError, match="object array"):
        cache.store_entry("ab" * 32, {"a": np.array([None], dtype=object)})


@pytest.mark.parametrize("value", ["off", "OFF", "0", "none"])
def test_disabled_mode_computes_every_time_and_writes_nothing(tmp_path, monkeypatch, value):
    monkeypatch.setenv("LYAPBENCH_CACHE", value)
    monkeypatch.setenv("HOME", str(tmp_path))  # the default folder would be under here
    compute, calls = _counter([1.0])
    cache.cached_arrays({"what": "off"}, compute)
    cache.cached_arrays({"what": "off"}, compute)
    assert len(calls) == 2 and not cache.enabled()
    assert not list(tmp_path.rglob("*.npz"))


def test_default_folder_is_under_home(tmp_path, monkeypatch):
    monkeypatch.delenv("LYAPBENCH_CACHE", raising=False)
    monkeypatch.setenv("HOME", str(tmp_path))
    assert cache.enabled() and cache.cache_dir() == tmp_path / ".cache" / "lyapbench"


def test_solution_round_trip_and_failed_runs_are_not_stored(cdir):
    sol = Solution(t=np.linspace(0, 1, 5), y=np.arange(10.0).reshape(5, 2), method="m", nfev=7, n_steps=3,
                   seconds=0.5, extra={"reference_horizon": 0.75, "separation": np.ones(5),
                                       "methods": ("DOP853", "DOP853"), "rtols": (1e-12, 1e-10)})
    calls = []

    def compute():
        calls.append(1)
        return sol

    cache.cached_solution({"what": "sol"}, compute)
    hit = cache.cached_solution({"what": "sol"}, compute)
    assert len(calls) == 1 and hit.extra["from_cache"] is True
    np.testing.assert_array_equal(hit.y, sol.y)
    assert hit.extra["methods"] == ("DOP853", "DOP853") and hit.extra["rtols"] == (1e-12, 1e-10)
    assert hit.extra["reference_horizon"] == 0.75 and (hit.nfev, hit.n_steps, hit.method) == (7, 3, "m")

    bad = Solution(t=np.zeros(2), y=np.zeros((2, 1)), method="m", status="failed", message="boom")
    cache.cached_solution({"what": "bad"}, lambda: (calls.append(1), bad)[1])
    cache.cached_solution({"what": "bad"}, lambda: (calls.append(1), bad)[1])
    assert len(calls) == 3


def test_attractor_scale_is_read_back_from_disk_in_a_fresh_process_state(cdir, monkeypatch):
    from suite.systems import get_system
    from suite.systems import reference as R

    s = get_system("pendulum")
    R._SCALE_CACHE.clear()
    first = R.attractor_scale(s)
    R._SCALE_CACHE.clear()  # what a new process sees
    monkeypatch.setattr(R, "_compute_scale", lambda *a: pytest.fail("recomputed despite a disk entry"))
    np.testing.assert_array_equal(R.attractor_scale(s), first)
    R._SCALE_CACHE.clear()
