"""Datasets a learner trains on, made from trusted reference trajectories.

Rules (the same for every learner):

Reference and its horizon
    Every state comes from :func:`suite.systems.reference.reference_solution`,
    which integrates twice at tight tolerances and reports the *reference
    horizon*: the time up to which the two integrations agree. A dataset
    never uses a state past the horizon of the integration it comes from.
    A trajectory longer than one horizon is made of consecutive *segments*:
    each segment is integrated from the last trusted state of the previous
    one and cut at its own horizon, so the series stays continuous and every
    sample is within the reference's agreement tolerance of the true orbit
    through its segment's start (``info["segments"]`` counts them).
    Forecast truths, which must follow the true orbit of one start state, are
    instead clipped at the horizon (see :mod:`suite.tasks`).

Sampling fraction
    From the trajectory sampled every ``system.sample_dt`` (the *sample
    grid*), the learner sees ``round(fraction * n)`` samples drawn uniformly
    at random without replacement, or — for learners that declare
    ``needs_regular_sampling`` — every ``round(1/fraction)``-th sample
    starting with the first. ``info["sampling"]`` says which. Random subsets
    are prefixes of one permutation, so the samples seen at a smaller fraction
    are a subset of those seen at a larger one (same seed).

Noise
    Additive Gaussian noise with standard deviation ``noise`` times each
    variable's standard deviation on the attractor
    (:func:`suite.systems.reference.attractor_scale`). One noise draw per
    sample-grid point, shared by all fractions of the same seed.

Seeds
    Data depend only on the data part of a cell (system, its parameters,
    task, task options, seed) — never on the learner — so every learner of a
    study is scored on the same samples and test states. Sampling and noise
    use their own streams of the same seed.

Minimum size
    A dataset smaller than the learner's ``min_samples`` raises
    :class:`surrogates.NotApplicableError` with the counts in the message.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass, field

import numpy as np

from surrogates import NotApplicableError, TrainingData, Trajectory

__all__ = [
    "DataStreams",
    "ReferenceUnavailableError",
    "data_seed",
    "TrustedTrajectory",
    "WindowDataset",
    "attractor_std",
    "observe",
    "reference_with_horizon",
    "sample_indices",
    "trusted_trajectory",
    "window_dataset",
    "trajectory_dataset",
]

# time-grid tolerance (relative to the output step) when cutting at a horizon
_GRID_EPS = 1e-9


class ReferenceUnavailableError(RuntimeError):
    """The reference integration failed or its horizon is too short to use."""


# ------------------------------------------------------------------ reference
def _reference_solution(system, t_end, y0, dt_out):
    """Indirection to :func:`suite.systems.reference.reference_solution` (tests may replace it)."""
    from suite.systems.reference import reference_solution

    return reference_solution(system, t_end, y0=y0, dt_out=dt_out)


def _attractor_scale(system):
    from suite.systems.reference import attractor_scale

    return attractor_scale(system, seed=0)


def attractor_std(system) -> np.ndarray:
    """Per-variable standard deviation on the attractor (shape (d,)), all positive."""
    s = np.asarray(_attractor_scale(system), dtype=float).reshape(-1)
    if s.shape != (system.dim,) or not np.all(np.isfinite(s)):
        raise ReferenceUnavailableError(f"attractor scale of {system.name} has shape {s.shape} or is not finite")
    return np.where(s > 0, s, 1.0)


def reference_with_horizon(system, y0, duration: float, dt_out: float):
    """One reference integration from ``y0``: times from 0, states, and its horizon.

    Returns
    -------
    t : ndarray, shape (n,)
        ``0, dt_out, 2 dt_out, ...`` up to ``duration`` (not cut at the horizon).
    y : ndarray, shape (n, d)
    horizon : float
        Reference horizon in time units from ``t[0]`` (capped at ``duration``).
    """
    sol = _reference_solution(system, float(duration), np.asarray(y0, dtype=float), float(dt_out))
    if not sol.success:
        raise ReferenceUnavailableError(f"reference integration of {system.name} failed: {sol.message}")
    t = np.asarray(sol.t, dtype=float)
    y = np.asarray(sol.y, dtype=float)
    horizon = float(sol.extra.get("reference_horizon", np.inf))
    t0 = t[0]
    return t - t0, y, min(horizon - t0, float(duration))


@dataclass(frozen=True)
class TrustedTrajectory:
    """A continuous trajectory whose every state is inside a reference horizon."""

    t: np.ndarray
    y: np.ndarray
    segments: int
    horizons: tuple[float, ...]


def trusted_trajectory(system, y0, duration: float, dt_out: float, max_segments: int = 1000,
                       segment_hint: float | None = None) -> TrustedTrajectory:
    """States every ``dt_out`` over ``duration`` from ``y0``, built from reference segments.

    Each segment is integrated from the previous segment's last state inside
    its horizon and cut at its own horizon (see the module notes). So as not
    to integrate far past a horizon that is then thrown away, the first
    request is at most ``segment_hint`` time units (default 25 time units of
    the system) and later ones 1.25 times the last horizon found (twice it
    when the last segment ended at its request rather than at a horizon).
    """
    dt_out = float(dt_out)
    n_total = int(round(duration / dt_out))
    ts, ys, horizons = [np.zeros(1)], [np.asarray(y0, dtype=float)[None, :]], []
    done = 0
    state = np.asarray(y0, dtype=float)
    hint = float(segment_hint if segment_hint is not None else 25.0 * float(system.time_unit))
    request_steps = max(2, int(np.ceil(hint / dt_out)))
    while done < n_total:
        if len(horizons) >= max_segments:
            raise ReferenceUnavailableError(f"{system.name}: more than {max_segments} reference segments needed")
        steps = min(n_total - done, request_steps)
        remaining = steps * dt_out
        t, y, h = reference_with_horizon(system, state, remaining, dt_out)
        k = int(np.floor(h / dt_out * (1 + _GRID_EPS) + _GRID_EPS))
        k = min(k, n_total - done, t.size - 1)
        if k < 1:
            raise ReferenceUnavailableError(
                f"{system.name}: reference horizon {h:.3g} is shorter than one output step {dt_out:g}")
        horizons.append(h)
        reached_end = k >= steps
        request_steps = max(2, int(np.ceil((2.0 if reached_end else 1.25) * k)))
        ts.append((done + np.arange(1, k + 1)) * dt_out)
        ys.append(y[1:k + 1])
        state = y[k]
        done += k
    return TrustedTrajectory(np.concatenate(ts), np.concatenate(ys), len(horizons), tuple(horizons))


# ------------------------------------------------------------------- sampling
def data_seed(spec) -> int:
    """Seed of a cell's data: a hash of system, its parameters, task, task options and seed.

    Learner, hyper-parameters, fraction, noise and physics level are left out
    on purpose: all learners, fractions and noise levels of one seed share the
    same trajectories, test states, sample order and noise draws.
    """
    payload = json.dumps({"system": spec.system, "system_params": spec.system_params, "task": spec.task,
                          "task_options": spec.task_options, "seed": int(spec.seed)},
                         sort_keys=True, separators=(",", ":"), default=str)
    return int(hashlib.sha256(payload.encode()).hexdigest()[:8], 16)


@dataclass(frozen=True)
class DataStreams:
    """Independent integer seeds for the parts of a cell's data, from one data seed."""

    seed: int
    starts: int = field(init=False)
    tests: int = field(init=False)
    climate: int = field(init=False)
    sampling: int = field(init=False)
    noise: int = field(init=False)

    def __post_init__(self):
        s = np.random.SeedSequence(int(self.seed)).generate_state(5)
        for name, v in zip(("starts", "tests", "climate", "sampling", "noise"), s):
            object.__setattr__(self, name, int(v))


def sample_indices(n: int, fraction: float, regular: bool, rng: np.random.Generator) -> np.ndarray:
    """Sorted indices of the samples a learner sees out of ``n``.

    ``regular``: every ``round(1/fraction)``-th index starting at 0;
    otherwise the first ``round(fraction * n)`` entries of a random
    permutation (uniform without replacement), sorted.
    """
    fraction = float(fraction)
    if not (0.0 < fraction <= 1.0):
        raise ValueError(f"sampling fraction must be in (0, 1], got {fraction:g}")
    if regular:
        stride = max(1, int(round(1.0 / fraction)))
        return np.arange(0, n, stride)
    k = int(round(fraction * n))
    perm = rng.permutation(n)
    return np.sort(perm[:k])


def observe(t, y, idx, noise: float, scale, noise_draw) -> Trajectory:
    """The observed trajectory: samples ``idx`` of ``(t, y)`` plus scaled Gaussian noise.

    ``noise_draw`` is a standard-normal array shaped like ``y`` (one draw per
    grid point, so all fractions share the noise of a sample).
    """
    yy = y[idx] + float(noise) * np.asarray(scale)[None, :] * noise_draw[idx]
    return Trajectory(t[idx], yy)


def _check_count(n_seen: int, min_samples: int, what: str):
    need = max(int(min_samples), 2)
    if n_seen < need:
        raise NotApplicableError(f"{what} gives {n_seen} training samples; the learner needs at least {need}")


@dataclass(frozen=True)
class WindowDataset:
    """Training data inside one window, and the held-out states of that window.

    ``t_heldout``/``y_heldout`` are clean reference states at the times the
    learner did not see (including the mid-points between sample-grid
    points, so the set is never empty).
    """

    data: TrainingData
    t_heldout: np.ndarray
    y_heldout: np.ndarray
    t_seen: np.ndarray
    y_seen_clean: np.ndarray
    info: dict


def window_dataset(system, y0, window: float, *, fraction: float, noise: float, scale,
                   regular: bool, min_samples: int, streams: DataStreams) -> WindowDataset:
    """Samples inside a window of ``window`` time units starting at ``y0`` (task reconstruct/identify).

    The reference is computed every ``sample_dt / 2``; the even points are
    the sample grid the learner samples from; every point it does not see is
    held out.
    """
    dt = float(system.sample_dt)
    traj = trusted_trajectory(system, y0, window, dt / 2.0)
    t_all, y_all = traj.t, traj.y
    grid = np.arange(0, t_all.size, 2)
    rng = np.random.default_rng(streams.sampling)
    pick = sample_indices(grid.size, fraction, regular, rng)
    desc = f"fraction {fraction:g} of {grid.size} samples"
    _check_count(pick.size, min_samples, desc)
    draw = np.random.default_rng(streams.noise).standard_normal((grid.size, system.dim))
    seen = grid[pick]
    tr = observe(t_all[grid], y_all[grid], pick, noise, scale, draw)
    mask = np.ones(t_all.size, dtype=bool)
    mask[seen] = False
    data = TrainingData((tr,), state_names=tuple(system.state_names), noise=float(noise),
                        scale=np.asarray(scale, dtype=float))
    info = {"sampling": "regular" if regular else "random", "n_grid": int(grid.size),
            "n_samples": int(pick.size), "segments": traj.segments,
            "window": float(t_all[-1] - t_all[0])}
    return WindowDataset(data, t_all[mask], y_all[mask], t_all[seen], y_all[seen], info)


def trajectory_dataset(system, y0, duration: float, *, fraction: float, noise: float, scale,
                       regular: bool, min_samples: int, streams: DataStreams):
    """A training trajectory of ``duration`` time units from ``y0`` (tasks forecast/climate).

    Returns
    -------
    data : TrainingData
    info : dict
        ``sampling``, ``n_grid``, ``n_samples``, ``segments``, ``stride``
        (regular sampling step in grid points, 1 for random sampling).
    """
    dt = float(system.sample_dt)
    traj = trusted_trajectory(system, y0, duration, dt)
    n = traj.t.size
    rng = np.random.default_rng(streams.sampling)
    pick = sample_indices(n, fraction, regular, rng)
    _check_count(pick.size, min_samples, f"fraction {fraction:g} of {n} samples")
    draw = np.random.default_rng(streams.noise).standard_normal((n, system.dim))
    tr = observe(traj.t, traj.y, pick, noise, scale, draw)
    data = TrainingData((tr,), state_names=tuple(system.state_names), noise=float(noise),
                        scale=np.asarray(scale, dtype=float))
    stride = max(1, int(round(1.0 / float(fraction)))) if regular else 1
    info = {"sampling": "regular" if regular else "random", "n_grid": int(n),
            "n_samples": int(pick.size), "segments": traj.segments, "stride": stride,
            "train_time": float(traj.t[-1])}
    return data, info
