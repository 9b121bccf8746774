"""The conformance kit: small checks that every learner must pass.

Modelled on scikit-learn's estimator checks: one small function per
property of the contract, a generator :func:`iter_checks` that yields
``(check_name, check)`` pairs, :func:`check_learner` that runs them all, and
:func:`parametrize_with_checks` for a plugin author's own pytest suite::

    from surrogates.conformance import parametrize_with_checks

    @parametrize_with_checks(["local_linear"])      # names, classes or instances
    def test_learner_conforms(check):
        check()

Each check fits the learner (a fresh clone; a few checks share one fitted
copy) on small problems the kit makes itself by integrating vector fields
written here (a damped linear rotation, Lorenz-63, a chain of three coupled
oscillators, the Hénon–Heiles system), and gives it the physics of the
levels it declares, following the harness's rules: ``none`` - data only
(plus the maps to canonical coordinates where the system has them);
``partial`` - the vector field with one named term removed; ``full`` - the
whole vector field, Hamiltonian and conserved quantities; ``identify`` -
the physics of the richest level declared with the first parameter replaced
by a guess 20 % off.

A check raises :class:`CheckFailed` (an ``AssertionError``) with a one-line
reason, or :class:`CheckSkipped` when it does not apply to the learner.

The budget checks measure time; they are kit checks with a stated factor
(:data:`BUDGET_FACTOR`, :data:`BUDGET_GRACE_S`), not test assertions on the
speed of a machine.

References
----------
L. Buitinck et al., "API design for machine learning software: experiences
from the scikit-learn project", ECML PKDD Workshop (2013).
"""

from __future__ import annotations

import copy
import functools
import inspect
import random
import time
from dataclasses import dataclass, field
from typing import Callable, Iterator

import jax
import numpy as np

from solvers import array_namespace

from .base import Learner
from .data import PHYSICS_LEVELS, Budget, Physics, TrainingData, Trajectory
from .errors import InvalidDataError, NotApplicableError, NotFittedError, OverBudgetError

__all__ = [
    "BUDGET_FACTOR",
    "BUDGET_GRACE_S",
    "BUDGET_ITERATIONS",
    "BUDGET_SECONDS",
    "CheckFailed",
    "CheckResult",
    "CheckSkipped",
    "PROBLEMS",
    "Problem",
    "check_learner",
    "iter_checks",
    "parametrize_with_checks",
]

#: ``fit`` with ``Budget(max_seconds=s)`` must return within ``BUDGET_FACTOR * s + BUDGET_GRACE_S``.
BUDGET_FACTOR = 3.0
#: Seconds allowed on top of a budget for set-up and compilation (common practice: JAX compiles take 0.05-2 s).
BUDGET_GRACE_S = 5.0
#: The seconds budget of :func:`check_budget_seconds`.
BUDGET_SECONDS = 1.0
#: The iterations budget of :func:`check_budget_iterations`; such a fit must return within ``BUDGET_GRACE_S``
#: times ``BUDGET_FACTOR``.
BUDGET_ITERATIONS = 2

#: Length of the history given to ``rollout`` and number of output times.
HISTORY = 16
N_OUT = 12
N_BATCH = 2


class CheckFailed(AssertionError):
    """A conformance check failed; the message is the one-line reason."""


class CheckSkipped(Exception):
    """A conformance check does not apply to this learner; the message says why."""


@dataclass(frozen=True)
class CheckResult:
    """Outcome of one check: ``passed`` is True for passed and skipped checks."""

    name: str
    passed: bool
    reason: str = ""
    skipped: bool = False


# =====================================================================
# The kit's own small problems (equations written here: the kit does not
# import the harness).
# =====================================================================

def _rotation(t, y, p, without=()):
    """Damped linear rotation in the (y0, y1) plane plus a decaying y2 (closed-form solvable)."""
    xp = array_namespace(y)
    c = 0.0 if "damping" in without else p["damping"]
    return xp.stack([-c * y[0] - p["omega"] * y[1], p["omega"] * y[0] - c * y[1], -p["decay"] * y[2]])


def _lorenz63(t, y, p, without=()):
    """Lorenz-63 (E. N. Lorenz, J. Atmos. Sci. 20, 130 (1963)); removable term: ``xz`` in dy/dt."""
    xp = array_namespace(y)
    xz = 0.0 if "xz" in without else 1.0
    x, yy, z = y[0], y[1], y[2]
    return xp.stack([p["sigma"] * (yy - x), x * (p["rho"] - xz * z) - yy, x * yy - p["beta"] * z])


def _chain(t, y, p, without=()):
    """Three unit masses on springs to ground, neighbours coupled, ends fixed; state (q1..q3, p1..p3)."""
    xp = array_namespace(y)
    q, mom = y[:3], y[3:]
    c = 0.0 if "coupling" in without else p["coupling"]
    qm = xp.stack([0.0 * q[0], q[0], q[1]])  # left neighbours (fixed end)
    qp = xp.stack([q[1], q[2], 0.0 * q[2]])  # right neighbours (fixed end)
    force = -p["stiffness"] * q - c * (2.0 * q - qm - qp)
    return xp.concatenate([mom, force])


def _chain_hamiltonian(z, p):
    xp = array_namespace(z)
    q, mom = z[:3], z[3:]
    springs = q[0] ** 2 + (q[1] - q[0]) ** 2 + (q[2] - q[1]) ** 2 + q[2] ** 2
    return 0.5 * xp.sum(mom ** 2) + 0.5 * p["stiffness"] * xp.sum(q ** 2) + 0.5 * p["coupling"] * springs


def _henon_heiles(t, y, p, without=()):
    """Hénon–Heiles (M. Hénon and C. Heiles, Astron. J. 69, 73 (1964)); state (x, y, px, py)."""
    xp = array_namespace(y)
    lam = 0.0 if "cubic" in without else p["lam"]
    x, yy, px, py = y[0], y[1], y[2], y[3]
    return xp.stack([px, py, -x - 2.0 * lam * x * yy, -yy - lam * (x ** 2 - yy ** 2)])


def _henon_heiles_hamiltonian(z, p):
    x, yy, px, py = z[0], z[1], z[2], z[3]
    return 0.5 * (px ** 2 + py ** 2) + 0.5 * (x ** 2 + yy ** 2) + p["lam"] * (x ** 2 * yy - yy ** 3 / 3.0)


def _identity(y, p):
    return y


@dataclass(frozen=True)
class Problem:
    """A small well-posed problem: a vector field, parameters, a start state and a sampling."""

    name: str
    vector_field: Callable
    params: dict
    y0: tuple
    dt: float
    n_train: int
    removable: str
    hamiltonian: Callable | None = None
    state_names: tuple = ()
    extra: dict = field(default_factory=dict)

    @property
    def dim(self) -> int:
        return len(self.y0)

    @property
    def n_total(self) -> int:
        return self.n_train + 2 * N_OUT + 8

    def trajectory(self) -> tuple[np.ndarray, np.ndarray]:
        """Times and states of the integrated trajectory (train part first, then test part)."""
        return _integrate(self.name)

    def data(self, n: int | None = None) -> TrainingData:
        t, y = self.trajectory()
        n = self.n_train if n is None else n
        return TrainingData.from_arrays(t[:n].copy(), y[:n].copy())

    def physics(self, level: str, unknown: tuple = ()) -> Physics:
        canon = dict(to_canonical=_identity, from_canonical=_identity) if self.hamiltonian else {}
        if level == "none" and not unknown:
            return Physics(**canon)
        params = dict(self.params)
        for u in unknown:
            params[u] = params[u] * 1.2  # the harness's default guess: 20 % off
        if level == "none":
            return Physics(params=params, unknown=tuple(unknown), **canon)
        f = self.vector_field if level == "full" else functools.partial(self.vector_field, without=(self.removable,))
        ham, conserved = None, {}
        if level == "full" and not unknown and self.hamiltonian is not None:
            ham = self.hamiltonian
            conserved = {"energy": self.hamiltonian}
        return Physics(level=level, vector_field=f, params=params, unknown=tuple(unknown),
                       removed_term=self.removable if level == "partial" else None,
                       hamiltonian=ham, conserved=conserved, **canon)


PROBLEMS: dict[str, Problem] = {
    "rotation": Problem("rotation", _rotation, {"omega": 1.0, "damping": 0.1, "decay": 0.2},
                        (1.0, 0.5, 2.0), 0.1, 150, "damping"),
    "lorenz63": Problem("lorenz63", _lorenz63, {"sigma": 10.0, "rho": 28.0, "beta": 8.0 / 3.0},
                        (-8.0, 7.0, 27.0), 0.02, 250, "xz"),
    "chain": Problem("chain", _chain, {"stiffness": 1.0, "coupling": 0.5},
                     (1.0, 0.0, -0.5, 0.0, 0.4, 0.2), 0.1, 150, "coupling", hamiltonian=_chain_hamiltonian),
    "henon_heiles": Problem("henon_heiles", _henon_heiles, {"lam": 1.0}, (0.0, 0.1, 0.25, 0.1), 0.1, 150,
                            "cubic", hamiltonian=_henon_heiles_hamiltonian),
}


@functools.lru_cache(maxsize=None)
def _integrate(name: str) -> tuple[np.ndarray, np.ndarray]:
    from solvers.scipy_ivp import solve_scipy

    pb = PROBLEMS[name]
    t = pb.dt * np.arange(pb.n_total)
    sol = solve_scipy(pb.vector_field, (0.0, float(t[-1])), np.asarray(pb.y0, float), pb.params, method="DOP853",
                      t_eval=t, rtol=1e-11, atol=1e-12)
    if not sol.success:  # pragma: no cover - the problems are smooth and short
        raise RuntimeError(f"conformance problem {name} failed to integrate: {sol.message}")
    t.setflags(write=False)
    y = np.asarray(sol.y, float)
    y.setflags(write=False)
    return t, y


# =====================================================================
# helpers
# =====================================================================

def _caps(learner):
    return type(learner).capabilities


def _label(learner) -> str:
    return type(learner).__name__


def _base_problem(learner) -> Problem:
    return PROBLEMS["henon_heiles"] if _caps(learner).needs_hamiltonian else PROBLEMS["rotation"]


def _lowest_level(learner) -> str:
    for lvl in PHYSICS_LEVELS:
        if lvl in _caps(learner).physics:
            return lvl
    raise CheckFailed(f"{_label(learner)} declares no physics level")


def _richest_level(learner) -> str:
    for lvl in reversed(PHYSICS_LEVELS):
        if lvl in _caps(learner).physics:
            return lvl
    raise CheckFailed(f"{_label(learner)} declares no physics level")


def _identify_only(learner) -> bool:
    return _caps(learner).tasks == frozenset({"identify"})


def _fit_physics(learner, pb: Problem, level: str | None = None) -> Physics:
    if _identify_only(learner):
        return pb.physics(level or _richest_level(learner), unknown=(next(iter(pb.params)),))
    return pb.physics(level or _lowest_level(learner))


def _fit(learner, pb: Problem, *, level=None, seed=0, budget=None, data=None):
    """Fit a fresh clone; returns it."""
    model = learner.clone()
    out = model.fit(data if data is not None else pb.data(), _fit_physics(model, pb, level), budget, seed)
    if out is not model:
        raise CheckFailed(f"{_label(learner)}.fit returned {type(out).__name__}, not self")
    return model


_FITTED: dict = {}


def _fitted(learner, pb: Problem):
    """A fitted clone on ``pb`` at the lowest level, shared by the read-only checks (small cache)."""
    key = (type(learner), repr(learner.get_params()), pb.name)
    if key not in _FITTED:
        if len(_FITTED) >= 4:
            _FITTED.pop(next(iter(_FITTED)))
        _FITTED[key] = _fit(learner, pb)
    return _FITTED[key]


def _rollout_inputs(pb: Problem):
    """Start states (B, d), output times (n,) and histories (B, m, d) from the test part of the trajectory."""
    t, y = pb.trajectory()
    starts = [pb.n_train + 2 + i * 5 for i in range(N_BATCH)]
    y0 = np.stack([y[s] for s in starts])
    hist = np.stack([y[s - HISTORY + 1: s + 1] for s in starts])
    times = t[starts[0]: starts[0] + N_OUT].copy()
    return y0, times, hist


def _predict_times(pb: Problem) -> np.ndarray:
    t, _ = pb.trajectory()
    idx = np.linspace(2, pb.n_train - 3, 9).astype(int)
    return 0.5 * (t[idx] + t[idx + 1])


def _outputs(model, pb: Problem, unknown=()) -> dict:
    """Everything the fitted model answers for its declared tasks."""
    tasks = _caps(model).tasks
    out = {}
    if "reconstruct" in tasks:
        out["predict"] = model.predict(_predict_times(pb))
    if tasks & {"forecast", "climate"}:
        y0, times, hist = _rollout_inputs(pb)
        out["rollout"] = model.rollout(y0, times, hist)
    if "identify" in tasks and unknown:
        out["identified"] = model.identified_params()
    return out


def _identify_fit(learner, pb: Problem, seed=0):
    unknown = (next(iter(pb.params)),)
    model = learner.clone()
    model.fit(pb.data(), pb.physics(_richest_level(learner), unknown=unknown), None, seed)
    return model, unknown


def _equal(a, b) -> bool:
    """Exact equality of hyper-parameter values and outputs (arrays, nested containers)."""
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(_equal(a[k], b[k]) for k in a)
    if isinstance(a, (list, tuple)) and isinstance(b, (list, tuple)):
        return type(a) is type(b) and len(a) == len(b) and all(_equal(x, y) for x, y in zip(a, b))
    if isinstance(a, (np.ndarray, jax.Array)) or isinstance(b, (np.ndarray, jax.Array)):
        a, b = np.asarray(a), np.asarray(b)
        return a.shape == b.shape and bool(np.array_equal(a, b, equal_nan=True))
    if isinstance(a, float) and isinstance(b, float) and np.isnan(a) and np.isnan(b):
        return True
    try:
        return bool(a == b)
    except Exception:
        return a is b


def _expect(exc_types, fn, what: str):
    """``fn()`` must raise one of ``exc_types``; returns the exception."""
    try:
        fn()
    except exc_types as exc:
        return exc
    except Exception as exc:
        names = " or ".join(e.__name__ for e in (exc_types if isinstance(exc_types, tuple) else (exc_types,)))
        raise CheckFailed(f"{what} raised {type(exc).__name__} ({_one_line(exc)}), expected {names}") from None
    names = " or ".join(e.__name__ for e in (exc_types if isinstance(exc_types, tuple) else (exc_types,)))
    raise CheckFailed(f"{what} did not raise {names}")


def _one_line(exc) -> str:
    text = str(exc).strip()
    return text.splitlines()[0] if text else type(exc).__name__


def _check_forecasting(learner):
    if not (_caps(learner).tasks & {"forecast", "climate"}):
        raise CheckSkipped("the learner does not forecast")


def _capture_global_state() -> dict:
    return {
        "jax.config": dict(jax.config.values),
        "numpy errstate": np.geterr(),
        "numpy RandomState": np.random.get_state(),
        "python random": random.getstate(),
    }


def _same_np_state(a, b) -> bool:
    return a[0] == b[0] and np.array_equal(a[1], b[1]) and tuple(a[2:]) == tuple(b[2:])


def _diff_global_state(before: dict, after: dict) -> list[str]:
    changed = []
    for k, v in before["jax.config"].items():
        if not _equal(v, after["jax.config"].get(k, v)):
            changed.append(f"jax.config.{k} ({v!r} -> {after['jax.config'].get(k)!r})")
    for k in ("numpy errstate", "python random"):
        if before[k] != after[k]:
            changed.append(k)
    if not _same_np_state(before["numpy RandomState"], after["numpy RandomState"]):
        changed.append("numpy global RandomState (np.random.*)")
    return changed


# =====================================================================
# the checks: one small function per property
# =====================================================================

def check_constructor_stores_only_params(learner):
    """``__init__`` stores exactly its keyword hyper-parameters, under their names, and nothing ending in ``_``."""
    cls = type(learner)
    try:
        names = cls._param_names()
    except TypeError as exc:
        raise CheckFailed(_one_line(exc)) from None
    sig = inspect.signature(cls.__init__)
    missing_default = [n for n in names if sig.parameters[n].default is inspect.Parameter.empty]
    if missing_default:
        raise CheckFailed(f"hyper-parameters without a working default: {', '.join(missing_default)}")
    fresh = cls()
    attrs = set(vars(fresh))
    fitted_like = sorted(a for a in attrs if a.endswith("_") and not a.startswith("__"))
    if fitted_like:
        raise CheckFailed(f"__init__ sets fitted-style attributes: {', '.join(fitted_like)}")
    extra = sorted(attrs - set(names))
    if extra:
        raise CheckFailed(f"__init__ stores attributes that are not hyper-parameters: {', '.join(extra)}")
    absent = sorted(set(names) - attrs)
    if absent:
        raise CheckFailed(f"__init__ does not store hyper-parameters under their names: {', '.join(absent)}")
    for n in names:
        if not _equal(getattr(fresh, n), sig.parameters[n].default):
            raise CheckFailed(f"__init__ changes hyper-parameter {n!r} ({sig.parameters[n].default!r} -> "
                              f"{getattr(fresh, n)!r}); store it as given")


def check_get_params_round_trip(learner):
    """``type(l)(**l.get_params())`` has the same parameters; ``set_params`` rejects an unknown name."""
    params = learner.get_params()
    rebuilt = type(learner)(**copy.deepcopy(params))
    if not _equal(rebuilt.get_params(), params):
        raise CheckFailed(f"get_params does not round-trip: {params!r} -> {rebuilt.get_params()!r}")
    _expect(ValueError, lambda: learner.clone().set_params(no_such_hyperparameter_=1),
            "set_params with an unknown name")


def check_clone(learner):
    """``clone`` gives a new, unfitted learner with equal parameters, also from a fitted one."""
    c = learner.clone()
    if c is learner or type(c) is not type(learner):
        raise CheckFailed("clone must return a new object of the same class")
    if not _equal(c.get_params(), learner.get_params()):
        raise CheckFailed("clone does not have the same hyper-parameters")
    fitted = _fitted(learner, _base_problem(learner))
    c2 = fitted.clone()
    left = sorted(a for a in vars(c2) if a.endswith("_") and not a.startswith("__"))
    if left:
        raise CheckFailed(f"a clone of a fitted learner carries fitted attributes: {', '.join(left)}")
    if not _equal(c2.get_params(), fitted.get_params()):
        raise CheckFailed("a clone of a fitted learner has different hyper-parameters")


def check_init_no_arrays_or_random(learner):
    """The constructor holds no arrays and draws no random numbers."""
    before = (np.random.get_state(), random.getstate())
    cls = type(learner)
    a, b = cls(**copy.deepcopy(learner.get_params())), cls(**copy.deepcopy(learner.get_params()))
    after = (np.random.get_state(), random.getstate())
    if not (_same_np_state(before[0], after[0]) and before[1] == after[1]):
        raise CheckFailed("the constructor draws from a global random generator")
    for n, v in a.get_params().items():
        if isinstance(v, (np.ndarray, jax.Array)):
            raise CheckFailed(f"hyper-parameter {n!r} is an array; the constructor stores plain values")
    if not _equal(a.get_params(), b.get_params()):
        raise CheckFailed("two constructions with the same arguments differ")


def check_fit_returns_self(learner):
    """``fit`` returns ``self``, sets ``is_fitted_`` and learned attributes ending in ``_``, keeps the parameters."""
    pb = _base_problem(learner)
    model = learner.clone()
    params = copy.deepcopy(model.get_params())
    out = model.fit(pb.data(), _fit_physics(model, pb), None, 0)
    if out is not model:
        raise CheckFailed(f"fit returned {type(out).__name__}, not self")
    if not getattr(model, "is_fitted_", False):
        raise CheckFailed("fit did not set is_fitted_ (override _fit, not fit, or call the base fit)")
    learned = sorted(a for a in vars(model) if a.endswith("_") and a not in ("is_fitted_", "dim_"))
    if not learned:
        raise CheckFailed("fit set no learned attribute ending in '_'")
    if not _equal(model.get_params(), params):
        raise CheckFailed("fit changed the hyper-parameters")


def check_fit_does_not_modify_data(learner):
    """``fit`` leaves the training arrays as they were."""
    pb = _base_problem(learner)
    data = pb.data()
    copies = [(tr.t.copy(), tr.y.copy()) for tr in data.trajectories]
    model = learner.clone()
    model.fit(data, _fit_physics(model, pb), None, 0)
    for (t, y), tr in zip(copies, data.trajectories):
        if not (np.array_equal(t, tr.t) and np.array_equal(y, tr.y)):
            raise CheckFailed("fit modified the training data in place")


def check_refit_replaces(learner):
    """A second ``fit`` replaces the first: a refitted learner matches a fresh one on the new data."""
    a = _base_problem(learner)
    b = PROBLEMS["chain"]
    model = _fit(learner, a)
    model.fit(b.data(), _fit_physics(model, b), None, 0)
    if getattr(model, "dim_", None) != b.dim:
        raise CheckFailed(f"after refitting on {b.dim}-D data dim_ is {getattr(model, 'dim_', None)}")
    again = _outputs(model, b)
    for k, v in again.items():
        if np.asarray(v).shape[-1] != b.dim:
            raise CheckFailed(f"after refitting on {b.dim}-D data {k} has last dimension {np.asarray(v).shape[-1]}")
    if _caps(learner).deterministic:
        fresh = _outputs(_fit(learner, b), b)
        for k in fresh:
            if not _equal(fresh[k], again[k]):
                raise CheckFailed(f"{k} after a refit differs from a fresh fit on the same data (state leaks)")


def check_unfitted_raises(learner):
    """Using an unfitted learner raises ``NotFittedError`` with a message that says to fit."""
    model = learner.clone()
    pb = _base_problem(learner)
    tasks = _caps(learner).tasks
    calls = {"n_parameters": lambda: model.n_parameters()}
    if "reconstruct" in tasks:
        calls["predict"] = lambda: model.predict(_predict_times(pb))
    if tasks & {"forecast", "climate"}:
        y0, times, hist = _rollout_inputs(pb)
        calls["rollout"] = lambda: model.rollout(y0, times, hist)
    if "identify" in tasks:
        calls["identified_params"] = lambda: model.identified_params()
    for name, call in calls.items():
        exc = _expect(NotFittedError, call, f"{name} before fit")
        if "fit" not in str(exc):
            raise CheckFailed(f"{name} before fit: the message {str(exc)!r} does not say to call fit")


def check_deterministic(learner):
    """Same seed ⇒ identical outputs (for learners declaring ``deterministic``)."""
    if not _caps(learner).deterministic:
        raise CheckSkipped("the learner declares deterministic=False")
    pb = _base_problem(learner)
    first = _outputs(_fit(learner, pb, seed=7), pb)
    second = _outputs(_fit(learner, pb, seed=7), pb)
    for k in first:
        if not _equal(first[k], second[k]):
            raise CheckFailed(f"two fits with seed 7 give different {k}")
    if "identify" in _caps(learner).tasks:
        m1, unknown = _identify_fit(learner, pb, seed=7)
        m2, _ = _identify_fit(learner, pb, seed=7)
        if not _equal(m1.identified_params(), m2.identified_params()):
            raise CheckFailed("two fits with seed 7 identify different parameters")


def check_output_shapes_and_dtypes(learner):
    """predict: (n, d) float64; rollout: (B, n, d) float64; identified_params: dict of the unknown names -> float."""
    pb = _base_problem(learner)
    model = _fitted(learner, pb)
    out = _outputs(model, pb)
    d = pb.dim
    if "predict" in out:
        p = out["predict"]
        n = _predict_times(pb).size
        if not isinstance(p, np.ndarray) or p.shape != (n, d) or p.dtype != np.float64:
            raise CheckFailed(f"predict returned {type(p).__name__} {getattr(p, 'shape', '')} "
                              f"{getattr(p, 'dtype', '')}, expected float64 ({n}, {d})")
    if "rollout" in out:
        r = out["rollout"]
        _, times, _ = _rollout_inputs(pb)
        if not isinstance(r, np.ndarray) or r.shape != (N_BATCH, times.size, d) or r.dtype != np.float64:
            raise CheckFailed(f"rollout returned {type(r).__name__} {getattr(r, 'shape', '')} "
                              f"{getattr(r, 'dtype', '')}, expected float64 ({N_BATCH}, {times.size}, {d})")
    if "identify" in _caps(learner).tasks:
        m, unknown = _identify_fit(learner, pb)
        ip = m.identified_params()
        if not isinstance(ip, dict) or set(ip) != set(unknown):
            raise CheckFailed(f"identified_params returned {ip!r}, expected a dict with keys {list(unknown)}")
        if not all(isinstance(v, float) for v in ip.values()):
            raise CheckFailed(f"identified_params values must be floats, got {ip!r}")
    n = model.n_parameters()
    if not isinstance(n, int) or n < 0:
        raise CheckFailed(f"n_parameters returned {n!r}, expected an int >= 0")


def check_finite_output(learner):
    """On a small well-posed problem every output is finite."""
    pb = _base_problem(learner)
    out = _outputs(_fitted(learner, pb), pb)
    for k, v in out.items():
        vals = np.asarray(list(v.values()) if isinstance(v, dict) else v, dtype=float)
        if not np.all(np.isfinite(vals)):
            raise CheckFailed(f"{k} has non-finite values on the {pb.name} problem")
    if "identify" in _caps(learner).tasks:
        m, _ = _identify_fit(learner, pb)
        if not all(np.isfinite(v) for v in m.identified_params().values()):
            raise CheckFailed(f"identified_params are not finite on the {pb.name} problem")


def check_rollout_starts_at_y0(learner):
    """``rollout(y0, t)[:, 0]`` is ``y0``."""
    _check_forecasting(learner)
    pb = _base_problem(learner)
    y0, times, hist = _rollout_inputs(pb)
    r = _fitted(learner, pb).rollout(y0, times, hist)
    if not np.allclose(r[:, 0], y0, rtol=1e-12, atol=1e-12):
        raise CheckFailed(f"rollout[:, 0] differs from y0 by {np.max(np.abs(r[:, 0] - y0)):.3g}")


def check_rollout_without_history(learner):
    """``rollout`` without ``history`` either works or raises ``InvalidDataError`` (never another error)."""
    _check_forecasting(learner)
    pb = _base_problem(learner)
    y0, times, _ = _rollout_inputs(pb)
    try:
        r = _fitted(learner, pb).rollout(y0, times, None)
    except InvalidDataError:
        return
    except Exception as exc:
        raise CheckFailed(f"rollout without history raised {type(exc).__name__} ({_one_line(exc)}); "
                          "expected a result or InvalidDataError") from None
    if np.shape(r) != (N_BATCH, times.size, pb.dim):
        raise CheckFailed(f"rollout without history has shape {np.shape(r)}")


def _timed_fit(learner, budget):
    pb = _base_problem(learner)
    model = learner.clone()
    start = time.perf_counter()
    try:
        model.fit(pb.data(), _fit_physics(model, pb), budget, 0)
    except OverBudgetError:
        pass  # an allowed answer to a budget it cannot meet
    return time.perf_counter() - start


def check_budget_iterations(learner):
    """``Budget(max_iterations=BUDGET_ITERATIONS)``: fit returns within ``BUDGET_FACTOR * BUDGET_GRACE_S`` seconds."""
    limit = BUDGET_FACTOR * BUDGET_GRACE_S
    took = _timed_fit(learner, Budget(max_iterations=BUDGET_ITERATIONS))
    if took > limit:
        raise CheckFailed(f"fit with max_iterations={BUDGET_ITERATIONS} took {took:.2f} s "
                          f"(allowed {limit:.1f} s = {BUDGET_FACTOR:g} x {BUDGET_GRACE_S:g} s)")


def check_budget_seconds(learner):
    """``Budget(max_seconds=s)``: fit returns within ``BUDGET_FACTOR * s + BUDGET_GRACE_S`` seconds."""
    s = BUDGET_SECONDS
    limit = BUDGET_FACTOR * s + BUDGET_GRACE_S
    took = _timed_fit(learner, Budget(max_seconds=s))
    if took > limit:
        raise CheckFailed(f"fit with max_seconds={s:g} took {took:.2f} s "
                          f"(allowed {limit:.1f} s = {BUDGET_FACTOR:g} x {s:g} s + {BUDGET_GRACE_S:g} s)")


def _check_dimension(learner, pb: Problem):
    try:
        model = _fit(learner, pb)
        out = _outputs(model, pb)
    except CheckFailed:
        raise
    except Exception as exc:
        raise CheckFailed(f"on the {pb.dim}-D {pb.name} problem: {type(exc).__name__}: {_one_line(exc)}") from None
    for k, v in out.items():
        v = np.asarray(v)
        if v.shape[-1] != pb.dim or not np.all(np.isfinite(v)):
            raise CheckFailed(f"on the {pb.dim}-D {pb.name} problem {k} has shape {v.shape} "
                              f"or non-finite values")


def check_dimension_3(learner):
    """Works on a 3-D system (Lorenz-63 over two Lyapunov times)."""
    if _caps(learner).needs_hamiltonian:
        raise CheckSkipped("needs canonical coordinates, which a 3-D system lacks")
    _check_dimension(learner, PROBLEMS["lorenz63"])


def check_dimension_6(learner):
    """Works on a 6-D system (a chain of three coupled oscillators, canonical coordinates)."""
    _check_dimension(learner, PROBLEMS["chain"])


def check_global_state_untouched(learner):
    """fit and predictions leave jax.config, numpy errstate and the global numpy / python random states alone."""
    pb = _base_problem(learner)
    before = _capture_global_state()
    model = _fit(learner, pb)
    _outputs(model, pb)
    changed = _diff_global_state(before, _capture_global_state())
    if changed:
        raise CheckFailed(f"global state changed by fit/predict: {', '.join(changed)}")


def check_rollout_wrong_dimension(learner):
    """Start states of the wrong dimension raise ``InvalidDataError``."""
    _check_forecasting(learner)
    pb = _base_problem(learner)
    y0, times, hist = _rollout_inputs(pb)
    model = _fitted(learner, pb)
    bad = np.concatenate([y0, y0[:, :1]], axis=1)
    _expect(InvalidDataError, lambda: model.rollout(bad, times, None), f"rollout with {pb.dim + 1}-D start states")
    bad_hist = np.concatenate([hist, hist[:, :, :1]], axis=2)
    _expect(InvalidDataError, lambda: model.rollout(y0, times, bad_hist), f"rollout with {pb.dim + 1}-D history")


def check_nan_training_data(learner):
    """Training data holding NaN raise ``InvalidDataError`` (also when the array was changed after validation)."""
    pb = _base_problem(learner)
    t, y = pb.trajectory()
    yy = y[:pb.n_train].copy()
    yy[5, 0] = np.nan
    _expect(InvalidDataError, lambda: TrainingData.from_arrays(t[:pb.n_train].copy(), yy), "TrainingData with NaN")
    data = pb.data()
    data.trajectories[0].y[5, 0] = np.nan  # arrays are mutable: validation at construction is not enough
    model = learner.clone()
    _expect(InvalidDataError, lambda: model.fit(data, _fit_physics(model, pb), None, 0), "fit on data with NaN")


def check_too_few_samples(learner):
    """Fewer samples than ``capabilities.min_samples`` raise ``InvalidDataError``."""
    m = _caps(learner).min_samples
    if m <= 1:
        raise CheckSkipped("min_samples is 1")
    pb = _base_problem(learner)
    model = learner.clone()
    _expect(InvalidDataError, lambda: model.fit(pb.data(m - 1), _fit_physics(model, pb), None, 0),
            f"fit on {m - 1} samples (min_samples={m})")


def check_unsupported_physics(learner):
    """A physics level the learner does not declare raises ``NotApplicableError``."""
    missing = [lvl for lvl in PHYSICS_LEVELS if lvl not in _caps(learner).physics]
    if not missing:
        raise CheckSkipped("the learner declares every physics level")
    pb = _base_problem(learner)
    for lvl in missing:
        model = learner.clone()
        _expect(NotApplicableError, lambda: model.fit(pb.data(), pb.physics(lvl), None, 0),
                f"fit at physics level {lvl!r}")


def check_irregular_sampling(learner):
    """A learner declaring ``needs_regular_sampling`` rejects irregular samples with ``InvalidDataError``;
    any other learner fits them."""
    pb = _base_problem(learner)
    t, y = pb.trajectory()
    keep = np.ones(pb.n_train, bool)
    keep[[3, 10, 11, 40, 41, 42, 77, 101]] = False  # fixed, irregular gaps
    data = TrainingData((Trajectory(t[:pb.n_train][keep].copy(), y[:pb.n_train][keep].copy()),))
    model = learner.clone()
    if _caps(learner).needs_regular_sampling:
        _expect(InvalidDataError, lambda: model.fit(data, _fit_physics(model, pb), None, 0),
                "fit on irregular samples")
        return
    model.fit(data, _fit_physics(model, pb), None, 0)
    for k, v in _outputs(model, pb).items():
        if not np.all(np.isfinite(np.asarray(v))):
            raise CheckFailed(f"{k} is not finite after a fit on irregular samples")


def check_physics_levels(learner):
    """Every declared physics level fits and gives finite outputs."""
    pb = _base_problem(learner)
    if _identify_only(learner):
        raise CheckSkipped("identify-only learners are checked in the identify checks")
    for lvl in sorted(_caps(learner).physics, key=PHYSICS_LEVELS.index):
        model = _fit(learner, pb, level=lvl)
        for k, v in _outputs(model, pb).items():
            if not np.all(np.isfinite(np.asarray(v))):
                raise CheckFailed(f"{k} is not finite at physics level {lvl!r}")


def check_identify_applicability(learner):
    """A learner that does not identify rejects ``Physics.unknown`` with ``NotApplicableError``."""
    if "identify" in _caps(learner).tasks:
        raise CheckSkipped("the learner identifies parameters")
    pb = _base_problem(learner)
    model = learner.clone()
    phys = pb.physics(_richest_level(learner), unknown=(next(iter(pb.params)),))
    _expect(NotApplicableError, lambda: model.fit(pb.data(), phys, None, 0), "fit with unknown parameters")


_CHECKS: tuple[Callable, ...] = (
    check_constructor_stores_only_params,
    check_get_params_round_trip,
    check_init_no_arrays_or_random,
    check_clone,
    check_fit_returns_self,
    check_fit_does_not_modify_data,
    check_refit_replaces,
    check_unfitted_raises,
    check_deterministic,
    check_output_shapes_and_dtypes,
    check_finite_output,
    check_rollout_starts_at_y0,
    check_rollout_without_history,
    check_budget_iterations,
    check_budget_seconds,
    check_dimension_3,
    check_dimension_6,
    check_global_state_untouched,
    check_rollout_wrong_dimension,
    check_nan_training_data,
    check_too_few_samples,
    check_unsupported_physics,
    check_irregular_sampling,
    check_physics_levels,
    check_identify_applicability,
)

CHECK_NAMES = tuple(c.__name__ for c in _CHECKS)
#: Checks that never fit the learner (cheap for any learner).
CHECKS_WITHOUT_FIT = ("constructor_stores_only_params", "get_params_round_trip", "init_no_arrays_or_random",
                      "unfitted_raises", "nan_training_data", "too_few_samples", "unsupported_physics",
                      "identify_applicability")
__all__ += list(CHECK_NAMES) + ["CHECK_NAMES", "CHECKS_WITHOUT_FIT"]


# =====================================================================
# running
# =====================================================================

def _resolve(learner_or_name, params=None) -> tuple[Learner, str]:
    """A learner instance and a label for it, from a name, ``module:Class``, class or instance."""
    if isinstance(learner_or_name, str):
        from .registry import make_learner
        from .testing import tiny_params

        kw = tiny_params(learner_or_name) if params is None else dict(params)
        return make_learner(learner_or_name, **kw), learner_or_name
    if isinstance(learner_or_name, type) and issubclass(learner_or_name, Learner):
        return learner_or_name(**dict(params or {})), learner_or_name.__name__
    if isinstance(learner_or_name, Learner):
        model = learner_or_name.clone()
        if params:
            model.set_params(**params)
        return model, type(model).__name__
    raise TypeError(f"expected a learner name, class or instance, got {type(learner_or_name).__name__}")


def iter_checks(learner) -> Iterator[tuple[str, Callable[[], None]]]:
    """Yield ``(check_name, check)``; ``check()`` raises :class:`CheckFailed` or :class:`CheckSkipped`.

    ``learner`` is an instance (its hyper-parameters are used), a class, a
    registered name (with its :data:`surrogates.testing.TINY_PARAMS`) or
    ``"module:Class"``.
    """
    model, _ = _resolve(learner)
    for check in _CHECKS:
        yield check.__name__.removeprefix("check_"), _as_check(check, model)


def _as_check(check, model):
    """``check(model)`` with any unexpected exception turned into :class:`CheckFailed` (chained)."""

    @functools.wraps(check)
    def run():
        try:
            check(model)
        except (CheckFailed, CheckSkipped):
            raise
        except Exception as exc:
            raise CheckFailed(f"{type(exc).__name__}: {_one_line(exc)}") from exc

    return run


def check_learner(learner_or_name, *, params=None) -> list[CheckResult]:
    """Run every check; returns one :class:`CheckResult` per check (never raises for a failed check).

    Parameters
    ----------
    learner_or_name : str, type or Learner
        A registered name or ``"module:Class"`` (built with ``params``, by
        default its entry in :data:`surrogates.testing.TINY_PARAMS`), a
        learner class, or an instance.
    params : dict, optional
        Hyper-parameters to use instead.
    """
    model, _ = _resolve(learner_or_name, params)
    results = []
    for name, check in iter_checks(model):
        try:
            check()
        except CheckSkipped as exc:
            results.append(CheckResult(name, True, _one_line(exc), skipped=True))
        except CheckFailed as exc:  # an unexpected error arrives here as "Type: message"
            results.append(CheckResult(name, False, _one_line(exc)))
        else:
            results.append(CheckResult(name, True, ""))
    _FITTED.clear()
    return results


def parametrize_with_checks(learners):
    """A ``pytest.mark.parametrize`` over every (learner, check) pair, with ids ``"<learner>-<check>"``.

    The decorated test takes one argument, ``check``, and calls it; a check
    that does not apply is reported as skipped.

    Examples
    --------
    >>> from surrogates.conformance import parametrize_with_checks
    >>> @parametrize_with_checks(["persistence"])
    ... def test_conforms(check):
    ...     check()
    """
    import pytest

    cases = []
    for item in learners:
        model, label = _resolve(item)
        for name, check in iter_checks(model):
            cases.append(pytest.param(_pytest_check(check), id=f"{label}-{name}"))
    return pytest.mark.parametrize("check", cases)


def _pytest_check(check):
    def run():
        import pytest

        try:
            check()
        except CheckSkipped as exc:
            pytest.skip(_one_line(exc))

    return run
