"""run_cell end to end on Lorenz-63: every task, every status, determinism.

Test-local learners are named to the registry as ``<this module>:<Class>``.
Task options are shrunk so that each cell takes about a second.
"""

from __future__ import annotations

import dataclasses
import time

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from suite import tasks as T
from suite.cell import CellSpec
from suite.execute import TASK_OPTION_DEFAULTS, TASKS, TRAIN_BUDGET_SHARE, run_cell
from suite.physics import build_physics
from suite.systems import get_system
from surrogates import (Capabilities, DivergedError, Learner, NotApplicableError, OverBudgetError)

HERE = __name__

SMALL = {
    "reconstruct": {"window_lyapunov_times": 2.0},
    "forecast": {"train_lyapunov_times": 3.0, "n_starts": 3, "history_steps": 5,
                 "horizon_lyapunov_times": 2.0, "curve_points": 10},
    "climate": {"train_lyapunov_times": 3.0, "climate_lyapunov_times": 8.0, "history_steps": 5,
                "lyapunov_chunks": 12, "lyapunov_chunk_lyapunov_times": 0.5},
    "identify": {"window_lyapunov_times": 2.0},
}


TINY_FORECAST = {"train_lyapunov_times": 1.0, "n_starts": 1, "history_steps": 2, "horizon_lyapunov_times": 0.5}


def spec(task, learner, **kw):
    kw.setdefault("task_options", SMALL[task])
    return CellSpec("lorenz63", task, learner, **kw)


def rows(outcome, horizon=False):
    return {r.metric: r.value for r in outcome.metrics if (r.horizon is not None) == horizon}


# ------------------------------------------------------------------ learners
class EquationLearner(Learner):
    """Rolls out the vector field it is given (full physics): a perfect model up to integration error.

    References
    ----------
    E. Hairer, S. P. Nørsett, G. Wanner, Solving ODEs I (1993): DOP853.
    """

    capabilities = Capabilities(tasks={"forecast", "climate", "identify"}, physics={"full", "partial"})
    reference = "Hairer, Nørsett, Wanner (1993)"

    def __init__(self, rtol=1e-10):
        self.rtol = rtol

    def _fit(self, data, physics, budget, seed):
        self.field_, self.params_, self.unknown_ = physics.vector_field, dict(physics.params), physics.unknown

    def _rollout(self, y0, t, history):
        out = []
        for y in y0:
            s = solve_ivp(lambda tt, yy: self.field_(tt, yy, self.params_), (t[0], t[-1]), y, method="DOP853",
                          t_eval=t, rtol=self.rtol, atol=self.rtol)
            out.append(s.y.T)
        return np.stack(out)

    def _identified_params(self):
        return {u: self.params_[u] for u in self.unknown_}  # the initial guess, unchanged

    def _n_parameters(self):
        return 0


class _Base(Learner):
    """Persistence-like base for the misbehaving learners (forecast only)."""

    capabilities = Capabilities(tasks={"forecast", "climate"})
    reference = "test double"

    def __init__(self, offset=0.0):
        self.offset = offset

    def _fit(self, data, physics, budget, seed):
        self.seed_ = seed

    def _rollout(self, y0, t, history):
        return np.repeat(y0[:, None, :], t.size, axis=1) + self.offset


class RaisingLearner(_Base):
    def _fit(self, data, physics, budget, seed):
        raise RuntimeError("boom\nsecond line")


class NaNLearner(_Base):
    def _rollout(self, y0, t, history):
        out = super()._rollout(y0, t, history)
        out[:, -1] = np.nan
        return out


class WrongShapeLearner(_Base):
    def _rollout(self, y0, t, history):
        return super()._rollout(y0, t, history)[:, :-1]


class DivergingLearner(_Base):
    def _rollout(self, y0, t, history):
        raise DivergedError("blew up")


class SlowLearner(_Base):
    def _fit(self, data, physics, budget, seed):
        raise OverBudgetError("no usable model within budget")


class RefusingLearner(_Base):
    def _fit(self, data, physics, budget, seed):
        raise NotApplicableError("cannot handle this system")


class GreedyLearner(_Base):
    capabilities = Capabilities(tasks={"forecast"}, min_samples=10**6)


class HamiltonianOnly(_Base):
    capabilities = Capabilities(tasks={"forecast"}, needs_hamiltonian=True)


class RegularLearner(_Base):
    capabilities = Capabilities(tasks={"forecast"}, needs_regular_sampling=True)
    seen: list = []

    def _rollout(self, y0, t, history):
        RegularLearner.seen.append((np.diff(t), history.shape))
        return super()._rollout(y0, t, history)


class CompilingLearner(_Base):
    """Its first rollout pays a one-off 0.5 s, as a JIT-compiled rollout does."""

    def _rollout(self, y0, t, history):
        if not getattr(self, "compiled_", False):
            time.sleep(0.5)
            self.compiled_ = True
        return super()._rollout(y0, t, history)


class RecordingLearner(_Base):
    """Remembers the budget, seed and data it was given (class-level log)."""

    log: list = []

    def _fit(self, data, physics, budget, seed):
        tr = data.trajectories[0]
        RecordingLearner.log.append({"budget": budget, "seed": seed, "t": tr.t.copy(), "y": tr.y.copy()})

    def _rollout(self, y0, t, history):
        rng = np.random.default_rng(RecordingLearner.log[-1]["seed"])  # seeded: same spec, same numbers
        return np.repeat(y0[:, None, :], t.size, axis=1) + 0.01 * rng.standard_normal((y0.shape[0], t.size, 3))


# ---------------------------------------------------------------- outcomes
@pytest.fixture(scope="module")
def forecast_persistence():
    return run_cell(spec("forecast", "persistence"))


@pytest.fixture(scope="module")
def forecast_exact():
    return run_cell(spec("forecast", f"{HERE}:EquationLearner", physics="full"))


def test_exports():
    assert TASKS == ("reconstruct", "forecast", "climate", "identify")
    assert set(TASK_OPTION_DEFAULTS) == set(TASKS)
    assert TASK_OPTION_DEFAULTS["forecast"]["vpt_threshold"] == 0.4  # Pathak et al. (2018)
    assert {k for d in TASK_OPTION_DEFAULTS.values() for k in d} == set(T.TASK_OPTION_HELP)
    assert set(T.METRIC_NAMES) == set(T.HEADLINE_METRICS) == set(TASKS)


def test_reconstruct_spline(monkeypatch):
    o = run_cell(spec("reconstruct", "spline", fraction=0.5))
    assert o.status == "ok", o.error
    r = rows(o)
    # a cubic spline through samples ~0.02 apart on a smooth orbit is accurate to well below 1 %
    # (interpolation error O(h^4); common practice)
    assert 0 < r["relative_l2"] < 0.01
    assert o.info["time_unit_kind"] == "lyapunov_time"
    assert o.info["n_samples"] == round(0.5 * o.info["n_grid"])
    for key in ("train_seconds", "train_cpu_seconds", "inference_seconds", "inference_seconds_per_lyapunov_time",
                "n_parameters", "peak_memory_mb"):
        assert key in o.cost
    assert o.cost["peak_memory_mb"] > 10
    noisy = run_cell(spec("reconstruct", "spline", fraction=0.5, noise=0.2))
    assert rows(noisy)["relative_l2"] > 5 * r["relative_l2"]  # an interpolant reproduces the noise


def test_forecast_exact_model_is_valid_for_the_whole_horizon(forecast_exact):
    o = forecast_exact
    assert o.status == "ok", o.error
    r, curve = rows(o), rows(o, horizon=True)
    h = o.info["forecast_horizon"]
    assert h == pytest.approx(2.0, abs=0.01)  # the requested 2 Lyapunov times fit inside the reference
    assert not o.info["forecast_horizon_clipped"]
    assert r["valid_prediction_time"] == pytest.approx(h)  # never crosses 0.4: censored at the horizon
    assert o.info["vpt_censored"] == 3
    assert [r[f"valid_prediction_time_start_{k}"] for k in range(3)] == pytest.approx([h] * 3)
    assert r["reference_horizon"] >= h
    assert max(curve.values()) < 1e-4  # DOP853 at 1e-10 vs the reference: tiny normalised error
    assert len([m for m in o.metrics if m.metric == "nrmse"]) == 10


def test_forecast_persistence_fails_fast(forecast_persistence):
    o = forecast_persistence
    assert o.status == "ok", o.error
    r = rows(o)
    curve = [(m.horizon, m.value) for m in o.metrics if m.metric == "nrmse"]
    assert curve[0] == (0.0, 0.0)  # the start state is exact
    # a constant forecast of Lorenz-63 leaves the 0.4 band within a fraction of a Lyapunov time
    assert 0 < r["valid_prediction_time"] < 0.5
    assert curve[-1][1] > 0.4
    assert o.info["vpt_censored"] == 0


def test_forecast_is_clipped_to_the_reference_horizon(monkeypatch):
    import suite.datasets as D

    real = D._reference_solution

    def short(system, t_end, y0, dt_out):
        sol = real(system, t_end, y0, dt_out)
        return dataclasses.replace(sol, extra=dict(sol.extra, reference_horizon=1.0))

    monkeypatch.setattr(D, "_reference_solution", short)
    o = run_cell(spec("forecast", "persistence"))
    assert o.status == "ok", o.error
    tu = o.info["time_unit"]
    # history of 5 steps (0.04) comes first: 1.0 - 0.04 time units remain for the forecast
    assert rows(o)["reference_horizon"] == pytest.approx(0.96 / tu)
    assert o.info["forecast_horizon_clipped"]
    assert max(m.horizon for m in o.metrics if m.metric == "nrmse") <= 0.96 / tu + 1e-9
    assert o.info["segments"] == 4  # 3 Lyapunov times of training data in 1.0-long trusted segments


def test_climate_exact_versus_persistence():
    exact = run_cell(spec("climate", f"{HERE}:EquationLearner", physics="full"))
    const = run_cell(spec("climate", "persistence"))
    assert exact.status == "ok" and const.status == "ok", (exact.error, const.error)
    e, c = rows(exact), rows(const)
    assert e["wasserstein_mean"] < 0.05 < 0.3 < c["wasserstein_mean"]
    assert e["spectrum_distance"] < 0.1 < 1.0 < c["spectrum_distance"]
    assert set(f"wasserstein_{v}" for v in "xyz") <= set(e)
    # the probe of the true flow finds Lorenz-63's exponent 0.9056 (Sprott 2003) to within finite-time scatter
    assert e["lyapunov_exponent_error"] < 0.6
    assert c["surrogate_lyapunov_exponent"] == pytest.approx(0.0, abs=1e-6)  # a constant model: no growth
    assert c["lyapunov_exponent_error"] == pytest.approx(1.0, abs=1e-6)


def test_identify_returns_the_guess_error():
    o = run_cell(spec("identify", f"{HERE}:EquationLearner", physics="full"))
    assert o.status == "ok", o.error
    # the learner returns its initial guess, true x 1.2 (default guess factor): error 0.2, closed form
    assert rows(o)["parameter_error"] == pytest.approx(0.2, rel=1e-12)
    assert rows(o)["parameter_error_sigma"] == pytest.approx(0.2, rel=1e-12)
    o2 = run_cell(spec("identify", f"{HERE}:EquationLearner", physics="full",
                       task_options=dict(SMALL["identify"], unknown="rho,beta", guess_factor=0.5)))
    assert set(rows(o2)) == {"parameter_error", "parameter_error_rho", "parameter_error_beta"}
    assert rows(o2)["parameter_error"] == pytest.approx(0.5, rel=1e-12)  # |0.5 p - p| / p


def test_identify_sindy_full_physics():
    o = run_cell(spec("identify", "sindy", physics="full", fraction=0.5))
    assert o.status == "ok", o.error
    assert rows(o)["parameter_error"] < 0.05  # clean data, 100 samples per time unit: a few per cent at most


@pytest.mark.parametrize("cls, status, text", [
    ("RaisingLearner", "failed", "RuntimeError: boom second line"),
    ("NaNLearner", "diverged", "non-finite"),
    ("WrongShapeLearner", "failed", "shape"),
    ("DivergingLearner", "diverged", "blew up"),
    ("SlowLearner", "timeout", "budget"),
    ("RefusingLearner", "not_applicable", "cannot handle"),
])
def test_statuses(cls, status, text):
    o = run_cell(spec("forecast", f"{HERE}:{cls}", task_options=TINY_FORECAST))
    assert o.status == status
    assert text in o.error
    assert "\n" not in o.error
    assert o.metrics == []
    if status in ("failed", "diverged", "timeout"):
        assert "Traceback" in o.info["traceback"]
    else:
        assert o.error == "cannot handle this system"  # a reason: the message alone


@pytest.mark.parametrize("kw, text", [
    (dict(task="forecast", learner="spline"), "does not do task forecast"),
    (dict(task="reconstruct", learner="spline", physics="full"), "cannot use physics level full"),
    (dict(task="forecast", learner=f"{HERE}:HamiltonianOnly"), "canonical coordinates"),
    (dict(task="identify", learner=f"{HERE}:EquationLearner", physics="none"), "needs the equations"),
])
def test_not_applicable_before_any_data(kw, text):
    o = run_cell(spec(kw.pop("task"), kw.pop("learner"), **kw))
    assert o.status == "not_applicable"
    assert text in o.error
    assert "data_seconds" not in o.cost  # decided from the capabilities alone


def test_too_few_samples_is_not_applicable_before_any_data():
    o = run_cell(spec("forecast", f"{HERE}:GreedyLearner", task_options=TINY_FORECAST, fraction=0.5))
    assert o.status == "not_applicable"
    # 1 Lyapunov time (1/0.9056, Sprott 2003) at sample_dt 0.01: round(110.4) + 1 = 111 grid points, half seen
    assert "fraction 0.5 of 111 samples gives 56 training samples; the learner needs at least 1000000" == o.error
    assert "data_seconds" not in o.cost


def test_a_library_larger_than_the_data_is_not_applicable_not_a_failure():
    # SINDy's default library on Lorenz-63 (degree 2 in 3 variables) has 10 terms; 1 Lyapunov time
    # at fraction 0.05 leaves 6 samples: more unknowns than equations, a design limit, not a fault.
    o = run_cell(spec("forecast", "sindy", task_options=TINY_FORECAST, fraction=0.05))
    assert o.status == "not_applicable"
    assert o.error.startswith("SINDy needs at least 10 samples (one per library term)"), o.error
    assert "traceback" not in o.info


def test_forecast_inference_time_excludes_the_first_rollouts_one_off_cost():
    # as the solver ladder excludes compilation: otherwise a JAX learner's speed-up is understated
    o = run_cell(spec("forecast", f"{HERE}:CompilingLearner", task_options=TINY_FORECAST))
    assert o.status == "ok", o.error
    assert o.cost["inference_seconds"] < 0.25


def test_regular_sampling_for_learners_that_need_it():
    RegularLearner.seen.clear()
    o = run_cell(spec("forecast", f"{HERE}:RegularLearner", fraction=0.25, task_options=TINY_FORECAST))
    assert o.status == "ok", o.error
    assert o.info["sampling"] == "regular" and o.info["stride"] == 4  # round(1/0.25)
    assert o.info["n_samples"] == 28  # ceil(111 / 4) grid points 0, 4, ..., 108
    steps, hist_shape = RegularLearner.seen[0]
    np.testing.assert_allclose(steps, 0.04)  # rollout at the training spacing, 4 x sample_dt
    assert hist_shape == (1, 2, 3)


def test_history_longer_than_the_trusted_reference_is_not_applicable(monkeypatch):
    """At stride 25 (output step 0.25) a 200-sample history spans 49.75 time units of Lorenz-63, past
    the horizon of the 1e-12/1e-10 reference pair (a 1e-12 difference grows like e^(0.906 t), exponent
    from Sprott 2003, and reaches the 1e-2 threshold after about 25 time units): no forecast window,
    a property of the sampling, not a fault of the learner."""
    from suite.datasets import reference_with_horizon

    calls = []

    def counted(*a, **k):
        calls.append(a[2])
        return reference_with_horizon(*a, **k)

    monkeypatch.setattr(T, "reference_with_horizon", counted)
    opts = dict(TINY_FORECAST, train_lyapunov_times=60.0, history_steps=200, n_starts=3)
    o = run_cell(spec("forecast", f"{HERE}:RegularLearner", fraction=0.04, task_options=opts))
    assert o.status == "not_applicable", (o.status, o.error)
    assert "200-sample history spans" in o.error and "fewer than 3 output times" in o.error
    assert len(calls) == 1  # decided at the first of the 3 test starts: no wasted integrations


def test_energy_drift_on_the_pendulum():
    kw = dict(physics="full", task_options=TINY_FORECAST)
    tight = run_cell(CellSpec("pendulum", "forecast", f"{HERE}:EquationLearner", **kw))
    loose = run_cell(CellSpec("pendulum", "forecast", f"{HERE}:EquationLearner", learner_params={"rtol": 1e-4}, **kw))
    assert tight.status == loose.status == "ok", (tight.error, loose.error)
    assert tight.info["time_unit_kind"] == "characteristic_time"  # not chaotic: the period is the unit
    # DOP853 at rtol 1e-10 keeps the energy to ~1e-10 over half a period; at 1e-4 visibly worse (Hairer et al.)
    assert rows(tight)["energy_drift"] < 1e-7
    assert rows(loose)["energy_drift"] > 10 * rows(tight)["energy_drift"]
    assert rows(tight)["conserved_drift_energy"] == rows(tight)["energy_drift"]


def test_bad_spec_is_a_failed_row():
    o = run_cell(spec("forecast", "persistence", task_options={"horizon": 3}))
    assert o.status == "failed" and "unknown option 'horizon'" in o.error
    o = run_cell(spec("forecast", "no_such_learner"))
    assert o.status == "failed" and "no_such_learner" in o.error
    o = run_cell(CellSpec("lorenz63", "dance", "persistence"))
    assert o.status == "failed" and "unknown task" in o.error
    o = run_cell(spec("forecast", "persistence", fraction=1.5))
    assert o.status == "failed" and "fraction" in o.error


def test_budget_seed_and_data_passed_to_the_learner():
    RecordingLearner.log.clear()
    s = spec("forecast", f"{HERE}:RecordingLearner", budget_seconds=10.0, budget_iterations=7, fraction=0.3,
             task_options=dict(TINY_FORECAST, n_starts=2))
    a, b = run_cell(s), run_cell(s)
    other = run_cell(dataclasses.replace(s, learner_params={"offset": 0.0}, budget_seconds=None))
    assert a.status == b.status == other.status == "ok"
    first = RecordingLearner.log[0]
    assert first["budget"].max_seconds == pytest.approx(TRAIN_BUDGET_SHARE * 10.0)
    assert first["budget"].max_iterations == 7
    assert first["seed"] == s.derived_seed()
    # same spec: identical accuracy numbers (the rollout noise is seeded from the spec)
    assert a.metrics == b.metrics
    # different learner parameters: a different learner seed, but exactly the same training data
    assert RecordingLearner.log[2]["seed"] != first["seed"]
    np.testing.assert_array_equal(RecordingLearner.log[2]["y"], first["y"])
    np.testing.assert_array_equal(RecordingLearner.log[2]["t"], first["t"])


def test_same_spec_twice_identical_metrics(forecast_persistence):
    again = run_cell(spec("forecast", "persistence"))
    assert again.metrics == forecast_persistence.metrics


def test_options_validation_and_physics_levels():
    with pytest.raises(ValueError, match="positive integer"):
        T.resolve_task_options("forecast", {"n_starts": 2.5})
    with pytest.raises(ValueError, match="positive number"):
        T.resolve_task_options("forecast", {"vpt_threshold": -1})
    assert T.resolve_task_options("identify", {"unknown": ["rho", "beta"]})["unknown"] == "rho,beta"
    lorenz = get_system("lorenz63")
    p, info = build_physics(lorenz, "partial", "forecast", {})
    assert info["removed_term"] == "z_damping" == p.removed_term  # default: the last term
    y = np.array([1.0, 2.0, 3.0])
    full = lorenz.rhs()(0.0, y, lorenz.params)
    part = p.vector_field(0.0, y, p.params)
    # closed form: only dz changes, by + beta z = 8/3 * 3 = 8
    np.testing.assert_allclose(part - full, [0.0, 0.0, 8.0], rtol=1e-14)
    p, info = build_physics(lorenz, "full", "identify", {"unknown": "rho", "guess_factor": 1.2})
    assert p.unknown == ("rho",) and p.params["rho"] == pytest.approx(33.6)  # 28 x 1.2
    pend = get_system("pendulum")
    p, _ = build_physics(pend, "none", "forecast", {})
    assert p.vector_field is None and p.to_canonical is not None  # coordinates, no equations
    with pytest.raises(ValueError, match="unknown term"):
        build_physics(lorenz, "partial", "forecast", {"removed_term": "nonsense"})
