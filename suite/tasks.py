"""The four tasks: what data a learner gets, what it must answer, how it is scored.

Time unit
    Every time a task reports is in units of ``system.time_unit``: the
    Lyapunov time ``1/lambda_max`` for chaotic systems, else the system's
    characteristic period (``info["time_unit_kind"]`` says which:
    ``"lyapunov_time"``, ``"characteristic_time"`` or ``"time"`` when a
    system declares neither and the unit is 1). Task options whose name ends
    in ``_lyapunov_times`` are in that unit too.

reconstruct
    A window of ``window_lyapunov_times`` starting on the attractor; the
    learner sees samples (fraction, noise) and must give the clean state at
    every held-out time of the window (unseen grid points and the mid-points
    between grid points). Metrics: ``relative_l2``, ``nrmse_mean``.
forecast
    Training trajectory of ``train_lyapunov_times``. ``n_starts`` test start
    states are drawn on the attractor from a separate stream
    (``System.initial_conditions`` with another seed, i.e. a different orbit),
    each with ``history_steps`` clean states before it (ending at the start)
    for reservoirs and delay methods. The rollout covers
    ``horizon_lyapunov_times`` at the sampling step (times the regular
    subsampling stride for learners that need regular sampling). The horizon
    is clipped to the shortest reference horizon over the starts; the bound
    is reported as metric ``reference_horizon`` and the clipping in
    ``info["forecast_horizon_clipped"]``. Metrics: the ``nrmse`` curve
    (mean over starts, ``curve_points`` rows with ``horizon`` set),
    ``valid_prediction_time`` (median over starts; threshold
    ``vpt_threshold`` on the normalised error), ``valid_prediction_time_iqr``,
    and one ``valid_prediction_time_start_<k>`` row per start ``k``
    (0-based, horizon None), and ``nrmse_mean`` (the normalised error
    averaged over starts and every output time of the horizon, the error
    axis of the work–precision plane). A start whose error never crosses the threshold
    gets the clipped horizon (censored; counted in ``info["vpt_censored"]``).
climate
    Training as in forecast; one autonomous rollout of
    ``climate_lyapunov_times`` from a separate start state, compared with a
    reference trajectory of the same length from the same start. These are
    *statistics*, compared beyond the reference horizon on purpose (the
    reference is a trusted pseudo-orbit, see :mod:`suite.datasets`).
    Metrics: ``wasserstein_<state>`` per variable and ``wasserstein_mean``
    (normalised by the attractor std), ``spectrum_distance`` (mean |log10|
    ratio of Welch spectra), ``surrogate_lyapunov_exponent`` (inverse time
    units of the system, Benettin two-trajectory probe of the learner's own
    rollout) and ``lyapunov_exponent_error`` (relative to the system's
    exponent; chaotic systems only).
identify
    The reconstruct window's data plus the equations (physics ``full`` or
    ``partial``) with the parameters named by ``unknown`` given as an initial
    guess (true value times ``guess_factor``). Metrics:
    ``parameter_error_<name>`` per unknown and ``parameter_error`` (max).

Forecast and climate also report, for systems with conserved quantities,
``conserved_drift_<name>`` (median over rollouts of the largest relative
drift) and ``energy_drift`` (the same for the quantity named ``energy``).

Defaults (:data:`TASK_OPTION_DEFAULTS`, all overridable per grid under
``[task.<name>]``): reconstruct and identify windows of 5 time units;
forecast and climate train on 20 time units; forecast from 10 starts with
100 history states over 12 time units (well-tuned reservoirs reach ~10
Lyapunov times on Lorenz-63), 25 curve points, threshold 0.4;
climate rollout of 100 time units, Welch segments of 256 samples, Lyapunov
probe of 30 chunks of 0.5 time units with separation 1e-6. On Lorenz-63 a
cell with a classical learner then costs about 1 s (reconstruct, identify),
12 s (forecast) and 12 s (climate) of CPU on a loaded two-core machine,
almost all of it in the reference integrations (two DOP853 runs at tight
tolerances per trusted segment).

Every learner output is checked by the harness: a wrong shape is a
``failed`` cell, a non-finite value a ``diverged`` cell.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from surrogates import TASKS, DivergedError, LearnerError, NotApplicableError

from . import metrics as M
from .cell import MetricRow
from .datasets import (DataStreams, reference_with_horizon, trajectory_dataset,
                       trusted_trajectory, window_dataset)
from .systems.reference import initial_conditions
from .workprecision import best_time

__all__ = [
    "HEADLINE_METRICS",
    "HIGHER_IS_BETTER",
    "METRIC_NAMES",
    "OutputCheckError",
    "TASKS",
    "TASK_OPTION_DEFAULTS",
    "TASK_OPTION_HELP",
    "TaskContext",
    "TaskSetup",
    "resolve_task_options",
    "expected_samples",
    "forecast_problem",
    "setup_task",
    "time_unit_kind",
]

_PHYSICS_OPTIONS = {"removed_term": ""}

#: Per task, the options a grid may override under ``[task.<name>]`` and their defaults.
#: An empty string means "the system's documented default" (see :mod:`suite.physics`).
TASK_OPTION_DEFAULTS: dict[str, dict[str, object]] = {
    "reconstruct": {"window_lyapunov_times": 5.0, **_PHYSICS_OPTIONS},
    "forecast": {"train_lyapunov_times": 20.0, "n_starts": 10, "history_steps": 100,
                 "horizon_lyapunov_times": 12.0, "curve_points": 25, "vpt_threshold": 0.4,
                 **_PHYSICS_OPTIONS},
    "climate": {"train_lyapunov_times": 20.0, "climate_lyapunov_times": 100.0, "history_steps": 100,
                "welch_nperseg": 256, "lyapunov_chunks": 30, "lyapunov_chunk_lyapunov_times": 0.5,
                "lyapunov_delta": 1e-6, **_PHYSICS_OPTIONS},
    "identify": {"window_lyapunov_times": 5.0, "unknown": "", "guess_factor": 1.2, **_PHYSICS_OPTIONS},
}

#: One line per option, for listings and error messages.
TASK_OPTION_HELP: dict[str, str] = {
    "window_lyapunov_times": "length of the observed window, in time units of the system",
    "train_lyapunov_times": "length of the training trajectory, in time units of the system",
    "n_starts": "number of test start states (drawn on the attractor from a separate seed)",
    "history_steps": "clean states given before each start, ending at it (reservoir warm-up)",
    "horizon_lyapunov_times": "forecast length, in time units (clipped to the reference horizon)",
    "curve_points": "number of rows of the nrmse-versus-horizon curve",
    "vpt_threshold": "normalised error that ends the valid prediction time (Pathak et al. 2018: 0.4)",
    "climate_lyapunov_times": "length of the autonomous climate rollout, in time units",
    "welch_nperseg": "Welch segment length (samples) of the power spectra",
    "lyapunov_chunks": "renormalisation chunks of the surrogate's Lyapunov probe (first 3 discarded)",
    "lyapunov_chunk_lyapunov_times": "length of one renormalisation chunk, in time units",
    "lyapunov_delta": "initial separation of the probe, in attractor standard deviations",
    "removed_term": "term removed at physics level partial ('' = the system's last term)",
    "unknown": "comma-separated parameters to identify ('' = the system's first parameter)",
    "guess_factor": "initial guess of each unknown parameter = true value x this factor",
}

#: Metric names per task; ``<state>``, ``<k>``, ``<name>`` stand for a state
#: variable name, a 0-based start index, a parameter or conserved-quantity name.
#: Rows with a ``horizon`` (in time units) are marked ``[curve]``.
METRIC_NAMES: dict[str, tuple[str, ...]] = {
    "reconstruct": ("relative_l2", "nrmse_mean"),
    "forecast": ("nrmse [curve]", "nrmse_mean", "valid_prediction_time", "valid_prediction_time_iqr",
                 "valid_prediction_time_start_<k>", "reference_horizon",
                 "energy_drift", "conserved_drift_<name>"),
    "climate": ("wasserstein_<state>", "wasserstein_mean", "spectrum_distance",
                "surrogate_lyapunov_exponent", "lyapunov_exponent_error",
                "energy_drift", "conserved_drift_<name>"),
    "identify": ("parameter_error", "parameter_error_<name>"),
}

#: The one number per task that a summary table shows first.
HEADLINE_METRICS = {"reconstruct": "relative_l2", "forecast": "valid_prediction_time",
                    "climate": "wasserstein_mean", "identify": "parameter_error"}

#: Metrics where larger is better (all others: smaller is better, except the
#: informational ``reference_horizon`` and ``surrogate_lyapunov_exponent``).
HIGHER_IS_BETTER = frozenset({"valid_prediction_time", "valid_prediction_time_start_<k>"})


class OutputCheckError(LearnerError):
    """A learner's output has the wrong shape or type (cell status ``failed``)."""

    status = "failed"


def time_unit_kind(system) -> str:
    if system.lyapunov_time is not None:
        return "lyapunov_time"
    if system.characteristic_time:
        return "characteristic_time"
    return "time"


def resolve_task_options(task: str, overrides: dict | None) -> dict:
    """Defaults of ``task`` updated by ``overrides``; one-line ``ValueError`` for a bad key or value."""
    if task not in TASK_OPTION_DEFAULTS:
        raise ValueError(f"unknown task {task!r} (valid: {', '.join(TASKS)})")
    defaults = TASK_OPTION_DEFAULTS[task]
    out = dict(defaults)
    for key, value in (overrides or {}).items():
        if key not in defaults:
            raise ValueError(f"unknown option {key!r} of task {task} (valid: {', '.join(sorted(defaults))})")
        d = defaults[key]
        if isinstance(d, str):
            if isinstance(value, (list, tuple)) and all(isinstance(v, str) for v in value):
                value = ",".join(value)
            if not isinstance(value, str):
                raise ValueError(f"option {key} of task {task} must be a string, got {value!r}")
        elif isinstance(d, int):
            if isinstance(value, bool) or not isinstance(value, (int, float)) or value != int(value) or value < 1:
                raise ValueError(f"option {key} of task {task} must be a positive integer, got {value!r}")
            value = int(value)
        else:
            if isinstance(value, bool) or not isinstance(value, (int, float)) or not np.isfinite(value) or value <= 0:
                raise ValueError(f"option {key} of task {task} must be a positive number, got {value!r}")
            value = float(value)
        out[key] = value
    return out


@dataclass
class TaskContext:
    """What a task needs to build its data and score a learner."""

    system: object
    task: str
    options: dict
    fraction: float
    noise: float
    scale: np.ndarray
    streams: DataStreams
    regular: bool
    min_samples: int

    @property
    def time_unit(self) -> float:
        return float(self.system.time_unit)


@dataclass
class TaskSetup:
    """Training data for ``fit`` and the function that scores the fitted learner.

    ``evaluate(learner) -> (rows, cost, info)``; cost holds
    ``inference_seconds`` and ``inference_seconds_per_lyapunov_time`` where
    the task runs inference (forecast: timed after a first rollout has paid
    compilation, with :func:`suite.workprecision.best_time`).
    """

    data: object
    info: dict
    evaluate: Callable = field(repr=False)


# ---------------------------------------------------------------- checking
def _checked(arr, shape: tuple, what: str) -> np.ndarray:
    try:
        a = np.asarray(arr, dtype=float)
    except (TypeError, ValueError) as e:
        raise OutputCheckError(f"{what} is not a numeric array ({e})") from None
    if a.shape != tuple(shape):
        raise OutputCheckError(f"{what} has shape {a.shape}, expected {tuple(shape)}")
    if not np.all(np.isfinite(a)):
        bad = int(np.sum(~np.isfinite(a)))
        raise DivergedError(f"{what} holds {bad} non-finite values")
    return a


def _conserved_rows(system, states: np.ndarray) -> list[MetricRow]:
    """Drift rows for each conserved quantity along rollouts ``states`` (B, n, d)."""
    rows = []
    p = system.params
    for name, q in system.conserved_quantities().items():
        vals = np.array([[float(q(s, p)) for s in traj] for traj in states])
        drift = M.energy_drift(vals)
        rows.append(MetricRow(f"conserved_drift_{name}", drift))
        if name == "energy":
            rows.append(MetricRow("energy_drift", drift))
    return rows


def _clip_history(m: int) -> int:
    return max(1, int(m))


# ------------------------------------------------------------------ tasks
def _window(ctx: TaskContext):
    system = ctx.system
    y0 = initial_conditions(system, 1, ctx.streams.starts)[0]
    window = ctx.options["window_lyapunov_times"] * ctx.time_unit
    return window_dataset(system, y0, window, fraction=ctx.fraction, noise=ctx.noise, scale=ctx.scale,
                          regular=ctx.regular, min_samples=ctx.min_samples, streams=ctx.streams)


def _setup_reconstruct(ctx: TaskContext) -> TaskSetup:
    ds = _window(ctx)
    tu = ctx.time_unit

    def evaluate(learner):
        t0 = time.perf_counter()
        pred = learner.predict(ds.t_heldout)
        sec = time.perf_counter() - t0
        pred = _checked(pred, ds.y_heldout.shape, "predict output")
        rows = [MetricRow("relative_l2", M.relative_l2(pred, ds.y_heldout)),
                MetricRow("nrmse_mean", float(np.mean(M.nrmse_curve(pred, ds.y_heldout, ctx.scale))))]
        cost = {"inference_seconds": sec,
                "inference_seconds_per_lyapunov_time": sec / (ds.info["window"] / tu)}
        return rows, cost, {"n_heldout": int(ds.t_heldout.size)}

    return TaskSetup(ds.data, dict(ds.info), evaluate)


def _setup_identify(ctx: TaskContext, unknown: tuple[str, ...]) -> TaskSetup:
    ds = _window(ctx)
    truth = {u: float(ctx.system.params[u]) for u in unknown}

    def evaluate(learner):
        est = learner.identified_params()
        if not isinstance(est, dict):
            raise OutputCheckError(f"identified_params returned {type(est).__name__}, expected a dict")
        missing = [u for u in unknown if u not in est]
        if missing:
            raise OutputCheckError(f"identified_params gave no estimate for {', '.join(missing)}")
        vals = {u: est[u] for u in unknown}
        bad = [u for u, v in vals.items() if not np.isfinite(float(v))]
        if bad:
            raise DivergedError(f"non-finite estimate of {', '.join(bad)}")
        errs = M.relative_parameter_error(vals, truth)
        rows = [MetricRow("parameter_error", max(errs.values()))]
        rows += [MetricRow(f"parameter_error_{u}", e) for u, e in errs.items()]
        return rows, {}, {"estimates": {u: float(v) for u, v in vals.items()}, "true_params": truth}

    return TaskSetup(ds.data, dict(ds.info), evaluate)


def _training(ctx: TaskContext):
    system = ctx.system
    y0 = initial_conditions(system, 1, ctx.streams.starts)[0]
    duration = ctx.options["train_lyapunov_times"] * ctx.time_unit
    data, info = trajectory_dataset(system, y0, duration, fraction=ctx.fraction, noise=ctx.noise,
                                    scale=ctx.scale, regular=ctx.regular, min_samples=ctx.min_samples,
                                    streams=ctx.streams)
    dt_roll = info["stride"] * float(system.sample_dt)
    return data, info, dt_roll


def forecast_problem(ctx: TaskContext, dt: float | None = None, n_starts: int | None = None) -> dict:
    """The forecast task's test problem: start states, output times and reference trajectories.

    Exactly what :func:`setup_task` builds for a forecast cell with the same
    ``ctx`` (system, options, data seed), without the training data, so
    that solvers can be scored on the same problem as the learners.

    Parameters
    ----------
    ctx : TaskContext
        ``ctx.task`` is ignored; ``ctx.options`` are forecast options.
    dt : float, optional
        Rollout step (default: the system's sampling step, i.e. stride 1).
    n_starts : int, optional
        Use only the first ``n_starts`` of the task's start states.

    Returns
    -------
    dict with ``history`` (K, m, d), ``y0s`` (K, d), ``t_out`` (n,) from 0,
    ``t_start`` (absolute time of ``y0s``, for non-autonomous systems),
    ``truth`` (K, n, d), ``reference_horizon`` (time units),
    ``horizon_clipped`` (bool), ``dt``.
    """
    system, o, tu = ctx.system, ctx.options, ctx.time_unit
    dt = float(system.sample_dt) if dt is None else float(dt)
    m = _clip_history(o["history_steps"])
    hist_time = (m - 1) * dt
    horizon = o["horizon_lyapunov_times"] * tu
    starts = initial_conditions(system, int(o["n_starts"]), ctx.streams.tests)
    if n_starts is not None:
        starts = starts[:max(1, int(n_starts))]

    def n_out(bound: float) -> int:
        return int(np.floor(min(horizon, bound) / dt * (1 + 1e-9) + 1e-9)) + 1

    histories, truths, avail = [], [], []
    for s in starts:
        t, y, h = reference_with_horizon(system, s, hist_time + horizon, dt)
        histories.append(y[:m])
        truths.append(y[m - 1:])
        avail.append(h - hist_time)
        if n_out(avail[-1]) < 3:  # a property of this sampling step, not a fault of the learner
            # decided at the first such start (the window is the shortest over all starts): with
            # a long history each reference is a long integration, and the rest would be wasted
            raise NotApplicableError(
                f"at output step {dt:g} the {m}-sample history spans {hist_time:.3g} time units of "
                f"{system.name} and leaves {max(avail[-1], 0.0):.3g} of the reference's trusted horizon "
                f"for the forecast: fewer than 3 output times to score")
    ref_bound = float(min(avail))
    h_eff = min(horizon, ref_bound)
    n = n_out(ref_bound)
    truth = np.stack([tr[:n] for tr in truths])
    return {"history": np.stack(histories), "y0s": truth[:, 0], "t_out": dt * np.arange(n),
            "t_start": hist_time, "truth": truth, "reference_horizon": ref_bound / tu,
            "horizon_clipped": bool(h_eff < horizon - 1e-12), "dt": dt}


def _setup_forecast(ctx: TaskContext) -> TaskSetup:
    system, o, tu = ctx.system, ctx.options, ctx.time_unit
    data, info, dt = _training(ctx)
    prob = forecast_problem(ctx, dt)
    history, truth, y0s, t_out = prob["history"], prob["truth"], prob["y0s"], prob["t_out"]
    ref_bound = prob["reference_horizon"] * tu
    n = t_out.size
    info = dict(info, forecast_horizon_clipped=prob["horizon_clipped"],
                forecast_horizon=float((n - 1) * dt / tu), rollout_dt=dt)

    def evaluate(learner):
        k = y0s.shape[0]
        # scored on the first rollout, timed on later ones: the first pays one-off costs (JIT
        # compilation of the rollout, up to 85 % of a neural ODE's first call) that a user pays
        # once per model, not per query; the solver ladder is warmed up and timed likewise
        pred = learner.rollout(y0s, t_out, history)
        _, sec = best_time(lambda: learner.rollout(y0s, t_out, history))
        pred = _checked(pred, truth.shape, "rollout output")
        err = M.nrmse_curve(pred, truth, ctx.scale)  # (K, n)
        t_lt = t_out / tu
        thr = float(o["vpt_threshold"])
        vpts = np.array([M.valid_prediction_time(t_lt, e, thr) for e in err])
        censored = int(sum(bool(np.all(e <= thr)) for e in err))
        idx = np.unique(np.round(np.linspace(0, n - 1, int(o["curve_points"]))).astype(int))
        mean_err = err.mean(axis=0)
        rows = [MetricRow("nrmse", float(mean_err[i]), float(t_lt[i])) for i in idx]
        rows.append(MetricRow("nrmse_mean", float(np.mean(err))))  # over starts and every output time
        q25, q50, q75 = np.percentile(vpts, [25, 50, 75])
        rows += [MetricRow("valid_prediction_time", float(q50)),
                 MetricRow("valid_prediction_time_iqr", float(q75 - q25))]
        rows += [MetricRow(f"valid_prediction_time_start_{j}", float(v)) for j, v in enumerate(vpts)]
        rows.append(MetricRow("reference_horizon", ref_bound / tu))
        rows += _conserved_rows(system, pred)
        simulated = k * (n - 1) * dt / tu
        cost = {"inference_seconds": sec, "inference_seconds_per_lyapunov_time": sec / simulated}
        return rows, cost, {"vpt_censored": censored}

    return TaskSetup(data, info, evaluate)


def _setup_climate(ctx: TaskContext) -> TaskSetup:
    system, o, tu = ctx.system, ctx.options, ctx.time_unit
    data, info, dt = _training(ctx)
    m = _clip_history(o["history_steps"])
    hist_time = (m - 1) * dt
    length = o["climate_lyapunov_times"] * tu
    start = initial_conditions(system, 1, ctx.streams.climate)[0]
    ref = trusted_trajectory(system, start, hist_time + length, dt)
    history = ref.y[:m]
    truth = ref.y[m - 1:]
    n = truth.shape[0]
    t_out = dt * np.arange(n)
    lam = system.lyapunov_exponent
    chunk = max(1, int(round(o["lyapunov_chunk_lyapunov_times"] * tu / dt)))
    info = dict(info, climate_length=float((n - 1) * dt / tu), rollout_dt=dt, climate_reference_segments=ref.segments)

    def evaluate(learner):
        t0 = time.perf_counter()
        pred = learner.rollout(truth[:1], t_out, history[None])
        sec = time.perf_counter() - t0
        pred = _checked(pred, (1,) + truth.shape, "rollout output")[0]
        w = M.wasserstein_distances(pred, truth, ctx.scale)
        rows = [MetricRow(f"wasserstein_{name}", float(v)) for name, v in zip(system.state_names, w)]
        rows.append(MetricRow("wasserstein_mean", float(np.mean(w))))
        rows.append(MetricRow("spectrum_distance", M.spectrum_distance(pred, truth, dt, int(o["welch_nperseg"]))))

        def probe(y0s, t, h):
            out = learner.rollout(y0s, t, h)
            return _checked(out, (y0s.shape[0], t.size, y0s.shape[1]), "rollout output")

        lam_s = M.surrogate_largest_lyapunov(probe, truth[0], history, dt, scale=ctx.scale,
                                             chunk_steps=chunk, n_chunks=int(o["lyapunov_chunks"]),
                                             delta=float(o["lyapunov_delta"]))
        extra = {"system_lyapunov_exponent": lam}
        if np.isfinite(lam_s):
            rows.append(MetricRow("surrogate_lyapunov_exponent", lam_s))
            if lam is not None and lam > 0:
                rows.append(MetricRow("lyapunov_exponent_error", abs(lam_s - lam) / lam))
        else:  # the perturbation vanished exactly: a contracting model with no finite exponent
            extra["surrogate_lyapunov_note"] = "perturbation collapsed to zero; exponent -inf, no row"
        rows += _conserved_rows(system, pred[None])
        cost = {"inference_seconds": sec, "inference_seconds_per_lyapunov_time": sec / ((n - 1) * dt / tu)}
        return rows, cost, extra

    return TaskSetup(data, info, evaluate)


def expected_samples(ctx: TaskContext) -> tuple[int, int]:
    """(samples the learner will see, sample-grid size), computed without integrating anything."""
    o = ctx.options
    key = "window_lyapunov_times" if ctx.task in ("reconstruct", "identify") else "train_lyapunov_times"
    n = int(round(o[key] * ctx.time_unit / float(ctx.system.sample_dt))) + 1
    if ctx.regular:
        stride = max(1, int(round(1.0 / ctx.fraction)))
        return (n + stride - 1) // stride, n
    return int(round(ctx.fraction * n)), n


def setup_task(ctx: TaskContext, unknown: tuple[str, ...] = ()) -> TaskSetup:
    """Build the data and the scorer of ``ctx.task``."""
    if ctx.task == "reconstruct":
        return _setup_reconstruct(ctx)
    if ctx.task == "forecast":
        return _setup_forecast(ctx)
    if ctx.task == "climate":
        return _setup_climate(ctx)
    if ctx.task == "identify":
        return _setup_identify(ctx, unknown)
    raise ValueError(f"unknown task {ctx.task!r} (valid: {', '.join(TASKS)})")
