"""Persistence: the state stays as it was last seen."""

from __future__ import annotations

import numpy as np

from .base import Capabilities, Learner

__all__ = ["Persistence"]


class Persistence(Learner):
    """The persistence forecast: tomorrow is like today.

    ``rollout`` returns the start state at every output time. It is the
    floor every forecasting method must clear; its error grows with horizon
    only as fast as the true trajectory leaves its start.

    Parameters
    ----------
    This learner has no hyper-parameters.

    Attributes
    ----------
    dt_ : float
        Median sample spacing of the training data (informational).
    mean_state_ : ndarray, shape (d,)
        Mean training state (informational).

    References
    ----------
    A. H. Murphy, "Climatology, persistence, and their linear combination as
    standards of reference in skill scores", Weather and Forecasting 7,
    692-698 (1992).

    Examples
    --------
    >>> import numpy as np
    >>> from surrogates import TrainingData
    >>> data = TrainingData.from_arrays(np.arange(3.0), np.ones((3, 2)))
    >>> Persistence().fit(data).rollout(np.zeros((1, 2)), np.arange(4.0)).shape
    (1, 4, 2)
    """

    capabilities = Capabilities(tasks={"forecast", "climate"}, physics={"none"}, deterministic=True,
                                min_samples=1)
    reference = ("A. H. Murphy, Climatology, persistence, and their linear combination as standards of "
                 "reference in skill scores, Weather and Forecasting 7, 692-698 (1992)")

    def __init__(self):
        pass

    def _fit(self, data, physics, budget, seed):
        dts = [tr.dt for tr in data.trajectories if tr.t.size > 1]
        self.dt_ = float(np.median(dts)) if dts else float("nan")
        self.mean_state_ = np.concatenate([tr.y for tr in data.trajectories]).mean(axis=0)

    def _rollout(self, y0, t, history):
        return np.repeat(y0[:, None, :], t.shape[0], axis=1)

    def _n_parameters(self):
        return 0
