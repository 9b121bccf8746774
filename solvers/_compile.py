"""Compile-once cache shared by the JAX integrators.

Each integrator builds a pure function ``fn(params, *args)`` for a static
configuration (the vector field, the method, the step counts) and asks this
module for a compiled executable. Executables are kept per (configuration,
argument shapes and dtypes), so a second call with the same shapes neither
traces nor compiles again, and the compile time is reported apart from the
run time.

Parameters are traced (changing their values does not recompile). A vector
field that needs a parameter as a concrete Python number (``int(p["N"])``)
cannot be traced that way; such a field is detected on first compilation and
compiled with its parameter values baked in (then every new value compiles).
"""

from __future__ import annotations

import time
from collections import OrderedDict
from typing import Callable, Hashable

import jax
import numpy as np

__all__ = ["callable_key", "clear_cache", "run_compiled"]

_MAX_ENTRIES = 256
_CACHE: "OrderedDict[Hashable, object]" = OrderedDict()
_STATIC_PARAMS: set = set()
_TRACE_ERRORS = (
    jax.errors.ConcretizationTypeError,
    jax.errors.TracerIntegerConversionError,
    jax.errors.TracerBoolConversionError,
    jax.errors.TracerArrayConversionError,
)


class _Same:
    """Hashable stand-in for an object, equal only to itself (keeps it alive while cached)."""

    __slots__ = ("obj",)

    def __init__(self, obj):
        self.obj = obj

    def __eq__(self, other):
        return isinstance(other, _Same) and other.obj is self.obj

    def __hash__(self):
        return id(self.obj)


def _part(obj):
    try:
        hash(obj)
    except TypeError:
        return _Same(obj)
    return obj if not callable(obj) else callable_key(obj)


def callable_key(f):
    """A cache key under which two callables that must behave alike compare equal.

    ``system.rhs()`` returns a fresh closure on every call; keying compiled
    code on the closure object would recompile each time. Plain functions
    are keyed by their code object, defaults and the objects their closure
    cells hold; bound methods by (function, instance); ``functools.partial``
    by (function, arguments). Anything else is keyed by itself.
    """
    import functools
    import types

    if isinstance(f, types.MethodType):
        return ("method", callable_key(f.__func__), _Same(f.__self__))
    if isinstance(f, functools.partial):
        return ("partial", callable_key(f.func), tuple(_part(a) for a in f.args),
                tuple(sorted((k, _part(v)) for k, v in f.keywords.items())))
    if isinstance(f, types.FunctionType):
        cells = ()
        if f.__closure__:
            try:
                cells = tuple(_part(c.cell_contents) for c in f.__closure__)
            except ValueError:  # an empty cell: fall back to the function object itself
                return _Same(f)
        defaults = tuple(_part(d) for d in (f.__defaults__ or ()))
        return ("function", f.__code__, _Same(f.__globals__), cells, defaults)
    return _part(f) if not callable(f) else _Same(f)


def clear_cache() -> None:
    """Forget every compiled executable (tests use it to count compilations)."""
    _CACHE.clear()
    _STATIC_PARAMS.clear()


def _as_param_arrays(params):
    """Parameter pytree with Python numbers as float64 arrays (ints too: parameters are floats)."""
    params = {} if params is None else params

    def leaf(v):
        if isinstance(v, (bool, int, float, np.floating, np.integer)):
            return np.asarray(v, dtype=np.float64)
        return np.asarray(v)

    return jax.tree_util.tree_map(leaf, params)


def _signature(tree):
    leaves, treedef = jax.tree_util.tree_flatten(tree)
    return treedef, tuple((np.shape(x), np.result_type(x).str) for x in leaves)


def _static_key(params):
    leaves, treedef = jax.tree_util.tree_flatten(params)
    return treedef, tuple(tuple(np.ravel(np.asarray(v)).tolist()) for v in leaves)


def _put(key, value):
    _CACHE[key] = value
    _CACHE.move_to_end(key)
    while len(_CACHE) > _MAX_ENTRIES:
        _CACHE.popitem(last=False)


def run_compiled(key: Hashable, fn: Callable, params, args: tuple):
    """Run ``fn(params, *args)`` compiled; return ``(outputs, compile_seconds, run_seconds)``.

    ``key`` must identify everything ``fn`` closes over (vector field,
    tableau, static counts). Outputs come back as numpy arrays.
    """
    key = tuple(callable_key(k) if callable(k) else k for k in key)
    p = _as_param_arrays(params)
    args = tuple(jax.tree_util.tree_map(np.asarray, a) for a in args)
    sig = _signature((p, args))
    compile_seconds = 0.0
    static_mode = (key, sig[0]) in _STATIC_PARAMS
    if not static_mode:
        ck = (key, "traced", sig)
        compiled = _CACHE.get(ck)
        if compiled is None:
            t0 = time.perf_counter()
            try:
                compiled = jax.jit(fn).lower(p, *args).compile()
            except _TRACE_ERRORS:
                _STATIC_PARAMS.add((key, sig[0]))
                static_mode = True
            else:
                compile_seconds = time.perf_counter() - t0
                _put(ck, compiled)
        else:
            _CACHE.move_to_end(ck)
    if static_mode:
        ck = (key, "static", sig, _static_key(params if params is not None else {}))
        compiled = _CACHE.get(ck)
        if compiled is None:
            fixed = params if params is not None else {}
            t0 = time.perf_counter()
            compiled = jax.jit(lambda *a: fn(fixed, *a)).lower(*args).compile()
            compile_seconds = time.perf_counter() - t0
            _put(ck, compiled)
        t0 = time.perf_counter()
        out = jax.block_until_ready(compiled(*args))
    else:
        t0 = time.perf_counter()
        out = jax.block_until_ready(compiled(p, *args))
    seconds = time.perf_counter() - t0
    return jax.device_get(out), compile_seconds, seconds
