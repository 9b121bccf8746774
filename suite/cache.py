"""A small on-disk cache of numpy arrays for expensive, deterministic results.

Reference trajectories (two tight DOP853 runs) and attractor scales are the
bulk of a cheap cell's cost, and every cell runs in a fresh process, so an
in-process cache does not help across cells. This module keeps such results
on disk:

* an entry is a ``.npz`` file of plain numeric or string arrays, written with
  :func:`numpy.savez` to a temporary file in the same folder and renamed into
  place (atomic on POSIX: a reader sees the whole file or none);
* it is read back with ``numpy.load(..., allow_pickle=False)``: object arrays
  are never unpickled — such a file counts as corrupt;
* its name is the sha256 of a canonical JSON description of the computation
  (the caller names everything the result depends on; the package version is
  always added), so a changed input never hits an old entry;
* an unreadable, truncated or otherwise corrupt entry is deleted and the
  value recomputed.

Location: ``$LYAPBENCH_CACHE`` if set, else ``~/.cache/lyapbench``.
``LYAPBENCH_CACHE=off`` (or ``0``, ``none``, ``false``, empty) disables it:
:func:`cached_arrays` then always computes.

References
----------
POSIX ``rename(2)``: replacing a file by renaming is atomic within one file
system (The Open Group Base Specifications, Issue 7).
"""

from __future__ import annotations

import hashlib
import json
import os
import tempfile
import zipfile
from pathlib import Path
from typing import Callable, Mapping

import numpy as np

__all__ = ["cache_dir", "cache_key", "cached_arrays", "cached_solution", "enabled", "load_entry", "source_digest",
           "store_entry"]

_ENV = "LYAPBENCH_CACHE"
_OFF = {"off", "0", "none", "false", "no", ""}


def enabled() -> bool:
    """False when ``LYAPBENCH_CACHE`` is set to ``off`` (or 0/none/false/no/empty)."""
    v = os.environ.get(_ENV)
    return v is None or v.strip().lower() not in _OFF


def cache_dir() -> Path:
    """The cache folder (not created here)."""
    v = os.environ.get(_ENV)
    if v is not None and v.strip().lower() not in _OFF:
        return Path(v).expanduser()
    return Path.home() / ".cache" / "lyapbench"


def _jsonable(v):
    if isinstance(v, np.ndarray):
        a = np.ascontiguousarray(v)
        return {"__array__": a.dtype.str, "shape": list(a.shape), "sha256": hashlib.sha256(a.tobytes()).hexdigest()}
    if isinstance(v, (np.floating, float)):
        return {"__float__": float(v).hex()}  # exact, and distinguishes 0.1 from 0.1000000000000001
    if isinstance(v, (np.integer, int, bool, np.bool_)) or v is None or isinstance(v, str):
        return v.item() if isinstance(v, np.generic) else v
    if isinstance(v, Mapping):
        return {str(k): _jsonable(x) for k, x in sorted(v.items(), key=lambda kv: str(kv[0]))}
    if isinstance(v, (list, tuple)):
        return [_jsonable(x) for x in v]
    if isinstance(v, bytes):
        return {"__bytes__": hashlib.sha256(v).hexdigest()}
    raise TypeError(f"cache key part of type {type(v).__name__} is not supported")


def cache_key(description: Mapping) -> str:
    """sha256 (hex) of the canonical JSON of ``description`` plus the package version."""
    from suite import __version__

    doc = {"lyapbench": __version__, "description": _jsonable(dict(description))}
    text = json.dumps(doc, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()


def _path(key: str) -> Path:
    return cache_dir() / key[:2] / f"{key}.npz"


def load_entry(key: str) -> dict[str, np.ndarray] | None:
    """The arrays stored under ``key``, or None if absent; a corrupt entry is removed and None returned."""
    path = _path(key)
    if not path.is_file():
        return None
    try:
        with np.load(path, allow_pickle=False) as z:
            return {name: z[name] for name in z.files}
    except (OSError, ValueError, EOFError, KeyError, zipfile.BadZipFile):
        try:
            path.unlink()
        except OSError:
            pass
        return None


def store_entry(key: str, arrays: Mapping[str, np.ndarray]) -> bool:
    """Write ``arrays`` under ``key`` atomically; False (and nothing left behind) if it cannot be written."""
    arrays = {k: np.asarray(v) for k, v in arrays.items()}
    for k, v in arrays.items():
        if v.dtype.hasobject:
            raise TypeError(f"cache entry {k!r} is an object array; only plain arrays can be cached")
    path = _path(key)
    tmp = None
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=".tmp-", suffix=".npz", dir=path.parent)
        with os.fdopen(fd, "wb") as fh:
            np.savez(fh, **arrays)
        os.replace(tmp, path)
        return True
    except OSError:
        if tmp is not None:
            try:
                os.unlink(tmp)
            except OSError:
                pass
        return False


def cached_arrays(description: Mapping, compute: Callable[[], Mapping[str, np.ndarray] | None]
                  ) -> dict[str, np.ndarray]:
    """Arrays for ``description``: from the cache, or ``compute()`` (then stored).

    ``compute`` returns a mapping of names to plain arrays, or None for a
    result that must not be cached (e.g. a failed integration) — then this
    function returns None too and the caller computes by its own path.
    With the cache disabled ``compute()`` is always called and nothing is written.
    """
    if not enabled():
        out = compute()
        return None if out is None else {k: np.asarray(v) for k, v in out.items()}
    key = cache_key(description)
    hit = load_entry(key)
    if hit is not None:
        return hit
    out = compute()
    if out is None:
        return None
    out = {k: np.asarray(v) for k, v in out.items()}
    store_entry(key, out)
    return out


_SOURCE_DIGESTS: dict[str, str] = {}


def source_digest(*objects) -> str:
    """sha256 of the source files defining ``objects`` (modules, classes, functions).

    Put it in a description so that editing the code that computes a result
    invalidates its entries even while the package version stays the same.
    """
    import inspect

    h = hashlib.sha256()
    for obj in objects:
        try:
            path = inspect.getsourcefile(obj if inspect.ismodule(obj) or inspect.isclass(obj)
                                         or inspect.isfunction(obj) else type(obj))
        except TypeError:
            path = None
        if path is None:
            h.update(repr(obj).encode())
            continue
        if path not in _SOURCE_DIGESTS:
            try:
                _SOURCE_DIGESTS[path] = hashlib.sha256(Path(path).read_bytes()).hexdigest()
            except OSError:
                _SOURCE_DIGESTS[path] = "unreadable:" + path
        h.update(_SOURCE_DIGESTS[path].encode())
    return h.hexdigest()


def _solution_arrays(sol) -> dict[str, np.ndarray] | None:
    """A Solution as plain arrays plus one JSON string; None if it has something unstorable."""
    arrays = {"t": np.asarray(sol.t), "y": np.asarray(sol.y)}
    meta = {"method": sol.method, "nfev": int(sol.nfev), "n_steps": int(sol.n_steps),
            "seconds": float(sol.seconds), "status": sol.status, "message": sol.message,
            "compile_seconds": float(sol.compile_seconds), "extra": {}, "extra_arrays": []}
    for k, v in sol.extra.items():
        if isinstance(v, np.ndarray):
            if v.dtype.hasobject:
                return None
            arrays[f"extra.{k}"] = v
            meta["extra_arrays"].append(k)
        elif isinstance(v, (str, bool, int, float, np.floating, np.integer)) or v is None:
            meta["extra"][k] = v.item() if isinstance(v, np.generic) else v
        elif isinstance(v, tuple) and all(isinstance(x, (str, int, float)) for x in v):
            meta["extra"][k] = {"tuple": list(v)}
        else:
            return None
    arrays["meta"] = np.asarray(json.dumps(meta))
    return arrays


def _solution_from(arrays):
    from solvers import Solution

    try:
        meta = json.loads(str(arrays["meta"][()]))
        extra = {k: (tuple(v["tuple"]) if isinstance(v, dict) else v) for k, v in meta["extra"].items()}
        for k in meta["extra_arrays"]:
            extra[k] = arrays[f"extra.{k}"]
        extra["from_cache"] = True
        return Solution(t=arrays["t"], y=arrays["y"], method=meta["method"], nfev=meta["nfev"],
                        n_steps=meta["n_steps"], seconds=meta["seconds"], status=meta["status"],
                        message=meta["message"], compile_seconds=meta["compile_seconds"], extra=extra)
    except (KeyError, ValueError, TypeError, IndexError):
        return None


def cached_solution(description: Mapping, compute: Callable[[], object]):
    """A :class:`solvers.Solution` for ``description``: from the cache, or ``compute()``.

    Only successful solutions are stored. A hit carries ``extra["from_cache"] = True``
    (its ``seconds`` are those of the run that produced it).
    """
    if not enabled():
        return compute()
    key = cache_key(description)
    hit = load_entry(key)
    if hit is not None:
        sol = _solution_from(hit)
        if sol is not None:
            return sol
        try:
            _path(key).unlink()
        except OSError:
            pass
    sol = compute()
    if sol.success:
        arrays = _solution_arrays(sol)
        if arrays is not None:
            store_entry(key, arrays)
    return sol
