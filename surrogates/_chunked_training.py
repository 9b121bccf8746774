"""Minibatch Adam training in jitted chunks, shared by the neural-ODE and HNN learners.

A training step is a pure function of ``(params, opt_state, key)`` plus the
training arrays; ``chunk`` runs ``n`` such steps in one ``lax.fori_loop``
inside one jitted call, and :func:`run_chunks` calls it repeatedly, checking
the wall-clock budget between calls (never inside compiled code).

Compiled chunks are kept in a module-level cache keyed by the learner's
static configuration, so a second fit with the same configuration and array
shapes neither traces nor compiles; :data:`TRACE_COUNT` counts traces per
learner name (tests read it).
"""

from __future__ import annotations

import math
from collections import OrderedDict

import jax
import jax.numpy as jnp
import optax
from jax import lax

from .errors import DivergedError

__all__ = ["TRACE_COUNT", "cached", "make_chunk", "run_chunks"]

_MAX_CACHE = 64
_CACHE: "OrderedDict[tuple, object]" = OrderedDict()
#: Traces of compiled functions, per name (a trace happens before every compilation).
TRACE_COUNT: dict[str, int] = {}


def cached(key, build):
    """The cached object for ``key``, built with ``build()`` on first use (LRU, 64 entries)."""
    obj = _CACHE.get(key)
    if obj is None:
        obj = build()
        _CACHE[key] = obj
        while len(_CACHE) > _MAX_CACHE:
            _CACHE.popitem(last=False)
    else:
        _CACHE.move_to_end(key)
    return obj


def count_trace(name: str) -> None:
    """Record one trace of ``name`` (call it from the Python body of a jitted function)."""
    TRACE_COUNT[name] = TRACE_COUNT.get(name, 0) + 1


def _learning_rate(step, total, peak):
    """Linear warm-up over 5 % of ``total`` steps, then cosine decay to 1 % of ``peak``."""
    warm = jnp.maximum(1.0, 0.05 * total)
    frac = jnp.clip(step / jnp.maximum(total, 1.0), 0.0, 1.0)
    cosine = 0.01 + 0.99 * 0.5 * (1.0 + jnp.cos(jnp.pi * frac))
    return peak * jnp.minimum(1.0, (step + 1.0) / warm) * cosine


def make_chunk(loss_fn, batch_size: int, grad_clip: float, name: str):
    """A jitted chunk of optimiser steps, and the optax transformation it uses.

    Parameters
    ----------
    loss_fn : callable
        ``loss_fn(params, aux, *batch) -> scalar``; ``batch`` are the rows of
        the training arrays drawn for one step.
    batch_size : int
        Rows drawn (uniformly, with replacement) per step.
    grad_clip : float
        Global-norm clip applied before Adam.
    name : str
        Key of :data:`TRACE_COUNT`.

    Returns
    -------
    chunk : callable
        ``chunk(params, opt_state, key, step0, n, total, lr, aux, arrays) ->
        (params, opt_state, key, mean_loss, last_loss)``; ``n`` (the number of
        steps) and ``total`` (the planned steps, for the schedule) are traced,
        so neither recompiles.
    tx : optax.GradientTransformation
        ``clip_by_global_norm`` then ``scale_by_adam``; the learning rate of
        :func:`_learning_rate` is applied afterwards.
    """
    tx = optax.chain(optax.clip_by_global_norm(grad_clip), optax.scale_by_adam())

    def chunk(params, opt_state, key, step0, n, total, lr, aux, arrays):
        count_trace(name)
        n_rows = arrays[0].shape[0]

        def body(i, carry):
            params, opt_state, key, loss_sum, _ = carry
            key, sub = jax.random.split(key)
            idx = jax.random.randint(sub, (batch_size,), 0, n_rows)
            loss, grads = jax.value_and_grad(loss_fn)(params, aux, *(a[idx] for a in arrays))
            updates, opt_state = tx.update(grads, opt_state, params)
            rate = _learning_rate(step0 + i, total, lr)
            params = jax.tree_util.tree_map(lambda p, u: p - rate * u, params, updates)
            return params, opt_state, key, loss_sum + loss, loss

        init = (params, opt_state, key, jnp.zeros(()), jnp.zeros(()))
        params, opt_state, key, loss_sum, last = lax.fori_loop(0, n, body, init)
        return params, opt_state, key, loss_sum / jnp.maximum(n, 1), last

    return jax.jit(chunk), tx


def run_chunks(chunk, tx, params, key, aux, arrays, total: int, lr: float, chunk_size: int, clock, who: str):
    """Run ``total`` steps in chunks of ``chunk_size``, stopping early when ``clock`` expires.

    Returns ``(params, steps_done, mean_loss_per_chunk)``; raises
    :class:`DivergedError` when a chunk's loss is not finite.
    """
    opt_state = tx.init(params)
    arrays = tuple(jnp.asarray(a) for a in arrays)
    done, history = 0, []
    while done < total:
        n = min(int(chunk_size), total - done)
        params, opt_state, key, mean_loss, _ = chunk(
            params, opt_state, key, jnp.asarray(float(done)), jnp.asarray(n, dtype=jnp.int32),
            jnp.asarray(float(total)), jnp.asarray(float(lr)), aux, arrays)
        done += n
        mean_loss = float(mean_loss)
        history.append(mean_loss)
        if not math.isfinite(mean_loss):
            raise DivergedError(f"{who} training loss became non-finite within the first {done} steps")
        if clock.expired():
            break
    return params, done, history
