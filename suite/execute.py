"""Run one cell: build its data, fit the learner, score it, measure the cost.

:func:`run_cell` never raises for a learner's problem; every outcome is a
:class:`~suite.cell.CellOutcome` with one of :data:`~suite.cell.STATUSES`:

``not_applicable``
    The learner's declared capabilities exclude the cell (task, physics
    level, Hamiltonian, regular sampling impossible, fewer samples than
    ``min_samples``) — checked *before* any data are built — or the learner
    raised :class:`surrogates.NotApplicableError`. ``error`` holds the reason
    (the message alone, no exception type, no traceback).
``diverged``
    :class:`surrogates.DivergedError`, or an output with non-finite values
    (checked by the harness, not trusted to the learner).
``timeout``
    :class:`surrogates.OverBudgetError` (the runner also kills cells that
    run past their wall budget; that is its business, not this module's).
``failed``
    Any other exception, including outputs of the wrong shape. ``error`` is
    one line ``"<ExceptionType>: <message>"``; ``info["traceback"]`` holds the
    full traceback and ``info["stage"]`` the stage (``setup``, ``data``,
    ``fit``, ``evaluate``).

Budget
    The learner gets ``Budget(max_seconds=TRAIN_BUDGET_SHARE *
    spec.budget_seconds, max_iterations=spec.budget_iterations)``; the rest
    of the wall budget is left for building data and scoring.

Cost (``CellOutcome.cost``)
    ``train_seconds`` (wall), ``train_cpu_seconds`` (``time.process_time``,
    this process), ``inference_seconds`` and
    ``inference_seconds_per_lyapunov_time`` (per time unit of simulated time,
    summed over rollouts), ``n_parameters``, ``peak_memory_mb`` (``ru_maxrss``
    of this process; the runner's worker replaces it by the cell's own peak,
    reset before each cell, see :mod:`suite.executors.local`),
    ``data_seconds`` and ``total_seconds``.

Determinism
    Data come from :func:`suite.datasets.data_seed` (independent of the
    learner); the learner's seed is ``spec.derived_seed()``, passed to
    ``fit`` and also used to seed numpy's and Python's global generators.
    The same spec gives the same accuracy numbers.
"""

from __future__ import annotations

import random
import resource
import sys
import time
import traceback

import numpy as np

from surrogates import Budget, LearnerError, NotApplicableError

from .cell import CellOutcome, CellSpec, MetricRow
from .datasets import DataStreams, attractor_std, data_seed
from .physics import build_physics
from .tasks import (TASK_OPTION_DEFAULTS, TASKS, TaskContext, expected_samples, resolve_task_options, setup_task,
                    time_unit_kind)

__all__ = ["TASKS", "TASK_OPTION_DEFAULTS", "TRAIN_BUDGET_SHARE", "check_applicable", "run_cell"]

#: Share of ``spec.budget_seconds`` given to the learner's ``fit``.
TRAIN_BUDGET_SHARE = 0.7


def _learner_class(name: str):
    from surrogates.registry import learner_class

    return learner_class(name)


def _make_learner(name: str, params: dict):
    from surrogates.registry import make_learner

    return make_learner(name, **params)


def _one_line(exc: BaseException) -> str:
    msg = " ".join(str(exc).split())
    return f"{type(exc).__name__}: {msg}" if msg else type(exc).__name__


def _peak_memory_mb() -> float:
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    # Linux reports KiB, macOS bytes
    return rss / (1024.0 * 1024.0) if sys.platform == "darwin" else rss / 1024.0


def check_applicable(caps, system, task: str, physics: str) -> str | None:
    """The reason a learner with capabilities ``caps`` cannot run this cell, or None."""
    if task == "climate" and system.no_climate:
        return f"task climate does not apply to {system.name}: {system.no_climate}"
    if task == "identify" and physics == "none":
        return "task identify needs the equations: physics level full or partial"
    if task not in caps.tasks:
        return f"the learner does not do task {task} (it does: {', '.join(sorted(caps.tasks)) or 'nothing'})"
    if physics not in caps.physics:
        return f"the learner cannot use physics level {physics} (it uses: {', '.join(sorted(caps.physics))})"
    if physics == "partial" and not system.terms:
        return f"{system.name} has no removable term for physics level partial"
    if caps.needs_hamiltonian and system.hamiltonian_form is None:
        return f"the learner needs canonical coordinates and {system.name} has none"
    return None


def run_cell(spec: CellSpec) -> CellOutcome:
    """Run one cell and return its outcome (never raises for learner problems)."""
    t_start = time.perf_counter()
    info: dict = {"stage": "setup"}
    cost: dict = {}
    try:
        status, rows, error = _run(spec, info, cost)
    except Exception as exc:  # every failure becomes a row; the sweep goes on
        status = exc.status if isinstance(exc, LearnerError) else "failed"
        rows = []
        if status == "not_applicable":  # a reason, not a fault: the message alone
            error = " ".join(str(exc).split()) or type(exc).__name__
        else:
            error = _one_line(exc)
            info["traceback"] = traceback.format_exc()
    cost["total_seconds"] = time.perf_counter() - t_start
    cost["peak_memory_mb"] = _peak_memory_mb()
    if status == "ok":
        info.pop("stage", None)
    return CellOutcome(status=status, metrics=rows, cost=cost, error=error, info=info)


def _run(spec: CellSpec, info: dict, cost: dict):
    from suite.systems import get_system

    if spec.task not in TASKS:
        raise ValueError(f"unknown task {spec.task!r} (valid: {', '.join(TASKS)})")
    options = resolve_task_options(spec.task, spec.task_options)
    system = get_system(spec.system, **spec.system_params)
    cls = _learner_class(spec.learner)
    caps = cls.capabilities
    info.update(time_unit=float(system.time_unit), time_unit_kind=time_unit_kind(system),
                task_options=options)
    reason = check_applicable(caps, system, spec.task, spec.physics)
    if reason:
        return "not_applicable", [], reason
    physics, pinfo = build_physics(system, spec.physics, spec.task, options)
    info.update(pinfo)
    learner = _make_learner(spec.learner, dict(spec.learner_params))

    if not 0.0 < float(spec.fraction) <= 1.0:
        raise ValueError(f"sampling fraction must be in (0, 1], got {spec.fraction:g}")
    if not (np.isfinite(float(spec.noise)) and float(spec.noise) >= 0.0):
        raise ValueError(f"noise level must be a non-negative number, got {spec.noise!r}")
    ctx = TaskContext(system=system, task=spec.task, options=options, fraction=float(spec.fraction),
                      noise=float(spec.noise), scale=None, streams=DataStreams(data_seed(spec)),
                      regular=bool(caps.needs_regular_sampling), min_samples=int(caps.min_samples))
    n_seen, n_grid = expected_samples(ctx)  # no integration needed: decided before building data
    if n_seen < max(ctx.min_samples, 2):
        return ("not_applicable", [], f"fraction {spec.fraction:g} of {n_grid} samples gives {n_seen} "
                f"training samples; the learner needs at least {max(ctx.min_samples, 2)}")

    info["stage"] = "data"
    t0 = time.perf_counter()
    ctx.scale = attractor_std(system)
    try:
        setup = setup_task(ctx, tuple(pinfo.get("unknown", ())))
    except NotApplicableError as exc:
        return "not_applicable", [], str(exc)
    cost["data_seconds"] = time.perf_counter() - t0
    info.update(setup.info)

    info["stage"] = "fit"
    seed = spec.derived_seed()
    np.random.seed(seed % (2**32))
    random.seed(seed)
    max_s = None if spec.budget_seconds is None else TRAIN_BUDGET_SHARE * float(spec.budget_seconds)
    budget = Budget(max_iterations=spec.budget_iterations, max_seconds=max_s)
    w0, c0 = time.perf_counter(), time.process_time()
    learner.fit(setup.data, physics=physics, budget=budget, seed=seed)
    cost["train_seconds"] = time.perf_counter() - w0
    cost["train_cpu_seconds"] = time.process_time() - c0
    try:
        cost["n_parameters"] = int(learner.n_parameters())
    except Exception as exc:  # a cost figure; its absence does not fail the cell
        cost["n_parameters"] = None
        info["n_parameters_error"] = _one_line(exc)

    info["stage"] = "evaluate"
    rows, ecost, einfo = setup.evaluate(learner)
    cost.update(ecost)
    info.update(einfo)
    rows = [MetricRow(r.metric, float(r.value), None if r.horizon is None else float(r.horizon)) for r in rows]
    return "ok", rows, ""
