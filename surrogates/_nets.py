"""Small dense networks in JAX, shared by the neural learners."""

from __future__ import annotations

import jax
import jax.numpy as jnp
import numpy as np

__all__ = ["init_mlp", "apply_mlp", "count_params", "ACTIVATIONS"]

ACTIVATIONS = {"tanh": jnp.tanh, "gelu": jax.nn.gelu, "softplus": jax.nn.softplus,
               "relu": jax.nn.relu, "sin": jnp.sin, "silu": jax.nn.silu}


def init_mlp(key, sizes, dtype=jnp.float64):
    """Glorot-normal weights and zero biases for layer ``sizes`` (in, hidden..., out).

    References
    ----------
    X. Glorot and Y. Bengio, "Understanding the difficulty of training deep
    feedforward neural networks", AISTATS (2010).
    """
    params = []
    keys = jax.random.split(key, len(sizes) - 1)
    for k, (m, n) in zip(keys, zip(sizes[:-1], sizes[1:])):
        std = np.sqrt(2.0 / (m + n))
        params.append({"w": std * jax.random.normal(k, (m, n), dtype), "b": jnp.zeros((n,), dtype)})
    return params


def apply_mlp(params, x, activation="tanh"):
    """Apply the network to ``x`` of shape (..., in); linear last layer."""
    act = ACTIVATIONS[activation]
    h = x
    for layer in params[:-1]:
        h = act(h @ layer["w"] + layer["b"])
    last = params[-1]
    return h @ last["w"] + last["b"]


def count_params(tree) -> int:
    return int(sum(np.size(leaf) for leaf in jax.tree_util.tree_leaves(tree)))
